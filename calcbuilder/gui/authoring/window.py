"""The authoring workspace's window: the list of steps, one page per step, the worker panel.

Widget tree (objectNames)::

    AuthoringWindow "authoringWindow"   menus File (New, Open, Save, Save as, Quit), Go, Help
      QLabel "notice"                   messages to the author (non-modal), "dismissNotice"
      QListWidget "steps"               the six steps; a step with problems says how many
      QStackedWidget "stepPages"        dataPage, inputsPage, assessPage, aboutPage,
                                        decisionPage, publishPage
      QWidget "jobPanel"                jobText, jobProgress, cancelJob (while work runs)

The window is the one controller: pages write edits into the workspace and call
:meth:`AuthoringWindow.changed`; a short timer then checks the recipe once and
hands every problem to the page and field it is about, all at once. Long work
runs in the worker (:class:`~calcbuilder.gui.authoring.worker.JobRunner`).
Closing with unsaved changes asks whether to save (:attr:`ask_unsaved`).
"""

from __future__ import annotations

import functools
from collections.abc import Callable
from pathlib import Path
from typing import Any

from PySide6.QtCore import QTimer
from PySide6.QtGui import QAction, QCloseEvent, QKeySequence
from PySide6.QtWidgets import (
    QHBoxLayout,
    QLabel,
    QListWidget,
    QMainWindow,
    QMessageBox,
    QPushButton,
    QSplitter,
    QStackedWidget,
    QVBoxLayout,
    QWidget,
)

from ...authoring import STEP_TITLES, STEPS, Workspace, load_project, save_project
from ...authoring.project import PROJECT_SUFFIX
from ...errors import CalcbuilderError
from ..look import SYMBOL, box
from .about_page import AboutPage
from .assess_page import AssessPage
from .data_page import DataPage
from .decision_page import DecisionPage
from .inputs_page import InputsPage
from .publish_page import PublishPage
from .widgets import JobPanel, ask_path
from .worker import JobRunner

__all__ = ["AuthoringWindow", "ask_unsaved_changes"]

PROJECT_FILTER = f"Authoring projects (*{PROJECT_SUFFIX})"


def ask_unsaved_changes(parent: QWidget) -> str:
    """``save``, ``discard`` or ``cancel`` (the question asked on closing with changes)."""
    buttons = (QMessageBox.StandardButton.Save | QMessageBox.StandardButton.Discard
               | QMessageBox.StandardButton.Cancel)
    answer = QMessageBox.question(parent, "Unsaved changes",
                                  "The project has changes that are not saved. Save them?",
                                  buttons, QMessageBox.StandardButton.Save)
    return {QMessageBox.StandardButton.Save: "save",
            QMessageBox.StandardButton.Discard: "discard"}.get(answer, "cancel")


