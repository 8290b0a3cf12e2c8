"""One figure per fade dataset: data, every fitted model, the chosen fit and its residuals.

Matplotlib with the Agg backend (no display needed). Time on the x axis in hours,
or days when the series runs longer than three days.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from redoxfront.columns import (  # noqa: E402
    CELL_TYPE, CI_HIGH_SUFFIX, CI_LOW_SUFFIX, K_FIRST, SIGNAL, TIME_H, USED,
)

if TYPE_CHECKING:
    from redoxfront.fade_step import DatasetResult

_LABELS = {
    "linear": "linear (zero order)",
    "first_order": "first order",
    "first_order_plateau": "first order + plateau",
    "second_order": "second order",
}


def plot_fade_fit(result: "DatasetResult", path: str | Path) -> Path:
    """Save a two-panel figure (data with fits; residuals of the chosen fit) to ``path``."""
    out = Path(path)
    out.parent.mkdir(parents=True, exist_ok=True)
    tab = result.series.table
    t_all = tab[TIME_H].to_numpy(float) - result.t0_h
    span_h = float(np.nanmax(t_all)) if len(t_all) else 1.0
    scale, unit = (24.0, "d") if span_h > 72.0 else (1.0, "h")
    used = tab[USED].to_numpy(bool)
    fig, (ax, axr) = plt.subplots(2, 1, figsize=(6.4, 5.6), sharex=True,
                                  gridspec_kw={"height_ratios": [3, 1]})
    ax.plot(t_all[used] / scale, tab[SIGNAL].to_numpy(float)[used], "o", ms=3.5,
            color="0.25", label="data used")
    if (~used).any():
        ax.plot(t_all[~used] / scale, tab[SIGNAL].to_numpy(float)[~used], "x", ms=5,
                color="tab:red", label="set aside")
    grid = np.linspace(0.0, max(span_h, 1e-9), 300)
    for name, fit in result.choice.fits.items():
        chosen = name == result.choice.chosen
        ax.plot(grid / scale, fit.predict(grid), lw=2.2 if chosen else 1.0,
                ls="-" if chosen else "--", alpha=1.0 if chosen else 0.6,
                label=f"{_LABELS[name]}{' (chosen)' if chosen else ''}, AICc {fit.aicc_:.1f}")
    row = result.row
    ax.set_ylabel(result.series.signal_label)
    ax.set_title(f"{result.dataset_id}: k = {row[K_FIRST]:.3g} 1/h "
                 f"[{row[K_FIRST + CI_LOW_SUFFIX]:.3g}, {row[K_FIRST + CI_HIGH_SUFFIX]:.3g}], "
                 f"{row[CELL_TYPE]}", fontsize=9)
    ax.legend(fontsize=7, loc="best")
    fit = result.chosen_fit
    t_used = t_all[used]
    axr.axhline(0.0, color="0.5", lw=0.8)
    axr.plot(t_used / scale, fit.residuals_, "o", ms=3, color="0.25")
    axr.set_ylabel("residual")
    axr.set_xlabel(f"time / {unit}")
    fig.tight_layout()
    fig.savefig(out, dpi=120)
    plt.close(fig)
    return out
