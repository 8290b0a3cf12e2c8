"""Figures of the ranking: the trade-off front of the campaign's own objectives and, for
three or more objectives, every pair of them.

Both take the ranked table of :func:`redoxfront.ranking.step.rank_table` and the
objective names, and write one file (SVG or PNG by its suffix) with
:mod:`redoxfront.figure_style`. Half-life axes are logarithmic; 95 % intervals are error
bars. Every point's marker says how far to trust it, in every figure, with a legend:
circle = calibrated or measured potential and a rate inside the model's domain; diamond =
extrapolating (rate model outside its domain, or potential outside the calibration range);
square = uncalibrated potential. Colour (probability on the first front) is never the only
signal.
"""

from __future__ import annotations

from itertools import combinations
from pathlib import Path
from typing import Sequence

import numpy as np
import pandas as pd
from matplotlib.lines import Line2D

from redoxfront import columns as col
from redoxfront.figure_style import (
    ACCENT,
    CAUTION,
    CMAP,
    INK,
    LABEL_SIZE,
    LEGEND_SIZE,
    MARKERS,
    MUTED,
    SERIES,
    TITLE_SIZE,
    log_axis,
    plain_text,
    plt,
    save_figure,
    style_axes,
)
from redoxfront.ranking.objectives import FIGURE_COLUMNS, INTERVAL_COLUMNS, OBJECTIVES
from redoxfront.ranking.pareto import first_front_mask

MAX_ERRORBARS = 300
"""At most this many candidates (highest probability first) get error bars."""
RASTER_ABOVE = 2000
"""A layer of more points than this (the grey candidates off the first front of a large
library) is drawn as one embedded image inside the SVG, with the same marker shapes, instead
of one SVG element per point: the file stays small and quick to write and to open. The first
front, the picks, the knee, the front line, the axes and all text stay vector."""

LABELS = {
    col.CELL_VOLTAGE: "cell voltage (V)",
    col.ENERGY_DENSITY: "energy density (Wh/L)",
    col.HALF_LIFE: "half-life of charged species (h)",
    col.MOLAR_MASS: "molar mass incl. counterions (g/mol), lower is better",
}
KIND_WORDS = {
    "candidate": "calibrated or measured",
    "extrapolating": "extrapolating (outside model domain or calibration range)",
    "uncalibrated": "uncalibrated potential (wide interval)",
}
KIND_EDGE = {"candidate": INK, "extrapolating": ACCENT, "uncalibrated": CAUTION}


def _ranked(table: pd.DataFrame, plotted: Sequence[str]) -> pd.DataFrame:
    """The ranked rows, only the columns a figure reads (a large table is not copied whole)."""
    keep = list(dict.fromkeys(c for c in (*plotted, *FIGURE_COLUMNS) if c in table.columns))
    return table.loc[table[col.PARETO_RANK].notna().to_numpy(), keep]


def trust_kind(table: pd.DataFrame) -> np.ndarray:
    """Per row: 'extrapolating', 'uncalibrated' or 'candidate' (the marker it gets)."""
    n = len(table)
    flags = table[col.EXTRAPOLATING] if col.EXTRAPOLATING in table else None
    if flags is None:
        extrap = np.zeros(n, bool)
    elif flags.dtype == bool:  # the ranked table's own booleans: no text to compare
        extrap = flags.to_numpy()
    else:
        extrap = flags.astype(str).str.lower().isin(("true", "1", "yes")).to_numpy()
    raw = (table[col.POTENTIAL_BASIS].astype(str).eq("uncalibrated").to_numpy()
           if col.POTENTIAL_BASIS in table else np.zeros(n, bool))
    return np.where(extrap, "extrapolating", np.where(raw, "uncalibrated", "candidate"))


def _errors(sub: pd.DataFrame, column: str) -> np.ndarray | None:
    pair = INTERVAL_COLUMNS.get(column)
    if pair is None or not all(c in sub.columns for c in pair):
        return None
    v = sub[column].to_numpy(float)
    lo = np.clip(v - sub[pair[0]].to_numpy(float), 0, None)
    hi = np.clip(sub[pair[1]].to_numpy(float) - v, 0, None)
    return np.vstack([np.nan_to_num(lo), np.nan_to_num(hi)])


