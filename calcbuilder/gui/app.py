"""The clinic form's window: open a calculator, wire the panels to the session.

Widget tree (objectNames)::

    ClinicWindow "clinicForm"            menus File (Open, Print, Save, Clear, Quit), Help (About)
      HeaderStrip "header"               title, version, syntheticMarker, intendedUse,
                                         signatureState, reviewBy, fingerprint, cautionLine,
                                         trustBanner, refusal
      QStackedWidget "pages"
        QLabel "welcome"                 before a file is open, or after a refusal
        FormBody "formBody"
          QSplitter "columns"
            QScrollArea "inputsArea"     QLineEdit "patientRef"; InputsPanel "inputs": per input
                                         "<id>" (QLineEdit or QComboBox), "<id>_unit",
                                         "<id>_canonical", "<id>_message"
            QScrollArea "riskArea"       RiskPanel "riskPanel": riskQuestion, risk, riskInterval,
                                         frequency, riskStatus, riskExtrapolation, cautions,
                                         iconArray, cohortPosition, riskPosition
            QTabWidget "sections"
              "thresholdArea"            ThresholdPanel "thresholdPanel": threshold,
                                         thresholdNumber, thresholdRatio, thresholdMessage,
                                         thresholdMeaning, reasonableRange, riskVersusThreshold,
                                         thresholdWarnings, netBenefit, evidenceSource,
                                         decisionCurve
              "whyArea"                  WhyPanel "whyPanel": whyIntro, contributions,
                                         contributionsFigure, equationButton, equation
              "evidenceArea"             EvidencePanel "evidencePanel": evidenceSummary
                                         (evidence_<id> boxes), calibrationSet,
                                         calibrationFigure, limitations
          QWidget "actionBar"            printButton, saveButton, clearButton, aboutButton

The window is the one controller: panels emit what the user typed, the window
hands it to the :class:`ClinicSession` and shows the session's result again.
"""

from __future__ import annotations

import sys
from collections.abc import Callable
from pathlib import Path

from PySide6.QtCore import Qt, QTimer
from PySide6.QtGui import QAction, QDragEnterEvent, QDropEvent, QKeySequence
from PySide6.QtWidgets import (
    QApplication,
    QFileDialog,
    QMainWindow,
    QMessageBox,
    QStackedWidget,
    QVBoxLayout,
    QWidget,
)

from ..calc.document import LoadedCalculator, load_calculator
from ..calc.keys import TrustedKeys
from ..calc.signing import TrustState
from ..clinic.session import ClinicSession
from ..clinic.threshold import Threshold
from ..errors import CalcbuilderError
from . import actions
from .header import HeaderInfo, HeaderStrip
from .panels import FormBody, InputView, welcome_label

__all__ = ["ClinicWindow", "dropped_calculator", "make_app", "run_form"]

_SHOWN_LINES = 8  # lines of a refusal shown in the header
OPEN_FILTER = "Calculator files (*.calc.json);;JSON files (*.json);;All files (*)"


def make_app(argv: list[str] | None = None) -> QApplication:
    """The running QApplication, created when there is none."""
    app = QApplication.instance()
    if app is None:
        app = QApplication(argv if argv is not None else sys.argv[:1])
        app.setApplicationName("calcbuilder clinic form")
    assert isinstance(app, QApplication)
    return app


def dropped_calculator(event: QDragEnterEvent | QDropEvent) -> Path | None:
    """The first local ``*.json`` file in a drag, or None."""
    data = event.mimeData()
    if not data.hasUrls():
        return None
    for url in data.urls():
        if url.isLocalFile() and url.toLocalFile().lower().endswith(".json"):
            return Path(url.toLocalFile())
    return None


def header_info(session: ClinicSession) -> HeaderInfo:
    """What the header shows, all from the session (banners without the synthetic one)."""
    from ..clinic.session import SYNTHETIC_NOTICE

    about, loaded = session.calculator.about, session.loaded
    return HeaderInfo(
        title=about.title, version=about.version, intended_use=about.intended_use,
        fingerprint=loaded.fingerprint, state=loaded.state.value,
        state_message=loaded.verification.message, review_by=about.review_by.isoformat(),
        expired=loaded.expired, synthetic=session.synthetic,
        banners=tuple(b for b in session.banners if b != SYNTHETIC_NOTICE))


