"""Plots of the calibration and the rate model (matplotlib via :mod:`redoxfront.figure_style`;
SVG or PNG by the file's suffix).

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
    MARKERS,
    MUTED,
    SERIES,
    plain_text,
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
    candidates_v: np.ndarray | None = None,
    band_low_v: np.ndarray | None = None,
    band_high_v: np.ndarray | None = None,
    calibrated_range_v: tuple[float, float] | None = None,
) -> Path:
    """Measured against computed potential with the fitted calibration line, V.

    ``candidates_v`` with ``band_low_v``/``band_high_v``: every candidate's computed
    potential and the 95 % prediction interval of its calibrated value, drawn as the band
    around the line; candidates whose computed potential lies outside ``calibrated_range_v``
    (the measured compounds' range) are marked as extrapolating diamonds on the line.
    """
    from redoxfront.units import reference_label

    fig, ax = plt.subplots(figsize=(5.6, 4.6))
    x = np.asarray(computed_v, float)
    y = np.asarray(measured_v, float)
    xs_all = [x]
    if candidates_v is not None and band_low_v is not None and band_high_v is not None:
        cx = np.asarray(candidates_v, float)
        lo, hi = np.asarray(band_low_v, float), np.asarray(band_high_v, float)
        ok = np.isfinite(cx) & np.isfinite(lo) & np.isfinite(hi)
        order = np.argsort(cx[ok])
        ax.fill_between(cx[ok][order], lo[ok][order], hi[ok][order], color=SERIES[4], alpha=0.25,
                        linewidth=0, label="95 % prediction band")
        fitted = intercept + slope * cx[ok]
        if calibrated_range_v is not None:
            out = (cx[ok] < calibrated_range_v[0]) | (cx[ok] > calibrated_range_v[1])
        else:
            out = np.zeros(ok.sum(), bool)
        ax.scatter(cx[ok][~out], fitted[~out], s=12, marker=MARKERS["candidate"], color=MUTED, zorder=2,
                   label="candidates (calibrated value)")
        if out.any():
            ax.scatter(cx[ok][out], fitted[out], s=26, marker=MARKERS["extrapolating"], facecolors="white",
                       edgecolors=ACCENT, linewidths=1.1, zorder=3,
                       label="candidates outside the calibration range")
        xs_all.append(cx[ok])
    ax.scatter(x, y, s=26, color=SERIES[0], zorder=4, label="measured compounds")
    allx = np.concatenate(xs_all)
    xs = np.linspace(np.nanmin(allx), np.nanmax(allx), 50)
    ax.plot(xs, intercept + slope * xs, color=INK, linewidth=1.2, zorder=3,
            label=f"fit: {intercept:.3f} V + {slope:.3f} × computed")
    if labels is not None and len(labels) <= 30:
        for xi, yi, t in zip(x, y, labels):
            ax.annotate(plain_text(t), (xi, yi), fontsize=6, xytext=(3, -8), textcoords="offset points", color=INK)
    label = reference_label(reference)
    ax.set_xlabel(f"computed potential (uncalibrated), V vs {label}")
    ax.set_ylabel(f"measured or calibrated potential, V vs {label}")
    ax.legend(fontsize=LEGEND_SIZE - 1, loc="upper left")
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
    ax.hist(np.clip(r2_scrambled, lo, 1), bins=bins, alpha=0.6, color=SERIES[0], label="scrambled R²")
    ax.hist(np.clip(q2s, lo, 1), bins=bins, alpha=0.6, color=SERIES[1], label="scrambled Q² (LOO)")
    ax.axvline(r2, color=SERIES[0], lw=2, label=f"model R² = {r2:.3f}")
    ax.axvline(q2, color=SERIES[1], lw=2, ls="--", label=f"model Q² = {q2:.3f}")
    ax.set_xlabel("R² or Q² of a model fitted to scrambled rates")
    ax.set_ylabel("number of scrambled models")
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
