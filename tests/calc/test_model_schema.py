"""The JSON Schema fragment schema/model.defs.json: a valid draft 2020-12 schema that accepts
valid model sections and refuses structural errors at the right JSON path."""

from __future__ import annotations

import json
from importlib import resources

import pytest
from jsonschema import Draft202012Validator

from tests.calc.test_model import covariance, edit, logistic, survival


@pytest.fixture(scope="module")
def validator() -> Draft202012Validator:
    text = resources.files("calcbuilder.calc").joinpath("schema", "model.defs.json").read_text()
    defs = json.loads(text)
    schema = {"$schema": defs["$schema"], "$ref": "#/$defs/model", "$defs": defs["$defs"]}
    Draft202012Validator.check_schema(schema)
    return Draft202012Validator(schema)


def _objects(node):
    if isinstance(node, dict):
        if node.get("type") == "object":
            yield node
        for value in node.values():
            yield from _objects(value)
    elif isinstance(node, list):
        for value in node:
            yield from _objects(value)


def test_schema_refuses_unknown_fields_everywhere(validator):
    objects = list(_objects(validator.schema["$defs"]))
    assert len(objects) == 6
    assert all(o.get("additionalProperties") is False for o in objects)


def test_schema_accepts_valid_models(validator):
    raw = logistic() | {"covariance": covariance(11)}
    raw["recalibration"] = {"method": "slope", "intercept": -0.3, "slope": 0.8, "dataset": "B"}
    assert list(validator.iter_errors(raw)) == []
    assert list(validator.iter_errors(survival())) == []


@pytest.mark.parametrize(
    ("base", "change", "where"),
    [
        (logistic, lambda r: r.update(extra=1), []),
        (logistic, lambda r: r["terms"][0].update(note="x"), ["terms", 0]),
        (logistic, lambda r: r["terms"][1]["transform"].update(exponent=2),
         ["terms", 1, "transform"]),
        (logistic, lambda r: r["terms"][2]["transform"].update(knots=[1]),
         ["terms", 2, "transform"]),
        (logistic, lambda r: r["terms"][4].update(input="age"), ["terms", 4, "input"]),
        (logistic, lambda r: r["terms"][0].pop("input"), ["terms", 0]),
        (logistic, lambda r: r.pop("intercept"), []),
        (logistic, lambda r: r.update(survival=survival()["survival"]), ["survival"]),
        (survival, lambda r: r.update(intercept=1.0), ["intercept"]),
        (survival, lambda r: r["survival"].pop("centre"), ["survival"]),
        (survival, lambda r: r.update(recalibration={"method": "slope", "intercept": 0}),
         ["recalibration"]),
        (logistic, lambda r: r["terms"][3]["transform"].pop("reference"),
         ["terms", 3, "transform"]),
        (logistic, lambda r: r["terms"][1].update(coefficients=["0.4"]),
         ["terms", 1, "coefficients", 0]),
        (logistic, lambda r: r["terms"][0].update(truncate={}), ["terms", 0, "truncate"]),
    ],
)  # fmt: skip
def test_schema_refuses_structural_errors(validator, base, change, where):
    errors = list(validator.iter_errors(edit(base, change)))
    assert errors
    assert [list(e.absolute_path) for e in errors] == [where] * len(errors)