class ClinicWindow(QMainWindow):
    """The clinic form (objectName ``clinicForm``)."""

    def __init__(self, *, trusted: TrustedKeys | None = None, parent: QWidget | None = None
                 ) -> None:
        super().__init__(parent)
        self.setObjectName("clinicForm")
        self.setWindowTitle("calcbuilder clinic form")
        self.setAcceptDrops(True)
        self.resize(1360, 900)
        self._trusted = trusted if trusted is not None else TrustedKeys()
        self.session: ClinicSession | None = None
        self.body: FormBody | None = None
        self.header = HeaderStrip()
        self.pages = QStackedWidget()
        self.pages.setObjectName("pages")
        self.welcome = welcome_label()
        self.pages.addWidget(self.welcome)
        central = QWidget()
        box = QVBoxLayout(central)
        box.setContentsMargins(0, 0, 0, 0)
        box.setSpacing(0)
        box.addWidget(self.header)
        box.addWidget(self.pages, 1)
        self.setCentralWidget(central)
        self._focus_timer = QTimer(self)
        self._focus_timer.setSingleShot(True)
        self._focus_timer.setInterval(0)
        self._focus_timer.timeout.connect(self._focus_first_input)
        self._menus()

    # --- menus ------------------------------------------------------------------------

    def _menus(self) -> None:
        file_menu = self.menuBar().addMenu("&File")
        self._action(file_menu, "&Open calculator…", self.ask_open, QKeySequence.StandardKey.Open)
        self.print_action = self._action(file_menu, "&Print risk sheet…", self.print_sheet,
                                         QKeySequence.StandardKey.Print)
        self.save_action = self._action(file_menu, "&Save risk sheet as PDF…", self.save_sheet,
                                        QKeySequence.StandardKey.Save)
        self.clear_action = self._action(file_menu, "&Clear patient values", self.clear,
                                         QKeySequence("Ctrl+Shift+X"))
        file_menu.addSeparator()
        self._action(file_menu, "&Quit", self.close, QKeySequence.StandardKey.Quit)
        help_menu = self.menuBar().addMenu("&Help")
        self._action(help_menu, "&About this calculator", self.about)
        self._enable_actions()

    def _action(self, menu: object, text: str, slot: object,
                shortcut: QKeySequence | QKeySequence.StandardKey | None = None) -> QAction:
        action = QAction(text, self)
        if shortcut is not None:
            action.setShortcut(shortcut)
        action.triggered.connect(slot)
        menu.addAction(action)  # type: ignore[attr-defined]
        return action

    def _enable_actions(self) -> None:
        """Clear needs an open form; print and save also need a risk (see :meth:`refresh`)."""
        ready = self.session is not None
        for action in (self.print_action, self.save_action, self.clear_action):
            action.setEnabled(ready)

    # --- opening ----------------------------------------------------------------------

    def ask_open(self) -> None:
        name, _filter = QFileDialog.getOpenFileName(self, "Open a calculator file", "",
                                                    OPEN_FILTER)
        if name:
            self.open_path(name)

    def open_path(self, path: str | Path) -> bool:
        """Open a calculator file; a refused file shows why and computes nothing."""
        self._close_form()
        try:
            loaded = load_calculator(path, trusted=self._trusted)
        except CalcbuilderError as exc:
            self._refuse(Path(path).name, str(exc))
            return False
        except OSError as exc:
            self._refuse(Path(path).name, f"the file could not be read ({exc.strerror or exc}).")
            return False
        if loaded.state is TrustState.TAMPERED:
            self._refuse(Path(path).name, loaded.verification.message, loaded.fingerprint)
            return False
        self._show_form(loaded)
        return True

    def _refuse(self, file_name: str, explanation: str, fingerprint: str | None = None
                ) -> None:
        lines = explanation.splitlines()
        if len(lines) > _SHOWN_LINES:  # the full list is in the tooltip
            more = len(lines) - _SHOWN_LINES
            explanation = "\n".join([*lines[:_SHOWN_LINES], f"  … and {more} more problem(s)"])
        self.header.show_refused(file_name, explanation, fingerprint)
        self.header.refusal.setToolTip("\n".join(lines))
        self.welcome.setText("No risk can be computed with this file. Open another "
                             "calculator file, or ask its author for a fresh copy.")
        self.pages.setCurrentWidget(self.welcome)
        self._enable_actions()

    def _close_form(self) -> None:
        if self.body is not None:  # gone at once from the widget tree, deleted soon after
            self.pages.removeWidget(self.body)
            self.body.hide()
            self.body.setParent(None)
            self.body.deleteLater()
        self.body = None
        self.session = None

    def _show_form(self, loaded: LoadedCalculator) -> None:
        session = ClinicSession(loaded)
        self.session = session
        self.header.show_info(header_info(session))
        body = FormBody(session)
        body.inputs.value_edited.connect(self._value_edited)
        body.inputs.unit_changed.connect(self._unit_changed)
        body.patient_ref.textEdited.connect(session.set_patient_ref)
        body.print_button.clicked.connect(self.print_sheet)
        body.save_button.clicked.connect(self.save_sheet)
        body.clear_button.clicked.connect(self.clear)
        body.about_button.clicked.connect(self.about)
        self.body = body
        self.pages.addWidget(body)
        self.pages.setCurrentWidget(body)
        self._enable_actions()
        self.refresh()
        self._focus_timer.start()  # focus the first input once the new page is on screen

    def _focus_first_input(self) -> None:
        first = self.body.inputs.first_widget() if self.body is not None else None
        if first is not None:
            first.setFocus(Qt.FocusReason.OtherFocusReason)

    # --- editing ----------------------------------------------------------------------

    def _value_edited(self, input_id: str, raw: object) -> None:
        assert self.session is not None
        self.session.set_value(input_id, raw)
        self.refresh()

    def _unit_changed(self, input_id: str, unit: str) -> None:
        assert self.session is not None
        self.session.set_unit(input_id, unit)
        self.refresh()

    def refresh(self) -> None:
        """Show the session's current result everywhere (called after every change)."""
        if self.session is None or self.body is None:
            return
        result = self.session.result()
        messages = result.messages
        for spec in self.session.inputs:
            checked = result.check.checked[spec.id]
            unit = spec.unit_named(checked.unit) if checked.unit else None
            self.body.inputs.show_view(spec.id, InputView(
                messages=messages.get(spec.id, ()), canonical=_number(checked.value),
                converted=unit is not None and not unit.is_identity))
        self.body.show_result(result)
        for action in (self.print_action, self.save_action):
            action.setEnabled(result.risk is not None)

    def set_value(self, input_id: str, raw: str) -> None:
        """Type ``raw`` into an input's widget as a user would (command line, scripts)."""
        assert self.body is not None
        self.body.inputs.enter(input_id, raw)

    def set_unit(self, input_id: str, unit: str) -> None:
        assert self.body is not None
        self.body.inputs.choose_unit(input_id, unit)

    def set_threshold(self, threshold: Threshold) -> None:
        assert self.body is not None
        self.body.threshold.set_threshold(threshold)

    # --- actions ----------------------------------------------------------------------

    def clear(self) -> None:
        """Wipe every patient value and the patient reference, on screen and in the session."""
        if self.session is None or self.body is None:
            return
        self.session.clear()
        self.body.clear()
        self.refresh()

    def print_sheet(self) -> None:
        session, body = self.session, self.body
        if session is not None and body is not None:
            self._guarded(lambda: actions.ask_and_print(self, session, body.threshold.current()))

    def save_sheet(self) -> None:
        session, body = self.session, self.body
        if session is not None and body is not None:
            self._guarded(lambda: actions.ask_and_save(self, session, body.threshold.current()))

    def about(self) -> None:
        actions.show_about(self, self.session)

    def _guarded(self, work: Callable[[], object]) -> None:
        try:
            work()
        except (CalcbuilderError, OSError) as exc:
            QMessageBox.warning(self, "The risk sheet was not made", str(exc))

    # --- drag and drop ----------------------------------------------------------------

    def dragEnterEvent(self, event: QDragEnterEvent) -> None:  # noqa: N802 (Qt override)
        if dropped_calculator(event) is not None:
            event.acceptProposedAction()

    def dropEvent(self, event: QDropEvent) -> None:  # noqa: N802 (Qt override)
        path = dropped_calculator(event)
        if path is not None:
            event.acceptProposedAction()
            self.open_path(path)

    def flush(self) -> None:
        """Draw every pending figure now (screenshots, printing the screen, tests)."""
        if self.body is not None:
            self.body.flush()

    def settle(self) -> None:
        """Let layouts settle and draw every figure (before a screenshot)."""
        app = make_app()
        for _ in range(3):
            app.processEvents()
        self.flush()
        for _ in range(6):
            app.processEvents()


def _number(value: object) -> float | None:
    return float(value) if isinstance(value, int | float) and not isinstance(value, bool) \
        else None


def run_form(path: str | Path | None = None, *, trusted: TrustedKeys | None = None) -> int:
    """Open the form (with ``path`` when given) and run until it is closed."""
    app = make_app()
    window = ClinicWindow(trusted=trusted)
    if path is not None:
        window.open_path(path)
    window.show()
    return int(app.exec())
