"""Hand-written calculator files for tests (clinic session, risk sheet, Qt form).

Everything here is SYNTHETIC test material, not a clinical model.

* :func:`make_calculator` builds a VALID calculator document (a dict) with
  ``n_inputs`` inputs (1..25 or more), a logistic model, a covariance matrix,
  and test vectors whose risks come from :func:`reference_risk`, an independent
  numpy formula (not calcbuilder's scoring), so loading re-checks our scoring.
* :func:`write_calculator` writes it to a folder and returns the path.
* :func:`evidence_cohorts` returns the (y, risk) data the evidence sets were
  computed from, so tests can recompute net benefit with ``calcbuilder.stats``.

Inputs, in order: ``age`` (number, years, linear), ``creatinine`` (number,
µmol/L with mg/dL as an alternative unit, log transform), ``falls`` (yes/no,
label with "≥"), ``living`` (choice of three, level contrasts, accented label),
then ``marker_5``, ``marker_6``, ... (numbers in mg/L, linear).

Evidence: an ``apparent`` set (development cohort, well calibrated, with a
risk histogram) and an ``external`` set (another cohort where the model
under-estimates risk). In the external set the model's decision curve lies
BELOW treat-all from 1% to 28%, above both treat-all and treat-none from 29%
to 54%, and at or below treat-none from 55% (``tests/clinic/test_benefit.py``
pins this). The default threshold is 20%, the reasonable range 5% to 40%.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

from calcbuilder.calc.signing import sign_document
from calcbuilder.stats import (
    auc_ci,
    brier,
    calibration_intercept,
    calibration_slope,
    decision_curve,
)

__all__ = [
    "CAUTION",
    "evidence_cohorts",
    "make_calculator",
    "patient_values",
    "reference_risk",
    "write_calculator",
]

CAUTION = ("Test calculator only: an estimate to support, not replace, clinical judgement "
           "and local protocols.")
INTERCEPT = -6.5
MG_DL = 88.42  # creatinine: µmol/L = mg/dL x 88.42
_LIVING = (("home", "At home"), ("assisted", "Assisted living"),
           ("nursing", "Nursing home (résidence médicalisée)"))


def _marker_coef(k: int) -> float:
    return 0.004 * (1 + k % 3) * (-1) ** k


def _inputs_and_terms(n_inputs: int) -> tuple[list[dict[str, Any]], list[dict[str, Any]]]:
    inputs: list[dict[str, Any]] = [
        {"id": "age", "label": "Age", "kind": "number", "unit": "years",
         "limits": {"low": 18, "high": 110}, "developed": {"low": 40, "high": 90},
         "decimals": 0, "group": "Patient"},
        {"id": "creatinine", "label": "Serum creatinine", "kind": "number", "unit": "µmol/L",
         "alt_units": [{"unit": "mg/dL", "factor": MG_DL, "offset": 0}],
         "limits": {"low": 10, "high": 2000}, "developed": {"low": 45, "high": 250},
         "decimals": 0, "group": "Laboratory"},
        {"id": "falls", "label": "Two or more falls (≥ 2) in the past year", "kind": "yes_no"},
        {"id": "living", "label": "Living situation", "kind": "choice",
         "choices": [{"value": v, "label": lab} for v, lab in _LIVING]},
    ]
    terms: list[dict[str, Any]] = [
        {"name": "age", "input": "age", "transform": {"type": "linear"}, "coefficients": [0.04]},
        {"name": "log_creatinine", "input": "creatinine", "transform": {"type": "log"},
         "coefficients": [0.5]},
        {"name": "falls", "input": "falls", "transform": {"type": "indicator"},
         "coefficients": [0.7]},
        {"name": "living", "input": "living",
         "transform": {"type": "levels", "reference": "home", "levels": ["assisted", "nursing"]},
         "coefficients": [0.3, 0.8]},
    ]
    for k in range(4, n_inputs):
        inputs.append({"id": f"marker_{k + 1}", "label": f"Marker {k + 1}", "kind": "number",
                       "unit": "mg/L", "limits": {"low": 0, "high": 1000},
                       "developed": {"low": 0, "high": 200}, "decimals": 1})
        terms.append({"name": f"marker_{k + 1}", "input": f"marker_{k + 1}",
                      "transform": {"type": "linear"}, "coefficients": [_marker_coef(k)]})
    return inputs[:n_inputs], terms[:n_inputs]


def patient_values(n_inputs: int, i: int = 0) -> dict[str, Any]:
    """A plausible patient ``i`` (canonical units), inside every developed range."""
    values: dict[str, Any] = {
        "age": [45, 60, 72, 81, 88, 67][i % 6],
        "creatinine": [60, 95, 130, 180, 240, 75][i % 6],
        "falls": i % 2 == 1,
        "living": _LIVING[i % 3][0],
    }
    for k in range(4, n_inputs):
        values[f"marker_{k + 1}"] = float((7 * k + 31 * i) % 150) + 0.5
    return {key: values[key] for key in list(values)[:n_inputs]}


def reference_risk(values: dict[str, Any], n_inputs: int) -> float:
    """The model's risk written out by hand with numpy (independent of calc.scoring)."""
    eta = INTERCEPT + 0.04 * values["age"]
    if n_inputs > 1:
        eta += 0.5 * np.log(values["creatinine"])
    if n_inputs > 2:
        eta += 0.7 * float(values["falls"])
    if n_inputs > 3:
        eta += {"home": 0.0, "assisted": 0.3, "nursing": 0.8}[values["living"]]
    for k in range(4, n_inputs):
        eta += _marker_coef(k) * values[f"marker_{k + 1}"]
    return float(1.0 / (1.0 + np.exp(-eta)))


