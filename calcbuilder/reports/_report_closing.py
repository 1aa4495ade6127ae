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

from reportlab.platypus import Flowable, KeepTogether, Paragraph, Spacer

from ..calc.canonical import SIGNATURE_KEY
from ..calc.evidence_sets import EvidenceSet
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

__all__ = ["RECLASSIFICATION_CAUTION", "limitations_story", "reclassification_groups",
           "reclassification_story", "sample_size_story", "signature_story"]

RECLASS_LABELS = {
    "nri_events": "NRI, people with the outcome",
    "nri_nonevents": "NRI, people without the outcome",
    "nri_total": "NRI, total (categorical)",
    "continuous_nri": "Continuous (category-free) NRI",
    "continuous_nri_events": "Continuous NRI, people with the outcome",
    "continuous_nri_nonevents": "Continuous NRI, people without the outcome",
    "idi": "Integrated discrimination improvement (IDI)",
    "auc_difference": "AUC difference (this model − reference)",
    "auc_new": "AUC of this model",
    "auc_ref": "AUC of the reference model",
    "calibration_slope_new": "Calibration slope, this model",
    "calibration_slope_ref": "Calibration slope, reference model",
    "calibration_intercept_new": "Calibration intercept, this model",
    "calibration_intercept_ref": "Calibration intercept, reference model",
}
_SUFFIXES = ("low", "high", "se", "p_value", "p", "z")
_OWNERS = {"nri": "nri_total", "auc": "auc_difference"}  # 'nri_se' belongs to 'nri_total'
_SKIP = ("reference", "reference_fingerprint", "cuts", "n", "events", "thresholds",
         "net_benefit_difference", "warnings")
RECLASSIFICATION_CAUTION = (
    "Net reclassification and discrimination-improvement indices can reward a miscalibrated "
    "model: a model that simply over- or under-estimates risk can move people across the "
    "cut-offs and score a positive NRI or IDI without being more useful. Read them together "
    "with the calibration results and the decision curves.")
_SAMPLE_SIZE = re.compile(r"sample[ _-]?size|events[ _-]per|riley|minimum[ _-](rows|n)\b|"
                          r"anticipated[ _-]r2|\bep[pv]\b", re.IGNORECASE)


def _is_number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


def _owner(key: str, numbers: Mapping[str, Any]) -> tuple[str, str] | None:
    """(base, suffix) when ``key`` is a companion (low, se, p-value, ...) of another number."""
    for suffix in _SUFFIXES:
        if key.endswith("_" + suffix):
            base = key[: -len(suffix) - 1]
            base = base if base in numbers else _OWNERS.get(base, "")
            if base in numbers and base != key:
                return base, suffix
    return None


def reclassification_groups(block: Mapping[str, Any]) -> dict[str, dict[str, Any]]:
    """Numbers of a reclassification block grouped by measure: {'idi': {'value', 'low', ...}}.

    A list of three numbers is read as (value, low, high).
    """
    numbers = {k: v for k, v in block.items() if k not in _SKIP and (_is_number(v) or v is None)}
    groups: dict[str, dict[str, Any]] = {}
    for key, value in numbers.items():
        owned = _owner(key, numbers)
        if owned is not None:
            groups.setdefault(owned[0], {})[owned[1]] = value
        else:
            groups.setdefault(key, {})["value"] = value
    for key, value in block.items():
        if (key not in _SKIP and isinstance(value, list | tuple) and len(value) == 3
                and all(v is None or _is_number(v) for v in value)):
            groups[key] = {"value": value[0], "low": value[1], "high": value[2]}
    return groups


def _other_lines(block: Mapping[str, Any], groups: Mapping[str, Any]) -> list[str]:
    out = []
    for key, value in block.items():
        if key in _SKIP or key in groups or _is_number(value) or value is None:
            continue
        text = str(value)
        if isinstance(value, list | tuple):
            text = "[" + ", ".join(str(v) for v in value[:12]) + (
                " …]" if len(value) > 12 else "]")
        out.append(f"{esc(metric_label(key))}: {esc(text)}")
    return out


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


