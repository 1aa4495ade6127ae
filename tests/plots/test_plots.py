"""Figure builders: they draw, they label, they survive grayscale, they say when data are synthetic.

Every figure is rendered with the Agg canvas (no pyplot, no display) and checked
on its artists (labels, line styles, markers, notes) and on its pixels. The
decision curve and the patient figures have their own test modules.
"""

from __future__ import annotations

import io
import json
import os
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pytest
from matplotlib.figure import Figure
from PIL import Image

from calcbuilder import plots
from calcbuilder.errors import CalcbuilderError
from calcbuilder.plots import PlotInputError, style

from .helpers import assert_not_blank, line_by_label, notes_text, pixels, texts

ROOT = Path(__file__).resolve().parents[2]


# --- every builder --------------------------------------------------------------------


@pytest.fixture
def builders(roc_arrays, cohort, decision, histogram) -> dict[str, Callable[..., Figure]]:
    fpr, tpr = roc_arrays
    curve_x = np.linspace(0.02, 0.6, 30)
    return {
        "roc": lambda **kw: plots.roc_figure(fpr, tpr, auc=0.78, auc_low=0.74, auc_high=0.82, **kw),
        "calibration": lambda **kw: plots.calibration_figure(
            curve_x, curve_x * 1.05, histogram=histogram, **kw),
        "decision": lambda **kw: plots.decision_curve_figure(
            decision["t"], decision["model"], decision["treat_all"], threshold=0.1, **kw),
        "icons": lambda **kw: plots.icon_array_figure(14, **kw),
        "position": lambda **kw: plots.risk_position_figure(
            histogram[0], histogram[1] + histogram[2], 0.14, **kw),
        "contributions": lambda **kw: plots.contributions_figure(["Age", "Sex"], [0.5, -0.2],
                                                                 **kw),
    }


NAMES = ["roc", "calibration", "decision", "icons", "position", "contributions"]


@pytest.mark.parametrize("name", NAMES)
@pytest.mark.parametrize("medium", ["screen", "print"])
def test_every_figure_draws_something(builders, name, medium):
    fig = builders[name](medium=medium)
    assert isinstance(fig, Figure)
    assert_not_blank(fig)


@pytest.mark.parametrize("name", NAMES)
def test_synthetic_stamp_only_when_asked(builders, name):
    stamped = builders[name](synthetic=True)
    plain = builders[name]()
    assert [t.get_text() for t in stamped.texts if t.get_gid() == "synthetic-stamp"] == [
        "Synthetic data – not for clinical use"
    ]
    assert plots.SYNTHETIC_STAMP not in texts(plain)


@pytest.mark.parametrize("name", NAMES)
def test_text_is_dejavu_sans_and_print_is_smaller(builders, name):
    screen, paper = builders[name](medium="screen"), builders[name](medium="print")
    pixels(screen)  # draw, so that tick labels exist
    drawn = screen.findobj(lambda a: hasattr(a, "get_fontfamily") and bool(a.get_text()))
    families = {t.get_fontfamily()[0] for t in drawn}
    assert families == {"DejaVu Sans"}
    assert paper.get_size_inches()[0] < screen.get_size_inches()[0]


def test_figure_png_bytes_is_a_png_of_the_requested_resolution(builders):
    fig = builders["roc"]()
    data = plots.figure_png_bytes(fig, dpi=100)
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    width_in = fig.get_size_inches()[0]
    assert Image.open(io.BytesIO(data)).size[0] == pytest.approx(width_in * 100, abs=2)


def test_title_is_drawn_when_given(builders):
    fig = builders["roc"](title="Demo Hospital A", synthetic=True)
    assert [t.get_text() for t in fig.texts if t.get_gid() == "figure-title"] == ["Demo Hospital A"]


def test_unknown_medium_is_refused(builders):
    with pytest.raises(PlotInputError, match="medium must be 'screen' or 'print'"):
        builders["roc"](medium="poster")


def test_plot_errors_belong_to_our_hierarchy():
    assert issubclass(PlotInputError, CalcbuilderError)
    assert issubclass(PlotInputError, ValueError)


# --- ROC ------------------------------------------------------------------------------


def test_roc_labels_axes_in_percent_and_shows_auc(roc_arrays):
    fig = plots.roc_figure(*roc_arrays, auc=0.781, auc_low=0.742, auc_high=0.816)
    ax = fig.axes[0]
    assert "%" in ax.get_xlabel()
    assert "specificity" in ax.get_xlabel()
    assert "%" in ax.get_ylabel()
    assert "sensitivity" in ax.get_ylabel()
    assert ax.get_xlim() == (0, 1)
    assert ax.get_ylim() == (0, 1)
    assert "Model, AUC 0.78 (95% CI 0.74–0.82)" in texts(fig)
    pixels(fig)
    assert ax.xaxis.get_major_formatter()(0.5, 0) == "50"


def test_roc_reference_curve_is_distinct_and_optional(roc_arrays):
    fpr, tpr = roc_arrays
    with_ref = plots.roc_figure(fpr, tpr, reference=(fpr**1.3, tpr**1.3), reference_auc=0.7)
    model = line_by_label(with_ref.axes[0], "Model")
    ref = line_by_label(with_ref.axes[0], "Reference model, AUC 0.70")
    assert model.get_linestyle() != ref.get_linestyle()
    assert model.get_marker() != ref.get_marker()
    for empty in (None, ([], [])):
        fig = plots.roc_figure(fpr, tpr, reference=empty)
        assert len(fig.axes[0].get_lines()) == 2  # diagonal + model


