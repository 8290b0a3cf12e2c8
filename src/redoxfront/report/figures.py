"""Figures the report draws itself from result files: the tier line of the funnel.

Drawn from plain arrays (read by :mod:`redoxfront.report.first_pass` from
``results/fast_tier.csv``), with the project's one look (:mod:`redoxfront.figure_style`).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from redoxfront.figure_style import INK, MUTED, SERIES, plt, save_figure, style_axes


@dataclass(frozen=True)
class TierPanel:
    """One role's data for the tier-line figure; values in the units of the axis labels.

    ``fast``/``estimate``/``low``/``high``: every candidate of the role with a fast-tier value
    (estimate and its 95 % prediction interval NaN where no line was fitted); ``full``: the
    full tier's value (NaN where it was not computed); ``sampled``: in the calibration sample.
    """

    role: str
    fast: np.ndarray
    full: np.ndarray
    estimate: np.ndarray
    low: np.ndarray
    high: np.ndarray
    sampled: np.ndarray


def tier_line_figure(panels: list[TierPanel], x_label: str, y_label: str, path: str | Path) -> Path:
    """Full tier against fast tier, one panel per role: the tier line with its 95 % prediction
    band, the calibration sample (filled), the other full-tier rows (open) and the candidates
    the rule left out at their fast-tier estimate (small grey points on the line)."""
    fig, axes = plt.subplots(1, len(panels), figsize=(4.6 * len(panels), 4.2), squeeze=False)
    for ax, p in zip(axes[0], panels):
        style_axes(ax)
        order = np.argsort(p.fast, kind="stable")
        x = p.fast[order]
        band = np.isfinite(p.estimate[order]) & np.isfinite(x)
        if band.any():
            ax.fill_between(x[band], p.low[order][band], p.high[order][band], color=SERIES[0], alpha=0.15,
                            linewidth=0, label="95 % prediction band")
            ax.plot(x[band], p.estimate[order][band], color=SERIES[0], linewidth=1.2, label="tier line")
        has_full = np.isfinite(p.full)
        left = ~has_full & np.isfinite(p.estimate)
        if left.any():
            ax.scatter(p.fast[left], p.estimate[left], s=9, color=MUTED, zorder=2,
                       label="left out: fast tier estimate")
        s, o = has_full & p.sampled, has_full & ~p.sampled
        if s.any():
            ax.scatter(p.fast[s], p.full[s], s=28, color=SERIES[0], edgecolor=INK, linewidth=0.5, zorder=3,
                       label="full tier: calibration sample")
        if o.any():
            ax.scatter(p.fast[o], p.full[o], s=28, facecolor="white", edgecolor=SERIES[1], linewidth=1.2,
                       zorder=3, label="full tier: selected or went on")
        ax.set_xlabel(x_label)
        ax.set_ylabel(y_label)
        ax.set_title(f"{p.role}s", loc="left")
        ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.16), ncol=2, handletextpad=0.4, columnspacing=1.0)
    return save_figure(fig, path)
