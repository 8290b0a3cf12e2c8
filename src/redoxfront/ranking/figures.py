"""Figures of the ranking: the trade-off front and a pairwise view of the objectives.

Both take the ranked table of :func:`redoxfront.ranking.step.rank_table` and write a PNG
(matplotlib, Agg backend). Half-life axes are logarithmic; 95 % intervals are error
bars; candidates whose rate prediction extrapolates (or whose potential lies outside the
calibration range) are drawn as open diamonds instead of filled circles.
"""

from __future__ import annotations

from itertools import combinations
from pathlib import Path
from typing import Sequence

import numpy as np
import pandas as pd

from redoxfront import columns as col
from redoxfront.figure_style import (
    ACCENT,
    CMAP,
    INK,
    MUTED,
    plt,
    save_figure,
    style_axes,
)
from redoxfront.ranking.objectives import OBJECTIVES
from redoxfront.ranking.pareto import first_front_mask

MAX_ERRORBARS = 300
"""At most this many candidates (highest probability first) get error bars."""

LABELS = {
    col.CELL_VOLTAGE: "cell voltage (V)",
    col.ENERGY_DENSITY: "energy density (Wh/L)",
    col.HALF_LIFE: "half-life of charged species (h)",
    col.MOLAR_MASS: "molar mass incl. counterions (g/mol)",
}
INTERVALS = {
    col.CELL_VOLTAGE: (col.CELL_VOLTAGE_LOW, col.CELL_VOLTAGE_HIGH),
    col.ENERGY_DENSITY: (col.ENERGY_DENSITY_LOW, col.ENERGY_DENSITY_HIGH),
    col.HALF_LIFE: (col.HALF_LIFE_LOW, col.HALF_LIFE_HIGH),
}


def _ranked(table: pd.DataFrame) -> pd.DataFrame:
    return table[table[col.PARETO_RANK].notna()].copy()


def _errors(sub: pd.DataFrame, column: str) -> np.ndarray | None:
    pair = INTERVALS.get(column)
    if pair is None or not all(c in sub.columns for c in pair):
        return None
    v = sub[column].to_numpy(float)
    lo = np.clip(v - sub[pair[0]].to_numpy(float), 0, None)
    hi = np.clip(sub[pair[1]].to_numpy(float) - v, 0, None)
    return np.vstack([lo, hi])


def _scatter(ax, sub: pd.DataFrame, xcol: str, ycol: str, colour, **kw) -> None:
    extrap = sub[col.EXTRAPOLATING].to_numpy(bool) if col.EXTRAPOLATING in sub else np.zeros(len(sub), bool)
    x, y = sub[xcol].to_numpy(float), sub[ycol].to_numpy(float)
    c = np.asarray(colour)
    c_in = c[~extrap] if c.ndim and len(c) == len(sub) else c
    ax.scatter(x[~extrap], y[~extrap], c=c_in, marker="o", **kw)
    if extrap.any():
        kw2 = {k: v for k, v in kw.items() if k not in ("edgecolors", "cmap", "vmin", "vmax")}
        ax.scatter(x[extrap], y[extrap], facecolors="none", edgecolors=ACCENT, marker="D", **{**kw2, "s": kw2.get("s", 10) * 1.6})


def _label_offset(ax: plt.Axes, x: float, y: float) -> tuple[int, int, str, str]:
    """Offset (points) and alignment that keep a label beside (x, y) inside the axes:
    to the left of a point in the right half, below a point near the top."""
    ax.autoscale_view()
    fx, fy = ax.transAxes.inverted().transform(ax.transData.transform((x, y)))
    dx, ha = (-14, "right") if fx > 0.5 else (12, "left")
    dy, va = (-18, "top") if fy > 0.85 else (18, "bottom")
    return dx, dy, ha, va


