"""A rich SYNTHETIC calculator for evidence-report tests and the render script.

Not a clinical model: every number is invented. It exercises every transform
(restricted cubic spline with truncation, hinges, levels, indicators of a
yes/no and of a choice input, log with a shift, square root, power, and a
product interaction), a covariance matrix, and evidence of every kind made
by calcbuilder's own evidence builders (apparent, bootstrap, external with a
reclassification block against a simpler reference model, recalibrated,
imported).

The test-vector risks are computed by :func:`independent_risk`, a numpy
re-implementation of the equation AS THE REPORT PRINTS IT (the spline written out
term by term with its knots), not by calcbuilder's scoring; loading the file
re-scores the vectors with calcbuilder and refuses any difference above 1e-9,
so a file that loads proves the printed equation re-implements the model.
"""

from __future__ import annotations

import copy
import hashlib
import json
import math
from functools import cache
from pathlib import Path
from typing import Any

import numpy as np

from calcbuilder.calc.signing import sign_document
from calcbuilder.evidence.compare import compare_risks, reclassification_block
from calcbuilder.evidence.metrics import evidence_set

__all__ = ["independent_risk", "rich_document", "signed_calculator", "write_rich"]

KNOTS = (68.0, 74.0, 79.0, 88.0)
TRUNC = (65.0, 95.0)
INTERCEPT = -5.912345678901234
COEFS: dict[str, list[float]] = {
    "age": [0.0123456789012345, 0.0987654321098765, -0.2468013579246801],
    "cog": [0.2112345678901234, 0.1534567890123456],
    "asa": [0.3456789012345678, 0.8765432109876543],
    "sensory": [0.4123456789012345],
    "sodium": [-2.5e-05],
    "creatinine": [0.3512345678901234],
    "medicines": [0.1812345678901234],
    "anaesthesia": [0.2512345678901234],
    "alcohol": [0.6012345678901234],
    "age_x_sensory": [0.0112345678901234, -0.0212345678901234, 0.0312345678901234],
}
S0 = 0.9312345678901234
RECAL = {"method": "slope", "intercept": 0.5512345678901234, "slope": 1.1234567890123457,
         "dataset": "Demo Hospital B, 2025 (synthetic)", "n": 800, "events": 0}


def _inputs() -> list[dict[str, Any]]:
    return [
        {"id": "age", "label": "Age", "kind": "number", "unit": "years",
         "limits": {"low": 18, "high": 110}, "developed": {"low": 65, "high": 95},
         "decimals": 0, "group": "Patient", "help": "Age on the day of surgery."},
        {"id": "cog_errors", "label": "Cognitive screen errors", "kind": "number",
         "limits": {"low": 0, "high": 10}, "developed": {"low": 0, "high": 9}, "decimals": 0},
        {"id": "asa", "label": "ASA physical status", "kind": "choice",
         "choices": [{"value": "I-II", "label": "ASA I or II"},
                     {"value": "III", "label": "ASA III"}, {"value": "IV", "label": "ASA IV"}]},
        {"id": "sensory", "label": "Hearing or vision impairment", "kind": "yes_no"},
        {"id": "sodium", "label": "Serum sodium", "kind": "number", "unit": "mmol/L",
         "limits": {"low": 100, "high": 180}, "developed": {"low": 128, "high": 148},
         "decimals": 0, "group": "Laboratory"},
        {"id": "creatinine", "label": "Serum creatinine", "kind": "number", "unit": "µmol/L",
         "alt_units": [{"unit": "mg/dL", "factor": 88.42, "offset": 0}],
         "limits": {"low": 10, "high": 2000}, "developed": {"low": 40, "high": 300},
         "decimals": 0, "group": "Laboratory"},
        {"id": "medicines", "label": "Daily medicines", "kind": "number",
         "limits": {"low": 0, "high": 40}, "developed": {"low": 0, "high": 18}, "decimals": 0},
        {"id": "anaesthesia", "label": "Anaesthesia", "kind": "choice",
         "choices": [{"value": "general", "label": "General"},
                     {"value": "neuraxial", "label": "Spinal or epidural"}]},
        {"id": "alcohol", "label": "Heavy alcohol use", "kind": "yes_no"},
    ]


