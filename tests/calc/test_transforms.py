"""Column builders of the term transforms against hand computations and the methods.md formula."""

from __future__ import annotations

import math

import numpy as np
import pytest

from calcbuilder.calc.model import (
    Hinges,
    Indicator,
    Levels,
    Linear,
    Log,
    Power,
    Rcs,
    Sqrt,
    TermSpec,
    Truncate,
)
from calcbuilder.calc.transforms import (
    ChoiceCodes,
    hinge_columns,
    indicator_columns,
    level_columns,
    log_columns,
    power_columns,
    product_columns,
    rcs_columns,
    sqrt_columns,
    term_columns,
    truncate,
)
from calcbuilder.errors import InputValueError


def slow_rcs(x: float, knots: list[float]) -> list[float]:
    """methods.md 10.1, written out term by term for one value (independent oracle)."""
    t, k = knots, len(knots)

    def p3(u: float) -> float:
        return max(u, 0.0) ** 3

    row = [x]
    for j in range(k - 2):
        value = (
            p3(x - t[j])
            - p3(x - t[k - 2]) * (t[k - 1] - t[j]) / (t[k - 1] - t[k - 2])
            + p3(x - t[k - 1]) * (t[k - 2] - t[j]) / (t[k - 1] - t[k - 2])
        )
        row.append(value / (t[k - 1] - t[0]) ** 2)
    return row


def test_hinges_by_hand():
    # [ANALYTIC] x, (x - 2)+, (x - 5)+ for x = 1, 2, 3, 7
    x = np.array([1.0, 2.0, 3.0, 7.0])
    expected = [[1, 0, 0], [2, 0, 0], [3, 1, 0], [7, 5, 2]]
    np.testing.assert_array_equal(hinge_columns(x, (2.0, 5.0)), expected)


def test_power_sqrt_log_by_hand():
    # [ANALYTIC] 2 ** 3 = 8, 4 ** 0.5 = 2, (-2) ** 2 = 4, 4 ** -1 = 0.25;
    # sqrt 9 = 3; ln(e - 1 + 1) = 1
    x = np.array([2.0, 4.0, -2.0])
    np.testing.assert_array_equal(power_columns(x, 3, "t")[:, 0], [8.0, 64.0, -8.0])
    np.testing.assert_array_equal(power_columns(np.array([4.0]), 0.5, "t"), [[2.0]])
    np.testing.assert_array_equal(power_columns(np.array([-2.0]), 2, "t"), [[4.0]])
    np.testing.assert_array_equal(power_columns(np.array([4.0]), -1, "t"), [[0.25]])
    np.testing.assert_array_equal(sqrt_columns(np.array([0.0, 9.0]), "t")[:, 0], [0.0, 3.0])
    assert log_columns(np.array([math.e - 1]), 1.0, "t")[0, 0] == pytest.approx(1.0, abs=1e-15)


def test_indicator_and_levels_by_hand():
    # [ANALYTIC] yes/no: 1 where yes; choice: one 0/1 column per listed level, reference all zero
    np.testing.assert_array_equal(indicator_columns(np.array([1.0, 0.0]), None)[:, 0], [1.0, 0.0])
    codes = ChoiceCodes(np.array([0, 1, 2, 1]), ("general", "spinal", "regional"))
    np.testing.assert_array_equal(indicator_columns(codes, "spinal")[:, 0], [0, 1, 0, 1])
    expected = [[0, 0], [0, 1], [1, 0], [0, 1]]
    np.testing.assert_array_equal(level_columns(codes, ("regional", "spinal")), expected)


def test_product_is_row_major():
    # [ANALYTIC] FORMAT.md: a1*b1, a1*b2, a1*b3, a2*b1, a2*b2, a2*b3
    a = np.array([[2.0, 3.0]])
    b = np.array([[5.0, 7.0, 11.0]])
    np.testing.assert_array_equal(product_columns(a, b), [[10, 14, 22, 15, 21, 33]])


def test_truncation_clips_before_transforming():
    # [ANALYTIC] clip to [65, 95] then the hinge at 80: x = 50 -> 65, 0; x = 100 -> 95, 15
    term = TermSpec("age", Hinges((80.0,)), (0.1, 0.2), "age", Truncate(65.0, 95.0))
    cols = term_columns(term, np.array([50.0, 70.0, 100.0]))
    np.testing.assert_array_equal(cols, [[65, 0], [70, 0], [95, 15]])
    np.testing.assert_array_equal(truncate(np.array([-1.0, 5.0]), 0.0, None), [0.0, 5.0])
    np.testing.assert_array_equal(truncate(np.array([-1.0, 5.0]), None, 2.0), [-1.0, 2.0])