def _points(ax: "plt.Axes", sub: pd.DataFrame, xcol: str, ycol: str, *, size: float,
            coloured: bool, zorder: int = 3) -> None:
    """Draw ``sub`` with the marker of its trust kind; filled by probability on the front
    when ``coloured``, else grey; edge colour repeats the kind."""
    kinds = trust_kind(sub)
    raster = len(sub) > RASTER_ABOVE
    for kind in ("candidate", "uncalibrated", "extrapolating"):
        m = kinds == kind
        if not m.any():
            continue
        part = sub[m]
        edge = KIND_EDGE[kind] if (coloured or kind != "candidate") else "none"
        area = size * (1.3 if kind != "candidate" else 1)
        width = 1.1 if kind != "candidate" else 0.5
        x, y = part[xcol].to_numpy(float), part[ycol].to_numpy(float)
        if raster and not coloured:  # one face colour: drawn as markers of one line, in an image layer
            ax.plot(x, y, linestyle="none", marker=MARKERS[kind], markersize=float(np.sqrt(area)),
                    markerfacecolor=MUTED, markeredgecolor=edge, markeredgewidth=width if edge != "none" else 0,
                    zorder=zorder, rasterized=True)
            continue
        face = dict(c=part[col.P_FRONT].to_numpy(float), cmap=CMAP, vmin=0, vmax=1) if coloured else dict(color=MUTED)
        ax.scatter(x, y, s=area, marker=MARKERS[kind], edgecolors=edge, linewidths=width,
                   zorder=zorder, rasterized=raster, **face)


def _legend(ax: "plt.Axes", kinds: set[str], extra: list[Line2D], below: bool = True) -> None:
    """Legend of lines and marker shapes, under the axes (it never hides a point)."""
    handles = list(extra)
    for kind in ("candidate", "uncalibrated", "extrapolating"):
        if kind in kinds:
            handles.append(Line2D([], [], linestyle="none", marker=MARKERS[kind], markerfacecolor="white",
                                  markeredgecolor=KIND_EDGE[kind], markeredgewidth=1.2, markersize=7,
                                  label=KIND_WORDS[kind]))
    ax.legend(handles=handles, fontsize=LEGEND_SIZE, loc="upper left", bbox_to_anchor=(0.0, -0.14),
              ncol=2 if below else 1, frameon=False, borderaxespad=0.0)


def _axis_pair(objectives: Sequence[str]) -> tuple[str, str]:
    """(x objective, y objective) of the front figure: half-life on x when ranked on it."""
    names = list(objectives)
    if len(names) == 1:
        return names[0], names[0]
    if "half_life" in names:
        other = next(n for n in names if n != "half_life")
        return "half_life", other
    return names[1], names[0]


def _front_line(data: pd.DataFrame, xname: str, yname: str) -> pd.DataFrame:
    """Rows on the first front of the two plotted objectives, sorted along x."""
    xcol, xmax = OBJECTIVES[xname]
    ycol, ymax = OBJECTIVES[yname]
    x = data[xcol].to_numpy(float)
    x = np.log10(x) if xname == "half_life" else x
    y = data[ycol].to_numpy(float)
    pts = np.c_[x if xmax else -x, y if ymax else -y]
    return data[first_front_mask(pts)].sort_values(xcol)


def _annotate(ax: "plt.Axes", data: pd.DataFrame, xcol: str, ycol: str) -> None:
    for _, row in data[data[col.PICK_ORDER].notna()].iterrows():
        ax.annotate(str(int(row[col.PICK_ORDER])), (row[xcol], row[ycol]), xytext=(6, 6),
                    textcoords="offset points", fontsize=8, color=INK, fontweight="bold", zorder=5)
    for _, row in data[data[col.KNEE].astype(str).str.lower().eq("true")].iterrows():
        dx, dy, ha, va = _label_offset(ax, row[xcol], row[ycol])
        ax.annotate(f"knee: {plain_text(row[col.ID])}", (row[xcol], row[ycol]), xytext=(dx, dy),
                    textcoords="offset points", fontsize=8, color=INK, zorder=5, ha=ha, va=va,
                    arrowprops=dict(arrowstyle="-", color=INK, linewidth=0.6))


def _label_offset(ax: "plt.Axes", x: float, y: float) -> tuple[int, int, str, str]:
    """Offset (points) and alignment that keep a label beside (x, y) inside the axes:
    to the left of a point in the right half, below a point near the top."""
    ax.autoscale_view()
    fx, fy = ax.transAxes.inverted().transform(ax.transData.transform((x, y)))
    dx, ha = (-14, "right") if fx > 0.5 else (12, "left")
    dy, va = (-18, "top") if fy > 0.85 else (18, "bottom")
    return dx, dy, ha, va


