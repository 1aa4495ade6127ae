"""Front sections of the evidence report: title block, purpose, data, inputs (private).

Each ``*_story`` function takes a :class:`~._report_style.Context` and returns
the flowables of one section body (the document adds the numbered heading).
"""

from __future__ import annotations

import contextlib
import json

from reportlab.lib import colors
from reportlab.platypus import Flowable, KeepTogether, Paragraph, Spacer, Table, TableStyle

from .. import __version__
from ..calc.evidence_sets import EvidenceSet
from ..calc.inputs import InputSpec
from ._report_style import Context, bullets, esc, facts_table, grid_table, notice, para
from ._report_text import (
    KIND_WORDS,
    STATE_WORDS,
    SYNTHETIC_MARK,
    exact,
    integer,
    percent,
    plain,
)

__all__ = ["data_story", "inputs_story", "scope_story", "synthetic_band", "title_story"]

REPORT_PURPOSE = (
    "This report sets out what the calculator file contains and the evidence attached to it, "
    "for reviewers and governance. It gives the complete model (equation, coefficients, "
    "transforms and test vectors) so that anyone can re-implement it and check the numbers. "
    "The calculator's estimates support clinical decisions; they do not replace clinical "
    "judgement, the patient's own values or local protocols.")


def synthetic_band(ctx: Context) -> list[Flowable]:
    """The dark 'synthetic' band for demonstration material (nothing otherwise)."""
    if not ctx.synthetic:
        return []
    table = Table([[Paragraph(f"{SYNTHETIC_MARK} · every number in this report comes from "
                              "made-up demonstration data", ctx.st.band)]],
                  colWidths=[ctx.width])
    table.setStyle(TableStyle([("BACKGROUND", (0, 0), (-1, -1), colors.Color(0.15, 0.15, 0.15)),
                               ("TOPPADDING", (0, 0), (-1, -1), 5),
                               ("BOTTOMPADDING", (0, 0), (-1, -1), 6),
                               ("LEFTPADDING", (0, 0), (-1, -1), 7)]))
    return [table, Spacer(1, 8)]


def _signature_pairs(ctx: Context) -> list[tuple[str, Flowable | str]]:
    v = ctx.loaded.verification
    st = ctx.st
    pairs: list[tuple[str, Flowable | str]] = [
        ("File fingerprint (SHA-256)", Paragraph(ctx.loaded.fingerprint, st.cell_mono)),
        ("Signature", Paragraph(f"<b>{esc(STATE_WORDS[v.state])}</b>. {esc(v.message)}",
                                st.cell)),
    ]
    if v.signer:
        pairs.append(("Signer (trusted list)", v.signer))
    if v.key_fingerprint:
        pairs.append(("Signing key fingerprint", Paragraph(v.key_fingerprint, st.cell_mono)))
    if v.signed_at:
        pairs.append(("Signed at (as stated)", v.signed_at))
    return pairs


def title_story(ctx: Context) -> list[Flowable]:
    """Title, key facts, signature state and what the report is for."""
    about, st = ctx.calc.about, ctx.st
    out = synthetic_band(ctx)
    out += [para(about.title, st.title),
            para(f"Evidence report · calculator version {about.version}", st.subtitle)]
    review = about.review_by.isoformat()
    if ctx.loaded.expired:
        review += " — PASSED: the authors asked for a review by this date"
    pairs: list[tuple[str, Flowable | str]] = [
        ("Intended use", about.intended_use), ("Population", about.population),
        ("Outcome", about.outcome), ("Prediction horizon", about.horizon),
        ("Authors", "; ".join(about.authors) or "not stated"),
        ("Organisation", about.organisation or "not stated")]
    if about.contact:
        pairs.append(("Contact", about.contact))
    pairs += [("Released", about.released.isoformat()), ("Review by", review)]
    pairs += _signature_pairs(ctx)
    if ctx.synthetic:
        pairs.append(("Data", Paragraph(f"<b>{SYNTHETIC_MARK}</b>: synthetic demonstration "
                                        "material.", st.cell)))
    name = ctx.loaded.path.name if ctx.loaded.path is not None else "not read from a file"
    pairs += [("Calculator file", name),
              ("Report made", f"{ctx.generated_at:%Y-%m-%d %H:%M} by calcbuilder {__version__}")]
    out += [facts_table(pairs, ctx.width, st, label_width=130), Spacer(1, 8)]
    return out + notice([esc(REPORT_PURPOSE)], ctx.width, st, strong=True)