def test_truncation_makes_log_defined():
    # [ANALYTIC] truncating at 1 first: ln(max(x, 1)) = 0 for x = 0.5 and -3
    term = TermSpec("crp", Log(0.0), (1.0,), "crp", Truncate(low=1.0))
    cols = term_columns(term, np.array([0.5, -3.0, math.e]))
    np.testing.assert_array_equal(cols[:, 0], [0, 0, 1])


def test_rcs_analytic_value():
    # [ANALYTIC] knots 0, 1, 2 at x = 1.5: [(1.5)^3 - (0.5)^3 * 2/1] / 2^2 = (3.375 - 0.25) / 4
    np.testing.assert_allclose(rcs_columns(np.array([1.5]), (0.0, 1.0, 2.0)), [[1.5, 0.78125]])


def test_rcs_matches_slow_formula_inside_and_outside_the_knots():
    # methods.md 10.1 formula, evaluated one value at a time by slow_rcs above
    knots = [24.0, 38.0, 51.95, 77.0, 85.0]
    x = np.linspace(0.0, 120.0, 241)
    expected = np.array([slow_rcs(v, knots) for v in x])
    np.testing.assert_allclose(rcs_columns(x, tuple(knots)), expected, rtol=1e-10, atol=1e-9)


def test_rcs_is_linear_beyond_the_outer_knots():
    # [ANALYTIC] a restricted cubic spline is linear below t1 and above tk (methods.md 10.1)
    cols = rcs_columns(np.array([100.0, 110.0, 120.0]), (0.0, 3.0, 7.0, 10.0))
    np.testing.assert_allclose(cols[2] - cols[1], cols[1] - cols[0], rtol=1e-12)
    below = rcs_columns(np.array([-5.0, -1.0]), (0.0, 3.0, 7.0, 10.0))
    np.testing.assert_array_equal(below[:, 1:], 0)


@pytest.mark.parametrize(
    ("term", "x", "message"),
    [
        (
            TermSpec("crp", Log(1.0), (1.0,), "crp"),
            [3.0, -1.0],
            "term 'crp' (input 'crp'): log(x + shift) needs x + shift > 0 with shift 1 "
            "(got x = -1 at row 1)",
        ),
        (
            TermSpec("n", Sqrt(), (1.0,), "count"),
            [-0.5],
            "term 'n' (input 'count'): sqrt(x) needs x >= 0 (got x = -0.5 at row 0)",
        ),
        (
            TermSpec("p", Power(0.5), (1.0,), "v"),
            [1.0, 2.0, -4.0],
            "term 'p' (input 'v'): x ** 0.5 needs x >= 0 (non-integer exponent) "
            "(got x = -4 at row 2)",
        ),
        (
            TermSpec("p", Power(-2.0), (1.0,), "v"),
            [0.0],
            "term 'p' (input 'v'): x ** -2 needs x != 0 (negative exponent) (got x = 0 at row 0)",
        ),
    ],
)
def test_domain_errors_name_term_input_value_and_row(term, x, message):
    with pytest.raises(InputValueError) as info:
        term_columns(term, np.array(x))
    assert str(info.value) == message


def test_term_columns_dispatches_every_number_transform():
    # [ANALYTIC] one value x = 4 through each number transform
    x = np.array([4.0])
    cases = [
        (Linear(), [[4.0]]),
        (Log(0.0), [[math.log(4.0)]]),
        (Sqrt(), [[2.0]]),
        (Power(2.0), [[16.0]]),
        (Hinges((1.0,)), [[4.0, 3.0]]),
        (Rcs((0.0, 1.0, 2.0)), [slow_rcs(4.0, [0.0, 1.0, 2.0])]),
    ]
    for transform, expected in cases:
        n = len(expected[0])
        term = TermSpec("t", transform, (0.0,) * n, "x")
        np.testing.assert_allclose(term_columns(term, x), expected, rtol=1e-14)


def test_choice_terms_need_codes():
    codes = ChoiceCodes(np.array([1, 0]), ("a", "b"))
    term = TermSpec("c", Levels("a", ("b",)), (1.0,), "c")
    np.testing.assert_array_equal(term_columns(term, codes)[:, 0], [1, 0])
    np.testing.assert_array_equal(
        term_columns(TermSpec("c", Indicator("a"), (1.0,), "c"), codes)[:, 0], [0, 1]
    )
