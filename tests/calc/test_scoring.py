"""Scoring against outside references: statsmodels GLM, patsy cr, lifelines CoxPHFitter.

Every model here is fitted by a general-purpose library on a dataset shipped inside a
PyPI package (statsmodels.datasets spector / fair / anes96, lifelines load_rossi),
written into the file form, loaded with ModelSpec.from_dict and scored; the risks and
intervals must equal the library's own predictions.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import patsy
import pytest
import statsmodels.api as sm

from calcbuilder.calc.model import ModelSpec
from calcbuilder.calc.problems import Problems
from calcbuilder.calc.scoring import Z95, design_matrix, score

TOL = 1e-10  # same coefficients and covariance, different summation order


def build(raw: dict, kinds: dict) -> ModelSpec:
    problems = Problems()
    model = ModelSpec.from_dict(raw, "model", problems, kinds)
    assert not problems, problems.items
    assert model is not None
    return model


def glm_model(formula: str, data: pd.DataFrame, terms: list[dict], names: dict) -> tuple:
    """Fit statsmodels GLM(Binomial) on a patsy design; write its coefficients into terms.

    ``names`` maps a term name to the patsy column names of its columns; a product
    term's columns are looked up as ``a:b`` (either order) in row-major order.
    """
    y, X = patsy.dmatrices(formula, data, return_type="dataframe")
    fit = sm.GLM(y, X, family=sm.families.Binomial()).fit()
    order = ["Intercept"]
    for term in terms:
        cols = names.get(term["name"])
        if cols is None:  # product of two earlier terms
            a, b = term["transform"]["of"]
            cols = [_pair(fit.params.index, ca, cb) for ca in names[a] for cb in names[b]]
            names[term["name"]] = cols
        term["coefficients"] = [float(fit.params[c]) for c in cols]
        order += cols
    assert sorted(order) == sorted(X.columns), "every fitted column must be used once"
    V = fit.cov_params().loc[order, order].to_numpy()
    raw = {
        "family": "logistic",
        "intercept": float(fit.params["Intercept"]),
        "terms": terms,
        "covariance": V.tolist(),
    }
    return raw, fit, X, order


def _pair(index: pd.Index, a: str, b: str) -> str:
    return f"{a}:{b}" if f"{a}:{b}" in index else f"{b}:{a}"


def assert_matches_statsmodels(s, fit, X, alpha=0.05):
    frame = fit.get_prediction(X).summary_frame(alpha=alpha)
    np.testing.assert_allclose(s.risk, frame["mean"], rtol=0, atol=TOL)
    np.testing.assert_allclose(s.low, frame["mean_ci_lower"], rtol=0, atol=TOL)
    np.testing.assert_allclose(s.high, frame["mean_ci_upper"], rtol=0, atol=TOL)


# --- spector (statsmodels.datasets.spector), methods.md 9.1 -------------------------------


@pytest.fixture(scope="module")
def spector() -> pd.DataFrame:
    return sm.datasets.spector.load_pandas().data


SPECTOR_KINDS = {"gpa": "number", "tuce": "number", "psi": "yes_no"}


def spector_terms() -> tuple[list[dict], dict]:
    terms = [
        {"name": "gpa", "input": "gpa", "transform": {"type": "linear"}},
        {"name": "tuce", "input": "tuce", "transform": {"type": "linear"}},
        {"name": "psi", "input": "psi", "transform": {"type": "indicator"}},
    ]
    return terms, {"gpa": ["GPA"], "tuce": ["TUCE"], "psi": ["PSI"]}


def spector_values(d: pd.DataFrame) -> dict:
    return {"gpa": d.GPA.to_numpy(), "tuce": d.TUCE.to_numpy(), "psi": d.PSI.to_numpy() == 1}


def test_spector_worked_example_methods_9_1(spector):
    # methods.md 9.1 [LIB]: GPA 3, TUCE 20, PSI 1 -> eta -0.2611681919, SE(eta) 0.7374131824,
    # risk 0.4350765625, 95% CI 0.1536219425 - 0.7656904887
    terms, names = spector_terms()
    raw, _, _, _ = glm_model("GRADE ~ GPA + TUCE + PSI", spector, terms, names)
    s = score(build(raw, SPECTOR_KINDS), {"gpa": [3.0], "tuce": [20.0], "psi": [True]})
    assert s.eta[0] == pytest.approx(-0.2611681919, abs=1e-8)
    assert s.risk[0] == pytest.approx(0.4350765625, abs=1e-8)
    assert s.low[0] == pytest.approx(0.1536219425, abs=1e-8)
    assert s.high[0] == pytest.approx(0.7656904887, abs=1e-8)
    assert (math.log(s.high[0] / (1 - s.high[0])) - s.eta[0]) / Z95 == pytest.approx(
        0.7374131824, abs=1e-8
    )
    assert s.interval_available


def test_spector_printed_coefficients_methods_9_1():
    # methods.md 9.1 [LIB] coefficients as printed (9 decimals): const -13.021346856,
    # GPA 2.826112595, TUCE 0.095157661, PSI 2.378687655 -> risk 0.4350765625
    terms, _ = spector_terms()
    for term, coef in zip(terms, (2.826112595, 0.095157661, 2.378687655), strict=True):
        term["coefficients"] = [coef]
    raw = {"family": "logistic", "intercept": -13.021346856, "terms": terms}
    s = score(build(raw, SPECTOR_KINDS), {"gpa": 3.0, "tuce": 20.0, "psi": 1})
    assert s.risk[0] == pytest.approx(0.4350765625, abs=1e-8)
    assert not s.interval_available
    assert np.isnan(s.low).all()
    assert np.isnan(s.high).all()
    assert "no covariance" in s.interval_note


def test_spector_all_rows_with_log_and_interaction(spector):
    # statsmodels GLM(Binomial) + get_prediction().summary_frame() on spector, every row;
    # terms: log(GPA), TUCE, PSI and the product log(GPA) x PSI
    terms, names = spector_terms()
    terms[0]["transform"] = {"type": "log"}
    terms.append({"name": "lgpa_psi", "transform": {"type": "product", "of": ["gpa", "psi"]}})
    names["gpa"] = ["np.log(GPA)"]
    formula = "GRADE ~ np.log(GPA) + TUCE + PSI + np.log(GPA):PSI"
    raw, fit, X, _ = glm_model(formula, spector, terms, names)
    s = score(build(raw, SPECTOR_KINDS), spector_values(spector))
    assert_matches_statsmodels(s, fit, X)
    np.testing.assert_allclose(s.linear_predictor, fit.predict(X, which="linear"), atol=TOL)
    frame90 = fit.get_prediction(X).summary_frame(alpha=0.10)
    s90 = score(build(raw, SPECTOR_KINDS), spector_values(spector), level=0.90)
    np.testing.assert_allclose(s90.low, frame90["mean_ci_lower"], atol=TOL)
    np.testing.assert_allclose(s90.high, frame90["mean_ci_upper"], atol=TOL)


# --- fair (statsmodels.datasets.fair): levels, hinges, sqrt, log, levels x hinges -------------

FAIR_KINDS = {
    "occupation": ("choice", tuple(f"occ{i}" for i in range(1, 7))),
    "religious": ("choice", tuple(f"rel{i}" for i in range(1, 5))),
    "age": "number",
    "yrs_married": "number",
    "rate_marriage": "number",
}


@pytest.fixture(scope="module")
def fair_fit():
    d = sm.datasets.fair.load_pandas().data
    d["occ"] = "occ" + d.occupation.astype(int).astype(str)
    d["rel"] = "rel" + d.religious.astype(int).astype(str)
    d["aff"] = (d.affairs > 0).astype(float)
    occ = "C(occ, Treatment(reference='occ3'))"
    hinge = "np.maximum(rate_marriage - 3, 0)"
    formula = (
        f"aff ~ {occ} + np.log(age) + np.sqrt(yrs_married) + rate_marriage + {hinge}"
        f" + C(rel) + C(rel):rate_marriage + C(rel):{hinge}"
    )
    levels = ["occ1", "occ2", "occ4", "occ5", "occ6"]
    terms = [
        {"name": "occ", "input": "occupation",
         "transform": {"type": "levels", "reference": "occ3", "levels": levels}},
        {"name": "lage", "input": "age", "transform": {"type": "log"}},
        {"name": "syrs", "input": "yrs_married", "transform": {"type": "sqrt"}},
        {"name": "rm", "input": "rate_marriage", "transform": {"type": "hinges", "knots": [3]}},
        {"name": "rel", "input": "religious",
         "transform": {"type": "levels", "reference": "rel1", "levels": ["rel2", "rel3", "rel4"]}},
        {"name": "rel_rm", "transform": {"type": "product", "of": ["rel", "rm"]}},
    ]  # fmt: skip
    names = {
        "occ": [f"{occ}[T.{v}]" for v in levels],
        "lage": ["np.log(age)"],
        "syrs": ["np.sqrt(yrs_married)"],
        "rm": ["rate_marriage", hinge],
        "rel": [f"C(rel)[T.rel{i}]" for i in (2, 3, 4)],
    }
    raw, fit, X, order = glm_model(formula, d, terms, names)
    values = {
        "occupation": d.occ.to_numpy(dtype=object),
        "religious": d.rel.to_numpy(dtype=str),
        "age": d.age.to_numpy(),
        "yrs_married": d.yrs_married.to_numpy(),
        "rate_marriage": d.rate_marriage.to_numpy(),
    }
    return raw, fit, X, order, values


def test_fair_levels_hinges_and_product_match_statsmodels(fair_fit):
    # statsmodels GLM(Binomial) + summary_frame on all 6366 rows of fair
    raw, fit, X, _, values = fair_fit
    s = score(build(raw, FAIR_KINDS), values)
    assert_matches_statsmodels(s, fit, X)


def test_fair_design_matrix_equals_patsy_columns(fair_fit):
    # patsy builds the same columns (dummies, log, sqrt, hinge, row-major products)
    raw, _, X, order, values = fair_fit
    ours = design_matrix(build(raw, FAIR_KINDS), values)
    np.testing.assert_allclose(ours, X[order[1:]].to_numpy(), rtol=1e-15, atol=0)


def test_fair_contributions_sum_to_linear_predictor(fair_fit):
    # [ANALYTIC] FORMAT.md: contributions sum to eta - intercept; a product is split half/half
    raw, _, _, _, values = fair_fit
    model = build(raw, FAIR_KINDS)
    s = score(model, values)
    total = sum(s.contributions.values())
    np.testing.assert_allclose(total, s.linear_predictor - raw["intercept"], atol=1e-12)
    X = design_matrix(model, values)
    beta_rm = np.array(raw["terms"][3]["coefficients"])
    beta_prod = np.array(raw["terms"][5]["coefficients"])
    rel_rm = X[:, 12:18] @ beta_prod
    np.testing.assert_allclose(s.contributions["rate_marriage"], X[:, 7:9] @ beta_rm + rel_rm / 2)
    assert set(s.contributions) == set(FAIR_KINDS)


def test_fair_recalibration_equals_statsmodels_refit(fair_fit):
    # logistic recalibration (methods.md 8): GLM of the outcome on [1, eta] in a second sample
    # (odd rows of fair) gives a and b; the recalibrated file must reproduce its fitted risks
    raw, fit, X, _, values = fair_fit
    eta = fit.predict(X, which="linear").to_numpy()
    y = fit.model.endog
    odd = np.arange(len(y)) % 2 == 1
    refit = sm.GLM(y[odd], sm.add_constant(eta[odd]), family=sm.families.Binomial()).fit()
    a, b = (float(v) for v in refit.params)
    recal = {"method": "slope", "intercept": a, "slope": b, "dataset": "fair, odd rows"}
    s = score(build({**raw, "recalibration": recal}, FAIR_KINDS), values)
    np.testing.assert_allclose(s.risk, refit.predict(sm.add_constant(eta)), atol=TOL)
    se = fit.get_prediction(X).summary_frame()["mean_se"].to_numpy()
    se_eta = se / (fit.fittedvalues * (1 - fit.fittedvalues))  # delta method, risk -> logit
    expit = 1 / (1 + np.exp(-(a + b * eta - Z95 * abs(b) * se_eta)))
    np.testing.assert_allclose(s.low, expit, atol=1e-9)
    assert "recalibration" in s.interval_note


# --- anes96 (statsmodels.datasets.anes96): restricted cubic spline ----------------------------


def slow_rcs_matrix(x: np.ndarray, t: list[float]) -> np.ndarray:
    """methods.md 10.1 evaluated value by value in plain Python (independent oracle)."""
    k = len(t)
    rows = []
    for v in x.tolist():
        row = [v]
        for j in range(k - 2):
            c = (
                max(v - t[j], 0) ** 3
                - max(v - t[k - 2], 0) ** 3 * (t[k - 1] - t[j]) / (t[k - 1] - t[k - 2])
                + max(v - t[k - 1], 0) ** 3 * (t[k - 2] - t[j]) / (t[k - 1] - t[k - 2])
            )
            row.append(c / (t[k - 1] - t[0]) ** 2)
        rows.append(row)
    return np.array(rows)


@pytest.fixture(scope="module")
def anes_rcs():
    d = sm.datasets.anes96.load_pandas().data
    knots = [float(v) for v in np.quantile(d.age, [0.05, 0.35, 0.65, 0.95])]  # Harrell k = 4
    R = slow_rcs_matrix(d.age.to_numpy(), knots)
    X = np.column_stack([np.ones(len(d)), R, np.log(d.popul + 1.0)])
    fit = sm.GLM(d.vote, X, family=sm.families.Binomial()).fit()
    p = [float(v) for v in fit.params]
    raw = {
        "family": "logistic",
        "intercept": p[0],
        "terms": [
            {"name": "age", "input": "age", "transform": {"type": "rcs", "knots": knots},
             "coefficients": p[1:4]},
            {"name": "popul", "input": "popul", "transform": {"type": "log", "shift": 1},
             "coefficients": p[4:]},
        ],
        "covariance": np.asarray(fit.cov_params()).tolist(),
    }  # fmt: skip
    model = build(raw, {"age": "number", "popul": "number"})
    return d, knots, fit, X, model


def test_rcs_model_matches_statsmodels_on_slow_basis(anes_rcs):
    # statsmodels GLM fitted on the methods.md 10.1 basis built by slow_rcs_matrix
    d, _, fit, X, model = anes_rcs
    s = score(model, {"age": d.age.to_numpy(), "popul": d.popul.to_numpy()})
    assert_matches_statsmodels(s, fit, X)


def test_rcs_model_matches_patsy_cr_same_function_space(anes_rcs):
    # methods.md 10.4: patsy cr(x, knots=t[1:-1], lower_bound=t[0], upper_bound=t[-1]) spans the
    # same space as [1, RCS]; fitted risks and their intervals agree, also outside the knots
    d, t, _, _, model = anes_rcs
    spline = f"cr(age, knots={t[1:-1]}, lower_bound={t[0]}, upper_bound={t[-1]}"
    spline += ", constraints='center')"
    y, Xcr = patsy.dmatrices(f"vote ~ {spline} + np.log(popul + 1)", d, return_type="dataframe")
    fit_cr = sm.GLM(y, Xcr, family=sm.families.Binomial()).fit()
    s = score(model, {"age": d.age.to_numpy(), "popul": d.popul.to_numpy()})
    np.testing.assert_allclose(s.risk, fit_cr.fittedvalues, atol=1e-6)  # two separate fits
    new = pd.DataFrame({"age": [10.0, 19.0, 50.0, 90.0, 120.0], "popul": [0.0, 5, 50, 500, 5000]})
    Xnew = patsy.build_design_matrices([Xcr.design_info], new)[0]
    frame = fit_cr.get_prediction(np.asarray(Xnew)).summary_frame()
    s_new = score(model, {"age": new.age.to_numpy(), "popul": new.popul.to_numpy()})
    np.testing.assert_allclose(s_new.risk, frame["mean"], atol=1e-6)
    np.testing.assert_allclose(s_new.low, frame["mean_ci_lower"], atol=1e-6)
    np.testing.assert_allclose(s_new.high, frame["mean_ci_upper"], atol=1e-6)


# --- rossi (lifelines.datasets.load_rossi): Cox model at a horizon ----------------------------

ROSSI_KINDS = dict.fromkeys(("fin", "race", "wexp", "mar", "paro"), "yes_no") | {
    "age": "number",
    "prio": "number",
}


@pytest.fixture(scope="module")
def rossi_cox():
    from lifelines import CoxPHFitter
    from lifelines.datasets import load_rossi

    d = load_rossi()
    d["sqrt_prio"] = np.sqrt(d.prio)
    d["age_fin"] = d.age * d.fin
    cols = ["fin", "age", "race", "wexp", "mar", "paro", "sqrt_prio", "age_fin"]
    cph = CoxPHFitter().fit(d[[*cols, "week", "arrest"]], "week", "arrest")
    beta = cph.params_[cols]
    terms = [{"name": c, "input": c, "transform": {"type": "indicator"}} for c in cols[:6]]
    terms[1]["transform"] = {"type": "linear"}
    terms += [
        {"name": "sqrt_prio", "input": "prio", "transform": {"type": "sqrt"}},
        {"name": "age_fin", "transform": {"type": "product", "of": ["age", "fin"]}},
    ]
    for term, c in zip(terms, cols, strict=True):
        term["coefficients"] = [float(beta[c])]
    V = cph.variance_matrix_.loc[cols, cols].to_numpy()
    # lifelines centres every column at its training mean: predict_log_partial_hazard uses
    # (X - _norm_mean) @ params (lifelines/fitters/coxph_fitter.py, read in the venv)
    centre = [float(cph._norm_mean[c]) for c in cols]
    values = {c: d[c].to_numpy() for c in ("fin", "race", "wexp", "mar", "paro")}
    values |= {"age": d.age.to_numpy(dtype=float), "prio": d.prio.to_numpy(dtype=float)}
    return cph, d[cols], terms, V, centre, values


def rossi_model(rossi_cox, t: float) -> ModelSpec:
    cph, _, terms, V, centre, _ = rossi_cox
    s0 = float(cph.baseline_survival_.loc[t].iloc[0])
    raw = {
        "family": "survival_at_horizon",
        "terms": terms,
        "covariance": V.tolist(),
        "survival": {"horizon": t, "horizon_unit": "weeks", "baseline_survival": s0,
                     "centre": centre},
    }  # fmt: skip
    return build(raw, ROSSI_KINDS)


@pytest.mark.parametrize("t", [26.0, 52.0])
def test_survival_at_horizon_matches_lifelines(rossi_cox, t):
    # lifelines CoxPHFitter on load_rossi: 1 - predict_survival_function(X, times=[t])
    cph, X, _, _, _, values = rossi_cox
    s = score(rossi_model(rossi_cox, t), values)
    expected = 1 - cph.predict_survival_function(X, times=[t]).to_numpy()[0]
    np.testing.assert_allclose(s.risk, expected, rtol=0, atol=1e-12)
    lp = cph.predict_log_partial_hazard(X).to_numpy()
    np.testing.assert_allclose(s.linear_predictor, lp, atol=1e-12)


def test_survival_interval_baseline_fixed_and_contributions(rossi_cox):
    # methods.md 9.2 with S0 fixed: 1 - S0 ** exp(lp_c -/+ z sqrt(xc' V xc)), V = lifelines
    # variance_matrix_, xc = columns - lifelines' training means; written out here by hand
    cph, X, _, V, centre, values = rossi_cox
    model = rossi_model(rossi_cox, 52.0)
    s = score(model, values)
    s0 = float(cph.baseline_survival_.loc[52.0].iloc[0])
    xc = X.to_numpy(dtype=float) - np.array(centre)
    lp = xc @ cph.params_[X.columns].to_numpy()
    se = np.sqrt(np.einsum("ij,jk,ik->i", xc, V, xc))
    np.testing.assert_allclose(s.low, 1 - s0 ** np.exp(lp - 1.959963984540054 * se), atol=1e-12)
    np.testing.assert_allclose(s.high, 1 - s0 ** np.exp(lp + 1.959963984540054 * se), atol=1e-12)
    np.testing.assert_allclose(s.eta, math.log(-math.log(s0)) + lp, atol=1e-12)
    np.testing.assert_allclose(sum(s.contributions.values()), s.linear_predictor, atol=1e-12)
    assert "baseline survival is treated as fixed" in s.interval_note
