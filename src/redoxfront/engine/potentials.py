"""Redox potentials from semiempirical state energies.

For a one-electron couple ox + e- -> red in solution,

    E(vs SHE) = -(dG_red + shift) / F - E_abs(SHE),      dG_red = G(red) - G(ox)

with dG_red in eV per molecule (so dividing by F and multiplying by the
elementary charge cancel). ``shift`` is the empirical constant the GFN-xTB
family needs for absolute ionisation potentials and electron affinities:
the xtb program applies 4.8455 eV for GFN2-xTB (its ``ipeashift`` parameter;
Grimme group, xtb documentation; value from memory of the GFN2 parameter file).
Its sign is such that IP_corrected = IP_raw - shift and EA_corrected = EA_raw - shift
for neutral molecules; a linear calibration against measured potentials absorbs
any constant error. E_abs(SHE) = 4.44 V (Trasatti, Pure Appl. Chem. 1986, 58, 955)
by default. Thermal and zero-point corrections are neglected (G ~ E_el + G_solv):
the calibration absorbs their mostly constant contribution.
"""

from __future__ import annotations

from redoxfront.units import (
    ABSOLUTE_SHE_V,
    HARTREE_EV,
    reference_v_vs_she,
)


def reduction_free_energy_ev(e_prev_eh: float, e_next_eh: float, role: str) -> float:
    """dG_red = G(red) - G(ox) of the one-electron step prev -> next, eV.

    ``prev`` is the state nearer the discharged one. A catholyte is oxidised on
    charging (ox = next), an anolyte reduced (red = next).
    """
    d = (e_next_eh - e_prev_eh) * HARTREE_EV
    return d if role == "anolyte" else -d


def potential_v(
    delta_g_red_ev: float,
    *,
    shift_ev: float,
    absolute_she: str = "trasatti",
    reference: str = "fc",
    user_reference_v_vs_fc: float | None = None,
) -> float:
    """Potential of a one-electron couple, V vs ``reference`` (uncalibrated)."""
    e_vs_she = -(delta_g_red_ev + shift_ev) - ABSOLUTE_SHE_V[absolute_she]
    return e_vs_she - reference_v_vs_she(reference, user_reference_v_vs_fc)
