"""Patient values: one widget per input, in the author's order and groups.

* number: a :class:`QLineEdit` taking the text exactly as typed (the session
  parses it strictly) and, when the input has other units, a unit chooser and
  the value converted to the canonical unit;
* yes/no and choice: a :class:`QComboBox` starting on "not answered".

Each value widget's objectName is the input id and its accessibleName the
label; its unit chooser is ``<id>_unit``, the converted value ``<id>_canonical``
and the message line ``<id>_message``, right under it. Tab follows the author's
order (value, then its unit); Enter moves to the next input's value.
The panel never interprets a value: it emits what was typed or chosen.
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from dataclasses import dataclass

from PySide6.QtCore import QEvent, QObject, Qt, Signal
from PySide6.QtGui import QKeyEvent
from PySide6.QtWidgets import (
    QComboBox,
    QGridLayout,
    QLabel,
    QLineEdit,
    QVBoxLayout,
    QWidget,
)

from ..calc.inputs import InputSpec
from ..calc.messages import Message
from ..calc.numbers import format_number
from .look import SYMBOL, heading, set_state

__all__ = ["NOT_ANSWERED", "InputView", "InputsPanel"]

NOT_ANSWERED = "— not answered —"
_ENTER_KEYS = (Qt.Key.Key_Return, Qt.Key.Key_Enter)
_LABEL_WIDTH = 150  # pixels; longer labels wrap


@dataclass(frozen=True)
class InputView:
    """What to show beside one input (made by the window from the session's result)."""

    messages: tuple[Message, ...] = ()
    canonical: float | None = None  # the value in the canonical unit, when valid
    converted: bool = False  # True when entered in another unit than the canonical one


@dataclass
class _Row:
    spec: InputSpec
    value: QLineEdit | QComboBox
    unit: QComboBox | None
    canonical: QLabel
    message: QLabel


def _value_widget(spec: InputSpec) -> QLineEdit | QComboBox:
    widget: QLineEdit | QComboBox
    if spec.kind == "number":
        widget = QLineEdit()
        widget.setMaximumWidth(120)
        if spec.developed is not None:
            low = format_number(spec.developed.low, decimals=spec.decimals)
            high = format_number(spec.developed.high, decimals=spec.decimals)
            widget.setPlaceholderText(f"usual {low}–{high}")
    else:
        widget = QComboBox()
        widget.addItem(NOT_ANSWERED, None)
        if spec.kind == "yes_no":
            widget.addItem("No", "no")
            widget.addItem("Yes", "yes")
        else:
            for choice in spec.choices:
                widget.addItem(choice.label, choice.value)
    widget.setObjectName(spec.id)
    widget.setAccessibleName(spec.label)
    if spec.help:
        widget.setToolTip(spec.help)
        widget.setAccessibleDescription(spec.help)
    return widget


def _unit_widget(spec: InputSpec) -> QComboBox | None:
    if len(spec.units) < 2:
        return None
    chooser = QComboBox()
    for unit in spec.units:
        chooser.addItem(unit.unit, unit.unit)
    chooser.setObjectName(f"{spec.id}_unit")
    chooser.setAccessibleName(f"{spec.label}: unit")
    return chooser


def _message_text(messages: Sequence[Message]) -> tuple[str, str]:
    """The message line and its state; a missing value is a quiet note, not an alarm."""
    if not messages:
        return "", "ok"
    lines, state = [], "warning"
    for m in messages:
        if m.code == "missing":
            lines.append(f"{SYMBOL['info']} {m.text}")
            state = "note" if state != "error" else state
        elif m.severity == "error":
            lines.append(f"{SYMBOL['error']} {m.text}")
            state = "error"
        else:
            lines.append(f"{SYMBOL['warning']} {m.text}")
    return "\n".join(lines), state


class InputsPanel(QWidget):
    """All inputs of one calculator (objectName ``inputs``)."""

    value_edited = Signal(str, object)  # input id, raw text / choice value / None
    unit_changed = Signal(str, str)  # input id, unit name as in the calculator file

    def __init__(self, specs: Sequence[InputSpec], parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("inputs")
        self._rows: dict[str, _Row] = {}
        self._order: list[str] = []
        self._labels: list[QLabel] = []
        self._touched: set[str] = set()
        self.value_edited.connect(lambda edited, _raw: self._touched.add(edited))
        layout = QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        groups = _grouped(specs)
        ungrouped = "Patient values" if len(groups) == 1 else "Other values"
        for group, members in groups:
            layout.addWidget(heading(group or ungrouped))
            block = QWidget()
            grid = QGridLayout(block)
            grid.setContentsMargins(8, 0, 0, 4)
            grid.setColumnStretch(1, 1)
            grid.setHorizontalSpacing(8)
            for spec in members:
                self._add_row(grid, spec)
            layout.addWidget(block)
        layout.addStretch(1)
        self._align_labels()
        self._chain_focus()

    # --- building ---------------------------------------------------------------------

    def _add_row(self, grid: QGridLayout, spec: InputSpec) -> None:
        value = _value_widget(spec)
        unit = _unit_widget(spec)
        canonical = QLabel()
        canonical.setObjectName(f"{spec.id}_canonical")
        set_state(canonical, "note")
        message = QLabel()
        message.setObjectName(f"{spec.id}_message")
        message.setWordWrap(True)
        message.hide()
        label = QLabel(spec.label + ("" if spec.required else " (optional)"))
        label.setBuddy(value)
        label.setWordWrap(True)
        self._labels.append(label)
        row = grid.rowCount()
        grid.addWidget(label, row, 0, Qt.AlignmentFlag.AlignVCenter)
        line = QWidget()
        line_box = QGridLayout(line)
        line_box.setContentsMargins(0, 0, 0, 0)
        line_box.addWidget(value, 0, 0)
        if unit is not None:
            line_box.addWidget(unit, 0, 1)
        elif spec.unit:
            line_box.addWidget(QLabel(spec.unit), 0, 1)
        line_box.addWidget(canonical, 0, 2)
        line_box.setColumnStretch(3, 1)
        grid.addWidget(line, row, 1)
        grid.addWidget(message, row + 1, 0, 1, 2)
        self._rows[spec.id] = _Row(spec, value, unit, canonical, message)
        self._order.append(spec.id)
        self._connect(spec.id, value, unit)

    def _connect(self, input_id: str, value: QLineEdit | QComboBox, unit: QComboBox | None
                 ) -> None:
        if isinstance(value, QLineEdit):
            value.textEdited.connect(lambda text: self.value_edited.emit(input_id, text))
        else:
            value.activated.connect(
                lambda _i: self.value_edited.emit(input_id, value.currentData()))
        value.installEventFilter(self)
        if unit is not None:
            unit.activated.connect(lambda _i: self.unit_changed.emit(input_id, unit.currentData()))
            unit.installEventFilter(self)

    def _align_labels(self) -> None:
        """One label width for every group, so the fields line up (long labels wrap)."""
        widest = max((label.sizeHint().width() for label in self._labels), default=0)
        for label in self._labels:
            label.setFixedWidth(min(widest, _LABEL_WIDTH))

    def _chain_focus(self) -> None:
        chain: list[QWidget] = []
        for input_id in self._order:
            row = self._rows[input_id]
            chain.append(row.value)
            if row.unit is not None:
                chain.append(row.unit)
        for first, second in itertools.pairwise(chain):
            QWidget.setTabOrder(first, second)

    # --- keyboard ---------------------------------------------------------------------

    def eventFilter(self, watched: QObject, event: QEvent) -> bool:  # noqa: N802 (Qt override)
        if (event.type() == QEvent.Type.KeyPress and isinstance(event, QKeyEvent)
                and event.key() in _ENTER_KEYS and not _popup_open(watched)):
            self.focus_next_input(watched)
            return True
        return super().eventFilter(watched, event)

    def focus_next_input(self, current: QObject) -> None:
        """Move the focus to the value widget of the input after ``current``'s input."""
        ids = [i for i in self._order
               if current in (self._rows[i].value, self._rows[i].unit)]
        if not ids:
            return
        position = self._order.index(ids[0]) + 1
        if position < len(self._order):
            target = self._rows[self._order[position]].value
            target.setFocus(Qt.FocusReason.TabFocusReason)
            if isinstance(target, QLineEdit):
                target.selectAll()
        else:
            self.focusNextPrevChild(True)

    # --- reading and showing ----------------------------------------------------------

    def ids(self) -> list[str]:
        """Input ids in the author's order."""
        return list(self._order)

    def value_widget(self, input_id: str) -> QLineEdit | QComboBox:
        return self._rows[input_id].value

    def first_widget(self) -> QWidget | None:
        return self._rows[self._order[0]].value if self._order else None

    def show_view(self, input_id: str, view: InputView) -> None:
        """Show one input's messages and, after a unit change, its canonical value.

        "Missing" is shown beside an input only once it was edited and left empty;
        before that the estimate column lists what is still needed.
        """
        row = self._rows[input_id]
        messages = view.messages if input_id in self._touched else tuple(
            m for m in view.messages if m.code != "missing")
        text, state = _message_text(messages)
        row.message.setText(text)
        row.message.setVisible(bool(text))
        set_state(row.message, state)
        if isinstance(row.value, QLineEdit):
            shown = state if state in ("error", "warning") else "ok"
            set_state(row.value, shown)
        if view.converted and view.canonical is not None and row.spec.unit:
            number = format_number(view.canonical, decimals=row.spec.decimals)
            row.canonical.setText(f"= {number} {row.spec.unit}")
        else:
            row.canonical.clear()

    def enter(self, input_id: str, raw: str) -> None:
        """Put ``raw`` in an input as if typed or chosen (yes/no and choices by value or label).

        Raises KeyError for an unknown input and ValueError for an answer not offered.
        """
        widget = self._rows[input_id].value
        if isinstance(widget, QLineEdit):
            widget.setText(raw)
            self.value_edited.emit(input_id, raw)
            return
        wanted = raw.strip().casefold()
        for index in range(1, widget.count()):
            answers = (str(widget.itemData(index)), widget.itemText(index))
            if wanted in (a.casefold() for a in answers):
                widget.setCurrentIndex(index)
                self.value_edited.emit(input_id, widget.itemData(index))
                return
        offered = ", ".join(str(widget.itemData(i)) for i in range(1, widget.count()))
        raise ValueError(f"{raw!r} is not an answer of {input_id}; it offers: {offered}")

    def choose_unit(self, input_id: str, unit: str) -> None:
        """Choose a unit as the user would (ValueError when the input has no such unit)."""
        chooser = self._rows[input_id].unit
        index = -1 if chooser is None else chooser.findData(unit)
        if chooser is None or index < 0:
            units = [u.unit for u in self._rows[input_id].spec.units]
            raise ValueError(f"{input_id} has no unit {unit!r}; its units: {', '.join(units)}")
        chooser.setCurrentIndex(index)
        self.unit_changed.emit(input_id, unit)

    def clear_values(self) -> None:
        """Empty every value and put every unit back to the canonical one (no signals)."""
        self._touched.clear()
        for row in self._rows.values():
            if isinstance(row.value, QLineEdit):
                row.value.clear()
            else:
                row.value.setCurrentIndex(0)
            if row.unit is not None:
                row.unit.setCurrentIndex(0)
            self.show_view(row.spec.id, InputView())

    def set_enabled_values(self, enabled: bool) -> None:
        for row in self._rows.values():
            row.value.setEnabled(enabled)
            if row.unit is not None:
                row.unit.setEnabled(enabled)


def _popup_open(widget: QObject) -> bool:
    return isinstance(widget, QComboBox) and widget.view().isVisible()


def _grouped(specs: Sequence[InputSpec]) -> list[tuple[str | None, list[InputSpec]]]:
    """Consecutive inputs with the same group, in order (a group may appear twice)."""
    out: list[tuple[str | None, list[InputSpec]]] = []
    for spec in specs:
        if out and out[-1][0] == spec.group:
            out[-1][1].append(spec)
        else:
            out.append((spec.group, [spec]))
    return out
