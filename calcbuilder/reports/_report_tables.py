"""Performance sections of the evidence report: apparent, bootstrap, external,
imported and recalibration (private).

Metrics are rendered generically: whatever names an evidence set holds are
shown, known names with their label and ideal value (``_report_text``), new
names with a label made from the name. A bootstrap set may store the apparent
value and the optimism beside each corrected metric (``auc_apparent``,
``auc_optimism``) or the corrected value beside the apparent one
(``auc_corrected``); without either, the apparent value is taken from the
apparent evidence set on the same data (same SHA-256, else same dataset name),
and the optimism is their difference.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from reportlab.platypus import Flowable, KeepTogether, Paragraph, Spacer

from ..calc.evidence_sets import EvidenceSet
from ._report_style import Context, ReportStyles, esc, grid_table
from ._report_text import (
    METRIC_IDEALS,
    METRIC_LABELS,
    exact,
    integer,
    interval_text,
    metric_label,
    metric_number,
    percent,
)

__all__ = [
    "apparent_story",
    "bootstrap_story",
    "external_story",
    "imported_story",
    "metric_names",
    "metrics_table",
    "recalibration_story",
    "same_data",
]

COMPANIONS = ("_apparent", "_optimism", "_corrected")
B_KEYS = ("bootstrap", "B", "b", "replicates", "n_bootstrap", "bootstrap_replicates",
          "resamples", "n_resamples")


def metric_names(metrics: Mapping[str, Any], *, skip_companions: bool = True) -> list[str]:
    """Metric names in reading order: known ones in our order, then the rest alphabetically."""
    names = [n for n in metrics if not (skip_companions and n.endswith(COMPANIONS)
                                        and n.rsplit("_", 1)[0] in metrics)]
    known = [n for n in METRIC_LABELS if n in names]
    return known + sorted(n for n in names if n not in METRIC_LABELS)


def _extra(metric: Mapping[str, Any]) -> str:
    parts = []
    if metric.get("se") is not None:
        parts.append(f"SE {metric_number(metric['se'])}")
    if metric.get("p_value") is not None:
        p = metric["p_value"]
        parts.append("p &lt; 0.001" if p < 0.001 else f"p = {p:.3f}")
    if metric.get("note"):
        parts.append(esc(str(metric["note"])))
    return "; ".join(parts) or ""


def metrics_table(ev: EvidenceSet, st: ReportStyles, width: float) -> Flowable:
    """Measure, estimate, 95% CI, ideal value and notes for every metric of ``ev``."""
    metrics = ev.raw.get("metrics") or {}
    head = ["Measure", "Estimate", "95% CI", "Ideal", "Notes"]
    rows: list[list[Flowable]] = [[Paragraph(h, st.cell_bold) for h in head]]
    for name in metric_names(metrics, skip_companions=ev.kind == "bootstrap"):
        m = metrics[name]
        rows.append([Paragraph(esc(metric_label(name)), st.cell),
                     Paragraph(metric_number(m.get("value")), st.cell_mono),
                     Paragraph(interval_text(m), st.cell_mono),
                     Paragraph(METRIC_IDEALS.get(name, "—"), st.cell),
                     Paragraph(_extra(m), st.cell)])
    if len(rows) == 1:
        rows.append([Paragraph("No metrics are stored in this evidence set.", st.cell)]
                    + [Paragraph("", st.cell)] * 4)
    parts = [160, 58, 100, 82, 115]
    scale = width / sum(parts)
    return grid_table(rows, [p * scale for p in parts])


def _dataset_line(ev: EvidenceSet, st: ReportStyles) -> Paragraph:
    ds = ev.raw["dataset"]
    period = f", {esc(ds['period'])}" if ds.get("period") else ""
    return Paragraph(f"Data: {esc(ds['name'])}{period}; {integer(ev.n)} patients, "
                     f"{integer(ev.events)} with the outcome ({percent(ev.prevalence)}).",
                     st.small)


def _notes(ev: EvidenceSet, st: ReportStyles) -> list[Flowable]:
    return [Paragraph(f"Note: {esc(n)}", st.grey) for n in ev.raw.get("notes") or ()]


def _sets_story(ctx: Context, kind: str, none_text: str) -> list[Flowable]:
    sets = [e for e in ctx.calc.evidence if e.kind == kind]
    if not sets:
        return [Paragraph(none_text, ctx.st.body)]
    out: list[Flowable] = []
    for ev in sets:
        out += [KeepTogether([Paragraph(esc(ev.label), ctx.st.h2), _dataset_line(ev, ctx.st),
                              metrics_table(ev, ctx.st, ctx.width)]),
                Spacer(1, 2), *_notes(ev, ctx.st)]
    return out


def apparent_story(ctx: Context) -> list[Flowable]:
    """Performance on the data the model was developed on."""
    out: list[Flowable] = [Paragraph(
        "Apparent performance is measured on the same data the model was fitted to, so it is "
        "optimistic: the model has partly adapted to chance features of those data. Read it "
        "together with the optimism-corrected and external results that follow.", ctx.st.body)]
    return out + _sets_story(ctx, "apparent",
                             "No apparent-performance evidence set is attached.")


def same_data(a: EvidenceSet, b: EvidenceSet) -> bool:
    """True when two sets describe the same dataset (same SHA-256, else same name)."""
    da, db = a.raw["dataset"], b.raw["dataset"]
    if da.get("sha256") and db.get("sha256"):
        return bool(da["sha256"] == db["sha256"])
    return bool(da["name"] == db["name"])


def _value(metric: Mapping[str, Any] | None) -> float | None:
    return None if metric is None else metric.get("value")


def _triplet(name: str, metrics: Mapping[str, Any], apparent: EvidenceSet | None
             ) -> tuple[float | None, float | None, Mapping[str, Any], bool]:
    """(apparent, optimism, corrected metric, apparent borrowed from the apparent set)."""
    borrowed = False
    if f"{name}_corrected" in metrics:
        app, corrected = _value(metrics[name]), metrics[f"{name}_corrected"]
    else:
        corrected = metrics[name]
        app = _value(metrics.get(f"{name}_apparent"))
        if app is None and apparent is not None:
            app = _value(apparent.metric(name))
            borrowed = app is not None
    optimism = _value(metrics.get(f"{name}_optimism"))
    if optimism is None and app is not None and corrected.get("value") is not None:
        optimism = app - corrected["value"]
    return app, optimism, corrected, borrowed


def _resampling_line(ev: EvidenceSet) -> str:
    settings = ev.raw.get("settings") or {}
    b = next((settings[k] for k in B_KEYS if settings.get(k) is not None), None)
    seed = settings.get("seed")
    parts = [f"B = {integer(b)} bootstrap resamples" if b is not None
             else "number of resamples not recorded",
             f"random seed {exact(seed) if isinstance(seed, int | float) else esc(str(seed))}"
             if seed is not None else "random seed not recorded"]
    others = [f"{esc(k)} = {esc(str(v))}" for k, v in settings.items()
              if k not in (*B_KEYS, "seed")]
    return "; ".join(parts + others) + "."


def _bootstrap_table(ctx: Context, ev: EvidenceSet) -> list[Flowable]:
    st = ctx.st
    metrics = ev.raw.get("metrics") or {}
    apparent = next((a for a in reversed(ctx.calc.evidence)
                     if a.kind == "apparent" and same_data(a, ev)), None)
    head = ["Measure", "Apparent", "Optimism", "Corrected", "95% CI (corrected)"]
    rows: list[list[Flowable]] = [[Paragraph(h, st.cell_bold) for h in head]]
    borrowed = False
    for name in metric_names(metrics):
        app, opt, corrected, took = _triplet(name, metrics, apparent)
        borrowed = borrowed or took
        rows.append([Paragraph(esc(metric_label(name)), st.cell),
                     Paragraph(metric_number(app), st.cell_mono),
                     Paragraph(metric_number(opt), st.cell_mono),
                     Paragraph(metric_number(corrected.get("value")), st.cell_mono),
                     Paragraph(interval_text(corrected), st.cell_mono)])
    parts = [190, 70, 70, 70, 115]
    scale = ctx.width / sum(parts)
    out: list[Flowable] = [grid_table(rows, [p * scale for p in parts]), Spacer(1, 2)]
    if borrowed and apparent is not None:
        out.append(Paragraph(f"Apparent values not stored with the resampling results are "
                             f"taken from ‘{esc(apparent.label)}’ (same data).", st.grey))
    return out


def bootstrap_story(ctx: Context) -> list[Flowable]:
    """Harrell's bootstrap optimism correction: apparent, optimism and corrected values."""
    st = ctx.st
    out: list[Flowable] = [Paragraph(
        "The whole model-building procedure is repeated on bootstrap resamples of the "
        "development data; each refitted model is scored on its resample and on the original "
        "data, and the average difference (the optimism) is subtracted from the apparent "
        "performance (Harrell's bootstrap optimism correction).", st.body)]
    sets = [e for e in ctx.calc.evidence if e.kind == "bootstrap"]
    if not sets:
        return [*out, Paragraph("No bootstrap internal validation is attached, so the "
                                "apparent performance has not been corrected for optimism.",
                                st.body)]
    for ev in sets:
        out += [KeepTogether([Paragraph(esc(ev.label), st.h2), _dataset_line(ev, st),
                              Paragraph(_resampling_line(ev), st.small),
                              *_bootstrap_table(ctx, ev)]), *_notes(ev, st)]
    return out


