"""``calcbuilder sheet``: exit codes, messages, nothing written on bad values."""

from __future__ import annotations

import io
import json

import pytest
from pypdf import PdfReader

from calcbuilder.calc.keys import generate_private_key, save_key_pair
from calcbuilder.cli import main
from tests.fixtures_calc import make_calculator, write_calculator

GOOD = ["--value", "age=72", "--value", "creatinine=1.2", "--unit", "creatinine=mg/dL",
        "--value", "falls=yes", "--value", "living=assisted"]


@pytest.fixture(autouse=True)
def _isolated_config(tmp_path, monkeypatch):
    monkeypatch.setenv("CALCBUILDER_CONFIG_DIR", str(tmp_path / "config"))


def run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def pdf_text(path) -> str:
    reader = PdfReader(io.BytesIO(path.read_bytes()))
    return " ".join(reader.pages[0].extract_text().split())


def test_sheet_is_written(tmp_path, capsys):
    calc = write_calculator(tmp_path)
    out = tmp_path / "sheet.pdf"
    code, stdout, stderr = run(capsys, "sheet", calc, *GOOD, "--patient-ref", "Zoë, bed 4",
                               "--page", "Letter", "--threshold", "35", "-o", out)
    assert code == 0
    assert stdout.startswith(f"Risk sheet written to {out} (1 page, Letter): estimated risk ")
    assert "threshold 35%" in stdout
    assert "SYNTHETIC, NOT FOR CLINICAL USE" in stderr
    text = pdf_text(out)
    assert "Zoë, bed 4" in text
    assert "1.2 mg/dL (= 106 µmol/L)" in text
    assert "35%" in text
    assert float(PdfReader(out).pages[0].mediabox[2]) == pytest.approx(612)


def test_json_output_and_default_threshold(tmp_path, capsys):
    calc = write_calculator(tmp_path)
    out = tmp_path / "sheet.pdf"
    code, stdout, _ = run(capsys, "sheet", calc, *GOOD, "--json", "-o", out)
    info = json.loads(stdout)
    assert code == 0
    assert info["threshold"] == 0.2
    assert info["pages"] == 1
    assert 0 < info["low"] < info["risk"] < info["high"] < 1
    assert info["state"] == "unsigned"


def test_bad_values_exit_1_with_every_message_and_write_nothing(tmp_path, capsys):
    calc = write_calculator(tmp_path)
    out = tmp_path / "sheet.pdf"
    code, stdout, stderr = run(capsys, "sheet", calc, "--value", "age=7o", "--value",
                               "creatinine=1.5", "--value", "falls=maybe", "-o", out)
    assert code == 1
    assert stdout == ""
    lines = stderr.splitlines()
    assert lines[0].startswith("calcbuilder sheet: Age: ")
    assert any(line.startswith("calcbuilder sheet: Serum creatinine: 1.5 µmol/L is below")
               for line in lines)
    assert any("'maybe' is not a yes/no answer" in line for line in lines)
    assert any(line.startswith("calcbuilder sheet: Living situation: no value was entered")
               for line in lines)
    assert lines[-1] == "calcbuilder sheet: nothing was written"
    assert not out.exists()


def test_unknown_input_and_bad_threshold_exit_1(tmp_path, capsys):
    calc = write_calculator(tmp_path)
    out = tmp_path / "sheet.pdf"
    code, _, stderr = run(capsys, "sheet", calc, *GOOD, "--value", "weight=70", "-o", out)
    assert code == 1
    assert "not inputs of this calculator: weight" in stderr
    code, _, stderr = run(capsys, "sheet", calc, *GOOD, "--threshold", "100", "-o", out)
    assert code == 1
    assert "strictly between 0% and 100%" in stderr
    assert not out.exists()


@pytest.mark.parametrize("argv", [
    ["--value", "age", "-o", "s.pdf"],        # not ID=VALUE
    ["--threshold", "ten", "-o", "s.pdf"],    # not a number
    ["--page", "A5", "-o", "s.pdf"],          # not a page size
    [],                                       # no -o
])
def test_usage_errors_exit_2(tmp_path, capsys, monkeypatch, argv):
    calc = write_calculator(tmp_path)
    monkeypatch.chdir(tmp_path)
    code, _, _ = run(capsys, "sheet", calc, *GOOD, *argv)
    assert code == 2
    assert not (tmp_path / "s.pdf").exists()


def test_tampered_file_is_refused(tmp_path, capsys):
    doc = make_calculator(signed=True)
    doc["about"]["population"] = "someone else"
    calc = tmp_path / "tampered.calc.json"
    calc.write_text(json.dumps(doc), "utf-8")
    out = tmp_path / "sheet.pdf"
    code, _, stderr = run(capsys, "sheet", calc, *GOOD, "-o", out)
    assert code == 1
    assert "changed after it was signed" in stderr
    assert not out.exists()


def test_trusted_signer_shows_no_notice(tmp_path, capsys):
    key = generate_private_key()
    files = save_key_pair(tmp_path / "keys", "author", key, passphrase=None)
    calc = write_calculator(tmp_path, signed=True, key=key, synthetic=False)
    out = tmp_path / "sheet.pdf"
    code, _, stderr = run(capsys, "sheet", calc, *GOOD, "--trust", files.public_key, "-o", out)
    assert code == 0
    assert "note:" not in stderr
    assert "a key this clinic trusts" in pdf_text(out)
