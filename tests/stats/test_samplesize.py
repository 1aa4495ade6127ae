"""Riley et al. minimum sample size: worked example, independent formulas, switching, errors."""

from __future__ import annotations

import math

import numpy as np
import pytest

from calcbuilder.stats import SampleSizeResult, StatsInputError, max_r2_cs, sample_size_binary

# --- the criteria, written out independently from Riley et al. Stat Med 2019 part II
#     (methods.md §7.1), with math.log only ---------------------------------------


def ref_max_r2(phi):
    # max R2_CS = 1 - exp(2 lnL_null / n), lnL_null / n = phi ln phi + (1-phi) ln(1-phi)
    return 1 - math.exp(2 * (phi * math.log(phi) + (1 - phi) * math.log(1 - phi)))


def ref_n_shrinkage(p, r2, s=0.9):
    return p / ((s - 1) * math.log(1 - r2 / s))


def ref_n_optimism(p, phi, r2, delta=0.05):
    s = r2 / (r2 + delta * ref_max_r2(phi))
    return p / ((s - 1) * math.log(1 - r2 / s))


def ref_n_overall(phi, margin=0.05):
    return (1.96 / margin) ** 2 * phi * (1 - phi)


# --- worked example: BMJ 2020 (Riley et al. BMJ 2020;368:m441) ------------------------


def test_bmj_2020_example_by_hand():
    # Inputs p = 24 parameters, prevalence 0.174, R2_CS 0.288 (inputs as in the BMJ 2020
    # worked example, recalled from memory). Hand computation from the formulas:
    #   max R2_CS = 1 - exp(2 (0.174 ln 0.174 + 0.826 ln 0.826)) = 0.6032087
    #   (i)  24 / (-0.1 ln(1 - 0.288/0.9)) = 24 / (0.1 * 0.3856625) = 622.31 -> 623
    #        (623 is also the published criterion (i) size, recalled from memory)
    #   (ii) S = 0.288 / (0.288 + 0.05 * 0.6032087) = 0.9052037;
    #        24 / (0.0947963 * 0.3829722) = 661.10 -> 662
    #   (iii) (1.96/0.05)^2 * 0.174 * 0.826 = 220.85 -> 221
    # so criterion (ii) binds: n = 662, events ceil(662 * 0.174) = ceil(115.19) = 116.
    r = sample_size_binary(24, 0.174, 0.288)
    assert isinstance(r, SampleSizeResult)
    assert r.max_r2_cs == pytest.approx(0.6032087, abs=5e-8)
    assert (r.n_shrinkage, r.n_optimism, r.n_overall_risk) == (623, 662, 221)
    assert (r.n, r.criterion, r.events) == (662, "optimism", 116)
    assert r.per_parameter == pytest.approx(116 / 24, abs=1e-12)


def test_conservative_r2_of_methods_md():
    # methods.md §7.1: 15% of max R2_CS at prevalence 0.174 is 0.0904813 [COMPUTED there]
    assert 0.15 * max_r2_cs(0.174) == pytest.approx(0.0904813, abs=5e-8)


def test_max_r2_analytic_at_half():
    # [ANALYTIC] phi = 1/2: (0.5^0.5 * 0.5^0.5)^2 = 1/4, so max R2_CS = 3/4
    assert max_r2_cs(0.5) == pytest.approx(0.75, abs=1e-15)


# --- each criterion against the independent formulas --------------------------------


@pytest.mark.parametrize("p", [1, 5, 24, 60])
@pytest.mark.parametrize("phi", [0.02, 0.174, 0.5, 0.9])
@pytest.mark.parametrize("fraction_of_max", [0.1, 0.3, 0.45, 0.6, 0.9])
def test_each_criterion_matches_formula(p, phi, fraction_of_max):
    r2 = fraction_of_max * ref_max_r2(phi)
    r = sample_size_binary(p, phi, r2)
    n1 = math.ceil(ref_n_shrinkage(p, r2))
    n2 = math.ceil(ref_n_optimism(p, phi, r2))
    n3 = math.ceil(ref_n_overall(phi))
    assert (r.n_shrinkage, r.n_optimism, r.n_overall_risk) == (n1, n2, n3)
    assert r.n == max(n1, n2, n3)
    # the binding criterion is the first, in the order (i), (ii), (iii), reaching the maximum
    order = [("shrinkage", n1), ("optimism", n2), ("overall_risk", n3)]
    assert r.criterion == next(name for name, n in order if n == r.n)
    assert r.events == math.ceil(r.n * phi - 1e-9)
    assert r.per_parameter == pytest.approx(r.events / p)