def plot_front(table: pd.DataFrame, objectives: Sequence[str], path: str | Path) -> Path:
    """Front figure of the campaign's objectives (half-life on a log x axis when ranked on
    it; one objective: value against Pareto rank).

    Grey: all ranked candidates; coloured by probability on the first front: its members;
    line: the front of the two plotted objectives; numbers: picks; the knee is labelled.
    """
    xname, yname = _axis_pair(objectives)
    xcol, ycol = OBJECTIVES[xname][0], OBJECTIVES[yname][0]
    single = xname == yname
    if single:
        ycol = col.PARETO_RANK
    data = _ranked(table, (xcol, ycol))
    keep = np.isfinite(pd.to_numeric(data[xcol], errors="coerce")) & np.isfinite(
        pd.to_numeric(data[ycol], errors="coerce"))
    if xname == "half_life":
        keep &= pd.to_numeric(data[xcol], errors="coerce") > 0
    data = data[keep.to_numpy()]
    fig, ax = plt.subplots(figsize=(8.0, 5.0))
    style_axes(ax)
    if xname == "half_life":
        log_axis(ax, "x")
    if len(data):
        first = data[data[col.PARETO_RANK] == 1]
        rest = data[data[col.PARETO_RANK] != 1]
        _points(ax, rest, xcol, ycol, size=16, coloured=False, zorder=2)
        shown = pd.concat([first, data[data[col.PICK_ORDER].notna()]]).drop_duplicates(subset=[col.ID])
        shown = shown.sort_values(col.P_FRONT, ascending=False).head(MAX_ERRORBARS)
        ax.errorbar(shown[xcol], shown[ycol], xerr=_errors(shown, xcol), yerr=None if single else _errors(shown, ycol),
                    fmt="none", ecolor=INK, elinewidth=0.6, alpha=0.45, capsize=1.5, zorder=2)
        _points(ax, first, xcol, ycol, size=40, coloured=True, zorder=3)
        extra = [Line2D([], [], linestyle="none", marker="o", color=MUTED, markersize=5, label="grey fill: not on the first front")]
        if not single:
            line = _front_line(data, xname, yname)
            ax.step(line[xcol], line[ycol], where="post" if OBJECTIVES[yname][1] != OBJECTIVES[xname][1] else "pre",
                    color=INK, linewidth=1.0, zorder=2)
            extra.insert(0, Line2D([], [], color=INK, linewidth=1.0, label="first front"))
        else:
            ax.invert_yaxis()
        _annotate(ax, data, xcol, ycol)
        extra.append(Line2D([], [], linestyle="none", marker="$1$", color=INK, markersize=7, label="pick (order)"))
        _legend(ax, set(trust_kind(data)), extra)
        sm = plt.cm.ScalarMappable(cmap=CMAP, norm=plt.Normalize(0, 1))
        cb = fig.colorbar(sm, ax=ax, pad=0.02, fraction=0.04)
        cb.set_label("probability on first front (fill)", fontsize=LABEL_SIZE, color=INK)
        cb.ax.tick_params(labelsize=7)
    else:
        ax.text(0.5, 0.5, "no ranked candidates", transform=ax.transAxes, ha="center", color=INK)
    ax.set_xlabel(LABELS.get(xcol, xcol), fontsize=LABEL_SIZE, color=INK)
    ax.set_ylabel("Pareto rank (front number)" if single else LABELS.get(ycol, ycol), fontsize=LABEL_SIZE, color=INK)
    ax.set_title("Trade-off front", fontsize=TITLE_SIZE + 1, color=INK, loc="left")
    return save_figure(fig, path, crop=True)


def plot_pairwise(table: pd.DataFrame, objectives: Sequence[str], path: str | Path) -> Path:
    """One panel per pair of objectives, filled by probability on the front, first-front
    points drawn large; marker shapes as in :func:`plot_front`, legend below."""
    cols_ = [OBJECTIVES[o][0] for o in objectives]
    pairs = list(combinations(range(len(cols_)), 2)) or [(0, 0)]
    fig, axes = plt.subplots(1, len(pairs), figsize=(3.9 * len(pairs) + 0.8, 4.2), squeeze=False)
    data = _ranked(table, cols_).sort_values(col.P_FRONT)
    for ax, (a, b) in zip(axes[0], pairs):
        style_axes(ax)
        xcol, ycol = cols_[a], cols_[b]
        if len(data):
            first = data[data[col.PARETO_RANK] == 1]
            _points(ax, data[data[col.PARETO_RANK] != 1], xcol, ycol, size=12, coloured=False, zorder=2)
            _points(ax, first, xcol, ycol, size=30, coloured=True, zorder=3)
        for c_, which in ((xcol, "x"), (ycol, "y")):
            if c_ == col.HALF_LIFE:
                log_axis(ax, which)
        ax.set_xlabel(LABELS.get(xcol, xcol), fontsize=LABEL_SIZE - 1, color=INK)
        ax.set_ylabel(LABELS.get(ycol, ycol), fontsize=LABEL_SIZE - 1, color=INK)
    if len(data):
        _legend(axes[0][0], set(trust_kind(data)),
                [Line2D([], [], linestyle="none", marker="o", color=MUTED, markersize=5, label="not on the first front")],
                below=True)
    sm = plt.cm.ScalarMappable(cmap=CMAP, norm=plt.Normalize(0, 1))
    cb = fig.colorbar(sm, ax=list(axes[0]), pad=0.02, fraction=0.03)
    cb.set_label("probability on first front (fill)", fontsize=LABEL_SIZE - 1, color=INK)
    fig.suptitle("Objectives pairwise (large: first front)", fontsize=TITLE_SIZE, color=INK, x=0.02, ha="left")
    return save_figure(fig, path, crop=True)