def external_story(ctx: Context) -> list[Flowable]:
    """Each external validation, as computed with the model before any recalibration."""
    return _sets_story(ctx, "external", "No external validation is attached: the model has not "
                       "been shown to work in data other than those it was developed on.")


def imported_story(ctx: Context) -> list[Flowable]:
    """Evidence computed elsewhere and imported with its stated source."""
    out: list[Flowable] = [Paragraph(
        "These results were computed outside calcbuilder and imported as stated by their "
        "source; calcbuilder has not recomputed them.", ctx.st.body)]
    return out + _sets_story(ctx, "imported", "")


def _before_after(ctx: Context, after: EvidenceSet) -> list[Flowable]:
    st = ctx.st
    before = next((e for e in reversed(ctx.calc.evidence)
                   if e.kind == "external" and same_data(e, after)), None)
    if before is None:
        return [_dataset_line(after, st), metrics_table(after, st, ctx.width)]
    m_before, m_after = before.raw.get("metrics") or {}, after.raw.get("metrics") or {}
    head = ["Measure", f"Before: {esc(before.label)}", "After recalibration", "Ideal"]
    rows: list[list[Flowable]] = [[Paragraph(h, st.cell_bold) for h in head]]
    for name in metric_names({**m_before, **m_after}):
        cells = []
        for m in (m_before.get(name), m_after.get(name)):
            text = "—" if m is None else metric_number(m.get("value"))
            if m is not None and m.get("low") is not None and m.get("high") is not None:
                text += f" ({interval_text(m)})"
            cells.append(Paragraph(text, st.cell_mono))
        rows.append([Paragraph(esc(metric_label(name)), st.cell), *cells,
                     Paragraph(METRIC_IDEALS.get(name, "—"), st.cell)])
    parts = [170, 130, 130, 70]
    scale = ctx.width / sum(parts)
    return [_dataset_line(after, st), grid_table(rows, [p * scale for p in parts])]


