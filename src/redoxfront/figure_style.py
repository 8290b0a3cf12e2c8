"""One look for every figure of the project: backend, palette, markers, axes style, saving.

Matplotlib with the Agg backend (no display needed). The categorical colours are the
Okabe & Ito colour-blind-safe set (Okabe & Ito, "Color Universal Design", 2008);
continuous values use viridis, which is perceptually uniform and readable in grey.
Figure modules import ``plt`` from here so that the backend is set before pyplot loads.

Figures are written as SVG with text kept as text (crisp at any zoom, searchable, and
escaped by matplotlib's SVG writer); :func:`svg_for_html` turns such a file into markup
that sits inline in the self-contained report (no XML prolog, no namespace URLs).
Colour is never the only signal: candidates that need care have their own marker shape
(:data:`MARKERS`) and every figure that shows them says so in its legend.
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import TYPE_CHECKING

import matplotlib

from redoxfront.outputs import replacing

if TYPE_CHECKING:
    from matplotlib.transforms import Bbox

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

INK = "#1f2933"
"""Text, axes and reference lines."""
MUTED = "#b8c2cc"
"""Background points (every candidate)."""
GRID = "#e4e7eb"
ACCENT = "#d55e00"
"""Points that need the reader's attention (extrapolating, picks): Okabe-Ito vermilion."""
CAUTION = "#cc79a7"
"""Second attention colour (uncalibrated potentials): Okabe-Ito reddish purple."""
SERIES = ("#0072b2", "#e69f00", "#009e73", "#cc79a7", "#56b4e9", "#d55e00", "#f0e442")
"""Okabe-Ito colours, in the order series are drawn."""
CMAP = "viridis"
LABEL_SIZE = 9
TICK_SIZE = 8
LEGEND_SIZE = 8
TITLE_SIZE = 10
MARKERS: dict[str, str] = {
    "candidate": "o",
    "extrapolating": "D",
    "uncalibrated": "s",
    "test": "^",
}
"""Marker shape by meaning, the same in every figure."""

matplotlib.rcParams.update({
    "svg.fonttype": "none",  # text stays text in the SVG
    "svg.hashsalt": "redoxfront",  # the same figure gives the same file
    "font.family": "sans-serif",
    "font.sans-serif": ["DejaVu Sans", "Arial", "Helvetica", "sans-serif"],
    "font.size": LABEL_SIZE,
    "axes.labelsize": LABEL_SIZE,
    "axes.titlesize": TITLE_SIZE,
    "axes.labelcolor": INK,
    "axes.edgecolor": INK,
    "xtick.labelsize": TICK_SIZE,
    "ytick.labelsize": TICK_SIZE,
    "legend.fontsize": LEGEND_SIZE,
    "legend.frameon": False,
    "text.color": INK,
})

_SVG_METADATA = {"Creator": None, "Date": None, "Format": None, "Type": None}


def style_axes(ax: "plt.Axes") -> None:
    """Open axes (no top and right spines), light grid behind the data, ink-coloured ticks."""
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(INK)
    ax.tick_params(colors=INK, labelsize=TICK_SIZE)
    ax.grid(True, which="major", color=GRID, linewidth=0.6)
    ax.set_axisbelow(True)


_SUPERSCRIPT = str.maketrans("-0123456789", "\u207b\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076\u2077\u2078\u2079")


def plain_power_of_ten(value: float) -> str:
    """Tick text of a log axis: 0.01 to 1000 written out, other powers as 10 with a Unicode
    superscript exponent (10\u2074, 10\u207b\u00b3), which needs no mathtext."""
    if value <= 0 or not math.isfinite(value):
        return ""
    exponent = math.floor(math.log10(value) + 1e-9)
    if -2 <= exponent <= 3:
        return f"{value:g}"
    mantissa = value / 10.0 ** exponent
    head = "" if abs(mantissa - 1.0) < 1e-6 else f"{mantissa:g}\u00d7"
    return f"{head}10{str(exponent).translate(_SUPERSCRIPT)}"