class AuthoringWindow(QMainWindow):
    """The authoring workspace (objectName ``authoringWindow``)."""

    def __init__(self, workspace: Workspace | None = None, parent: QWidget | None = None
                 ) -> None:
        super().__init__(parent)
        self.setObjectName("authoringWindow")
        self.resize(1280, 860)
        self.ws = workspace if workspace is not None else Workspace()
        self.ask_unsaved: Callable[[QWidget], str] = ask_unsaved_changes
        self.ask_path: Callable[[QWidget, str, str, bool], str] = ask_path
        self.notices: list[str] = []
        self.runner = JobRunner(self)
        self.runner.progress.connect(self._progress)
        self.runner.finished.connect(self._finished)
        self.runner.failed.connect(self._failed)
        self.runner.cancelled.connect(self._cancelled)
        self._done: Callable[[Any], None] | None = None
        self._validate_timer = QTimer(self)
        self._validate_timer.setSingleShot(True)
        self._validate_timer.setInterval(250)
        self._validate_timer.timeout.connect(self.validate)
        self.pages: list[Any] = [DataPage(self), InputsPage(self), AssessPage(self),
                                 AboutPage(self), DecisionPage(self), PublishPage(self)]
        self._build()
        self._menus()
        self.refresh_all()

    # -- layout ---------------------------------------------------------------------------------

    def _build(self) -> None:
        central = QWidget()
        col = QVBoxLayout(central)
        col.setContentsMargins(6, 6, 6, 6)
        notice_row = QHBoxLayout()
        self.notice = QLabel("")
        self.notice.setObjectName("notice")
        self.notice.setWordWrap(True)
        box(self.notice, "caution")
        self.dismiss = QPushButton("&Dismiss")
        self.dismiss.setObjectName("dismissNotice")
        self.dismiss.clicked.connect(self._dismiss)
        notice_row.addWidget(self.notice, 1)
        notice_row.addWidget(self.dismiss)
        col.addLayout(notice_row)
        self._dismiss()
        self.synthetic = QLabel(f"{SYMBOL['synthetic']} SYNTHETIC DEMONSTRATION MATERIAL: "
                                "made-up data and model, not for clinical use")
        self.synthetic.setObjectName("syntheticBanner")
        self.synthetic.setWordWrap(True)
        box(self.synthetic, "marker")
        col.addWidget(self.synthetic)
        split = QSplitter()
        self.steps = QListWidget()
        self.steps.setObjectName("steps")
        self.steps.setAccessibleName("Steps")
        for k, step in enumerate(STEPS, start=1):
            self.steps.addItem(f"{k}  {STEP_TITLES[step]}")
        longest = f"6  {STEP_TITLES['about']}  {SYMBOL['error']} 99 problems"
        self.steps.setMinimumWidth(self.steps.fontMetrics().horizontalAdvance(longest) + 24)
        self.stack = QStackedWidget()
        self.stack.setObjectName("stepPages")
        for page in self.pages:
            self.stack.addWidget(page)
        self.steps.currentRowChanged.connect(self._go)
        split.addWidget(self.steps)
        split.addWidget(self.stack)
        split.setStretchFactor(1, 1)
        width = self.steps.minimumWidth()
        split.setSizes([width + 40, max(self.width() - width - 40, 400)])
        col.addWidget(split, 1)
        col.addWidget(self._job_panel())
        self.setCentralWidget(central)
        self.steps.setCurrentRow(0)

    def _job_panel(self) -> QWidget:
        panel = JobPanel()
        self.job_text, self.job_progress = panel.text, panel.progress
        self.cancel_button = panel.cancel
        self.cancel_button.clicked.connect(self.cancel_job)
        self.job_panel = panel
        return panel

    def _menus(self) -> None:
        menu = self.menuBar().addMenu("&File")
        for text, slot, key in (("&New project", self.new_project, QKeySequence.StandardKey.New),
                                ("&Open project…", self.open_project_dialog,
                                 QKeySequence.StandardKey.Open),
                                ("&Save project", self.save, QKeySequence.StandardKey.Save),
                                ("Save project &as…", self.save_as,
                                 QKeySequence.StandardKey.SaveAs),
                                ("&Quit", self.close, QKeySequence.StandardKey.Quit)):
            self._action(menu, text, slot, key)
        go = self.menuBar().addMenu("&Go")
        self._action(go, "&Next step", lambda: self.go_to(self.steps.currentRow() + 1),
                     QKeySequence("Ctrl+PgDown"))
        self._action(go, "&Previous step", lambda: self.go_to(self.steps.currentRow() - 1),
                     QKeySequence("Ctrl+PgUp"))
        for k, step in enumerate(STEPS):
            self._action(go, f"&{k + 1} {STEP_TITLES[step]}", functools.partial(self.go_to, k),
                         QKeySequence(f"Alt+{k + 1}"))
        self._action(self.menuBar().addMenu("&Help"), "&About the workspace", lambda: self.tell(
            "About", "calcbuilder authoring workspace: every number comes from the same "
            "functions as the command line; the recipe is written beside the project."), None)

    def _action(self, menu: Any, text: str, slot: Callable[[], Any],
                key: QKeySequence | QKeySequence.StandardKey | None) -> QAction:
        action = QAction(text, self)
        if key is not None:
            action.setShortcut(key)
        action.triggered.connect(lambda _=False: slot())
        menu.addAction(action)
        return action

    # -- steps ----------------------------------------------------------------------------------

    def go_to(self, index: int) -> None:
        if 0 <= index < len(self.pages):
            self.steps.setCurrentRow(index)

    def page(self, step: str) -> Any:
        return self.pages[STEPS.index(step)]

    def _go(self, index: int) -> None:
        if index < 0:
            return
        self.stack.setCurrentIndex(index)
        page = self.pages[index]
        if page.step in ("decision", "publish"):
            page.refresh()
        self.validate()

    # -- edits and checks -----------------------------------------------------------------------

    def changed(self, *, structure: bool = False) -> None:
        """An edit was made: mark unsaved, check again soon (rebuild the input cards now)."""
        self.ws.touch()
        self._title()
        if structure:
            self.ws.inputs.sync_columns(self.ws.data.predictors,
                                        {s.name: s for s in self.ws.data.summaries()}
                                        if self.ws.data.loaded else {})
            self.page("inputs").refresh()
        self._validate_timer.start()

    def validate(self) -> None:
        """Check the recipe and the data once; show every problem beside its field."""
        self._validate_timer.stop()
        problems = self.ws.recipe_problems()
        by_step = self.ws.problems_by_step(problems)
        for page in self.pages:
            page.show_problems(by_step[page.step])
        self.page("data").show_check(self.ws.data_check())
        self.page("inputs").refresh_developed()
        self.page("assess").plots.set_marks(self.ws.decision.marks())
        for k, step in enumerate(STEPS):
            n = len(by_step[step]) if step != "publish" else 0
            text = f"{k + 1}  {STEP_TITLES[step]}"
            if n:
                text += f"  {SYMBOL['error']} {n} problem{'s' if n != 1 else ''}"
            item = self.steps.item(k)
            item.setText(text)
            item.setToolTip(text)

    def refresh_all(self) -> None:
        """Show the whole workspace (after New or Open)."""
        for page in self.pages:
            page.refresh()
        self._title()
        self.validate()

    def _title(self) -> None:
        name = self.ws.project_path.name if self.ws.project_path else "new project"
        mark = " *" if self.ws.dirty else ""
        synthetic = " — SYNTHETIC" if self.ws.about.synthetic else ""
        self.setWindowTitle(f"calcbuilder authoring — {name}{mark}{synthetic}")
        self.synthetic.setVisible(self.ws.about.synthetic)

    # -- messages -------------------------------------------------------------------------------

    def tell(self, title: str, text: str) -> None:
        """Show a message at the top of the window (not modal; Dismiss hides it)."""
        self.notices.append(f"{title}: {text}")
        self.notice.setText(f"{SYMBOL['info']} {title}\n{text}")
        self.notice.show()
        self.dismiss.show()

    def _dismiss(self) -> None:
        self.notice.clear()
        self.notice.hide()
        self.dismiss.hide()

    # -- long work ------------------------------------------------------------------------------

    def run_job(self, name: str, work: Callable[[Any], Any], done: Callable[[Any], None]
                ) -> bool:
        if not self.runner.start(name, work):
            self.tell("Busy", f"{self.runner.name} is still running; wait or cancel it.")
            return False
        self._done = done
        self.job_text.setText(f"{name}…")
        self.job_progress.setRange(0, 0)
        self.cancel_button.setEnabled(True)
        self.job_panel.show()
        return True

    def cancel_job(self) -> None:
        self.cancel_button.setEnabled(False)
        self.job_text.setText(f"{self.runner.name}: cancelling…")
        self.runner.cancel()

    def _progress(self, what: str, done: int, total: int, left: str) -> None:
        self.job_progress.setRange(0, max(total, 1))
        self.job_progress.setValue(done)
        self.job_text.setText(f"{self.runner.name}: {what} {done:,} of {total:,}"
                              + (f" — {left}" if left else ""))

    def _finished(self, name: str, result: Any) -> None:
        self.job_panel.hide()
        done, self._done = self._done, None
        if done is not None:
            try:
                done(result)
            except CalcbuilderError as exc:
                self.tell(f"{name} could not be finished", str(exc))
                return
        self.statusBar().showMessage(f"{name}: done", 8000)

    def _failed(self, name: str, exc: object) -> None:
        self.job_panel.hide()
        self._done = None
        self.tell(f"{name} failed; nothing was changed or written", str(exc))

    def _cancelled(self, name: str) -> None:
        self.job_panel.hide()
        self._done = None
        self.tell(f"{name} cancelled", "Nothing was changed or written.")

    # -- the project file -----------------------------------------------------------------------

    def save_first(self) -> bool:
        return self.ws.project_path is not None or self.save_as()

    def save(self) -> bool:
        if self.ws.project_path is None:
            return self.save_as()
        return self._save(self.ws.project_path)

    def save_as(self) -> bool:
        name = self.ask_path(self, "Save the project", PROJECT_FILTER, True)
        if not name:
            return False
        path = Path(name)
        if not path.name.endswith(PROJECT_SUFFIX):
            path = path.with_name(path.name.removesuffix(".json") + PROJECT_SUFFIX)
        return self._save(path)

    def _save(self, path: Path) -> bool:
        try:
            save_project(self.ws, path)
        except CalcbuilderError as exc:
            self.tell("The project was not saved", str(exc))
            return False
        self._title()
        self.page("publish").refresh()
        self.statusBar().showMessage(f"Saved {path.name}", 8000)
        return True

    def _may_discard(self) -> bool:
        if not self.ws.dirty:
            return True
        answer = self.ask_unsaved(self)
        if answer == "save":
            return self.save()
        return answer == "discard"

    def new_project(self) -> None:
        if self._may_discard():
            self.ws = Workspace()
            self.refresh_all()

    def open_project_dialog(self) -> None:
        name = self.ask_path(self, "Open a project", PROJECT_FILTER, False)
        if name:
            self.open_project(Path(name))

    def open_project(self, path: Path) -> bool:
        if not self._may_discard():
            return False
        try:
            opened = load_project(path)
        except CalcbuilderError as exc:
            self.tell("The project could not be opened", str(exc))
            return False
        self.ws = opened.workspace
        self.refresh_all()
        if opened.notes:
            self.tell("Opened with notes", "\n".join(opened.notes))
        return True

    def closeEvent(self, event: QCloseEvent) -> None:  # noqa: N802 (Qt override)
        if self.runner.busy:
            self.runner.cancel()
            self.runner.wait(10000)
        if not self._may_discard():
            event.ignore()
            return
        self.page("publish").cleanup()
        event.accept()

    def settle(self) -> None:
        """Let layouts settle and draw every figure (screenshots, tests)."""
        from PySide6.QtWidgets import QApplication

        for _ in range(3):
            QApplication.processEvents()
        for figure in (self.page("assess").plots, self.page("decision").curve):
            figure.flush()
        if self.page("publish").preview is not None:
            self.page("publish").preview.settle()
        for _ in range(6):
            QApplication.processEvents()
