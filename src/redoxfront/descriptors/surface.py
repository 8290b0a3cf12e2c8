"""Solvent-accessible surface area per atom (Shrake-Rupley).

Units: square Angstrom.

Each atom's sphere of radius (van der Waals radius + probe radius) is covered with
evenly spread test points (golden-section spiral); a point counts as accessible when it
lies outside every other atom's enlarged sphere. Area = 4 pi R^2 x accessible share.
Shrake & Rupley, J. Mol. Biol. 1973, 79, 351; probe 1.4 Angstrom (water) by custom
(Lee & Richards, J. Mol. Biol. 1971, 55, 379).
"""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree


def sphere_points(n_points: int) -> np.ndarray:
    """``n_points`` nearly evenly spread unit vectors (golden-section spiral)."""
    k = np.arange(n_points) + 0.5
    z = 1.0 - 2.0 * k / n_points
    rho = np.sqrt(1.0 - z * z)
    phi = np.pi * (3.0 - np.sqrt(5.0)) * k
    return np.column_stack([rho * np.cos(phi), rho * np.sin(phi), z])


def atom_sasa(
    positions_angstrom: np.ndarray,
    radii_angstrom: np.ndarray,
    *,
    probe_angstrom: float = 1.4,
    n_points: int = 480,
) -> np.ndarray:
    """Solvent-accessible surface area of every atom, square Angstrom (Shrake-Rupley 1973)."""
    x = np.asarray(positions_angstrom, dtype=float)
    big = np.asarray(radii_angstrom, dtype=float) + probe_angstrom
    unit = sphere_points(n_points)
    tree = cKDTree(x)
    pairs = tree.query_ball_point(x, r=2.0 * big.max())
    out = np.empty(len(x))
    for i, nbrs in enumerate(pairs):
        nb = np.array([j for j in nbrs if j != i], dtype=int)
        pts = x[i] + big[i] * unit
        if nb.size:
            nb = nb[np.linalg.norm(x[nb] - x[i], axis=1) < big[i] + big[nb]]
        if nb.size:
            d2 = ((pts[:, None, :] - x[nb][None, :, :]) ** 2).sum(axis=2)
            free = ~(d2 < big[nb][None, :] ** 2).any(axis=1)
            share = free.mean()
        else:
            share = 1.0
        out[i] = 4.0 * np.pi * big[i] ** 2 * share
    return out