def _terms() -> list[dict[str, Any]]:
    return [
        {"name": "age", "input": "age", "transform": {"type": "rcs", "knots": list(KNOTS)},
         "truncate": {"low": TRUNC[0], "high": TRUNC[1]}, "coefficients": COEFS["age"]},
        {"name": "cog", "input": "cog_errors", "transform": {"type": "hinges", "knots": [2]},
         "coefficients": COEFS["cog"]},
        {"name": "asa", "input": "asa",
         "transform": {"type": "levels", "reference": "I-II", "levels": ["III", "IV"]},
         "coefficients": COEFS["asa"]},
        {"name": "sensory", "input": "sensory", "transform": {"type": "indicator"},
         "coefficients": COEFS["sensory"]},
        {"name": "sodium", "input": "sodium", "transform": {"type": "power", "exponent": 2},
         "coefficients": COEFS["sodium"]},
        {"name": "creatinine", "input": "creatinine", "transform": {"type": "log", "shift": 1},
         "coefficients": COEFS["creatinine"]},
        {"name": "medicines", "input": "medicines", "transform": {"type": "sqrt"},
         "coefficients": COEFS["medicines"]},
        {"name": "anaesthesia", "input": "anaesthesia",
         "transform": {"type": "indicator", "level": "general"},
         "coefficients": COEFS["anaesthesia"]},
        {"name": "alcohol", "input": "alcohol", "transform": {"type": "indicator"},
         "coefficients": COEFS["alcohol"]},
        {"name": "age_x_sensory", "transform": {"type": "product", "of": ["age", "sensory"]},
         "coefficients": COEFS["age_x_sensory"]},
    ]


def _spline(x: np.ndarray) -> list[np.ndarray]:
    """The printed formula: S_j(x) = [(x-tj)+^3 - (x-t3)+^3 (t4-tj)/(t4-t3)
    + (x-t4)+^3 (t3-tj)/(t4-t3)] / (t4-t1)^2."""
    t1, t3, t4 = KNOTS[0], KNOTS[-2], KNOTS[-1]

    def cube(u: np.ndarray) -> np.ndarray:
        return np.maximum(u, 0.0) ** 3

    return [(cube(x - tj) - cube(x - t3) * (t4 - tj) / (t4 - t3)
             + cube(x - t4) * (t3 - tj) / (t4 - t3)) / (t4 - t1) ** 2 for tj in KNOTS[:2]]


def design(v: dict[str, np.ndarray]) -> np.ndarray:
    """Columns in coefficient order, written from the printed equation."""
    age = np.clip(v["age"], *TRUNC)
    age_cols = [age, *_spline(age)]
    cog = v["cog_errors"]
    sensory = v["sensory"].astype(float)
    cols = [*age_cols, cog, np.maximum(cog - 2, 0.0),
            (v["asa"] == "III").astype(float), (v["asa"] == "IV").astype(float), sensory,
            v["sodium"] ** 2, np.log(v["creatinine"] + 1), np.sqrt(v["medicines"]),
            (v["anaesthesia"] == "general").astype(float), v["alcohol"].astype(float),
            *[c * sensory for c in age_cols]]
    return np.column_stack(cols)


def _beta() -> np.ndarray:
    return np.array([c for cs in COEFS.values() for c in cs])


def independent_risk(v: dict[str, np.ndarray], family: str = "logistic",
                     centre: np.ndarray | None = None, recal: bool = False) -> np.ndarray:
    """Risk from the printed equation (numpy only, no calcbuilder scoring)."""
    X = design(v)
    if family == "logistic":
        eta = INTERCEPT + X @ _beta()
    else:
        assert centre is not None
        eta = math.log(-math.log(S0)) + (X - centre) @ _beta()
    if recal:
        eta = RECAL["intercept"] + RECAL["slope"] * eta
    if family == "logistic":
        return 1 / (1 + np.exp(-eta))
    return 1 - np.exp(-np.exp(eta))


def cohort(n: int, seed: int, older: float = 0.0) -> dict[str, np.ndarray]:
    """Synthetic patients (canonical units)."""
    rng = np.random.default_rng(seed)
    return {
        "age": np.round(np.clip(rng.normal(75 + older, 6, n), 65, 97)),
        "cog_errors": np.clip(rng.poisson(1.6, n), 0, 10).astype(float),
        "asa": rng.choice(np.array(["I-II", "III", "IV"], dtype=object), n, p=[.55, .38, .07]),
        "sensory": rng.random(n) < 0.3,
        "sodium": np.round(rng.normal(139, 3, n)),
        "creatinine": np.round(np.exp(rng.normal(4.45, 0.3, n))),
        "medicines": np.clip(rng.poisson(5, n), 0, 30).astype(float),
        "anaesthesia": rng.choice(np.array(["general", "neuraxial"], dtype=object), n),
        "alcohol": rng.random(n) < 0.08,
    }