@pytest.mark.parametrize(
    ("fpr", "tpr", "message"),
    [
        ([0, 0.5, 1], [0, 1.2, 1], r"model true-positive rates must lie in \[0, 1\]"),
        ([0, 0.5, 1], [0, 1], "one value per model false-positive rate"),
        ([0, np.nan, 1], [0, 0.5, 1], "must be finite"),
        ([], [], "must not be empty"),
    ],
)
def test_roc_refuses_bad_curves(fpr, tpr, message):
    with pytest.raises(PlotInputError, match=message):
        plots.roc_figure(fpr, tpr)


# --- calibration ----------------------------------------------------------------------


def test_calibration_axes_start_at_zero_with_equal_limits(histogram):
    x = np.linspace(0.02, 0.45, 25)
    grouped = [(0.05, 0.06, 0.03, 0.10), (0.2, 0.18, 0.12, 0.26), (0.4, 0.47, 0.35, 0.58)]
    alone = plots.calibration_figure(x, x * 0.9, grouped=grouped)
    assert alone.axes[0].get_xlim() == alone.axes[0].get_ylim() == (0.0, 0.6)  # 0.58 -> 0.6
    fig = plots.calibration_figure(x, x * 0.9, band_low=x * 0.7, band_high=x * 1.1,
                                   grouped=grouped, histogram=histogram)
    ax, hax = fig.axes
    last_filled = histogram[0][np.flatnonzero(histogram[1] + histogram[2])[-1] + 1]
    assert ax.get_xlim() == ax.get_ylim()
    assert ax.get_xlim()[0] == 0.0
    assert ax.get_xlim()[1] >= last_filled
    assert "%" in hax.get_xlabel()
    assert "%" in ax.get_ylabel()
    assert ax.get_shared_x_axes().joined(ax, hax)
    assert ax.collections, "confidence band drawn"
    assert any(c.get_label() == "Grouped: observed with 95% CI" for c in ax.containers)
    assert "with the outcome" in texts(fig)
    assert "without the outcome" in texts(fig)
    assert_not_blank(fig)


def test_calibration_histogram_hatches_tell_outcomes_apart(histogram):
    fig = plots.calibration_figure([0.1, 0.2], [0.1, 0.2], histogram=histogram)
    hatches = {p.get_hatch() for p in fig.axes[1].patches}
    assert {style.EVENTS.hatch, style.NONEVENTS.hatch} <= hatches


def test_calibration_without_extras_and_smoother_overshoot_note():
    fig = plots.calibration_figure([0.01, 0.1, 0.3], [-0.01, 0.12, 0.28])
    assert len(fig.axes) == 1
    assert fig.axes[0].get_xlabel() == "Predicted risk, %"
    assert "drawn at the edge" in notes_text(fig)
    assert notes_text(plots.calibration_figure([0.1, 0.3], [0.1, 0.3])) == ""


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"grouped": [(0.1, 0.2, 0.1)]}, "rows of"),
        ({"grouped": [(0.1, 0.2, 0.25, 0.3)]}, "low <= observed <= high"),
        ({"band_low": [0.1, 0.2]}, "given together"),
        ({"histogram": ([0, 0.5, 1], [1], [2, 3])}, "one value per bin"),
        ({"histogram": ([0, 0.5, 0.4], [1, 1], [2, 3])}, "increasing"),
    ],
)
def test_calibration_refuses_bad_inputs(kwargs, message):
    with pytest.raises(PlotInputError, match=message):
        plots.calibration_figure([0.1, 0.2], [0.1, 0.2], **kwargs)


# --- packaging ------------------------------------------------------------------------


def test_importing_plots_stays_light():
    probe = ("import json, sys; import calcbuilder.plots; "
             "print(json.dumps(sorted(sys.modules)))")
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True,
                         check=True, cwd=ROOT)
    loaded = json.loads(out.stdout)
    for heavy in ("matplotlib.pyplot", "PySide6", "scipy", "pandas", "statsmodels"):
        assert not [m for m in loaded if m == heavy or m.startswith(heavy + ".")], heavy


def test_render_script_writes_every_png(tmp_path):
    script = ROOT / "scripts" / "render_plots.py"
    args = [sys.executable, str(script), str(tmp_path), "--dpi", "40", "--reps", "5"]
    subprocess.run(args, check=True, capture_output=True, cwd=ROOT,
                   env={**os.environ, "MPLBACKEND": "Agg"})
    pngs = sorted(tmp_path.glob("*.png"))
    assert len(pngs) == 24
    for png in pngs:
        assert np.asarray(Image.open(png).convert("L"), dtype=float).std() > 5, png.name


def test_figures_go_into_a_qt_canvas(qtbot, builders):
    from matplotlib.backends.backend_qtagg import FigureCanvasQTAgg

    canvas = FigureCanvasQTAgg(builders["decision"](synthetic=True))
    qtbot.addWidget(canvas)
    canvas.resize(640, 460)
    canvas.show()
    canvas.draw()
    grab = canvas.grab().toImage()
    assert grab.width() > 0
    assert len({grab.pixel(x, 230) for x in range(0, grab.width(), 4)}) > 3  # not blank


def test_figures_save_as_pdf_with_embedded_dejavu(builders):
    buf = io.BytesIO()
    builders["icons"](synthetic=True).savefig(buf, format="pdf")
    data = buf.getvalue()
    assert data.startswith(b"%PDF")
    assert b"DejaVuSans" in data
