"""``calcbuilder report``: exit codes, JSON output, nothing written on refusal."""

from __future__ import annotations

import json

import pytest
from pypdf import PdfReader

from calcbuilder.cli import main
from calcbuilder.reports.evidence_report import SECTION_TITLES
from tests.fixtures_calc import write_calculator
from tests.reports.report_fixtures import signed_calculator


@pytest.fixture(autouse=True)
def _isolated_config(tmp_path, monkeypatch):
    monkeypatch.setenv("CALCBUILDER_CONFIG_DIR", str(tmp_path / "config"))


def run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_cli_report_ok_and_json(tmp_path, capsys):
    path, pub = signed_calculator(tmp_path)
    out = tmp_path / "out.pdf"
    code, stdout, _ = run(capsys, "report", path, "-o", out, "--trust", pub, "--json")
    assert code == 0
    info = json.loads(stdout)
    assert info["state"] == "verified"
    assert info["pages"] == len(PdfReader(out).pages)
    assert info["sections"] == list(SECTION_TITLES)
    code, stdout, _ = run(capsys, "report", path, "-o", out, "--page", "Letter")
    assert code == 0
    assert "Evidence report written to" in stdout
    assert "unknown signer" in stdout


def test_cli_bad_file_exits_1_and_writes_nothing(tmp_path, capsys):
    bad = tmp_path / "bad.calc.json"
    bad.write_text("{not json", "utf-8")
    out = tmp_path / "out.pdf"
    code, _, err = run(capsys, "report", bad, "-o", out)
    assert code == 1
    assert "calcbuilder report: error:" in err
    assert not out.exists()
    doc = json.loads(write_calculator(tmp_path).read_text("utf-8"))
    doc["model"]["intercept"] = -6.4  # the test vectors no longer reproduce
    bad.write_text(json.dumps(doc), "utf-8")
    code, _, err = run(capsys, "report", bad, "-o", out)
    assert code == 1
    assert "test vectors" in err
    assert not out.exists()


def test_cli_tampered_exits_1(tmp_path, capsys):
    path, pub = signed_calculator(tmp_path)
    doc = json.loads(path.read_text("utf-8"))
    doc["cautions"] = ["changed"]
    path.write_text(json.dumps(doc), "utf-8")
    out = tmp_path / "out.pdf"
    code, _, err = run(capsys, "report", path, "-o", out, "--trust", pub)
    assert code == 1
    assert "does not verify" in err
    assert not out.exists()


def test_cli_usage_errors_exit_2(tmp_path, capsys):
    assert run(capsys, "report")[0] == 2
    assert run(capsys, "report", tmp_path / "x.calc.json")[0] == 2  # no -o
    assert run(capsys, "report", tmp_path / "x", "-o", tmp_path / "o.pdf", "--page", "A5")[0] == 2
