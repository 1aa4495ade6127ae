"""The demo's reference model "in current use": a simpler synthetic delirium calculator.

SYNTHETIC, NOT FOR CLINICAL USE. The story of the demo is that Demo Hospital B
already uses a short three-item score (age, cognitive screen errors, ASA
physical status) to decide who gets a delirium-prevention bundle, and the new
model is compared with it on the same patients. The coefficients below are
invented by us for the demo; they come from no study and no existing score.

The model (logistic)::

    logit(risk) = -7.00 + 0.060 * age + 0.200 * cog_errors
                  + 0.40 * [ASA = III] + 0.90 * [ASA = IV]

:func:`reference_document` builds it as a calculator file document (FORMAT.md)
whose test vectors are computed here with :func:`math.exp` on the formula
above, independently of calcbuilder's scoring code; loading the document
re-scores them, so a mistake on either side is caught.
"""

from __future__ import annotations

import datetime as dt
import math
from typing import Any

__all__ = [
    "REFERENCE_COEFFICIENTS",
    "REFERENCE_INTERCEPT",
    "REFERENCE_TITLE",
    "REFERENCE_VECTORS",
    "reference_document",
    "reference_risk",
]

REFERENCE_TITLE = "Three-item delirium score (synthetic reference model)"
REFERENCE_INTERCEPT = -7.0
REFERENCE_COEFFICIENTS = {"age": 0.060, "cog_errors": 0.200, "asa_III": 0.40, "asa_IV": 0.90}
"""Invented coefficients: per year of age, per screen error, ASA III and IV vs I-II."""

REFERENCE_VECTORS: tuple[tuple[str, float, float, str], ...] = (
    ("youngest, no errors, ASA I-II", 65.0, 0.0, "I-II"),
    ("72 years, 1 error, ASA III", 72.0, 1.0, "III"),
    ("78 years, 3 errors, ASA I-II", 78.0, 3.0, "I-II"),
    ("84 years, 5 errors, ASA IV", 84.0, 5.0, "IV"),
    ("91 years, 8 errors, ASA III", 91.0, 8.0, "III"),
    ("95 years, 10 errors, ASA IV", 95.0, 10.0, "IV"),
)
"""Test patients: (name, age, cognitive screen errors, ASA class)."""

_CAUTIONS = (
    "This calculator gives an estimate for people like the patient described. It supports, "
    "and does not replace, clinical judgement, the patient's own values and local protocols; "
    "local protocols and regulations decide whether and how a calculator may be used.",
    "SYNTHETIC DEMONSTRATION MATERIAL: a made-up reference model used by the calcbuilder demo "
    "for comparison only. Not for clinical use.",
)


def reference_risk(age: float, cog_errors: float, asa: str) -> float:
    """The reference model's risk, by hand: ``1 / (1 + exp(-eta))``.

    Parameters
    ----------
    age : float
        Age in years.
    cog_errors : float
        Errors on the 10-item cognitive screen (0 to 10).
    asa : {"I-II", "III", "IV"}
        ASA physical status.

    Returns
    -------
    float
        The risk of delirium within 7 days (synthetic model).
    """
    c = REFERENCE_COEFFICIENTS
    eta = (REFERENCE_INTERCEPT + c["age"] * age + c["cog_errors"] * cog_errors
           + (c["asa_III"] if asa == "III" else 0.0) + (c["asa_IV"] if asa == "IV" else 0.0))
    return 1.0 / (1.0 + math.exp(-eta))


def _about(released: dt.date) -> dict[str, Any]:
    return {
        "title": REFERENCE_TITLE,
        "version": "1.0.0",
        "intended_use": "Stands for the score in current use at Demo Hospital B so that the "
                        "calcbuilder demo can compare a new model with it; synthetic, not for "
                        "clinical use.",
        "population": "Adults aged 65 or over having elective hip or knee replacement "
                      "(synthetic)",
        "outcome": "delirium",
        "horizon": "within 7 days after surgery",
        "exclusions": ["Not for use in any real patient: the model is invented."],
        "authors": ["calcbuilder demo"],
        "organisation": "calcbuilder (synthetic demonstration)",
        "released": released.isoformat(),
        "review_by": (released + dt.timedelta(days=365)).isoformat(),
        "synthetic": True,
    }


def _inputs() -> list[dict[str, Any]]:
    return [
        {"id": "age", "label": "Age", "kind": "number", "unit": "years",
         "limits": {"low": 18, "high": 110}, "developed": {"low": 65, "high": 95},
         "decimals": 0, "help": "Age on the day of surgery."},
        {"id": "cog_errors", "label": "Cognitive screen errors", "kind": "number",
         "limits": {"low": 0, "high": 10}, "decimals": 0,
         "help": "Errors on the 10-item pre-operative cognitive screen (0 to 10)."},
        {"id": "asa", "label": "ASA physical status", "kind": "choice",
         "choices": [{"value": "I-II", "label": "ASA I or II"},
                     {"value": "III", "label": "ASA III"},
                     {"value": "IV", "label": "ASA IV"}]},
    ]


def _model() -> dict[str, Any]:
    c = REFERENCE_COEFFICIENTS
    return {
        "family": "logistic",
        "intercept": REFERENCE_INTERCEPT,
        "terms": [
            {"name": "age", "input": "age", "transform": {"type": "linear"},
             "coefficients": [c["age"]]},
            {"name": "cog_errors", "input": "cog_errors", "transform": {"type": "linear"},
             "coefficients": [c["cog_errors"]]},
            {"name": "asa", "input": "asa",
             "transform": {"type": "levels", "reference": "I-II", "levels": ["III", "IV"]},
             "coefficients": [c["asa_III"], c["asa_IV"]]},
        ],
    }


def _vectors() -> list[dict[str, Any]]:
    return [{"name": name, "values": {"age": age, "cog_errors": errors, "asa": asa},
             "risk": reference_risk(age, errors, asa)}
            for name, age, errors, asa in REFERENCE_VECTORS]


def reference_document(released: dt.date | None = None) -> dict[str, Any]:
    """The reference model as an unsigned calculator document (FORMAT.md).

    Parameters
    ----------
    released : datetime.date, optional
        Release date (default today); the review-by date is a year later.

    Returns
    -------
    dict
        Ready for :meth:`calcbuilder.calc.document.Calculator.from_dict`. It has
        no evidence sets: the demo judges it only against the new model.
    """
    when = released or dt.date.today()
    return {
        "format": "calcbuilder-calculator",
        "format_version": 1,
        "about": _about(when),
        "inputs": _inputs(),
        "model": _model(),
        "evidence": [],
        "decision": {
            "default_threshold": 0.10, "reasonable_range": [0.05, 0.30],
            "rationale": "Synthetic example: the same range as the new demo model, so that "
                         "the two can be compared at the same thresholds.",
        },
        "cautions": list(_CAUTIONS),
        "test_vectors": _vectors(),
    }
