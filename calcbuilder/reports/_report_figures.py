"""Calibration plots and decision curves of the evidence report (private).

Figures come from :mod:`calcbuilder.plots` (print medium) and are embedded as
200 dpi PNG images. Beside each figure the numbers behind it are tabulated: the
grouped calibration, and net benefit at thresholds across the authors'
reasonable range. Points the file stores as ``null`` are left out of a
figure; a figure that cannot be drawn is replaced by the reason, never by
silence.
"""

from __future__ import annotations

import io
import math
from collections.abc import Mapping, Sequence
from typing import Any

from reportlab.platypus import (
    Flowable,
    Image,
    KeepTogether,
    Paragraph,
    Spacer,
    Table,
    TableStyle,
)

from ..calc.evidence_sets import EvidenceSet
from ..plots import PlotInputError, calibration_figure, decision_curve_figure, figure_png_bytes
from ._report_style import Context, ReportStyles, esc, grid_table
from ._report_text import percent

__all__ = ["calibration_story", "decision_story", "net_benefit_rows"]

_DPI = 200
_CAL_SIZE = (3.6, 4.15)  # inches: room for the histogram and a note under the axes


def _image(fig: Any) -> Image:
    width, height = fig.get_size_inches()
    data = figure_png_bytes(fig, dpi=_DPI)
    return Image(io.BytesIO(data), width=width * 72, height=height * 72)


def _finite(value: Any) -> bool:
    return value is not None and math.isfinite(value)


def _kept(block: Mapping[str, Any], keys: Sequence[str]) -> list[int]:
    """Indices where every one of ``keys`` present in ``block`` holds a finite number."""
    n = len(block[keys[0]])
    return [i for i in range(n) if all(_finite(block[k][i]) for k in keys if k in block)]


def _pick(block: Mapping[str, Any], key: str, rows: list[int]) -> list[float] | None:
    return [block[key][i] for i in rows] if key in block else None


def _side_by_side(left: Flowable, right: list[Flowable], left_w: float, width: float) -> Table:
    table = Table([[left, right]], colWidths=[left_w, width - left_w], hAlign="LEFT")
    table.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"),
                               ("LEFTPADDING", (0, 0), (-1, -1), 0),
                               ("RIGHTPADDING", (0, 0), (0, -1), 8),
                               ("RIGHTPADDING", (1, 0), (1, -1), 0)]))
    return table


def _grouped_rows(ev: EvidenceSet) -> list[list[float]]:
    rows = []
    for g in ev.raw.get("grouped_calibration") or ():
        obs = g["observed"]
        rows.append([g["mean_risk"], obs, g.get("low", obs), g.get("high", obs)])
    return rows


def _calibration_figure(ctx: Context, ev: EvidenceSet) -> Any:
    grouped = _grouped_rows(ev) or None
    hist = ev.raw.get("risk_histogram")
    histogram = (hist["edges"], hist["events"], hist["nonevents"]) if hist else None
    curve = ev.raw.get("calibration_curve")
    if curve is not None:
        rows = _kept(curve, ("risk", "observed", "low", "high"))
        risk, observed = _pick(curve, "risk", rows), _pick(curve, "observed", rows)
        low, high = _pick(curve, "low", rows), _pick(curve, "high", rows)
        label = "Smoothed calibration curve"
    else:
        assert grouped is not None  # only sets with a curve or grouped points get here
        risk, observed = [g[0] for g in grouped], [g[1] for g in grouped]
        low = high = None
        label = "Grouped points joined (no smoothed curve stored)"
    return calibration_figure(risk or [], observed or [], band_low=low, band_high=high,
                              grouped=grouped, histogram=histogram, label=label,
                              synthetic=ctx.synthetic, medium="print", size=_CAL_SIZE)


