"""Patient values on the clinic form: typed text, units, keyboard-only entry, messages.

The risk shown must equal :func:`calcbuilder.calc.scoring.score` on the same
canonical values, and every message must appear beside its own input.
"""

from __future__ import annotations

import math
import time

import pytest
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QApplication, QComboBox, QLabel, QLineEdit

from calcbuilder.calc.messages import CODES, Message
from calcbuilder.calc.scoring import score
from calcbuilder.clinic.threshold import format_percent
from calcbuilder.gui.inputs_panel import NOT_ANSWERED, InputView
from tests.fixtures_calc import MG_DL, make_calculator, reference_risk, write_calculator

from .conftest import choose, choose_unit, field, label, type_into


def expected(window, values):
    model = window.session.calculator.model
    return float(score(model, {k: [v] for k, v in values.items()}).risk[0])


def shown_risk(window):
    risk = label(window, "risk")
    return risk.text(), risk.property("riskValue")


def test_widgets_follow_the_authors_order_names_and_labels(open_form, calc_file):
    window = open_form(calc_file)
    specs = window.session.inputs
    assert window.body.inputs.ids() == [s.id for s in specs]
    for spec in specs:
        widget = field(window, spec.id)
        assert widget.objectName() == spec.id
        assert widget.accessibleName() == spec.label
        assert isinstance(widget, QLineEdit if spec.kind == "number" else QComboBox)
    falls = field(window, "falls")
    assert [falls.itemText(i) for i in range(falls.count())] == [NOT_ANSWERED, "No", "Yes"]
    living = field(window, "living")
    assert living.itemData(3) == "nursing"
    assert living.itemText(3) == "Nursing home (résidence médicalisée)"


def test_typed_values_give_the_scored_risk(qtbot, open_form, calc_file):
    window = open_form(calc_file)
    type_into(qtbot, window, "age", "72")
    type_into(qtbot, window, "creatinine", "130")
    choose(window, "falls", "yes")
    assert shown_risk(window) == ("—", None)  # living still missing: no risk
    choose(window, "living", "assisted")
    values = {"age": 72.0, "creatinine": 130.0, "falls": True, "living": "assisted"}
    risk = expected(window, values)
    assert risk == pytest.approx(reference_risk(values, 4), abs=1e-12)
    assert shown_risk(window) == (format_percent(risk), risk)
    assert label(window, "riskInterval").text().startswith("95% interval ")
    assert "in 100 people like this" in label(window, "frequency").text()
    assert label(window, "cohortPosition").text().startswith("In the development data")


def test_unit_change_converts_and_shows_the_canonical_value(qtbot, open_form, calc_file):
    window = open_form(calc_file)
    type_into(qtbot, window, "age", "81")
    choose_unit(window, "creatinine", "mg/dL")
    type_into(qtbot, window, "creatinine", "1.6")
    choose(window, "falls", "no")
    choose(window, "living", "nursing")
    canonical = 1.6 * MG_DL
    assert label(window, "creatinine_canonical").text() == "= 141 µmol/L"
    risk = expected(window, {"age": 81.0, "creatinine": canonical, "falls": False,
                             "living": "nursing"})
    assert shown_risk(window) == (format_percent(risk), risk)
    choose_unit(window, "creatinine", "µmol/L")  # same text, now read in µmol/L: refused
    assert shown_risk(window) == ("—", None)
    assert label(window, "creatinine_canonical").text() == ""
    assert "mg/dL" in label(window, "creatinine_message").text()


def test_keyboard_only_entry_tab_and_enter_follow_the_authors_order(qtbot, open_form,
                                                                      calc_file):
    window = open_form(calc_file)
    app = QApplication.instance()
    qtbot.waitUntil(lambda: app.focusWidget() is field(window, "age"))
    qtbot.keyClicks(app.focusWidget(), "88")
    qtbot.keyClick(app.focusWidget(), Qt.Key.Key_Return)
    assert app.focusWidget() is field(window, "creatinine")
    qtbot.keyClicks(app.focusWidget(), "2.1")
    qtbot.keyClick(app.focusWidget(), Qt.Key.Key_Tab)
    assert app.focusWidget().objectName() == "creatinine_unit"
    qtbot.keyClick(app.focusWidget(), Qt.Key.Key_Down)  # µmol/L -> mg/dL
    qtbot.keyClick(app.focusWidget(), Qt.Key.Key_Tab)
    assert app.focusWidget() is field(window, "falls")
    qtbot.keyClicks(app.focusWidget(), "y")
    qtbot.keyClick(app.focusWidget(), Qt.Key.Key_Enter)
    assert app.focusWidget() is field(window, "living")
    qtbot.keyClicks(app.focusWidget(), "n")
    values = {"age": 88.0, "creatinine": 2.1 * MG_DL, "falls": True, "living": "nursing"}
    risk = expected(window, values)
    assert shown_risk(window) == (format_percent(risk), risk)


def test_enter_in_a_value_never_skips_or_reorders(qtbot, open_form, tmp_path):
    window = open_form(write_calculator(tmp_path, "wide.calc.json", n_inputs=8))
    app = QApplication.instance()
    qtbot.waitUntil(lambda: app.focusWidget() is field(window, "age"))
    order = []
    for _ in range(8):
        order.append(app.focusWidget().objectName())
        qtbot.keyClick(app.focusWidget(), Qt.Key.Key_Return)
    assert order == [s.id for s in window.session.inputs]


