"""One look for every figure of the project: backend, palette, axes style, saving.

Matplotlib with the Agg backend (no display needed). The categorical colours are the
Okabe & Ito colour-blind-safe set (Okabe & Ito, "Color Universal Design", 2008);
continuous values use viridis, which is perceptually uniform and readable in grey.
Figure modules import ``plt`` from here so that the backend is set before pyplot loads.
"""

from __future__ import annotations

from pathlib import Path

import matplotlib

from redoxfront.outputs import replacing

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

INK = "#1f2933"
"""Text, axes and reference lines."""
MUTED = "#b8c2cc"
"""Background points (every candidate)."""
GRID = "#e4e7eb"
ACCENT = "#c2410c"
"""Points that need the reader's attention (extrapolating, picks)."""
SERIES = ("#0072b2", "#e69f00", "#009e73", "#cc79a7", "#56b4e9", "#d55e00", "#f0e442")
"""Okabe-Ito colours, in the order series are drawn."""
CMAP = "viridis"
LABEL_SIZE = 9
TICK_SIZE = 8
LEGEND_SIZE = 8


def style_axes(ax: "plt.Axes") -> None:
    """Open axes (no top and right spines), light grid behind the data, ink-coloured ticks."""
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(INK)
    ax.tick_params(colors=INK, labelsize=TICK_SIZE)
    ax.grid(True, which="major", color=GRID, linewidth=0.6)
    ax.set_axisbelow(True)


def save_figure(fig: "plt.Figure", path: str | Path, *, dpi: int = 130, crop: bool = False) -> Path:
    """Lay out, write ``path`` (format from its suffix), close the figure; return the path.

    ``crop``: cut the saved image to what is drawn (for figures with a shared colour bar,
    where the automatic layout does not apply) instead of laying the axes out.
    """
    out = Path(path)
    if not crop:
        fig.tight_layout()
    with replacing(out) as tmp:
        fig.savefig(tmp, dpi=dpi, format=out.suffix.lstrip(".") or "png",
                    bbox_inches="tight" if crop else None)
    plt.close(fig)
    return out
