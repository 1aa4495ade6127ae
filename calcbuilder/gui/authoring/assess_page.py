"""Step 3 page: fit (or import), bootstrap validation, external data, recalibration, comparison.

A view over :class:`calcbuilder.authoring.AssessStep`. Each button hands a stage
of :mod:`calcbuilder.authoring.pipeline` to the window's worker (progress, time
left and Cancel are shown by the window); the result is applied here when it
arrives, never part of it. The table and the plots show what the evidence sets
hold.
"""

from __future__ import annotations

import functools
from collections.abc import Callable
from typing import Any

from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QGridLayout,
    QHBoxLayout,
    QLineEdit,
    QPlainTextEdit,
    QPushButton,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from ...authoring import ExternalData
from ...authoring.assess_step import METRIC_NAMES, RECAL_METHODS
from ...authoring.pipeline import StageResult, run_stage
from ...authoring.problems import route
from ...errors import CalcbuilderError
from ..look import SYMBOL, set_state
from .assess_plots import PlotsPanel
from .host import Host
from .widgets import (
    FieldSet,
    PathField,
    ProblemBox,
    clear_layout,
    grid_row,
    note,
    page_scroll,
    section,
)

__all__ = ["AssessPage"]

DATA_FILTER = "Data files (*.csv *.parquet *.xlsx *.xlsm);;All files (*)"
STATE_WORDS = {
    "none": ("note", "Not fitted yet."),
    "current": ("ok", f"{SYMBOL['ok']} Up to date with the recipe and the data."),
    "texts": ("warning", f"{SYMBOL['warning']} The numbers stand, but texts (about, decision, "
                         "cautions) changed since the fit: publishing runs the stages again "
                         "with the final recipe."),
    "stale": ("error", f"{SYMBOL['error']} Out of date: the inputs, the data or the settings "
                       "changed since the fit. Fit again."),
}


