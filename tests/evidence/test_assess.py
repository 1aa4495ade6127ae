"""calcbuilder assess: bootstrap optimism equal to an independent slow loop (statsmodels refits on
the same resample indices, scikit-learn measures) on lifelines' rossi data, for the fast path
(fixed design) and the slow path (spline knots re-placed per resample, patsy's cr basis in the
loop); reproducibility; the synthetic demo cohort end to end; refusals; cancellation."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from sklearn.metrics import brier_score_loss, roc_auc_score
from statsmodels.nonparametric.smoothers_lowess import lowess as sm_lowess

from calcbuilder.calc.document import Calculator, load_calculator
from calcbuilder.calc.evidence_sets import most_trustworthy
from calcbuilder.demo.scenario import make_cohort
from calcbuilder.errors import CalcbuilderError
from calcbuilder.evidence import load_recipe, prepare, read_table
from calcbuilder.evidence.assess import assess_bootstrap, assess_external, assess_predictions
from calcbuilder.evidence.fit import fit_calculator
from calcbuilder.evidence.procedure import RecipeProcedure, bootstrap_metrics
from calcbuilder.stats import CancelledError, PlainLogistic, bootstrap_optimism
from tests.evidence.test_fit import ROSSI_RECIPE, rossi_files, write
from tests.fixtures_calc import make_calculator

EXAMPLE = Path(__file__).resolve().parents[2] / "templates" / "recipe-example.toml"
LINEAR = ROSSI_RECIPE.replace('transform = { type = "rcs", knots = 4 }\n', "")
COLUMNS = ["fin", "age", "race", "wexp", "mar", "paro", "prio"]
THRESHOLDS = np.arange(1, 100) / 100


def measures(y: np.ndarray, p: np.ndarray) -> dict[str, Any]:
    """The bootstrap's measures by outside routes: scikit-learn, statsmodels, by hand."""
    lp = np.log(p / (1 - p))
    ybar = y.mean()
    fit = sm_lowess(y, p, frac=2 / 3, it=0, delta=0.01 * np.ptp(p), return_sorted=False)
    treat = p[None, :] >= THRESHOLDS[:, None]
    odds = THRESHOLDS / (1 - THRESHOLDS)
    return {
        "auc": roc_auc_score(y, p), "brier": brier_score_loss(y, p),
        "scaled_brier": 1 - brier_score_loss(y, p) / (ybar * (1 - ybar)),
        "calibration_slope": sm.Logit(y, sm.add_constant(lp)).fit(disp=0, tol=1e-12).params[1],
        "calibration_intercept": sm.GLM(y, np.ones_like(y), family=sm.families.Binomial(),
                                        offset=lp).fit(tol=1e-12).params[0],
        "ici": float(np.abs(fit - p).mean()),
        "nb": ((treat & (y == 1)).sum(1) - (treat & (y == 0)).sum(1) * odds) / y.size,
    }


def slow_loop(df: pd.DataFrame, formula: str, B: int, seed: int) -> dict[str, Any]:
    """Harrell's optimism by statsmodels refits on the rows of each resample (methods.md 6.1).

    Resamples: numpy default_rng(seed), one integers(0, n, n) per resample (methods.md 6.6).
    """
    y = df.arrest.to_numpy(float)
    full = smf.glm(formula, df, family=sm.families.Binomial()).fit(tol=1e-12)
    apparent = measures(y, np.asarray(full.fittedvalues))
    rng = np.random.default_rng(seed)
    diffs: dict[str, list[Any]] = {k: [] for k in apparent}
    for _ in range(B):
        rows = df.iloc[rng.integers(0, len(df), len(df))]
        res = smf.glm(formula, rows, family=sm.families.Binomial()).fit(tol=1e-12)
        boot = measures(rows.arrest.to_numpy(float), np.asarray(res.fittedvalues))
        test = measures(y, np.asarray(res.predict(df)))
        for k, values in diffs.items():
            values.append(np.asarray(boot[k]) - np.asarray(test[k]))
    optimism = {k: np.mean(v, axis=0) for k, v in diffs.items()}
    return {"apparent": apparent, "optimism": optimism,
            "corrected": {k: np.asarray(apparent[k]) - optimism[k] for k in apparent}}


