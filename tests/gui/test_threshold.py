"""The decision threshold on the form: three entries that agree, and net benefit in words.

The fixture's external evidence set (the most trustworthy one, so the one the
form uses) has the model BELOW treat-all from about 1% to 18% and above both
treat-all and treat-none from about 19% to 50% (tests/fixtures_calc.py).
"""

from __future__ import annotations

import pytest
from PySide6.QtWidgets import QLineEdit

from calcbuilder.clinic.benefit import net_benefit_at, risk_versus_threshold
from calcbuilder.clinic.threshold import Threshold
from calcbuilder.gui.threshold_panel import parse_percent, parse_ratio, parse_willing

from .conftest import choose, label, type_into


def entries(window):
    names = ("threshold", "thresholdNumber", "thresholdRatio")
    return tuple(window.findChild(QLineEdit, n).text() for n in names)


def retype(qtbot, window, name, text):
    entry = window.findChild(QLineEdit, name)
    entry.setFocus()
    entry.selectAll()
    qtbot.keyClicks(entry, text)


def test_starts_at_the_authors_default(open_form, calc_file):
    window = open_form(calc_file)
    assert entries(window) == ("20", "5", "1 : 4")
    assert window.body.threshold.current() == Threshold(0.2)
    assert "from 5% to 40% reasonable" in label(window, "reasonableRange").text()


@pytest.mark.parametrize(
    "case",
    [
        ("threshold", "25", ("25", "4", "1 : 3")),
        ("threshold", "12.5%", ("12.5", "8", "1 : 7")),
        ("thresholdNumber", "10", ("10", "10", "1 : 9")),
        ("thresholdNumber", "6", ("16.7", "6", "1 : 5")),
        ("thresholdRatio", "1 : 4", ("20", "5", "1 : 4")),
        ("thresholdRatio", "1/3", ("25", "4", "1 : 3")),
        ("thresholdRatio", "3 : 2", ("60", "1.67", "1.5 : 1")),
    ],
)
def test_the_three_forms_stay_consistent(qtbot, open_form, calc_file, case):
    name, text, shown = case
    window = open_form(calc_file)
    retype(qtbot, window, name, text)
    threshold = window.body.threshold.current()
    assert threshold is not None
    assert window.session.threshold == threshold
    # the entry being typed keeps the text; the other two are rewritten from the same value
    others = [i for i, n in enumerate(("threshold", "thresholdNumber", "thresholdRatio"))
              if n != name]
    assert [entries(window)[i] for i in others] == [shown[i] for i in others]
    window.findChild(QLineEdit, name).editingFinished.emit()  # leaving the entry tidies it
    assert entries(window) == shown
    # and each shown form reads back as the same threshold, to the shown precision
    for reader, text_shown in zip((parse_percent, parse_willing, parse_ratio), shown,
                                  strict=True):
        assert reader(text_shown).pt == pytest.approx(threshold.pt, rel=0.01)


@pytest.mark.parametrize(("name", "text"), [
    ("threshold", "0"), ("threshold", "100"), ("threshold", "abc"),
    ("thresholdNumber", "1"), ("thresholdRatio", "1 to 4"), ("thresholdRatio", "0 : 4"),
])
def test_an_unusable_threshold_says_why_and_shows_no_benefit(qtbot, open_form, calc_file,
                                                               name, text):
    window = open_form(calc_file)
    retype(qtbot, window, name, text)
    assert window.body.threshold.current() is None
    message = label(window, "thresholdMessage")
    assert message.isVisible()
    assert message.text().startswith("✖")
    assert label(window, "netBenefit").text() == ""
    assert not label(window, "thresholdWarnings").isVisible()
    retype(qtbot, window, name, {"threshold": "30", "thresholdNumber": "3",
                                 "thresholdRatio": "1 : 2"}[name])
    assert not message.isVisible()
    assert label(window, "netBenefit").text() != ""


def benefit_texts(window):
    return (label(window, "netBenefit").text(), label(window, "thresholdWarnings").text(),
            label(window, "evidenceSource").text())


def test_net_benefit_statement_follows_the_threshold(qtbot, open_form, calc_file):
    window = open_form(calc_file)
    calc = window.session.calculator
    seen = {}
    for pct in ("10", "30", "60"):
        retype(qtbot, window, "threshold", pct)
        nb = net_benefit_at(calc, Threshold.from_percent(float(pct)))
        statement, warnings, source = benefit_texts(window)
        assert statement == "\n".join(nb.statements)
        assert warnings == "\n".join(f"▲ {w}" for w in nb.warnings)
        assert label(window, "thresholdWarnings").isVisible() == bool(nb.warnings)
        assert source == nb.source
        assert "Test Site B" in source
        assert "external validation" in source
        seen[pct] = (statement, warnings)
    # 10%: below treat-all -> says so, and warns that the model adds little
    assert "does not do better" in seen["10"][0]
    assert "over intervening for everyone" in seen["10"][1]
    # 30%: above both defaults -> fewer unnecessary interventions, no warning
    assert "fewer unnecessary interventions" in seen["30"][0]
    assert "finding" in seen["30"][0]
    assert seen["30"][1] == ""
    # 60%: outside the authors' range -> not covered by the evidence
    assert seen["60"][1].startswith("▲ Not covered by the evidence: 60% lies outside")


def test_patient_risk_is_set_against_the_threshold(qtbot, open_form, calc_file):
    window = open_form(calc_file)
    versus = label(window, "riskVersusThreshold")
    assert versus.text() == "No estimate yet, so it cannot be set against the threshold."
    type_into(qtbot, window, "age", "60")
    type_into(qtbot, window, "creatinine", "90")
    choose(window, "falls", "no")
    choose(window, "living", "home")
    result = window.session.result()
    for pct in ("2", "50"):
        retype(qtbot, window, "threshold", pct)
        t = Threshold.from_percent(float(pct))
        assert versus.text() == risk_versus_threshold(result.risk, t, result.low, result.high)
    assert " below the threshold" in versus.text()


def test_decision_curve_marks_threshold_and_patient(qtbot, open_form, calc_file):
    window = open_form(calc_file)
    type_into(qtbot, window, "age", "75")
    type_into(qtbot, window, "creatinine", "140")
    choose(window, "falls", "yes")
    choose(window, "living", "nursing")
    retype(qtbot, window, "threshold", "30")
    curve = window.body.threshold.curve
    curve.flush()
    canvas = curve.canvas
    assert canvas is not None
    texts = " ".join(t.get_text() for t in canvas.figure.findobj(
        match=lambda a: hasattr(a, "get_text")))
    assert "Threshold 30%" in texts
    risk = window.session.result().risk
    assert f"{risk * 100:.1f}%" in texts
    image = canvas.grab().toImage()
    assert image.width() > 300
    assert not image.isNull()
