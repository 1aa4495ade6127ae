"""Step 4 page: what the calculator says about itself, and its caution texts.

A view over :class:`calcbuilder.authoring.AboutStep`: the recipe's ``[about]``
fields (lists one item per line) and the cautions, which start from
``templates/cautions.toml`` and are edited here.
"""

from __future__ import annotations

from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QGridLayout,
    QHBoxLayout,
    QLineEdit,
    QPlainTextEdit,
    QPushButton,
    QVBoxLayout,
    QWidget,
)

from ...authoring.problems import route
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

__all__ = ["AboutPage"]

LINES = {"title": "&Title", "version": "&Version (e.g. 1.0.0)",
         "population": "Target &population", "outcome": "&Outcome", "horizon": "&Horizon",
         "organisation": "Or&ganisation", "contact": "Co&ntact",
         "released": "&Release date (YYYY-MM-DD; blank: the day it is written)",
         "review_by": "Re&view by (YYYY-MM-DD)"}
TEXTS = {"intended_use": ("&Intended use", 2), "exclusions": ("E&xclusions, one per line", 3),
         "authors": ("&Authors, one per line", 2), "references": ("Re&ferences, one per line", 2)}
ORDER = ("title", "version", "intended_use", "population", "outcome", "horizon", "exclusions",
         "authors", "organisation", "contact", "released", "review_by", "references")


class AboutPage(QWidget):
    """Step 4 (objectName ``aboutPage``)."""

    step = "about"

    def __init__(self, host: Host) -> None:
        super().__init__()
        self.setObjectName("aboutPage")
        self.host = host
        self.fields = FieldSet()
        self.edits: dict[str, QLineEdit | QPlainTextEdit] = {}
        self._filling = False
        inner = QWidget()
        col = QVBoxLayout(inner)
        col.addWidget(section("Step 4 · About and cautions"))
        col.addWidget(note("Shown in the clinic form's header, on the risk sheet and in the "
                           "evidence report."))
        self.problems = ProblemBox("aboutProblems")
        col.addWidget(self.problems)
        grid = QGridLayout()
        row = 0
        for key in ORDER:
            if key in LINES:
                line = QLineEdit()
                line.setObjectName(f"about.{key}")
                line.textEdited.connect(lambda t, k=key: self._set(k, t))
                edit: QLineEdit | QPlainTextEdit = line
                text = LINES[key]
            else:
                text, lines = TEXTS[key]
                edit = plain_text(f"about.{key}", text.replace("&", ""), lines)
                edit.textChanged.connect(lambda k=key: self._typed(k))
            self.edits[key] = edit
            row = grid_row(grid, row, text, edit,
                           self.fields.add(f"about.{key}", edit, text.replace("&", "")))
        self.synthetic = QCheckBox("&Synthetic demonstration material (adds the synthetic "
                                   "caution; shown on every screen and page)")
        self.synthetic.setObjectName("about.synthetic")
        self.synthetic.toggled.connect(self._synthetic)
        grid.addWidget(self.synthetic, row, 0, 1, 2)
        col.addLayout(grid)
        self._cautions_section(col)
        col.addStretch(1)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(0, 0, 0, 0)
        outer.addWidget(page_scroll(inner, "aboutScroll"))

    def _cautions_section(self, col: QVBoxLayout) -> None:
        col.addWidget(section("Caution texts"))
        col.addWidget(note("Each text is shown on screen and printed. They start from "
                           "calcbuilder's standard texts; edit them to fit this calculator."))
        col.addWidget(self.fields.add("cautions", None))
        self.caution_box = QVBoxLayout()
        col.addLayout(self.caution_box)
        add_row = QHBoxLayout()
        self.offered = QComboBox()
        self.offered.setObjectName("offeredCautions")
        self.offered.setAccessibleName("Standard caution texts not yet used")
        add = QPushButton("Add the standard &text")
        add.setObjectName("addStandardCaution")
        add.clicked.connect(self._add_offered)
        empty = QPushButton("Add an &empty caution")
        empty.setObjectName("addCaution")
        empty.clicked.connect(lambda: self._add_caution(""))
        for w in (self.offered, add, empty):
            add_row.addWidget(w)
        add_row.addStretch(1)
        col.addLayout(add_row)

    # -- edits ----------------------------------------------------------------------------------

    def _set(self, key: str, value: str) -> None:
        if not self._filling:
            setattr(self.host.ws.about, key, value)
            self.host.changed()

    def _typed(self, key: str) -> None:
        edit = self.edits[key]
        assert isinstance(edit, QPlainTextEdit)
        self._set(key, edit.toPlainText())

    def _synthetic(self, on: bool) -> None:
        if not self._filling:
            self.host.ws.about.set_synthetic(on)
            self.host.changed()
            self._fill_cautions()

    def _add_offered(self) -> None:
        text = self.offered.currentData()
        if text:
            self._add_caution(text)

    def _add_caution(self, text: str) -> None:
        self.host.ws.about.cautions.append(text)
        self.host.changed()
        self._fill_cautions()
        last = self.findChild(QPlainTextEdit, f"caution_{len(self.host.ws.about.cautions)}")
        if last is not None:
            last.setFocus()

    def _caution_edited(self, k: int, edit: QPlainTextEdit) -> None:
        if not self._filling:
            self.host.ws.about.cautions[k] = edit.toPlainText()
            self.host.changed()

    def _remove_caution(self, k: int) -> None:
        del self.host.ws.about.cautions[k]
        self.host.changed()
        self._fill_cautions()

    # -- showing ----------------------------------------------------------------------------------

    def refresh(self) -> None:
        about = self.host.ws.about
        self._filling = True
        try:
            for key, edit in self.edits.items():
                value = getattr(about, key)
                if isinstance(edit, QLineEdit):
                    if edit.text() != value:
                        edit.setText(value)
                elif edit.toPlainText() != value:
                    edit.setPlainText(value)
            self.synthetic.setChecked(about.synthetic)
        finally:
            self._filling = False
        self._fill_cautions()

    def _fill_cautions(self) -> None:
        self._filling = True
        try:
            clear_layout(self.caution_box)
            self.fields.remove_prefix("cautions[")
            for k, text in enumerate(self.host.ws.about.cautions):
                self.caution_box.addWidget(self._caution_row(k, text))
            self.offered.clear()
            for name, text in self.host.ws.about.offered_cautions().items():
                self.offered.addItem(f"{name}: {text[:60]}…", text)
        finally:
            self._filling = False

    def _caution_row(self, k: int, text: str) -> QWidget:
        holder = QWidget()
        grid = QGridLayout(holder)
        grid.setContentsMargins(0, 0, 0, 0)
        edit = plain_text(f"caution_{k + 1}", f"Caution text {k + 1}", 3)
        edit.setPlainText(text)
        edit.textChanged.connect(lambda k=k, e=edit: self._caution_edited(k, e))
        remove = QPushButton(f"Remove caution {k + 1}")
        remove.setObjectName(f"removeCaution_{k + 1}")
        remove.clicked.connect(lambda _=False, k=k: self._remove_caution(k))
        grid_row(grid, 0, f"Caution {k + 1}", edit, self.fields.add(f"cautions[#{k + 1}]", edit))
        grid.addWidget(remove, 1, 1)
        return holder

    def show_problems(self, problems: list[str]) -> None:
        routed = route(problems, self.fields.keys, self.host.ws.inputs.ids)
        self.fields.show(routed)
        self.problems.show_problems(routed.get("", []))
