"""Electronic descriptors: spin populations, dipole moment, reorganisation energy.

Units: spin populations in electrons (alpha minus beta), dipole in debye, energies in eV.

* Atomic spin populations: Mulliken partition (Mulliken, J. Chem. Phys. 1955, 23, 1833)
  of the alpha and beta density matrices of a spin-polarised GFN2-xTB calculation
  (Bannwarth, Ehlert & Grimme, J. Chem. Theory Comput. 2019, 15, 1652; spin
  polarisation as implemented in tblite, from memory: the spin-polarised GFN2-xTB of
  Neugebauer et al., J. Phys. Chem. A 2023).
* Inner-sphere reorganisation energy by the four-point scheme (Nelsen, Blackstock & Kim,
  J. Am. Chem. Soc. 1987, 109, 677): lambda = [E_B(geom A) - E_B(geom B)]
  + [E_A(geom B) - E_A(geom A)] for the couple A/B, each state at its own optimised
  geometry and vertically at the other's.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from redoxfront.engine.records import StateResult
from redoxfront.units import ANGSTROM_BOHR, E_BOHR_DEBYE, HARTREE_EV


def atomic_spin_populations(
    numbers: np.ndarray,
    positions_angstrom: np.ndarray,
    charge: int,
    uhf: int,
    method: str = "GFN2-xTB",
    solvent: str | None = None,
) -> np.ndarray:
    """Mulliken spin population (alpha - beta) of every atom, electrons; sums to ``uhf``.

    Runs one spin-polarised tblite single point (``spin-polarization`` scaled 1.0) with
    ALPB solvation when ``solvent`` names one (``None`` or ``"none"`` for gas phase).
    Positions are converted to bohr with :data:`redoxfront.units.ANGSTROM_BOHR`.
    Raises EngineError when the engine fails.
    """
    from redoxfront.engine.xtb import TbliteEngine

    engine = TbliteEngine(method=method, solvent=solvent)
    result = engine.compute(numbers, positions_angstrom, int(charge), int(uhf), spin_polarized=True)
    if result.spin_populations is None:  # restricted closed shell: no spin density
        return np.zeros(len(np.asarray(numbers)))
    return result.spin_populations


def dipole_debye(
    dipole_au: np.ndarray,
    charge: int = 0,
    positions_angstrom: np.ndarray | None = None,
    masses: np.ndarray | None = None,
) -> float:
    """Dipole moment magnitude, debye.

    The engine reports the dipole about the coordinate origin; for an ion the value
    depends on the origin, so with ``charge`` != 0 it is moved to the centre of mass
    (mu_com = mu_0 - q R_com), which needs ``positions_angstrom`` and ``masses``.
    """
    mu = np.asarray(dipole_au, dtype=float)
    if charge:
        if positions_angstrom is None or masses is None:
            raise ValueError("an ion's dipole needs positions and masses (centre of mass)")
        m = np.asarray(masses, dtype=float)
        com_bohr = (m @ np.asarray(positions_angstrom, dtype=float)) / m.sum() * ANGSTROM_BOHR
        mu = mu - charge * com_bohr
    return float(np.linalg.norm(mu) * E_BOHR_DEBYE)


@dataclass(frozen=True)
class ReorganisationEnergy:
    """Four-point inner-sphere reorganisation energy of a redox couple A/B, eV."""

    total_ev: float
    a_to_b_ev: float
    """E_B(geom A) - E_B(geom B): relaxation of B after a vertical step from A."""
    b_to_a_ev: float
    """E_A(geom B) - E_A(geom A): relaxation of A after a vertical step from B."""
    source_conformer: int


def reorganisation_energy(a: StateResult, b: StateResult) -> ReorganisationEnergy | None:
    """Four-point reorganisation energy (Nelsen et al. 1987) of states ``a`` and ``b``, eV.

    Uses the lowest-energy conformer of ``a`` and the conformer of ``b`` relaxed from the
    same starting conformer (``source_conformer``), with the vertical energies stored in
    the records. Returns None when no such pair with both vertical energies exists.
    """
    pairs = {c.source_conformer: c for c in b.conformers}
    for ca in sorted(a.conformers, key=lambda c: c.energy_eh):
        cb = pairs.get(ca.source_conformer)
        if cb is None or b.state not in ca.vertical_energies_eh or a.state not in cb.vertical_energies_eh:
            continue
        a_to_b = (ca.vertical_energies_eh[b.state] - cb.energy_eh) * HARTREE_EV
        b_to_a = (cb.vertical_energies_eh[a.state] - ca.energy_eh) * HARTREE_EV
        return ReorganisationEnergy(a_to_b + b_to_a, a_to_b, b_to_a, ca.source_conformer)
    return None
