"""Why this estimate: each input's contribution, largest first, and the equation on request.

``contributions`` is a table (input, value used, contribution, direction in
words and symbol); ``contributionsFigure`` draws the same numbers as bars;
``equationButton`` shows or hides ``equation``, the model written out in full.
The contributions come sorted from the session; nothing is computed here.
"""

from __future__ import annotations

from typing import Any

from PySide6.QtGui import QFont
from PySide6.QtWidgets import (
    QAbstractItemView,
    QHeaderView,
    QPlainTextEdit,
    QPushButton,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from ..clinic.session import ClinicSession, PatientResult
from .equation import equation_text
from .figures import FigureBox
from .look import state_label

__all__ = ["WhyPanel", "direction_text"]

_HEADINGS = ("Input", "Value used", "Contribution", "Effect on the estimate")


def direction_text(value: float) -> str:
    """The direction of a contribution in words, with a symbol (never colour alone)."""
    if value > 0:
        return "▲ raises"
    if value < 0:
        return "▼ lowers"
    return "● no change"


class WhyPanel(QWidget):
    """The 'why this estimate' tab (objectName ``whyPanel``)."""

    def __init__(self, session: ClinicSession, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("whyPanel")
        self._session = session
        model = session.calculator.model
        self._scale = "log-odds" if model.family == "logistic" else "log hazard"
        self.intro = state_label(self._intro(), "note", "whyIntro")
        self.table = QTableWidget(0, len(_HEADINGS))
        self.table.setObjectName("contributions")
        self.table.setHorizontalHeaderLabels(_HEADINGS)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.verticalHeader().hide()
        self.table.setWordWrap(True)
        header = self.table.horizontalHeader()
        header.setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
        for col in range(1, len(_HEADINGS)):
            header.setSectionResizeMode(col, QHeaderView.ResizeMode.ResizeToContents)
        self.figure = FigureBox("", name="contributionsFigure", min_height=200)
        self.equation_button = QPushButton("Show the equation")
        self.equation_button.setObjectName("equationButton")
        self.equation_button.setCheckable(True)
        self.equation = QPlainTextEdit()  # written on first request
        self.equation.setObjectName("equation")
        self.equation.setReadOnly(True)
        self.equation.setFont(QFont("DejaVu Sans Mono"))
        self.equation.setMinimumHeight(180)
        self.equation.hide()
        self.equation_button.toggled.connect(self._toggle_equation)
        box = QVBoxLayout(self)
        for widget in (self.intro, self.table, self.figure, self.equation_button, self.equation):
            box.addWidget(widget)
        box.addStretch(1)

    def _intro(self) -> str:
        scale = ("log-odds" if self._session.calculator.model.family == "logistic"
                 else "log hazard")
        return ("Each value below is compared with a reference patient: numbers at the middle "
                "of the range the model was developed on, 'no' for yes/no questions and the "
                "reference category for choices. A positive number means this patient's value "
                f"raises the estimate compared with the reference value ({scale} scale); "
                "larger numbers move it more. A contribution is not a cause: it only shows "
                "how the model's arithmetic arrived at this estimate.")

    def _toggle_equation(self, shown: bool) -> None:
        if shown and not self.equation.toPlainText():
            calc = self._session.calculator
            self.equation.setPlainText(equation_text(calc.model, calc.inputs))
        self.equation.setVisible(shown)
        self.equation_button.setText("Hide the equation" if shown else "Show the equation")

    def show_result(self, result: PatientResult) -> None:
        """Fill the table and the bars, or empty them while there is no estimate."""
        rows = result.contributions if result.risk is not None else ()
        used = {line.input_id: line.text for line in result.values_used}
        self.table.setRowCount(len(rows))
        for i, item in enumerate(rows):
            cells = (item.label, used.get(item.input_id, ""), f"{item.value:+.2f}".replace(
                "-", "−"), direction_text(item.value))
            for j, text in enumerate(cells):
                self.table.setItem(i, j, QTableWidgetItem(text))
        self.table.resizeRowsToContents()
        self.table.setFixedHeight(self.table.horizontalHeader().height()
                                  + sum(self.table.rowHeight(i) for i in range(len(rows))) + 4)
        if not rows:
            self.figure.set_builder(None, "The contributions appear with the estimate.")
            return
        labels = [c.label for c in rows]
        values = [c.value for c in rows]
        synthetic = self._session.synthetic
        xlabel = f"Contribution, {self._scale}"

        def build() -> Any:
            from ..plots import contributions_figure

            return contributions_figure(labels, values, xlabel=xlabel, synthetic=synthetic)

        self.figure.set_builder(build)

    def flush(self) -> None:
        self.figure.flush()
