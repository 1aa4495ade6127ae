"""The other panels and ways in: why this estimate, the equation, evidence, opening files."""

from __future__ import annotations

import json
import re

import pytest
from PySide6.QtCore import QMimeData, QPointF, Qt, QTimer, QUrl
from PySide6.QtGui import QDragEnterEvent, QDropEvent
from PySide6.QtWidgets import QApplication, QFileDialog, QGroupBox, QLabel, QMessageBox

from calcbuilder.calc.model import ModelSpec
from calcbuilder.calc.problems import Problems
from calcbuilder.gui import actions
from calcbuilder.gui.equation import equation_text
from calcbuilder.gui.why_panel import direction_text
from tests.fixtures_calc import make_calculator, write_calculator

from .conftest import choose, label, type_into

COEF_LINE = re.compile(r"^\s+([+−]) (\S+) × (.+)$")


def fill(qtbot, window):
    type_into(qtbot, window, "age", "85")
    type_into(qtbot, window, "creatinine", "60")
    choose(window, "falls", "yes")
    choose(window, "living", "nursing")


def test_contributions_largest_first_with_direction_in_words(qtbot, open_form, calc_file):
    window = open_form(calc_file)
    fill(qtbot, window)
    table = window.body.why.table
    result = window.session.result()
    assert table.rowCount() == 4
    shown = [table.item(i, 0).text() for i in range(4)]
    assert shown == [c.label for c in result.contributions]
    sizes = [abs(c.value) for c in result.contributions]
    assert sizes == sorted(sizes, reverse=True)
    for i, c in enumerate(result.contributions):
        assert table.item(i, 2).text() == f"{c.value:+.2f}".replace("-", "−")
        assert table.item(i, 3).text() == direction_text(c.value)
    assert table.item(shown.index("Serum creatinine"), 1).text() == "60 µmol/L"
    window.body.why.flush()
    assert window.body.why.figure.canvas is not None


def test_equation_on_request(qtbot, open_form, calc_file):
    window = open_form(calc_file)
    why = window.body.why
    assert not why.equation.isVisibleTo(why)
    why.equation_button.click()
    assert why.equation.isVisibleTo(why)
    assert why.equation_button.text() == "Hide the equation"
    text = why.equation.toPlainText()
    assert text.startswith("η = −6.5")
    assert "risk = 1 / (1 + exp(−η))" in text
    why.equation_button.click()
    assert not why.equation.isVisibleTo(why)


def coefficients_in(text):
    out = []
    for line in text.splitlines():
        match = COEF_LINE.match(line)
        if match:
            value = float(match[2].replace("−", "-"))
            out.append((-value if match[1] == "−" else value, match[3]))
    return out


def test_equation_lists_every_coefficient_exactly_in_column_order():
    doc = make_calculator(6)
    from calcbuilder.calc.document import Calculator

    calc = Calculator.from_dict(doc)
    found = coefficients_in(equation_text(calc.model, calc.inputs))
    expected = [c for t in calc.model.terms for c in t.coefficients]
    assert [v for v, _ in found] == expected
    assert [s for _, s in found][:5] == ["age", "ln(creatinine)", "[falls = yes]",
                                         "[living = assisted]", "[living = nursing]"]


def test_equation_of_splines_products_and_survival():
    kinds = {"age": "number", "crp": "number", "hearing": "yes_no",
             "an": ("choice", ("general", "neuraxial"))}
    raw = {"family": "logistic", "intercept": -2.1, "terms": [
        {"name": "age", "input": "age", "transform": {"type": "rcs", "knots": [30, 50, 65, 80]},
         "coefficients": [0.02, 0.15, -0.31], "truncate": {"low": 20, "high": 95}},
        {"name": "crp", "input": "crp", "transform": {"type": "log", "shift": 1},
         "coefficients": [0.4]},
        {"name": "hearing", "input": "hearing", "transform": {"type": "indicator"},
         "coefficients": [0.6]},
        {"name": "age_hearing", "transform": {"type": "product", "of": ["age", "hearing"]},
         "coefficients": [0.01, 0.02, 0.03]}]}
    problems = Problems()
    model = ModelSpec.from_dict(raw, "model", problems, kinds)
    assert model is not None, problems.items
    text = equation_text(model, ())
    symbols = [s for _, s in coefficients_in(text)]
    assert symbols == ["age", "S1(age)", "S2(age)", "ln(crp + 1)", "[hearing = yes]",
                       "age × [hearing = yes]", "S1(age) × [hearing = yes]",
                       "S2(age) × [hearing = yes]"]
    assert "knots t1..t4 = 30, 50, 65, 80" in text
    assert "age is first limited to [20, 95]" in text
    assert "Harrell's parameterisation" in text
    survival = {"family": "survival_at_horizon",
                "terms": [{"name": "age", "input": "age", "transform": {"type": "linear"},
                           "coefficients": [0.05]}],
                "survival": {"horizon": 5, "horizon_unit": "years", "baseline_survival": 0.9,
                             "centre": [60.0]}}
    model = ModelSpec.from_dict(survival, "model", Problems(), kinds)
    text = equation_text(model, ())
    assert text.startswith("η = ln(−ln 0.9)")
    assert "+ 0.05 × (age − 60)" in text
    assert "risk = 1 − exp(−exp(η))" in text