def _covariance(n_inputs: int) -> list[list[float]]:
    sd = [0.3, 0.004, 0.06, 0.15, 0.2, 0.25][: 1 + n_inputs + (n_inputs > 3)]
    sd += [0.0005] * (n_inputs - 4)
    corr = 0.9 * np.eye(len(sd)) + 0.1
    return (np.outer(sd, sd) * corr).tolist()


def evidence_cohorts() -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """The synthetic (y, predicted risk) data behind each evidence set, by kind."""
    rng = np.random.default_rng(20261202)
    lp_a = rng.normal(-1.6, 1.0, 1200)
    y_a = (rng.random(1200) < 1 / (1 + np.exp(-lp_a))).astype(float)
    lp_b = rng.normal(-1.0, 0.9, 1500)
    y_b = (rng.random(1500) < 1 / (1 + np.exp(-lp_b))).astype(float)
    risk_b = 1 / (1 + np.exp(-(lp_b - 1.5)))  # under-estimates risk at site B
    return {"apparent": (y_a, 1 / (1 + np.exp(-lp_a))), "external": (y_b, risk_b)}


def _metric(est: Any) -> dict[str, float]:
    return {"value": float(est.value), "low": float(est.low), "high": float(est.high)}


def _evidence_set(kind: str, y: np.ndarray, risk: np.ndarray) -> dict[str, Any]:
    dc = decision_curve(y, risk)
    name = "Test Site A" if kind == "apparent" else "Test Site B"
    out: dict[str, Any] = {
        "id": f"{kind}-1", "kind": kind,
        "label": "Development data (apparent)" if kind == "apparent" else "Test Site B, 2024",
        "dataset": {"name": name, "period": "2024", "population": "adults in a test clinic",
                    "n": int(y.size), "events": int(y.sum()), "synthetic": True},
        "source": "tests/fixtures_calc.py",
        "metrics": {"auc": _metric(auc_ci(y, risk)),
                    "calibration_intercept": _metric(calibration_intercept(y, risk)),
                    "calibration_slope": _metric(calibration_slope(y, risk)),
                    "brier": {"value": float(brier(y, risk))}},
        "decision_curve": {"thresholds": dc.thresholds.tolist(), "model": dc.model.tolist(),
                           "treat_all": dc.treat_all.tolist()},
    }
    if kind == "apparent":
        edges = np.arange(21) / 20
        out["risk_histogram"] = {
            "edges": edges.tolist(),
            "events": np.histogram(risk[y == 1], edges)[0].tolist(),
            "nonevents": np.histogram(risk[y == 0], edges)[0].tolist()}
    return out


def make_calculator(
    n_inputs: int = 4,
    *,
    with_evidence: bool = True,
    external: bool = True,
    covariance: bool = True,
    synthetic: bool = True,
    signed: bool = False,
    key: Ed25519PrivateKey | None = None,
    review_by: str = "2030-01-01",
    decision: dict[str, Any] | None = None,
    cautions: list[str] | None = None,
) -> dict[str, Any]:
    """A valid calculator document with ``n_inputs`` inputs (see the module notes).

    ``signed=True`` signs with ``key`` (a fresh key when None). ``decision``
    replaces the default (threshold 20%, reasonable range 5% to 40%).
    """
    if n_inputs < 1:
        raise ValueError("n_inputs must be at least 1")
    inputs, terms = _inputs_and_terms(n_inputs)
    model: dict[str, Any] = {"family": "logistic", "intercept": INTERCEPT, "terms": terms}
    if covariance:
        model["covariance"] = _covariance(n_inputs)
    evidence = []
    if with_evidence:
        cohorts = evidence_cohorts()
        evidence = [_evidence_set(kind, *cohorts[kind])
                    for kind in ("apparent", "external") if kind == "apparent" or external]
    vectors = [patient_values(n_inputs, i) for i in range(5)]
    doc = {
        "format": "calcbuilder-calculator", "format_version": 1,
        "about": {"title": f"Test calculator with {n_inputs} input(s)", "version": "1.2.0",
                  "intended_use": "Exercising calcbuilder's clinic session and risk sheet.",
                  "population": "Adults aged 40 to 90 seen in a test clinic",
                  "outcome": "hospital admission", "horizon": "within 30 days",
                  "exclusions": ["Not for any clinical decision."],
                  "authors": ["calcbuilder test suite"], "released": "2026-01-01",
                  "review_by": review_by, "synthetic": synthetic},
        "inputs": inputs, "model": model, "evidence": evidence,
        "decision": decision or {"default_threshold": 0.2, "reasonable_range": [0.05, 0.4],
                                 "rationale": "Test values only."},
        "cautions": cautions or [CAUTION],
        "test_vectors": [{"name": f"vector {i + 1}", "values": v,
                          "risk": reference_risk(v, n_inputs)} for i, v in enumerate(vectors)],
    }
    if signed:
        doc = sign_document(doc, key or Ed25519PrivateKey.generate())
    return doc


def write_calculator(folder: str | Path, name: str = "test.calc.json", **kwargs: Any) -> Path:
    """Write :func:`make_calculator` (``kwargs`` passed on) to ``folder/name``."""
    path = Path(folder) / name
    path.write_text(json.dumps(make_calculator(**kwargs), ensure_ascii=False), "utf-8")
    return path

