"""Plots of the calibration and the rate model (matplotlib, Agg backend, PNG).

Williams plot: standardised residual against leverage with h* = 3(p+1)/n and
+/-3 residual lines (Tropsha, Mol. Inf. 2010, 29, 476). Each function writes one
file and returns its path.
"""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

import numpy as np

from redoxfront.figure_style import (
    ACCENT,
    INK,
    LEGEND_SIZE,
    SERIES,
    plt,
    save_figure,
    style_axes,
)


def _save(fig: "plt.Figure", path: str | Path) -> Path:
    for ax in fig.axes:
        style_axes(ax)
    return save_figure(fig, path, dpi=130)


def calibration_parity(
    computed_v: np.ndarray,
    measured_v: np.ndarray,
    slope: float,
    intercept: float,
    reference: str,
    path: str | Path,
    labels: Sequence[str] | None = None,
) -> Path:
    """Measured against computed potential with the fitted calibration line, V."""
    fig, ax = plt.subplots(figsize=(4.8, 4.4))
    x = np.asarray(computed_v, float)
    y = np.asarray(measured_v, float)
    ax.scatter(x, y, s=22, color=SERIES[0], label="measured")
    xs = np.linspace(x.min(), x.max(), 50)
    ax.plot(xs, intercept + slope * xs, color=ACCENT, label=f"fit: {intercept:.3f} + {slope:.3f} x")
    if labels is not None and len(labels) <= 30:
        for xi, yi, t in zip(x, y, labels):
            ax.annotate(str(t), (xi, yi), fontsize=6, xytext=(2, 2), textcoords="offset points")
    from redoxfront.units import reference_label

    label = reference_label(reference)
    ax.set_xlabel(f"computed potential (uncalibrated), V vs {label}")
    ax.set_ylabel(f"measured potential, V vs {label}")
    ax.legend(fontsize=LEGEND_SIZE)
    return _save(fig, path)


def williams_plot(
    leverage: np.ndarray,
    standardised_residual: np.ndarray,
    threshold: float,
    path: str | Path,
    test_leverage: np.ndarray | None = None,
    test_residual: np.ndarray | None = None,
) -> Path:
    """Standardised residual against leverage; h* line and +/-3 residual band."""
    fig, ax = plt.subplots(figsize=(5.2, 4.2))
    ax.scatter(leverage, standardised_residual, s=22, color=SERIES[0], label="training")
    if test_leverage is not None and test_residual is not None and len(test_leverage):
        ax.scatter(test_leverage, test_residual, s=26, marker="^", color=SERIES[1], label="test")
    ax.axvline(threshold, color=ACCENT, ls="--", label=f"h* = {threshold:.3f}")
    for v in (-3.0, 3.0):
        ax.axhline(v, color=INK, ls=":")
    ax.set_xlabel("leverage h")
    ax.set_ylabel("standardised residual")
    ax.legend(fontsize=LEGEND_SIZE)
    return _save(fig, path)


def y_randomisation_histogram(
    r2_scrambled: np.ndarray, q2_scrambled: np.ndarray, r2: float, q2: float, path: str | Path
) -> Path:
    """Distribution of scrambled-target R2 and Q2 with the real model's values marked."""
    fig, ax = plt.subplots(figsize=(5.2, 3.8))
    q2s = np.asarray(q2_scrambled, float)
    lo = float(min(np.nanmin(q2s), q2, 0.0))
    bins = np.linspace(lo, 1.0, 40)
    ax.hist(np.clip(r2_scrambled, lo, 1), bins=bins, alpha=0.6, color=SERIES[0], label="scrambled R2")
    ax.hist(np.clip(q2s, lo, 1), bins=bins, alpha=0.6, color=SERIES[1], label="scrambled Q2 (LOO)")
    ax.axvline(r2, color=SERIES[0], lw=2, label=f"model R2 = {r2:.3f}")
    ax.axvline(q2, color=SERIES[1], lw=2, ls="--", label=f"model Q2 = {q2:.3f}")
    ax.set_xlabel("R2 / Q2")
    ax.set_ylabel("permutations")
    ax.legend(fontsize=7)
    return _save(fig, path)


def observed_vs_predicted(
    observed_train: np.ndarray,
    predicted_train: np.ndarray,
    path: str | Path,
    label: str = "log10 k",
    observed_test: np.ndarray | None = None,
    predicted_test: np.ndarray | None = None,
    loo_predicted_train: np.ndarray | None = None,
) -> Path:
    """Observed against predicted target, training (fitted and LOO) and test rows."""
    fig, ax = plt.subplots(figsize=(4.8, 4.4))
    ax.scatter(predicted_train, observed_train, s=22, color=SERIES[0], label="training (fitted)")
    allv = [np.asarray(observed_train, float), np.asarray(predicted_train, float)]
    if loo_predicted_train is not None:
        ax.scatter(loo_predicted_train, observed_train, s=14, facecolors="none",
                   edgecolors=SERIES[2], label="training (LOO)")
        allv.append(np.asarray(loo_predicted_train, float))
    if observed_test is not None and predicted_test is not None and len(observed_test):
        ax.scatter(predicted_test, observed_test, s=26, marker="^", color=SERIES[1], label="test")
        allv += [np.asarray(observed_test, float), np.asarray(predicted_test, float)]
    v = np.concatenate(allv)
    v = v[np.isfinite(v)]
    lo, hi = float(v.min()), float(v.max())
    pad = 0.05 * (hi - lo or 1.0)
    ax.plot([lo - pad, hi + pad], [lo - pad, hi + pad], color=INK, ls="--")
    ax.set_xlabel(f"predicted {label}")
    ax.set_ylabel(f"observed {label}")
    ax.legend(fontsize=LEGEND_SIZE)
    return _save(fig, path)
