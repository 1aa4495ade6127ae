"""evidence_set against outside references on statsmodels' anes96 fit: scikit-learn (AUC,
Brier), statsmodels (calibration slope and intercept, lowess, Wilson intervals), slow
oracles written here (DeLong, Hosmer-Lemeshow, net benefit, O:E), the bootstrap bands
against an independent loop on the same resamples, and the calculator file's checks."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.stats import chi2
from sklearn.metrics import brier_score_loss, roc_auc_score
from statsmodels.nonparametric.smoothers_lowess import lowess as sm_lowess
from statsmodels.stats.proportion import proportion_confint

from calcbuilder.calc.document import Calculator
from calcbuilder.evidence._evidence_bands import add_scalar_bands
from calcbuilder.evidence.metrics import (
    HISTOGRAM_EDGES,
    EvidenceError,
    evidence_set,
    with_evidence_set,
)
from calcbuilder.stats import CancelledError
from tests.fixtures_calc import make_calculator

DATASET = {"name": "statsmodels anes96", "period": "1996"}


@pytest.fixture(scope="module")
def anes() -> tuple[np.ndarray, np.ndarray]:
    """statsmodels anes96: vote on TVnews, age, educ, income; statsmodels' fitted risks."""
    d = sm.datasets.anes96.load_pandas().data
    X = sm.add_constant(d[["TVnews", "age", "educ", "income"]].to_numpy(float))
    y = d["vote"].to_numpy(float)
    return y, np.asarray(sm.GLM(y, X, family=sm.families.Binomial()).fit().fittedvalues)


@pytest.fixture(scope="module")
def ev(anes: tuple[np.ndarray, np.ndarray]) -> dict[str, Any]:
    y, p = anes
    return evidence_set(y, p, kind="external", label="anes96", dataset=DATASET, band_boot=40,
                        seed=11)


def slow_delong(y: np.ndarray, p: np.ndarray) -> tuple[float, float]:
    """O(m n) DeLong (methods.md 1.2), denominators m - 1 and n - 1."""
    x, z = p[y == 1], p[y == 0]
    psi = (x[:, None] > z[None, :]) + 0.5 * (x[:, None] == z[None, :])
    auc = psi.mean()
    v10, v01 = psi.mean(axis=1), psi.mean(axis=0)
    var = v10.var(ddof=1) / x.size + v01.var(ddof=1) / z.size
    return float(auc), math.sqrt(var)


def test_set_is_a_valid_calculator_evidence_set(ev: dict[str, Any]) -> None:
    doc, removed = with_evidence_set(make_calculator(with_evidence=False), ev)
    calc = Calculator.from_dict(doc)
    assert not removed
    assert calc.evidence[0].id == "external-1"
    assert calc.evidence[0].n == 944
    assert calc.evidence[0].events == 393  # methods.md section 11


def test_discrimination_and_overall(anes: Any, ev: dict[str, Any]) -> None:
    y, p = anes
    m = ev["metrics"]
    auc, se = slow_delong(y, p)
    assert m["auc"]["value"] == pytest.approx(roc_auc_score(y, p), abs=1e-12)  # scikit-learn
    assert m["auc"]["se"] == pytest.approx(se, abs=1e-12)
    logit, half = math.log(auc / (1 - auc)), 1.959963984540054 * se / (auc * (1 - auc))
    assert m["auc"]["low"] == pytest.approx(1 / (1 + math.exp(-(logit - half))), abs=1e-9)
    assert m["auc"]["high"] == pytest.approx(1 / (1 + math.exp(-(logit + half))), abs=1e-9)
    assert m["brier"]["value"] == pytest.approx(brier_score_loss(y, p), abs=1e-12)
    ybar = y.mean()
    assert m["scaled_brier"]["value"] == pytest.approx(
        1 - brier_score_loss(y, p) / (ybar * (1 - ybar)), abs=1e-12)


def test_calibration_against_statsmodels(anes: Any, ev: dict[str, Any]) -> None:
    y, p = anes
    m = ev["metrics"]
    lp = np.log(p / (1 - p))
    slope = sm.Logit(y, sm.add_constant(lp)).fit(disp=0, tol=1e-12)
    assert m["calibration_slope"]["value"] == pytest.approx(slope.params[1], abs=1e-6)
    assert m["calibration_slope"]["low"] == pytest.approx(slope.conf_int()[1, 0], abs=1e-6)
    citl = sm.GLM(y, np.ones_like(y), family=sm.families.Binomial(), offset=lp).fit(tol=1e-12)
    assert m["calibration_intercept"]["value"] == pytest.approx(citl.params[0], abs=1e-6)
    assert m["calibration_intercept"]["se"] == pytest.approx(citl.bse[0], abs=1e-6)
    # ICI family: statsmodels lowess with R's lowess(iter=0) settings (methods.md 3.4)
    fit = sm_lowess(y, p, frac=2 / 3, it=0, delta=0.01 * np.ptp(p), return_sorted=False)
    d = np.abs(fit - p)
    for key, value in (("ici", d.mean()), ("e50", np.median(d)), ("e90", np.quantile(d, 0.9)),
                       ("emax", d.max())):
        assert m[key]["value"] == pytest.approx(value, abs=1e-9), key
    curve = ev["calibration_curve"]
    at = dict(zip(p, fit, strict=True))
    np.testing.assert_allclose(curve["observed"], [at[r] for r in curve["risk"]], atol=1e-9)
    assert 2 <= len(curve["risk"]) <= 200
    assert curve["risk"][0] == p.min()
    assert curve["risk"][-1] == p.max()
    assert "lowess" in curve["smoother"]


