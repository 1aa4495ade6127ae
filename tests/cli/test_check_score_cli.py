"""``calcbuilder check`` and ``calcbuilder score``: exit codes, states, per-row messages."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest
import statsmodels.api as sm

from calcbuilder.calc.keys import generate_private_key, save_key_pair
from calcbuilder.calc.signing import sign_document
from calcbuilder.cli import main

FIXTURE = Path(__file__).parents[1] / "calc" / "fixtures" / "format-v1.calc.json"


@pytest.fixture(autouse=True)
def _isolated_config(tmp_path, monkeypatch):
    monkeypatch.setenv("CALCBUILDER_CONFIG_DIR", str(tmp_path / "config"))


def run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def signed(tmp_path) -> tuple[Path, Path]:
    key = generate_private_key()
    save_key_pair(tmp_path / "keys", "author", key, passphrase=None)
    doc = sign_document(json.loads(FIXTURE.read_text("utf-8")), key)
    path = tmp_path / "signed.calc.json"
    path.write_text(json.dumps(doc), "utf-8")
    return path, tmp_path / "keys" / "author.pub"


def test_check_unsigned_is_usable_and_says_so(capsys):
    code, out, _ = run(capsys, "check", FIXTURE)
    assert code == 0
    assert "signature:   unsigned" in out
    assert "fingerprint: 889c5f9c" in out


def test_check_verified_with_trust_option(signed, capsys):
    path, pub = signed
    code, out, _ = run(capsys, "check", path, "--trust", pub, "--json")
    info = json.loads(out)
    assert code == 0
    assert info["state"] == "verified"
    code, out, _ = run(capsys, "check", path, "--json")
    assert json.loads(out)["state"] == "unknown_signer"


def test_check_tampered_exits_1(signed, tmp_path, capsys):
    path, pub = signed
    doc = json.loads(path.read_text("utf-8"))
    doc["about"]["population"] = "someone else"
    path.write_text(json.dumps(doc), "utf-8")
    code, out, _ = run(capsys, "check", path, "--trust", pub)
    assert code == 1
    assert "INVALID" in out


def test_check_invalid_file_exits_1_with_paths(tmp_path, capsys):
    doc = json.loads(FIXTURE.read_text("utf-8"))
    doc["model"]["terms"][1]["coefficients"] = [0.5]
    bad = tmp_path / "bad.calc.json"
    bad.write_text(json.dumps(doc), "utf-8")
    code, _, err = run(capsys, "check", bad)
    assert code == 1
    assert "test_vectors[0] ('vector 1'): the file states risk" in err


def test_check_bad_usage_exits_2(capsys):
    assert run(capsys, "check")[0] == 2


def _patients(tmp_path: Path) -> Path:
    path = tmp_path / "patients.csv"
    path.write_text(
        "ref,gpa,tuce,psi\n"
        "p1,3.0,20,1\n"
        "p2,2.66,20,0\n"
        "p3,,20,yes\n"
        "p4,3.x,20,no\n"
        "p5,3.9,35,no\n",
        "utf-8",
    )
    return path


def test_score_rows_messages_and_statsmodels_agreement(tmp_path, capsys):
    out_path = tmp_path / "scored.csv"
    code, out, _ = run(capsys, "score", FIXTURE, _patients(tmp_path), "-o", out_path)
    assert code == 0
    assert "Scored 3 of 5 rows" in out
    rows = list(csv.DictReader(out_path.open(encoding="utf-8")))
    assert [r["ref"] for r in rows] == ["p1", "p2", "p3", "p4", "p5"]
    # statsmodels GLM(Binomial) on the shipped spector data: the fixture's source model
    data = sm.datasets.spector.load_pandas().data
    X = sm.add_constant(data[["GPA", "TUCE", "PSI"]])
    fit = sm.GLM(data["GRADE"], X, family=sm.families.Binomial()).fit(tol=1e-12)
    expected = fit.predict([[1, 3.0, 20, 1], [1, 2.66, 20, 0]])
    assert float(rows[0]["risk"]) == pytest.approx(expected[0], abs=1e-9)
    assert float(rows[1]["risk"]) == pytest.approx(expected[1], abs=1e-9)
    assert rows[2]["risk"] == ""
    assert "no value was entered" in rows[2]["warnings"]
    assert rows[3]["risk"] == ""
    assert "'3.x' is not a number" in rows[3]["warnings"]
    assert float(rows[4]["risk"]) > 0
    assert "extrapolation" in rows[4]["warnings"]


def test_score_alternative_unit_header_and_refusals(tmp_path, capsys):
    path = tmp_path / "p.csv"
    path.write_text("gpa[furlongs],tuce,psi\n3,20,1\n", "utf-8")
    code, _, err = run(capsys, "score", FIXTURE, path, "-o", tmp_path / "o.csv")
    assert code == 1
    assert "furlongs" in err
    assert not (tmp_path / "o.csv").exists()


def test_score_refuses_tampered_file(signed, tmp_path, capsys):
    path, pub = signed
    doc = json.loads(path.read_text("utf-8"))
    doc["cautions"] = ["changed"]
    path.write_text(json.dumps(doc), "utf-8")
    code, _, err = run(capsys, "score", path, _patients(tmp_path), "-o", tmp_path / "o.csv",
                       "--trust", pub)
    assert code == 1
    assert "changed after it was signed" in err
    assert not (tmp_path / "o.csv").exists()
