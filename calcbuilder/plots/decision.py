"""Decision-curve figure: net benefit of the model, treat all and treat none.

Used by the clinic form (with the chosen threshold and this patient's risk
marked) and by the evidence report (with the confidence band and, optionally,
a reference model). Inputs are the arrays of an evidence set's
``decision_curve`` (see ``calcbuilder/calc/FORMAT.md``).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from numpy.typing import ArrayLike

from . import style as st
from .style import FigureStyle, FloatArray, Medium, PlotInputError

__all__ = ["decision_curve_figure"]

_DC_SIZE = {"screen": (6.4, 4.6), "print": (4.6, 3.6)}


@dataclass(frozen=True)
class _Curves:
    """Checked decision-curve arrays, all aligned with ``t``."""

    t: FloatArray
    model: FloatArray
    treat_all: FloatArray
    low: FloatArray | None
    high: FloatArray | None
    ref: FloatArray | None


def _dc_inputs(thresholds: ArrayLike, model: ArrayLike, treat_all: ArrayLike, *,
               low: ArrayLike | None, high: ArrayLike | None,
               ref: ArrayLike | None) -> _Curves:
    t = st.as_proportions(thresholds, "thresholds")
    if np.any(np.diff(t) <= 0):
        raise PlotInputError("thresholds must be strictly increasing")
    curves = _Curves(t, st.as_curve(model, "model"), st.as_curve(treat_all, "treat_all"),
                     st.optional_curve(low, "model_low"), st.optional_curve(high, "model_high"),
                     st.optional_curve(ref, "reference"))
    st.same_length(t, "threshold", model=curves.model, treat_all=curves.treat_all,
                   model_low=curves.low, model_high=curves.high, reference=curves.ref)
    if (curves.low is None) != (curves.high is None):
        raise PlotInputError("model_low and model_high must be given together")
    return curves


def _dc_view(t: FloatArray, rng: tuple[float, float] | None, marks: Sequence[float | None],
             show_all: bool) -> tuple[float, float, bool]:
    """(low, high, whether more than the reasonable range is shown)."""
    lo, hi = (float(t[0]), float(t[-1])) if rng is None or show_all else rng
    for v in marks:
        if v is not None:
            lo, hi = min(lo, v), max(hi, v)
    wider = rng is not None and (lo < rng[0] or hi > rng[1])
    pad = 0.03 * (hi - lo) if hi > lo else 0.01
    return max(0.0, lo - pad), min(1.0, hi + pad), wider


def _dc_ylim(c: _Curves, lo: float, hi: float) -> tuple[float, float, float | None]:
    """(bottom, top, first threshold where treat-all leaves the plot or None)."""
    m = (c.t >= lo) & (c.t <= hi)
    if not m.any():
        m = np.ones_like(c.t, dtype=bool)
    shown = [a[m] for a in (c.model, c.low, c.high, c.ref) if a is not None]
    top = max(0.0, float(c.treat_all[m].max()), *(float(a.max()) for a in shown))
    top = max(top * 1.15, 0.01)
    lowest = min(0.0, *(float(a.min()) for a in shown))
    bottom = min(lowest - 0.08 * top, -0.2 * top)
    below = np.flatnonzero(m & (c.treat_all < bottom))
    return bottom, top, (float(c.t[below[0]]) if below.size else None)


def _dc_draw(ax: Axes, style: FigureStyle, c: _Curves, label: str, ref_label: str) -> None:
    if c.low is not None and c.high is not None:
        ax.fill_between(c.t, c.low, c.high, color=st.BAND, alpha=st.BAND_ALPHA, linewidth=0,
                        label=f"{label}: 95% confidence band")
    ax.axhline(0.0, label="Treat none", **st.TREAT_NONE.kw(style, width=style.line * 0.8))
    ax.plot(c.t, c.treat_all, label="Treat all", **st.TREAT_ALL.kw(style))
    if c.ref is not None:
        ax.plot(c.t, c.ref, label=ref_label, **st.REFERENCE.kw(style))
    ax.plot(c.t, c.model, label=label, **st.MODEL.kw(style))


def _label_side(x: float, view: tuple[float, float], other: float | None) -> str:
    """'right' or 'left' of a vertical line: away from the plot edge and the other line."""
    lo, hi = view
    if x - lo < 0.15 * (hi - lo):
        return "right"
    if hi - x < 0.15 * (hi - lo):
        return "left"
    return "right" if other is not None and x >= other else "left"


def _vertical_mark(ax: Axes, style: FigureStyle, x: float, look: st.LineLook, *,
                   text: str, where: tuple[float, str]) -> None:
    ax.axvline(x, color=look.color, linestyle=look.linestyle, linewidth=style.thin * 1.3,
               zorder=5)
    y_text, side = where
    ax.text(x, y_text, f" {text} ", transform=ax.get_xaxis_transform(), rotation=90,
            ha="left" if side == "right" else "right",
            va="top" if y_text > 0.5 else "bottom", zorder=6,
            bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.8, "pad": 0.5},
            **st.font(style, "small"))


def _dc_marks(ax: Axes, style: FigureStyle, c: _Curves, threshold: float | None,
              patient_risk: float | None) -> None:
    view = ax.get_xlim()
    if threshold is not None:
        side = _label_side(threshold, view, patient_risk)
        _vertical_mark(ax, style, threshold, st.THRESHOLD,
                       text=f"Threshold {st.pct(threshold)}", where=(0.98, side))
        if c.t[0] <= threshold <= c.t[-1]:
            ax.plot([threshold], [np.interp(threshold, c.t, c.model)], "o", color=st.MODEL.color,
                    markersize=style.marker, markeredgecolor="white", zorder=7)
    if patient_risk is not None:
        side = _label_side(patient_risk, view, threshold)
        _vertical_mark(ax, style, patient_risk, st.PATIENT,
                       text=f"This patient {st.pct(patient_risk)}", where=(0.04, side))
        ax.plot([patient_risk], [0.0], st.PATIENT.marker, color=st.PATIENT.color,
                markeredgecolor="white", markersize=style.marker * 1.1,
                transform=ax.get_xaxis_transform(), clip_on=False, zorder=8)


def _dc_notes(c: _Curves, rng: tuple[float, float] | None, wider: bool,
              clipped: tuple[float | None, float], threshold: float | None) -> list[str]:
    notes = []
    if rng is not None:
        where = "Shaded" if wider else "Shown"
        notes.append(f"{where}: the thresholds the authors consider reasonable, "
                     f"{st.pct(rng[0])} to {st.pct(rng[1])}.")
        if threshold is not None and not rng[0] <= threshold <= rng[1]:
            notes.append(f"The threshold {st.pct(threshold)} lies outside that range.")
    if threshold is not None and not c.t[0] <= threshold <= c.t[-1]:
        notes.append(f"No net benefit was computed at the threshold {st.pct(threshold)}.")
    t_clip, bottom = clipped
    if t_clip is not None:
        notes.append(f"Treat all continues below the plot from a threshold of {st.pct(t_clip)} "
                     f"(axis cut at {bottom * 100:.1f} per 100 patients).".replace("-", "−"))
    return notes


def decision_curve_figure(
    thresholds: ArrayLike,
    model: ArrayLike,
    treat_all: ArrayLike,
    *,
    model_low: ArrayLike | None = None,
    model_high: ArrayLike | None = None,
    reasonable_range: tuple[float, float] | None = None,
    threshold: float | None = None,
    patient_risk: float | None = None,
    reference: ArrayLike | None = None,
    label: str = "Model",
    reference_label: str = "Reference model",
    show_all_thresholds: bool = False,
    synthetic: bool = False,
    title: str | None = None,
    medium: Medium = "screen",
    size: tuple[float, float] | None = None,
) -> Figure:
    """Decision curve: net benefit against the decision threshold.

    Parameters
    ----------
    thresholds : array_like
        Decision thresholds, proportions in [0, 1], strictly increasing.
    model, treat_all : array_like
        Net benefit (true positives per patient, net of harms) of deciding by
        the model and of treating everyone, one value per threshold.
    model_low, model_high : array_like, optional
        Pointwise 95% confidence limits of the model's net benefit (shaded).
    reasonable_range : (low, high), optional
        Thresholds the authors consider reasonable. Only that range is shown
        (widened to include ``threshold`` and ``patient_risk``) unless
        ``show_all_thresholds``; it is shaded when more is shown.
    threshold : float, optional
        The chosen decision threshold: a dashed vertical line and a dot on the
        model's curve.
    patient_risk : float, optional
        This patient's risk: a dotted vertical line ending in a diamond.
    reference : array_like, optional
        Net benefit of a reference model; ``None`` or empty draws nothing.
    label, reference_label : str
        Legend names.
    show_all_thresholds : bool
        Show every threshold given even when ``reasonable_range`` is set.
    synthetic, title, medium, size
        As in :func:`calcbuilder.plots.roc_figure`; default size 6.4 x 4.6 in on screen,
        4.6 x 3.6 in in print.

    Returns
    -------
    matplotlib.figure.Figure
        One axes. The y axis shows net benefit per 100 patients (the values
        times 100). Its top sits just above the highest curve in view. Its
        bottom sits a little below zero and below the lowest model or
        reference value in view; treat-all, which falls steeply at high
        thresholds, may run below it, and a note under the plot then says from
        which threshold on.

    Notes
    -----
    Net benefit and decision curves: Vickers AJ, Elkin EB. Med Decis Making
    2006;26(6):565-574. Showing only the range of reasonable thresholds follows
    Vickers AJ, van Calster B, Steyerberg EW. Diagn Progn Res 2019;3:18.
    """
    style = st.get_style(medium)
    c = _dc_inputs(thresholds, model, treat_all, low=model_low, high=model_high, ref=reference)
    rng = None
    if reasonable_range is not None:
        rng = (st.as_proportion(reasonable_range[0], "reasonable_range low"),
               st.as_proportion(reasonable_range[1], "reasonable_range high"))
        if rng[0] >= rng[1]:
            raise PlotInputError(f"reasonable_range must be (low, high) with low < high; got {rng}")
    thr = None if threshold is None else st.as_proportion(threshold, "threshold")
    risk = None if patient_risk is None else st.as_proportion(patient_risk, "patient_risk")
    lo, hi, wider = _dc_view(c.t, rng, (thr, risk), show_all_thresholds)
    bottom, top, t_clip = _dc_ylim(c, lo, hi)

    fig = st.new_figure(st.pick_size(size, _DC_SIZE, style), style)
    ax = fig.add_subplot()
    st.style_axes(ax, style)
    if rng is not None and wider:
        ax.axvspan(*rng, facecolor=st.RANGE_FILL, edgecolor=st.RANGE_EDGE, zorder=0,
                   linewidth=style.thin, label="Reasonable thresholds (authors)")
    _dc_draw(ax, style, c, label, reference_label)
    ax.set_xlim(lo, hi)
    _dc_marks(ax, style, c, thr, risk)
    ax.set_ylim(bottom, top)
    st.percent_axis(ax, "x")
    st.per_hundred_axis(ax, "y")
    st.set_labels(ax, style, "Decision threshold, % risk",
                  "Net benefit per 100 patients")
    st.legend_below(ax, style, ncols=3 if style.medium == "screen" else 2)
    notes = _dc_notes(c, rng, wider, (t_clip, bottom), thr)
    return st.finish(fig, style, notes=notes, synthetic=synthetic, title=title)
