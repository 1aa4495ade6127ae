"""``calcbuilder recalibrate`` and ``calcbuilder compare``: outputs, numbers, refusals.

Data: the synthetic demo cohorts (``calcbuilder.demo``); the external cohort is
written with its defects (missing and implausible values), so row exclusion is
exercised. Models are statsmodels GLM fits on the development cohort
(``tests/evidence/test_recalibrate.py``). Numbers printed or stored are checked
against statsmodels and the library functions already tested there.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import statsmodels.api as sm

from calcbuilder.calc.document import Calculator, load_calculator
from calcbuilder.calc.keys import generate_private_key
from calcbuilder.calc.signing import sign_document
from calcbuilder.cli import main
from calcbuilder.evidence.compare import compare_risks, comparison_thresholds
from calcbuilder.evidence.scoring_data import Outcome, score_table
from tests.evidence.test_recalibrate import (
    DEMO_INPUTS,
    demo_frames,
    design,
    glm_fit,
    make_doc,
)

JSON_KEYS = ("auc_new", "auc_ref", "auc_difference", "auc_p_value", "nri_events",
             "nri_nonevents", "nri_total", "continuous_nri", "idi", "idi_p_value")


@pytest.fixture(autouse=True)
def _isolated_config(tmp_path, monkeypatch):
    monkeypatch.setenv("CALCBUILDER_CONFIG_DIR", str(tmp_path / "config"))


def run(capsys, *argv: Any) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def _write_csv(frame: Any, path: Path) -> Path:
    frame = frame.copy()
    for col in ("sensory", "alcohol", "delirium"):
        frame[col] = frame[col].astype(int)  # yes/no and outcome as 0/1 text
    frame.to_csv(path, index=False)
    return path


@pytest.fixture(scope="module")
def files(tmp_path_factory) -> dict[str, Any]:
    folder = tmp_path_factory.mktemp("updating")
    dev, ext = demo_frames()
    y = dev["delirium"].to_numpy(float)
    full, res = make_doc(dev, y, DEMO_INPUTS, title="Demo full model")
    simple, _ = make_doc(dev, y, DEMO_INPUTS[:3], title="Demo simple model")
    no_bands, _ = make_doc(dev, y, DEMO_INPUTS[:3], title="No bands",
                           decision={"default_threshold": 0.1, "reasonable_range": [0.05, 0.3]})
    out = {"folder": folder, "ext_frame": ext, "res": res}
    for name, doc in (("full", sign_document(full, generate_private_key())),
                      ("simple", simple), ("no_bands", no_bands)):
        out[name] = folder / f"{name}.calc.json"
        out[name].write_text(json.dumps(doc), "utf-8")
    out["ext"] = _write_csv(ext, folder / "hospital_b.csv")
    return out


@pytest.fixture(scope="module")
def recalibrated(files) -> dict[str, Any]:
    """``recalibrate --method intercept`` of the signed full model on Demo Hospital B."""
    target = files["folder"] / "full_b.calc.json"
    code = main(["recalibrate", str(files["full"]), "--data", str(files["ext"]), "--method",
                 "intercept", "--outcome", "delirium", "--label", "Demo Hospital B",
                 "--boot", "20", "--json", "-o", str(target)])
    assert code == 0
    return {"path": target}


def test_recalibrate_writes_an_updated_unsigned_calculator(files, capsys, tmp_path):
    target = tmp_path / "out.calc.json"
    code, out, err = run(capsys, "recalibrate", files["full"], "--data", files["ext"],
                         "--method", "intercept", "--outcome", "delirium", "--label",
                         "Demo Hospital B", "--boot", "0", "-o", target)
    assert (code, err) == (0, "")
    assert "9 of 800 rows excluded" in out  # the generator's nine defective rows, said with reasons
    assert "Intercept update" in out
    assert "The signature was removed: the file must be re-signed" in out
    assert "SYNTHETIC" in out
    calc = load_calculator(target).calculator  # schema, rules and test vectors (1e-9)
    assert calc.signature is None
    rec = calc.model.recalibration
    assert rec is not None
    assert (rec.method, rec.slope, rec.dataset, rec.n) == ("intercept", 1.0, "Demo Hospital B",
                                                           800 - 9)
    # statsmodels GLM with the old LP as offset, on the rows the command used
    ext = files["ext_frame"]
    data = score_table([Calculator.from_dict(json.loads(files["full"].read_text("utf-8")))],
                       ext, Outcome("delirium"))
    kept = ext.iloc[data.rows]
    lp = sm.add_constant(design(kept, DEMO_INPUTS), has_constant="add") @ np.asarray(
        files["res"].params)
    ref = glm_fit(np.empty((data.n, 0)), kept["delirium"].to_numpy(float), offset=lp)
    assert rec.intercept == pytest.approx(float(ref.params[0]), abs=1e-6)
    assert [e.id for e in calc.evidence] == ["external-1", "recalibrated-1"]
    assert calc.evidence[0].raw["settings"]["outcome_column"] == "delirium"
    assert calc.evidence[0].raw["dataset"]["excluded"] == 9


def test_recalibrate_json_summary(recalibrated, capsys, files):
    code, out, _ = run(capsys, "recalibrate", files["full"], "--data", files["ext"], "--method",
                       "slope", "--outcome", "delirium", "--boot", "0", "--json", "-o",
                       files["folder"] / "slope.calc.json")
    assert code == 0
    info = json.loads(out)
    assert info["method"] == "slope"
    assert info["before"]["intercept"]["low"] > 0  # miscalibrated at B before
    assert abs(info["after"]["intercept"]["value"]) < 1e-6
    assert info["after"]["slope"]["value"] == pytest.approx(1.0, abs=1e-8)
    assert info["evidence_added"] == ["external-1", "recalibrated-1"]
    assert info["composed"] is False


def test_second_recalibration_is_composed_and_said(recalibrated, capsys, tmp_path, files):
    target = tmp_path / "twice.calc.json"
    code, out, _ = run(capsys, "recalibrate", recalibrated["path"], "--data", files["ext"],
                       "--method", "slope", "--boot", "0", "-o", target)  # outcome from evidence
    assert code == 0
    assert "already had a recalibration" in out
    assert "Evidence kept; added: recalibrated-2." in out  # external set for B already there
    assert "It is unsigned" in out
    rec = load_calculator(target).calculator.model.recalibration
    assert rec is not None
    assert rec.method == "slope"
    assert "after an earlier recalibration on Demo Hospital B" in str(rec.dataset)


def test_compare_json_defaults_from_the_files(recalibrated, files, capsys):
    code, out, err = run(capsys, "compare", recalibrated["path"], files["simple"], "--data",
                         files["ext"], "--json")  # outcome from NEW's evidence, cuts from bands
    assert (code, err) == (0, "")
    info = json.loads(out)
    for key in JSON_KEYS:
        assert isinstance(info[key], float), key
    assert info["cuts"] == [0.1, 0.2]
    assert info["excluded"] == 9
    new = load_calculator(recalibrated["path"]).calculator
    ref = load_calculator(files["simple"]).calculator
    data = score_table([new, ref], files["ext_frame"], Outcome("delirium"))
    direct = compare_risks(data.y, data.risks[0], data.risks[1], cuts=(0.1, 0.2),
                           thresholds=comparison_thresholds(new.decision))
    assert info["auc_difference"] == direct.auc.difference
    assert info["nri_total"] == direct.nri.total
    assert info["idi_p_value"] == direct.idi.p_value
    assert [row["threshold"] for row in info["net_benefit"]] == [0.05, 0.1, 0.15, 0.2, 0.25, 0.3]


def test_compare_table_warns_about_a_miscalibrated_reference(recalibrated, files, capsys):
    before = set(files["folder"].iterdir())
    code, out, _ = run(capsys, "compare", recalibrated["path"], files["full"], "--data",
                       files["ext"], "--cuts", "10,20", "--outcome", "delirium")
    assert code == 0
    assert "AUC difference (NEW - REF)" in out
    assert "NRI events" in out
    assert "continuous NRI" in out
    assert "IDI" in out
    assert "9 of 800 rows excluded" in out
    assert "WARNING: NRI and IDI can reward a miscalibrated model" in out
    assert "for Demo full model 1.0.0: slope" in out  # the original is off at B
    assert "support, and do not replace, clinical judgement" in out
    assert set(files["folder"].iterdir()) == before  # compare writes nothing


def test_compare_without_warning_when_both_are_calibrated(files, capsys, tmp_path):
    dev, _ = demo_frames()
    path = _write_csv(dev, tmp_path / "dev.csv")
    code, out, _ = run(capsys, "compare", files["full"], files["simple"], "--data", path,
                       "--outcome", "delirium")
    assert code == 0
    assert "WARNING: NRI" not in out


# ----------------------------------------------------------------- refusals

def _refused(capsys, argv: list[Any], message: str, code: int = 1) -> str:
    got, out, err = run(capsys, *argv)
    assert got == code
    assert message in err
    assert out == ""
    return err


def test_missing_outcome_is_refused_and_nothing_written(files, capsys, tmp_path):
    target = tmp_path / "x.calc.json"
    err = _refused(capsys, ["recalibrate", files["full"], "--data", files["ext"], "--method",
                            "intercept", "-o", target],
                   "name the outcome column with --outcome")
    assert err.count("\n") == 1  # one line
    assert not target.exists()
    _refused(capsys, ["recalibrate", files["full"], "--data", files["ext"], "--method",
                      "intercept", "--outcome", "deliriun", "-o", target],
             "the data has no outcome column 'deliriun'")
    _refused(capsys, ["compare", files["full"], files["simple"], "--data", files["ext"]],
             "name the outcome column with --outcome")
    assert not target.exists()


def test_unknown_method_is_a_usage_error(files, capsys, tmp_path):
    target = tmp_path / "x.calc.json"
    _refused(capsys, ["recalibrate", files["full"], "--data", files["ext"], "--method", "refit",
                      "--outcome", "delirium", "-o", target], "invalid choice: 'refit'", code=2)
    assert not target.exists()


@pytest.mark.parametrize(("cuts", "message"), [
    ("20,10", "--cuts must be strictly increasing; got 20 then 10"),
    ("0,20", "--cuts must lie strictly between 0 and 100"),
    ("10,100", "--cuts must lie strictly between 0 and 100"),
    ("ten", "could not read 'ten'"),
])
def test_bad_cuts_are_refused(files, capsys, cuts, message):
    _refused(capsys, ["compare", files["full"], files["simple"], "--data", files["ext"],
                      "--outcome", "delirium", "--cuts", cuts], message)


def test_no_cuts_and_no_bands_is_refused(files, capsys):
    _refused(capsys, ["compare", files["no_bands"], files["simple"], "--data", files["ext"],
                      "--outcome", "delirium"], "give the risk category cuts with --cuts")


def test_data_lacking_an_input_column_is_refused(files, capsys, tmp_path):
    path = _write_csv(files["ext_frame"].drop(columns=["sodium"]), tmp_path / "no_sodium.csv")
    target = tmp_path / "x.calc.json"
    target.write_text("previous content", "utf-8")
    err = _refused(capsys, ["recalibrate", files["full"], "--data", path, "--method", "slope",
                            "--outcome", "delirium", "-o", target],
                   "there is no column for Sodium (sodium); it is required")
    assert "cannot be scored with Demo full model" in err
    assert target.read_text("utf-8") == "previous content"  # untouched
    _refused(capsys, ["compare", files["simple"], files["full"], "--data", path, "--outcome",
                      "delirium", "--cuts", "10"], "there is no column for Sodium (sodium)")


def test_bad_outcome_values_and_missing_data_file_are_refused(files, capsys, tmp_path):
    frame = files["ext_frame"].copy()
    frame.loc[0, "delirium"] = 2
    path = _write_csv(frame, tmp_path / "three.csv")
    _refused(capsys, ["compare", files["full"], files["simple"], "--data", path, "--outcome",
                      "delirium", "--cuts", "10"], "must have exactly two values")
    _refused(capsys, ["compare", files["full"], files["simple"], "--data", files["ext"],
                      "--outcome", "delirium", "--event", "yes", "--cuts", "10"],
             "the event value 'yes' does not occur")
    _refused(capsys, ["compare", files["full"], files["simple"], "--data",
                      tmp_path / "absent.csv", "--outcome", "delirium", "--cuts", "10"],
             "data file not found")


def test_tampered_calculator_is_refused(files, capsys, tmp_path):
    doc = json.loads(files["full"].read_text("utf-8"))
    doc["about"]["population"] = "someone else"
    path = tmp_path / "tampered.calc.json"
    path.write_text(json.dumps(doc), "utf-8")
    target = tmp_path / "x.calc.json"
    _refused(capsys, ["recalibrate", path, "--data", files["ext"], "--method", "intercept",
                      "--outcome", "delirium", "-o", target], "changed after it was signed")
    assert not target.exists()