def plot_front(table: pd.DataFrame, objectives: Sequence[str], path: str | Path) -> Path:
    """Front figure: voltage or energy density against half-life (log scale).

    Grey dots: all ranked candidates; coloured: first front, by probability of lying on
    it; open diamonds: extrapolating; error bars: 95 % intervals; line: the front of the
    two plotted objectives; the knee is labelled and picks are numbered.
    """
    ycol = col.ENERGY_DENSITY if "energy_density" in objectives else col.CELL_VOLTAGE
    xcol = col.HALF_LIFE
    data = _ranked(table)
    data = data[np.isfinite(data[xcol].astype(float)) & (data[xcol].astype(float) > 0)
                & np.isfinite(data[ycol].astype(float))]
    fig, ax = plt.subplots(figsize=(7.2, 5.0), dpi=150)
    style_axes(ax)
    ax.set_xscale("log")
    if len(data):
        ax.scatter(data[xcol], data[ycol], s=6, color=MUTED, linewidths=0, rasterized=len(data) > 2000,
                   label="candidates", zorder=1)
        first = data[data[col.PARETO_RANK] == 1]
        shown = pd.concat([first, data[data[col.PICK_ORDER].notna()]]).drop_duplicates(subset=[col.ID])
        shown = shown.sort_values(col.P_FRONT, ascending=False).head(MAX_ERRORBARS)
        ax.errorbar(shown[xcol], shown[ycol], xerr=_errors(shown, xcol), yerr=_errors(shown, ycol),
                    fmt="none", ecolor=INK, elinewidth=0.6, alpha=0.45, capsize=1.5, zorder=2)
        _scatter(ax, first, xcol, ycol, first[col.P_FRONT].to_numpy(float), s=28, cmap=CMAP,
                 vmin=0, vmax=1, edgecolors=INK, linewidths=0.4, zorder=3)
        pts = np.c_[np.log10(data[xcol].to_numpy(float)), data[ycol].to_numpy(float)]
        front = data[first_front_mask(pts)].sort_values(xcol)
        fx = front[xcol].to_numpy(float)
        fy = front[ycol].to_numpy(float)
        name = "front" if len(objectives) == 2 else "front of these two objectives"
        ax.step(fx, fy, where="pre", color=INK, linewidth=1.0, zorder=2, label=name)
        knee = data[data[col.KNEE]]
        for _, row in knee.iterrows():
            dx, dy, ha, va = _label_offset(ax, row[xcol], row[ycol])
            ax.annotate(f"knee: {row[col.ID]}", (row[xcol], row[ycol]), xytext=(dx, dy),
                        textcoords="offset points", fontsize=8, color=INK, ha=ha, va=va,
                        arrowprops=dict(arrowstyle="-", color=INK, linewidth=0.6))
        for _, row in data[data[col.PICK_ORDER].notna()].iterrows():
            ax.annotate(str(int(row[col.PICK_ORDER])), (row[xcol], row[ycol]), xytext=(-8, 5),
                        textcoords="offset points", fontsize=7, color=ACCENT, fontweight="bold")
        sm = plt.cm.ScalarMappable(cmap=CMAP, norm=plt.Normalize(0, 1))
        cb = fig.colorbar(sm, ax=ax, pad=0.02, fraction=0.04)
        cb.set_label("probability on first front", fontsize=8, color=INK)
        cb.ax.tick_params(labelsize=7)
        ax.scatter([], [], facecolors="none", edgecolors=ACCENT, marker="D", label="extrapolating")
        ax.legend(frameon=False, fontsize=8, loc="best")
    else:
        ax.text(0.5, 0.5, "no ranked candidates", transform=ax.transAxes, ha="center", color=INK)
    ax.set_xlabel(LABELS[xcol], fontsize=9, color=INK)
    ax.set_ylabel(LABELS[ycol], fontsize=9, color=INK)
    basis = set(table.get(col.POTENTIAL_BASIS, pd.Series(dtype=str)).dropna().astype(str)) - {""}
    note = " (uncalibrated potentials)" if "uncalibrated" in basis else ""
    ax.set_title("Trade-off front" + note, fontsize=11, color=INK, loc="left")
    return save_figure(fig, path, dpi=150)


def plot_pairwise(table: pd.DataFrame, objectives: Sequence[str], path: str | Path) -> Path:
    """One panel per pair of objectives, points coloured by probability on the front,
    first-front points outlined, extrapolating ones as open diamonds."""
    cols_ = [OBJECTIVES[o][0] for o in objectives]
    pairs = list(combinations(range(len(cols_)), 2)) or [(0, 0)]
    fig, axes = plt.subplots(1, len(pairs), figsize=(3.6 * len(pairs) + 0.8, 3.6), dpi=150, squeeze=False)
    data = _ranked(table)
    order = data.sort_values(col.P_FRONT)
    for ax, (a, b) in zip(axes[0], pairs):
        style_axes(ax)
        xcol, ycol = cols_[a], cols_[b]
        if len(order):
            _scatter(ax, order, xcol, ycol, order[col.P_FRONT].to_numpy(float), s=10, cmap=CMAP,
                     vmin=0, vmax=1, edgecolors="none", linewidths=0, rasterized=len(order) > 2000)
            first = order[order[col.PARETO_RANK] == 1]
            ax.scatter(first[xcol], first[ycol], s=22, facecolors="none", edgecolors=INK, linewidths=0.6)
        for c_, setter in ((xcol, ax.set_xscale), (ycol, ax.set_yscale)):
            if c_ == col.HALF_LIFE:
                setter("log")
        ax.set_xlabel(LABELS.get(xcol, xcol), fontsize=8, color=INK)
        ax.set_ylabel(LABELS.get(ycol, ycol), fontsize=8, color=INK)
    sm = plt.cm.ScalarMappable(cmap=CMAP, norm=plt.Normalize(0, 1))
    cb = fig.colorbar(sm, ax=list(axes[0]), pad=0.02, fraction=0.03)
    cb.set_label("probability on first front", fontsize=8, color=INK)
    fig.suptitle("Objectives pairwise (outlined: first front)", fontsize=10, color=INK, x=0.02, ha="left")
    return save_figure(fig, path, dpi=150, crop=True)
