"""Figures about one patient: icon array, place in the cohort, input contributions.

These go on the clinic form and the risk sheet. Each takes plain numbers and
returns a :class:`matplotlib.figure.Figure`; meaning is carried by lightness,
hatching, direction and direct labels, never by colour alone.
"""

from __future__ import annotations

import math
import textwrap
from collections.abc import Sequence

import numpy as np
from matplotlib.axes import Axes
from matplotlib.collections import PathCollection
from matplotlib.figure import Figure
from matplotlib.patches import Circle, FancyBboxPatch, Patch
from matplotlib.path import Path
from numpy.typing import ArrayLike

from . import style as st
from .style import FigureStyle, FloatArray, Medium, PlotInputError

__all__ = [
    "cohort_percentile",
    "contributions_figure",
    "icon_array_figure",
    "icon_counts",
    "risk_position_figure",
]

_ROW_PITCH = 1.3  # vertical distance between icon rows, in icon widths
_BLOCK_GAP = 0.6  # extra space between blocks of 10 x 10 icons
_POS_SIZE = {"screen": (5.6, 2.8), "print": (3.4, 2.1)}


# --- icon array -----------------------------------------------------------------------


def icon_counts(risk: float) -> tuple[int, int]:
    """How many of how many people to fill in an icon array for ``risk``.

    Rule: round ``risk x 100`` half up. If that gives 0 or 100 while the risk
    lies strictly between 0 and 1 (risks under 0.5% or from 99.5%), use 1000
    people instead and round ``risk x 1000`` half up. So 14.5% gives (15, 100)
    and 0.4% gives (4, 1000).

    Parameters
    ----------
    risk : float
        Predicted risk, a proportion in [0, 1].

    Returns
    -------
    (n_affected, total) : tuple of int

    Examples
    --------
    >>> icon_counts(0.145), icon_counts(0.004), icon_counts(0.0)
    ((15, 100), (4, 1000), (0, 100))
    """
    p = st.as_proportion(risk, "risk")
    n = math.floor(round(p * 100, 9) + 0.5)
    if 0 < n < 100 or p in (0.0, 1.0):
        return n, 100
    return math.floor(round(p * 1000, 9) + 0.5), 1000


def _person() -> Path:
    """One person in a unit cell: a round head over a rounded body (our own drawing)."""
    head = Circle((0.5, 0.93), 0.19)
    body = FancyBboxPatch((0.2, 0.0), 0.6, 0.66, boxstyle="round,pad=0,rounding_size=0.24")
    return Path.make_compound_path(
        head.get_patch_transform().transform_path(head.get_path()), body.get_path())


def _people(origins: list[tuple[float, float]]) -> list[Path]:
    template = _person()
    verts = np.asarray(template.vertices, dtype=np.float64)
    return [Path(verts + np.asarray(origin), template.codes) for origin in origins]


