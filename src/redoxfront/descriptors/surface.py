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
    # ordered pairs (i, j) of atoms whose enlarged spheres overlap, grouped by i
    from scipy.spatial import cKDTree  # loaded when a surface is computed, not at import

    pairs = cKDTree(x).query_pairs(2.0 * big.max(), output_type="ndarray")
    i = np.concatenate([pairs[:, 0], pairs[:, 1]])
    j = np.concatenate([pairs[:, 1], pairs[:, 0]])
    delta = x[i] - x[j]
    d2 = (delta**2).sum(axis=1)
    keep = d2 < (big[i] + big[j]) ** 2
    order = np.argsort(i[keep], kind="stable")
    i, j, delta, d2 = i[keep][order], j[keep][order], delta[keep][order], d2[keep][order]
    # test point p of atom i lies at x_i + R_i u_p; it is inside atom j's sphere when
    # |x_i - x_j|^2 + 2 R_i (x_i - x_j).u_p + R_i^2 < R_j^2: one matrix product for all pairs
    inside = (d2[:, None] + 2.0 * big[i][:, None] * (delta @ unit.T) + big[i][:, None] ** 2
              < big[j][:, None] ** 2)
    buried = np.zeros((n, n_points), dtype=bool)
    if len(i):
        starts = np.flatnonzero(np.r_[True, i[1:] != i[:-1]])
        buried[i[starts]] = np.logical_or.reduceat(inside, starts, axis=0)
    share = 1.0 - buried.mean(axis=1)
    return 4.0 * np.pi * big**2 * share