def test_hosmer_lemeshow_oe_and_spiegelhalter_by_hand(anes: Any, ev: dict[str, Any]) -> None:
    y, p = anes
    m = ev["metrics"]
    groups = np.array_split(np.lexsort((y, p)), 10)
    o = np.array([y[g].sum() for g in groups])
    e = np.array([p[g].sum() for g in groups])
    k = np.array([g.size for g in groups])
    stat = float(np.sum((o - e) ** 2 / (e * (1 - e / k))))
    assert m["hosmer_lemeshow"]["value"] == pytest.approx(stat, rel=1e-10)
    assert m["hosmer_lemeshow"]["p_value"] == pytest.approx(chi2.sf(stat, 10), rel=1e-9)
    assert "df 10 (external data)" in m["hosmer_lemeshow"]["note"]
    ratio = y.sum() / p.sum()
    assert m["oe_ratio"]["value"] == pytest.approx(ratio, rel=1e-12)
    assert m["oe_ratio"]["low"] == pytest.approx(ratio * math.exp(-1.959964 / math.sqrt(393)),
                                                 rel=1e-6)
    c = 1 - 2 * p
    z = np.sum((y - p) * c) / math.sqrt(np.sum(c * c * p * (1 - p)))
    assert m["spiegelhalter_z"]["value"] == pytest.approx(z, rel=1e-10)


def test_grouped_histogram_and_decision_curve(anes: Any, ev: dict[str, Any]) -> None:
    y, p = anes
    groups = np.array_split(np.lexsort((y, p)), 10)
    for g, stored in zip(groups, ev["grouped_calibration"], strict=True):
        low, high = proportion_confint(y[g].sum(), g.size, method="wilson")  # statsmodels
        assert stored["n"] == g.size
        assert stored["mean_risk"] == pytest.approx(p[g].mean(), rel=1e-12)
        assert (stored["low"], stored["high"]) == pytest.approx((low, high), abs=1e-12)
    h = ev["risk_histogram"]
    assert h["edges"] == HISTOGRAM_EDGES.tolist()
    assert h["edges"][1] == 0.02
    assert sum(h["events"]) == 393
    assert sum(h["nonevents"]) == 944 - 393
    dc = ev["decision_curve"]
    assert dc["thresholds"] == [k / 100 for k in range(1, 100)]
    for t, nb, all_ in zip(dc["thresholds"], dc["model"], dc["treat_all"], strict=True):
        treat = p >= t
        odds = t / (1 - t)
        expected = (np.sum(treat & (y == 1)) - np.sum(treat & (y == 0)) * odds) / y.size
        assert nb == pytest.approx(expected, abs=1e-12)
        assert all_ == pytest.approx(y.mean() - (1 - y.mean()) * odds, abs=1e-12)


def test_bands_equal_an_independent_loop_on_the_same_resamples(anes: Any) -> None:
    y, p = anes
    B, seed = 12, 5
    got = evidence_set(y, p, kind="apparent", label="x", dataset=DATASET, band_boot=B,
                       seed=seed)
    points = np.array(got["calibration_curve"]["risk"])
    t = np.array(got["decision_curve"]["thresholds"])
    rng = np.random.default_rng(seed)
    curves, nets, briers = [], [], []
    for _ in range(B):
        idx = rng.integers(0, y.size, y.size)
        yb, pb = y[idx], p[idx]
        fit = sm_lowess(yb, pb, frac=2 / 3, it=0, delta=0.01 * np.ptp(pb), return_sorted=False)
        xs, first = np.unique(pb, return_index=True)
        curves.append(np.interp(points, xs, fit[first], left=np.nan, right=np.nan))
        treat = pb[None, :] >= t[:, None]
        nets.append(((treat & (yb == 1)).sum(1) - (treat & (yb == 0)).sum(1) * t / (1 - t))
                    / y.size)
        briers.append(brier_score_loss(yb, pb))
    curves_a = np.array(curves)
    enough = np.isfinite(curves_a).sum(0) >= B / 2
    low = np.where(enough, np.nanpercentile(np.where(enough, curves_a, 0), 2.5, axis=0), np.nan)
    stored_low = np.array([np.nan if v is None else v for v in got["calibration_curve"]["low"]])
    np.testing.assert_allclose(stored_low, low, atol=1e-9)
    np.testing.assert_allclose(got["decision_curve"]["model_high"],
                               np.percentile(nets, 97.5, axis=0), atol=1e-12)
    assert got["metrics"]["brier"]["low"] == pytest.approx(np.percentile(briers, 2.5), abs=1e-12)
    again = evidence_set(y, p, kind="apparent", label="x", dataset=DATASET, band_boot=B,
                         seed=seed)
    assert again["calibration_curve"] == got["calibration_curve"]
    assert got["settings"]["band_seed"] == seed
    other = evidence_set(y, p, kind="apparent", label="x", dataset=DATASET, band_boot=B, seed=6)
    assert other["decision_curve"]["model_low"] != got["decision_curve"]["model_low"]


