"""Step 5 page: the default decision threshold, the reasonable range and why, named risk bands.

A view over :class:`calcbuilder.authoring.DecisionStep`. While the author types,
the decision curve of the most trustworthy evidence set so far (the clinic
form's own choice: :func:`calcbuilder.calc.evidence_sets.most_trustworthy`) is
redrawn with the threshold and the range marked, and the stored net benefit at
the threshold is shown beside it.
"""

from __future__ import annotations

from typing import Any

from PySide6.QtWidgets import (
    QGridLayout,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QVBoxLayout,
    QWidget,
)

from ...authoring.problems import route
from ..figures import FigureBox
from .host import Host
from .widgets import (
    FieldSet,
    ProblemBox,
    clear_layout,
    grid_row,
    note,
    page_scroll,
    plain_text,
    section,
)

__all__ = ["DecisionPage", "trusted_set"]


def trusted_set(document: dict[str, Any] | None) -> dict[str, Any] | None:
    """The evidence set the clinic form would take the decision curve from (None before fitting)."""
    if not document:
        return None
    from ...calc.document import Calculator
    from ...calc.evidence_sets import most_trustworthy

    calc = Calculator.from_dict(document)
    found = most_trustworthy(calc.evidence, recalibrated=calc.model.recalibration is not None)
    return None if found is None else found.to_dict()


def _left_aligned(widget: QWidget) -> QHBoxLayout:
    row = QHBoxLayout()
    row.addWidget(widget)
    row.addStretch(1)
    return row


