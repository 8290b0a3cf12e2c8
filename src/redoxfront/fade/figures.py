"""One figure per fade dataset: data, every fitted model, the chosen fit and its residuals.

Time on the x axis in hours, or days when the series runs longer than three days.
The figure takes plain data (the cleaned table and the fitted models), never the step.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Mapping

import numpy as np
import pandas as pd

from redoxfront.columns import (
    CELL_TYPE,
    CI_HIGH_SUFFIX,
    CI_LOW_SUFFIX,
    K_FIRST,
    SIGNAL,
    TIME_H,
    USED,
)
from redoxfront.fade.rate_laws import FadeModel, ModelChoice
from redoxfront.figure_style import ACCENT, INK, plt, save_figure, style_axes

_LABELS = {
    "linear": "linear (zero order)",
    "first_order": "first order",
    "first_order_plateau": "first order + plateau",
    "second_order": "second order",
}


def fade_figure_stem(dataset_id: str) -> str:
    """File name (without suffix) of a dataset's figure: ``fade_<id>`` with characters
    other than letters, digits, '-', '_' and '.' replaced by '_'."""
    return "fade_" + "".join(ch if ch.isalnum() or ch in "-_." else "_" for ch in str(dataset_id))


def plot_fade_fit(
    dataset_id: str,
    table: pd.DataFrame,
    t0_h: float,
    signal_label: str,
    choice: ModelChoice,
    chosen_fit: FadeModel,
    row: Mapping[str, Any],
    path: str | Path,
) -> Path:
    """Save a two-panel figure (data with fits; residuals of the chosen fit) to ``path``.

    ``table``: the cleaned series (time in h, signal, used flag); ``row``: the dataset's
    row of ``rates.csv`` (rate and its 95 % interval, cell type); ``chosen_fit``: the
    fit whose residuals are drawn.
    """
    tab = table
    t_all = tab[TIME_H].to_numpy(float) - t0_h
    span_h = float(np.nanmax(t_all)) if len(t_all) else 1.0
    scale, unit = (24.0, "d") if span_h > 72.0 else (1.0, "h")
    used = tab[USED].to_numpy(bool)
    fig, (ax, axr) = plt.subplots(2, 1, figsize=(6.4, 5.6), sharex=True,
                                  gridspec_kw={"height_ratios": [3, 1]})
    ax.plot(t_all[used] / scale, tab[SIGNAL].to_numpy(float)[used], "o", ms=3.5,
            color=INK, label="data used")
    if (~used).any():
        ax.plot(t_all[~used] / scale, tab[SIGNAL].to_numpy(float)[~used], "x", ms=5,
                color=ACCENT, label="set aside")
    grid = np.linspace(0.0, max(span_h, 1e-9), 300)
    for name, fit in choice.fits.items():
        chosen = name == choice.chosen
        ax.plot(grid / scale, fit.predict(grid), lw=2.2 if chosen else 1.0,
                ls="-" if chosen else "--", alpha=1.0 if chosen else 0.6,
                label=f"{_LABELS[name]}{' (chosen)' if chosen else ''}, AICc {fit.aicc_:.1f}")
    ax.set_ylabel(signal_label)
    ax.set_title(f"{dataset_id}: k = {row[K_FIRST]:.3g} 1/h "
                 f"[{row[K_FIRST + CI_LOW_SUFFIX]:.3g}, {row[K_FIRST + CI_HIGH_SUFFIX]:.3g}], "
                 f"{row[CELL_TYPE]}", fontsize=9)
    ax.legend(fontsize=7, loc="best")
    fit = chosen_fit
    t_used = t_all[used]
    axr.axhline(0.0, color=INK, lw=0.8)
    axr.plot(t_used / scale, fit.residuals_, "o", ms=3, color=INK)
    axr.set_ylabel("residual")
    axr.set_xlabel(f"time / {unit}")
    style_axes(ax)
    style_axes(axr)
    return save_figure(fig, path, dpi=120)
