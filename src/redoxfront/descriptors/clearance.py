"""Ring-plane clearance: how far a substituent reaches out of the plane of its ring.

Units: Angstrom.

Ring-plane clearance is our own name for a simple descriptor: fit a plane to the atoms
of the ring that carries the substituent (least squares, through the centroid, normal
from the singular-value decomposition; Schomaker, Waser, Marsh & Bergman, Acta Cryst.
1959, 12, 600), then take, over the substituent's atoms, the largest distance from the
plane with the atom's van der Waals radius added. The signed extents on either side are
reported too: the normal is oriented towards the side the substituent reaches furthest,
so ``above`` equals the clearance and ``below`` is the signed extent on the other side
(negative when the substituent crosses to that side, positive when it stays clear of it).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from rdkit import Chem

from redoxfront.errors import InputError


@dataclass(frozen=True)
class ClearanceResult:
    """Ring-plane clearance of one substituent in one geometry, Angstrom."""

    clearance_angstrom: float
    above_angstrom: float
    below_angstrom: float


def ring_of_attachment(mol: Chem.Mol, attachment: int, first: int) -> tuple[int, ...]:
    """Atoms of the smallest ring that holds ``attachment`` but not ``first``.

    Raises InputError when the attachment atom is in no such ring.
    """
    rings = [
        r for r in mol.GetRingInfo().AtomRings() if attachment in r and first not in r
    ]
    if not rings:
        raise InputError(
            f"atom {attachment + 1} of the site bond is not in a ring; ring-plane clearance "
            "needs a substituent on a ring atom"
        )
    return tuple(min(rings, key=len))


def best_fit_plane(points: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Centroid and unit normal of the least-squares plane through ``points`` (n >= 3)."""
    p = np.asarray(points, dtype=float)
    c = p.mean(axis=0)
    _, _, vt = np.linalg.svd(p - c)
    return c, vt[-1]


def ring_plane_clearance(
    positions_angstrom: np.ndarray,
    radii_angstrom: np.ndarray,
    ring: tuple[int, ...] | np.ndarray,
    substituent: np.ndarray,
) -> ClearanceResult:
    """Largest radius-inclusive distance of ``substituent`` atoms from the ``ring`` plane, Angstrom."""
    x = np.asarray(positions_angstrom, dtype=float)
    r = np.asarray(radii_angstrom, dtype=float)
    sub = np.asarray(substituent, dtype=int)
    c, n = best_fit_plane(x[list(ring)])
    s = (x[sub] - c) @ n
    up = float((s + r[sub]).max())
    down = float((-s + r[sub]).max())
    if down > up:
        up, down = down, up
    return ClearanceResult(clearance_angstrom=up, above_angstrom=up, below_angstrom=-down)
