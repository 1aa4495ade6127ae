"""Performance figures: ROC and calibration (decision curves: :mod:`.decision`).

Each builder takes plain numbers (the arrays of an evidence set, see
``calcbuilder/calc/FORMAT.md``) and returns a :class:`matplotlib.figure.Figure`.
Risks and thresholds are given as proportions in [0, 1] and shown as
percentages. Every curve differs from the others by dash pattern and marker as
well as colour, so the figures survive grayscale printing.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from numpy.typing import ArrayLike

from . import style as st
from .style import FigureStyle, FloatArray, Medium, PlotInputError

__all__ = ["calibration_figure", "roc_figure"]

_ROC_SIZE = {"screen": (5.2, 5.0), "print": (3.3, 3.2)}
_CAL_SIZE = {"screen": (5.6, 6.0), "print": (3.5, 3.9)}


def auc_text(auc: float | None, low: float | None, high: float | None) -> str:
    """'AUC 0.78 (95% CI 0.74–0.81)', or '' when ``auc`` is None."""
    if auc is None:
        return ""
    text = f"AUC {auc:.2f}"
    if low is not None and high is not None:
        text += f" (95% CI {low:.2f}–{high:.2f})"
    return text


def _roc_arrays(fpr: ArrayLike, tpr: ArrayLike, what: str) -> tuple[FloatArray, FloatArray]:
    x = st.as_proportions(fpr, f"{what} false-positive rates")
    y = st.as_proportions(tpr, f"{what} true-positive rates")
    st.same_length(x, f"{what} false-positive rate", **{f"{what} true-positive rates": y})
    return x, y


def roc_figure(
    fpr: ArrayLike,
    tpr: ArrayLike,
    *,
    auc: float | None = None,
    auc_low: float | None = None,
    auc_high: float | None = None,
    label: str = "Model",
    reference: tuple[ArrayLike, ArrayLike] | None = None,
    reference_label: str = "Reference model",
    reference_auc: float | None = None,
    synthetic: bool = False,
    title: str | None = None,
    medium: Medium = "screen",
    size: tuple[float, float] | None = None,
) -> Figure:
    """ROC curve of the model, optionally with a reference model's curve.

    Parameters
    ----------
    fpr, tpr : array_like
        False-positive rate (1 - specificity) and true-positive rate (sensitivity)
        at each threshold, proportions in [0, 1], in plotting order.
    auc, auc_low, auc_high : float, optional
        Area under the curve and its 95% confidence limits, shown in the legend.
    label : str
        Legend name of the model.
    reference : (fpr, tpr), optional
        A second curve (e.g. the model in current use). ``None`` or empty arrays
        draw no reference curve.
    reference_label : str
        Legend name of the reference model.
    reference_auc : float, optional
        Its AUC, shown in the legend.
    synthetic : bool
        Stamp "Synthetic data – not for clinical use" on the figure.
    title : str, optional
        Bold title above the plot.
    medium : {"screen", "print"}
        Font sizes and line widths for the clinic form or for paper.
    size : (width, height), optional
        Inches; default 5.2 x 5.0 on screen, 3.3 x 3.2 in print.

    Returns
    -------
    matplotlib.figure.Figure
        One square axes, both axes 0-100%, with the no-discrimination diagonal.
    """
    style = st.get_style(medium)
    x, y = _roc_arrays(fpr, tpr, "model")
    fig = st.new_figure(st.pick_size(size, _ROC_SIZE, style), style)
    ax = fig.add_subplot()
    st.style_axes(ax, style)
    ax.plot([0, 1], [0, 1], label="No discrimination (AUC 0.50)",
            **st.IDEAL.kw(style, width=style.thin))
    if reference is not None:
        rx = st.optional_curve(reference[0], "reference false-positive rates")
        ry = st.optional_curve(reference[1], "reference true-positive rates")
        if rx is not None and ry is not None:
            rx, ry = _roc_arrays(rx, ry, "reference")
            ref_auc = auc_text(reference_auc, None, None)
            ref_name = ", ".join(filter(None, [reference_label, ref_auc]))
            ax.plot(rx, ry, label=ref_name, **st.REFERENCE.kw(style))
    name = ", ".join(filter(None, [label, auc_text(auc, auc_low, auc_high)]))
    ax.plot(x, y, label=name, **st.MODEL.kw(style))
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    ax.set_aspect("equal")
    st.percent_axis(ax, "x")
    st.percent_axis(ax, "y")
    st.set_labels(ax, style, "False-positive rate (1 − specificity), %",
                  "True-positive rate (sensitivity), %")
    ax.legend(loc="lower right", prop=st.legend_font(style), framealpha=0.95)
    return st.finish(fig, style, synthetic=synthetic, title=title)


# --- calibration ----------------------------------------------------------------------


def _grouped_array(grouped: Sequence[Sequence[float]] | ArrayLike | None) -> FloatArray | None:
    if grouped is None:
        return None
    arr = np.asarray(grouped, dtype=np.float64)
    if arr.size == 0:
        return None
    if arr.ndim != 2 or arr.shape[1] != 4:
        raise PlotInputError(
            "grouped must be rows of (mean_risk, observed, low, high); "
            f"got an array of shape {arr.shape}"
        )
    st.as_proportions(arr.ravel(), "grouped calibration values")
    if np.any(arr[:, 2] > arr[:, 1]) or np.any(arr[:, 3] < arr[:, 1]):
        raise PlotInputError("grouped rows must satisfy low <= observed <= high")
    return arr


def _histogram_arrays(
    histogram: tuple[ArrayLike, ArrayLike, ArrayLike] | None,
) -> tuple[FloatArray, FloatArray, FloatArray] | None:
    if histogram is None:
        return None
    edges = st.as_proportions(histogram[0], "histogram edges")
    events = st.as_curve(histogram[1], "histogram events")
    nonevents = st.as_curve(histogram[2], "histogram non-events")
    if edges.size < 2 or np.any(np.diff(edges) <= 0):
        raise PlotInputError("histogram edges must be at least two increasing values")
    if events.size != edges.size - 1 or nonevents.size != edges.size - 1:
        raise PlotInputError(
            f"histogram counts must have one value per bin ({edges.size - 1}); "
            f"got {events.size} events and {nonevents.size} non-events"
        )
    if np.any(events < 0) or np.any(nonevents < 0):
        raise PlotInputError("histogram counts must not be negative")
    return edges, events, nonevents


def _calibration_limit(*arrays: FloatArray | None, hist_top: float = 0.0) -> float:
    top = max([hist_top, *(float(a.max()) for a in arrays if a is not None and a.size)])
    return st.nice_upper(top)


def _draw_calibration(ax: Axes, style: FigureStyle, curve: tuple[FloatArray, FloatArray], *,
                      band: tuple[FloatArray, FloatArray] | None,
                      grouped: FloatArray | None, label: str) -> None:
    ax.plot([0, 1], [0, 1], label="Ideal (observed = predicted)",
            **st.IDEAL.kw(style, width=style.line * 0.7))
    if band is not None:
        ax.fill_between(curve[0], band[0], band[1], color=st.BAND, alpha=st.BAND_ALPHA,
                        linewidth=0, label="95% confidence band")
    ax.plot(curve[0], curve[1], label=label, **st.MODEL.kw(style))
    if grouped is not None:
        yerr = np.vstack([grouped[:, 1] - grouped[:, 2], grouped[:, 3] - grouped[:, 1]])
        ax.errorbar(grouped[:, 0], grouped[:, 1], yerr=yerr, fmt="s", color=st.INK,
                    markerfacecolor="white", markersize=style.marker * 0.8,
                    elinewidth=style.thin, capsize=style.marker * 0.35,
                    markeredgewidth=style.thin * 1.2, zorder=4,
                    label="Grouped: observed with 95% CI")


def _nice_tick(top: float) -> float:
    """The largest of 1, 2, 5, 10, 20, 50, ... not above ``top`` (at least 1)."""
    if top < 1:
        return 1.0
    base = 10.0 ** np.floor(np.log10(top))
    return float(max(m * base for m in (1.0, 2.0, 5.0) if m * base <= top))


def _draw_histogram(ax: Axes, style: FigureStyle,
                    hist: tuple[FloatArray, FloatArray, FloatArray]) -> None:
    """Events upwards and non-events downwards, each half scaled to its own largest bin.

    The halves have their own count scales (the tick labels say so) because
    events are usually far fewer; the shape of each distribution is the point.
    """
    edges, events, nonevents = hist
    widths = np.diff(edges)
    top_e, top_n = max(float(events.max()), 1.0), max(float(nonevents.max()), 1.0)
    ax.bar(edges[:-1], events / top_e, width=widths, align="edge", color=st.EVENTS.face,
           edgecolor=st.EVENTS.edge, hatch=st.EVENTS.hatch, linewidth=style.thin * 0.6)
    ax.bar(edges[:-1], -nonevents / top_n, width=widths, align="edge", color=st.NONEVENTS.face,
           edgecolor=st.NONEVENTS.edge, hatch=st.NONEVENTS.hatch, linewidth=style.thin * 0.6)
    ax.axhline(0, color=st.INK, linewidth=style.thin)
    ax.set_ylim(-1.25, 1.25)
    tick_e, tick_n = _nice_tick(top_e), _nice_tick(top_n)
    ax.set_yticks([-tick_n / top_n, 0.0, tick_e / top_e],
                  [f"{tick_n:.0f}", "0", f"{tick_e:.0f}"])
    ax.set_ylabel("Patients", **st.font(style))
    ax.text(0.99, 0.97, f"▲ with the outcome ({events.sum():,.0f})", transform=ax.transAxes,
            ha="right", va="top", **st.font(style, "small"))
    ax.text(0.99, 0.03, f"▼ without the outcome ({nonevents.sum():,.0f})",
            transform=ax.transAxes, ha="right", va="bottom", **st.font(style, "small"))


def calibration_figure(
    curve_risk: ArrayLike,
    curve_observed: ArrayLike,
    *,
    band_low: ArrayLike | None = None,
    band_high: ArrayLike | None = None,
    grouped: Sequence[Sequence[float]] | ArrayLike | None = None,
    histogram: tuple[ArrayLike, ArrayLike, ArrayLike] | None = None,
    label: str = "Smoothed calibration curve",
    synthetic: bool = False,
    title: str | None = None,
    medium: Medium = "screen",
    size: tuple[float, float] | None = None,
) -> Figure:
    """Calibration plot: observed proportion against predicted risk, both in %.

    Parameters
    ----------
    curve_risk, curve_observed : array_like
        The smoothed (lowess) calibration curve: predicted risks, increasing,
        and the observed proportion at each. Smoother values outside [0, 1]
        are drawn at the boundary, and a note says so.
    band_low, band_high : array_like, optional
        Pointwise 95% confidence band of the curve, one value per point.
    grouped : sequence of (mean_risk, observed, low, high), optional
        Grouped calibration (e.g. tenths of risk): mean predicted risk, observed
        proportion and its 95% confidence limits, drawn as squares with error bars.
    histogram : (edges, events, nonevents), optional
        Counts of patients per predicted-risk bin by outcome, drawn under the
        plot on the same x axis: with the outcome upwards, without downwards,
        each half on its own count scale (labelled by its tick).
    label : str
        Legend name of the smoothed curve.
    synthetic, title, medium, size
        As in :func:`roc_figure`; default size 5.6 x 6.0 in on screen,
        3.5 x 3.9 in in print.

    Returns
    -------
    matplotlib.figure.Figure
        ``fig.axes[0]`` is the calibration plot, ``fig.axes[1]`` the histogram
        when one is given. Both axes of the calibration plot start at 0 and end
        at the same limit, a tidy value just above the largest risk or
        proportion shown, so the ideal line is the 45° diagonal.
    """
    style = st.get_style(medium)
    x = st.as_proportions(curve_risk, "curve_risk")
    raw = st.as_curve(curve_observed, "curve_observed")
    st.same_length(x, "curve_risk point", curve_observed=raw)
    low, high = st.optional_curve(band_low, "band_low"), st.optional_curve(band_high, "band_high")
    st.same_length(x, "curve_risk point", band_low=low, band_high=high)
    if (low is None) != (high is None):
        raise PlotInputError("band_low and band_high must be given together")
    band = None if low is None or high is None else (np.clip(low, 0, 1), np.clip(high, 0, 1))
    obs = np.clip(raw, 0.0, 1.0)
    grouped_arr = _grouped_array(grouped)
    hist = _histogram_arrays(histogram)
    hist_top = 0.0
    if hist is not None:
        filled = np.flatnonzero((hist[1] + hist[2]) > 0)
        hist_top = float(hist[0][filled[-1] + 1]) if filled.size else 0.0
    lim = _calibration_limit(x, obs, None if band is None else band[1],
                             None if grouped_arr is None else grouped_arr[:, [0, 3]].ravel(),
                             hist_top=hist_top)

    fig = st.new_figure(st.pick_size(size, _CAL_SIZE, style), style)
    if hist is None:
        ax = fig.add_subplot()
    else:
        ax, hax = fig.subplots(2, 1, sharex=True, height_ratios=[4, 1.15])
    st.style_axes(ax, style)
    _draw_calibration(ax, style, (x, obs), band=band, grouped=grouped_arr, label=label)
    ax.set_xlim(0, lim)
    ax.set_ylim(0, lim)
    if hist is None:
        ax.set_aspect("equal")
    st.percent_axis(ax, "x")
    st.percent_axis(ax, "y")
    ax.set_ylabel("Observed proportion with the outcome, %", **st.font(style))
    ax.legend(loc="upper left", prop=st.legend_font(style), framealpha=0.95)
    if hist is None:
        ax.set_xlabel("Predicted risk, %", **st.font(style))
    else:
        st.style_axes(hax, style, grid=False)
        _draw_histogram(hax, style, hist)
        hax.set_xlabel("Predicted risk, %", **st.font(style))
        ax.tick_params(labelbottom=False)
    notes = []
    if np.any(raw != obs):
        notes.append("Where the smoother ran below 0% or above 100%, "
                     "the curve is drawn at the edge.")
    return st.finish(fig, style, notes=notes, synthetic=synthetic, title=title)

