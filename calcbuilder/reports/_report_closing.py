"""Closing sections of the evidence report (private): reclassification, sample size,
limitations and cautions, test vectors, checksum and signature.

The reclassification block of an evidence set is free-form (numbers, strings,
arrays); numbers are grouped by name so that ``idi``, ``idi_low``, ``idi_high``,
``idi_se`` and ``idi_p_value`` print as one row, with our label when we know
the name and a readable one made from it when we do not.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from typing import Any

from reportlab.platypus import Flowable, Paragraph, Spacer

from ..calc.canonical import SIGNATURE_KEY
from ..calc.signing import TrustState
from ._report_style import Context, bullets, esc, facts_table, grid_table, notice
from ._report_text import (
    STATE_WORDS,
    SYNTHETIC_MARK,
    integer,
    metric_label,
    metric_number,
    percent,
)

__all__ = ["RECLASSIFICATION_CAUTION", "limitations_story", "reclassification_story",
           "sample_size_story", "signature_story"]

RECLASS_LABELS = {
    "nri_events": "NRI, people with the outcome",
    "nri_nonevents": "NRI, people without the outcome",
    "nri_total": "NRI, total (categorical)",
    "nri": "NRI, total (categorical)",
    "continuous_nri": "Continuous (category-free) NRI",
    "nri_continuous": "Continuous (category-free) NRI",
    "continuous_nri_events": "Continuous NRI, people with the outcome",
    "continuous_nri_nonevents": "Continuous NRI, people without the outcome",
    "idi": "Integrated discrimination improvement (IDI)",
    "auc_difference": "AUC difference (this model − reference)",
    "delta_auc": "AUC difference (this model − reference)",
    "auc_model": "AUC of this model",
    "auc_new": "AUC of this model",
    "auc_reference": "AUC of the reference model",
    "auc_old": "AUC of the reference model",
}
_SUFFIXES = ("low", "high", "se", "p_value", "p", "z")
_TEXT_KEYS = ("reference", "reference_model", "reference_label")
RECLASSIFICATION_CAUTION = (
    "Net reclassification and discrimination-improvement indices can reward a miscalibrated "
    "model: a model that simply over- or under-estimates risk can move people across the "
    "cut-offs and score a positive NRI or IDI without being more useful. Read them together "
    "with the calibration results and the decision curves.")
_SAMPLE_SIZE = re.compile(r"sample[ _-]?size|events[ _-]per|epp\b|epv\b|minimum[ _-]n\b",
                          re.IGNORECASE)


def _split(block: Mapping[str, Any]) -> tuple[dict[str, dict[str, Any]], list[str]]:
    """Numbers grouped by base name ({'idi': {'value':..,'low':..}}) and other lines."""
    numbers = {k: v for k, v in block.items() if isinstance(v, int | float)
               and not isinstance(v, bool)}
    groups: dict[str, dict[str, Any]] = {}
    for key, value in numbers.items():
        base, _, suffix = key.rpartition("_")
        if key.endswith("_p_value"):
            base, suffix = key[: -len("_p_value")], "p_value"
        if base in numbers and suffix in _SUFFIXES:
            groups.setdefault(base, {})[suffix] = value
        else:
            groups.setdefault(key, {})["value"] = value
    others = []
    for key, value in block.items():
        if key in numbers or key in _TEXT_KEYS or key == "cuts":
            continue
        others.append(f"{esc(metric_label(key))}: {esc(str(value))}")
    return groups, others


def _reclass_rows(ctx: Context, groups: Mapping[str, Mapping[str, Any]]) -> list[list[Any]]:
    st = ctx.st
    head = ["Measure", "Estimate", "95% CI", "SE", "p-value"]
    rows: list[list[Any]] = [[Paragraph(h, st.cell_bold) for h in head]]
    order = [k for k in RECLASS_LABELS if k in groups] + sorted(
        k for k in groups if k not in RECLASS_LABELS)
    for key in order:
        g = groups[key]
        ci = ("—" if g.get("low") is None or g.get("high") is None
              else f"{metric_number(g['low'])} to {metric_number(g['high'])}")
        p = g.get("p_value", g.get("p"))
        rows.append([Paragraph(esc(RECLASS_LABELS.get(key, metric_label(key))), st.cell),
                     Paragraph(metric_number(g.get("value")), st.cell_mono),
                     Paragraph(ci, st.cell_mono), Paragraph(metric_number(g.get("se")),
                                                            st.cell_mono),
                     Paragraph("—" if p is None else ("&lt; 0.001" if p < 0.001 else
                                                      f"{p:.3f}"), st.cell_mono)])
    return rows


def reclassification_story(ctx: Context) -> list[Flowable]:
    """NRI, IDI and AUC difference against the reference model, with the caution."""
    st = ctx.st
    sets = [e for e in ctx.calc.evidence if e.raw.get("reclassification")]
    if not sets:
        return [Paragraph("No comparison with a reference model is attached.", st.body)]
    out: list[Flowable] = []
    for ev in sets:
        block = ev.raw["reclassification"]
        reference = next((str(block[k]) for k in _TEXT_KEYS if block.get(k)), "not named")
        groups, others = _split(block)
        out.append(Paragraph(f"{esc(ev.label)}: compared with {esc(reference)}", st.h2))
        cuts = block.get("cuts")
        if isinstance(cuts, list | tuple) and cuts:
            out.append(Paragraph("Risk categories for the categorical NRI cut at "
                                 + ", ".join(percent(c) for c in cuts) + ".", st.small))
        parts = [200, 70, 110, 60, 60]
        scale = ctx.width / sum(parts)
        out.append(grid_table(_reclass_rows(ctx, groups), [p * scale for p in parts]))
        out += [Paragraph(line, st.grey) for line in others]
        out.append(Spacer(1, 3))
    return out + notice(["<b>Caution.</b> " + esc(RECLASSIFICATION_CAUTION)], ctx.width, st)


def _recorded(ctx: Context) -> list[tuple[str, list[str]]]:
    found = []
    for ev in ctx.calc.evidence:
        settings = ev.raw.get("settings") or {}
        lines = [f"{esc(metric_label(k))}: {esc(str(v))}" for k, v in settings.items()
                 if _SAMPLE_SIZE.search(k)]
        lines += [esc(n) for n in ev.raw.get("notes") or () if _SAMPLE_SIZE.search(n)]
        if lines:
            found.append((ev.label, lines))
    return found


def sample_size_story(ctx: Context) -> list[Flowable]:
    """What the evidence records about sample-size adequacy (or that nothing was recorded)."""
    st = ctx.st
    out: list[Flowable] = []
    recorded = _recorded(ctx)
    for label, lines in recorded:
        out += [Paragraph(esc(label), st.h2), *bullets(lines, st.body)]
    if not recorded:
        out.append(Paragraph("No sample-size assessment is recorded in this calculator file's "
                             "evidence. Whether the development data were large enough (for "
                             "example by the criteria of Riley and colleagues) cannot be judged "
                             "from this report.", st.body))
    dev = next((e for e in reversed(ctx.calc.evidence) if e.kind == "apparent"), None)
    if dev is not None:
        k = ctx.calc.model.n_columns
        out.append(Paragraph(
            f"For orientation: {esc(dev.label)} had {integer(dev.events)} patients with the "
            f"outcome and {integer(dev.n - dev.events)} without, for {k} coefficients "
            f"(excluding the intercept): {min(dev.events, dev.n - dev.events) / k:.1f} per "
            "coefficient in the smaller group. This ratio alone does not establish "
            "adequacy.", st.small))
    return out


def _automatic_cautions(ctx: Context) -> list[str]:
    calc, out = ctx.calc, []
    if ctx.synthetic:
        out.append(f"<b>{SYNTHETIC_MARK}.</b> This calculator and its evidence are "
                   "demonstration material built from made-up data.")
    if ctx.loaded.expired:
        out.append(f"The review-by date ({calc.about.review_by.isoformat()}) has passed.")
    if ctx.loaded.state is not TrustState.VERIFIED:
        out.append("Signature: " + esc(STATE_WORDS[ctx.loaded.state]) + ".")
    kinds = {e.kind for e in calc.evidence}
    if "external" not in kinds:
        out.append("No external validation is attached.")
    if calc.model.covariance is None:
        out.append("No covariance matrix: the calculator cannot show an interval around a "
                   "patient's risk.")
    if calc.model.family != "logistic":
        out.append("Risk intervals treat the baseline survival as known exactly, so they are "
                   "somewhat too narrow.")
    out.append("Inputs outside their developed range give extrapolated estimates; the "
               "calculator warns when this happens.")
    return out


def limitations_story(ctx: Context) -> list[Flowable]:
    """The authors' cautions and exclusions, the evidence notes and our own checks."""
    st, calc = ctx.st, ctx.calc
    out: list[Flowable] = [Paragraph("Cautions stated by the authors", st.h2)]
    out += bullets([esc(c) for c in calc.cautions], st.body)
    out.append(Paragraph("Not for use in", st.h2))
    out += bullets([esc(e) for e in calc.about.exclusions] or ["No exclusions are stated."],
                   st.body)
    notes = [f"{esc(ev.label)}: {esc(n)}" for ev in calc.evidence
             for n in ev.raw.get("notes") or ()]
    out.append(Paragraph("Notes attached to the evidence", st.h2))
    out += bullets(notes or ["No notes are attached to the evidence."], st.body)
    out.append(Paragraph("Found while preparing this report", st.h2))
    out += bullets(_automatic_cautions(ctx), st.body)
    out.append(Spacer(1, 4))
    return out + notice(["Every estimate from this calculator supports, and does not replace, "
                         "clinical judgement, the patient's own values and local protocols."],
                        ctx.width, st, strong=True)