def test_evidence_tab_shows_each_set_and_the_calibration_plot(open_form, tmp_path):
    doc = make_calculator()
    external = next(e for e in doc["evidence"] if e["kind"] == "external")
    external["calibration_curve"] = {"risk": [0.05, 0.2, 0.4, 0.6],
                                     "observed": [0.1, 0.3, 0.5, 0.65]}
    path = tmp_path / "cal.calc.json"
    path.write_text(json.dumps(doc, ensure_ascii=False), "utf-8")
    window = open_form(path)
    panel = window.body.evidence
    boxes = [window.findChild(QGroupBox, f"evidence_{e['id']}") for e in doc["evidence"]]
    assert all(b is not None for b in boxes)
    texts = " ".join(lab.text() for b in boxes for lab in b.findChildren(QLabel))
    assert "Test Site B, 2024" in texts
    assert "adults in a test clinic" in texts
    assert "1,500, of whom" in texts
    assert panel.chooser.count() == 1
    assert panel.chooser.currentText() == external["label"]
    panel.flush()
    assert panel.figure.canvas is not None
    limits = label(window, "limitations").text()
    assert "Not for any clinical decision." in limits
    assert "Adults aged 40 to 90" in limits


def test_evidence_tab_without_calibration_says_so(open_form, calc_file):
    window = open_form(calc_file)
    panel = window.body.evidence
    assert panel.chooser.count() == 0
    panel.flush()
    assert panel.figure.canvas is None


def drag_event(cls, path):
    data = QMimeData()
    data.setUrls([QUrl.fromLocalFile(str(path))])
    if cls is QDragEnterEvent:
        return data, QDragEnterEvent(QPointF(10, 10), Qt.DropAction.CopyAction, data,
                                     Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier)
    return data, QDropEvent(QPointF(10, 10), Qt.DropAction.CopyAction, data,
                            Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier)


def test_dropping_a_calculator_file_opens_it(open_form, tmp_path):
    window = open_form(None)
    path = write_calculator(tmp_path)
    _data, enter = drag_event(QDragEnterEvent, path)
    window.dragEnterEvent(enter)
    assert enter.isAccepted()
    _data2, drop = drag_event(QDropEvent, path)
    window.dropEvent(drop)
    assert window.session is not None
    assert label(window, "title").text() == "Test calculator with 4 input(s)"
    other = tmp_path / "notes.txt"
    other.write_text("x", "utf-8")
    _data3, enter = drag_event(QDragEnterEvent, other)
    enter.ignore()
    window.dragEnterEvent(enter)
    assert not enter.isAccepted()


def test_file_open_replaces_the_form_and_forgets_the_values(qtbot, open_form, tmp_path,
                                                            monkeypatch):
    first = write_calculator(tmp_path, "a.calc.json")
    second = write_calculator(tmp_path, "b.calc.json", n_inputs=6)
    window = open_form(first)
    fill(qtbot, window)
    monkeypatch.setattr(QFileDialog, "getOpenFileName",
                        staticmethod(lambda *_a, **_k: (str(second), "")))
    window.ask_open()
    assert label(window, "title").text() == "Test calculator with 6 input(s)"
    assert window.session.value("age") is None
    assert label(window, "risk").text() == "—"


def close_next_dialog(result_ok: bool = False) -> None:
    def close() -> None:
        dialog = QApplication.activeModalWidget()
        if dialog is not None:
            dialog.accept() if result_ok else dialog.reject()

    QTimer.singleShot(200, close)


def test_print_dialog_opens_and_cancel_prints_nothing(qtbot, open_form, calc_file):
    window = open_form(calc_file)
    fill(qtbot, window)
    close_next_dialog()
    assert actions.ask_and_print(window, window.session, None) is False


def test_about_box_opens(open_form, calc_file, monkeypatch):
    window = open_form(calc_file)
    seen = []
    monkeypatch.setattr(QMessageBox, "exec", lambda box: seen.append(box.text()) or 0)
    window.about()
    assert seen
    assert "Test calculator with 4 input(s), version 1.2.0" in seen[0]


@pytest.mark.parametrize("n_inputs", [1, 25])
def test_small_and_large_calculators_build(qtbot, open_form, tmp_path, n_inputs):
    window = open_form(write_calculator(tmp_path, n_inputs=n_inputs))
    assert window.body.inputs.ids() == [s.id for s in window.session.inputs]
    type_into(qtbot, window, "age", "66")
    if n_inputs == 1:
        assert label(window, "risk").property("riskValue") is not None


def test_calculator_without_covariance_or_evidence(qtbot, open_form, tmp_path):
    path = write_calculator(tmp_path, covariance=False, with_evidence=False, synthetic=False)
    window = open_form(path)
    fill(qtbot, window)
    risk = window.session.result().risk
    assert label(window, "risk").property("riskValue") == risk
    assert label(window, "riskInterval").text().startswith("No interval")
    assert not label(window, "cohortPosition").isVisible()
    assert not window.body.risk.cohort.isVisible()
    warnings = label(window, "thresholdWarnings").text()
    assert "no decision curve" in warnings
    window.body.threshold.curve.flush()
    assert window.body.threshold.curve.canvas is None
    assert label(window, "noEvidence").text().endswith("holds no evidence of its performance.")