def test_custom_shrinkage_and_margin():
    r = sample_size_binary(10, 0.3, 0.2, shrinkage=0.95, margin=0.02)
    assert r.n_shrinkage == math.ceil(ref_n_shrinkage(10, 0.2, 0.95))
    assert r.n_overall_risk == math.ceil(ref_n_overall(0.3, 0.02))
    assert r.n == max(r.n_shrinkage, r.n_optimism, r.n_overall_risk)


# --- the binding criterion switches ---------------------------------------------------


def test_binding_criterion_switches_with_r2():
    # [ANALYTIC] S2 = R2/(R2 + 0.05 max) < 0.9 exactly when R2 < 0.45 max R2_CS, and the
    # size p/((S-1) ln(1 - R2/S)) grows with S: below 0.45 max shrinkage binds, above it
    # optimism binds (p = 24 keeps both above criterion (iii) here).
    m = max_r2_cs(0.174)
    assert sample_size_binary(24, 0.174, 0.40 * m).criterion == "shrinkage"
    assert sample_size_binary(24, 0.174, 0.50 * m).criterion == "optimism"
    assert sample_size_binary(24, 0.174, 0.2).n == 955  # hand: 24/(0.1*0.2513144) = 954.98


def test_binding_criterion_switches_with_prevalence_and_parameters():
    # Few parameters: criterion (iii) binds, largest at prevalence 1/2:
    # (1.96/0.05)^2 / 4 = 384.16 -> 385 [ANALYTIC]
    r = sample_size_binary(2, 0.5, 0.3)
    assert (r.n, r.criterion, r.events) == (385, "overall_risk", 193)
    # the same model with many parameters: a shrinkage-type criterion binds
    assert sample_size_binary(40, 0.5, 0.3).criterion in {"shrinkage", "optimism"}
    # rare outcome: criterion (iii) shrinks with phi(1-phi), criterion (i) does not
    assert sample_size_binary(2, 0.02, 0.05).criterion == "shrinkage"


def test_rounding_ignores_floating_point_noise():
    # [ANALYTIC] margin 1.96/30, phi 1/2: (1.96/(1.96/30))^2/4 = 225 exactly; the float
    # product is 225.00000000000006, which must not become 226.
    assert (1.96 / (1.96 / 30)) ** 2 * 0.25 > 225
    assert sample_size_binary(1, 0.5, 0.01, margin=1.96 / 30).n_overall_risk == 225


def test_numpy_integer_parameters_accepted():
    assert sample_size_binary(np.int64(24), 0.174, 0.288).n == 662


# --- bad input --------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("args", "kwargs", "fragment"),
    [
        ((0, 0.2, 0.1), {}, r"n_parameters must be a positive integer; got 0"),
        ((-3, 0.2, 0.1), {}, r"n_parameters must be a positive integer; got -3"),
        ((2.5, 0.2, 0.1), {}, r"n_parameters must be a positive integer; got 2\.5"),
        ((True, 0.2, 0.1), {}, r"n_parameters must be a positive integer; got True"),
        (("3", 0.2, 0.1), {}, r"n_parameters must be a positive integer; got '3'"),
        ((3, 0.0, 0.1), {}, r"prevalence must lie strictly inside \(0, 1\); got 0\.0"),
        ((3, 1.0, 0.1), {}, r"prevalence must lie strictly inside \(0, 1\); got 1\.0"),
        ((3, float("nan"), 0.1), {}, r"prevalence must be finite; got nan"),
        ((3, "0.2", 0.1), {}, r"prevalence must be a number; got '0\.2'"),
        ((3, 0.5, 0.0), {}, r"r2_cs must lie strictly inside \(0, max R2_CS\) = \(0, 0\.75\)"),
        ((3, 0.5, 0.75), {}, r"r2_cs .*\(0, 0\.75\).*prevalence 0\.5; got 0\.75"),
        ((3, 0.174, 0.7), {}, r"\(0, max R2_CS\) = \(0, 0\.603209\).*got 0\.7"),
        ((3, 0.5, float("inf")), {}, r"r2_cs must be finite; got inf"),
        ((3, 0.5, 0.3), {"shrinkage": 1.0}, r"shrinkage must lie strictly inside \(0, 1\)"),
        ((3, 0.5, 0.3), {"shrinkage": 0.25}, r"r2_cs must be below shrinkage \(0\.25\)"),
        ((3, 0.5, 0.3), {"margin": 0}, r"margin must lie strictly inside \(0, 1\); got 0\.0"),
    ],
)
def test_bad_input(args, kwargs, fragment):
    with pytest.raises(StatsInputError, match=fragment):
        sample_size_binary(*args, **kwargs)


def test_max_r2_bad_prevalence():
    with pytest.raises(StatsInputError, match=r"prevalence must lie strictly inside \(0, 1\)"):
        max_r2_cs(1.2)
