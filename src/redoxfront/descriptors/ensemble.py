"""Conformer-ensemble summaries: Boltzmann-weighted mean, minimum and maximum.

Units: the descriptor's own; energies in Hartree, window in kcal/mol, temperature in K.

Conformers whose engine energy lies within the window above the lowest one are used;
their Boltzmann weights exp(-dE / kT) at 298.15 K give the mean, and the minimum and
maximum are taken over the same conformers (Brethome, Fletcher & Paton, ACS Catal.
2019, 9, 2313, for conformer-dependent Sterimol). Engine energies stand in for free
energies: no vibrational or entropy terms.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from redoxfront.units import (
    BOLTZMANN_EV_PER_K,
    HARTREE_EV,
    HARTREE_KCAL_PER_MOL,
    STANDARD_TEMPERATURE_K,
)


@dataclass(frozen=True)
class EnsembleWeights:
    """Which conformers count and their normalised Boltzmann weights."""

    used: np.ndarray
    """Indices of the conformers within the window (energy order not implied)."""
    weights: np.ndarray
    """Weights of ``used`` conformers, summing to 1."""


def boltzmann_weights(
    energies_eh: np.ndarray,
    *,
    window_kcal_per_mol: float = 3.0,
    temperature_k: float = STANDARD_TEMPERATURE_K,
) -> EnsembleWeights:
    """Conformers within ``window_kcal_per_mol`` of the lowest and their Boltzmann weights."""
    e = np.asarray(energies_eh, dtype=float)
    ok = np.isfinite(e)
    if not ok.any():
        return EnsembleWeights(np.array([], dtype=int), np.array([]))
    rel = e - e[ok].min()
    used = np.flatnonzero(ok & (rel * HARTREE_KCAL_PER_MOL <= window_kcal_per_mol + 1e-12))
    kt_eh = BOLTZMANN_EV_PER_K * temperature_k / HARTREE_EV
    w = np.exp(-rel[used] / kt_eh)
    return EnsembleWeights(used, w / w.sum())


def summarise(values: np.ndarray, ens: EnsembleWeights) -> dict[str, float]:
    """``mean`` (Boltzmann), ``min`` and ``max`` of per-conformer ``values`` over ``ens``.

    Conformers whose value is NaN are left out and the weights renormalised; all NaN
    gives NaN for all three.
    """
    v = np.asarray(values, dtype=float)[ens.used]
    w = ens.weights
    ok = np.isfinite(v)
    if not ok.any():
        nan = float("nan")
        return {"mean": nan, "min": nan, "max": nan}
    return {
        "mean": float(np.sum(v[ok] * w[ok]) / np.sum(w[ok])),
        "min": float(v[ok].min()),
        "max": float(v[ok].max()),
    }