def _decision_lines(ctx: Context) -> list[str]:
    d = ctx.calc.decision
    low, high = d.reasonable_range
    lines = [f"Default decision threshold: <b>{percent(d.default_threshold)}</b> risk "
             f"(stored as {exact(d.default_threshold)}); thresholds the authors consider "
             f"reasonable: {percent(low)} to {percent(high)}."]
    if d.rationale:
        lines.append("Why: " + esc(d.rationale))
    if d.bands:
        start = 0.0
        parts = []
        for band in d.bands:
            parts.append(f"{esc(band.label)} ({percent(start)} to {percent(band.upper)})")
            start = band.upper
        lines.append("Named risk bands: " + "; ".join(parts) + ".")
    return lines


def _sentence(text: str) -> str:
    """``text`` escaped, with a full stop unless it already ends with one."""
    text = text.strip()
    return esc(text if text.endswith((".", "!", "?")) else text + ".")


def _model_sentence(ctx: Context, family: str) -> str:
    model = ctx.calc.model
    plus = " plus an intercept" if model.family == "logistic" else ""
    recal = ", recalibrated after development" if model.recalibration else ""
    return (f"<b>Model.</b> A {family} with {len(model.terms)} terms and {model.n_columns} "
            f"coefficients{plus}, reading {len(model.inputs_read)} of the "
            f"{len(ctx.calc.inputs)} inputs{recal}.")


def scope_story(ctx: Context) -> list[Flowable]:
    """Intended use, who it is for, who it is not for, and the decision it supports."""
    about, st, model = ctx.calc.about, ctx.st, ctx.calc.model
    family = ("logistic regression" if model.family == "logistic" else
              "survival model evaluated at a fixed horizon (complementary log-log link)")
    out: list[Flowable] = [
        Paragraph(f"<b>Intended use.</b> {_sentence(about.intended_use)}", st.body),
        Paragraph(f"<b>Population.</b> {_sentence(about.population)}", st.body),
        Paragraph(f"<b>Outcome.</b> {_sentence(about.outcome)} <b>Prediction horizon.</b> "
                  f"{_sentence(about.horizon)}", st.body),
        Paragraph(_model_sentence(ctx, family), st.body),
        Paragraph("<b>Not for use</b> (exclusions stated by the authors):", st.body)]
    out += bullets([esc(e) for e in about.exclusions] or ["No exclusions are stated."], st.body)
    out.append(Paragraph("<b>The decision it supports.</b>", st.body))
    out += bullets(_decision_lines(ctx), st.body)
    if about.references:
        out.append(Paragraph("<b>References given by the authors.</b>", st.body))
        out += bullets([esc(r) for r in about.references], st.small)
    return out


_LONG = 160


def _settings_parts(ev: EvidenceSet) -> tuple[str, list[tuple[str, str]]]:
    """Short settings as one 'key = value; ...' line, and long ones apart."""
    short, long = [], []
    for key, value in (ev.raw.get("settings") or {}).items():
        text = exact(value) if isinstance(value, float | int) else str(value)
        if len(text) > _LONG:
            long.append((key, text))
        else:
            short.append(f"{key} = {text}")
    return "; ".join(short), long


def _long_setting(key: str, text: str, ctx: Context) -> list[Flowable]:
    """A long recorded setting in small mono type; JSON gets spaces so it can wrap."""
    with contextlib.suppress(ValueError):
        text = json.dumps(json.loads(text), ensure_ascii=False, separators=(", ", ": "))
    cut = len(text) > _LONG_MAX
    shown = esc(text[:_LONG_MAX]) + (f" … ({len(text):,} characters in all; the file holds "
                                     "the rest)" if cut else "")
    return [Paragraph(f"Recorded setting ‘{esc(key)}’:", ctx.st.grey),
            Paragraph(shown, ctx.st.cell_tiny)]


_LONG_MAX = 6000


def _source_card(ctx: Context, ev: EvidenceSet) -> list[Flowable]:
    ds, st = ev.raw["dataset"], ctx.st
    pairs: list[tuple[str, Flowable | str]] = [
        ("Kind", KIND_WORDS.get(ev.kind, ev.kind)), ("Dataset", ds["name"])]
    for key, label in (("period", "Period"), ("population", "Population")):
        if ds.get(key):
            pairs.append((label, ds[key]))
    pairs.append(("Patients", integer(ds["n"])))
    pairs.append(("With the outcome", f"{integer(ds['events'])} ({percent(ev.prevalence)})"))
    if ds.get("excluded") is not None:
        pairs.append(("Excluded before analysis", integer(ds["excluded"])))
    if ds.get("sha256"):
        pairs.append(("Data file SHA-256", Paragraph(ds["sha256"], st.cell_mono)))
    if ds.get("synthetic"):
        pairs.append(("Synthetic data", "yes: made-up data, not real patients"))
    for key, label in (("source", "Computed by / source"), ("created", "Created")):
        if ev.raw.get(key):
            pairs.append((label, str(ev.raw[key])))
    settings, long = _settings_parts(ev)
    if settings:
        pairs.append(("Settings", settings))
    head = Paragraph(f"{esc(ev.label)} <font color='#555555'>(evidence set "
                     f"‘{esc(ev.id)}’)</font>", st.h2)
    out: list[Flowable] = [KeepTogether([head, facts_table(pairs, ctx.width, st)])]
    for key, text in long:
        out += _long_setting(key, text, ctx)
    return out


