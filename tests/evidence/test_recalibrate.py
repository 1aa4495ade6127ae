"""Model updating (methods.md section 8) against statsmodels GLM, analytic identities and the demo.

Outside references, named beside each check:

* statsmodels 0.15 ``GLM(Binomial)`` with ``offset=LP_old`` (intercept update) and on
  ``[1, LP_old]`` (logistic recalibration), fitted on rows of the ``fair`` dataset
  shipped inside statsmodels (``affairs > 0`` as the outcome);
* methods.md section 8 [ANALYTIC] identities;
* the synthetic demo cohorts of :mod:`calcbuilder.demo.scenario`.

The helpers at the top (a calculator document built from a statsmodels fit, with
test vectors from statsmodels' ``predict``) are reused by the compare and CLI tests.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from calcbuilder.calc.document import Calculator, load_calculator, save_calculator
from calcbuilder.calc.model import Recalibration
from calcbuilder.calc.scoring import score
from calcbuilder.demo.scenario import make_cohort
from calcbuilder.errors import CalcbuilderError
from calcbuilder.evidence.errors import DataError
from calcbuilder.evidence.recalibrate import (
    CalibrationSummary,
    compose,
    fit_recalibration,
    recalibrate,
    updated_vector_risks,
)
from calcbuilder.evidence.scoring_data import Outcome, score_table
from calcbuilder.stats import StatsInputError

# ----------------------------------------------------------------- shared helpers

FAIR_INPUTS = [("rate_marriage", "number", (1, 5)), ("age", "number", (15, 60)),
               ("yrs_married", "number", (0, 40)), ("children", "number", (0, 10)),
               ("religious", "number", (1, 4)), ("educ", "number", (9, 20))]
DEMO_INPUTS = [("age", "number", (18, 110)), ("cog_errors", "number", (0, 10)),
               ("asa", "choice", ("I-II", ("III", "IV"))), ("sensory", "yes_no", None),
               ("sodium", "number", (100, 180)), ("creatinine", "number", (10, 2000)),
               ("medicines", "number", (0, 40)), ("anaesthesia", "choice", ("neuraxial",
                                                                            ("general",))),
               ("alcohol", "yes_no", None)]
DECISION = {"default_threshold": 0.1, "reasonable_range": [0.05, 0.3],
            "rationale": "Test values only.",
            "bands": [{"label": "lower", "upper": 0.1}, {"label": "middle", "upper": 0.2},
                      {"label": "higher", "upper": 1.0}]}


def design(frame: pd.DataFrame, spec: list[tuple[str, str, Any]]) -> np.ndarray:
    """The model's columns written out by hand (independent of calc.scoring)."""
    cols = []
    for name, kind, info in spec:
        if kind == "choice":
            cols += [(frame[name] == level).to_numpy(float) for level in info[1]]
        else:
            cols.append(frame[name].to_numpy(float))
    return np.column_stack(cols)


def glm_fit(X: np.ndarray, y: np.ndarray, offset: np.ndarray | None = None) -> Any:
    """statsmodels GLM Binomial with a tight tolerance (the outside reference)."""
    return sm.GLM(y, sm.add_constant(X, has_constant="add") if X.size else np.ones((y.size, 1)),
                  family=sm.families.Binomial(), offset=offset).fit(tol=1e-13, maxiter=100)


def _input(name: str, kind: str, info: Any, frame: pd.DataFrame) -> tuple[dict, dict]:
    label = name.replace("_", " ").capitalize()
    if kind == "number":
        col = frame[name].astype(float)
        return ({"id": name, "label": label, "kind": "number", "unit": "units",
                 "limits": {"low": info[0], "high": info[1]},
                 "developed": {"low": float(col.min()), "high": float(col.max())}},
                {"name": name, "input": name, "transform": {"type": "linear"}})
    if kind == "yes_no":
        return ({"id": name, "label": label, "kind": "yes_no"},
                {"name": name, "input": name, "transform": {"type": "indicator"}})
    ref, levels = info
    choices = [{"value": v, "label": f"{label} {v}"} for v in (ref, *levels)]
    return ({"id": name, "label": label, "kind": "choice", "choices": choices},
            {"name": name, "input": name,
             "transform": {"type": "levels", "reference": ref, "levels": list(levels)}})


