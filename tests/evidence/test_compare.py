"""Comparing a new model with a reference: the numbers are the stats functions' and outside ones.

Outside references, named beside each check: scikit-learn ``roc_auc_score``;
statsmodels GLM (calibration intercept with LP as offset, slope on LP); a slow
O(events x non-events) DeLong oracle written here; the methods.md 5.4 hand
example [ANALYTIC]. Data: the synthetic demo cohorts (``calcbuilder.demo``).
"""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np
import pytest
import statsmodels.api as sm
from sklearn.metrics import roc_auc_score

from calcbuilder.calc.document import Calculator
from calcbuilder.calc.sections import Decision
from calcbuilder.errors import CalcbuilderError
from calcbuilder.evidence.compare import (
    MISCALIBRATION_RULE,
    compare_risks,
    comparison_thresholds,
    default_cuts,
    parse_cuts,
    reclassification_block,
    result_dict,
)
from calcbuilder.evidence.scoring_data import Outcome, score_table
from calcbuilder.stats import (
    calibration_intercept,
    calibration_slope,
    compare_auc,
    continuous_nri,
    decision_curve,
    idi,
    nri,
)
from tests.evidence.test_recalibrate import DEMO_INPUTS, demo_frames, make_doc

SIMPLE_INPUTS = DEMO_INPUTS[:3]  # age, cognitive errors, ASA: the "model in current use"
THRESHOLDS = np.array([0.05, 0.1, 0.15, 0.2, 0.3])


@pytest.fixture(scope="module")
def demo() -> dict[str, Any]:
    dev, ext = demo_frames()
    y = dev["delirium"].to_numpy(float)
    new = Calculator.from_dict(make_doc(dev, y, DEMO_INPUTS, title="Full model")[0])
    ref = Calculator.from_dict(make_doc(dev, y, SIMPLE_INPUTS, title="Simple model")[0])
    shifted = Calculator.from_dict(make_doc(dev, y, DEMO_INPUTS, title="Shifted model",
                                            shift=1.0)[0])
    return {"dev": dev, "ext": ext, "new": new, "ref": ref, "shifted": shifted}


def _delong_oracle(y: np.ndarray, a: np.ndarray, b: np.ndarray) -> tuple[float, float]:
    """Slow paired DeLong (DeLong et al. 1988): every event/non-event pair counted."""
    comps = []
    for s in (a, b):
        ev, ne = s[y == 1], s[y == 0]
        psi = (ev[:, None] > ne[None, :]) + 0.5 * (ev[:, None] == ne[None, :])
        comps.append((psi.mean(axis=1), psi.mean(axis=0), psi.mean()))
    m, n = int(y.sum()), int((1 - y).sum())
    s10 = np.cov(np.vstack([comps[0][0], comps[1][0]]))
    s01 = np.cov(np.vstack([comps[0][1], comps[1][1]]))
    cov = s10 / m + s01 / n
    return comps[0][2] - comps[1][2], math.sqrt(cov[0, 0] + cov[1, 1] - 2 * cov[0, 1])


@pytest.fixture(scope="module")
def external(demo) -> dict[str, Any]:
    data = score_table([demo["new"], demo["ref"]], demo["ext"], Outcome("delirium"))
    result = compare_risks(data.y, data.risks[0], data.risks[1], cuts=(0.1, 0.2),
                           thresholds=THRESHOLDS, new_name="Full", ref_name="Simple")
    return {"data": data, "result": result}


def test_numbers_equal_direct_stats_calls(external):
    data, r = external["data"], external["result"]
    y, new, ref = data.y, data.risks[0], data.risks[1]
    assert r.auc == compare_auc(y, new, ref)
    assert r.nri == nri(y, ref, new, (0.1, 0.2))
    assert r.continuous_nri == continuous_nri(y, ref, new)
    assert r.idi == idi(y, ref, new)
    np.testing.assert_array_equal(r.nb_new, decision_curve(y, new, THRESHOLDS).model)
    np.testing.assert_array_equal(r.nb_ref, decision_curve(y, ref, THRESHOLDS).model)
    np.testing.assert_array_equal(r.nb_difference, r.nb_new - r.nb_ref)
    assert r.calibration_new.intercept == calibration_intercept(y, new)
    assert r.calibration_ref.slope == calibration_slope(y, ref)
    assert r.calibration_new.observed_expected == y.sum() / new.sum()
    assert (r.n, r.events) == (data.n, data.events)