def test_development_df_rule_and_recorded_settings(anes: Any) -> None:
    y, p = anes
    got = evidence_set(y, p, kind="apparent", label="x", dataset=DATASET, band_boot=0,
                       settings={"data_file": "anes.csv"})
    assert "df 8 (development data)" in got["metrics"]["hosmer_lemeshow"]["note"]
    assert got["settings"]["data_file"] == "anes.csv"
    assert got["settings"]["band_seed"] is None
    assert "low" not in got["calibration_curve"]
    drawn = evidence_set(y, p, kind="apparent", label="x", dataset=DATASET, band_boot=2)
    assert isinstance(drawn["settings"]["band_seed"], int)


def test_interval_that_misses_its_estimate_is_not_stored() -> None:
    metrics = {k: {"value": 0.5} for k in ("brier", "scaled_brier", "ici", "e50", "e90", "emax")}
    scalars = np.tile(np.linspace(0.6, 0.9, 20)[:, None], (1, 6))
    notes: list[str] = []
    add_scalar_bands(metrics, scalars, notes)
    assert "low" not in metrics["ici"]
    assert any(n.startswith("ici: bootstrap percentile interval") for n in notes)


def test_risks_of_exactly_zero_leave_a_note() -> None:
    rng = np.random.default_rng(1)
    p = rng.random(200)
    p[:3] = 0.0
    y = (rng.random(200) < p).astype(float)
    got = evidence_set(y, p, kind="external", label="x", dataset=DATASET, band_boot=0)
    assert "calibration_slope" not in got["metrics"]
    assert any(n.startswith("calibration_slope not computed") for n in got["notes"])


@pytest.mark.parametrize(("kwargs", "message"), [
    ({"y": [0, 0, 0, 0, 0, 1]}, "at least 2 events and 2 non-events; the data have 1 and 5"),
    ({"y": [1, 1, 1, 1, 1, 0]}, "the data have 5 and 1 among 6 rows"),
    ({"y": [0, 1, 0]}, "outcomes and risks differ in length (3 and 6)"),
    ({"y": [0, 1, 0, 1, 0, 2]}, "coded 0/1"),
    ({"risk": [0.1, 0.2, 1.3, 0.4, 0.5, 0.6]}, "risks must lie in [0, 1]"),
    ({"kind": "internal"}, "kind must be one of"),
    ({"dataset": {"name": "x", "n": 7}}, "dataset['n'] is 7 but the data have 6"),
    ({"dataset": {}}, "the dataset needs a name"),
    ({"settings": {"band_boot": 3}}, "recorded by evidence_set itself"),
    ({"settings": {"x": [1]}}, "settings['x'] must be a number"),
    ({"band_boot": -1}, "band_boot must be a whole number"),
])
def test_bad_arguments(kwargs: dict[str, Any], message: str) -> None:
    args: dict[str, Any] = {"y": [0, 1, 0, 1, 0, 1], "risk": [0.1, 0.2, 0.3, 0.4, 0.5, 0.6],
                            "kind": "external", "label": "x", "dataset": {"name": "x"},
                            "band_boot": 0}
    args |= kwargs
    y, risk = args.pop("y"), args.pop("risk")
    with pytest.raises(EvidenceError) as caught:
        evidence_set(y, risk, **args)
    assert message in str(caught.value)


def test_progress_counts_and_cancels(anes: Any) -> None:
    y, p = anes
    seen: list[tuple[int, int]] = []
    evidence_set(y, p, kind="apparent", label="x", dataset=DATASET, band_boot=3, seed=1,
                 progress=lambda d, t: seen.append((d, t)) or True)
    assert seen == [(1, 3), (2, 3), (3, 3)]
    with pytest.raises(CancelledError):
        evidence_set(y, p, kind="apparent", label="x", dataset=DATASET, band_boot=3, seed=1,
                     progress=lambda d, _t: d < 2)


def test_with_evidence_set_ids_and_signature() -> None:
    doc = make_calculator()  # holds apparent-1 and external-1
    new, removed = with_evidence_set(doc, {"kind": "external", "id": "external-1", "x": 1})
    assert [e["id"] for e in new["evidence"]] == ["apparent-1", "external-1", "external-2"]
    assert not removed
    signed = make_calculator(signed=True)
    new, removed = with_evidence_set(signed, {"kind": "bootstrap", "id": "b"})
    assert removed
    assert "signature" not in new
    assert new["evidence"][-1]["id"] == "bootstrap-1"
