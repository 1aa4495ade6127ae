"""Patient figures: icon array, place in the cohort, input contributions."""

from __future__ import annotations

import numpy as np
import pytest
from matplotlib.collections import PathCollection
from matplotlib.figure import Figure

from calcbuilder import plots
from calcbuilder.plots import PlotInputError, style

from .helpers import assert_not_blank, luminance, notes_text, pixels, texts

# --- icon array -----------------------------------------------------------------------


def icon_count(fig: Figure, gid: str) -> int:
    """People in the collection ``gid`` (one path per person: head and body)."""
    found = [c for c in fig.axes[0].collections if c.get_gid() == gid]
    return sum(len(c.get_paths()) for c in found if isinstance(c, PathCollection))


@pytest.mark.parametrize(
    ("risk", "expected"),
    [(0.145, (15, 100)), (0.14, (14, 100)), (0.005, (1, 100)), (0.004, (4, 1000)),
     (0.0004, (0, 1000)), (0.994, (99, 100)), (0.995, (995, 1000)), (0.0, (0, 100)),
     (1.0, (100, 100))],
)
def test_icon_counts_rounding_rule(risk, expected):
    assert plots.icon_counts(risk) == expected


def test_icon_array_of_100(cohort):
    fig = plots.icon_array_figure(14, outcome="delirium")
    assert icon_count(fig, "icons-affected") == 14
    assert icon_count(fig, "icons-other") == 86
    drawn = texts(fig)
    assert "About 14 in 100 people like this" in drawn
    assert "14 with delirium" in drawn
    assert "86 without delirium" in drawn
    dark, light = style.AFFECTED.face, style.UNAFFECTED.face
    assert luminance(light) - luminance(dark) > 0.6  # filled vs outline, in grayscale too
    assert_not_blank(fig)


def test_icon_array_of_1000_for_a_risk_of_0_4_percent():
    n, total = plots.icon_counts(0.004)
    fig = plots.icon_array_figure(n, total=total, synthetic=True)
    assert icon_count(fig, "icons-affected") == 4
    assert icon_count(fig, "icons-other") == 996
    assert "About 4 in 1,000 people like this" in texts(fig)
    assert_not_blank(fig)


@pytest.mark.parametrize(("n", "heading"), [(0, "Fewer than 1 in 100 people like this"),
                                            (100, "More than 99 in 100 people like this")])
def test_icon_array_extremes(n, heading):
    assert heading in texts(plots.icon_array_figure(n))


def test_icon_array_heading_can_be_replaced_or_dropped():
    assert "Seven" in texts(plots.icon_array_figure(7, title="Seven"))
    assert "people like this" not in texts(plots.icon_array_figure(7, title=""))


@pytest.mark.parametrize(
    ("args", "kwargs", "message"),
    [((14.5,), {}, "must be an integer"), ((101,), {}, r"in \[0, total=100\]"),
     ((5,), {"total": 150}, "multiple of 100"), ((5,), {"per_row": 12}, "multiple of 10")],
)
def test_icon_array_refuses_bad_counts(args, kwargs, message):
    with pytest.raises(PlotInputError, match=message):
        plots.icon_array_figure(*args, **kwargs)


# --- risk position --------------------------------------------------------------------


def test_cohort_percentile_interpolates_within_a_bin():
    edges, counts = [0, 0.1, 0.2, 0.3], [50, 30, 20]
    assert plots.cohort_percentile(edges, counts, 0.15) == pytest.approx(65.0)
    assert plots.cohort_percentile(edges, counts, 0.0) == 0.0
    assert plots.cohort_percentile(edges, counts, 0.9) == 100.0


def test_risk_position_marks_the_patient(histogram):
    counts = histogram[1] + histogram[2]
    fig = plots.risk_position_figure(histogram[0], counts, 0.14)
    ax = fig.axes[0]
    assert ax.get_xlabel() == "Predicted risk, %"
    assert ax.get_ylabel() == "Patients"
    assert ax.get_ylim()[0] == 0  # bars are never cut at the base
    share = plots.cohort_percentile(histogram[0], counts, 0.14)
    assert f"About {share:.0f}% of the 600 patients in the development cohort" in notes_text(fig)
    assert "This patient 14%" in texts(fig)
    assert {style.EVENTS.hatch} <= {p.get_hatch() for p in ax.patches}
    assert_not_blank(fig)


def test_risk_position_beyond_the_cohort_and_tiny_shares():
    fig = plots.risk_position_figure([0, 0.1, 0.2], [999, 1], 0.1999)
    assert "more than 99%" in notes_text(fig)
    fig = plots.risk_position_figure([0, 0.1, 0.2], [1, 999], 0.0001)
    assert "less than 1%" in notes_text(fig)
    fig = plots.risk_position_figure([0, 0.1, 0.2], [5, 5], 0.9)
    assert fig.axes[0].get_xlim()[1] >= 0.9
    assert notes_text(fig).startswith("All of the 10 patients")
    assert notes_text(plots.risk_position_figure([0.1, 0.2], [5], 0.05)).startswith("None of")


@pytest.mark.parametrize(
    ("edges", "counts", "message"),
    [([0, 0.1], [1, 2], "one value per bin"), ([0, 0.1], [0], "at least one patient"),
     ([0.1, 0.1, 0.2], [1, 1], "strictly increasing")],
)
def test_risk_position_refuses_bad_histograms(edges, counts, message):
    with pytest.raises(PlotInputError, match=message):
        plots.risk_position_figure(edges, counts, 0.1)


# --- contributions --------------------------------------------------------------------


def test_contributions_sorted_by_size_with_signed_labels():
    labels = ["Age", "Sodium", "Hearing impairment", "Alcohol"]
    fig = plots.contributions_figure(labels, [0.4, -0.9, 0.1, 0.0])
    ax = fig.axes[0]
    pixels(fig)
    ticks = sorted(ax.get_yticklabels(), key=lambda t: -t.get_position()[1])
    assert [t.get_text() for t in ticks] == ["Sodium", "Age", "Hearing impairment", "Alcohol"]
    drawn = texts(fig)
    assert "−0.90" in drawn
    assert "+0.40" in drawn
    assert "\n0.00" in drawn
    assert "◀ lowers the risk" in drawn
    assert "raises the risk ▶" in drawn
    lo, hi = ax.get_xlim()
    assert lo == -hi  # symmetric about zero
    assert "log-odds" in ax.get_xlabel()


def test_contributions_direction_is_not_colour_alone():
    fig = plots.contributions_figure(["up", "down"], [0.5, -0.5])
    bars = [p for p in fig.axes[0].patches if p.get_width() != 0]
    up = next(b for b in bars if b.get_width() > 0)
    down = next(b for b in bars if b.get_width() < 0)
    assert up.get_hatch() != down.get_hatch()
    assert abs(luminance(up.get_facecolor()) - luminance(down.get_facecolor())) > 0.4


def test_contributions_many_inputs_grow_the_figure():
    few = plots.contributions_figure(["a"], [0.1])
    many = plots.contributions_figure([f"Input number {i}" for i in range(25)],
                                      np.linspace(-1, 1, 25))
    assert many.get_size_inches()[1] > few.get_size_inches()[1]
    assert_not_blank(many)


def test_contributions_refuses_mismatched_labels():
    with pytest.raises(PlotInputError, match="one entry per contribution"):
        plots.contributions_figure(["a", "b"], [0.1])
