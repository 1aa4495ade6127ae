"""Building blocks shared by the workspace's pages: labelled fields with a message line each,
file choosers, and the box of problems no field claims.

Every field is registered under its *field key* (the recipe key path it edits,
``about.title``, ``inputs[#2].limits``; see :mod:`calcbuilder.authoring.problems`).
:meth:`FieldSet.show` puts every routed message under its field at once, marks
the field, and repeats the message in the field's accessible description so a
screen reader says it too. States are shown by a symbol and a word first
(``✖ Problem:``), colour only repeats them (:mod:`calcbuilder.gui.look`).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from pathlib import Path

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QFileDialog,
    QGridLayout,
    QHBoxLayout,
    QLabel,
    QLayout,
    QLineEdit,
    QPlainTextEdit,
    QProgressBar,
    QPushButton,
    QScrollArea,
    QVBoxLayout,
    QWidget,
)

from ..look import SYMBOL, box, heading, set_state, state_label

__all__ = ["FieldSet", "JobPanel", "PathField", "ProblemBox", "ask_path", "clear_layout", "drop",
           "grid_row", "message_label", "note", "page_scroll", "plain_text", "section"]

FileAsker = Callable[[QWidget, str, str, bool], str]


def ask_path(parent: QWidget, title: str, filter_text: str, save: bool) -> str:
    """The file dialog (tests replace :attr:`PathField.asker` instead of opening it)."""
    if save:
        name, _ = QFileDialog.getSaveFileName(parent, title, "", filter_text)
    else:
        name, _ = QFileDialog.getOpenFileName(parent, title, "", filter_text)
    return name


def message_label(key: str) -> QLabel:
    """The message line under a field (hidden while there is nothing to say)."""
    label = state_label("", "error", f"msg:{key}")
    label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
    label.hide()
    return label


def note(text: str, name: str = "") -> QLabel:
    """A muted explanatory line."""
    return state_label(text, "note", name)


def section(title: str) -> QLabel:
    return heading(title)


def plain_text(name: str, accessible: str, lines: int = 3) -> QPlainTextEdit:
    """A multi-line text field (Tab moves on instead of typing a tab)."""
    edit = QPlainTextEdit()
    edit.setObjectName(name)
    edit.setAccessibleName(accessible)
    edit.setTabChangesFocus(True)
    edit.setMinimumHeight(edit.fontMetrics().lineSpacing() * (lines + 1))
    edit.setMaximumHeight(edit.fontMetrics().lineSpacing() * (lines + 3))
    return edit


def page_scroll(inner: QWidget, name: str) -> QScrollArea:
    area = QScrollArea()
    area.setObjectName(name)
    area.setWidgetResizable(True)
    area.setWidget(inner)
    return area


class FieldSet:
    """The fields of one page by key, each with its message line."""

    def __init__(self) -> None:
        self.fields: dict[str, QWidget] = {}
        self.messages: dict[str, QLabel] = {}

    def add(self, key: str, widget: QWidget | None, accessible: str = "") -> QLabel:
        """Register a field; returns its (hidden) message line to place under it."""
        if widget is not None:
            if not widget.objectName():
                widget.setObjectName(key)
            if accessible:
                widget.setAccessibleName(accessible)
            self.fields[key] = widget
        label = message_label(key)
        self.messages[key] = label
        return label

    def remove_prefix(self, prefix: str) -> None:
        for key in [k for k in self.messages if k.startswith(prefix)]:
            self.messages.pop(key, None)
            self.fields.pop(key, None)

    @property
    def keys(self) -> list[str]:
        return list(self.messages)

    def show(self, routed: Mapping[str, Sequence[str]]) -> None:
        """Show every routed message beside its field; clear the others."""
        for key, label in self.messages.items():
            texts = list(routed.get(key, ()))
            widget = self.fields.get(key)
            if texts:
                label.setText("\n".join(f"{SYMBOL['error']} Problem: {t}" for t in texts))
                label.show()
            else:
                label.clear()
                label.hide()
            if isinstance(widget, QLineEdit):
                set_state(widget, "error" if texts else "ok")
            if widget is not None:
                widget.setAccessibleDescription(" ".join(texts))

    def shown(self) -> dict[str, str]:
        """Key -> message text of every visible message (tests, screenshots)."""
        return {k: lab.text() for k, lab in self.messages.items() if lab.text()}


class ProblemBox(QLabel):
    """Problems of a step that no field on the page claims (hidden when none)."""

    def __init__(self, name: str) -> None:
        super().__init__()
        self.setObjectName(name)
        self.setWordWrap(True)
        self.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        box(self, "refusal")
        self.hide()

    def show_problems(self, problems: Sequence[str], heading_text: str = "") -> None:
        if not problems:
            self.clear()
            self.hide()
            return
        lines = [heading_text] if heading_text else []
        lines += [f"{SYMBOL['error']} {p}" for p in problems]
        self.setText("\n".join(lines))
        self.show()


class PathField(QWidget):
    """A file name with a Choose… button; emits :attr:`chosen` with the new path."""

    chosen = Signal(object)
    asker: FileAsker = staticmethod(ask_path)

    def __init__(self, name: str, accessible: str, *, title: str, filter_text: str,
                 save: bool = False, button: str = "Choose…") -> None:
        super().__init__()
        self.setObjectName(f"{name}Field")
        self.title, self.filter_text, self.save = title, filter_text, save
        self.edit = QLineEdit()
        self.edit.setObjectName(name)
        self.edit.setAccessibleName(accessible)
        self.edit.setPlaceholderText("no file chosen")
        self.edit.editingFinished.connect(self._typed)
        self.button = QPushButton(button)
        self.button.setObjectName(f"{name}Button")
        self.button.setAccessibleName(f"{button.rstrip('…')} {accessible.lower()}")
        self.button.clicked.connect(self.ask)
        row = QHBoxLayout(self)
        row.setContentsMargins(0, 0, 0, 0)
        row.addWidget(self.edit, 1)
        row.addWidget(self.button)
        self.setFocusProxy(self.edit)

    def ask(self) -> None:
        name = type(self).asker(self, self.title, self.filter_text, self.save)
        if name:
            self.set_path(Path(name), emit=True)

    def set_path(self, path: Path | None, *, emit: bool = False) -> None:
        text = "" if path is None else str(path)
        if self.edit.text() != text:
            self.edit.setText(text)
        if emit:
            self.chosen.emit(path)

    def _typed(self) -> None:
        text = self.edit.text().strip()
        self.chosen.emit(Path(text) if text else None)


def clear_layout(layout: QLayout) -> None:
    """Remove and delete every widget of a layout."""
    while layout.count():
        item = layout.takeAt(0)
        widget = item.widget() if item is not None else None
        if widget is not None:
            drop(widget)


def drop(widget: QWidget) -> None:
    """Take a widget out of the window at once (deleted soon after)."""
    widget.hide()
    widget.setParent(None)
    widget.deleteLater()


def grid_row(grid: QGridLayout, row: int, text: str, widget: QWidget, message: QLabel, *,
             column: int = 0, span: int = 1) -> int:
    """Place ``text`` (as the widget's label, with a buddy), the widget and its message."""
    label = QLabel(text)
    label.setWordWrap(True)
    label.setBuddy(widget)
    metrics = label.fontMetrics()
    width = min(metrics.horizontalAdvance(text.replace("&", "")) + 6,
                metrics.horizontalAdvance("M") * 15)
    label.setMinimumWidth(width)
    label.setMinimumHeight(max(label.heightForWidth(width), 0))
    grid.addWidget(label, row, column, Qt.AlignmentFlag.AlignTop)
    holder = QWidget()
    inner = QVBoxLayout(holder)
    inner.setContentsMargins(0, 0, 0, 0)
    inner.setSpacing(2)
    inner.addWidget(widget)
    inner.addWidget(message)
    grid.addWidget(holder, row, column + 1, 1, span)
    return row + 1


class JobPanel(QWidget):
    """What the worker is doing, how far it is, and Cancel (hidden while idle)."""

    def __init__(self) -> None:
        super().__init__()
        self.setObjectName("jobPanel")
        row = QHBoxLayout(self)
        row.setContentsMargins(0, 0, 0, 0)
        self.text = QLabel("")
        self.text.setObjectName("jobText")
        self.text.setWordWrap(True)
        self.progress = QProgressBar()
        self.progress.setObjectName("jobProgress")
        self.progress.setAccessibleName("Progress of the running work")
        self.cancel = QPushButton("Cance&l")
        self.cancel.setObjectName("cancelJob")
        self.cancel.setAccessibleName("Cancel the running work")
        row.addWidget(self.text, 2)
        row.addWidget(self.progress, 1)
        row.addWidget(self.cancel)
        self.hide()