def log_axis(ax: "plt.Axes", which: str) -> None:
    """Put the ``which`` ('x' or 'y') axis of ``ax`` on a log scale with plain tick labels
    (0.1, 1, 10, 100) instead of the default powers of ten: easier to read for half-lives in
    hours, and no mathtext to typeset (about 1 s on a large ranking)."""
    from matplotlib.ticker import FuncFormatter, NullFormatter

    (ax.set_xscale if which == "x" else ax.set_yscale)("log")
    axis = ax.xaxis if which == "x" else ax.yaxis
    axis.set_major_formatter(FuncFormatter(lambda value, _pos: plain_power_of_ten(value)))
    axis.set_minor_formatter(NullFormatter())


def plain_text(text: object) -> str:
    """A user string (an id, a file name) safe to hand to matplotlib as a label: dollar
    signs escaped so they are drawn, not read as mathematics."""
    return str(text).replace("$", r"\$")


def save_figure(fig: "plt.Figure", path: str | Path, *, dpi: int = 130, crop: bool = False) -> Path:
    """Lay out, write ``path`` (format from its suffix: svg or png), close the figure;
    return the path.

    ``crop``: cut the saved image to what is drawn (for figures with a shared colour bar,
    where the automatic layout does not apply) instead of laying the axes out.
    """
    out = Path(path)
    fmt = out.suffix.lstrip(".") or "png"
    if not crop:
        fig.tight_layout()
    extra = {"metadata": _SVG_METADATA} if fmt == "svg" else {}
    box = _drawn_box(fig) if crop else None
    with replacing(out) as tmp:
        fig.savefig(tmp, dpi=dpi, format=fmt, bbox_inches=box, **extra)
    plt.close(fig)
    return out


CROP_PAD_INCHES = 0.1
"""Margin kept around what is drawn when a figure is cropped (matplotlib's own default)."""


def _drawn_box(fig: "plt.Figure") -> "Bbox":
    """What ``fig`` draws, in inches, plus :data:`CROP_PAD_INCHES`: the box that
    ``savefig(bbox_inches="tight")`` finds, asked of the figure's artists directly (a "tight"
    save first draws the whole figure once, image layers of 100,000 markers included, which
    took about 40 % of the time of the ranking figures; the boxes are the same)."""
    return fig.get_tightbbox(fig.canvas.get_renderer()).padded(CROP_PAD_INCHES)


_PROLOG = re.compile(r"<\?xml[^>]*\?>|<!DOCTYPE[^>]*>|<!--.*?-->", re.S)
_METADATA = re.compile(r"<metadata>.*?</metadata>", re.S)
_NAMESPACE = re.compile(r"\s+xmlns(?::\w+)?\s*=\s*(['\"])[^'\"]*\1")
_SCRIPT = re.compile(r"<script\b.*?</script>|\son\w+\s*=\s*(['\"]).*?\1", re.S | re.I)


def svg_for_html(svg: str, *, title: str = "", id_prefix: str = "") -> str:
    """SVG markup ready to sit inline in an HTML page: no XML prolog, comments, metadata
    or namespace declarations (HTML gives inline ``<svg>`` its namespace, and the page
    holds no URL); scripts and event attributes removed; ``role="img"`` and an
    ``aria-label`` added; every id (and reference to it) prefixed with ``id_prefix`` so
    several figures share one page. The size attributes stay; the page scales it with CSS."""
    text = _PROLOG.sub("", svg)
    if id_prefix:
        text = re.sub(r"""\bid=(['"])""", lambda m: f"id={m.group(1)}{id_prefix}", text)
        text = text.replace("url(#", f"url(#{id_prefix}")
        text = re.sub(r"""href=(['"])#""", lambda m: f"href={m.group(1)}#{id_prefix}", text)
    text = _METADATA.sub("", text)
    text = _NAMESPACE.sub("", text)
    text = _SCRIPT.sub("", text)
    start = text.find("<svg")
    if start < 0:
        raise ValueError("not an SVG document")
    text = text[start:].strip()
    label = title.replace("&", "&amp;").replace('"', "&quot;").replace("<", "&lt;").replace(">", "&gt;")
    return text.replace("<svg", f'<svg role="img" aria-label="{label}"', 1)