def _vectors(family: str, centre: np.ndarray | None, recal: bool) -> list[dict[str, Any]]:
    v = cohort(6, 7)
    v["age"] = np.array([66.0, 72, 77, 83, 90, 97])  # below, between and beyond the knots
    v["cog_errors"] = np.array([0.0, 1, 2, 3, 6, 9])
    risks = independent_risk(v, family, centre, recal)
    out = []
    for i in range(6):
        values = {k: (bool(a[i]) if a.dtype == bool else a[i] if a.dtype == object
                      else float(a[i])) for k, a in v.items()}
        out.append({"name": f"patient {chr(65 + i)}", "values": values,
                    "risk": float(risks[i])})
    return out


def _covariance(k: int) -> list[list[float]]:
    se = 0.02 + 0.01 * (np.arange(k) % 5)
    corr = 0.9 * np.eye(k) + 0.1
    return (np.outer(se, se) * corr).tolist()


_RECIPE = json.dumps({"outcome": {"column": "delirium", "event": 1},
                      "terms": [{"input": i, "transform": "linear"} for i in range(12)],
                      "fit": {"firth": False}}, separators=(",", ":"))


def _sha(text: str) -> str:
    return hashlib.sha256(text.encode()).hexdigest()


def _bootstrap(apparent: dict[str, Any]) -> dict[str, Any]:
    metrics: dict[str, Any] = {}
    for name in ("auc", "brier", "calibration_slope", "calibration_intercept", "ici"):
        app = apparent["metrics"][name]
        optimism = {"auc": 0.0123, "brier": -0.0021, "calibration_slope": 0.0876,
                    "calibration_intercept": 0.0, "ici": 0.0042}[name]
        metrics[name] = {"value": app["value"] - optimism,
                         "note": f"optimism-corrected ({name})"}
        metrics[f"{name}_apparent"] = dict(app)
        metrics[f"{name}_optimism"] = {"value": optimism}
    return {"id": "bootstrap-1", "kind": "bootstrap",
            "label": "Development data, optimism-corrected (bootstrap, 200 resamples)",
            "dataset": apparent["dataset"], "source": "tests/reports/report_fixtures.py",
            "settings": {"bootstrap": 200, "seed": 20261202, "resampling": "ordinary",
                         "failed_resamples": 0},
            "metrics": metrics,
            "notes": ["Knots and levels treated as pre-specified."]}


@cache
def _evidence(family: str, recal: bool) -> tuple[list[dict[str, Any]], float]:
    dev, ext = cohort(1500, 11), cohort(800, 12, older=2.5)
    centre = design(dev).mean(axis=0) if family != "logistic" else None
    rng = np.random.default_rng(5)
    risk_a = independent_risk(dev, family, centre)
    y_a = (rng.random(risk_a.size) < risk_a).astype(float)
    risk_b = independent_risk(ext, family, centre)
    truth_b = 1 / (1 + np.exp(-(0.6 + 1.15 * np.log(risk_b / (1 - risk_b)))))
    y_b = (rng.random(risk_b.size) < truth_b).astype(float)
    common = {"band_boot": 30, "seed": 20261202}
    ds_a = {"name": "Demo Hospital A", "period": "2023-2024", "synthetic": True,
            "population": "adults 65+ having elective hip or knee replacement",
            "sha256": _sha("A")}
    ds_b = {"name": "Demo Hospital B", "period": "2025", "synthetic": True,
            "population": "older, sicker case-mix", "sha256": _sha("B")}
    apparent = evidence_set(y_a, risk_a, kind="apparent", label="Development data (apparent)",
                            dataset=ds_a, settings={"events_per_parameter": 11.2,
                                                    "riley_minimum_rows": 1210,
                                                    "riley_binding_criterion": "shrinkage",
                                                    "recipe": _RECIPE},
                            **common)
    apparent["id"] = "apparent-1"
    apparent["metrics"]["discrimination_slope"] = {"value": 0.1234}
    external = evidence_set(y_b, risk_b, kind="external", label="Demo Hospital B, 2025",
                            dataset=ds_b, **common)
    external["id"] = "external-1"
    reference = 1 / (1 + np.exp(-(-9.0 + 0.1 * ext["age"] + 0.5 * (ext["asa"] == "IV"))))
    cmp = compare_risks(y_b, risk_b, reference, cuts=(0.1, 0.2),
                        thresholds=np.arange(1, 100) / 100,
                        ref_name="Current-use score (age and ASA)")
    external["reclassification"] = reclassification_block(cmp)
    after = 1 / (1 + np.exp(-(RECAL["intercept"] + RECAL["slope"]
                              * np.log(risk_b / (1 - risk_b)))))
    recalibrated = evidence_set(y_b, after, kind="recalibrated",
                                label="Demo Hospital B, 2025, after recalibration",
                                dataset=ds_b, **common)
    recalibrated["id"] = "recalibrated-1"
    sets = [apparent, _bootstrap(apparent), external] + ([recalibrated] if recal else [])
    return sets, float(y_b.sum())


