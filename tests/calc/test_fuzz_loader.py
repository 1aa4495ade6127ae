"""Fuzz the calculator loader: whatever the input, only our clear error comes out.

Random JSON, mutated valid files, deep nesting, huge numbers and wrong types;
2,100 examples in all (hypothesis), run in CI.
"""

from __future__ import annotations

import contextlib
import copy
import json
from pathlib import Path
from typing import Any

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from calcbuilder.calc.document import Calculator
from calcbuilder.calc.jsonio import parse_json
from calcbuilder.errors import CalcFileError

FIXTURE = json.loads((Path(__file__).parent / "fixtures" / "format-v1.calc.json").read_text())


def fuzz(n: int) -> settings:
    """Hypothesis settings for one fuzz test with ``n`` examples."""
    return settings(max_examples=n, deadline=None, suppress_health_check=[HealthCheck.too_slow])

leaves = (
    st.none()
    | st.booleans()
    | st.integers(min_value=-(10**30), max_value=10**30)
    | st.floats(allow_nan=False, allow_infinity=False)
    | st.text(max_size=20)
)
json_values = st.recursive(
    leaves,
    lambda inner: st.lists(inner, max_size=5)
    | st.dictionaries(st.text(max_size=8), inner, max_size=5),
    max_leaves=30,
)


def accepts_or_refuses_clearly(doc: Any) -> None:
    with contextlib.suppress(CalcFileError):
        Calculator.from_dict(doc)


def _paths(value: Any, prefix: tuple = ()) -> list[tuple]:
    out = [prefix]
    if isinstance(value, dict):
        for k, v in value.items():
            out += _paths(v, (*prefix, k))
    elif isinstance(value, list):
        for i, v in enumerate(value):
            out += _paths(v, (*prefix, i))
    return out


ALL_PATHS = _paths(FIXTURE)[1:]


def _mutate(doc: dict, path: tuple, action: str, new: Any) -> dict:
    out = copy.deepcopy(doc)
    parent = out
    for key in path[:-1]:
        parent = parent[key]
    last = path[-1]
    if action == "replace":
        parent[last] = new
    elif action == "delete":
        del parent[last]
    elif action == "add" and isinstance(parent, dict):
        parent[f"extra_{last}"] = new
    elif action == "add" and isinstance(parent, list):
        parent.append(new)
    return out


@fuzz(600)
@given(json_values)
def test_random_json_values(doc):
    accepts_or_refuses_clearly(doc)


@fuzz(300)
@given(st.dictionaries(st.sampled_from(sorted(FIXTURE)), json_values, max_size=9))
def test_random_documents_with_the_right_section_names(sections):
    doc = {"format": "calcbuilder-calculator", "format_version": 1, **sections}
    accepts_or_refuses_clearly(doc)


@fuzz(800)
@given(
    st.lists(
        st.tuples(st.sampled_from(ALL_PATHS), st.sampled_from(["replace", "delete", "add"]),
                  json_values),
        min_size=1,
        max_size=3,
    )
)
def test_mutated_valid_file(mutations):
    doc = FIXTURE
    for path, action, new in mutations:
        try:
            doc = _mutate(doc, path, action, new)
        except (KeyError, IndexError, TypeError):
            continue  # an earlier mutation removed this path
    accepts_or_refuses_clearly(doc)


@fuzz(300)
@given(st.binary(max_size=200) | st.text(max_size=200).map(str.encode))
def test_random_bytes_never_crash_the_parser(data):
    with contextlib.suppress(CalcFileError):
        parse_json(data)


@fuzz(100)
@given(st.integers(min_value=1, max_value=3000), st.sampled_from(["[", '{"a":']))
def test_deep_nesting(depth, opener):
    closer = "]" if opener == "[" else "}"
    text = opener * depth + "1" + closer * depth
    with contextlib.suppress(CalcFileError):
        Calculator.from_dict(parse_json(text))


def test_huge_numbers_in_every_numeric_field():
    for path in ALL_PATHS:
        for huge in (10**400, 1e308, -1e308, 2**63):
            try:
                accepts_or_refuses_clearly(_mutate(FIXTURE, path, "replace", huge))
            except (KeyError, IndexError, TypeError):
                continue