class AssessPage(QWidget):
    """Step 3 (objectName ``assessPage``)."""

    step = "assess"

    def __init__(self, host: Host) -> None:
        super().__init__()
        self.setObjectName("assessPage")
        self.host = host
        self.fields = FieldSet()
        inner = QWidget()
        col = QVBoxLayout(inner)
        col.addWidget(section("Step 3 · Fit and assess"))
        col.addWidget(note("Each button runs what the matching command runs (fit, assess, "
                           "recalibrate, compare) with the seed below. Long runs show their "
                           "progress at the bottom of the window and can be cancelled."))
        self.status = note("", "assessState")
        col.addWidget(self.status)
        self.problems = ProblemBox("assessProblems")
        col.addWidget(self.problems)
        col.addLayout(self._settings())
        self.fit_button = self._button("fitButton", "&Fit the model", self.fit)
        self.boot_button = self._button("bootstrapButton", "&Bootstrap validation",
                                        lambda: self._stage("bootstrap"))
        row = QHBoxLayout()
        row.addWidget(self.fit_button)
        row.addWidget(self.boot_button)
        row.addStretch(1)
        col.addLayout(row)
        col.addWidget(section("Evidence"))
        self.table = QTableWidget(0, 4 + len(METRIC_NAMES))
        self.table.setObjectName("evidenceTable")
        self.table.setAccessibleName("Evidence sets and their numbers")
        self.table.setHorizontalHeaderLabels(["Set", "Kind", "Rows", "Events",
                                              *METRIC_NAMES.values()])
        self.table.setTabKeyNavigation(False)
        self.table.setMinimumHeight(self.table.fontMetrics().lineSpacing() * 7)
        col.addWidget(self.table)
        self.plots = PlotsPanel()
        col.addWidget(self.plots)
        self.lines = QPlainTextEdit()
        self.lines.setObjectName("resultLines")
        self.lines.setAccessibleName("What the runs did and found")
        self.lines.setReadOnly(True)
        self.lines.setTabChangesFocus(True)
        self.lines.setMinimumHeight(self.lines.fontMetrics().lineSpacing() * 10)
        col.addWidget(self.lines)
        col.addWidget(section("External validation"))
        self.externals = QVBoxLayout()
        col.addLayout(self.externals)
        col.addLayout(self._left(self._button("addExternal", "&Add an external data set",
                                              self._add_external)))
        col.addWidget(section("Recalibration for a local population"))
        col.addLayout(self._recalibration())
        col.addWidget(section("Comparison with a reference calculator"))
        col.addLayout(self._comparison())
        col.addStretch(1)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(0, 0, 0, 0)
        outer.addWidget(page_scroll(inner, "assessScroll"))

    # -- building ---------------------------------------------------------------------------------

    def _button(self, name: str, text: str, slot: Callable[[], Any]) -> QPushButton:
        button = QPushButton(text)
        button.setObjectName(name)
        button.clicked.connect(lambda _=False: slot())
        return button

    @staticmethod
    def _left(*widgets: QWidget) -> QHBoxLayout:
        row = QHBoxLayout()
        for widget in widgets:
            row.addWidget(widget)
        row.addStretch(1)
        return row

    def _line(self, name: str, key: str, attr: str, accessible: str) -> tuple[QLineEdit, Any]:
        edit = QLineEdit()
        edit.setObjectName(name)
        edit.textEdited.connect(lambda t: self._set(attr, t))
        return edit, self.fields.add(key, edit, accessible)

    def _set(self, attr: str, value: Any) -> None:
        setattr(self.host.ws.assess, attr, value)
        self.host.changed()

    def _settings(self) -> QGridLayout:
        grid = QGridLayout()
        self.seed, m1 = self._line("seed", "assess.seed", "seed", "Seed")
        self.band_boot, m2 = self._line("bandBoot", "assess.band_boot", "band_boot",
                                        "Resamples for the evidence bands")
        self.n_boot, m3 = self._line("nBoot", "assess.n_boot", "n_boot",
                                     "Bootstrap resamples")
        row = grid_row(grid, 0, "&Seed (the same seed gives the same numbers)", self.seed, m1)
        row = grid_row(grid, row, "Resamples for the evidence ba&nds", self.band_boot, m2)
        row = grid_row(grid, row, "Bootstrap &resamples (B)", self.n_boot, m3)
        self.firth = QCheckBox("Use Firth's penalised likelihood")
        self.firth.setObjectName("firth")
        self.firth.toggled.connect(lambda on: self._set("firth", on))
        grid.addWidget(self.firth, row, 0, 1, 2)
        grid.addWidget(self.fields.add("fit.firth", self.firth), row + 1, 0, 1, 2)
        return grid

    def _recalibration(self) -> QGridLayout:
        grid = QGridLayout()
        self.recal_path = PathField("recalData", "Local population data", title="Local data",
                                    filter_text=DATA_FILTER)
        self.recal_path.chosen.connect(lambda p: self._set("recal_path", p))
        self.recal_method = QComboBox()
        self.recal_method.setObjectName("recalMethod")
        for method, words in zip(RECAL_METHODS, ("intercept only (logit P = a + eta)",
                                                 "intercept and slope (a + b·eta)"), strict=True):
            self.recal_method.addItem(words, method)
        self.recal_method.activated.connect(
            lambda i: self._set("recal_method", self.recal_method.itemData(i)))
        self.recal_label, m = self._line("recalLabel", "assess.recal_label", "recal_label",
                                         "Name of the local data")
        row = grid_row(grid, 0, "Local &data", self.recal_path,
                       self.fields.add("assess.recal_path", self.recal_path.edit))
        row = grid_row(grid, row, "&Method", self.recal_method,
                       self.fields.add("assess.recal_method", self.recal_method))
        row = grid_row(grid, row, "Na&me of the data", self.recal_label, m)
        grid.addLayout(self._left(self._button("recalButton", "Re&calibrate",
                                               lambda: self._stage("recalibrate"))), row, 1)
        return grid

    def _comparison(self) -> QGridLayout:
        grid = QGridLayout()
        self.reference = PathField("referenceCalc", "Reference calculator file",
                                   title="The calculator in current use",
                                   filter_text="Calculator files (*.calc.json);;All files (*)")
        self.reference.chosen.connect(lambda p: self._set("reference_path", p))
        self.compare_data = PathField("compareData", "Comparison data (blank: development data)",
                                      title="Data for the comparison", filter_text=DATA_FILTER)
        self.compare_data.chosen.connect(lambda p: self._set("compare_path", p))
        self.cuts, m = self._line("compareCuts", "assess.compare_cuts", "compare_cuts",
                                  "Risk category cuts in percent")
        row = grid_row(grid, 0, "Reference calculato&r", self.reference,
                       self.fields.add("assess.reference_path", self.reference.edit))
        row = grid_row(grid, row, "Data (blank: the development data)", self.compare_data,
                       self.fields.add("assess.compare_path", self.compare_data.edit))
        row = grid_row(grid, row, "Ca&tegory cuts, % (e.g. 10,20; blank: the risk bands)",
                       self.cuts, m)
        grid.addLayout(self._left(self._button("compareButton", "Com&pare",
                                               lambda: self._stage("compare"))), row, 1)
        return grid

    # -- external data sets ------------------------------------------------------------------------

    def _add_external(self) -> None:
        self.host.ws.assess.externals.append(ExternalData())
        self.host.changed()
        self._fill_externals()

    def _fill_externals(self) -> None:
        clear_layout(self.externals)
        self.fields.remove_prefix("assess.externals[")
        for k, ext in enumerate(self.host.ws.assess.externals):
            self.externals.addWidget(self._external_row(k, ext))

    def _external_row(self, k: int, ext: ExternalData) -> QWidget:
        holder = QWidget()
        holder.setObjectName(f"external_{k}")
        grid = QGridLayout(holder)
        grid.setContentsMargins(0, 0, 0, 0)
        path = PathField(f"externalData_{k}", f"External data {k + 1}",
                         title="External validation data", filter_text=DATA_FILTER)
        path.set_path(ext.path)
        path.chosen.connect(lambda p, e=ext: self._ext(e, "path", p))
        row = grid_row(grid, 0, f"Data set {k + 1}", path,
                       self.fields.add(f"assess.externals[{k}]", path.edit))
        for attr, words in (("label", "Name (e.g. 'Hospital B, 2025')"),
                            ("outcome", "Outcome column (blank: as in the development data)"),
                            ("event", "Event value (blank: as recorded)")):
            edit = QLineEdit(getattr(ext, attr))
            edit.setObjectName(f"external_{k}_{attr}")
            edit.textEdited.connect(lambda t, e=ext, a=attr: self._ext(e, a, t))
            row = grid_row(grid, row, words, edit, self.fields.add(
                f"assess.externals[{k}].{attr}", edit, f"External data {k + 1} {attr}"))
        buttons = QHBoxLayout()
        buttons.addWidget(self._button(f"externalRun_{k}", f"&Validate on data set {k + 1}",
                                       functools.partial(self._stage, "external", k)))
        buttons.addWidget(self._button(f"externalRemove_{k}", f"Remove data set {k + 1}",
                                       functools.partial(self._remove_external, k)))
        buttons.addStretch(1)
        grid.addLayout(buttons, row, 1)
        return holder

    def _ext(self, ext: ExternalData, attr: str, value: Any) -> None:
        setattr(ext, attr, value)
        self.host.changed()

    def _remove_external(self, k: int) -> None:
        del self.host.ws.assess.externals[k]
        self.host.changed()
        self._fill_externals()

    # -- running -----------------------------------------------------------------------------------

    def _numbers(self) -> tuple[int, int] | None:
        try:
            seed, bands, _ = self.host.ws.assess.numbers()
        except ValueError:
            self.host.tell("Check the settings", "The settings of this step have problems; "
                           "see the messages beside them.")
            return None
        return seed, bands

    def fit(self) -> None:
        """Fit (or import) with the recipe as it stands: the first stage, replacing results."""
        ws = self.host.ws
        numbers = self._numbers()
        if numbers is None or not self.host.save_first():
            return
        try:
            spec, draft = ws.first_spec()
        except CalcbuilderError as exc:
            self.host.tell("Cannot fit yet", str(exc))
            return
        basis, model_basis = ws.bases()
        seed, bands = numbers

        def apply(result: StageResult) -> None:
            ws.assess.start(result, spec, basis=basis, model_basis=model_basis,
                            draft_texts=draft)
            self.host.changed()
            self.refresh()
        self.host.run_job("Fitting" if spec["stage"] == "fit" else "Importing",
                          lambda report: run_stage(spec, None, band_boot=bands, seed=seed,
                                                   report=report), apply)

    def _stage(self, kind: str, index: int = 0) -> None:
        ws = self.host.ws
        numbers = self._numbers()
        if numbers is None:
            return
        if ws.assess.document is None:
            self.host.tell("Fit first", "Fit the model (or import one) before this step.")
            return
        if kind == "bootstrap" and ws.assess.has_stage("recalibrate"):
            self.host.tell("Bootstrap validation is for the fitted model",
                           "The model has been recalibrated since the fit. Fit again and run "
                           "the bootstrap validation before recalibrating.")
            return
        try:
            spec = ws.stage_spec(kind, index)
        except (CalcbuilderError, IndexError) as exc:
            self.host.tell("Cannot run this yet", str(exc))
            return
        document, (seed, bands) = ws.assess.document, numbers

        def apply(result: StageResult) -> None:
            ws.assess.add(result, spec)
            self.host.changed()
            self.refresh()
        names = {"bootstrap": "Bootstrap validation", "external": "External validation",
                 "recalibrate": "Recalibration", "compare": "Comparison"}
        self.host.run_job(names[kind], lambda report: run_stage(
            spec, document, band_boot=bands, seed=seed, report=report), apply)

    # -- showing -----------------------------------------------------------------------------------

    def refresh(self) -> None:
        ws = self.host.ws
        a = ws.assess
        for edit, value in ((self.seed, a.seed), (self.band_boot, a.band_boot),
                            (self.n_boot, a.n_boot), (self.recal_label, a.recal_label),
                            (self.cuts, a.compare_cuts)):
            if edit.text() != value:
                edit.setText(value)
        self.firth.blockSignals(True)
        self.firth.setChecked(a.firth)
        self.firth.blockSignals(False)
        self.recal_method.setCurrentIndex(max(0, self.recal_method.findData(a.recal_method)))
        self.recal_path.set_path(a.recal_path)
        self.reference.set_path(a.reference_path)
        self.compare_data.set_path(a.compare_path)
        self.fit_button.setText("&Import the model" if ws.source.importing else "&Fit the model")
        self._fill_externals()
        self._fill_results()

    def _fill_results(self) -> None:
        a = self.host.ws.assess
        rows = a.evidence_rows()
        self.table.setRowCount(len(rows))
        for r, row in enumerate(rows):
            cells = [row.label, row.kind, f"{row.n:,}", f"{row.events:,}",
                     *(row.metrics[k] for k in METRIC_NAMES)]
            for c, text in enumerate(cells):
                self.table.setItem(r, c, QTableWidgetItem(text))
        self.table.resizeColumnsToContents()
        self.lines.setPlainText("\n".join(a.lines))
        self.plots.show_evidence(a.evidence(), a.roc, synthetic=self.host.ws.about.synthetic,
                                 marks=self.host.ws.decision.marks())
        self.show_state()

    def show_state(self) -> None:
        state, text = STATE_WORDS[self.host.ws.state()]
        self.status.setText(text)
        set_state(self.status, state)
        self.boot_button.setEnabled(self.host.ws.assess.document is not None)

    def show_problems(self, problems: list[str]) -> None:
        routed = route(problems, self.fields.keys, self.host.ws.inputs.ids)
        for key, texts in self.host.ws.assess.settings_problems().items():
            routed.setdefault(key, []).extend(texts)
        self.fields.show(routed)
        self.problems.show_problems(routed.get("", []))
        self.show_state()