def test_numbers_against_sklearn_statsmodels_and_a_slow_delong(external):
    data, r = external["data"], external["result"]
    y, new, ref = data.y, data.risks[0], data.risks[1]
    # scikit-learn roc_auc_score
    assert r.auc.auc_a == pytest.approx(roc_auc_score(y, new), abs=1e-12)
    assert r.auc.auc_b == pytest.approx(roc_auc_score(y, ref), abs=1e-12)
    # slow O(mn) DeLong written above
    diff, se = _delong_oracle(y, new, ref)
    assert r.auc.difference == pytest.approx(diff, abs=1e-12)
    assert r.auc.se == pytest.approx(se, abs=1e-12)
    assert r.auc.p_value == pytest.approx(math.erfc(abs(diff / se) / math.sqrt(2)), abs=1e-12)
    # statsmodels GLM: offset intercept and slope on logit(risk)
    lp = np.log(new / (1 - new))
    glm = sm.GLM(y, np.ones((y.size, 1)), family=sm.families.Binomial(), offset=lp).fit(tol=1e-13)
    assert r.calibration_new.intercept.value == pytest.approx(float(glm.params[0]), abs=1e-6)
    assert r.calibration_new.intercept.se == pytest.approx(float(glm.bse[0]), abs=1e-6)
    glm = sm.GLM(y, sm.add_constant(lp), family=sm.families.Binomial()).fit(tol=1e-13)
    assert r.calibration_new.slope.value == pytest.approx(float(glm.params[1]), abs=1e-6)
    # net benefit by its definition, TP/n - FP/n * t/(1-t), treated when risk >= t
    t = THRESHOLDS[2]
    tp, fp = np.sum((new >= t) & (y == 1)), np.sum((new >= t) & (y == 0))
    assert r.nb_new[2] == pytest.approx(tp / y.size - fp / y.size * t / (1 - t), abs=1e-15)


def test_hand_example_of_methods_5_4():
    """methods.md 5.4 [ANALYTIC]: 10 patients, old -> new risks."""
    old = np.array([0.3, 0.6, 0.4, 0.8, 0.2, 0.5, 0.1, 0.3, 0.6, 0.2])
    new = np.array([0.5, 0.7, 0.2, 0.8, 0.1, 0.3, 0.2, 0.3, 0.4, 0.1])
    y = np.array([1, 1, 1, 1, 0, 0, 0, 0, 0, 0], dtype=float)
    r = compare_risks(y, new, old, cuts=(0.25, 0.5), thresholds=[0.2])
    assert (r.nri.events, r.nri.nonevents) == pytest.approx((0.0, 1 / 3), abs=1e-12)
    assert r.nri.se == pytest.approx(0.42491829279939874, abs=1e-12)
    assert r.continuous_nri.total == pytest.approx(0.75, abs=1e-12)
    assert r.continuous_nri.se == pytest.approx(0.5713045500334204, abs=1e-12)
    assert r.idi.value == pytest.approx(13 / 120, abs=1e-12)
    assert r.idi.se == pytest.approx(0.0978235372721946, abs=1e-12)


def test_no_warning_when_both_models_are_calibrated(demo):
    """Apparent performance of ML fits with an intercept: CITL 0 and slope 1 (methods.md 3.3)."""
    data = score_table([demo["new"], demo["ref"]], demo["dev"], Outcome("delirium"))
    r = compare_risks(data.y, data.risks[0], data.risks[1], cuts=(0.1, 0.2),
                      thresholds=THRESHOLDS)
    assert not r.calibration_new.miscalibrated
    assert not r.calibration_ref.miscalibrated
    assert not any("miscalibrated" in w or "calibration is off" in w for w in r.warnings)


