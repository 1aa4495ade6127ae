"""Decision-curve figure: grayscale-safe lines, clipping note, reasonable range, marks."""

from __future__ import annotations

import numpy as np
import pytest

from calcbuilder import plots
from calcbuilder.plots import PlotInputError

from .helpers import assert_not_blank, gray_png, line_by_label, luminance, notes_text, texts


def test_decision_curve_lines_stay_apart_in_grayscale(decision):
    fig = plots.decision_curve_figure(decision["t"], decision["model"], decision["treat_all"],
                                      reference=decision["ref"])
    ax = fig.axes[0]
    model, treat_all = line_by_label(ax, "Model"), line_by_label(ax, "Treat all")
    none, ref = line_by_label(ax, "Treat none"), line_by_label(ax, "Reference model")
    styles = {ln.get_linestyle() for ln in (model, treat_all, none, ref)}
    assert len(styles) == 4  # four dash patterns
    assert model.get_marker() != treat_all.get_marker() != ref.get_marker()
    assert abs(luminance(model.get_color()) - luminance(treat_all.get_color())) > 0.15
    gray = gray_png(fig)
    assert len(np.unique(gray.round(-1))) > 5  # more than black on white


def test_decision_curve_labels_and_units(decision):
    fig = plots.decision_curve_figure(decision["t"], decision["model"], decision["treat_all"])
    ax = fig.axes[0]
    assert ax.get_xlabel() == "Decision threshold, % risk"
    assert ax.get_ylabel() == "Net benefit per 100 patients"
    assert ax.xaxis.get_major_formatter()(0.25, 0) == "25"
    assert ax.yaxis.get_major_formatter()(0.05, 0) == "5"
    assert ax.yaxis.get_major_formatter()(-0.02, 0) == "−2"


def test_decision_curve_clips_treat_all_and_says_so(decision):
    fig = plots.decision_curve_figure(decision["t"], decision["model"], decision["treat_all"])
    bottom, top = fig.axes[0].get_ylim()
    assert bottom < 0 < top
    assert bottom <= decision["model"].min()  # the model's curve is never cut
    assert top >= max(decision["model"].max(), decision["treat_all"].max())
    assert decision["treat_all"].min() < bottom
    assert "Treat all continues below the plot" in notes_text(fig)


def test_decision_curve_shows_only_the_reasonable_range(decision):
    fig = plots.decision_curve_figure(decision["t"], decision["model"], decision["treat_all"],
                                      reasonable_range=(0.05, 0.3), threshold=0.1,
                                      patient_risk=0.14)
    lo, hi = fig.axes[0].get_xlim()
    assert 0.04 < lo < 0.05
    assert 0.3 < hi < 0.31
    assert "Shown: the thresholds the authors consider reasonable, 5% to 30%." in notes_text(fig)
    assert "outside" not in notes_text(fig)
    assert "Threshold 10%" in texts(fig)
    assert "This patient 14%" in texts(fig)
    patient = [ln for ln in fig.axes[0].get_lines() if ln.get_marker() == "D"]
    assert len(patient) == 1
    assert patient[0].get_xdata()[0] == 0.14


def test_decision_curve_widens_view_for_marks_outside_the_range(decision):
    fig = plots.decision_curve_figure(decision["t"], decision["model"], decision["treat_all"],
                                      reasonable_range=(0.05, 0.3), threshold=0.4,
                                      patient_risk=0.004)
    lo, hi = fig.axes[0].get_xlim()
    assert lo <= 0.004
    assert hi >= 0.4
    notes = notes_text(fig)
    assert "Shaded" in notes
    assert "The threshold 40% lies outside that range." in notes
    assert "This patient 0.4%" in texts(fig)


def test_decision_curve_threshold_beyond_the_computed_thresholds(decision):
    t = decision["t"][4:30]  # 5%..30% only
    fig = plots.decision_curve_figure(t, decision["model"][4:30], decision["treat_all"][4:30],
                                      threshold=0.6, show_all_thresholds=True)
    assert fig.axes[0].get_xlim()[1] >= 0.6
    assert "No net benefit was computed at the threshold 60%." in notes_text(fig)
    assert_not_blank(fig)


def test_decision_curve_band_and_empty_reference(decision):
    fig = plots.decision_curve_figure(decision["t"], decision["model"], decision["treat_all"],
                                      model_low=decision["low"], model_high=decision["high"],
                                      reference=[])
    labels = [ln.get_label() for ln in fig.axes[0].get_lines()]
    assert "Reference model" not in labels
    assert any("95% confidence band" in c.get_label() for c in fig.axes[0].collections)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"reasonable_range": (0.3, 0.05)}, "low < high"),
        ({"threshold": 1.5}, r"threshold must lie in \[0, 1\]"),
        ({"model_low": np.zeros(99)}, "given together"),
        ({"reference": np.zeros(3)}, "reference must have one value per threshold"),
    ],
)
def test_decision_curve_refuses_bad_inputs(decision, kwargs, message):
    with pytest.raises(PlotInputError, match=message):
        plots.decision_curve_figure(decision["t"], decision["model"], decision["treat_all"],
                                    **kwargs)


def test_decision_curve_refuses_unsorted_thresholds():
    with pytest.raises(PlotInputError, match="strictly increasing"):
        plots.decision_curve_figure([0.2, 0.1], [0, 0], [0, 0])
