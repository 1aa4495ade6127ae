"""Step 6 page: preview the clinic form, sign and write the calculator, write the evidence report.

A view over :class:`calcbuilder.authoring.PublishStep`. The preview IS the clinic
form (:class:`calcbuilder.gui.app.ClinicWindow`, unchanged) opening the file:
before publishing an unsigned preview copy in a temporary folder (the form then
shows its "unsigned" banner, as a clinic would), after publishing the written
file with the author's public key trusted. Publishing runs in the worker: the
recorded stages again when texts changed since the fit, then signing and
writing (:func:`calcbuilder.authoring.publish_step.sign_and_write`) and the
report. Cancelling before the writing starts leaves no file.
"""

from __future__ import annotations

import shutil
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import Any

from PySide6.QtCore import Qt
from PySide6.QtGui import QAction
from PySide6.QtWidgets import (
    QComboBox,
    QGridLayout,
    QHBoxLayout,
    QLabel,
    QPushButton,
    QVBoxLayout,
    QWidget,
)

from ...authoring.pipeline import run_stages
from ...authoring.publish_step import (
    PAGES,
    SHORT_PASSPHRASE,
    Published,
    create_key,
    key_needs_passphrase,
    open_key,
    sign_and_write,
    write_report,
)
from ...errors import CalcbuilderError
from ...stats.errors import CancelledError
from ..look import SYMBOL, box
from .dialogs import UNENCRYPTED, NewKey, ask_new_key, ask_passphrase
from .host import Host
from .widgets import (
    FieldSet,
    PathField,
    ProblemBox,
    drop,
    grid_row,
    note,
    page_scroll,
    section,
)

__all__ = ["PublishPage"]