def check_against(ev: dict[str, Any], ref: dict[str, Any], tol: float) -> None:
    m = ev["metrics"]
    for k in ("auc", "brier", "scaled_brier", "calibration_slope", "calibration_intercept",
              "ici"):
        assert m[k]["value"] == pytest.approx(ref["corrected"][k], abs=tol), k
        assert m[f"{k}_optimism"]["value"] == pytest.approx(ref["optimism"][k], abs=tol), k
        assert m[f"{k}_apparent"]["value"] == pytest.approx(ref["apparent"][k], abs=tol), k
    np.testing.assert_allclose(ev["decision_curve"]["model"], ref["corrected"]["nb"], atol=tol)


@pytest.fixture(scope="module")
def linear(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    tmp = tmp_path_factory.mktemp("linear")
    data, recipe, df = rossi_files(tmp, LINEAR)
    fit_calculator(data, recipe, band_boot=0, output=tmp / "c.calc.json")
    return {"tmp": tmp, "data": data, "recipe": recipe, "df": df, "calc": tmp / "c.calc.json"}


def test_fast_path_equals_statsmodels_loop_on_the_same_resamples(linear: dict[str, Any]) -> None:
    # source: lifelines load_rossi; reference: statsmodels GLM refits, scikit-learn measures
    res = assess_bootstrap(linear["calc"], linear["data"], n_boot=8, seed=3)
    ev = res.evidence
    assert ev["settings"]["path"] == "fast"
    assert ev["settings"]["seed"] == 3
    assert ev["settings"]["bootstrap"] == 8
    ref = slow_loop(linear["df"], "arrest ~ " + " + ".join(COLUMNS), 8, 3)
    check_against(ev, ref, 1e-6)


def test_slow_path_replaces_knots_per_resample_like_a_patsy_loop(tmp_path: Path) -> None:
    data, recipe, df = rossi_files(tmp_path)
    fit_calculator(data, recipe, band_boot=0, output=tmp_path / "c.calc.json")
    res = assess_bootstrap(tmp_path / "c.calc.json", data, n_boot=6, seed=9)
    assert res.evidence["settings"]["path"] == "slow"
    assert "spline knots of 'age'" in res.evidence["settings"]["procedure"]
    # reference loop: Harrell's 4 knots by numpy quantiles of each resample (n > 100, so no
    # 5th-value rule; methods.md 10.2) and patsy's natural cubic spline with those knots,
    # which spans the same space as our basis (methods.md 10.4)
    rng = np.random.default_rng(9)
    y = df.arrest.to_numpy(float)
    rest = "fin + race + wexp + mar + paro + prio"
    q = [0.05, 0.35, 0.65, 0.95]

    def formula(ages: np.ndarray) -> str:
        k = np.quantile(ages, q)
        return (f"arrest ~ cr(age, knots=[{k[1]!r}, {k[2]!r}], lower_bound={k[0]!r}, "
                f"upper_bound={k[3]!r}, constraints='center') + {rest}")

    full = smf.glm(formula(df.age.to_numpy(float)), df, family=sm.families.Binomial())
    apparent = measures(y, np.asarray(full.fit(tol=1e-12).fittedvalues))
    diffs: dict[str, list[Any]] = {k: [] for k in apparent}
    for _ in range(6):
        rows = df.iloc[rng.integers(0, len(df), len(df))]
        fit = smf.glm(formula(rows.age.to_numpy(float)), rows,
                      family=sm.families.Binomial()).fit(tol=1e-12)
        boot = measures(rows.arrest.to_numpy(float), np.asarray(fit.fittedvalues))
        test = measures(y, np.asarray(fit.predict(df)))
        for k, values in diffs.items():
            values.append(np.asarray(boot[k]) - np.asarray(test[k]))
    opt = {k: np.mean(v, axis=0) for k, v in diffs.items()}
    ref = {"apparent": apparent, "optimism": opt,
           "corrected": {k: np.asarray(apparent[k]) - opt[k] for k in apparent}}
    check_against(res.evidence, ref, 1e-6)


def test_recipe_procedure_equals_the_fast_path_when_nothing_is_data_driven(
        linear: dict[str, Any]) -> None:
    prepared = prepare(read_table(linear["data"]), load_recipe(linear["recipe"]))
    X, _ = prepared.design_matrix()
    mets = bootstrap_metrics(THRESHOLDS, ici=False)
    fast = bootstrap_optimism(X, prepared.y, PlainLogistic(), mets, n_boot=15, seed=2)
    slow = bootstrap_optimism(np.arange(prepared.y.size), prepared.y,
                              RecipeProcedure(prepared), mets, n_boot=15, seed=2)
    np.testing.assert_allclose(fast.test_values, slow.test_values, atol=1e-9)
    np.testing.assert_allclose(fast.bootstrap_values, slow.bootstrap_values, atol=1e-9)


def test_bootstrap_is_reproducible_for_a_fixed_seed(linear: dict[str, Any]) -> None:
    a = assess_bootstrap(linear["calc"], linear["data"], n_boot=5, seed=21).evidence
    b = assess_bootstrap(linear["calc"], linear["data"], n_boot=5, seed=21).evidence
    c = assess_bootstrap(linear["calc"], linear["data"], n_boot=5, seed=22).evidence
    assert a["metrics"] == b["metrics"]
    assert a["decision_curve"] == b["decision_curve"]
    assert a["metrics"]["auc"] != c["metrics"]["auc"]


def test_demo_cohort_end_to_end(tmp_path: Path) -> None:
    dev, ext = tmp_path / "dev.csv", tmp_path / "ext.csv"
    pd.DataFrame(make_cohort("development").clean).to_csv(dev, index=False)
    pd.DataFrame(make_cohort("external").clean).to_csv(ext, index=False)
    fit_calculator(dev, EXAMPLE, band_boot=10, seed=1, output=tmp_path / "a.calc.json")
    boot = assess_bootstrap(tmp_path / "a.calc.json", dev, n_boot=25, seed=2,
                            output=tmp_path / "b.calc.json")
    m = boot.evidence["metrics"]
    assert m["auc"]["value"] < m["auc_apparent"]["value"]
    assert m["calibration_slope"]["value"] < 1
    assert boot.evidence["dataset"]["name"] == "Demo Hospital A (synthetic)"
    assert boot.evidence["dataset"]["synthetic"] is True
    external = assess_external(tmp_path / "b.calc.json", ext, label="Demo Hospital B (synthetic)",
                               band_boot=10, seed=3, output=tmp_path / "c.calc.json")
    assert external.evidence["metrics"]["calibration_intercept"]["low"] > 0  # higher baseline
    preds = tmp_path / "pred.csv"
    y = make_cohort("external").clean["delirium"]
    supplied = np.clip(y.mean() + 0.1 * (y - 0.5), 0.01, 0.99)  # made-up risks for the test
    pd.DataFrame({"delirium": y, "risk": supplied}).to_csv(preds, index=False)
    imported = assess_predictions(tmp_path / "c.calc.json", preds, label="Supplied risks",
                                  band_boot=0, output=tmp_path / "d.calc.json")
    assert imported.evidence["kind"] == "imported"
    assert "predictions supplied" in imported.evidence["source"]
    calc = load_calculator(tmp_path / "d.calc.json").calculator
    assert [e.id for e in calc.evidence] == ["apparent-1", "bootstrap-1", "external-1",
                                             "imported-1"]
    assert most_trustworthy(calc.evidence).kind == "external"
    assert calc.about.synthetic


# --- data rules and refusals -------------------------------------------------------------------


def test_outcome_column_is_required_when_not_recorded(linear: dict[str, Any]) -> None:
    doc = load_calculator(linear["calc"]).calculator.to_dict()
    doc["evidence"] = []
    bare = Calculator.from_dict(doc)
    with pytest.raises(CalcbuilderError, match="does not record its outcome column"):
        assess_external(bare, linear["data"], label="x", band_boot=0)
    res = assess_bootstrap(bare, linear["data"], outcome="arrest", n_boot=3, seed=1)
    assert res.evidence["settings"]["path"] == "fast"
    assert "treated as pre-specified" in res.evidence["settings"]["procedure"]


def test_refused_rows_stop_the_run_unless_dropped(linear: dict[str, Any], tmp_path: Path) -> None:
    df = linear["df"].astype(object)
    df.loc[4, "prio"] = 500  # above the hard limit 100
    df.loc[7, "fin"] = "maybe"
    df.loc[9, "arrest"] = ""
    data = tmp_path / "bad.csv"
    df.to_csv(data, index=False)
    out = tmp_path / "never.calc.json"
    with pytest.raises(CalcbuilderError) as caught:
        assess_external(linear["calc"], data, label="x", band_boot=0, output=out)
    text = str(caught.value)
    assert "3 of 432 rows cannot be used (2 with a refused input value; 1 with a missing " \
           "outcome)" in text
    assert "--drop-refused" in text
    assert "row 6: Prior convictions" in text
    assert not out.exists()
    res = assess_external(linear["calc"], data, label="x", band_boot=0, drop_refused=True,
                          output=out)
    assert res.evidence["dataset"]["excluded"] == 3
    assert res.evidence["dataset"]["n"] == 429


def test_missing_input_column_and_event_value(linear: dict[str, Any], tmp_path: Path) -> None:
    df = linear["df"]
    df.drop(columns="prio").to_csv(tmp_path / "a.csv", index=False)
    with pytest.raises(CalcbuilderError, match="no column 'prio' for input 'Prior convictions'"):
        assess_external(linear["calc"], tmp_path / "a.csv", label="x", band_boot=0)
    df.assign(arrest=np.where(df.arrest == 1, "yes", "no")).to_csv(tmp_path / "b.csv",
                                                                   index=False)
    with pytest.raises(CalcbuilderError, match=r"the event value 1 \(--event\) does not occur"):
        assess_external(linear["calc"], tmp_path / "b.csv", label="x", band_boot=0)
    res = assess_external(linear["calc"], tmp_path / "b.csv", label="x", band_boot=0,
                          event="Yes")
    assert res.evidence["dataset"]["events"] == 114


def test_bootstrap_needs_the_development_data(linear: dict[str, Any], tmp_path: Path) -> None:
    half = linear["df"].iloc[::2]
    half.to_csv(tmp_path / "half.csv", index=False)
    with pytest.raises(CalcbuilderError, match="does not reproduce the calculator's risks"):
        assess_bootstrap(linear["calc"], tmp_path / "half.csv", n_boot=2, seed=1)


def test_predictions_are_checked(linear: dict[str, Any], tmp_path: Path) -> None:
    y = linear["df"].arrest
    pd.DataFrame({"arrest": y, "p": 30 + 10 * y}).to_csv(tmp_path / "pct.csv", index=False)
    with pytest.raises(CalcbuilderError, match="look like percentages"):
        assess_predictions(linear["calc"], tmp_path / "pct.csv", label="x", risk_column="p",
                           band_boot=0)
    with pytest.raises(CalcbuilderError, match="no column 'risk' for the predicted risks"):
        assess_predictions(linear["calc"], tmp_path / "pct.csv", label="x", band_boot=0)


def test_signature_is_removed(tmp_path: Path) -> None:
    calc = Calculator.from_dict(make_calculator(signed=True))
    rng = np.random.default_rng(4)
    y = (rng.random(300) < 0.3).astype(int)
    pd.DataFrame({"admitted": y, "risk": np.clip(0.3 + 0.2 * (y - 0.3) + rng.normal(0, 0.1, 300),
                                                0.01, 0.99)}).to_csv(tmp_path / "p.csv",
                                                                     index=False)
    res = assess_predictions(calc, tmp_path / "p.csv", label="x", outcome="admitted",
                             band_boot=0, output=tmp_path / "out.calc.json")
    assert res.signature_removed
    assert "signature" not in json.loads((tmp_path / "out.calc.json").read_text("utf-8"))


def test_cancel_and_interrupt_write_nothing(linear: dict[str, Any]) -> None:
    out = linear["tmp"] / "never.calc.json"
    with pytest.raises(CancelledError):
        assess_bootstrap(linear["calc"], linear["data"], n_boot=50, seed=1, output=out,
                         progress=lambda d, _t: d < 1)

    def interrupt(done: int, _total: int) -> bool:
        if done > 0:
            raise KeyboardInterrupt
        return True

    with pytest.raises(KeyboardInterrupt):
        assess_bootstrap(linear["calc"], linear["data"], n_boot=50, seed=1, output=out,
                         progress=interrupt)
    assert not out.exists()
    assert not list(linear["tmp"].glob(".*.tmp"))


def test_bootstrap_with_a_recipe_file_and_complete_case(tmp_path: Path) -> None:
    data, recipe, df = rossi_files(tmp_path, LINEAR)
    df = df.astype(object)
    df.loc[[2, 3], "age"] = ""
    df.to_csv(data, index=False)
    fit_calculator(data, recipe, complete_case=True, band_boot=0, output=tmp_path / "c.calc.json")
    other = write(tmp_path, "other.toml", LINEAR.replace('label = "Prior convictions"',
                                                         'label = "Prior offences"'))
    res = assess_bootstrap(tmp_path / "c.calc.json", data, recipe=other, n_boot=3, seed=1)
    assert res.evidence["dataset"]["excluded"] == 2
    assert res.evidence["settings"]["recipe_source"] == "the recipe other.toml"
