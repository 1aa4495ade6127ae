"""The decision threshold: three equivalent forms, validation, display rounding, round trips."""

from __future__ import annotations

import math
from decimal import Decimal

import pytest
from hypothesis import given
from hypothesis import strategies as st

from calcbuilder.clinic.threshold import Threshold, ThresholdError, format_percent

thresholds = st.floats(min_value=1e-6, max_value=1 - 1e-6, allow_nan=False)


@pytest.mark.parametrize(("pt", "percent", "number", "ratio"), [
    (0.15, "15%", "6.7", "1 : 5.7"),
    (0.125, "12.5%", "8", "1 : 7"),
    (0.2, "20%", "5", "1 : 4"),
    (0.05, "5%", "20", "1 : 19"),
    (1 / 3, "33.3%", "3", "1 : 2"),
    (0.5, "50%", "2", "1 : 1"),
    (0.6, "60%", "1.67", "1.5 : 1"),
    (0.9, "90%", "1.11", "9 : 1"),
    (0.004, "0.4%", "250", "1 : 249"),
])
def test_three_forms_as_shown(pt, percent, number, ratio):
    t = Threshold.from_probability(pt)
    assert (t.percent_text(), t.number_text(), t.ratio_text()) == (percent, number, ratio)


def test_forms_are_the_same_threshold():
    t = Threshold.from_percent(20)
    assert t == Threshold.from_probability(0.2)
    assert Threshold.from_number_willing(5).pt == pytest.approx(0.2, abs=1e-15)
    assert Threshold.from_harm_benefit(1, 4).pt == pytest.approx(0.2, abs=1e-15)
    assert t.odds == pytest.approx(0.25)
    assert t.harm_benefit == pytest.approx((1.0, 4.0))


def test_decimal_comma_display():
    t = Threshold.from_percent(12.5)
    assert t.percent_text(decimal_comma=True) == "12,5%"
    assert Threshold(0.15).ratio_text(decimal_comma=True) == "1 : 5,7"


def test_sentences_give_all_three_forms():
    first, second, third = Threshold(0.15).sentences()
    assert "15%" in first
    assert "6.7 people" in second
    assert "1 : 5.7" in third


@pytest.mark.parametrize("bad", [0, 1, -0.1, 1.5, math.nan, math.inf])
def test_probability_outside_open_interval_is_refused(bad):
    with pytest.raises(ThresholdError, match="strictly between 0% and 100%"):
        Threshold.from_probability(bad)


@pytest.mark.parametrize("bad", [0, 100, 150, -5])
def test_percentage_outside_range_is_refused(bad):
    with pytest.raises(ThresholdError, match=f"percentage {bad}%"):
        Threshold.from_percent(bad)


@pytest.mark.parametrize("bad", [1, 0.5, 0, -3, math.nan, True])
def test_number_willing_must_exceed_one(bad):
    with pytest.raises(ThresholdError):
        Threshold.from_number_willing(bad)


@pytest.mark.parametrize(("harm", "benefit"), [(0, 1), (1, 0), (-1, 2), (math.inf, 1)])
def test_harm_benefit_must_be_positive(harm, benefit):
    with pytest.raises(ThresholdError, match="must be a positive number"):
        Threshold.from_harm_benefit(harm, benefit)


@pytest.mark.parametrize("bad", ["10", None, True])
def test_non_numbers_are_refused(bad):
    with pytest.raises(ThresholdError, match="must be a number"):
        Threshold.from_percent(bad)


def test_format_percent_rules():
    assert [format_percent(p) for p in (0.15, 0.125, 0.0025, 0.01, 0.999, 1.0)] == [
        "15%", "12.5%", "0.25%", "1%", "99.9%", "100%"]
    assert format_percent(0.00001) == "less than 0.01%"
    assert format_percent(0.99999) == "more than 99.9%"
    assert format_percent(0.12345) == "12.3%"
    assert format_percent(0.12351) == "12.4%"
    assert format_percent(math.nan) == "unknown"


@given(thresholds)
def test_round_trips_through_every_form(pt):
    t = Threshold.from_probability(pt)
    assert Threshold.from_percent(t.percent).pt == pytest.approx(pt, rel=1e-12)
    assert Threshold.from_number_willing(t.number_willing).pt == pytest.approx(pt, rel=1e-12)
    assert Threshold.from_harm_benefit(*t.harm_benefit).pt == pytest.approx(pt, rel=1e-12)


@given(st.floats(min_value=0.01, max_value=0.99))
def test_shown_forms_agree_with_each_other_and_the_value(pt):
    t = Threshold.from_probability(pt)
    shown_n = Decimal(t.number_text())
    if pt <= 0.5:
        left, right = t.ratio_text().split(" : ")
        assert left == "1"
        assert Decimal(right) == shown_n - 1  # k = N - 1, exactly as shown
    else:
        left, right = t.ratio_text().split(" : ")
        assert right == "1"
        assert float(left) == pytest.approx(t.odds, abs=0.05 if t.odds < 10 else 0.5)
    decimals = 2 if t.number_willing < 2 else 1 if t.number_willing < 10 else 0
    assert float(shown_n) == pytest.approx(t.number_willing, abs=0.5 * 10**-decimals + 1e-9)
    shown_pct = float(t.percent_text().removesuffix("%"))
    assert shown_pct == pytest.approx(100 * pt, abs=0.05 + 1e-9)
