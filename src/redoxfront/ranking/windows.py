"""Usable electrochemical stability windows of electrolyte solvents, and the flag for
candidates whose potential (with its interval) lies outside them.

Non-aqueous windows are typical values for the solvent with 0.1 M tetrabutylammonium
hexafluorophosphate at a glassy-carbon or platinum electrode, V vs Fc+/Fc. They depend on the
electrode, the salt, the water content and the current taken as the limit, so they are
approximate; set your own in ``[cell] window_low_v`` / ``window_high_v`` (V vs the campaign
reference). Values from memory of the solvent-window chart of Elgrishi et al., "A Practical
Beginner's Guide to Cyclic Voltammetry", J. Chem. Educ. 2018, 95, 197, rounded to 0.1 V;
check them before relying on them.

Water: the thermodynamic hydrogen- and oxygen-evolution lines of the Pourbaix diagram,
E(H+/H2) = -0.059 pH V and E(O2/H2O) = 1.229 - 0.059 pH V vs SHE at 25 degC (59 mV per pH unit;
Pourbaix, Atlas of Electrochemical Equilibria in Aqueous Solutions, 1974; Bard & Faulkner,
Electrochemical Methods). Kinetic overpotentials widen the usable window on carbon electrodes;
``[cell] water_overpotential_v`` adds the same margin on both sides (default 0: the strict
thermodynamic window).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from redoxfront.units import OXYGEN_EVOLUTION_V_VS_SHE, convert_potential, nernst_slope_v_per_ph

NERNST_SLOPE_V_PER_PH: float = nernst_slope_v_per_ph()
"""RT ln 10 / F at 298.15 K, V per pH unit (CODATA 2018 constants; from units.py)."""

NONAQUEOUS_WINDOWS_V_VS_FC: dict[str, tuple[float, float]] = {
    # engine solvent keyword: (reduction limit, oxidation limit), V vs Fc+/Fc, 0.1 M TBAPF6
    "acetonitrile": (-2.7, 2.5),
    "dmf": (-2.8, 1.4),
    "dmso": (-2.8, 1.2),
    "ch2cl2": (-2.0, 1.7),
    "thf": (-3.2, 1.3),
    "acetone": (-2.4, 1.5),
    "nitromethane": (-1.0, 2.4),
}
"""Typical usable windows of common electrolyte solvents (see the module docstring)."""


@dataclass(frozen=True)
class Window:
    """A usable window, V vs the campaign reference, and where it came from."""

    low_v: float
    high_v: float
    source: str


def solvent_window(solvent: str, reference: str, *, ph: float = 7.0, water_overpotential_v: float = 0.0,
                   low_v: float | None = None, high_v: float | None = None,
                   user_v_vs_fc: float | None = None) -> Window | None:
    """The window of ``solvent`` (engine keyword) in V vs ``reference``; the ``[cell]`` settings
    ``low_v`` / ``high_v`` (already vs ``reference``) override the table. None when neither
    the table nor the settings know the solvent."""
    table: tuple[float, float] | None = None
    source = ""
    if solvent == "water":
        lo_she = -NERNST_SLOPE_V_PER_PH * ph - water_overpotential_v
        hi_she = OXYGEN_EVOLUTION_V_VS_SHE - NERNST_SLOPE_V_PER_PH * ph + water_overpotential_v
        table = (convert_potential(lo_she, "she", reference, user_v_vs_fc),
                 convert_potential(hi_she, "she", reference, user_v_vs_fc))
        source = (f"water at pH {ph:g}: hydrogen and oxygen evolution lines (59 mV per pH unit)"
                  + (f" widened by {water_overpotential_v:g} V overpotential" if water_overpotential_v else ""))
    elif solvent in NONAQUEOUS_WINDOWS_V_VS_FC:
        lo, hi = NONAQUEOUS_WINDOWS_V_VS_FC[solvent]
        table = (convert_potential(lo, "fc", reference, user_v_vs_fc), convert_potential(hi, "fc", reference, user_v_vs_fc))
        source = f"typical window of {solvent} with 0.1 M TBAPF6 (Elgrishi et al., J. Chem. Educ. 2018, 95, 197; from memory)"
    if low_v is None and high_v is None and table is None:
        return None
    lo = low_v if low_v is not None else (table[0] if table else -np.inf)
    hi = high_v if high_v is not None else (table[1] if table else np.inf)
    if low_v is not None or high_v is not None:
        source = "[cell] window_low_v / window_high_v" + (f" (else {source})" if source else "")
    return Window(float(lo), float(hi), source)


def window_flags(e_low: np.ndarray, e_high: np.ndarray, window: Window | None) -> np.ndarray:
    """Per row: '' inside the window, else which limit the potential's 95 % interval crosses.

    'outside' when the whole interval lies beyond a limit, 'may be outside' when only part does.
    """
    lo = np.asarray(e_low, dtype=float)
    hi = np.asarray(e_high, dtype=float)
    out = np.full(lo.shape, "", dtype=object)
    if window is None:
        return out
    above = f"the window: above the oxidation limit {window.high_v:.2f} V ({window.source})"
    below = f"the window: below the reduction limit {window.low_v:.2f} V ({window.source})"
    known = np.isfinite(lo) & np.isfinite(hi)
    crosses_high = known & (hi > window.high_v)
    crosses_low = known & ~crosses_high & (lo < window.low_v)  # a limit crossed above is named first
    out[crosses_high & (lo > window.high_v)] = "outside " + above
    out[crosses_high & ~(lo > window.high_v)] = "may be outside " + above
    out[crosses_low & (hi < window.low_v)] = "outside " + below
    out[crosses_low & ~(hi < window.low_v)] = "may be outside " + below
    return out
    for r in range(lo.size):
        if not (np.isfinite(lo[r]) and np.isfinite(hi[r])):
            continue
        if hi[r] > window.high_v:
            whole = lo[r] > window.high_v
            out[r] = (f"{'outside' if whole else 'may be outside'} the window: above the oxidation limit "
                      f"{window.high_v:.2f} V ({window.source})")
        elif lo[r] < window.low_v:
            whole = hi[r] < window.low_v
            out[r] = (f"{'outside' if whole else 'may be outside'} the window: below the reduction limit "
                      f"{window.low_v:.2f} V ({window.source})")
    return out