def _grouped_table(ev: EvidenceSet, st: ReportStyles, width: float) -> list[Flowable]:
    groups = ev.raw.get("grouped_calibration") or ()
    if not groups:
        return [Paragraph("No grouped calibration is stored for this evidence set.", st.grey)]
    head = ["#", "n", "Mean predicted", "Observed (95% CI)"]
    rows: list[list[Flowable]] = [[Paragraph(h, st.cell_bold) for h in head]]
    for i, g in enumerate(groups, start=1):
        ci = (f" ({percent(g['low'])}–{percent(g['high'])})"
              if g.get("low") is not None and g.get("high") is not None else "")
        rows.append([Paragraph(str(i), st.cell), Paragraph(f"{g['n']:,.0f}", st.cell_mono),
                     Paragraph(percent(g["mean_risk"]), st.cell_mono),
                     Paragraph(percent(g["observed"]) + ci, st.cell_mono)])
    parts = [16, 32, 54, 108]
    scale = width / sum(parts)
    return [Paragraph("Grouped calibration", st.cell_bold), Spacer(1, 2),
            grid_table(rows, [p * scale for p in parts])]


def _curve_notes(ev: EvidenceSet, st: ReportStyles) -> list[Flowable]:
    """The smoother used, and how many stored points the figure leaves out (null values)."""
    curve = ev.raw.get("calibration_curve")
    if not curve:
        return []
    out: list[Flowable] = []
    if curve.get("smoother"):
        out += [Spacer(1, 4), Paragraph(f"Smoother: {esc(str(curve['smoother']))}", st.grey)]
    total = len(curve["risk"])
    drawn = len(_kept(curve, ("risk", "observed", "low", "high")))
    if drawn < total:
        out += [Spacer(1, 2), Paragraph(
            f"The curve is drawn where its 95% band could be estimated: {drawn} of the {total} "
            "stored points (the file leaves the band empty where too few resamples reached).",
            st.grey)]
    return out


def _with_block(out: list[Flowable], block: list[Flowable]) -> list[Flowable]:
    """``out`` plus ``block`` kept on one page; the section's introduction (when ``out`` holds
    only that) is kept with the first block."""
    if len(out) == 1:
        return [KeepTogether([*out, *block]), Spacer(1, 5)]
    return [*out, KeepTogether(block), Spacer(1, 5)]


def _failed(exc: Exception, st: ReportStyles) -> Paragraph:
    return Paragraph(f"This figure could not be drawn from the stored numbers: {esc(str(exc))}",
                     st.body)


def calibration_story(ctx: Context) -> list[Flowable]:
    """A calibration plot (with histogram) and the grouped table for each evidence set."""
    st = ctx.st
    sets = [e for e in ctx.calc.evidence
            if e.raw.get("calibration_curve") or e.raw.get("grouped_calibration")]
    out: list[Flowable] = [Paragraph(
        "Observed proportion with the outcome against predicted risk. Points on the diagonal "
        "mean the estimates match what happened. The smoothed curve has a pointwise 95% band; "
        "squares are groups of patients with 95% intervals; the bars below show how many "
        "patients received each predicted risk, with and without the outcome.", st.body)]
    if not sets:
        return [*out, Paragraph("No calibration curve or grouped calibration is attached.",
                                st.body)]
    for ev in sets:
        try:
            figure: Flowable = _image(_calibration_figure(ctx, ev))
        except PlotInputError as exc:
            figure = _failed(exc, st)
        left_w = _CAL_SIZE[0] * 72 + 4
        table = _grouped_table(ev, st, ctx.width - left_w - 8)
        table += _curve_notes(ev, st)
        block = [Paragraph(esc(ev.label), st.h2), _side_by_side(figure, table, left_w, ctx.width)]
        out = _with_block(out, block)
    return out


def _nearest(values: Sequence[float], target: float) -> int:
    return min(range(len(values)), key=lambda i: abs(values[i] - target))


def _chosen_thresholds(t: Sequence[float], low: float, high: float, default: float) -> list[int]:
    inside = [i for i, v in enumerate(t) if low - 1e-9 <= v <= high + 1e-9]
    if not inside:
        return sorted({_nearest(t, low), _nearest(t, default), _nearest(t, high)})
    step = max(1, math.ceil(len(inside) / 8))
    picked = set(inside[::step]) | {inside[-1], _nearest(t, default)}
    return sorted(picked)


