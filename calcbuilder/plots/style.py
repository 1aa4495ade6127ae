"""One place for the look of every calcbuilder figure, and the helpers they share.

The palette, line styles, markers and hatches are our own. They are chosen so
that every figure stays readable when printed in grayscale: each curve has its
own dash pattern and marker as well as its own colour, and filled areas that
mean different things differ in lightness and hatching, never in hue alone.

Text is set in DejaVu Sans, which ships inside matplotlib, so figures look the
same on a clinic workstation with no extra fonts. :data:`SCREEN` sizes suit the
clinic form and the authoring workspace; :data:`PRINT` sizes suit the risk
sheet and the evidence report.

Figures are plain :class:`matplotlib.figure.Figure` objects (no pyplot, no
global state), so the same figure can go into a Qt canvas, a PNG or a PDF.
"""

from __future__ import annotations

import io
import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.layout_engine import ConstrainedLayoutEngine
from matplotlib.ticker import FuncFormatter
from matplotlib.transforms import ScaledTranslation
from numpy.typing import ArrayLike, NDArray

from ..errors import CalcbuilderError

__all__ = [
    "EVENTS",
    "FONT_FAMILY",
    "IDEAL",
    "MODEL",
    "NONEVENTS",
    "PATIENT",
    "PRINT",
    "REFERENCE",
    "SCREEN",
    "SYNTHETIC_STAMP",
    "THRESHOLD",
    "TREAT_ALL",
    "TREAT_NONE",
    "AreaLook",
    "FigureStyle",
    "LineLook",
    "Medium",
    "PlotInputError",
    "figure_png_bytes",
    "get_style",
]

Medium = Literal["screen", "print"]
FloatArray = NDArray[np.float64]

FONT_FAMILY = "DejaVu Sans"
SYNTHETIC_STAMP = "Synthetic data – not for clinical use"
INK = "#1a1a1a"  # text, axes and tick marks
GRID = "#e3e3e3"  # light grid lines


class PlotInputError(CalcbuilderError, ValueError):
    """Numbers given to a figure builder cannot be drawn truthfully."""


@dataclass(frozen=True)
class FigureStyle:
    """Font sizes (points) and line widths for one output medium."""

    medium: str
    label: float  # axis labels, legend entries
    tick: float  # tick labels
    small: float  # notes, direct labels, the synthetic stamp
    title: float  # optional figure title
    line: float  # main curves
    thin: float  # reference lines, edges
    marker: float  # marker size of single points
    dpi: float  # figure dpi (what a Qt canvas shows; savefig can override)


SCREEN = FigureStyle("screen", 10.0, 9.0, 8.5, 11.5, 2.2, 1.1, 8.0, 100.0)
PRINT = FigureStyle("print", 8.0, 7.0, 6.5, 9.0, 1.5, 0.8, 5.5, 200.0)


@dataclass(frozen=True)
class LineLook:
    """How one kind of curve is drawn: colour, dash pattern and marker."""

    color: str
    linestyle: str
    marker: str

    def kw(self, style: FigureStyle, *, width: float | None = None) -> dict[str, Any]:
        """Keyword arguments for ``Axes.plot`` with sparse markers along the curve."""
        return {
            "color": self.color,
            "linestyle": self.linestyle,
            "linewidth": style.line if width is None else width,
            "marker": self.marker if self.marker else None,
            "markevery": 0.12,
            "markersize": style.marker * 0.75,
            "markerfacecolor": "white",
            "markeredgecolor": self.color,
            "markeredgewidth": style.thin,
        }


@dataclass(frozen=True)
class AreaLook:
    """How one kind of filled area is drawn: fill, edge and hatch."""

    face: str
    edge: str
    hatch: str


# Curves: each kind has its own named dash style (so ``Line2D.get_linestyle()`` tells
# them apart), its own marker and a colour of its own lightness.
MODEL = LineLook("#1d4e89", "-", "o")  # deep blue, solid, open circles
REFERENCE = LineLook("#b35c14", "--", "s")  # burnt orange, dashes, open squares
TREAT_ALL = LineLook("#8c8c8c", "-.", "^")  # light grey, dash-dot, open triangles
TREAT_NONE = LineLook("#111111", ":", "")  # near black, dots
IDEAL = LineLook("#8a8a8a", ":", "")  # light grey, dots (never with treat none)
THRESHOLD = LineLook("#111111", "--", "")  # vertical, black dashes, labelled
PATIENT = LineLook("#9c2f22", ":", "D")  # vertical, dark red dots ending in a diamond

# Areas: dark and densely hatched for "with the outcome", light and dotted for "without".
EVENTS = AreaLook("#1d4e89", "#0d2747", "////")
NONEVENTS = AreaLook("#dcdcdc", "#6b6b6b", "....")
RAISES = AreaLook("#7a2e24", "#3d1712", "///")
LOWERS = AreaLook("#cfe0ef", "#4f6f8f", "..")
BAND = "#1d4e89"  # confidence bands, drawn with alpha
BAND_ALPHA = 0.26
RANGE_FILL = "#f6f3ea"  # the authors' reasonable threshold range (lighter than any band)
RANGE_EDGE = "#b9ad86"  # thin solid lines at its two ends
AFFECTED = AreaLook("#1d3557", "#0b1626", "")
UNAFFECTED = AreaLook("#ffffff", "#8a8a8a", "")


