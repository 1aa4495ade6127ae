"""Numbers and names of the evidence report (private; no reportlab here).

Two kinds of number formatting:

* :func:`exact` prints a value as stored in the calculator file: the shortest
  decimal that reads back to the same binary64 number (Python's ``repr``), so
  coefficients, knots and test-vector risks can be copied into other software
  without loss;
* :func:`sig` and :func:`metric_number` round derived numbers for reading.

Metric names map to labels through :data:`METRIC_LABELS`; a name we do not
know yet is still shown (:func:`metric_label` makes a label from it), so new
metrics appear in the report without code changes.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from ..calc.evidence_sets import METRIC_LABELS, metric_label
from ..calc.signing import TrustState

__all__ = [
    "KIND_WORDS",
    "METRIC_IDEALS",
    "METRIC_LABELS",
    "STATE_SHORT",
    "STATE_WORDS",
    "SYNTHETIC_MARK",
    "exact",
    "integer",
    "interval_text",
    "metric_label",
    "metric_number",
    "percent",
    "plain",
    "sig",
]

SYNTHETIC_MARK = "SYNTHETIC — NOT FOR CLINICAL USE"

METRIC_IDEALS: dict[str, str] = {
    "auc": "1 (0.5 = chance)",
    "c_statistic": "1 (0.5 = chance)",
    "brier": "0",
    "scaled_brier": "1",
    "calibration_intercept": "0",
    "calibration_slope": "1",
    "ici": "0",
    "e50": "0",
    "e90": "0",
    "emax": "0",
    "oe_ratio": "1",
    "spiegelhalter_z": "0",
}
"""What a perfect model would score, where that is well defined."""

KIND_WORDS = {
    "apparent": "apparent performance (development data, no correction for optimism)",
    "bootstrap": "internal validation, bootstrap optimism-corrected",
    "external": "external validation (data not used to develop the model)",
    "recalibrated": "after recalibration",
    "imported": "imported from another source",
}

STATE_WORDS = {
    TrustState.VERIFIED: "Signed and verified; the signer is trusted by this installation",
    TrustState.UNKNOWN_SIGNER: "Signature valid, but the signer is not on this installation's "
                               "trusted list",
    TrustState.UNSIGNED: "NOT SIGNED",
    TrustState.TAMPERED: "SIGNATURE DOES NOT VERIFY",
}

STATE_SHORT = {
    TrustState.VERIFIED: "signature verified",
    TrustState.UNKNOWN_SIGNER: "signer not on the trusted list",
    TrustState.UNSIGNED: "NOT SIGNED",
    TrustState.TAMPERED: "SIGNATURE FAILED",
}


def exact(value: float | int | None) -> str:
    """The value as stored: the shortest decimal that reads back identically ('—' for None)."""
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    number = float(value)
    if number.is_integer() and abs(number) < 1e15:
        return str(int(number))
    return repr(number)


def plain(value: float | int | None) -> str:
    """A limit, knot or unit factor as written by a person: integers without '.0'."""
    return exact(value)


def sig(value: float | None, digits: int = 4) -> str:
    """``value`` rounded to ``digits`` significant digits, without exponent when sensible."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "—"
    if value == 0:
        return "0"
    magnitude = math.floor(math.log10(abs(value)))
    if -5 <= magnitude < 15:
        decimals = max(digits - 1 - magnitude, 0)
        return f"{value:.{decimals}f}"
    return f"{value:.{digits - 1}e}"


def metric_number(value: float | None) -> str:
    """A performance figure for reading: 3 decimals, 4 below 0.1, scientific when tiny."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "—"
    size = abs(value)
    if size == 0:
        return "0.000"
    if size >= 1000:
        return f"{value:,.1f}"
    if size >= 0.1:
        return f"{value:.3f}"
    if size >= 0.0001:
        return f"{value:.4f}"
    return f"{value:.2e}"


def percent(value: float | None, decimals: int = 1) -> str:
    """A proportion as a percentage ('12.5%')."""
    if value is None:
        return "—"
    return f"{value * 100:.{decimals}f}%"


def integer(value: Any) -> str:
    """A count with thousands separators ('1,500'); other values as they are."""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int) or (isinstance(value, float) and value.is_integer()):
        return f"{int(value):,}"
    return str(value)


def interval_text(metric: Mapping[str, Any]) -> str:
    """'low to high' of a metric, or '—' when either limit is missing."""
    low, high = metric.get("low"), metric.get("high")
    if low is None or high is None:
        return "—"
    return f"{metric_number(low)} to {metric_number(high)}"