def _icon_origin(i: int, per_row: int) -> tuple[float, float]:
    """Bottom-left corner of icon ``i``: filled block by block of 10 x 10, row by row."""
    block, k = divmod(i, 100)
    block_row, block_col = divmod(block, per_row // 10)
    r, c = divmod(k, 10)
    col, row = block_col * 10 + c, block_row * 10 + r
    return col + block_col * _BLOCK_GAP, -(row * _ROW_PITCH + block_row * _BLOCK_GAP)


def _icon_heading(n: int, total: int) -> str:
    if n == 0:
        return f"Fewer than 1 in {total:,} people like this"
    if n == total:
        return f"More than {total - 1:,} in {total:,} people like this"
    return f"About {n:,} in {total:,} people like this"


def _check_icon_args(n_affected: int, total: int, per_row: int | None) -> int:
    if isinstance(n_affected, bool) or not isinstance(n_affected, int | np.integer):
        raise PlotInputError(f"n_affected must be an integer (see icon_counts); got {n_affected!r}")
    if total <= 0 or total % 100:
        raise PlotInputError(f"total must be a positive multiple of 100; got {total!r}")
    if not 0 <= n_affected <= total:
        raise PlotInputError(f"n_affected must lie in [0, total={total}]; got {n_affected}")
    cols = (10 if total <= 100 else 50) if per_row is None else per_row
    if cols <= 0 or cols % 10:
        raise PlotInputError(f"per_row must be a positive multiple of 10; got {per_row!r}")
    return cols


def icon_array_figure(
    n_affected: int,
    *,
    total: int = 100,
    per_row: int | None = None,
    outcome: str = "the outcome",
    synthetic: bool = False,
    title: str | None = None,
    medium: Medium = "screen",
    size: tuple[float, float] | None = None,
) -> Figure:
    """Icon array: ``n_affected`` of ``total`` people drawn filled, the rest in outline.

    Parameters
    ----------
    n_affected : int
        People with the outcome. The caller rounds; :func:`icon_counts` gives
        our rule (half up, and 1000 people for risks under 0.5% or from 99.5%).
    total : int, default 100
        People shown, a multiple of 100 (100 or 1000 in practice), in blocks
        of 10 x 10 so they can be counted.
    per_row : int, optional
        People per row, a multiple of 10; default 10 for 100 people, 50 for 1000.
    outcome : str
        The outcome in words, for the legend ("14 with delirium").
    synthetic, medium, size
        As in :func:`calcbuilder.plots.roc_figure`. Default size fits the grid.
    title : str, optional
        Heading; default "About N in 100 people like this" ("Fewer than 1 in
        1,000 ..." for 0). Pass ``""`` for none.

    Returns
    -------
    matplotlib.figure.Figure
        One axes (no ticks). People with the outcome are dark and filled, from
        the top left, block by block; the others are white with a grey outline.
    """
    style = st.get_style(medium)
    cols = _check_icon_args(n_affected, total, per_row)
    n = int(n_affected)
    shapes = _people([_icon_origin(i, cols) for i in range(total)])
    small = total > 100
    default = ((6.4, 4.0) if small else (3.8, 4.6)) if style.medium == "screen" else \
        ((3.6, 2.8) if small else (2.4, 3.0))
    fig = st.new_figure(size if size is not None else default, style)
    ax = fig.add_subplot()
    edge_w = style.thin * (0.45 if small else 1.0)
    for look, part in ((st.AFFECTED, shapes[:n]), (st.UNAFFECTED, shapes[n:])):
        if part:
            ax.add_collection(PathCollection(
                part, facecolor=look.face, edgecolor=look.edge, linewidth=edge_w,
                gid="icons-affected" if look is st.AFFECTED else "icons-other"))
    ax.autoscale_view()  # the limits follow the icons
    ax.margins(0.01)
    ax.set_aspect("equal")
    ax.set_axis_off()
    handles = [Patch(facecolor=st.AFFECTED.face, edgecolor=st.AFFECTED.edge,
                     label=f"{n:,} with {outcome}"),
               Patch(facecolor=st.UNAFFECTED.face, edgecolor=st.UNAFFECTED.edge,
                     label=f"{total - n:,} without {outcome}")]
    size_pt = st.legend_font(style)["size"]
    one_row = sum(st.text_width_pt(str(h.get_label()), size_pt) + 3.5 * size_pt
                  for h in handles) < fig.get_size_inches()[0] * 72.0 * 0.9
    # A figure legend below everything (not tied to the aspect-shrunk axes box).
    fig.legend(handles=handles, loc="outside lower center", ncols=2 if one_row else 1,
               frameon=False, prop=st.legend_font(style), handlelength=1.2)
    heading = _icon_heading(n, total) if title is None else title
    return st.finish(fig, style, synthetic=synthetic, title=heading or None)


# --- where the patient's risk falls in the cohort -------------------------------------


def _histogram(edges: ArrayLike, counts: ArrayLike) -> tuple[FloatArray, FloatArray]:
    e = st.as_proportions(edges, "edges")
    c = st.as_curve(counts, "counts")
    if e.size < 2 or np.any(np.diff(e) <= 0):
        raise PlotInputError("edges must be at least two strictly increasing risks")
    if c.size != e.size - 1:
        raise PlotInputError(f"counts must have one value per bin ({e.size - 1}); got {c.size}")
    if np.any(c < 0) or c.sum() <= 0:
        raise PlotInputError("counts must be non-negative with at least one patient")
    return e, c


def cohort_percentile(edges: ArrayLike, counts: ArrayLike, risk: float) -> float:
    """Percentage of the cohort with a lower predicted risk than ``risk``.

    Within the bin that holds ``risk``, patients are taken as spread evenly,
    so the answer is approximate to within that bin's count.

    Examples
    --------
    >>> cohort_percentile([0, 0.1, 0.2], [30, 10], 0.15)
    87.5
    """
    e, c = _histogram(edges, counts)
    p = st.as_proportion(risk, "risk")
    share = np.clip((p - e[:-1]) / np.diff(e), 0.0, 1.0)
    return float(100.0 * np.sum(share * c) / c.sum())


def risk_position_figure(
    edges: ArrayLike,
    counts: ArrayLike,
    patient_risk: float,
    *,
    cohort: str = "the development cohort",
    synthetic: bool = False,
    title: str | None = None,
    medium: Medium = "screen",
    size: tuple[float, float] | None = None,
) -> Figure:
    """Histogram of the cohort's predicted risks with this patient's risk marked.

    Parameters
    ----------
    edges : array_like
        Bin edges, increasing proportions in [0, 1].
    counts : array_like
        Patients per bin (one fewer than ``edges``).
    patient_risk : float
        This patient's predicted risk, a proportion.
    cohort : str
        The cohort in words, for the note under the plot.
    synthetic, title, medium, size
        As in :func:`calcbuilder.plots.roc_figure`; default 5.6 x 2.8 in on
        screen, 3.4 x 2.1 in in print.

    Returns
    -------
    matplotlib.figure.Figure
        One axes. The part of the cohort with a lower risk than the patient is
        dark and hatched, the rest light; a direct label gives both shares and
        a note repeats them in a sentence (:func:`cohort_percentile`).
    """
    style = st.get_style(medium)
    e, c = _histogram(edges, counts)
    risk = st.as_proportion(patient_risk, "patient_risk")
    below = cohort_percentile(e, c, risk)
    fig = st.new_figure(st.pick_size(size, _POS_SIZE, style), style)
    ax = fig.add_subplot()
    st.style_axes(ax, style)
    widths = np.diff(e)
    lower_w = np.clip(risk - e[:-1], 0.0, widths)
    ax.bar(e[:-1], c, width=widths, align="edge", color=st.NONEVENTS.face,
           edgecolor=st.NONEVENTS.edge, linewidth=style.thin * 0.6)
    ax.bar(e[:-1], np.where(lower_w > 0, c, 0), width=lower_w, align="edge",
           color=st.EVENTS.face, edgecolor=st.EVENTS.edge, hatch=st.EVENTS.hatch, linewidth=0)
    ax.axvline(risk, color=st.PATIENT.color, linestyle=st.PATIENT.linestyle,
               linewidth=style.thin * 1.4)
    ax.plot([risk], [1.0], st.PATIENT.marker, color=st.PATIENT.color, markeredgecolor="white",
            markersize=style.marker * 1.1, transform=ax.get_xaxis_transform(), clip_on=False)
    filled = np.flatnonzero(c > 0)
    right = st.nice_upper(max(float(e[filled[-1] + 1]), risk * 1.05))
    ax.set_xlim(min(0.0, float(e[0])), right)
    ax.set_ylim(0, float(c.max()) * 1.6)  # the top third holds the direct labels
    st.percent_axis(ax, "x")
    st.set_labels(ax, style, "Predicted risk, %", "Patients")
    _position_labels(ax, style, risk, below, right)
    share = {0.0: "None", 100.0: "All"}.get(below, f"About {_share(below)}")
    note = f"{share} of the {c.sum():,.0f} patients in {cohort} had a lower predicted risk."
    return st.finish(fig, style, notes=[note], synthetic=synthetic, title=title)


def _share(percent: float) -> str:
    """A percentage in words that never rounds to a false 0% or 100%."""
    if 0 < percent < 1:
        return "less than 1%"
    if 99 < percent < 100:
        return "more than 99%"
    return f"{percent:.0f}%"


def _position_labels(ax: Axes, style: FigureStyle, risk: float, below: float,
                     right: float) -> None:
    """Direct label by the diamond, on the open side: the risk and the shares either side."""
    on_left = risk > 0.6 * right
    text = (f"This patient {st.pct(risk)}\n"
            f"{_share(below)} of the cohort lower, {_share(100 - below)} higher")
    ax.annotate(text, (risk, 1.0), xycoords=ax.get_xaxis_transform(),
                xytext=(-8 if on_left else 8, -2), textcoords="offset points",
                ha="right" if on_left else "left", va="top", linespacing=1.3,
                **st.font(style, "small"))


# --- contributions --------------------------------------------------------------------


def _signed(value: float, decimals: int) -> str:
    text = f"{value:+.{decimals}f}"
    if float(text) == 0:
        return f"{0:.{decimals}f}"
    return text.replace("-", "−")


def _draw_contributions(ax: Axes, style: FigureStyle, labels: Sequence[str],
                        values: FloatArray, decimals: int) -> float:
    order = np.argsort(-np.abs(values), kind="stable")
    vals = values[order]
    ypos = np.arange(vals.size)[::-1]
    for look, mask in ((st.RAISES, vals > 0), (st.LOWERS, vals <= 0)):
        ax.barh(ypos[mask], vals[mask], height=0.62, color=look.face, edgecolor=look.edge,
                hatch=look.hatch, linewidth=style.thin * 0.8)
    reach = max(float(np.abs(vals).max()), 1e-9) * 1.4
    for y, v in zip(ypos, vals, strict=True):
        ax.text(v + (0.02 if v > 0 else -0.02) * reach, y, _signed(v, decimals),
                ha="left" if v > 0 else "right", va="center", **st.font(style, "small"))
    ax.set_yticks(ypos, ["\n".join(textwrap.wrap(str(labels[i]), 26)) for i in order])
    ax.axvline(0, color=st.INK, linewidth=style.thin)
    ax.set_xlim(-reach, reach)
    ax.set_ylim(-0.7, vals.size - 0.3)
    return reach


def contributions_figure(
    labels: Sequence[str],
    contributions: ArrayLike,
    *,
    xlabel: str = "Contribution to the linear predictor, log-odds",
    directions: tuple[str, str] = ("lowers the risk", "raises the risk"),
    decimals: int = 2,
    synthetic: bool = False,
    title: str | None = None,
    medium: Medium = "screen",
    size: tuple[float, float] | None = None,
) -> Figure:
    """Horizontal bars of each input's contribution to the linear predictor.

    Parameters
    ----------
    labels : sequence of str
        Input labels, one per contribution.
    contributions : array_like
        Contribution of each input (``calcbuilder/calc/FORMAT.md``: the sum of
        coefficient x column over the columns involving it).
    xlabel : str
        Axis label with the scale (log-odds; log hazard for survival models).
    directions : (str, str)
        Words over the left and right ends of the axis. The defaults read a
        contribution against a contribution of zero; callers that centre the
        contributions (e.g. on the cohort's average patient) may say so here.
    decimals : int
        Decimals of the value printed beside each bar.
    synthetic, title, medium, size
        As in :func:`calcbuilder.plots.roc_figure`; default height grows with
        the number of inputs.

    Returns
    -------
    matplotlib.figure.Figure
        One axes, largest absolute contribution at the top. Contributions that
        raise the risk point right, dark with diagonal hatching; those that
        lower it point left, light with dots; each bar carries its signed
        value. The x axis is symmetric about zero.
    """
    style = st.get_style(medium)
    values = st.as_curve(contributions, "contributions")
    if len(labels) != values.size:
        raise PlotInputError(f"labels must have one entry per contribution ({values.size}); "
                             f"got {len(labels)}")
    k = values.size
    default = (6.4, 1.3 + 0.34 * k) if style.medium == "screen" else (4.6, 1.0 + 0.2 * k)
    fig = st.new_figure(st.pick_size(size, {style.medium: default}, style), style)
    ax = fig.add_subplot()
    st.style_axes(ax, style)
    ax.grid(False, axis="y")
    ax.tick_params(axis="y", length=0)
    _draw_contributions(ax, style, labels, values, decimals)
    ax.set_xlabel(xlabel, **st.font(style))
    ax.xaxis.set_major_formatter(lambda v, _pos: f"{v:.3g}".replace("-", "−"))
    ax.text(0.0, 1.01, f"◀ {directions[0]}", transform=ax.transAxes, ha="left", va="bottom",
            **st.font(style, "small"))
    ax.text(1.0, 1.01, f"{directions[1]} ▶", transform=ax.transAxes, ha="right", va="bottom",
            **st.font(style, "small"))
    return st.finish(fig, style, synthetic=synthetic, title=title)
