"""One predictor on the Inputs page: every field of its recipe entry, each with its message line.

A view over one :class:`calcbuilder.authoring.InputDraft`: typing writes the text
back to the draft (the recipe judges it); rows that do not apply to the input's
kind are hidden. Field keys are ``inputs[#k].<field>`` (k counted from 1), so the
recipe's messages land beside the field they are about.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QGridLayout,
    QGroupBox,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPlainTextEdit,
    QPushButton,
    QWidget,
)

from ...authoring.inputs_step import KINDS, TRANSFORM_SETTINGS, AltUnitDraft, InputDraft
from ...authoring.problems import entry_key
from ...evidence.recipe import KIND_TRANSFORMS
from .widgets import FieldSet, grid_row, note, plain_text

__all__ = ["InputCard", "alt_units_text", "parse_alt_units", "parse_choices"]

KIND_WORDS = {"number": "Number", "yes_no": "Yes / no", "choice": "Choice"}
TRANSFORM_WORDS = {"linear": "linear", "log": "log(x + shift)", "sqrt": "square root",
                   "power": "power", "rcs": "restricted cubic spline", "hinges": "linear spline "
                   "(hinges)", "indicator": "indicator", "levels": "one term per level"}
NUMBER_ROWS = ("unit", "alt_units", "decimals", "limits", "developed", "truncate")


def alt_units_text(units: list[AltUnitDraft]) -> str:
    """``mg/dL = 88.42; degF = 0.5556 + -17.78`` (value x factor + offset = canonical)."""
    parts = []
    for u in units:
        part = f"{u.unit} = {u.factor}"
        if u.offset.strip():
            part += f" + {u.offset}"
        parts.append(part)
    return "; ".join(parts)


def parse_alt_units(text: str) -> list[AltUnitDraft]:
    """Read :func:`alt_units_text`; pieces that do not fit are kept for the recipe to judge."""
    out = []
    for piece in (p.strip() for p in text.split(";")):
        if not piece:
            continue
        unit, _, rest = piece.partition("=")
        factor, _, offset = rest.partition("+")
        out.append(AltUnitDraft(unit.strip(), factor.strip(), offset.strip()))
    return out


def parse_choices(text: str) -> list[tuple[str, str]]:
    """One choice per line, ``value = label`` (label optional)."""
    out = []
    for line in text.splitlines():
        if line.strip():
            value, _, label = line.partition("=")
            out.append((value.strip(), label.strip() or value.strip()))
    return out


class InputCard(QGroupBox):
    """The fields of the draft at ``index`` (objectName ``input_<k>``, k from 1)."""

    def __init__(self, index: int, draft: InputDraft, columns: list[str], fields: FieldSet, *,
                 changed: Callable[[], None], move: Callable[[int, int], None],
                 developed: Callable[[InputDraft], tuple[str, str]]) -> None:
        super().__init__(f"Input {index + 1}: {draft.label or draft.id}")
        self.setObjectName(f"input_{index + 1}")
        self.index, self.draft, self.fields = index, draft, fields
        self._changed, self._developed = changed, developed
        self.key = entry_key(index)
        self.rows: dict[str, list[QWidget]] = {}
        self.edits: dict[str, QWidget] = {}
        grid = QGridLayout(self)
        grid.setColumnStretch(1, 1)
        grid.setColumnStretch(3, 1)
        self._grid, self._row = grid, 0
        self.entry_message = fields.add(self.key, None)
        grid.addWidget(self.entry_message, 0, 0, 1, 4)
        self._row = 1
        self._pair(("id", "Input &id", self._line("id")),
                   ("label", "&Label on the form", self._line("label")))
        self._pair(("column", "Data colu&mn", self._column_combo(columns)),
                   ("kind", "&Kind", self._kind_combo()))
        self._pair(("unit", "&Unit", self._line("unit")),
                   ("decimals", "&Decimals shown", self._line("decimals")))
        self._single("alt_units", "&Alternative units (unit = factor [+ offset]; "
                     "separate with ;)", self._alt_units())
        self._single("limits", "&Hard limits (refused outside)", self._range("limit"))
        self._single("developed", "Developed &range (warned outside; from the data "
                     "unless edited)", self._developed_row())
        self._single("truncate", "&Truncate before transforming (optional)",
                     self._range("truncate"))
        self._single("transform", "Trans&form", self._transform_row())
        self._single("choices", "&Choices, one per line: value = label", self._choices())
        self._pair(("yes", "Data values meaning &yes (comma-separated)", self._line("yes")),
                   ("no", "Data values meaning &no", self._line("no")))
        self._pair(("group", "&Group on the form", self._line("group")),
                   ("help", "&Help text", self._line("help")))
        self._single("required", "", self._required())
        self._buttons(move)
        self.show_kind()

    # -- rows -----------------------------------------------------------------------------------

    def _line(self, attr: str) -> QLineEdit:
        edit = QLineEdit(str(getattr(self.draft, attr)))
        edit.setObjectName(f"{self.key}.{attr}")
        edit.textEdited.connect(lambda text, a=attr: self._set(a, text))
        self.edits[attr] = edit
        return edit

    def _set(self, attr: str, value: Any) -> None:
        setattr(self.draft, attr, value)
        if attr in ("label", "id"):
            self.setTitle(f"Input {self.index + 1}: {self.draft.label or self.draft.id}")
        self._changed()

    def _place(self, key: str, text: str, widget: QWidget, column: int, span: int) -> None:
        message = self.fields.add(f"{self.key}.{key}", widget, f"Input {self.index + 1} "
                                  f"{text.replace('&', '')}")
        before = self._grid.count()
        grid_row(self._grid, self._row, text, widget, message, column=column, span=span)
        items = (self._grid.itemAt(i) for i in range(before, self._grid.count()))
        self.rows[key] = [w for item in items if item is not None
                          and (w := item.widget()) is not None]

    def _pair(self, left: tuple[str, str, QWidget], right: tuple[str, str, QWidget]) -> None:
        self._place(*left, 0, 1)
        self._place(*right, 2, 1)
        self._row += 1

    def _single(self, key: str, text: str, widget: QWidget) -> None:
        self._place(key, text, widget, 0, 3)
        self._row += 1

    def _column_combo(self, columns: list[str]) -> QComboBox:
        combo = QComboBox()
        combo.setObjectName(f"{self.key}.column")
        for column in columns:
            combo.addItem(column, column)
        if combo.findData(self.draft.column) < 0:
            combo.addItem(self.draft.column, self.draft.column)
        combo.setCurrentIndex(combo.findData(self.draft.column))
        combo.activated.connect(lambda i: self._set("column", combo.itemData(i)))
        return combo

    def _kind_combo(self) -> QComboBox:
        combo = QComboBox()
        combo.setObjectName(f"{self.key}.kind")
        for kind in KINDS:
            combo.addItem(KIND_WORDS[kind], kind)
        combo.setCurrentIndex(combo.findData(self.draft.kind))
        combo.activated.connect(lambda i: self._kind(combo.itemData(i)))
        return combo

    def _kind(self, kind: str) -> None:
        self.draft.kind = kind
        if self.draft.transform and self.draft.transform not in KIND_TRANSFORMS[kind]:
            self.draft.transform = ""
        self.show_kind()
        self._changed()

    def _alt_units(self) -> QLineEdit:
        edit = QLineEdit(alt_units_text(self.draft.alt_units))
        edit.setObjectName(f"{self.key}.alt_units")
        edit.setPlaceholderText("e.g. mg/dL = 88.42")
        edit.textEdited.connect(lambda t: self._set("alt_units", parse_alt_units(t)))
        self.edits["alt_units"] = edit
        return edit

    def _range(self, prefix: str) -> QWidget:
        holder = QWidget()
        row = QHBoxLayout(holder)
        row.setContentsMargins(0, 0, 0, 0)
        for end, word in (("low", "lowest"), ("high", "highest")):
            edit = self._line(f"{prefix}_{end}")
            edit.setAccessibleName(f"Input {self.index + 1} {prefix} {word}")
            edit.setPlaceholderText(word)
            row.addWidget(edit)
            if end == "low":
                holder.setFocusProxy(edit)
        return holder

    def _developed_row(self) -> QWidget:
        holder = QWidget()
        row = QHBoxLayout(holder)
        row.setContentsMargins(0, 0, 0, 0)
        for end, word in (("low", "lowest"), ("high", "highest")):
            edit = QLineEdit()
            edit.setObjectName(f"{self.key}.developed_{end}")
            edit.setAccessibleName(f"Input {self.index + 1} developed range {word}")
            edit.textEdited.connect(self._developed_edited)
            self.edits[f"developed_{end}"] = edit
            row.addWidget(edit)
            if end == "low":
                holder.setFocusProxy(edit)
        reset = QPushButton("Use the data's range")
        reset.setObjectName(f"{self.key}.developed_reset")
        reset.clicked.connect(self._developed_reset)
        row.addWidget(reset)
        self.refresh_developed()
        return holder

    def _developed_edited(self) -> None:
        d = self.draft
        d.developed_low = self.edits["developed_low"].text()  # type: ignore[attr-defined]
        d.developed_high = self.edits["developed_high"].text()  # type: ignore[attr-defined]
        d.developed_edited = True
        self._changed()

    def _developed_reset(self) -> None:
        self.draft.developed_edited = False
        self.draft.developed_low = self.draft.developed_high = ""
        self.refresh_developed()
        self._changed()

    def refresh_developed(self) -> None:
        """Show the developed range in force (the author's, else the data's)."""
        low, high = self._developed(self.draft)
        for end, text in (("low", low), ("high", high)):
            edit = self.edits[f"developed_{end}"]
            assert isinstance(edit, QLineEdit)
            if not edit.hasFocus() and edit.text() != text:
                edit.setText(text)

    def _transform_row(self) -> QWidget:
        holder = QWidget()
        row = QHBoxLayout(holder)
        row.setContentsMargins(0, 0, 0, 0)
        self.transform = QComboBox()
        self.transform.setObjectName(f"{self.key}.transform")
        self.transform.setAccessibleName(f"Input {self.index + 1} transform")
        holder.setFocusProxy(self.transform)
        self.transform.activated.connect(self._transform_chosen)
        row.addWidget(self.transform, 1)
        self.settings: dict[str, tuple[QLabel, QWidget]] = {}
        for attr, word, hint in (("knots", "knots", "a count (3-7) or values"),
                                 ("shift", "shift", "e.g. 1"), ("exponent", "exponent", "e.g. 2"),
                                 ("reference", "reference", "reference level"),
                                 ("level", "level", "the level that counts")):
            label = QLabel(f"{word}:")
            edit = self._line(attr)
            label.setBuddy(edit)
            edit.setPlaceholderText(hint)
            edit.setAccessibleName(f"Input {self.index + 1} transform {word}")
            self.settings[attr] = (label, edit)
            row.addWidget(label)
            row.addWidget(edit, 1)
        return holder

    def _transform_chosen(self, index: int) -> None:
        self.draft.transform = self.transform.itemData(index)
        self._show_settings()
        self._changed()

    def _choices(self) -> QPlainTextEdit:
        edit = plain_text(f"{self.key}.choices", f"Input {self.index + 1} choices", 3)
        edit.setPlainText("\n".join(f"{v} = {lab}" for v, lab in self.draft.choices))
        edit.textChanged.connect(lambda: self._set("choices", parse_choices(
            edit.toPlainText())))
        return edit

    def _required(self) -> QCheckBox:
        box = QCheckBox("Required on the form (no risk without it)")
        box.setObjectName(f"{self.key}.required")
        box.setChecked(self.draft.required)
        box.toggled.connect(lambda on: self._set("required", on))
        return box

    def _buttons(self, move: Callable[[int, int], None]) -> None:
        holder = QWidget()
        row = QHBoxLayout(holder)
        row.setContentsMargins(0, 0, 0, 0)
        for text, step, name in (("Move &up", -1, "up"), ("Move do&wn", 1, "down")):
            button = QPushButton(text)
            button.setObjectName(f"{self.key}.{name}")
            button.setAccessibleName(f"{text.replace('&', '')}: input {self.index + 1}")
            button.clicked.connect(lambda _=False, s=step: move(self.index, s))
            row.addWidget(button)
        row.addWidget(note("The form asks for the inputs in this order, under their groups."), 1)
        self._grid.addWidget(holder, self._row, 0, 1, 4)

    # -- kind-dependent rows ----------------------------------------------------------------------

    def show_kind(self) -> None:
        """Show the rows that apply to the draft's kind; fill the transform list."""
        kind = self.draft.kind
        for key in NUMBER_ROWS:
            self._visible(key, kind == "number")
        self._visible("choices", kind == "choice")
        self._visible("yes", kind == "yes_no")
        self._visible("no", kind == "yes_no")
        self.transform.clear()
        default = KIND_TRANSFORMS[kind][0]
        self.transform.addItem(f"default ({TRANSFORM_WORDS[default]})", "")
        for name in KIND_TRANSFORMS[kind]:
            self.transform.addItem(TRANSFORM_WORDS[name], name)
        self.transform.setCurrentIndex(max(0, self.transform.findData(self.draft.transform)))
        self._show_settings()

    def _visible(self, key: str, on: bool) -> None:
        for widget in self.rows.get(key, []):
            if widget is not None:
                widget.setVisible(on)

    def _show_settings(self) -> None:
        used = TRANSFORM_SETTINGS.get(self.draft.transform, ())
        for attr, pair in self.settings.items():
            for widget in pair:
                widget.setVisible(attr in used)

