"""The words of the risk sheet that come from the calculator file (private).

Model provenance (population, data, validation kind, AUC, calibration summary)
and the signature lines. Plain functions returning text; no reportlab here.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from .. import __version__
from ..calc.document import Calculator, LoadedCalculator
from ..calc.evidence_sets import EvidenceSet, most_trustworthy
from ..calc.signing import TrustState
from ..clinic.benefit import evidence_source_text

__all__ = ["STATE_WORDS", "provenance_lines", "signature_lines"]

STATE_WORDS = {
    TrustState.VERIFIED: "verified, signer trusted by this clinic",
    TrustState.UNKNOWN_SIGNER: "valid, but the signer is not on this clinic's trusted list",
    TrustState.UNSIGNED: "NOT SIGNED",
    TrustState.TAMPERED: "FAILED",
}


def _num(value: float) -> str:
    return f"{value:.2f}"


def _with_ci(metric: Mapping[str, Any]) -> str:
    text = _num(metric["value"])
    if metric.get("low") is not None and metric.get("high") is not None:
        text += f" (95% CI {_num(metric['low'])} to {_num(metric['high'])})"
    return text


def _calibration_words(evidence: EvidenceSet) -> str | None:
    parts = []
    intercept = evidence.metric("calibration_intercept")
    slope = evidence.metric("calibration_slope")
    if intercept and intercept.get("value") is not None:
        low, high = intercept.get("low"), intercept.get("high")
        meaning = ("estimates were on average too low in these data"
                   if low is not None and low > 0 else
                   "estimates were on average too high in these data"
                   if high is not None and high < 0 else "no clear overall over- or "
                   "under-estimation")
        parts.append(f"intercept {_with_ci(intercept)}, ideal 0: {meaning}")
    if slope and slope.get("value") is not None:
        low, high = slope.get("low"), slope.get("high")
        meaning = ("estimates too extreme (high ones too high, low ones too low)"
                   if high is not None and high < 1 else
                   "estimates too modest (spread too little)"
                   if low is not None and low > 1 else "spread of the estimates about right")
        parts.append(f"slope {_with_ci(slope)}, ideal 1: {meaning}")
    return "; ".join(parts) + "." if parts else None


def _development(calc: Calculator) -> str | None:
    for kind in ("apparent", "bootstrap"):
        found = [e for e in calc.evidence if e.kind == kind]
        if found:
            ds = found[-1].raw["dataset"]
            period = f", {ds['period']}" if ds.get("period") else ""
            return (f"Developed on: {ds['name']}{period}: {ds['n']:,} people, "
                    f"{ds['events']:,} with the outcome.")
    return None


def provenance_lines(calc: Calculator, evidence: EvidenceSet | None) -> list[str]:
    """Where the model comes from and how well it did, one sentence per line.

    ``evidence`` is the set the net benefit came from; without one the most
    trustworthy set with an AUC is used.
    """
    about = calc.about
    lines = [f"Made for: {about.population}. Intended use: {about.intended_use}"]
    lines += [text for text in (_development(calc),) if text]
    recal = calc.model.recalibration
    if recal is not None:
        size = f" ({recal.n:,} people)" if recal.n else ""
        lines.append(f"Recalibrated ({recal.method}) on {recal.dataset or 'a new population'}"
                     f"{size}.")
    shown = evidence or most_trustworthy(
        calc.evidence, needs="metrics", recalibrated=calc.model.recalibration is not None)
    if shown is None:
        lines.append("This calculator file holds no performance evidence.")
        return lines
    lines.append("Performance from " + evidence_source_text(shown) + ".")
    auc = shown.metric("auc")
    if auc and auc.get("value") is not None:
        lines.append(f"Discrimination: AUC {_with_ci(auc)} (0.5 = no better than chance, "
                     "1 = perfect ranking).")
    calibration = _calibration_words(shown)
    if calibration:
        lines.append("Calibration: " + calibration)
    if about.exclusions:
        lines.append("Not for use: " + "; ".join(about.exclusions))
    return lines


def signature_lines(loaded: LoadedCalculator) -> list[tuple[str, str]]:
    """``(label, text)`` pairs: signature state, key and file fingerprints, versions."""
    v = loaded.verification
    about = loaded.calculator.about
    out = [("Signature", v.message)]
    if v.key_fingerprint:
        out.append(("Signing key", v.key_fingerprint))
    out.append(("File fingerprint", loaded.fingerprint))
    out.append(("Versions", f"calculator {about.version} (released {about.released.isoformat()}, "
                            f"review by {about.review_by.isoformat()}); calcbuilder "
                            f"{__version__}"))
    return out