def _nb_difference(ctx: Context, block: Mapping[str, Any]) -> list[Flowable]:
    t, diff = block.get("thresholds"), block.get("net_benefit_difference")
    if not isinstance(t, list | tuple) or not isinstance(diff, list | tuple) or \
            len(t) != len(diff) or not t:
        return []
    low, high = ctx.calc.decision.reasonable_range
    picked = [i for i, v in enumerate(t) if low - 1e-9 <= v <= high + 1e-9]
    picked = picked[:: max(1, -(-len(picked) // 8))] or list(range(len(t)))[:8]
    cells = [f"{percent(t[i])}: {'—' if diff[i] is None else f'{diff[i] * 100:+.2f}'}"
             for i in picked]
    return [Paragraph("Net benefit of this model minus the reference, per 100 patients, at "
                      "thresholds in the reasonable range: " + "; ".join(cells) + ".",
                      ctx.st.small)]


def _comparison_story(ctx: Context, label: str, block: Mapping[str, Any]) -> list[Flowable]:
    st = ctx.st
    reference = str(block.get("reference") or "a reference model (not named)")
    head: list[Flowable] = [Paragraph(f"{esc(label)}: compared with {esc(reference)}", st.h2)]
    facts = []
    if _is_number(block.get("n")):
        events = f", {integer(block['events'])} with the outcome" if _is_number(
            block.get("events")) else ""
        facts.append(f"Same {integer(block['n'])} patients for both models{events}.")
    if block.get("reference_fingerprint"):
        fingerprint = esc(str(block["reference_fingerprint"]))
        facts.append(f"Reference calculator fingerprint: {fingerprint}.")
    cuts = block.get("cuts")
    if isinstance(cuts, list | tuple) and cuts:
        facts.append("Risk categories for the categorical NRI are cut at "
                     + ", ".join(percent(c) for c in cuts) + ".")
    head += [Paragraph(" ".join(facts), st.small)] if facts else []
    groups = reclassification_groups(block)
    parts = [200, 70, 110, 60, 60]
    scale = ctx.width / sum(parts)
    out: list[Flowable] = [KeepTogether(
        [*head, grid_table(_reclass_rows(ctx, groups), [p * scale for p in parts])])]
    out += _nb_difference(ctx, block)
    out += [Paragraph(line, st.grey) for line in _other_lines(block, groups)]
    if block.get("warnings"):
        out += notice(["<b>Warning recorded with the comparison.</b> "
                       + esc(str(block["warnings"]))], ctx.width, st)
    return [*out, Spacer(1, 3)]


def reclassification_story(ctx: Context) -> list[Flowable]:
    """NRI, IDI and AUC difference against the reference model, with the caution."""
    st = ctx.st
    sets = [e for e in ctx.calc.evidence if e.raw.get("reclassification")]
    if not sets:
        return [Paragraph("No comparison with a reference model is attached.", st.body)]
    out: list[Flowable] = []
    for ev in sets:
        out += _comparison_story(ctx, ev.label, ev.raw["reclassification"])
    return out + notice(["<b>Caution.</b> " + esc(RECLASSIFICATION_CAUTION)], ctx.width, st)


SETTING_LABELS = {
    "riley_minimum_rows": "Minimum development size by Riley et al.'s criteria (rows)",
    "riley_binding_criterion": "Binding criterion",
    "events_per_parameter": "Events per candidate parameter",
    "anticipated_r2_cs": "Anticipated Cox–Snell R² used",
    "parameters": "Candidate parameters",
}


def _setting_text(value: Any) -> str:
    return integer(value) if _is_number(value) and float(value).is_integer() else (
        f"{value:.4g}" if _is_number(value) else esc(str(value)))


def _recorded(ctx: Context) -> list[tuple[EvidenceSet, list[str]]]:
    found = []
    for ev in ctx.calc.evidence:
        settings = ev.raw.get("settings") or {}
        keys = [k for k in settings if _SAMPLE_SIZE.search(k)]
        if keys and "parameters" in settings:
            keys.append("parameters")
        lines = [f"{esc(SETTING_LABELS.get(k, metric_label(k)))}: {_setting_text(settings[k])}"
                 for k in keys]
        lines += [esc(n) for n in ev.raw.get("notes") or () if _SAMPLE_SIZE.search(n)]
        if lines:
            found.append((ev, lines))
    return found


def _verdict(ev: EvidenceSet) -> str | None:
    settings = ev.raw.get("settings") or {}
    need = settings.get("riley_minimum_rows")
    if not _is_number(need):
        return None
    used = settings.get("rows_used", ev.n)
    word = "meets" if used >= need else "falls short of"
    return (f"<b>{integer(used)} rows used {word} the recorded minimum of {integer(need)}.</b>"
            + ("" if used >= need else " Expect overfitting; rely on the optimism-corrected "
               "and external evidence."))


def sample_size_story(ctx: Context) -> list[Flowable]:
    """What the evidence records about sample-size adequacy (or that nothing was recorded)."""
    st = ctx.st
    out: list[Flowable] = []
    recorded = _recorded(ctx)
    for ev, lines in recorded:
        verdict = _verdict(ev)
        out += [KeepTogether([Paragraph(esc(ev.label), st.h2), *bullets(lines, st.body)])]
        out += [Paragraph(verdict, st.body)] if verdict else []
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
    if not kinds:
        out.append("No performance evidence of any kind is attached.")
    elif "external" not in kinds:
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
    notes = [f"{esc(ev.label)}: {esc(n)}" for ev in calc.evidence
             for n in ev.raw.get("notes") or ()]
    parts = (("Cautions stated by the authors", [esc(c) for c in calc.cautions]),
             ("Not for use in", [esc(e) for e in calc.about.exclusions]
              or ["No exclusions are stated."]),
             ("Notes attached to the evidence", notes or ["No notes are attached to the "
                                                          "evidence."]))
    out: list[Flowable] = [KeepTogether([Paragraph(title, st.h2), *bullets(lines, st.body)])
                           for title, lines in parts]
    closing = notice(["Every estimate from this calculator supports, and does not replace, "
                      "clinical judgement, the patient's own values and local protocols."],
                     ctx.width, st, strong=True)
    return [*out, KeepTogether([Paragraph("Found while preparing this report", st.h2),
                                *bullets(_automatic_cautions(ctx), st.body), Spacer(1, 4),
                                *closing])]


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