def rich_document(*, family: str = "logistic", recalibrated: bool = False,
                  synthetic: bool = True, evidence: bool = True, signed: bool = False,
                  key: Any = None) -> dict[str, Any]:
    """A valid calculator document (see the module notes)."""
    centre = design(cohort(1500, 11)).mean(axis=0) if family != "logistic" else None
    model: dict[str, Any] = {"family": family}
    if family == "logistic":
        model["intercept"] = INTERCEPT
    model["terms"] = _terms()
    k = len(_beta()) + (1 if family == "logistic" else 0)
    model["covariance"] = _covariance(k)
    if family != "logistic":
        assert centre is not None
        model["survival"] = {"horizon": 1, "horizon_unit": "years", "baseline_survival": S0,
                             "centre": centre.tolist()}
    sets, events_b = _evidence(family, recalibrated) if evidence else ([], 0.0)
    if recalibrated:
        model["recalibration"] = {**RECAL, "events": int(events_b)}
    doc = {
        "format": "calcbuilder-calculator", "format_version": 1,
        "about": {"title": "Post-operative delirium after joint replacement (demo)",
                  "version": "2.1.0",
                  "intended_use": "Estimate the chance of delirium within 7 days after elective "
                                  "hip or knee replacement, to plan prevention.",
                  "population": "Adults aged 65 or over before elective hip or knee "
                                "replacement",
                  "outcome": "delirium (screened twice daily)", "horizon": "within 7 days",
                  "exclusions": ["Emergency or fracture surgery.", "People already delirious."],
                  "authors": ["A. Author", "B. Statistician"],
                  "organisation": "Demo Research Unit", "contact": "demo@example.org",
                  "released": "2026-01-15", "review_by": "2028-01-15",
                  "references": ["Synthetic demonstration; no publication."],
                  "synthetic": synthetic},
        "inputs": _inputs(), "model": model, "evidence": copy.deepcopy(sets),
        "decision": {"default_threshold": 0.15, "reasonable_range": [0.05, 0.4],
                     "rationale": "Prevention bundles are cheap and safe.",
                     "bands": [{"label": "lower", "upper": 0.1},
                               {"label": "higher", "upper": 1.0}]},
        "cautions": ["Estimates support, and do not replace, clinical judgement.",
                     "Not validated outside the two demo hospitals."],
        "test_vectors": _vectors(family, centre, recalibrated),
    }
    if signed:
        from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

        doc = sign_document(doc, key or Ed25519PrivateKey.generate())
    return doc


def write_rich(folder: str | Path, name: str = "rich.calc.json", **kwargs: Any) -> Path:
    """Write :func:`rich_document` to ``folder/name``."""
    path = Path(folder) / name
    path.write_text(json.dumps(rich_document(**kwargs), ensure_ascii=False), "utf-8")
    return path


def signed_calculator(folder: Path) -> tuple[Path, Path]:
    """A signed calculator from ``tests/fixtures_calc.py`` and its public key file."""
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    from calcbuilder.calc.keys import save_key_pair
    from tests.fixtures_calc import write_calculator

    key = Ed25519PrivateKey.generate()
    save_key_pair(Path(folder) / "keys", "unit", key, passphrase=None)
    return (write_calculator(folder, "signed.calc.json", signed=True, key=key),
            Path(folder) / "keys" / "unit.pub")