def signature_story(ctx: Context) -> list[Flowable]:
    """The fingerprint, how it is made, and the signature in full."""
    st, v = ctx.st, ctx.loaded.verification
    raw = ctx.calc.signature if isinstance(ctx.calc.signature, Mapping) else None
    pairs: list[tuple[str, Flowable | str]] = [
        ("File fingerprint (SHA-256)", Paragraph(ctx.loaded.fingerprint, st.cell_mono)),
        ("How it is computed", f"SHA-256 of the RFC 8785 canonical JSON of the whole file "
                               f"except its ‘{SIGNATURE_KEY}’ section"),
        ("Signature state", Paragraph(f"<b>{esc(STATE_WORDS[v.state])}</b>", st.cell)),
        ("What it means", v.message)]
    if raw is not None:
        for key, label in (("algorithm", "Algorithm"), ("key_fingerprint", "Key fingerprint"),
                           ("public_key", "Public key (base64)"),
                           ("signed_at", "Signed at (as stated; not covered by the signature)"),
                           ("value", "Signature value (base64)")):
            if raw.get(key):
                pairs.append((label, Paragraph(esc(str(raw[key])), st.cell_mono)))
    if v.signer:
        pairs.append(("Signer on the trusted list", v.signer))
    out: list[Flowable] = [facts_table(pairs, ctx.width, st, label_width=140), Spacer(1, 4)]
    out.append(Paragraph(
        "To check a copy of the file, run <font name='DejaVuSansMono'>calcbuilder check FILE"
        "</font>: it recomputes the fingerprint, re-scores every test vector and verifies the "
        "signature against the trusted keys. The fingerprint printed here must match.", st.body))
    return out

