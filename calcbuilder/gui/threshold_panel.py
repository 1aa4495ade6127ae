"""Decision threshold: three equivalent entries, where the estimate lies, and net benefit.

The threshold can be typed as a percentage (objectName ``threshold``), as the
number of people one would intervene for to reach one who would have the outcome
(``thresholdNumber``) or as a harm : benefit ratio (``thresholdRatio``). Editing
one rewrites the other two from the same :class:`~calcbuilder.clinic.threshold.Threshold`,
so they always agree. Below: the estimate against the threshold, net benefit in
plain words with the evidence set named, warnings, and the decision curve with the
threshold and this patient's risk marked. All wording comes from
:mod:`calcbuilder.clinic.benefit` and :mod:`calcbuilder.clinic.threshold`.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from typing import Any

from PySide6.QtCore import Signal
from PySide6.QtWidgets import QGridLayout, QLabel, QLineEdit, QVBoxLayout, QWidget

from ..calc.document import Calculator
from ..calc.numbers import parse_number
from ..clinic.benefit import NetBenefit, risk_versus_threshold
from ..clinic.session import ClinicSession
from ..clinic.threshold import Threshold, format_percent
from ..errors import CalcbuilderError
from .figures import FigureBox
from .look import SYMBOL, box, heading, set_state, state_label

__all__ = ["ThresholdPanel", "parse_percent", "parse_ratio", "parse_willing"]

_RATIO = re.compile(r"^\s*([^:/]+?)\s*[:/]\s*([^:/]+?)\s*$")


def parse_percent(text: str) -> Threshold:
    """``"15"``, ``"15%"`` or ``"12.5 %"`` -> the threshold 15% (strict numbers)."""
    return Threshold.from_percent(parse_number(text.strip().removesuffix("%")))


def parse_willing(text: str) -> Threshold:
    """``"7"`` -> the threshold 1/7."""
    return Threshold.from_number_willing(parse_number(text))


def parse_ratio(text: str) -> Threshold:
    """``"1 : 9"`` or ``"1/9"`` (harm : benefit) -> the threshold 10%."""
    match = _RATIO.match(text)
    if match is None:
        raise CalcbuilderError(
            f"type the ratio as harm : benefit, e.g. 1 : 9; got {text.strip()!r}")
    return Threshold.from_harm_benefit(parse_number(match[1]), parse_number(match[2]))


class ThresholdPanel(QWidget):
    """The decision-threshold tab (objectName ``thresholdPanel``)."""

    threshold_changed = Signal(object)  # Threshold, or None while the entry is invalid

    def __init__(self, session: ClinicSession, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("thresholdPanel")
        self._session = session
        self._calc = calc = session.calculator
        self._threshold: Threshold | None = None
        self._risk: tuple[float, float | None, float | None] | None = None
        self._benefit: NetBenefit | None = None
        self.percent = _entry("threshold", "Decision threshold, % risk")
        self.willing = _entry("thresholdNumber",
                              "Intervene for N people to reach 1 with the outcome")
        self.ratio = _entry("thresholdRatio", "Harm : benefit")
        self.entry_message = state_label("", "error", "thresholdMessage")
        self.meaning = state_label("", "note", "thresholdMeaning")
        self.range_note = state_label(_range_text(calc), "note", "reasonableRange")
        self.versus = state_label("", "ok", "riskVersusThreshold")
        self.benefit = state_label("", "ok", "netBenefit")
        self.source = state_label("", "note", "evidenceSource")
        self.warnings = state_label("", "ok", "thresholdWarnings")
        box(self.warnings, "caution")
        self.curve = FigureBox("The decision curve appears here.", name="decisionCurve",
                               min_height=330)
        self._lay_out()
        self._connect()
        self.set_threshold(session.threshold)

    def _lay_out(self) -> None:
        entries = QGridLayout()
        captions = ("Threshold, % risk", "or: intervene for N to reach 1", "or: harm : benefit")
        for column, (caption, entry) in enumerate(
                zip(captions, (self.percent, self.willing, self.ratio), strict=True)):
            label = QLabel(caption)
            label.setBuddy(entry)
            entries.addWidget(label, 0, column)
            entries.addWidget(entry, 1, column)
        entries.setColumnStretch(3, 1)
        box = QVBoxLayout(self)
        box.addWidget(heading("The threshold: three ways to say it"))
        box.addLayout(entries)
        for widget in (self.entry_message, self.meaning, self.range_note,
                       heading("This patient and the threshold"), self.versus,
                       heading("Deciding by the model at this threshold"), self.warnings,
                       self.benefit, self.source, self.curve):
            box.addWidget(widget)
        box.addStretch(1)

    def _connect(self) -> None:
        readers: tuple[tuple[QLineEdit, Callable[[str], Threshold]], ...] = (
            (self.percent, parse_percent), (self.willing, parse_willing),
            (self.ratio, parse_ratio))
        for entry, reader in readers:
            entry.textEdited.connect(lambda text, e=entry, r=reader: self._typed(e, r, text))
            entry.editingFinished.connect(self._tidy)

    # --- entries ----------------------------------------------------------------------

    def current(self) -> Threshold | None:
        """The threshold in force (None while the typed text gives none)."""
        return self._threshold

    def benefit_result(self) -> NetBenefit | None:
        return self._benefit

    def set_threshold(self, threshold: Threshold) -> None:
        """Set the threshold from outside (default, command line) and rewrite all entries."""
        self._apply(threshold, typed_in=None)

    def _typed(self, entry: QLineEdit, reader: Callable[[str], Threshold], text: str) -> None:
        try:
            threshold = reader(text)
        except (CalcbuilderError, ValueError) as exc:
            self._invalid(entry, str(exc))
            return
        self._apply(threshold, typed_in=entry)

    def _tidy(self) -> None:
        if self._threshold is not None:
            self._write_entries(self._threshold, skip=None)

    def _apply(self, threshold: Threshold, typed_in: QLineEdit | None) -> None:
        self._threshold = threshold
        self._write_entries(threshold, skip=typed_in)
        self.entry_message.hide()
        for entry in (self.percent, self.willing, self.ratio):
            set_state(entry, "ok")
        self.meaning.setText("\n".join(threshold.sentences()[1:]))
        self._session.set_threshold(threshold)
        self._benefit = self._session.benefit()
        self._show_benefit(self._benefit)
        self._show_versus()
        self._redraw()
        self.threshold_changed.emit(threshold)

    def _write_entries(self, threshold: Threshold, skip: QLineEdit | None) -> None:
        texts = ((self.percent, threshold.percent_text().removesuffix("%")),
                 (self.willing, threshold.number_text()), (self.ratio, threshold.ratio_text()))
        for entry, text in texts:
            if entry is not skip and entry.text() != text:
                entry.setText(text)

    def _invalid(self, entry: QLineEdit, reason: str) -> None:
        self._threshold = None
        self._benefit = None
        set_state(entry, "error")
        self.entry_message.setText(f"{SYMBOL['error']} {entry.accessibleName()}: {reason}")
        self.entry_message.show()
        for label in (self.meaning, self.versus, self.benefit, self.source):
            label.clear()
        self.warnings.hide()
        self.curve.set_builder(None, "No decision curve until the threshold is valid.")
        self.threshold_changed.emit(None)

    # --- what follows from the threshold ---------------------------------------------

    def _show_benefit(self, nb: NetBenefit) -> None:
        self.benefit.setText("\n".join(nb.statements))
        self.benefit.setVisible(bool(nb.statements))
        self.source.setText(nb.source)
        self.warnings.setText("\n".join(f"{SYMBOL['warning']} {w}" for w in nb.warnings))
        self.warnings.setVisible(bool(nb.warnings))

    def show_patient(self, risk: float | None, low: float | None = None,
                     high: float | None = None) -> None:
        """This patient's estimate (None while there is none)."""
        self._risk = None if risk is None else (risk, low, high)
        self._show_versus()
        self._redraw()

    def _show_versus(self) -> None:
        if self._threshold is None:
            return
        if self._risk is None:
            self.versus.setText("No estimate yet, so it cannot be set against the threshold.")
            set_state(self.versus, "note")
        else:
            self.versus.setText(risk_versus_threshold(self._risk[0], self._threshold,
                                                      self._risk[1], self._risk[2]))
            set_state(self.versus, "ok")

    def _redraw(self) -> None:
        nb, threshold = self._benefit, self._threshold
        if nb is None or nb.evidence is None or threshold is None:
            self.curve.set_builder(None, "This calculator holds no decision curve.")
            return
        curve = nb.evidence.raw["decision_curve"]
        risk = None if self._risk is None else self._risk[0]
        decision = self._calc.decision
        synthetic = self._calc.about.synthetic
        title = f"Net benefit in {nb.evidence.label}"

        def build() -> Any:
            from ..plots import decision_curve_figure

            return decision_curve_figure(
                curve["thresholds"], curve["model"], curve["treat_all"],
                model_low=curve.get("model_low"), model_high=curve.get("model_high"),
                reasonable_range=decision.reasonable_range, threshold=threshold.pt,
                patient_risk=risk, label="Deciding by the model", synthetic=synthetic,
                title=title)

        self.curve.set_builder(build)


def _entry(name: str, accessible: str) -> QLineEdit:
    entry = QLineEdit()
    entry.setObjectName(name)
    entry.setAccessibleName(accessible)
    entry.setMaximumWidth(130)
    return entry


def _range_text(calc: Calculator) -> str:
    low, high = calc.decision.reasonable_range
    text = (f"The authors consider thresholds from {format_percent(low)} to "
            f"{format_percent(high)} reasonable for this decision.")
    return f"{text} {calc.decision.rationale}".strip()