def get_style(medium: Medium | FigureStyle) -> FigureStyle:
    """The :class:`FigureStyle` for ``"screen"`` or ``"print"`` (or a style itself)."""
    if isinstance(medium, FigureStyle):
        return medium
    if medium == "screen":
        return SCREEN
    if medium == "print":
        return PRINT
    raise PlotInputError(f"medium must be 'screen' or 'print'; got {medium!r}")


def font(style: FigureStyle, which: str = "label") -> dict[str, Any]:
    """``fontfamily``/``fontsize`` keywords for text of kind ``which``."""
    return {"fontfamily": FONT_FAMILY, "fontsize": getattr(style, which), "color": INK}


def legend_font(style: FigureStyle) -> dict[str, Any]:
    """``prop`` for ``Axes.legend``."""
    return {"family": FONT_FAMILY, "size": style.small + 0.5}


def pick_size(size: tuple[float, float] | None, defaults: dict[str, tuple[float, float]],
              style: FigureStyle) -> tuple[float, float]:
    """``size`` if given, else the builder's default for the style's medium."""
    return size if size is not None else defaults[style.medium]


def new_figure(size: tuple[float, float], style: FigureStyle) -> Figure:
    """A white figure of ``size`` inches with constrained layout."""
    width, height = size
    if not (math.isfinite(width) and math.isfinite(height) and width > 0 and height > 0):
        raise PlotInputError(f"size must be two positive numbers of inches; got {size!r}")
    return Figure(figsize=(width, height), dpi=style.dpi, facecolor="white", layout="constrained")


def style_axes(ax: Axes, style: FigureStyle, *, grid: bool = True) -> None:
    """Our tick fonts, spines and a light grid behind the data."""
    ax.tick_params(labelsize=style.tick, labelfontfamily=FONT_FAMILY, colors=INK, width=style.thin)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_linewidth(style.thin)
        ax.spines[side].set_color(INK)
    if grid:
        ax.grid(True, color=GRID, linewidth=style.thin * 0.8)
        ax.set_axisbelow(True)


def set_labels(ax: Axes, style: FigureStyle, xlabel: str, ylabel: str) -> None:
    """Axis labels in our font."""
    ax.set_xlabel(xlabel, **font(style))
    ax.set_ylabel(ylabel, **font(style))


def percent_axis(ax: Axes, which: str = "x") -> None:
    """Show proportions (0-1) on ``which`` axis as percentages."""
    axis = ax.xaxis if which == "x" else ax.yaxis
    axis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{round(v * 100, 6):g}"))


def per_hundred_axis(ax: Axes, which: str = "y") -> None:
    """Show values per patient on ``which`` axis as values per 100 patients."""
    axis = ax.xaxis if which == "x" else ax.yaxis
    axis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v * 100:.4g}".replace("-", "−")))


def legend_below(ax: Axes, style: FigureStyle, *, ncols: int) -> None:
    """The axes' legend centred under its x-axis label, outside the plot area.

    Constrained layout makes room for it, so it never hides data or direct labels.
    """
    drop = (style.tick * 1.25 + style.label * 1.3 + 12.0) / 72.0  # ticks + label + pads, in
    anchor = ax.transAxes + ScaledTranslation(0.0, -drop, ax.figure.dpi_scale_trans)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, 0.0), bbox_transform=anchor,
              ncols=ncols, prop=legend_font(style), frameon=False, handlelength=2.6,
              columnspacing=1.4)


def pct(value: float) -> str:
    """A proportion as a short percentage for labels: 0.1 -> '10%', 0.004 -> '0.4%'."""
    p = 100.0 * value
    if p != 0 and abs(p) < 1:
        return f"{p:.1f}%"
    return f"{p:.0f}%" if abs(p - round(p)) < 0.05 else f"{p:.1f}%"


def text_width_pt(text: str, size: float) -> float:
    """Width in points of one line of ``text`` in our font at ``size`` points."""
    from matplotlib.font_manager import FontProperties
    from matplotlib.textpath import TextToPath

    prop = FontProperties(family=FONT_FAMILY, size=size)
    return float(TextToPath().get_text_width_height_descent(text, prop, ismath=False)[0])


def wrap_text(text: str, width_in: float, size: float) -> list[str]:
    """Break ``text`` into lines no wider than ``width_in`` inches at ``size`` points."""
    lines: list[str] = []
    for word in text.split():
        trial = f"{lines[-1]} {word}" if lines else word
        if lines and text_width_pt(trial, size) <= width_in * 72.0:
            lines[-1] = trial
        else:
            lines.append(word)
    return lines or [""]