def _method_text(method: str, a: float, b: float) -> str:
    if method == "intercept":
        return (f"the intercept was re-estimated with the slope fixed at 1 (recalibration in "
                f"the large): η′ = a + η with a = {exact(a)}")
    return (f"the intercept and slope of the linear predictor were re-estimated (logistic "
            f"recalibration): η′ = a + b · η with a = {exact(a)} and b = {exact(b)}")


def recalibration_story(ctx: Context) -> list[Flowable]:
    """What recalibration was done, on which data, and performance before and after."""
    st, recal = ctx.st, ctx.calc.model.recalibration
    after_sets = [e for e in ctx.calc.evidence if e.kind == "recalibrated"]
    if recal is None and not after_sets:
        return [Paragraph("The model has not been recalibrated: it is used as developed.",
                          st.body)]
    out: list[Flowable] = []
    if recal is not None:
        size = (f" ({integer(recal.n)} patients" + (f", {integer(recal.events)} with the "
                                                     f"outcome)" if recal.events is not None
                                                     else ")")) if recal.n is not None else ""
        out.append(Paragraph(f"<b>What was done.</b> On {esc(recal.dataset or 'unstated data')}"
                             f"{size}, {_method_text(recal.method, recal.intercept, recal.slope)}"
                             ". The equation in the model section includes this step.", st.body))
        out.append(Paragraph("Evidence sets of kind apparent, bootstrap and external describe "
                             "the model before this recalibration unless their labels say "
                             "otherwise.", st.grey))
    if not after_sets:
        return [*out, Paragraph("No evidence of performance after recalibration is attached.",
                                st.body)]
    for ev in after_sets:
        out += [KeepTogether([Paragraph(esc(ev.label), st.h2), *_before_after(ctx, ev)]),
                Spacer(1, 2), *_notes(ev, st)]
    return out
