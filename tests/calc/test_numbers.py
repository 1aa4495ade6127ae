"""Strict number parsing: what is accepted, each refusal's exact message, and a fuzz."""

import math
import re

import pytest
from hypothesis import given
from hypothesis import strategies as st

from calcbuilder.calc.numbers import (
    REASONS,
    NumberTextError,
    format_number,
    format_significant,
    parse_number,
)
from calcbuilder.errors import InputValueError


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("72", 72.0),
        ("72.5", 72.5),
        ("-3", -3.0),
        ("+4", 4.0),
        ("\u22125.5", -5.5),  # the Unicode minus sign of pasted text
        (" 72.5 ", 72.5),
        ("\t0.001\n", 0.001),
        ("007", 7.0),
        ("-0", 0.0),
    ],
)
def test_accepted_with_a_point(text, expected):
    assert parse_number(text) == expected
    assert parse_number(text, decimal_comma=False) == expected


@pytest.mark.parametrize(("text", "expected"), [("1,5", 1.5), ("72", 72.0), (" -0,25 ", -0.25)])
def test_accepted_with_a_decimal_comma_only_when_set(text, expected):
    assert parse_number(text, decimal_comma=True) == expected


REFUSED_POINT = [
    ("", "empty", "nothing was entered; type a number"),
    ("   ", "empty", "nothing was entered; type a number"),
    ("nan", "not_finite", "'nan' is not a usable number; enter a measured value"),
    ("-Infinity", "not_finite", "'-Infinity' is not a usable number; enter a measured value"),
    ("inf", "not_finite", "'inf' is not a usable number; enter a measured value"),
    (
        "1,5",
        "wrong_separator",
        "'1,5' contains a comma, which could be a decimal comma or a thousands separator; "
        "type the number with a decimal point and no separators: 1.5",
    ),
    (
        "1,500",
        "wrong_separator",
        "'1,500' contains a comma, which could be a decimal comma or a thousands separator; "
        "type the number with a decimal point and no separators: 1.500 or 1500, "
        "whichever you meant",
    ),
    (
        "1,000.25",
        "wrong_separator",
        "'1,000.25' contains a comma, which could be a decimal comma or a thousands "
        "separator; type the number with a decimal point and no separators: 1000.25",
    ),
    (
        "72.5.1",
        "several_separators",
        "'72.5.1' has more than one decimal point; type a single number with one decimal "
        "point at most",
    ),
    (".5", "leading_separator", "'.5' has no digit before the decimal point; type 0.5"),
    ("-.5", "leading_separator", "'-.5' has no digit before the decimal point; type -0.5"),
    (
        "5.",
        "trailing_separator",
        "'5.' ends with a decimal point; type 5, or add the missing decimals",
    ),
    (
        "1e3",
        "scientific",
        "'1e3' is in scientific notation, which is not accepted here; type the number in "
        "full: 1000",
    ),
    (
        "2.5E-3",
        "scientific",
        "'2.5E-3' is in scientific notation, which is not accepted here; type the number in "
        "full: 0.0025",
    ),
    (
        "1 000",
        "grouped",
        "'1 000' has a space or separator between digits; type the number without "
        "separators: 1000",
    ),
    (
        "1_000",
        "grouped",
        "'1_000' has a space or separator between digits; type the number without "
        "separators: 1000",
    ),
    (
        "72 5",
        "grouped",
        "'72 5' has a space or separator between digits; type the number without separators",
    ),
    (
        "72kg",
        "text_after",
        "'72kg' has text after the number; type the number alone and set the unit separately",
    ),
    (
        "1.2 mg/dL",
        "text_after",
        "'1.2 mg/dL' has text after the number; type the number alone and set the unit "
        "separately",
    ),
    ("<10", "bound", "'<10' is a bound, not a value; enter the measured value"),
    (
        "abc",
        "not_a_number",
        "'abc' is not a number; type digits with at most one decimal point, e.g. 72.5",
    ),
    (
        "\u0667\u0662",  # Arabic-Indic digits: Python's float() would accept them
        "not_a_number",
        "'\u0667\u0662' is not a number; type digits with at most one decimal point, e.g. 72.5",
    ),
    (
        "9" * 400,
        "too_large",
        "'" + "9" * 23 + "…' is too large to be a measured value; check the number",
    ),
]