def finish(fig: Figure, style: FigureStyle, *, notes: Sequence[str] = (),
           synthetic: bool = False, title: str | None = None) -> Figure:
    """Add the optional title, the notes (bottom) and the synthetic stamp (top).

    Space for them is reserved by shrinking the constrained-layout area, so
    they never overlap the axes or their labels.
    """
    width, height = fig.get_size_inches()
    line_h = style.small * 1.3 / 72.0 / height  # one line of small text, figure fraction
    top = 0.0
    bold = 1.12  # bold DejaVu Sans is about this much wider than regular
    share_row = bool(title) and synthetic and (
        text_width_pt(title or "", style.title) * bold
        + text_width_pt(SYNTHETIC_STAMP, style.small) + 24.0 < width * 72.0 * 0.96)
    if synthetic:
        fig.text(0.99, 1.0 - 0.35 * line_h, SYNTHETIC_STAMP, ha="right", va="top",
                 style="italic", gid="synthetic-stamp",
                 bbox={"boxstyle": "round,pad=0.25", "facecolor": "#fff6d6", "edgecolor": INK,
                       "linewidth": style.thin}, **font(style, "small"))
        top += 0.0 if share_row else 1.9 * line_h
    if title:
        title_lines = wrap_text(title, width * 0.96 / bold, style.title)
        fig.text(0.01, 1.0 - top - 0.35 * line_h, "\n".join(title_lines), ha="left", va="top",
                 weight="bold", linespacing=1.1, gid="figure-title", **font(style, "title"))
        top += (style.title / style.small) * (0.3 + 1.15 * len(title_lines)) * line_h
    lines = [ln for note in notes for ln in wrap_text(note, width * 0.96, style.small)]
    bottom = (len(lines) + 0.4) * line_h if lines else 0.0
    if lines:
        fig.text(0.01, 0.25 * line_h, "\n".join(lines), ha="left", va="bottom",
                 linespacing=1.15, gid="figure-notes", **font(style, "small"))
    engine = fig.get_layout_engine()
    if isinstance(engine, ConstrainedLayoutEngine) and (top or bottom):
        engine.set(rect=(0.0, bottom, 1.0, 1.0 - top - bottom))  # left, bottom, width, height
    return fig


def figure_png_bytes(fig: Figure, dpi: float = 200) -> bytes:
    """Render ``fig`` as PNG bytes (for reportlab's ``platypus.Image`` or a file).

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        A figure from one of the builders in :mod:`calcbuilder.plots`.
    dpi : float, default 200
        Resolution; 200 dpi prints crisply at the figure's size in inches.

    Returns
    -------
    bytes
        The PNG file contents, white background.
    """
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, facecolor="white")
    return buf.getvalue()


# --- input checks shared by the builders -------------------------------------------


def as_curve(values: ArrayLike, name: str, *, allow_empty: bool = False) -> FloatArray:
    """A finite 1-D float array; refuses other shapes and non-numbers."""
    try:
        arr = np.asarray(values, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise PlotInputError(f"{name} must be numeric; got {exc}") from None
    if arr.ndim != 1:
        raise PlotInputError(f"{name} must be one-dimensional; got shape {arr.shape}")
    if arr.size == 0 and not allow_empty:
        raise PlotInputError(f"{name} must not be empty; got 0 values")
    bad = ~np.isfinite(arr)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise PlotInputError(f"{name} must be finite; got {arr[i]!r} at position {i}")
    return arr


def as_proportions(values: ArrayLike, name: str) -> FloatArray:
    """A curve whose values are proportions in [0, 1]."""
    arr = as_curve(values, name)
    bad = (arr < 0) | (arr > 1)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise PlotInputError(f"{name} must lie in [0, 1]; got {arr[i]!r} at position {i}")
    return arr


def as_proportion(value: float, name: str) -> float:
    """One proportion in [0, 1]."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise PlotInputError(f"{name} must be a number in [0, 1]; got {value!r}") from None
    if not (0.0 <= v <= 1.0):
        raise PlotInputError(f"{name} must lie in [0, 1]; got {v!r}")
    return v


def same_length(base: FloatArray, base_name: str, /, **others: FloatArray | None) -> None:
    """Refuse any of ``others`` whose length differs from ``base``."""
    for name, arr in others.items():
        if arr is not None and arr.size != base.size:
            raise PlotInputError(
                f"{name} must have one value per {base_name} ({base.size}); got {arr.size}"
            )


def optional_curve(values: ArrayLike | None, name: str) -> FloatArray | None:
    """``None`` for an absent or empty optional curve, else a checked array."""
    if values is None:
        return None
    arr = as_curve(values, name, allow_empty=True)
    return arr if arr.size else None


def nice_upper(value: float, steps: Iterable[float] = (0.05, 0.1, 0.2)) -> float:
    """Round a proportion up to a tidy axis limit (at most 1)."""
    v = max(float(value), 0.0)
    for step, below in zip(steps, (0.3, 0.6, 2.0), strict=True):
        if v <= below:
            return min(1.0, max(step, round(math.ceil(v / step - 1e-9) * step, 10)))
    return 1.0
