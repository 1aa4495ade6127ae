"""Dialogs of the workspace: a passphrase, and a new signing key. Each collects and returns.

Both are small and modal; the publish page takes them as replaceable functions
(:attr:`PublishPage.ask_passphrase <calcbuilder.gui.authoring.publish_page.PublishPage>`)
so tests answer them without opening a window.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from PySide6.QtWidgets import (
    QCheckBox,
    QDialog,
    QDialogButtonBox,
    QFileDialog,
    QGridLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QWidget,
)

from ...calc.keys import DEFAULT_KEY_NAME, UNENCRYPTED_WARNING
from ..look import set_state

__all__ = ["NewKey", "ask_new_key", "ask_passphrase"]


@dataclass(frozen=True)
class NewKey:
    """What the new-key dialog collected."""

    folder: Path
    name: str
    passphrase: str | None


def ask_passphrase(parent: QWidget, key: Path) -> str | None:
    """The passphrase of ``key`` (None when the author cancels)."""
    dialog = QDialog(parent)
    dialog.setWindowTitle("Passphrase of the signing key")
    grid = QGridLayout(dialog)
    label = QLabel(f"&Passphrase for {key.name}:")
    edit = QLineEdit()
    edit.setObjectName("passphrase")
    edit.setAccessibleName(f"Passphrase for {key.name}")
    edit.setEchoMode(QLineEdit.EchoMode.Password)
    label.setBuddy(edit)
    buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok
                               | QDialogButtonBox.StandardButton.Cancel)
    buttons.accepted.connect(dialog.accept)
    buttons.rejected.connect(dialog.reject)
    grid.addWidget(label, 0, 0)
    grid.addWidget(edit, 0, 1)
    grid.addWidget(buttons, 1, 0, 1, 2)
    if dialog.exec() != QDialog.DialogCode.Accepted:
        return None
    return edit.text()


class NewKeyDialog(QDialog):
    """Folder, file name and passphrase (twice) of a new key pair."""

    def __init__(self, parent: QWidget | None, folder: Path) -> None:
        super().__init__(parent)
        self.setWindowTitle("Create a signing key")
        self.setObjectName("newKeyDialog")
        grid = QGridLayout(self)
        self.folder = QLineEdit(str(folder))
        self.folder.setObjectName("keyFolder")
        choose = QPushButton("Choose…")
        choose.clicked.connect(self._choose)
        self.name = QLineEdit(DEFAULT_KEY_NAME)
        self.name.setObjectName("keyName")
        self.first, self.second = QLineEdit(), QLineEdit()
        for edit, name in ((self.first, "keyPassphrase"), (self.second, "keyPassphraseAgain")):
            edit.setObjectName(name)
            edit.setEchoMode(QLineEdit.EchoMode.Password)
        self.none = QCheckBox("No passphrase (demo keys for synthetic calculators only)")
        self.none.setObjectName("keyNoPassphrase")
        self.message = QLabel("")
        self.message.setWordWrap(True)
        set_state(self.message, "error")
        rows = (("&Folder", self.folder), ("File &name", self.name),
                ("&Passphrase", self.first), ("&Same passphrase again", self.second))
        for k, (text, edit) in enumerate(rows):
            label = QLabel(text)
            label.setBuddy(edit)
            edit.setAccessibleName(text.replace("&", ""))
            grid.addWidget(label, k, 0)
            grid.addWidget(edit, k, 1)
        grid.addWidget(choose, 0, 2)
        grid.addWidget(self.none, len(rows), 0, 1, 3)
        grid.addWidget(self.message, len(rows) + 1, 0, 1, 3)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok
                                   | QDialogButtonBox.StandardButton.Cancel)
        buttons.accepted.connect(self._accept)
        buttons.rejected.connect(self.reject)
        grid.addWidget(buttons, len(rows) + 2, 0, 1, 3)

    def _choose(self) -> None:
        name = QFileDialog.getExistingDirectory(self, "Folder for the key files",
                                                self.folder.text())
        if name:
            self.folder.setText(name)

    def problem(self) -> str:
        """What is wrong with the entries ('' when they can be used)."""
        if not self.folder.text().strip():
            return "Choose a folder for the key files."
        if self.none.isChecked():
            return ""
        if not self.first.text():
            return "Type a passphrase (or tick 'No passphrase' for a demo key)."
        if self.first.text() != self.second.text():
            return "The two passphrases differ."
        return ""

    def _accept(self) -> None:
        problem = self.problem()
        self.message.setText(problem)
        if not problem:
            self.accept()

    def result_key(self) -> NewKey:
        return NewKey(Path(self.folder.text().strip()), self.name.text().strip(),
                      None if self.none.isChecked() else self.first.text())


def ask_new_key(parent: QWidget, folder: Path) -> NewKey | None:
    """Ask for a new key's folder, name and passphrase (None when cancelled)."""
    dialog = NewKeyDialog(parent, folder)
    if dialog.exec() != QDialog.DialogCode.Accepted:
        return None
    return dialog.result_key()


UNENCRYPTED = UNENCRYPTED_WARNING