@pytest.mark.parametrize(("text", "reason", "message"), REFUSED_POINT)
def test_refused_with_a_point_shows_the_exact_message(text, reason, message):
    with pytest.raises(NumberTextError) as caught:
        parse_number(text)
    assert caught.value.reason == reason
    assert str(caught.value) == message
    assert caught.value.text == text


REFUSED_COMMA = [
    (
        "1.5",
        "wrong_separator",
        "'1.5' contains a point, but this form uses a decimal comma, so the point could be a "
        "thousands separator; type the number with a decimal comma and no separators: 1,5",
    ),
    (
        "1.500",
        "wrong_separator",
        "'1.500' contains a point, but this form uses a decimal comma, so the point could be a "
        "thousands separator; type the number with a decimal comma and no separators: 1,500 "
        "or 1500, whichever you meant",
    ),
    (
        "1,2,3",
        "several_separators",
        "'1,2,3' has more than one decimal comma; type a single number with one decimal "
        "comma at most",
    ),
    (
        "x",
        "not_a_number",
        "'x' is not a number; type digits with at most one decimal comma, e.g. 72,5",
    ),
    (
        "1,5e2",
        "scientific",
        "'1,5e2' is in scientific notation, which is not accepted here; type the number in "
        "full: 150",
    ),
]


@pytest.mark.parametrize(("text", "reason", "message"), REFUSED_COMMA)
def test_refused_with_a_decimal_comma_shows_the_exact_message(text, reason, message):
    with pytest.raises(NumberTextError) as caught:
        parse_number(text, decimal_comma=True)
    assert (caught.value.reason, str(caught.value)) == (reason, message)


def test_error_is_our_user_facing_error_and_a_value_error():
    with pytest.raises(InputValueError):
        parse_number("x")
    with pytest.raises(ValueError, match="is not a number"):
        parse_number("x")


def test_non_text_is_a_programming_error():
    with pytest.raises(TypeError, match="expects text"):
        parse_number(72)  # type: ignore[arg-type]


def _check_property(text: str, decimal_comma: bool | None) -> None:
    """Either a float equal to float() of the canonical form, or our error; nothing else."""
    try:
        value = parse_number(text, decimal_comma=decimal_comma)
    except NumberTextError as exc:
        error = exc
    else:
        error = None
    if error is not None:
        assert error.reason in REASONS
        assert str(error)
        return
    canonical = text.strip().replace("\u2212", "-")
    if decimal_comma:
        canonical = canonical.replace(",", ".")
    assert re.fullmatch(r"[+-]?[0-9]+(?:\.[0-9]+)?", canonical)
    assert math.isfinite(value)
    assert value == float(canonical)


@given(st.text())
def test_fuzz_any_text(text):
    for decimal_comma in (None, False, True):
        _check_property(text, decimal_comma)


NUMBERISH = st.from_regex(
    r"\s?[+\-\u2212]?[0-9]{0,5}[.,]?[0-9]{0,4}(e[0-9])?[a-z ]?\s?", fullmatch=True
)


@given(NUMBERISH)
def test_fuzz_number_like_text(text):
    for decimal_comma in (None, True):
        _check_property(text, decimal_comma)


@given(st.floats(allow_nan=False, allow_infinity=False), st.booleans())
def test_format_then_parse_round_trips(value, comma):
    assert parse_number(format_number(value, decimal_comma=comma), decimal_comma=comma) == value


@pytest.mark.parametrize(
    ("value", "decimals", "comma", "text"),
    [
        (2000.0, None, False, "2000"),
        (1e-05, None, False, "0.00001"),
        (1e16, None, False, "10000000000000000"),
        (-0.0, None, False, "0"),
        (106.104, 0, False, "106"),
        (-0.001, 2, False, "0.00"),
        (1.25, 2, True, "1,25"),
        (float("inf"), None, False, "inf"),
    ],
)
def test_format_number(value, decimals, comma, text):
    assert format_number(value, decimals=decimals, decimal_comma=comma) == text


@pytest.mark.parametrize(
    ("value", "rounding", "text"),
    [
        (10 / 88.42, "up", "0.1131"),
        (2000 / 88.42, "down", "22.61"),
        (2000 / 88.42, "nearest", "22.62"),
        (76.99999999999999, "up", "77"),  # noise removed before rounding up
        (123456.0, "nearest", "123500"),
        (-0.00012345, "up", "-0.0001234"),
        (0.0, "up", "0"),
    ],
)
def test_format_significant(value, rounding, text):
    assert format_significant(value, rounding=rounding) == text