def _vector_values(row: pd.Series, spec: list[tuple[str, str, Any]]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for name, kind, _ in spec:
        value = row[name]
        out[name] = (float(value) if kind == "number" else bool(value) if kind == "yes_no"
                     else str(value))
    return out


def make_doc(frame: pd.DataFrame, y: np.ndarray, spec: list[tuple[str, str, Any]], *,
             title: str = "Fitted test model", decision: dict | None = None,
             shift: float = 0.0) -> tuple[dict[str, Any], Any]:
    """A valid calculator document from a statsmodels fit of ``y`` on ``spec``'s columns.

    ``shift`` is added to the fitted intercept (a deliberately miscalibrated model).
    Test vectors: the first five rows, risks from statsmodels' ``predict``.
    """
    X = design(frame, spec)
    res = glm_fit(X, y)
    params = np.asarray(res.params, dtype=float).copy()
    params[0] += shift
    inputs, terms, k = [], [], 1
    for name, kind, info in spec:
        inp, term = _input(name, kind, info, frame)
        width = len(info[1]) if kind == "choice" else 1
        term["coefficients"] = params[k:k + width].tolist()
        k += width
        inputs.append(inp)
        terms.append(term)
    vec_rows = frame.iloc[:5]
    X_vec = sm.add_constant(design(vec_rows, spec), has_constant="add")
    # the test vectors' risks as statsmodels predicts them (by hand when shifted)
    risks = res.predict(X_vec) if shift == 0.0 else expit(X_vec @ params)
    doc = {
        "format": "calcbuilder-calculator", "format_version": 1,
        "about": {"title": title, "version": "1.0.0",
                  "intended_use": "Testing model updating.", "population": "Test rows",
                  "outcome": "the test outcome", "horizon": "at the visit",
                  "released": "2026-01-01", "review_by": "2030-01-01", "synthetic": True},
        "inputs": inputs,
        "model": {"family": "logistic", "intercept": float(params[0]), "terms": terms,
                  "covariance": np.asarray(res.cov_params()).tolist()},
        "evidence": [], "decision": decision or DECISION,
        "cautions": ["Test material only; supports, never replaces, clinical judgement."],
        "test_vectors": [{"name": f"row {i + 1}", "values": _vector_values(r, spec),
                          "risk": float(risk)}
                         for i, ((_, r), risk) in enumerate(zip(vec_rows.iterrows(), risks,
                                                                strict=True))],
    }
    return doc, res


def fair_halves(seed: int = 7) -> tuple[pd.DataFrame, pd.DataFrame]:
    """statsmodels ``fair``: half A for fitting, half B with half of its events dropped."""
    data = sm.datasets.fair.load_pandas().data
    data = data.assign(affair=(data["affairs"] > 0).astype(int))
    order = np.random.default_rng(seed).permutation(len(data))
    a, b = data.iloc[order[: len(data) // 2]], data.iloc[order[len(data) // 2:]]
    events = np.flatnonzero(b["affair"].to_numpy() == 1)
    drop = np.random.default_rng(seed + 1).choice(events, size=events.size // 2, replace=False)
    b = b.drop(b.index[drop])
    return a.reset_index(drop=True), b.reset_index(drop=True)


def demo_frames() -> tuple[pd.DataFrame, pd.DataFrame]:
    """Synthetic demo: development (clean) and external (raw, with its defects) cohorts."""
    dev, ext = make_cohort("development"), make_cohort("external")
    return pd.DataFrame(dev.clean), pd.DataFrame(ext.raw)


def logit(p: np.ndarray) -> np.ndarray:
    return np.log(p) - np.log1p(-p)


def expit(x: np.ndarray) -> np.ndarray:
    return 1.0 / (1.0 + np.exp(-x))


@pytest.fixture(scope="module")
def fair() -> dict[str, Any]:
    a, b = fair_halves()
    doc, res = make_doc(a, a["affair"].to_numpy(float), FAIR_INPUTS, title="Fair model")
    calc = Calculator.from_dict(doc)
    lp_b = sm.add_constant(design(b, FAIR_INPUTS), has_constant="add") @ np.asarray(res.params)
    return {"a": a, "b": b, "calc": calc, "res": res, "lp_b": lp_b,
            "y_b": b["affair"].to_numpy(float)}


# ----------------------------------------------------------------- against statsmodels

def test_intercept_update_matches_statsmodels_glm_with_offset(fair):
    y, lp = fair["y_b"], fair["lp_b"]
    assert y.mean() < fair["a"]["affair"].mean() - 0.1  # the outcome rate really shifted
    fit = fit_recalibration(y, lp, "intercept")
    ref = glm_fit(np.empty((y.size, 0)), y, offset=lp)  # statsmodels GLM, LP_old as offset
    assert fit.intercept == pytest.approx(float(ref.params[0]), abs=1e-6)
    assert fit.intercept_se == pytest.approx(float(ref.bse[0]), abs=1e-6)
    assert fit.slope == 1.0
    assert fit.slope_se is None
    assert fit.loglik == pytest.approx(float(ref.llf), abs=1e-6)
    assert fit.intercept < -0.3  # fewer events than the model expects


def test_logistic_recalibration_matches_statsmodels_glm_on_lp(fair):
    y, lp = fair["y_b"], fair["lp_b"]
    fit = fit_recalibration(y, lp, "slope")
    ref = glm_fit(lp[:, None], y)  # statsmodels GLM of y on [1, LP_old]
    np.testing.assert_allclose([fit.intercept, fit.slope], ref.params, rtol=0, atol=1e-6)
    np.testing.assert_allclose([fit.intercept_se, fit.slope_se], ref.bse, rtol=0, atol=1e-6)
    np.testing.assert_allclose(fit.cov, ref.cov_params(), rtol=0, atol=1e-6)


def test_eta_read_from_the_data_equals_statsmodels_linear_predictor(fair):
    data = score_table([fair["calc"]], fair["b"], Outcome("affair"))
    assert data.n == len(fair["b"])
    assert data.excluded == 0
    # statsmodels GLMResults.predict(which="linear") on the same rows
    lp = fair["res"].predict(sm.add_constant(design(fair["b"], FAIR_INPUTS), has_constant="add"),
                             which="linear")
    np.testing.assert_allclose(data.etas[0], lp, rtol=0, atol=1e-12)
    np.testing.assert_array_equal(data.y, fair["y_b"])


# ----------------------------------------------------------------- analytic checks

def test_after_intercept_update_expected_equals_observed(fair):
    """methods.md 8 [ANALYTIC]: sum expit(a + LP) = sum y (score equation)."""
    y, lp = fair["y_b"], fair["lp_b"]
    fit = fit_recalibration(y, lp, "intercept")
    assert expit(fit.intercept + lp).sum() == pytest.approx(y.sum(), abs=1e-6)


@pytest.mark.parametrize("c", [-2.5, 0.0, 1.3])
def test_constant_lp_gives_logit_of_mean_minus_c(c):
    """methods.md 8 [ANALYTIC]: all LP equal c -> a = logit(ybar) - c."""
    y = np.array([1, 0, 0, 1, 0, 0, 0, 1, 0, 0], dtype=float)
    fit = fit_recalibration(y, np.full(y.size, c), "intercept")
    assert fit.intercept == pytest.approx(math.log(0.3 / 0.7) - c, abs=1e-10)
    # Fisher information n ybar (1 - ybar) -> SE 1/sqrt(10 * 0.21)
    assert fit.intercept_se == pytest.approx(1 / math.sqrt(10 * 0.21), abs=1e-10)


def test_slope_with_constant_lp_is_refused():
    y = np.array([1, 0, 0, 1, 0, 0], dtype=float)
    with pytest.raises(StatsInputError):
        fit_recalibration(y, np.zeros(6), "slope")


def test_negative_slope_and_unknown_method_are_refused():
    lp = np.linspace(-2, 2, 40)
    y = (lp < 0).astype(float)
    y[[0, 39]] = 1 - y[[0, 39]]  # not separated, but reversed
    with pytest.raises(CalcbuilderError, match="does not rank patients in the right direction"):
        fit_recalibration(y, lp, "slope")
    with pytest.raises(CalcbuilderError, match="method must be 'intercept' or 'slope'"):
        fit_recalibration(y, lp, "refit")


def test_compose_applies_the_new_update_after_the_old_one():
    fit = fit_recalibration(np.array([1, 0, 0, 1, 0, 1, 0, 0.0]),
                            np.array([-1, -0.5, 0, 0.5, 1, 1.5, -2, 2.0]), "slope")
    old = Recalibration("slope", 0.4, 0.8, "Site C", 100, 10)
    new = compose(old, fit, dataset="Site D")
    eta = np.linspace(-3, 3, 7)
    np.testing.assert_allclose(new.intercept + new.slope * eta,
                               fit.intercept + fit.slope * (0.4 + 0.8 * eta), atol=1e-12)
    assert new.method == "slope"
    assert "Site D" in str(new.dataset)
    assert "Site C" in str(new.dataset)
    only = compose(None, fit_recalibration([1, 0, 0, 1.0], [0, 0, 1, 1.0], "intercept"),
                   dataset="Site D")
    assert (only.method, only.slope, only.n, only.events) == ("intercept", 1.0, 4, 2)


# ----------------------------------------------------------------- the updated calculator

@pytest.mark.parametrize("method", ["intercept", "slope"])
def test_recalibrated_calculator_scores_as_expit_a_plus_b_eta(fair, tmp_path, method):
    calc = fair["calc"]
    data = score_table([calc], fair["b"], Outcome("affair"))
    result = recalibrate(calc, data, method, name="fair, half B", band_boot=0, seed=1)
    fit, new = result.fit, result.calculator
    rec = new.model.recalibration
    assert rec is not None
    assert (rec.method, rec.dataset, rec.n, rec.events) == (method, "fair, half B", data.n,
                                                            data.events)
    values = {name: fair["b"][name].to_numpy(float) for name, _, _ in FAIR_INPUTS}
    expected = expit(fit.intercept + fit.slope * fair["lp_b"])  # from statsmodels' LP
    np.testing.assert_allclose(score(new.model, values).risk, expected, rtol=0, atol=1e-12)
    # the vectors: expit(a + b logit(stored risk)) from the file's risks
    stored = np.array([v.risk for v in calc.test_vectors])
    np.testing.assert_allclose([v.risk for v in new.test_vectors],
                               expit(fit.intercept + fit.slope * logit(stored)), atol=1e-15)
    path = tmp_path / "updated.calc.json"
    save_calculator(new, path)
    loaded = load_calculator(path)  # re-scores the vectors (1e-9) and checks every rule
    assert loaded.calculator.signature is None
    kinds = [e.kind for e in loaded.calculator.evidence]
    assert kinds == ["external", "recalibrated"]
    ext, after = loaded.calculator.evidence
    assert ext.raw["settings"]["outcome_column"] == "affair"
    assert after.raw["settings"]["recalibration_method"] == method


def test_after_intercept_update_citl_is_zero_and_before_after_match_stats(fair):
    calc = fair["calc"]
    data = score_table([calc], fair["b"], Outcome("affair"))
    result = recalibrate(calc, data, "intercept", name="fair B", band_boot=0, seed=1)
    assert abs(result.after.intercept.value) < 1e-8
    assert result.after.observed_expected == pytest.approx(1.0, abs=1e-8)
    assert result.before.intercept.high < 0  # miscalibrated before: CI excludes 0
    # the evidence sets' calibration intercepts are the same numbers
    ext, after = result.calculator.evidence
    assert ext.metric("calibration_intercept")["value"] == pytest.approx(
        result.before.intercept.value, abs=1e-12)
    assert abs(after.metric("calibration_intercept")["value"]) < 1e-8


def test_second_recalibration_composes_and_keeps_evidence(fair):
    calc = fair["calc"]
    b = fair["b"]
    first, second = b.iloc[: len(b) // 2], b.iloc[len(b) // 2:].reset_index(drop=True)
    once = recalibrate(calc, score_table([calc], first, Outcome("affair")), "slope",
                       name="first", band_boot=0, seed=1)
    data2 = score_table([once.calculator], second, Outcome("affair"))
    twice = recalibrate(once.calculator, data2, "intercept", name="second", band_boot=0, seed=1)
    a1, b1, a2 = once.fit.intercept, once.fit.slope, twice.fit.intercept
    rec = twice.calculator.model.recalibration
    assert rec is not None
    assert twice.previous is not None
    assert rec.intercept == pytest.approx(a2 + a1, abs=1e-12)
    assert rec.slope == pytest.approx(b1, abs=1e-15)
    assert rec.method == "slope"
    lp = sm.add_constant(design(second, FAIR_INPUTS), has_constant="add") @ np.asarray(
        fair["res"].params)
    values = {name: second[name].to_numpy(float) for name, _, _ in FAIR_INPUTS}
    np.testing.assert_allclose(score(twice.calculator.model, values).risk,
                               expit(a2 + (a1 + b1 * lp)), atol=1e-12)
    assert [e.id for e in twice.calculator.evidence] == ["external-1", "recalibrated-1",
                                                         "external-2", "recalibrated-2"]


def test_vector_risk_of_exactly_one_is_refused(fair):
    doc = fair["calc"].payload()
    doc["test_vectors"][0]["risk"] = 1.0
    forged = Calculator.from_dict(doc, check_vectors=False)
    fit = fit_recalibration([1, 0, 1, 0.0], [0, 0, 0, 0.0], "intercept")
    with pytest.raises(CalcbuilderError, match="exactly 0 or 1"):
        updated_vector_risks(forged, fit)


def test_survival_model_is_refused(fair):
    calc = fair["calc"]
    surv = Calculator.from_dict(_survival_doc(calc), check_vectors=False)
    data = score_table([calc], fair["b"], Outcome("affair"))
    with pytest.raises(DataError, match="updates logistic models only"):
        recalibrate(surv, data, "intercept", name="x", band_boot=0)


def _survival_doc(calc: Calculator) -> dict[str, Any]:
    doc = calc.payload()
    model = doc["model"]
    del model["intercept"], model["covariance"]
    model["family"] = "survival_at_horizon"
    model["survival"] = {"horizon": 1, "horizon_unit": "years", "baseline_survival": 0.8,
                         "centre": [0.0] * len(model["terms"])}
    return doc


# ----------------------------------------------------------------- the synthetic demo

@pytest.fixture(scope="module")
def demo() -> dict[str, Any]:
    dev, ext = demo_frames()
    doc, res = make_doc(dev, dev["delirium"].to_numpy(float), DEMO_INPUTS,
                        title="Demo delirium model (synthetic)")
    return {"dev": dev, "ext": ext, "calc": Calculator.from_dict(doc), "res": res}


def test_demo_model_is_miscalibrated_externally_until_intercept_update(demo):
    calc = demo["calc"]
    apparent = score_table([calc], demo["dev"], Outcome("delirium"))
    at_home = CalibrationSummary.of(apparent.y, apparent.risks[0])
    assert abs(at_home.intercept.value) < 1e-6  # methods.md 3.3 identity on development data
    assert not at_home.miscalibrated
    data = score_table([calc], demo["ext"], Outcome("delirium"))
    assert data.refused == 9  # the generator's nine defective rows, each refused
    assert data.refused_examples
    assert "row " in data.refused_examples[0]
    result = recalibrate(calc, data, "intercept", name="Demo Hospital B", band_boot=0, seed=1)
    assert result.before.intercept.low > 0  # risks too low at B: the CI excludes 0
    assert result.before.miscalibrated
    assert abs(result.after.intercept.value) < 1e-8  # calibration-in-the-large is 0 after
    # and the update equals statsmodels' GLM with the old LP as offset on the rows used
    kept = demo["ext"].iloc[data.rows]
    lp = sm.add_constant(design(kept, DEMO_INPUTS), has_constant="add") @ np.asarray(
        demo["res"].params)
    ref = glm_fit(np.empty((data.n, 0)), data.y, offset=lp)
    assert result.fit.intercept == pytest.approx(float(ref.params[0]), abs=1e-6)


def test_vectors_our_scoring_does_not_reproduce_are_refused(fair, monkeypatch):
    import calcbuilder.evidence.recalibrate as module

    real = module.updated_vector_risks
    monkeypatch.setattr(module, "updated_vector_risks",
                        lambda calc, fit: [r + 1e-6 for r in real(calc, fit)])
    data = score_table([fair["calc"]], fair["b"], Outcome("affair"))
    with pytest.raises(CalcbuilderError, match=r"row 1.*difference 1e-06 > 1e-09"):
        recalibrate(fair["calc"], data, "slope", name="B", band_boot=0)