def net_benefit_rows(dc: Mapping[str, Any], reasonable: tuple[float, float], default: float
                     ) -> list[tuple[float, float | None, float | None, float | None,
                                     float | None]]:
    """(threshold, model, low, high, treat_all) at thresholds across the reasonable range."""
    t = dc["thresholds"]
    out = []
    for i in _chosen_thresholds(t, reasonable[0], reasonable[1], default):
        low = dc["model_low"][i] if "model_low" in dc else None
        high = dc["model_high"][i] if "model_high" in dc else None
        out.append((t[i], dc["model"][i], low, high, dc["treat_all"][i]))
    return out


def _nb(value: float | None) -> str:
    return "—" if value is None else f"{value:.4f}"


def _nb_table(ctx: Context, ev: EvidenceSet, width: float) -> list[Flowable]:
    st, d = ctx.st, ctx.calc.decision
    head = ["Threshold", "Deciding by the model", "95% CI", "Treating all", "Treating none",
            "Gain per 100 patients*"]
    rows: list[list[Flowable]] = [[Paragraph(h, st.cell_bold) for h in head]]
    for t, model, low, high, all_ in net_benefit_rows(ev.raw["decision_curve"],
                                                      d.reasonable_range, d.default_threshold):
        mark = " (default)" if abs(t - d.default_threshold) < 1e-9 else ""
        ci = f"{_nb(low)} to {_nb(high)}" if low is not None and high is not None else "—"
        gain = (None if model is None or all_ is None else (model - max(all_, 0.0)) * 100)
        rows.append([Paragraph(percent(t) + mark, st.cell), Paragraph(_nb(model), st.cell_mono),
                     Paragraph(ci, st.cell_mono), Paragraph(_nb(all_), st.cell_mono),
                     Paragraph("0", st.cell_mono),
                     Paragraph("—" if gain is None else f"{gain:+.2f}", st.cell_mono)])
    parts = [70, 80, 110, 70, 70, 110]
    scale = width / sum(parts)
    return [grid_table(rows, [p * scale for p in parts]), Spacer(1, 2),
            Paragraph("Net benefit = true positives per patient minus false positives per "
                      "patient weighted by t / (1 − t) at threshold t. * How many more people "
                      "with the outcome per 100 patients are found, net of unnecessary "
                      "interventions, by deciding with the model rather than by the better of "
                      "treating all or treating none; negative means the model does worse.",
                      st.grey)]


def decision_story(ctx: Context) -> list[Flowable]:
    """A decision curve with treat-all and treat-none for each evidence set that has one."""
    st, d = ctx.st, ctx.calc.decision
    low, high = d.reasonable_range
    out: list[Flowable] = [Paragraph(
        f"Net benefit of deciding by the model, of treating everyone and of treating no one, "
        f"over the thresholds the authors consider reasonable ({percent(low)} to "
        f"{percent(high)}); the dashed line marks the default threshold "
        f"({percent(d.default_threshold)}). A model is useful at a threshold only where its "
        "curve lies above both alternatives. Method: Vickers and Elkin's decision curve "
        "analysis.", st.body)]
    sets = [e for e in ctx.calc.evidence if e.raw.get("decision_curve")]
    if not sets:
        return [*out, Paragraph("No decision curve is attached.", st.body)]
    for ev in sets:
        dc = ev.raw["decision_curve"]
        rows = _kept(dc, ("thresholds", "model", "treat_all"))
        band = all(_finite(dc[k][i]) for k in ("model_low", "model_high") if k in dc
                   for i in rows)
        try:
            fig = decision_curve_figure(
                _pick(dc, "thresholds", rows) or [], _pick(dc, "model", rows) or [],
                _pick(dc, "treat_all", rows) or [],
                model_low=_pick(dc, "model_low", rows) if band else None,
                model_high=_pick(dc, "model_high", rows) if band else None,
                reasonable_range=d.reasonable_range, threshold=d.default_threshold,
                synthetic=ctx.synthetic, medium="print")
            figure: Flowable = _image(fig)
        except PlotInputError as exc:
            figure = _failed(exc, st)
        block = [Paragraph(esc(ev.label), st.h2), figure, Spacer(1, 3),
                 *_nb_table(ctx, ev, ctx.width)]
        out = _with_block(out, block)
    return out
