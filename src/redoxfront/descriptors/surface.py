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
    n = len(x)
    unit = sphere_points(n_points)
    pts = (x[:, None, :] + big[:, None, None] * unit[None, :, :]).reshape(-1, 3)
    owner = np.repeat(np.arange(n), n_points)
    # every (test point, atom) pair closer than the largest enlarged radius, at once
    pairs = cKDTree(pts).sparse_distance_matrix(cKDTree(x), big.max(), output_type="coo_matrix")
    hit = (pairs.data < big[pairs.col]) & (pairs.col != owner[pairs.row])
    buried = np.zeros(len(pts), dtype=bool)
    buried[pairs.row[hit]] = True
    share = 1.0 - buried.reshape(n, n_points).mean(axis=1)
    return 4.0 * np.pi * big**2 * share
