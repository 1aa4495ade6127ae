"""Shared helpers for the authoring workspace's Qt tests (pytest-qt, offscreen).

Every test gets its own empty calcbuilder config folder, so the trusted keys of
the machine running the tests are never read. The helpers act as a user does:
type into a field, pick from a list, click a button.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QComboBox, QLabel, QLineEdit, QPlainTextEdit, QPushButton, QWidget

from calcbuilder.gui.authoring.widgets import PathField


@pytest.fixture(autouse=True)
def _own_config(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("CALCBUILDER_CONFIG_DIR", str(tmp_path / "config"))


@pytest.fixture
def answer_files(monkeypatch: pytest.MonkeyPatch) -> list[Path]:
    """File dialogs answer with the paths pushed onto this list (first in, first out)."""
    queue: list[Path] = []

    def asker(_parent: QWidget, _title: str, _filter: str, _save: bool) -> str:
        return str(queue.pop(0)) if queue else ""

    monkeypatch.setattr(PathField, "asker", staticmethod(asker))
    return queue


def find(root: QWidget, kind: type, name: str) -> Any:
    found = root.findChild(kind, name)
    assert found is not None, name
    return found


def type_into(qtbot: Any, widget: QLineEdit, text: str) -> None:
    """Replace a field's text by typing, as a user would."""
    widget.setFocus()
    widget.selectAll()
    if text:
        qtbot.keyClicks(widget, text)
    else:
        qtbot.keyClick(widget, Qt.Key.Key_Backspace)


def type_named(qtbot: Any, root: QWidget, name: str, text: str) -> None:
    type_into(qtbot, find(root, QLineEdit, name), text)


def write_text(root: QWidget, name: str, text: str) -> None:
    """Set a multi-line field's text (its textChanged fires as when typing)."""
    find(root, QPlainTextEdit, name).setPlainText(text)


def pick(root: QWidget, name: str, data: Any) -> None:
    """Choose the entry whose data is ``data`` in a list, as a user picking it would."""
    combo = find(root, QComboBox, name)
    index = combo.findData(data)
    assert index >= 0, (name, data)
    combo.setCurrentIndex(index)
    combo.activated.emit(index)


def click(qtbot: Any, root: QWidget, name: str) -> None:
    button = find(root, QPushButton, name)
    assert button.isEnabled(), name
    qtbot.mouseClick(button, Qt.MouseButton.LeftButton)


def message(root: QWidget, key: str) -> str:
    """The text of the message line under the field with this key ('' when hidden)."""
    label = find(root, QLabel, f"msg:{key}")
    return "" if label.isHidden() else label.text()


Waiter = Callable[..., None]