class DecisionPage(QWidget):
    """Step 5 (objectName ``decisionPage``)."""

    step = "decision"

    def __init__(self, host: Host) -> None:
        super().__init__()
        self.setObjectName("decisionPage")
        self.host = host
        self.fields = FieldSet()
        self._filling = False
        self._evidence: dict[str, Any] | None = None
        inner = QWidget()
        col = QVBoxLayout(inner)
        col.addWidget(section("Step 5 · Decision"))
        col.addWidget(note("Risks as proportions: 0.1 means 10%. The clinic form starts at the "
                           "default threshold and warns outside the reasonable range."))
        self.problems = ProblemBox("decisionProblems")
        col.addWidget(self.problems)
        grid = QGridLayout()
        self.edits: dict[str, QLineEdit] = {}
        row = 0
        for attr, key, text in (
                ("default_threshold", "decision.default_threshold", "&Default threshold"),
                ("range_low", "decision.reasonable_range", "Reasonable range from (&low)"),
                ("range_high", "decision.reasonable_range", "Reasonable range to (&high)")):
            edit = QLineEdit()
            edit.setObjectName(f"decision.{attr}")
            edit.textEdited.connect(lambda t, a=attr: self._set(a, t))
            self.edits[attr] = edit
            message = self.fields.add(key if attr != "range_high" else key + "[#2]", edit,
                                      text.replace("&", ""))
            row = grid_row(grid, row, text, edit, message)
        self.rationale = plain_text("decision.rationale", "Why this range", 3)
        self.rationale.textChanged.connect(self._rationale)
        grid_row(grid, row, "&Why this range (rationale)", self.rationale,
                 self.fields.add("decision.rationale", self.rationale))
        left = self._left(grid)
        right = QVBoxLayout()
        right.addWidget(section("Decision curve with the threshold"))
        self.curve = FigureBox("The decision curve appears once the model is fitted (step 3).",
                               name="decisionPreview", min_height=200, max_width=900)
        right.addWidget(self.curve)
        self.numbers = QLabel("")
        self.numbers.setObjectName("decisionNumbers")
        self.numbers.setWordWrap(True)
        right.addWidget(self.numbers)
        right.addStretch(1)
        both = QHBoxLayout()
        both.addLayout(left, 1)
        both.addLayout(right, 1)
        col.addLayout(both)
        col.addStretch(1)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(0, 0, 0, 0)
        outer.addWidget(page_scroll(inner, "decisionScroll"))

    def _left(self, grid: QGridLayout) -> QVBoxLayout:
        """The fields and the risk bands."""
        left = QVBoxLayout()
        left.addLayout(grid)
        left.addWidget(section("Named risk bands (optional)"))
        left.addWidget(note("Each band ends at its upper risk; the last ends at 1."))
        left.addWidget(self.fields.add("decision.bands", None))
        self.band_box = QVBoxLayout()
        left.addLayout(self.band_box)
        add = QPushButton("Add a risk &band")
        add.setObjectName("addBand")
        add.clicked.connect(self._add_band)
        left.addLayout(_left_aligned(add))
        left.addStretch(1)
        return left

    # -- edits ----------------------------------------------------------------------------------

    def _set(self, attr: str, value: str) -> None:
        if not self._filling:
            setattr(self.host.ws.decision, attr, value)
            self.host.changed()
            self.redraw()

    def _rationale(self) -> None:
        self._set("rationale", self.rationale.toPlainText())

    def _add_band(self) -> None:
        self.host.ws.decision.bands.append(("", ""))
        self.host.changed()
        self._fill_bands()

    def _band(self, k: int, label: str | None = None, upper: str | None = None) -> None:
        old = self.host.ws.decision.bands[k]
        self.host.ws.decision.bands[k] = (old[0] if label is None else label,
                                          old[1] if upper is None else upper)
        self.host.changed()

    def _remove_band(self, k: int) -> None:
        del self.host.ws.decision.bands[k]
        self.host.changed()
        self._fill_bands()

    # -- showing ----------------------------------------------------------------------------------

    def refresh(self) -> None:
        d = self.host.ws.decision
        self._filling = True
        try:
            for attr, edit in self.edits.items():
                if edit.text() != getattr(d, attr):
                    edit.setText(getattr(d, attr))
            if self.rationale.toPlainText() != d.rationale:
                self.rationale.setPlainText(d.rationale)
        finally:
            self._filling = False
        self._fill_bands()
        self._evidence = trusted_set(self.host.ws.assess.document)
        self.redraw()

    def _fill_bands(self) -> None:
        clear_layout(self.band_box)
        self.fields.remove_prefix("decision.bands[")
        for k, (label, upper) in enumerate(self.host.ws.decision.bands):
            holder = QWidget()
            row = QHBoxLayout(holder)
            row.setContentsMargins(0, 0, 0, 0)
            name, top = QLineEdit(label), QLineEdit(upper)
            name.setObjectName(f"band_{k + 1}_label")
            name.setAccessibleName(f"Band {k + 1} name")
            name.setPlaceholderText("name, e.g. lower")
            top.setObjectName(f"band_{k + 1}_upper")
            top.setAccessibleName(f"Band {k + 1} upper risk")
            top.setPlaceholderText("upper risk, e.g. 0.1")
            name.textEdited.connect(lambda t, k=k: self._band(k, label=t))
            top.textEdited.connect(lambda t, k=k: self._band(k, upper=t))
            remove = QPushButton(f"Remove band {k + 1}")
            remove.setObjectName(f"removeBand_{k + 1}")
            remove.clicked.connect(lambda _=False, k=k: self._remove_band(k))
            message = self.fields.add(f"decision.bands[#{k + 1}]", name)
            for w in (name, top, remove):
                row.addWidget(w)
            self.band_box.addWidget(holder)
            self.band_box.addWidget(message)

    def redraw(self) -> None:
        """The decision curve with the threshold and range as typed (where they read)."""
        ev = self._evidence
        threshold, span = self.host.ws.decision.marks()
        if ev is None or not ev.get("decision_curve"):
            self.curve.set_builder(None)
            self.numbers.clear()
            return
        dc = ev["decision_curve"]
        synthetic = self.host.ws.about.synthetic
        text = f"From: {ev['label']}."
        if threshold is not None:
            t = dc["thresholds"]
            k = min(range(len(t)), key=lambda i: abs(t[i] - threshold))
            text += (f" Net benefit per 100 patients at {t[k]:.0%}: deciding by the model "
                     f"{dc['model'][k] * 100:.2f}, treating everyone "
                     f"{dc['treat_all'][k] * 100:.2f}, treating no one 0.")
        self.numbers.setText(text)

        def build() -> Any:
            from ...plots import decision_curve_figure

            return decision_curve_figure(
                dc["thresholds"], dc["model"], dc["treat_all"], model_low=dc.get("model_low"),
                model_high=dc.get("model_high"), reasonable_range=span, threshold=threshold,
                label="Model", show_all_thresholds=True, synthetic=synthetic,
                title=f"Decision curve: {ev['label']}")
        self.curve.set_builder(build)

    def show_problems(self, problems: list[str]) -> None:
        routed = route(problems, self.fields.keys, self.host.ws.inputs.ids)
        self.fields.show(routed)
        self.problems.show_problems(routed.get("", []))

    def flush(self) -> None:
        self.curve.flush()
