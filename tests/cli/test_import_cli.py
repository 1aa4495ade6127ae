"""The ``import table`` and ``import pmml`` commands: exit codes, messages, files written."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from calcbuilder.calc.document import load_calculator
from calcbuilder.cli import main

FIXTURES = Path(__file__).parents[1] / "calc" / "fixtures" / "import"
SOURCES = {"table": "anes96.coefficients.csv", "pmml": "anes96.regression.pmml"}


@pytest.fixture
def files(tmp_path, monkeypatch):
    for name in (*SOURCES.values(), "anes96.general.pmml", "anes96.inputs.toml"):
        shutil.copy(FIXTURES / name, tmp_path / name)
    monkeypatch.chdir(tmp_path)
    return tmp_path


@pytest.mark.parametrize(("source", "model"), [("table", "anes96.coefficients.csv"),
                                               ("pmml", "anes96.regression.pmml"),
                                               ("pmml", "anes96.general.pmml")])
def test_import_writes_a_valid_calculator(source, model, files, capsys):
    code = main(["import", source, model, "--inputs", "anes96.inputs.toml", "-o", "out.calc.json"])
    out, err = capsys.readouterr()
    assert (code, err) == (0, "")
    loaded = load_calculator(files / "out.calc.json")
    assert out.splitlines() == [
        "Calculator written to out.calc.json",
        f"file fingerprint: {loaded.fingerprint}",
        "It is not signed yet: check it, then sign it with calcbuilder sign."]


def test_json_output(files, capsys):
    code = main(["import", "table", SOURCES["table"], "--inputs", "anes96.inputs.toml", "-o",
                 "out.calc.json", "--json"])
    report = json.loads(capsys.readouterr().out)
    assert code == 0
    assert report == {"output": "out.calc.json",
                      "file_fingerprint": load_calculator(files / "out.calc.json").fingerprint}


def test_failure_exits_1_with_one_message_and_writes_nothing(files, capsys):
    (files / "bad.csv").write_text("term,coefficient\n(Intercept),0.1\nbmi,0.2\n", "utf-8")
    code = main(["import", "table", "bad.csv", "--inputs", "anes96.inputs.toml", "-o",
                 "out.calc.json"])
    out, err = capsys.readouterr()
    assert (code, out) == (1, "")
    assert err.startswith("calcbuilder import: error: coefficient table bad.csv cannot be "
                          "imported: 4 problems\n  - bad.csv row 3 (term 'bmi'): term 'bmi' is "
                          "not explained")
    assert not (files / "out.calc.json").exists()
    assert sorted(p.name for p in files.iterdir()) == sorted(
        [*SOURCES.values(), "anes96.general.pmml", "anes96.inputs.toml", "bad.csv"])


def test_failure_leaves_an_existing_output_unchanged(files, capsys):
    (files / "out.calc.json").write_text("previous", "utf-8")
    text = (files / SOURCES["pmml"]).read_text("utf-8").replace('"logit"', '"softmax"')
    (files / "bad.pmml").write_text(text, "utf-8")
    code = main(["import", "pmml", "bad.pmml", "--inputs", "anes96.inputs.toml", "-o",
                 "out.calc.json"])
    err = capsys.readouterr().err
    assert code == 1
    assert err == ("calcbuilder import: error: PMML file bad.pmml cannot be imported: 1 problem"
                   "\n  - RegressionModel: normalizationMethod=\"softmax\" is not supported; "
                   "calcbuilder imports normalizationMethod=\"logit\"\n")
    assert (files / "out.calc.json").read_text("utf-8") == "previous"


def test_wrong_test_vector_risk_is_refused(files, capsys):
    toml = files / "anes96.inputs.toml"
    text = toml.read_text("utf-8")
    start = text.index("risk = ", text.index('name = "respondent 2"'))
    end = text.index("\n", start)
    toml.write_text(text[:start] + "risk = 0.5" + text[end:], "utf-8")
    code = main(["import", "pmml", "anes96.general.pmml", "--inputs", "anes96.inputs.toml", "-o",
                 "out.calc.json"])
    err = capsys.readouterr().err
    assert code == 1
    assert "test_vectors[1] ('respondent 2'): the file states risk 0.5 but the model" in err
    assert not (files / "out.calc.json").exists()


@pytest.mark.parametrize("argv", [
    ["import"],
    ["import", "csv", "x.csv", "--inputs", "i.toml", "-o", "o"],
    ["import", "table", "x.csv", "-o", "o"],
    ["import", "pmml", "m.pmml", "--inputs", "i.toml"],
])
def test_bad_usage_exits_2(argv, files, capsys):
    assert main(argv) == 2
    assert "usage: calcbuilder import" in capsys.readouterr().err
    assert not (files / "o").exists()


def test_missing_files_exit_1(files, capsys):
    code = main(["import", "pmml", "nope.pmml", "--inputs", "anes96.inputs.toml", "-o", "o"])
    assert code == 1
    assert capsys.readouterr().err == ("calcbuilder import: error: PMML file nope.pmml does not "
                                       "exist\n")
    code = main(["import", "table", SOURCES["table"], "--inputs", "nope.toml", "-o", "o"])
    assert code == 1
    assert capsys.readouterr().err == ("calcbuilder import: error: inputs description nope.toml "
                                       "does not exist\n")
