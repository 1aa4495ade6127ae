"""The calculator document: loading order, all problems at once, test vectors, trust states."""

from __future__ import annotations

import copy
import datetime as dt
import json
from pathlib import Path

import pytest

from calcbuilder.calc.canonical import canonical_bytes, fingerprint
from calcbuilder.calc.document import Calculator, load_calculator, save_calculator
from calcbuilder.calc.keys import TrustedKeys, generate_private_key, save_key_pair
from calcbuilder.calc.signing import TrustState, sign_document
from calcbuilder.errors import CalcFileError

FIXTURE = Path(__file__).parent / "fixtures" / "format-v1.calc.json"


@pytest.fixture
def raw() -> dict:
    return json.loads(FIXTURE.read_text("utf-8"))


def write(tmp_path: Path, doc: dict, name: str = "c.calc.json") -> Path:
    path = tmp_path / name
    path.write_text(json.dumps(doc), "utf-8")
    return path


def problems_of(doc: object) -> list[str]:
    with pytest.raises(CalcFileError) as info:
        Calculator.from_dict(doc)
    return info.value.problems or [str(info.value)]


def test_fixture_loads_unsigned_and_round_trips(raw):
    loaded = load_calculator(FIXTURE, today=dt.date(2026, 12, 2))
    assert loaded.state is TrustState.UNSIGNED
    assert not loaded.expired
    # the document rebuilt from the validated object has the same canonical payload
    assert canonical_bytes(loaded.calculator.payload()) == canonical_bytes(raw)
    assert loaded.fingerprint == fingerprint(raw) == loaded.calculator.fingerprint


def test_saved_file_loads_back_identical(tmp_path, raw):
    calc = Calculator.from_dict(raw)
    out = tmp_path / "copy.calc.json"
    save_calculator(calc, out)
    assert Calculator.from_dict(json.loads(out.read_text("utf-8"))) == calc


def test_schema_problems_are_all_reported_with_paths(raw):
    raw["about"]["titel"] = "typo"
    raw["inputs"][1]["kind"] = "integer"
    del raw["decision"]["reasonable_range"]
    found = problems_of(raw)
    assert any(p.startswith("about: unknown field(s) 'titel'") for p in found)
    assert any(p.startswith("inputs[1].kind:") for p in found)
    assert any(p.startswith("decision: 'reasonable_range' is required") for p in found)


def test_semantic_problems_are_all_reported_with_paths(raw):
    raw["inputs"][0]["limits"] = {"low": 5, "high": 4}
    raw["decision"]["default_threshold"] = 0.9
    raw["about"]["review_by"] = "2025-01-01"
    found = problems_of(raw)
    assert "inputs[0].limits.low: must be below limits.high (got 5 > 4)" in found
    assert any(p.startswith("decision.default_threshold: must lie inside") for p in found)
    assert any(p.startswith("about.review_by: must be after the release date") for p in found)


def test_mistyped_coefficient_is_caught_by_the_test_vectors(raw):
    raw["model"]["terms"][0]["coefficients"][0] += 0.001
    found = problems_of(raw)
    assert len(found) == len(raw["test_vectors"])
    assert found[0].startswith("test_vectors[0] ('vector 1'): the file states risk")
    assert "may have been mistyped" in found[0]


def test_vector_within_tolerance_passes_and_beyond_fails(raw):
    raw["test_vectors"][2]["risk"] += 5e-10  # inside the 1e-9 tolerance
    Calculator.from_dict(raw)
    raw["test_vectors"][2]["risk"] += 1e-9  # now 1.5e-9 away
    found = problems_of(raw)
    assert found == [f for f in found if f.startswith("test_vectors[2] ('vector 3')")]


def test_vector_with_refused_values_is_named(raw):
    raw["test_vectors"][1]["values"]["gpa"] = 7
    found = problems_of(raw)
    assert found[0].startswith("test_vectors[1] ('vector 2'): its values are refused")
    assert "above the possible range" in found[0]


def test_too_few_vectors_refused(raw):
    raw["test_vectors"] = raw["test_vectors"][:4]
    assert any(p.startswith("test_vectors:") for p in problems_of(raw))


@pytest.mark.parametrize(
    ("doc", "fragment"),
    [
        ([], "the top level must be a JSON object"),
        ({"format": "other"}, "format must be 'calcbuilder-calculator'"),
        ({"format": "calcbuilder-calculator", "format_version": 99}, "newer than this"),
        ({"format": "calcbuilder-calculator", "format_version": "1"}, "positive integer"),
    ],
)
def test_format_and_version_are_read_first(doc, fragment):
    with pytest.raises(CalcFileError, match=fragment):
        Calculator.from_dict(doc)


def test_expired_review_date(raw):
    loaded = load_calculator(FIXTURE, today=dt.date(2030, 1, 2))
    assert loaded.expired


def _signed(tmp_path: Path, raw: dict) -> tuple[dict, TrustedKeys]:
    key = generate_private_key()
    save_key_pair(tmp_path / "keys", "author", key, passphrase=None)
    trusted = TrustedKeys(tmp_path / "trusted")
    trusted.add(key.public_key(), "Author")
    return sign_document(raw, key), trusted


def test_signed_states(tmp_path, raw):
    signed, trusted = _signed(tmp_path, raw)
    path = write(tmp_path, signed)
    assert load_calculator(path, trusted=trusted).state is TrustState.VERIFIED
    assert load_calculator(path, trusted=TrustedKeys(tmp_path / "empty")).state is (
        TrustState.UNKNOWN_SIGNER
    )
    tampered = copy.deepcopy(signed)
    tampered["about"]["horizon"] = "a different horizon"
    loaded = load_calculator(write(tmp_path, tampered, "t.calc.json"), trusted=trusted)
    assert loaded.state is TrustState.TAMPERED
    with pytest.raises(CalcFileError, match="changed after it was signed"):
        loaded.require_computable()


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        (b"\xff\xfe{", "not UTF-8"),
        (b'{"a": NaN}', "NaN is not a number"),
        (b'{"a": 1, "a": 2}', "appears twice"),
        (b'{"a": 1e999}', "too large"),
        (b"[" * 5000 + b"]" * 5000, "nested too deeply"),
        (b'{"a": ', "not valid JSON"),
    ],
)
def test_malformed_files_get_clear_errors(tmp_path, text, fragment):
    path = tmp_path / "bad.calc.json"
    path.write_bytes(text)
    with pytest.raises(CalcFileError, match=fragment):
        load_calculator(path)


def test_missing_file(tmp_path):
    with pytest.raises(CalcFileError, match="does not exist"):
        load_calculator(tmp_path / "nope.calc.json")
