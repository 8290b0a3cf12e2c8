"""Solvent-accessible surface area per atom (Shrake-Rupley).

Units: square Angstrom.

Each atom's sphere of radius (van der Waals radius + probe radius) is covered with
evenly spread test points (golden-section spiral); a point counts as accessible when it
lies outside every other atom's enlarged sphere. Area = 4 pi R^2 x accessible share.
Shrake & Rupley, J. Mol. Biol. 1973, 79, 351; probe 1.4 Angstrom (water) by custom
(Lee & Richards, J. Mol. Biol. 1971, 55, 379).
"""

from __future__ import annotations

import functools
from typing import Sequence

import numpy as np


@functools.lru_cache(maxsize=8)
def sphere_points(n_points: int) -> np.ndarray:
    """``n_points`` nearly evenly spread unit vectors (golden-section spiral); read-only, cached."""
    k = np.arange(n_points) + 0.5
    z = 1.0 - 2.0 * k / n_points
    rho = np.sqrt(1.0 - z * z)
    phi = np.pi * (3.0 - np.sqrt(5.0)) * k
    out = np.column_stack([rho * np.cos(phi), rho * np.sin(phi), z])
    out.setflags(write=False)
    return out


def atom_sasa(
    positions_angstrom: np.ndarray,
    radii_angstrom: np.ndarray,
    *,
    probe_angstrom: float = 1.4,
    n_points: int = 480,
    atoms: Sequence[int] | np.ndarray | None = None,
) -> np.ndarray:
    """Solvent-accessible surface area of every atom, square Angstrom (Shrake-Rupley 1973).

    ``atoms``: only these atoms' areas (in that order; every atom still occludes them), for a
    caller that needs the area of a site atom and not of the whole molecule.
    """
    x = np.asarray(positions_angstrom, dtype=float)
    big = np.asarray(radii_angstrom, dtype=float) + probe_angstrom
    which = np.arange(len(x)) if atoms is None else np.asarray(atoms, dtype=int).reshape(-1)
    unit = sphere_points(n_points)
    # pairs (i, j), i of ``which``, j any other atom, whose enlarged spheres overlap; grouped by i
    delta_all = x[which][:, None, :] - x[None, :, :]
    d2_all = (delta_all**2).sum(axis=2)
    overlap = d2_all < (big[which][:, None] + big[None, :]) ** 2
    overlap[np.arange(len(which)), which] = False
    row, j = np.nonzero(overlap)
    delta, d2, bi = delta_all[row, j], d2_all[row, j], big[which][row]
    # test point p of atom i lies at x_i + R_i u_p; it is inside atom j's sphere when
    # |x_i - x_j|^2 + 2 R_i (x_i - x_j).u_p + R_i^2 < R_j^2: one matrix product for all pairs
    inside = (d2[:, None] + 2.0 * bi[:, None] * (delta @ unit.T) + bi[:, None] ** 2
              < big[j][:, None] ** 2)
    buried = np.zeros((len(which), n_points), dtype=bool)
    if len(row):
        starts = np.flatnonzero(np.r_[True, row[1:] != row[:-1]])
        buried[row[starts]] = np.logical_or.reduceat(inside, starts, axis=0)
    share = 1.0 - buried.mean(axis=1)
    return 4.0 * np.pi * big[which] ** 2 * share
