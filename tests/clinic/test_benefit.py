"""Net benefit at the threshold: interpolation, source, plain words, warnings."""

from __future__ import annotations

import numpy as np
import pytest

from calcbuilder.calc.document import Calculator
from calcbuilder.clinic.benefit import net_benefit_at, risk_versus_threshold
from calcbuilder.clinic.threshold import Threshold
from calcbuilder.stats import net_benefit, net_benefit_treat_all
from tests.fixtures_calc import evidence_cohorts, make_calculator


@pytest.fixture(scope="module")
def calc() -> Calculator:
    return Calculator.from_dict(make_calculator())


@pytest.mark.parametrize("pt", [0.1, 0.35, 0.2])
def test_at_grid_points_equals_stats_net_benefit(calc, pt):
    y, risk = evidence_cohorts()["external"]
    nb = net_benefit_at(calc, Threshold(pt))
    assert nb.model == pytest.approx(float(net_benefit(y, risk, [pt])[0]), abs=1e-12)
    assert nb.treat_all == pytest.approx(float(net_benefit_treat_all(y, [pt])[0]), abs=1e-12)
    assert nb.treat_all_exact == pytest.approx(nb.treat_all, abs=1e-12)
    assert nb.treat_none == 0.0


@pytest.mark.parametrize("pt", [0.123, 0.333, 0.4567])
def test_between_grid_points_interpolates_linearly(calc, pt):
    y, risk = evidence_cohorts()["external"]
    lo, hi = np.floor(pt * 100) / 100, np.ceil(pt * 100) / 100
    at = net_benefit(y, risk, [lo, hi])
    expected = at[0] + (at[1] - at[0]) * (pt - lo) / (hi - lo)
    nb = net_benefit_at(calc, Threshold(pt))
    assert nb.model == pytest.approx(expected, abs=1e-12)
    # treat-all: interpolated table against the closed form (linear interpolation of a
    # convex curve on a 0.01 grid differs by well under 1e-3 here)
    assert nb.treat_all == pytest.approx(nb.treat_all_exact, abs=1e-3)
    assert nb.treat_all_exact == pytest.approx(float(net_benefit_treat_all(y, [pt])[0]), abs=1e-12)


def test_numbers_come_from_the_most_trustworthy_set(calc):
    nb = net_benefit_at(calc, Threshold(0.3))
    assert nb.evidence is not None
    assert nb.evidence.kind == "external"
    assert nb.source.startswith("Net benefit from Test Site B, 2024: external validation")
    apparent_only = Calculator.from_dict(make_calculator(external=False))
    assert net_benefit_at(apparent_only, Threshold(0.3)).evidence.kind == "apparent"


def test_below_treat_all_at_low_thresholds(calc):
    nb = net_benefit_at(calc, Threshold(0.1))
    assert (nb.beats_treat_all, nb.beats_treat_none, nb.covered) == (False, True, True)
    assert nb.statements[1].startswith("Compared with intervening for everyone: deciding by "
                                       "the model does not do better")
    assert nb.warnings == (
        "At a threshold of 10% the evidence shows no advantage of deciding by the model over "
        "intervening for everyone; the model's estimate may add little to this decision.",)


def test_beats_both_in_the_middle_of_the_range(calc):
    nb = net_benefit_at(calc, Threshold(0.35))
    assert (nb.beats_treat_all, nb.beats_treat_none, nb.covered) == (True, True, True)
    assert nb.warnings == ()
    found = f"{nb.model * 100:.1f}"
    avoided = f"{(nb.model - nb.treat_all) / (0.35 / 0.65) * 100:.1f}"
    assert nb.interventions_avoided == pytest.approx(float(avoided), abs=0.05)
    assert nb.statements == (
        "Compared with intervening for no one: deciding by the model is worth the same as, in "
        f"every 100 people, finding {found} who would have the outcome and intervening for no "
        "one else.",
        f"Compared with intervening for everyone: deciding by the model is worth the same as "
        f"{avoided} fewer unnecessary interventions in every 100 people, with no one who would "
        "have the outcome missed.")


def test_outside_the_reasonable_range_is_not_covered(calc):
    nb = net_benefit_at(calc, Threshold(0.45))
    assert nb.beats_treat_all
    assert nb.beats_treat_none
    assert not nb.covered
    assert nb.warnings[0].startswith("Not covered by the evidence: 45% lies outside the range "
                                     "of thresholds the authors consider reasonable (5% to 40%)")


def test_high_threshold_no_better_than_treating_no_one(calc):
    nb = net_benefit_at(calc, Threshold(0.6))
    assert (nb.beats_treat_all, nb.beats_treat_none) == (True, False)
    assert "over intervening for no one;" in nb.warnings[-1]
    assert nb.statements[0] == ("Compared with intervening for no one: deciding by the model "
                                "gives no net benefit at this threshold (the two are equal).")


def test_statement_changes_across_the_whole_range(calc):
    grid = [t / 100 for t in range(1, 100)]
    verdicts = [(net_benefit_at(calc, Threshold(t)).beats_treat_all,
                 net_benefit_at(calc, Threshold(t)).beats_treat_none) for t in grid]
    both = [t for t, v in zip(grid, verdicts, strict=True) if v == (True, True)]
    assert (min(both), max(both)) == (0.29, 0.54)


def test_without_any_decision_curve(calc):
    bare = Calculator.from_dict(make_calculator(with_evidence=False))
    nb = net_benefit_at(bare, Threshold(0.2))
    assert not nb.available
    assert nb.beats_treat_all is None
    assert nb.beats_treat_none is None
    assert nb.statements == ()
    assert nb.warnings[-1].startswith("Not covered by the evidence: this calculator holds no "
                                      "decision curve")


def test_threshold_beyond_the_stored_grid(calc):
    nb = net_benefit_at(calc, Threshold(0.995))
    assert not nb.available
    assert "does not give a value at 99.5%" in nb.warnings[-1]


def test_risk_versus_threshold_words():
    t = Threshold(0.2)
    assert risk_versus_threshold(0.3, t) == ("The model's estimate for this patient (30%) is "
                                             "above the threshold you chose (20%).")
    assert "is below the threshold" in risk_versus_threshold(0.1, t)
    assert "is exactly at the threshold" in risk_versus_threshold(0.2, t)
    text = risk_versus_threshold(0.25, t, 0.15, 0.4)
    assert text.endswith("its 95% interval (15% to 40%) includes the threshold, so the estimate "
                         "could lie on either side.")
    assert "interval" not in risk_versus_threshold(0.25, t, 0.21, 0.4)