class PublishPage(QWidget):
    """Step 6 (objectName ``publishPage``)."""

    step = "publish"

    def __init__(self, host: Host) -> None:
        super().__init__()
        self.setObjectName("publishPage")
        self.host = host
        self.fields = FieldSet()
        self.ask_passphrase: Callable[[QWidget, Path], str | None] = ask_passphrase
        self.ask_new_key: Callable[[QWidget, Path], NewKey | None] = ask_new_key
        self._temp = Path(tempfile.mkdtemp(prefix="calcbuilder-preview-"))
        self.preview: Any = None
        self.separate: Any = None
        self._shown: tuple[Path, Path | None] | None = None
        inner = QWidget()
        col = QVBoxLayout(inner)
        col.addWidget(section("Step 6 · Publish"))
        col.addWidget(note("Publishing signs the calculator with your key and writes it with "
                           "its evidence report. Give the public key (.pub) to the clinics."))
        self.readiness = ProblemBox("publishProblems")
        col.addWidget(self.readiness)
        self.plan = note("", "publishPlan")
        col.addWidget(self.plan)
        col.addLayout(self._fields())
        col.addLayout(self._buttons())
        self.result = QLabel("")
        self.result.setObjectName("publishResult")
        self.result.setWordWrap(True)
        self.result.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.result.hide()
        col.addWidget(self.result)
        col.addWidget(section("The clinic form, as the clinician sees it"))
        self.preview_note = note("Press 'Preview the clinic form' to open the calculator in "
                                 "the clinic form here.", "previewNote")
        col.addWidget(self.preview_note)
        self.preview_holder = QVBoxLayout()
        col.addLayout(self.preview_holder)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(0, 0, 0, 0)
        outer.addWidget(page_scroll(inner, "publishScroll"))

    def _fields(self) -> QGridLayout:
        grid = QGridLayout()
        self.output = PathField("publishOutput", "Calculator file", title="Write the calculator",
                                filter_text="Calculator files (*.calc.json)", save=True)
        self.key = PathField("publishKey", "Private signing key", title="Your signing key",
                             filter_text="Private keys (*.key);;All files (*)")
        self.report = PathField("publishReport", "Evidence report", title="Write the report",
                                filter_text="PDF files (*.pdf)", save=True)
        self.output.chosen.connect(lambda p: self._set("output", p))
        self.key.chosen.connect(lambda p: self._set("key_path", p))
        self.report.chosen.connect(lambda p: self._set("report_path", p))
        self.page_size = QComboBox()
        self.page_size.setObjectName("publishPage_size")
        for page in PAGES:
            self.page_size.addItem(page, page)
        self.page_size.activated.connect(lambda i: self._set("page", self.page_size.itemData(i)))
        row = grid_row(grid, 0, "&Calculator file (.calc.json)", self.output,
                       self.fields.add("publish.output", self.output.edit))
        row = grid_row(grid, row, "Signing &key (.key; its .pub beside it)", self.key,
                       self.fields.add("publish.key", self.key.edit))
        new_key = QPushButton("Create a &new signing key…")
        new_key.setObjectName("newKeyButton")
        new_key.clicked.connect(self.new_key)
        grid.addWidget(new_key, row, 1)
        row += 1
        row = grid_row(grid, row, "Evidence &report (.pdf)", self.report,
                       self.fields.add("publish.report", self.report.edit))
        grid_row(grid, row, "Report page si&ze", self.page_size,
                 self.fields.add("publish.page", self.page_size))
        return grid

    def _buttons(self) -> QHBoxLayout:
        buttons = QHBoxLayout()
        self.preview_button = QPushButton("&Preview the clinic form")
        self.preview_button.setObjectName("previewButton")
        self.preview_button.clicked.connect(self.show_preview)
        self.publish_button = QPushButton("Sign and &publish")
        self.publish_button.setObjectName("publishButton")
        self.publish_button.clicked.connect(self.publish)
        self.window_button = QPushButton("Open the preview in its own &window")
        self.window_button.setObjectName("previewWindowButton")
        self.window_button.setEnabled(False)
        self.window_button.clicked.connect(self.preview_window)
        buttons.addWidget(self.preview_button)
        buttons.addWidget(self.window_button)
        buttons.addWidget(self.publish_button)
        buttons.addStretch(1)
        return buttons

    # -- fields ---------------------------------------------------------------------------------

    def _set(self, attr: str, value: Any) -> None:
        setattr(self.host.ws.publish, attr, value)
        self.host.changed()

    def new_key(self) -> None:
        """Create a key pair (dialog), then use it."""
        folder = (self.host.ws.project_path.parent if self.host.ws.project_path
                  else Path.home())
        wanted = self.ask_new_key(self, folder)
        if wanted is None:
            return
        try:
            files = create_key(wanted.folder, wanted.name or "calcbuilder-signing",
                               wanted.passphrase)
        except CalcbuilderError as exc:
            self.host.tell("No key was created", str(exc))
            return
        self.host.ws.publish.key_path = files.private_key
        self.key.set_path(files.private_key)
        self.host.changed()
        warning = ""
        if wanted.passphrase is None:
            warning = f"\n{SYMBOL['warning']} {UNENCRYPTED}"
        elif len(wanted.passphrase) < SHORT_PASSPHRASE:
            warning = (f"\n{SYMBOL['warning']} The passphrase is shorter than "
                       f"{SHORT_PASSPHRASE} characters; prefer a longer one.")
        self.host.tell("Signing key created", f"Private key: {files.private_key}\nPublic key: "
                       f"{files.public_key}\nKey fingerprint: {files.key_fingerprint}{warning}")

    # -- preview --------------------------------------------------------------------------------

    def _clinic(self, public_key: Path | None, parent: QWidget | None) -> Any:
        from ...calc.keys import TrustedKeys
        from ..app import ClinicWindow

        extra = (public_key,) if public_key is not None and public_key.is_file() else ()
        trusted = TrustedKeys(self._temp / "no-trusted-keys", extra_files=extra)
        return ClinicWindow(trusted=trusted, parent=parent)

    def preview_window(self) -> None:
        """The same file in the clinic form as a window of its own, at its usual size."""
        if self._shown is None:
            return
        self.separate = self._clinic(self._shown[1], None)
        self.separate.open_path(self._shown[0])
        self.separate.show()

    def _form(self, path: Path, public_key: Path | None) -> None:
        if self.preview is not None:
            self.preview_holder.removeWidget(self.preview)
            drop(self.preview)
        form = self._clinic(public_key, self)
        form.setWindowFlag(Qt.WindowType.Widget, True)
        form.menuBar().hide()
        for action in form.findChildren(QAction):  # its shortcuts stay inside the preview
            action.setShortcutContext(Qt.ShortcutContext.WidgetWithChildrenShortcut)
        form.setMinimumHeight(form.fontMetrics().lineSpacing() * 40)
        self.preview = form
        self.preview_holder.addWidget(form)
        form.open_path(path)
        form.show()
        self._shown = (path, public_key)
        self.window_button.setEnabled(True)
        self.preview_note.setText(f"{path.name} opened in the clinic form below.")

    def show_preview(self) -> None:
        """Open the current calculator (unsigned copy) in the clinic form."""
        from ...calc.document import Calculator, save_calculator

        doc = self.host.ws.assess.document
        if doc is None:
            self.host.tell("Nothing to preview", "Fit the model (or import one) in step 3.")
            return
        path = self._temp / "preview (unsigned).calc.json"
        save_calculator(Calculator.from_dict(doc), path)
        self._form(path, None)

    # -- publishing -----------------------------------------------------------------------------

    def publish(self) -> None:
        ws = self.host.ws
        blocking = self.blocking()
        if blocking:
            self.host.tell("Not ready to publish", "\n".join(blocking))
            return
        if not self.host.save_first():
            return
        try:
            plan = ws.publish_plan()
            seed, bands, _ = ws.assess.numbers()
        except (CalcbuilderError, ValueError) as exc:
            self.host.tell("Not ready to publish", str(exc))
            return
        pub = ws.publish
        assert pub.key_path is not None
        assert pub.output is not None
        passphrase = None
        if key_needs_passphrase(pub.key_path):
            passphrase = self.ask_passphrase(self, pub.key_path)
            if passphrase is None:
                return
        try:
            key = open_key(pub.key_path, passphrase)
        except CalcbuilderError as exc:
            self.host.tell("The key could not be opened", str(exc))
            return
        document = ws.assess.document
        output, report, page, public = pub.output, pub.report_path, pub.page, pub.public_key
        assert public is not None

        def work(progress: Callable[[str, int, int], bool]) -> tuple[Published, Any]:
            rerun = None
            doc = document
            if plan is not None:
                rerun = run_stages(plan, band_boot=bands, seed=seed, report=progress)
                doc = rerun.document
            if not progress("Signing and writing", 0, 1):
                raise CancelledError("cancelled before writing")
            assert doc is not None
            done = sign_and_write(doc, key, output)
            if report is not None:
                done = write_report(done, public, report, page)
            return done, rerun

        self.host.run_job("Publishing", work, lambda result: self._published(plan, *result))

    def _published(self, plan: list[dict[str, Any]] | None, done: Published,
                   rerun: Any) -> None:
        ws = self.host.ws
        if plan is not None and rerun is not None:
            basis, model_basis = ws.bases()
            ws.assess.start(rerun, plan[0], basis=basis, model_basis=model_basis,
                            draft_texts=False)
            ws.assess.stages = list(plan)
        ws.publish.last = done
        self.host.changed()
        lines = [f"{SYMBOL['ok']} Signed calculator written to {done.calculator}",
                 f"File fingerprint: {done.file_fingerprint}",
                 f"Key fingerprint: {done.key_fingerprint} (signed {done.signed_at})"]
        if done.report is not None:
            lines.append(f"Evidence report: {done.report} ({done.report_pages} pages)")
        if ws.about.synthetic:
            lines.append("SYNTHETIC DEMONSTRATION MATERIAL - not for clinical use")
        self.result.setText("\n".join(lines))
        box(self.result, "plain")
        self.result.show()
        self._form(done.calculator, ws.publish.public_key)

    # -- showing --------------------------------------------------------------------------------

    def blocking(self, *, fields: bool = True) -> list[str]:
        """Everything that stops publishing, in words (``fields``: also this page's fields)."""
        ws = self.host.ws
        out = []
        by_step = ws.problems_by_step()
        for step, problems in by_step.items():
            if problems and not (ws.source.importing and step in ("data",)):
                out.append(f"Step '{step}': {len(problems)} problem"
                           f"{'s' if len(problems) != 1 else ''} to fix first")
        if ws.assess.document is None:
            out.append("Fit the model (or import one) in step 3")
        elif ws.state() == "stale":
            out.append("The results of step 3 are out of date: fit again")
        if fields:
            out += [m for ms in ws.publish.problems().values() for m in ms]
        return out

    def refresh(self) -> None:
        ws = self.host.ws
        if ws.project_path is not None:
            ws.publish.suggest(ws.project_path.parent, ws.about.title or "calculator")
        pub = ws.publish
        self.output.set_path(pub.output)
        self.key.set_path(pub.key_path)
        self.report.set_path(pub.report_path)
        self.page_size.setCurrentIndex(max(0, self.page_size.findData(pub.page)))

    def show_problems(self, _problems: list[str]) -> None:
        ws = self.host.ws
        self.fields.show(ws.publish.problems())
        blocking = self.blocking(fields=False)
        self.readiness.show_problems(blocking, "Before publishing:" if blocking else "")
        state = ws.state()
        if state == "texts":
            stages = ", ".join(s["stage"] for s in ws.assess.stages)
            self.plan.setText(f"{SYMBOL['info']} Texts changed since the fit: publishing first "
                              f"runs {stages} again with the final recipe (same seed).")
        else:
            self.plan.setText("")

    def cleanup(self) -> None:
        """Remove the preview copies (the window calls this when closing)."""
        if self.separate is not None:
            self.separate.close()
        shutil.rmtree(self._temp, ignore_errors=True)