def test_warning_fires_for_a_deliberately_miscalibrated_model(demo):
    data = score_table([demo["shifted"], demo["ref"]], demo["dev"], Outcome("delirium"))
    r = compare_risks(data.y, data.risks[0], data.risks[1], cuts=(0.1, 0.2),
                      thresholds=THRESHOLDS, new_name="Shifted", ref_name="Simple")
    assert r.calibration_new.intercept.high < 0  # intercept +1 on the logit: risks too high
    assert r.calibration_new.miscalibrated
    text = r.warnings[0]
    assert "NRI and IDI can reward a miscalibrated model" in text
    assert MISCALIBRATION_RULE in text
    assert "Shifted: slope" in text
    assert "Simple:" not in text
    assert "Kerr" in text
    assert "recalled from memory" in text


def test_rows_refused_by_either_model_are_excluded_from_both(demo):
    ext = demo["ext"].copy()
    ext.loc[3, "sodium"] = np.nan  # read by the full model only
    alone = score_table([demo["ref"]], ext, Outcome("delirium"))
    both = score_table([demo["new"], demo["ref"]], ext, Outcome("delirium"))
    assert alone.excluded == 0
    assert both.refused == 10  # the demo's nine defective rows and this one
    assert 3 not in both.rows.tolist()
    assert "10 with a required value missing or refused" in both.exclusion_note()


@pytest.mark.parametrize(("text", "expected"), [("10,20", (0.1, 0.2)), ("5", (0.05,)),
                                                (" 7.5%, 15 ", (0.075, 0.15))])
def test_parse_cuts_reads_percent(text, expected):
    assert parse_cuts(text) == pytest.approx(expected, abs=1e-15)


@pytest.mark.parametrize(("text", "message"), [
    ("20,10", "strictly increasing; got 20 then 10"),
    ("10,10", "strictly increasing"),
    ("0,10", "strictly between 0 and 100"),
    ("10,100", "strictly between 0 and 100"),
    ("10,abc", "could not read 'abc'"),
    ("nan", "strictly between 0 and 100"),
])
def test_parse_cuts_refuses(text, message):
    with pytest.raises(CalcbuilderError, match=message):
        parse_cuts(text)


def test_thresholds_and_default_cuts_from_the_decision_section():
    plain = Decision(0.1, (0.05, 0.3))
    assert comparison_thresholds(plain).tolist() == [0.05, 0.1, 0.15, 0.2, 0.25, 0.3]
    wide = comparison_thresholds(Decision(0.12, (0.01, 0.99)))
    assert len(wide) <= 13
    assert wide[0] == 0.01
    assert 0.12 in wide.tolist()
    assert comparison_thresholds(Decision(0.0515, (0.051, 0.052))).tolist() == [0.051, 0.0515,
                                                                                 0.052]
    assert default_cuts(plain) is None
    assert default_cuts(Calculator.from_dict(_doc()).decision) == (0.1, 0.2)


def _doc() -> dict[str, Any]:
    dev, _ = demo_frames()
    return make_doc(dev, dev["delirium"].to_numpy(float), SIMPLE_INPUTS)[0]


def test_json_and_reclassification_block_are_storable(external):
    r = external["result"]
    out = result_dict(r)
    json.dumps(out, allow_nan=False)
    for key in ("auc_new", "auc_ref", "auc_difference", "auc_p_value", "nri_events",
                "nri_nonevents", "nri_total", "continuous_nri", "idi", "idi_p_value"):
        assert isinstance(out[key], float)
    block = reclassification_block(r)
    assert block["reference"] == "Simple"
    assert block["nri_total"] == r.nri.total
    assert block["cuts"] == [0.1, 0.2]
    doc = _doc()
    data = external["data"]
    doc["evidence"] = [{"id": "external-1", "kind": "external", "label": "Demo Hospital B",
                        "dataset": {"name": "Demo Hospital B", "n": data.n,
                                    "events": data.events},
                        "metrics": {}, "reclassification": block}]
    stored = Calculator.from_dict(doc)  # the schema accepts the block
    assert stored.evidence[0].raw["reclassification"]["idi"] == r.idi.value
