"""Step 1 page: open the data, preview it, choose the outcome and the predictors, see the check.

A view over :class:`calcbuilder.authoring.DataStep`; the counts per column come
from the step, and the check (rows used, events, events per parameter, Riley
et al.'s verdict with its binding criterion, warnings, or every problem with
the data) from :meth:`Workspace.data_check`, which calls
:func:`calcbuilder.evidence.prepare` as ``calcbuilder fit`` does.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QAbstractItemView,
    QCheckBox,
    QComboBox,
    QGridLayout,
    QLabel,
    QLineEdit,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from ...authoring import DataCheck
from ...authoring.data_step import DataStep
from ...authoring.problems import route
from ...errors import CalcbuilderError
from ..look import SYMBOL, box, set_state
from .host import Host
from .widgets import FieldSet, PathField, ProblemBox, grid_row, note, page_scroll, section

__all__ = ["DataPage"]

COLUMN_HEADERS = ("Column", "Predictor", "Values", "Missing", "Different values", "Looks like")
KIND_WORDS = {"number": "number", "yes_no": "yes / no", "choice": "choice"}


class DataPage(QWidget):
    """Step 1 (objectName ``dataPage``)."""

    step = "data"

    def __init__(self, host: Host) -> None:
        super().__init__()
        self.setObjectName("dataPage")
        self.host = host
        self.fields = FieldSet()
        self._filling = False
        inner = QWidget()
        col = QVBoxLayout(inner)
        col.addWidget(section("Step 1 · Data"))
        col.addWidget(note("Open the development data (CSV, Parquet or Excel: first sheet), "
                           "choose the outcome and the value that means the event, and tick "
                           "the candidate predictors. The check below is the one "
                           "'calcbuilder fit' makes before fitting."))
        self.file = PathField("dataFile", "Development data file", title="Open the data",
                              filter_text=DataStep.file_filter(), button="Open data…")
        self.file.chosen.connect(self._open)
        col.addWidget(self.file)
        col.addWidget(self.fields.add("data.file", None))
        self.problems = ProblemBox("dataProblems")
        col.addWidget(self.problems)
        col.addWidget(section("Outcome"))
        grid = QGridLayout()
        self.outcome = self._combo("outcomeColumn", "Outcome column", self._outcome_chosen)
        self.event_value = self._combo("eventValue", "Value meaning the event",
                                       self._event_chosen)
        row = grid_row(grid, 0, "Outcome &column", self.outcome,
                       self.fields.add("outcome.column", self.outcome))
        grid_row(grid, row, "&Event value", self.event_value,
                       self.fields.add("outcome.event", self.event_value))
        self.complete_case = QCheckBox("Leave out rows with a missing value (complete case; "
                                       "the number left out is recorded)")
        self.complete_case.setObjectName("completeCase")
        self.complete_case.toggled.connect(self._complete_case)
        col.addLayout(grid)
        col.addWidget(self.complete_case)
        col.addWidget(section("Columns"))
        col.addWidget(note("Tick a column to use it as a candidate predictor (Space ticks the "
                           "current row). Counts use the same reading rules as the fit."))
        self.columns = self._table("columns", "Data columns", COLUMN_HEADERS)
        self.columns.itemChanged.connect(self._ticked)
        col.addWidget(self.columns)
        col.addWidget(section("Check before fitting"))
        self.check = QLabel("Open a data file.")
        self.check.setObjectName("dataCheck")
        self.check.setWordWrap(True)
        self.check.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        box(self.check, "plain")
        col.addWidget(self.check)
        col.addWidget(self._description())
        col.addWidget(section("First rows"))
        self.preview_table = self._table("preview", "First rows of the data", ())
        col.addWidget(self.preview_table)
        col.addStretch(1)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(0, 0, 0, 0)
        outer.addWidget(page_scroll(inner, "dataScroll"))

    # -- building -------------------------------------------------------------------------------

    def _combo(self, name: str, accessible: str, slot: object) -> QComboBox:
        combo = QComboBox()
        combo.setObjectName(name)
        combo.setAccessibleName(accessible)
        combo.activated.connect(slot)
        return combo

    def _table(self, name: str, accessible: str, headers: tuple[str, ...]) -> QTableWidget:
        table = QTableWidget(0, len(headers))
        table.setObjectName(name)
        table.setAccessibleName(accessible)
        table.setHorizontalHeaderLabels(list(headers))
        table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        table.setTabKeyNavigation(False)
        table.setMinimumHeight(table.fontMetrics().lineSpacing() * 12)
        table.horizontalHeader().setStretchLastSection(True)
        return table

    def _description(self) -> QWidget:
        holder = QWidget()
        grid = QGridLayout(holder)
        grid.setContentsMargins(0, 0, 0, 0)
        grid.addWidget(section("How the data are described in the evidence"), 0, 0, 1, 2)
        self.texts: dict[str, QLineEdit] = {}
        row = 1
        for attr, key, text in (("dataset_name", "dataset.name", "Data set &name"),
                                ("dataset_period", "dataset.period", "&Period"),
                                ("dataset_population", "dataset.population", "Pop&ulation"),
                                ("anticipated_r2_cs", "fit.anticipated_r2_cs",
                                 "Anticipated R² (Cox-Snell; blank: 15% of the largest "
                                 "possible)")):
            edit = QLineEdit()
            edit.setObjectName(attr)
            edit.textEdited.connect(lambda value, a=attr: self._text(a, value))
            self.texts[attr] = edit
            row = grid_row(grid, row, text, edit, self.fields.add(key, edit, text.replace(
                "&", "")))
        return holder

    # -- edits ----------------------------------------------------------------------------------

    def _open(self, path: Path | None) -> None:
        if path is None:
            return
        data = self.host.ws.data
        try:
            notes = data.open(path)
        except CalcbuilderError as exc:
            self.fields.show({"data.file": [str(exc)]})
            return
        self.fields.show({})
        if notes:
            self.host.tell("Some choices no longer fit", "\n".join(notes))
        self.host.changed(structure=True)
        self.refresh()

    def _outcome_chosen(self, index: int) -> None:
        column = self.outcome.itemData(index)
        self.host.ws.data.choose_outcome(column)
        self.host.changed(structure=True)
        self.refresh()

    def _event_chosen(self, index: int) -> None:
        self.host.ws.data.event_value = self.event_value.itemData(index)
        self.host.changed()

    def _complete_case(self, on: bool) -> None:
        if not self._filling:
            self.host.ws.data.complete_case = on
            self.host.changed()

    def _text(self, attr: str, value: str) -> None:
        setattr(self.host.ws.data, attr, value)
        self.host.changed()

    def _ticked(self, item: QTableWidgetItem) -> None:
        if self._filling or item.column() != 1:
            return
        data = self.host.ws.data
        column = self._cell(item.row(), 0).text()
        ticked = item.checkState() == Qt.CheckState.Checked
        if ticked and column not in data.predictors and column != data.outcome_column:
            data.predictors.append(column)
        elif not ticked and column in data.predictors:
            data.predictors.remove(column)
        self.host.changed(structure=True)

    def tick(self, column: str, on: bool = True) -> None:
        """Tick (or untick) a column as a predictor, as a click on its box does."""
        for row in range(self.columns.rowCount()):
            if self._cell(row, 0).text() == column:
                state = Qt.CheckState.Checked if on else Qt.CheckState.Unchecked
                self._cell(row, 1).setCheckState(state)
                return
        raise KeyError(column)

    def _cell(self, row: int, column: int) -> QTableWidgetItem:
        item = self.columns.item(row, column)
        assert item is not None
        return item

    # -- showing --------------------------------------------------------------------------------

    def refresh(self) -> None:
        """Show the step's state (after opening a file or a project)."""
        data = self.host.ws.data
        self._filling = True
        try:
            self.file.set_path(data.path)
            self.outcome.clear()
            self.outcome.addItem("(choose the outcome column)", None)
            for column in data.columns:
                self.outcome.addItem(column, column)
            self.outcome.setCurrentIndex(max(0, self.outcome.findData(data.outcome_column)))
            self.event_value.clear()
            for value, count in data.outcome_values():
                self.event_value.addItem(f"{value}  ({count:,} rows)", value)
            self.event_value.setCurrentIndex(max(0, self.event_value.findData(data.event_value)))
            self.complete_case.setChecked(data.complete_case)
            for attr, edit in self.texts.items():
                if edit.text() != getattr(data, attr):
                    edit.setText(getattr(data, attr))
            self._fill_columns(data)
            self._fill_preview(data)
        finally:
            self._filling = False

    def _fill_columns(self, data: DataStep) -> None:
        summaries = data.summaries()
        self.columns.setRowCount(len(summaries))
        for row, s in enumerate(summaries):
            tick = QTableWidgetItem()
            tick.setFlags(Qt.ItemFlag.ItemIsUserCheckable | Qt.ItemFlag.ItemIsEnabled
                          | Qt.ItemFlag.ItemIsSelectable)
            outcome = s.name == data.outcome_column
            tick.setCheckState(Qt.CheckState.Checked if s.name in data.predictors
                               else Qt.CheckState.Unchecked)
            tick.setText("outcome" if outcome else "")
            if outcome:
                tick.setFlags(Qt.ItemFlag.ItemIsEnabled)
            shown = ", ".join(f"{v} ({n:,})" for v, n in s.values[:4])
            more = " …" if s.distinct > 4 else ""
            cells = [s.name, None, shown + more, f"{s.missing:,}", f"{s.distinct:,}",
                     KIND_WORDS[s.kind]]
            for k, text in enumerate(cells):
                item = tick if k == 1 else QTableWidgetItem(str(text))
                self.columns.setItem(row, k, item)
        self.columns.resizeColumnsToContents()

    def _fill_preview(self, data: DataStep) -> None:
        rows = data.preview()
        self.preview_table.setColumnCount(len(data.columns))
        self.preview_table.setHorizontalHeaderLabels(data.columns)
        self.preview_table.setRowCount(len(rows))
        for r, cells in enumerate(rows):
            for c, text in enumerate(cells):
                self.preview_table.setItem(r, c, QTableWidgetItem(text))
        self.preview_table.resizeColumnsToContents()

    def show_problems(self, problems: list[str]) -> None:
        """This step's recipe problems, each beside its field (others in the box)."""
        routed = route(problems, self.fields.keys, self.host.ws.inputs.ids)
        routed.pop("data.file", None)
        self.fields.show(routed)
        self._recipe_left = routed.get("", [])

    def show_check(self, check: DataCheck) -> None:
        """The data check: counts, sample size and warnings, or every problem found."""
        left = getattr(self, "_recipe_left", [])
        self.problems.show_problems([*left, *check.problems],
                                    "The data cannot be used as they are:" if check.problems
                                    else "")
        if check.prepared is None:
            self.check.setText(check.waiting or "See the problems above.")
            set_state(self.check, "note")
            return
        p, s = check.prepared, check.prepared.summary
        size = p.sample_size
        verdict = SYMBOL["ok"] if size.adequate else SYMBOL["warning"]
        missing = ", ".join(f"'{k}' {v:,}" for k, v in s.missing.items() if v) or "none"
        lines = [f"Rows: {s.rows_read:,} read, {s.rows_used:,} used ({s.rows_dropped:,} left "
                 f"out, {s.blank_rows:,} empty). Events: {s.events:,} ({s.prevalence:.1%}).",
                 f"Missing values in the columns used: {missing}.",
                 f"Model parameters: {p.n_parameters}; events per parameter "
                 f"{p.events_per_parameter:.1f}.",
                 f"{verdict} Sample size: {size.describe()}."]
        lines += [f"{SYMBOL['warning']} {w}" for w in p.warnings]
        self.check.setText("\n".join(lines))
        set_state(self.check, "ok")