MAX_POURBAIX_PANELS = 12
"""At most this many picks get a Pourbaix panel (pick order)."""


def _sites(row: pd.Series) -> list:
    from redoxfront.engine.proton_coupled import OXIDISED, REDUCED, ProtonSite, parse_pka_list

    sites = [ProtonSite(p, REDUCED) for p in parse_pka_list(row.get(col.PKA_REDUCED), "pKa")]
    return sites + [ProtonSite(p, OXIDISED) for p in parse_pka_list(row.get(col.PKA_OXIDISED), "pKa")]


def pourbaix_lines(row: pd.Series, ref: str, ph: float, temperature_k: float, grid: np.ndarray) -> np.ndarray:
    """E(pH) of a candidate's couple on ``grid``, V vs ``ref``: its used potential at the campaign
    pH moved along its own Nernst lines (pKa columns; none = pH-independent)."""
    from redoxfront.engine.proton_coupled import ProtonCoupledCouple

    n = int(float(row.get(col.N_ELECTRONS) or 1))
    couple = ProtonCoupledCouple(0.0, max(n, 1), tuple(_sites(row)), temperature_k)
    e_used = float(row[col.potential_used(ref)])
    return e_used + couple.shift_v(grid) - couple.shift_v(ph)


def plot_pourbaix(picks: pd.DataFrame, ref: str, ref_label: str, ph: float, allowance_v: float,
                  water_lines_at_ph0: tuple[float, float], path: str | Path,
                  temperature_k: float = 298.15) -> Path:
    """One Pourbaix panel (E vs pH 0-14) per pick: the couple's lines through its used potential
    at the campaign pH, the pKa breakpoints, the water lines (hydrogen and oxygen evolution,
    1.229 V apart, -59 mV/pH) with the overpotential allowance shaded, the campaign pH marked."""
    from redoxfront.units import nernst_slope_v_per_ph

    rows = picks.head(MAX_POURBAIX_PANELS)
    n = max(len(rows), 1)
    ncols = min(3, n)
    nrows = int(np.ceil(n / ncols))
    fig, axes = plt.subplots(nrows, ncols, figsize=(3.3 * ncols, 2.8 * nrows), squeeze=False, sharey=True)
    grid = np.linspace(0.0, 14.0, 281)
    slope = nernst_slope_v_per_ph(temperature_k)
    her = water_lines_at_ph0[0] - slope * grid
    oer = water_lines_at_ph0[1] - slope * grid
    for ax in axes.flat[len(rows):]:
        ax.set_visible(False)
    for ax, (_, row) in zip(axes.flat, rows.iterrows()):
        style_axes(ax)
        ax.fill_between(grid, her - allowance_v, her, color=MUTED, alpha=0.35, linewidth=0)
        ax.fill_between(grid, oer, oer + allowance_v, color=MUTED, alpha=0.35, linewidth=0)
        ax.plot(grid, her, color=INK, linestyle="--", linewidth=0.9, label="H2 evolution")
        ax.plot(grid, oer, color=INK, linestyle=":", linewidth=0.9, label="O2 evolution")
        if np.isfinite(pd.to_numeric(row.get(col.potential_used(ref)), errors="coerce")):
            e = pourbaix_lines(row, ref, ph, temperature_k, grid)
            ax.plot(grid, e, color=SERIES[0], linewidth=1.6, label="couple")
            for j, p in enumerate(sorted(s.pka for s in _sites(row))):
                if 0 < p < 14:
                    ax.axvline(p, color=SERIES[1], linewidth=0.7, alpha=0.8, label="pKa" if j == 0 else None)
        ax.axvline(ph, color=ACCENT, linewidth=1.0, label=f"campaign pH {ph:g}")
        ax.set_title(str(row[col.ID]), fontsize=LABEL_SIZE, color=INK)
        ax.set_xlim(0, 14)
        ax.set_xticks(range(0, 15, 2))
        ax.set_xlabel("pH", fontsize=LABEL_SIZE)
    for ax in axes[:, 0]:
        ax.set_ylabel(f"E (V vs {ref_label})", fontsize=LABEL_SIZE)
    handles, labels = axes.flat[0].get_legend_handles_labels()
    fig.legend(handles, labels, fontsize=LEGEND_SIZE, frameon=False, loc="lower center",
               ncol=len(labels), bbox_to_anchor=(0.5, -0.06 - 0.1 / nrows))
    return save_figure(fig, path, crop=True)
