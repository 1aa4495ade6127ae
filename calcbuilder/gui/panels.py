"""The form body: three columns (values, estimate, sections) and the action bar.

Kept apart from the window so that :mod:`calcbuilder.gui.app` only wires signals.
"""

from __future__ import annotations

from PySide6.QtCore import QEvent, QObject, Qt, QTimer
from PySide6.QtGui import QResizeEvent
from PySide6.QtWidgets import (
    QFrame,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QScrollArea,
    QSplitter,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from ..clinic.session import ClinicSession, PatientResult
from .evidence_panel import EvidencePanel
from .inputs_panel import InputsPanel, InputView
from .look import set_state, sized
from .risk_panel import RiskPanel
from .threshold_panel import ThresholdPanel
from .why_panel import WhyPanel

__all__ = ["FormBody", "InputView", "welcome_label"]


def welcome_label() -> QLabel:
    """The page shown before a calculator is open (also the drop target's text)."""
    label = QLabel("Open a calculator file (*.calc.json) with File ▸ Open,\n"
                   "or drop the file on this window.")
    label.setObjectName("welcome")
    label.setAlignment(Qt.AlignmentFlag.AlignCenter)
    label.setWordWrap(True)
    set_state(label, "note")
    sized(label, 12)
    return label


class _FitScrollArea(QScrollArea):
    """A vertical scroll area that gives its content the height its width needs.

    Qt's scroll area squeezes a resizable widget into the viewport even when its
    layout needs more height for the width (figures that keep their proportions);
    this one sets the content's minimum height from the layout's height-for-width
    on every resize and layout change, so figures keep their shape and the area scrolls.
    """

    def __init__(self) -> None:
        super().__init__()
        self._refit = QTimer(self)  # a child: it dies with the area, never fires after
        self._refit.setSingleShot(True)
        self._refit.setInterval(0)
        self._refit.timeout.connect(self.fit)

    def resizeEvent(self, event: QResizeEvent) -> None:  # noqa: N802 (Qt override)
        super().resizeEvent(event)
        self.fit()

    def eventFilter(self, watched: QObject, event: QEvent) -> bool:  # noqa: N802 (Qt override)
        if watched is self.widget() and event.type() == QEvent.Type.LayoutRequest:
            self._refit.start()
        return super().eventFilter(watched, event)

    def fit(self) -> None:
        content = self.widget()
        layout = content.layout() if content is not None else None
        if content is None or layout is None or not layout.hasHeightForWidth():
            return
        needed = layout.totalHeightForWidth(self.viewport().width())
        if content.minimumHeight() != needed:
            content.setMinimumHeight(needed)


def _scroll(widget: QWidget, name: str) -> QScrollArea:
    area = _FitScrollArea()
    area.setObjectName(name)
    widget.installEventFilter(area)
    area.setWidget(widget)
    area.setWidgetResizable(True)
    area.setFrameShape(QFrame.Shape.NoFrame)
    area.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
    return area


def _button(text: str, name: str, tip: str) -> QPushButton:
    button = QPushButton(text)
    button.setObjectName(name)
    button.setToolTip(tip)
    return button


class FormBody(QWidget):
    """Everything under the header for one open calculator (objectName ``formBody``)."""

    def __init__(self, session: ClinicSession, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("formBody")
        self.patient_ref = QLineEdit()
        self.patient_ref.setObjectName("patientRef")
        self.patient_ref.setAccessibleName("Patient reference (printed on the sheet, never stored)")
        self.patient_ref.setPlaceholderText("optional; printed on the sheet, never stored")
        self.inputs = InputsPanel(session.inputs)
        self.risk = RiskPanel(session)
        self.threshold = ThresholdPanel(session)
        self.why = WhyPanel(session)
        self.evidence = EvidencePanel(session)
        self.print_button = _button("Print risk sheet…", "printButton",
                                    "Print the one-page risk sheet for the discussion")
        self.save_button = _button("Save risk sheet as PDF…", "saveButton",
                                   "Save the risk sheet where you choose")
        self.clear_button = _button("Clear patient values", "clearButton",
                                    "Wipe every value and the patient reference")
        self.about_button = _button("About this calculator", "aboutButton",
                                    "Who made it, its version, signature and review date")
        box = QVBoxLayout(self)
        box.setContentsMargins(6, 6, 6, 6)
        box.addWidget(self._columns(), 1)
        box.addWidget(self._action_bar())
        QWidget.setTabOrder(self.patient_ref, self.inputs.first_widget() or self.patient_ref)

    def _columns(self) -> QSplitter:
        left = QWidget()
        left_box = QVBoxLayout(left)
        ref_row = QHBoxLayout()
        ref_label = QLabel("Patient reference")
        ref_label.setBuddy(self.patient_ref)
        ref_row.addWidget(ref_label)
        ref_row.addWidget(self.patient_ref, 1)
        left_box.addLayout(ref_row)
        left_box.addWidget(self.inputs, 1)
        sections = QTabWidget()
        sections.setObjectName("sections")
        sections.addTab(_scroll(self.threshold, "thresholdArea"), "Decision threshold")
        sections.addTab(_scroll(self.why, "whyArea"), "Why this estimate")
        sections.addTab(_scroll(self.evidence, "evidenceArea"), "Evidence")
        self.sections = sections
        columns = QSplitter(Qt.Orientation.Horizontal)
        columns.setObjectName("columns")
        columns.addWidget(_scroll(left, "inputsArea"))
        columns.addWidget(_scroll(self.risk, "riskArea"))
        columns.addWidget(sections)
        columns.setSizes([450, 380, 530])
        columns.setChildrenCollapsible(False)
        return columns

    def _action_bar(self) -> QWidget:
        bar = QWidget()
        bar.setObjectName("actionBar")
        row = QHBoxLayout(bar)
        row.setContentsMargins(0, 4, 0, 0)
        for button in (self.print_button, self.save_button, self.clear_button):
            row.addWidget(button)
        row.addStretch(1)
        row.addWidget(self.about_button)
        return bar

    def show_result(self, result: PatientResult) -> None:
        """Show one result in every panel that depends on the patient."""
        self.risk.show_result(result)
        self.why.show_result(result)
        self.threshold.show_patient(result.risk, result.low, result.high)
        ready = result.risk is not None
        self.print_button.setEnabled(ready)
        self.save_button.setEnabled(ready)

    def clear(self) -> None:
        self.inputs.clear_values()
        self.patient_ref.clear()

    def flush(self) -> None:
        for panel in (self.risk, self.threshold.curve, self.why, self.evidence):
            panel.flush()