@pytest.mark.parametrize(
    "case",
    [
        ("age", "7O", "not_a_number", "has text after the number"),
        ("age", "72 years", "not_a_number", "has text after the number"),
        ("age", "1,5", "not_a_number", "1,5"),
        ("age", "12", "below_limits", "below the possible range"),
        ("age", "140", "above_limits", "above the possible range"),
        ("creatinine", "1.3", "check_unit", "did you mean 1.3 mg/dL"),
        ("age", "95", "extrapolation", "outside the range the model was developed on"),
    ],
)
def test_each_typed_message_appears_beside_its_input(qtbot, open_form, calc_file, case):
    input_id, text, code, words = case
    window = open_form(calc_file)
    type_into(qtbot, window, input_id, text)
    message = label(window, f"{input_id}_message")
    assert message.isVisible()
    assert words in message.text()
    shown = window.session.result().messages[input_id]
    assert [m.code for m in shown] == [code]
    assert shown[0].text in message.text()
    symbol = "▲" if CODES[code] == "warning" else "✖"
    assert message.text().startswith(symbol)
    assert message.property("state") == CODES[code]
    others = [i for i in window.body.inputs.ids() if i != input_id]
    assert all(not label(window, f"{i}_message").isVisible() for i in others)


def test_missing_is_quiet_until_a_field_is_emptied(qtbot, open_form, calc_file):
    window = open_form(calc_file)
    assert not label(window, "age_message").isVisible()
    assert "still needed: Age, Serum creatinine" in label(window, "riskStatus").text()
    type_into(qtbot, window, "age", "70")
    type_into(qtbot, window, "age", "")
    message = label(window, "age_message")
    assert message.isVisible()
    assert "Age" in message.text()
    assert message.property("state") == "note"


def test_every_message_class_is_shown_beside_its_input(open_form, calc_file):
    """Also the classes the form's own widgets cannot produce (unknown unit, not yes/no ...)."""
    window = open_form(calc_file)
    panel = window.body.inputs
    for code, severity in CODES.items():
        text = f"Message of class {code}."
        panel.show_view("creatinine", InputView((Message("creatinine", severity, code, text),)))
        panel._touched.add("creatinine")  # a missing value is shown once the field was edited
        panel.show_view("creatinine", InputView((Message("creatinine", severity, code, text),)))
        shown = label(window, "creatinine_message")
        assert shown.isVisible()
        assert text in shown.text()
        assert window.findChild(QLabel, "age_message").text() == ""


def test_extrapolated_risk_is_shown_with_its_flag(qtbot, open_form, calc_file):
    window = open_form(calc_file)
    type_into(qtbot, window, "age", "95")
    type_into(qtbot, window, "creatinine", "300")
    choose(window, "falls", "no")
    choose(window, "living", "home")
    risk = expected(window, {"age": 95.0, "creatinine": 300.0, "falls": False, "living": "home"})
    assert shown_risk(window) == (format_percent(risk), risk)
    flag = label(window, "riskExtrapolation")
    assert flag.isVisible()
    assert "EXTRAPOLATED" in flag.text()
    assert "Age, Serum creatinine" in flag.text()
    type_into(qtbot, window, "age", "70")
    type_into(qtbot, window, "creatinine", "100")
    assert not flag.isVisible()


def test_no_risk_while_a_value_is_refused_or_missing(qtbot, open_form, calc_file):
    window = open_form(calc_file)
    for input_id, value in (("falls", "yes"), ("living", "home")):
        choose(window, input_id, value)
    type_into(qtbot, window, "age", "70")
    type_into(qtbot, window, "creatinine", "100")
    assert shown_risk(window)[1] is not None
    type_into(qtbot, window, "creatinine", "100 umol")
    assert shown_risk(window) == ("—", None)
    assert not label(window, "riskInterval").isVisible()
    assert not label(window, "frequency").isVisible()
    assert "Serum creatinine" in label(window, "riskStatus").text()
    assert window.body.print_button.isEnabled() is False
    assert window.body.why.table.rowCount() == 0


def test_computation_on_each_change_takes_under_10_ms(qtbot, open_form, tmp_path):
    """The session's check and score on every keystroke (figures are drawn later, debounced)."""
    window = open_form(write_calculator(tmp_path, "wide.calc.json", n_inputs=25))
    session = window.session
    doc = make_calculator(25)
    for key, value in doc["test_vectors"][0]["values"].items():
        session.set_value(key, "yes" if value is True else "no" if value is False else str(value))
    times = []
    for i in range(60):
        session.set_value("age", str(50 + i % 30))
        start = time.perf_counter()
        result = session.result()
        times.append(time.perf_counter() - start)
        assert result.risk is not None
        assert math.isfinite(result.risk)
    times.sort()
    assert times[len(times) // 2] < 0.010, times[len(times) // 2]
    start = time.perf_counter()
    window.refresh()  # the whole on-screen update, without drawing figures
    assert time.perf_counter() - start < 0.1
