"""Canonical form (RFC 8785), fingerprint and payload/signature split."""

from __future__ import annotations

import hashlib
import json
import math
import struct
from decimal import Decimal

import pytest
import rfc8785
from hypothesis import given
from hypothesis import strategies as st

from calcbuilder.calc.canonical import (
    MAX_SAFE_INTEGER,
    canonical_bytes,
    fingerprint,
    split_signature,
)
from calcbuilder.errors import CalcFileError

# RFC 8785 Appendix B, number serialisation samples: IEEE 754 bit pattern -> text.
# Recalled from memory; each is also checked against the rfc8785 package below.
APPENDIX_B = [
    ("0000000000000000", "0"),
    ("8000000000000000", "0"),  # -0 is written 0
    ("0000000000000001", "5e-324"),
    ("8000000000000001", "-5e-324"),
    ("7fefffffffffffff", "1.7976931348623157e+308"),
    ("ffefffffffffffff", "-1.7976931348623157e+308"),
    ("4340000000000000", "9007199254740992"),
    ("c340000000000000", "-9007199254740992"),
    ("4430000000000000", "295147905179352830000"),
    ("44b52d02c7e14af5", "9.999999999999997e+22"),
    ("44b52d02c7e14af6", "1e+23"),
    ("44b52d02c7e14af7", "1.0000000000000001e+23"),
    ("444b1ae4d6e2ef4e", "999999999999999700000"),
    ("444b1ae4d6e2ef4f", "999999999999999900000"),
    ("444b1ae4d6e2ef50", "1e+21"),
    ("3eb0c6f7a0b5ed8c", "9.999999999999997e-7"),
    ("3eb0c6f7a0b5ed8d", "0.000001"),
    ("41b3de4355555553", "333333333.3333332"),
    ("41b3de4355555554", "333333333.33333325"),
    ("41b3de4355555555", "333333333.3333333"),
    ("41b3de4355555556", "333333333.3333334"),
    ("41b3de4355555557", "333333333.33333343"),
    ("becbf647612f3696", "-0.0000033333333333333333"),
    ("43143ff3c1cb0959", "1424953923781206.2"),  # round to even
]


def _double(bits: str) -> float:
    return struct.unpack(">d", bytes.fromhex(bits))[0]


@pytest.mark.parametrize(("bits", "text"), APPENDIX_B)
def test_rfc8785_appendix_b_numbers(bits, text):
    value = _double(bits)
    assert canonical_bytes({"v": value}) == b'{"v":' + text.encode() + b"}"
    assert rfc8785.dumps(value) == text.encode()  # cross-check with the package itself


@pytest.mark.parametrize(("value", "text"), [(1e21, "1e+21"), (1e-7, "1e-7"), (1e20, "1e+20"),
                                             (-0.0, "0"), (1.0, "1"), (0.5, "0.5")])
def test_number_edges(value, text):
    # 1e21 and 1e-7 are where ECMAScript switches to exponent form (RFC 8785 3.2.2.3).
    expected = "100000000000000000000" if value == 1e20 else text
    assert canonical_bytes({"v": value}) == f'{{"v":{expected}}}'.encode()


def test_rfc8785_section_3_2_4_example():
    # RFC 8785 section 3.2.4 (input and output recalled from memory).
    text = r'''{
      "numbers": [333333333.33333329, 1E30, 4.50, 2e-3, 0.000000000000000000000000001],
      "string": "\u20ac$\u000F\u000aA'\u0042\u0022\u005c\\\"\/",
      "literals": [null, true, false]
    }'''
    expected = ('{"literals":[null,true,false],"numbers":[333333333.3333333,1e+30,4.5,0.002,'
                '1e-27],"string":"€$\\u000f\\nA\'B\\"\\\\\\\\\\"/"}').encode()
    assert canonical_bytes(json.loads(text)) == expected


