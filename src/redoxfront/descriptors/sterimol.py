"""Sterimol L, B1 and B5 of a substituent along a site bond, and the van der Waals radii sets.

Units: Angstrom throughout.

Definition used here (Verloop, Hoogenstraaten & Tipker, in *Drug Design* vol. VII,
Ariens ed., Academic Press 1976, p. 165; Verloop, *The STERIMOL approach to drug
design*, Marcel Dekker 1987):

* The L axis runs from the attachment atom A (the parent-side atom of the site bond)
  through the first substituent atom B.
* **L** is the largest extent of the substituent's van der Waals surface along that
  axis, measured from an origin on the axis, plus a constant correction of 0.40 Angstrom.
  Verloop's program put the substituent on a hydrogen (C-H = 1.10 Angstrom) and measured
  from that hydrogen's nucleus; the 0.40 Angstrom added afterwards is the customary
  correction that brings the H-based bond (1.10) up to a C-C-like attachment (1.50).
  With ``l_origin="verloop"`` (the default) the origin is the point on the axis where
  that hydrogen would sit: the standard B-H bond length from B towards A (C-H 1.10,
  N-H 1.01, O-H 0.96, H-H 0.74 Angstrom, ...), whatever atom A really is, so L does not
  depend on the actual A-B bond length and is comparable with Verloop's tables. With ``l_origin="attachment"`` the origin is the
  nucleus of A (what general-purpose libraries do); on a geometry where A is a hydrogen
  1.10 Angstrom from B both agree.
* **B5** is the largest distance of the substituent's surface from the L axis.
* **B1** is the smallest width: over all directions perpendicular to the axis, the
  smallest value of the largest surface extent in that direction.

Conformer-averaged Sterimol: Brethome, Fletcher & Paton, ACS Catal. 2019, 9, 2313.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from rdkit import Chem

from redoxfront.errors import InputError

X_H_BOND_ANGSTROM: dict[int, float] = {
    1: 0.74, 5: 1.19, 6: 1.10, 7: 1.01, 8: 0.96, 9: 0.92, 14: 1.48, 15: 1.42, 16: 1.34,
    17: 1.27, 35: 1.41, 53: 1.61,
}
"""Standard bond length from an element to hydrogen, Angstrom (from memory: typical
X-H bond lengths of the hydrides; C-H 1.10 as in Verloop's program). Other elements
use 1.10."""
VERLOOP_L_CORRECTION_ANGSTROM: float = 0.40
"""Customary constant added to L (Verloop's program), Angstrom."""

# Bondi, J. Phys. Chem. 1964, 68, 441 (B from Mantina et al., J. Phys. Chem. A 2009,
# 113, 5806, which extends Bondi's set to the main group), Angstrom.
BONDI_RADII_ANGSTROM: dict[int, float] = {
    1: 1.20, 2: 1.40, 3: 1.82, 5: 1.92, 6: 1.70, 7: 1.55, 8: 1.52, 9: 1.47, 10: 1.54,
    11: 2.27, 12: 1.73, 14: 2.10, 15: 1.80, 16: 1.80, 17: 1.75, 18: 1.88, 19: 2.75,
    33: 1.85, 34: 1.90, 35: 1.85, 36: 2.02, 52: 2.06, 53: 1.98, 54: 2.16,
}

# CPK radii by atom type as used in Verloop's program (from memory: H 1.00; sp3 C 1.50;
# sp2/sp C 1.60; aromatic C and N in six-membered rings 1.70; N 1.50; O 1.35; F 1.35;
# Cl 1.80; Br 1.95; I 2.15; S 1.70; P 1.40; B 1.95), Angstrom. Elements without a
# CPK type fall back to Bondi.
_CPK_ELEMENT_ANGSTROM: dict[int, float] = {
    1: 1.00, 5: 1.95, 6: 1.50, 7: 1.50, 8: 1.35, 9: 1.35, 15: 1.40, 16: 1.70,
    17: 1.80, 35: 1.95, 53: 2.15,
}
CPK_SP2_CARBON_ANGSTROM: float = 1.60
CPK_AROMATIC_SIX_RING_ANGSTROM: float = 1.70

RADII_SETS: tuple[str, ...] = ("cpk", "bondi")


def _cpk_radius(atom: Chem.Atom) -> float:
    z = atom.GetAtomicNum()
    if z in (6, 7) and atom.GetIsAromatic() and atom.IsInRingSize(6):
        return CPK_AROMATIC_SIX_RING_ANGSTROM
    if z == 6 and atom.GetHybridization() in (
        Chem.HybridizationType.SP2,
        Chem.HybridizationType.SP,
    ):
        return CPK_SP2_CARBON_ANGSTROM
    if z in _CPK_ELEMENT_ANGSTROM:
        return _CPK_ELEMENT_ANGSTROM[z]
    return BONDI_RADII_ANGSTROM[z]


def vdw_radii(mol: Chem.Mol, radii_set: str = "bondi", scale: float = 1.0) -> np.ndarray:
    """Van der Waals radius of every atom of ``mol``, Angstrom.

    ``radii_set`` is ``"bondi"`` (Bondi 1964) or ``"cpk"`` (Verloop's atom-type CPK radii).
    Raises InputError for an element the set does not cover.
    """
    if radii_set not in RADII_SETS:
        raise InputError(f"unknown radii set '{radii_set}'; allowed: {', '.join(RADII_SETS)}")
    out = np.empty(mol.GetNumAtoms())
    for atom in mol.GetAtoms():
        z = atom.GetAtomicNum()
        if z not in BONDI_RADII_ANGSTROM and z not in _CPK_ELEMENT_ANGSTROM:
            raise InputError(
                f"no van der Waals radius for element {atom.GetSymbol()} (atom {atom.GetIdx() + 1}); "
                "steric descriptors cover H-Xe main-group elements only"
            )
        out[atom.GetIdx()] = _cpk_radius(atom) if radii_set == "cpk" else BONDI_RADII_ANGSTROM[z]
    return out * scale


def substituent_atoms(mol: Chem.Mol, attachment: int, first: int) -> np.ndarray:
    """Indices of the atoms on the ``first`` side of the bond attachment-first (sorted).

    Raises InputError when the two atoms are not bonded or the bond is in a ring
    (a ring bond does not split the molecule into a substituent and a parent).
    """
    bond = mol.GetBondBetweenAtoms(int(attachment), int(first))
    if bond is None:
        raise InputError(f"site atoms {attachment + 1} and {first + 1} are not bonded")
    if bond.IsInRing():
        raise InputError(
            f"site bond {attachment + 1}-{first + 1} is in a ring; pick an acyclic bond "
            "from a ring atom to a substituent"
        )
    seen = {int(first)}
    stack = [int(first)]
    while stack:
        i = stack.pop()
        for nb in mol.GetAtomWithIdx(i).GetNeighbors():
            j = nb.GetIdx()
            if j != attachment and j not in seen:
                seen.add(j)
                stack.append(j)
    return np.array(sorted(seen), dtype=int)


@dataclass(frozen=True)
class SterimolResult:
    """Sterimol parameters of one substituent in one geometry, Angstrom."""

    l_angstrom: float
    b1_angstrom: float
    b5_angstrom: float


def _width(angle: float | np.ndarray, u: np.ndarray, v: np.ndarray, radii: np.ndarray) -> np.ndarray:
    """Largest surface extent of the projected atoms along direction(s) ``angle`` of the plane
    perpendicular to the L axis; ``u``, ``v``: the atoms' coordinates in that plane."""
    ang = np.atleast_1d(angle)
    return (np.outer(u, np.cos(ang)) + np.outer(v, np.sin(ang)) + radii[:, None]).max(axis=0)


B1_REFINE_ROUNDS: int = 4
"""Rounds of the B1 refinement; each narrows the angle bracket 16-fold (to about 3e-7 rad
after four, from 0.5 degree), so B1 is within about 1e-6 Angstrom of the true minimum."""


def _smallest_width(u: np.ndarray, v: np.ndarray, radii: np.ndarray, n_directions: int) -> float:
    """B1: the smallest over directions of the largest surface extent, Angstrom.

    A scan over ``n_directions`` angles, then nested scans of 33 angles around the best one,
    each bracketing the previous best +- one step (all directions of a round in one array
    operation; no scalar minimiser).
    """
    angles = np.linspace(0.0, 2.0 * np.pi, n_directions, endpoint=False)
    widths = _width(angles, u, v, radii)
    k = int(np.argmin(widths))
    best, centre, half = float(widths[k]), float(angles[k]), 2.0 * np.pi / n_directions
    for _ in range(B1_REFINE_ROUNDS):
        a = np.linspace(centre - half, centre + half, 33)
        w = _width(a, u, v, radii)
        j = int(np.argmin(w))
        best, centre, half = min(best, float(w[j])), float(a[j]), half / 16.0
    return best


def sterimol(
    positions_angstrom: np.ndarray,
    radii_angstrom: np.ndarray,
    attachment: int,
    first: int,
    substituent: np.ndarray,
    *,
    l_origin: str = "verloop",
    l_correction_angstrom: float = VERLOOP_L_CORRECTION_ANGSTROM,
    first_element: int = 6,
    n_directions: int = 720,
) -> SterimolResult:
    """Sterimol L, B1, B5 (Angstrom) of the atoms ``substituent`` along attachment -> first.

    ``l_origin`` is ``"verloop"`` (origin one standard B-H bond length before ``first``
    on the axis; needs ``first_element``) or
    ``"attachment"`` (origin at the attachment atom's nucleus); ``l_correction_angstrom``
    is added to L (0.40 by custom). B1 is found by an angular scan refined by nested finer
    scans around its best angle (:func:`_smallest_width`).
    Reference: Verloop et al. 1976 (see module docstring).
    """
    x = np.asarray(positions_angstrom, dtype=float)
    r = np.asarray(radii_angstrom, dtype=float)
    sub = np.asarray(substituent, dtype=int)
    axis = x[first] - x[attachment]
    bond = float(np.linalg.norm(axis))
    if bond < 1e-6:
        raise InputError("site atoms coincide; the geometry is broken")
    axis /= bond
    if l_origin == "verloop":
        origin = x[first] - X_H_BOND_ANGSTROM.get(int(first_element), 1.10) * axis
    elif l_origin == "attachment":
        origin = x[attachment]
    else:
        raise InputError(f"unknown L origin '{l_origin}'; allowed: verloop, attachment")
    rel = x[sub] - origin
    along = rel @ axis
    perp = rel - np.outer(along, axis)
    rs = r[sub]
    l_value = float((along + rs).max()) + l_correction_angstrom
    b5 = float((np.linalg.norm(perp, axis=1) + rs).max())
    # orthonormal basis of the plane perpendicular to the axis
    helper = np.array([1.0, 0.0, 0.0]) if abs(axis[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    e1 = np.cross(axis, helper)
    e1 /= np.linalg.norm(e1)
    e2 = np.cross(axis, e1)
    b1 = _smallest_width(perp @ e1, perp @ e2, rs, n_directions)
    return SterimolResult(l_angstrom=l_value, b1_angstrom=b1, b5_angstrom=b5)
