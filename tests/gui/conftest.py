"""Shared helpers for the clinic form tests (pytest-qt, offscreen).

Every test gets its own empty calcbuilder config folder, so the clinic's
trusted-key list of the machine running the tests is never read.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QComboBox, QLabel, QLineEdit

from calcbuilder.calc.keys import TrustedKeys, public_key_pem
from calcbuilder.gui.app import ClinicWindow, make_app
from tests.fixtures_calc import write_calculator

OpenForm = Callable[..., ClinicWindow]


@pytest.fixture(autouse=True)
def _own_config(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("CALCBUILDER_CONFIG_DIR", str(tmp_path / "config"))


@pytest.fixture
def calc_file(tmp_path: Path) -> Path:
    """An unsigned, synthetic 4-input test calculator."""
    return write_calculator(tmp_path)


@pytest.fixture
def signer(tmp_path: Path) -> tuple[Ed25519PrivateKey, TrustedKeys]:
    """A signing key and a trusted list holding it (for this test only)."""
    key = Ed25519PrivateKey.generate()
    pub = tmp_path / "signer.pub"
    pub.write_bytes(public_key_pem(key.public_key(), "Test signing unit"))
    return key, TrustedKeys(tmp_path / "trusted", extra_files=(pub,))


@pytest.fixture
def open_form(qtbot: Any) -> OpenForm:
    """Open a calculator file in a shown form window: ``open_form(path, trusted=None)``."""
    make_app()

    def _open(path: Path | None, trusted: TrustedKeys | None = None) -> ClinicWindow:
        window = ClinicWindow(trusted=trusted)
        qtbot.addWidget(window)
        window.resize(1360, 900)
        window.show()
        window.activateWindow()
        qtbot.waitActive(window)
        if path is not None:
            window.open_path(path)
        return window

    return _open


def field(window: ClinicWindow, input_id: str) -> QLineEdit | QComboBox:
    """An input's value widget, found by its objectName (the input id)."""
    found = window.findChild(QLineEdit, input_id) or window.findChild(QComboBox, input_id)
    assert found is not None, input_id
    return found


def label(window: ClinicWindow, name: str) -> QLabel:
    found = window.findChild(QLabel, name)
    assert found is not None, name
    return found


def type_into(qtbot: Any, window: ClinicWindow, input_id: str, text: str) -> None:
    """Replace an input's text by typing, as a user would."""
    widget = field(window, input_id)
    assert isinstance(widget, QLineEdit)
    widget.setFocus()
    widget.selectAll()
    if text:
        qtbot.keyClicks(widget, text)
    else:
        qtbot.keyClick(widget, Qt.Key.Key_Backspace)  # deletes the selection


def choose(window: ClinicWindow, input_id: str, value: str) -> None:
    """Choose a yes/no or choice answer by its value, as a user picking from the list would."""
    widget = field(window, input_id)
    assert isinstance(widget, QComboBox)
    index = widget.findData(value)
    assert index > 0, value
    widget.setCurrentIndex(index)
    widget.activated.emit(index)


def choose_unit(window: ClinicWindow, input_id: str, unit: str) -> None:
    chooser = window.findChild(QComboBox, f"{input_id}_unit")
    assert chooser is not None
    index = chooser.findData(unit)
    chooser.setCurrentIndex(index)
    chooser.activated.emit(index)