def test_rfc8785_section_3_2_3_sorting_by_utf16():
    # RFC 8785 section 3.2.3 (recalled from memory): keys sort by UTF-16 code units,
    # so U+1F600 (surrogates D83D DE00) sorts before U+FB33.
    text = r'''{"\u20ac": "Euro Sign", "\r": "Carriage Return",
               "\ufb33": "Hebrew Letter Dalet With Dagesh", "1": "One",
               "\ud83d\ude00": "Emoji: Grinning Face", "\u0080": "Control",
               "\u00f6": "Latin Small Letter O With Diaeresis"}'''
    values = list(json.loads(canonical_bytes(json.loads(text))).values())
    assert values == ["Carriage Return", "One", "Control",
                      "Latin Small Letter O With Diaeresis", "Euro Sign",
                      "Emoji: Grinning Face", "Hebrew Letter Dalet With Dagesh"]


@pytest.mark.parametrize(("payload", "path", "words"), [
    ({"model": {"intercept": math.nan}}, "model.intercept", "not a finite number"),
    ({"x": [1, math.inf]}, "x[1]", "not a finite number"),
    ({"seed": 2**53}, "seed", "2**53"),
    ({"seed": -(2**60)}, "seed", "2**53"),
    ({"label": "bad \ud800 text"}, "label", "surrogate"),
    ({"n": Decimal("1.5")}, "n", "Decimal is not a JSON value"),
    ({"n": {1: "a"}}, "n", "not a string"),
])
def test_refuses_values_without_canonical_form(payload, path, words):
    with pytest.raises(CalcFileError) as info:
        canonical_bytes(payload)
    message = str(info.value)
    assert f"{path}: " in message
    assert words in message
    assert "canonical form" in message


def test_largest_safe_integers_are_accepted():
    data = canonical_bytes({"a": MAX_SAFE_INTEGER, "b": -MAX_SAFE_INTEGER})
    assert data == b'{"a":9007199254740991,"b":-9007199254740991}'


def test_all_problems_reported_together():
    with pytest.raises(CalcFileError) as info:
        canonical_bytes({"a": math.nan, "b": [math.inf, 2**70]})
    assert len(info.value.problems) == 3


def test_cycles_are_refused_not_hung():
    loop: dict = {}
    loop["self"] = loop
    with pytest.raises(CalcFileError):
        canonical_bytes(loop)


@given(st.floats(allow_nan=False, allow_infinity=False))
def test_floats_read_back_exactly(value):
    text = canonical_bytes({"v": value})
    assert json.loads(text, parse_int=float)["v"] == value  # the canonical text is a double


json_values = st.recursive(
    st.none() | st.booleans() | st.integers(-MAX_SAFE_INTEGER, MAX_SAFE_INTEGER)
    | st.floats(allow_nan=False, allow_infinity=False) | st.text(max_size=8),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=6), inner,
                                                                max_size=4),
    max_leaves=12)


@given(st.dictionaries(st.text(max_size=6), json_values, max_size=5))
def test_independent_of_member_order_and_formatting(payload):
    reordered = dict(reversed(list(payload.items())))
    reread = json.loads(json.dumps(payload, indent=3, ensure_ascii=True))
    assert canonical_bytes(payload) == canonical_bytes(reordered) == canonical_bytes(reread)


def test_fingerprint_is_sha256_of_canonical_payload():
    payload = {"format": "calcbuilder-calculator", "b": [1, 2.5], "a": "µ"}
    expected = hashlib.sha256(canonical_bytes(payload)).hexdigest()
    assert fingerprint(payload) == expected
    assert fingerprint({**payload, "signature": {"value": "x"}}) == expected
    assert fingerprint({**payload, "a": "u"}) != expected
    assert len(expected) == 64


def test_split_signature_keeps_order_and_returns_section():
    doc = {"format": "f", "about": {"t": 1}, "signature": {"value": "v"}, "zz": 2}
    payload, section = split_signature(doc)
    assert list(payload) == ["format", "about", "zz"]
    assert section == {"value": "v"}
    assert "signature" in doc  # the input is not changed
    assert split_signature({"format": "f"}) == ({"format": "f"}, None)


@pytest.mark.parametrize("document", [[1, 2], "text", None, 3])
def test_split_signature_refuses_non_objects(document):
    with pytest.raises(CalcFileError, match="must be a JSON object"):
        split_signature(document)
