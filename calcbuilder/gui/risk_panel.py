"""The estimate: risk with its interval, in natural frequencies, as icons, and in the cohort.

Read-out widgets (objectNames): ``riskQuestion`` (what is estimated), ``risk``
(the percentage, or a dash while no risk may be shown), ``riskInterval``,
``frequency`` ("About N in 100 people like this ..."), ``riskStatus`` (why no
risk is shown), ``riskExtrapolation`` (the flag shown with an extrapolated risk),
``cohortPosition`` (where it falls in the development cohort), ``cautions`` (the
calculator's own cautions, always shown) and the figures ``iconArray`` and
``riskPosition``. Every text comes from the session's :class:`PatientResult`.
"""

from __future__ import annotations

from typing import Any

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QLabel, QVBoxLayout, QWidget

from ..calc.evidence_sets import EvidenceSet
from ..clinic.session import ClinicSession, PatientResult
from ..clinic.threshold import format_percent
from .figures import FigureBox
from .look import SYMBOL, box, sized, state_label

__all__ = ["RiskPanel", "status_text"]

NO_RISK = "—"


def status_text(result: PatientResult, labels: dict[str, str]) -> str:
    """Why no risk is shown: what is missing and what was refused, by label."""
    missing, refused = [], []
    for input_id, messages in result.messages.items():
        label = labels.get(input_id, input_id)
        if any(m.code == "missing" for m in messages):
            missing.append(label)
        elif any(m.blocking for m in messages):
            refused.append(label)
    parts = []
    if missing:
        parts.append(f"still needed: {', '.join(missing)}")
    if refused:
        parts.append(f"not accepted (see the message beside it): {', '.join(refused)}")
    return "No estimate yet — " + "; ".join(parts) + "." if parts else "No estimate yet."


def _cohort_evidence(session: ClinicSession) -> EvidenceSet | None:
    """The evidence set the session places the risk in (the same one its sentence names)."""
    found = getattr(session, "cohort_evidence", None)  # requested public API
    if found is not None or hasattr(session, "cohort_evidence"):
        return found
    from ..clinic.session import _development_histogram  # until cohort_evidence exists

    return _development_histogram(session.calculator.evidence)


def _extrapolation_text(result: PatientResult, labels: dict[str, str]) -> str:
    names = ", ".join(labels.get(i, i) for i in result.extrapolated)
    return (f"{SYMBOL['warning']} EXTRAPOLATED: {names} "
            f"{'lies' if len(result.extrapolated) == 1 else 'lie'} outside the range the model "
            "was developed on, so this estimate is less reliable than usual.")


class RiskPanel(QWidget):
    """The estimate column (objectName ``riskPanel``)."""

    def __init__(self, session: ClinicSession, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("riskPanel")
        self._session = session
        about = session.calculator.about
        self._labels = {spec.id: spec.label for spec in session.inputs}
        self._outcome = f"{about.outcome} {about.horizon}".strip()
        self.question = state_label(f"Estimated risk of {self._outcome}", "ok", "riskQuestion")
        sized(self.question, 10.5, bold=True)
        self.risk = QLabel(NO_RISK)
        self.risk.setObjectName("risk")
        self.risk.setAccessibleName("Estimated risk")
        sized(self.risk, 24, bold=True)
        self.risk.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.interval = state_label("", "ok", "riskInterval")
        self.frequency = state_label("", "ok", "frequency")
        self.status = state_label("", "note", "riskStatus")
        self.extrapolation = state_label("", "warning", "riskExtrapolation")
        self.position = state_label("", "ok", "cohortPosition")
        self.cautions = state_label(self._cautions_text(), "ok", "cautions")
        box(self.extrapolation, "caution")
        box(self.cautions, "plain")
        self.icons = FigureBox("", name="iconArray", min_height=250, max_width=300)
        self.cohort = FigureBox("", name="riskPosition", min_height=170)
        column = QVBoxLayout(self)
        for widget in (self.question, self.risk, self.interval, self.frequency, self.status,
                       self.extrapolation, self.cautions, self.icons, self.position, self.cohort):
            column.addWidget(widget)
        column.addStretch(1)

    def _cautions_text(self) -> str:
        lines = [f"{SYMBOL['info']} {c}" for c in self._session.calculator.cautions]
        return "Cautions\n" + "\n".join(lines)

    def show_result(self, result: PatientResult) -> None:
        """Show the estimate, or why there is none (never a stale number)."""
        if result.risk is None:
            self._show_none(result)
            return
        self.risk.setText(format_percent(result.risk))
        self.risk.setProperty("riskValue", result.risk)
        self.interval.setText(self._interval_text(result))
        self.interval.setToolTip(result.interval_note or "")
        phrase = result.phrase or ""
        self.frequency.setText(f"{phrase[:1].upper()}{phrase[1:]} would have {self._outcome}, "
                               "by the model's estimate.")
        self.status.hide()
        for label in (self.interval, self.frequency):
            label.show()
        self.extrapolation.setText(_extrapolation_text(result, self._labels))
        self.extrapolation.setVisible(bool(result.extrapolated))
        sentence = self._session.cohort_sentence()
        self.position.setText(sentence or "")
        self.position.setVisible(bool(sentence))
        self._draw(result)

    def _show_none(self, result: PatientResult) -> None:
        self.risk.setText(NO_RISK)
        self.risk.setProperty("riskValue", None)
        self.status.setText(status_text(result, self._labels))
        self.status.show()
        for label in (self.interval, self.frequency, self.extrapolation, self.position):
            label.clear()
            label.hide()
        self.icons.set_builder(None, "")
        self.cohort.set_builder(None, "")
        self.icons.hide()
        self.cohort.hide()

    @staticmethod
    def _interval_text(result: PatientResult) -> str:
        if result.low is None or result.high is None:
            return result.interval_note or "No interval available."
        return f"95% interval {format_percent(result.low)} to {format_percent(result.high)}"

    def _draw(self, result: PatientResult) -> None:
        frequency = result.frequency
        synthetic = self._session.synthetic
        outcome = self._session.calculator.about.outcome
        if frequency is not None:
            n, total = frequency

            def icons() -> Any:
                from ..plots import icon_array_figure

                return icon_array_figure(n, total=total, outcome=outcome, synthetic=synthetic)

            self.icons.show()
            self.icons.set_builder(icons)
        self._draw_cohort(result.risk)

    def _draw_cohort(self, risk: float | None) -> None:
        evidence = _cohort_evidence(self._session)
        if risk is None or evidence is None:
            self.cohort.hide()
            return
        hist = evidence.raw["risk_histogram"]
        counts = [a + b for a, b in zip(hist["events"], hist["nonevents"], strict=True)]
        name = evidence.raw["dataset"]["name"]

        def build() -> Any:
            from ..plots import risk_position_figure

            return risk_position_figure(hist["edges"], counts, risk, cohort=name,
                                        synthetic=self._session.synthetic)

        self.cohort.show()
        self.cohort.set_builder(build)

    def flush(self) -> None:
        """Draw pending figures now (screenshots, tests)."""
        self.icons.flush()
        self.cohort.flush()