def data_story(ctx: Context) -> list[Flowable]:
    """One card per evidence set: the dataset and how the evidence was made."""
    if not ctx.calc.evidence:
        return [Paragraph("<b>No evidence is attached to this calculator file.</b> Nothing in "
                          "it shows how well the model separates people with and without the "
                          "outcome, how close its estimates are to observed risks, or whether "
                          "deciding by it helps at any threshold. Reviewers should ask the "
                          "authors for validation results before the calculator is used.",
                          ctx.st.body)]
    out: list[Flowable] = [Paragraph(
        "Each evidence set reports the model's performance on one dataset. The sections that "
        "follow refer to them by their labels.", ctx.st.body)]
    for ev in ctx.calc.evidence:
        out += _source_card(ctx, ev)
    return out


def _unit_text(spec: InputSpec) -> str:
    if spec.kind != "number":
        return "—"
    text = esc(spec.unit) if spec.unit else "(no unit)"
    for alt in spec.alt_units:
        offset = f" + {plain(alt.offset)}" if alt.offset else ""
        text += (f"<br/>also {esc(alt.unit)}: {esc(spec.unit or 'value')} = "
                 f"{esc(alt.unit)} × {plain(alt.factor)}{offset}")
    return text


def _kind_text(spec: InputSpec) -> str:
    words = {"number": "number", "yes_no": "yes / no", "choice": "choice"}[spec.kind]
    if spec.kind == "number" and spec.decimals is not None:
        words += f", {spec.decimals} decimal{'s' if spec.decimals != 1 else ''}"
    if not spec.required:
        words += ", optional"
    return words


def _range_text(spec: InputSpec, which: str) -> str:
    rng = spec.limits if which == "limits" else spec.developed
    return "—" if rng is None else f"{plain(rng.low)} to {plain(rng.high)}"


def _notes_text(spec: InputSpec, used: bool) -> str:
    parts = []
    if spec.kind == "choice":
        parts.append("<br/>".join(f"{esc(c.value)}: {esc(c.label)}" for c in spec.choices))
    if spec.kind == "yes_no":
        parts.append("yes = 1, no = 0 in indicator columns")
    if spec.help:
        parts.append(f"<font color='#555555'>{esc(spec.help)}</font>")
    if not used:
        parts.append("<b>not used by the model</b>")
    return "<br/>".join(parts) or "—"


def inputs_story(ctx: Context) -> list[Flowable]:
    """Every input with its id, kind, units, limits, developed range and choices."""
    st = ctx.st
    used = set(ctx.calc.model.inputs_read)
    head = ["Id", "Label", "Kind", "Unit (canonical) and other units", "Hard<br/>limits",
            "Developed<br/>range", "Choices and notes"]
    rows: list[list[Flowable]] = [[Paragraph(h, st.cell_bold) for h in head]]
    for spec in ctx.calc.inputs:
        label = esc(spec.label) + (f"<br/><font color='#555555'>{esc(spec.group)}</font>"
                                   if spec.group else "")
        rows.append([Paragraph(esc(spec.id), st.cell_mono), Paragraph(label, st.cell),
                     Paragraph(_kind_text(spec), st.cell), Paragraph(_unit_text(spec), st.cell),
                     Paragraph(_range_text(spec, "limits"), st.cell),
                     Paragraph(_range_text(spec, "developed"), st.cell),
                     Paragraph(_notes_text(spec, spec.id in used), st.cell)])
    parts = [58, 90, 48, 96, 50, 54, 119]
    scale = ctx.width / sum(parts)
    out: list[Flowable] = [
        Paragraph(f"The {len(ctx.calc.inputs)} patient values the calculator asks for, in the "
                  "order of the clinic form. The id is the name used in the equation and in "
                  "the test vectors.", st.body),
        grid_table(rows, [p * scale for p in parts]), Spacer(1, 3)]
    out.append(Paragraph(
        "Values outside the hard limits are refused as implausible. Values outside the "
        "developed range (the range in the development data) are accepted with a warning that "
        "the estimate is an extrapolation. Numbers entered in another unit are converted to the "
        "canonical unit by the formula shown before any check or calculation.", st.grey))
    return out
