"""The workspace window: cancelling long work, every message beside its field at once, the
unsaved-changes question on closing, and names on every control for assistive technology."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest
from PySide6.QtCore import QTimer
from PySide6.QtWidgets import (
    QAbstractButton,
    QComboBox,
    QLabel,
    QLineEdit,
    QPlainTextEdit,
    QTableWidget,
    QWidget,
)

from calcbuilder.authoring import Workspace, save_project
from calcbuilder.authoring.pipeline import run_stage
from calcbuilder.authoring.publish_step import create_key
from calcbuilder.gui.authoring.window import AuthoringWindow
from calcbuilder.gui.authoring.worker import time_left
from tests.authoring.conftest import click, find, message, type_named
from tests.authoring.demo import fill_workspace, write_cohorts

PASS = "another synthetic passphrase"


@pytest.fixture(scope="module")
def fitted_state(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    """The demo workspace's recipe fitted once (the document is reused by each test)."""
    tmp = tmp_path_factory.mktemp("fitted")
    files = write_cohorts(tmp)
    ws = fill_workspace(Workspace(), files["dev"], seed=3, band_boot=0, n_boot=10)
    save_project(ws, tmp / "fitted.cbproject.json")
    spec, draft = ws.first_spec()
    result = run_stage(spec, None, band_boot=0, seed=3, report=lambda *_: True)
    return {"files": files, "spec": spec, "result": result, "draft": draft}


def fitted_window(qtbot: Any, tmp_path: Path, fitted_state: dict[str, Any]) -> AuthoringWindow:
    ws = fill_workspace(Workspace(), fitted_state["files"]["dev"], seed=3, band_boot=0,
                        n_boot=10)
    save_project(ws, tmp_path / "work.cbproject.json")
    ws.first_spec()  # writes the recipe beside this project
    basis, model_basis = ws.bases()
    ws.assess.start(fitted_state["result"], fitted_state["spec"], basis=basis,
                    model_basis=model_basis, draft_texts=False)
    ws.mark_saved()
    window = AuthoringWindow(ws)
    window.ask_unsaved = lambda _p: "discard"  # closing at the end of a test never blocks
    qtbot.addWidget(window)
    window.show()
    return window


class Ticks:
    """A timer on the window's thread: if it keeps firing, the window is responsive."""

    def __init__(self) -> None:
        self.count = 0
        self.timer = QTimer()
        self.timer.setInterval(10)
        self.timer.timeout.connect(self._tick)
        self.timer.start()

    def _tick(self) -> None:
        self.count += 1


def test_cancelling_the_bootstrap_keeps_the_window_responsive_and_changes_nothing(
        qtbot: Any, tmp_path: Path, fitted_state: dict[str, Any]) -> None:
    window = fitted_window(qtbot, tmp_path, fitted_state)
    window.go_to(2)
    type_named(qtbot, window, "nBoot", "4000")
    files_before = sorted(tmp_path.iterdir())
    stages_before = list(window.ws.assess.stages)
    ticks = Ticks()
    click(qtbot, window, "bootstrapButton")
    assert window.runner.busy
    qtbot.waitUntil(lambda: window.job_progress.value() >= 2, timeout=60_000)
    seen = ticks.count
    qtbot.wait(150)
    assert ticks.count > seen  # the timer fired while the bootstrap ran
    assert window.runner.busy
    assert "of 4,000" in window.job_text.text()
    click(qtbot, window, "cancelJob")
    qtbot.waitUntil(lambda: not window.runner.busy, timeout=60_000)
    assert window.ws.assess.stages == stages_before
    assert "cancelled" in window.notices[-1]
    assert "Nothing was changed or written" in window.notices[-1]
    assert sorted(tmp_path.iterdir()) == files_before
    assert window.job_panel.isHidden()
    ticks.timer.stop()


def test_cancelling_a_publish_that_runs_the_stages_again_writes_no_file(
        qtbot: Any, tmp_path: Path, fitted_state: dict[str, Any]) -> None:
    window = fitted_window(qtbot, tmp_path, fitted_state)
    ws = window.ws
    ws.assess.stages.append({**window.ws.stage_spec("bootstrap"), "n_boot": 4000})
    window.go_to(3)
    type_named(qtbot, window, "about.title", "Delirium after joint replacement (synthetic, v2)")
    keys = create_key(tmp_path, "author", PASS)
    window.go_to(5)
    page = window.page("publish")
    page.key.set_path(keys.private_key, emit=True)
    page.ask_passphrase = lambda _p, _k: PASS
    assert ws.state() == "texts"
    click(qtbot, window, "publishButton")
    qtbot.waitUntil(lambda: "Bootstrap" in window.job_text.text(), timeout=120_000)
    click(qtbot, window, "cancelJob")
    qtbot.waitUntil(lambda: not window.runner.busy, timeout=60_000)
    assert ws.publish.output is not None
    assert not ws.publish.output.exists()
    assert ws.publish.report_path is not None
    assert not ws.publish.report_path.exists()
    assert ws.publish.last is None
    assert "Publishing cancelled" in window.notices[-1]
    ws.mark_saved()


def test_every_problem_shows_beside_its_field_at_once(
        qtbot: Any, tmp_path: Path, fitted_state: dict[str, Any]) -> None:
    window = fitted_window(qtbot, tmp_path, fitted_state)
    type_named(qtbot, window, "anticipated_r2_cs", "1.5")
    type_named(qtbot, window, "inputs[#1].knots", "12")
    type_named(qtbot, window, "inputs[#2].limit_low", "abc")
    type_named(qtbot, window, "inputs[#3].label", "")
    type_named(qtbot, window, "inputs[#8].alt_units", "mg/dL = 0")
    type_named(qtbot, window, "about.title", "")
    type_named(qtbot, window, "about.review_by", "2027-02-30")
    type_named(qtbot, window, "decision.default_threshold", "2")
    type_named(qtbot, window, "decision.range_high", "0.01")
    window.validate()
    shown = {
        "fit.anticipated_r2_cs": "strictly between 0 and 1",
        "inputs[#1].transform": "a knot count must be from 3 to 7 (got 12)",
        "inputs[#2].limits": "low: must be a number (got 'abc')",
        "inputs[#3].label": "must be non-empty text",
        "inputs[#8].alt_units": "factor: must be finite and non-zero",
        "about.title": "must be non-empty text",
        "about.review_by": "must be a calendar date",
        "decision.default_threshold": "must be a risk strictly between 0 and 1",
        "decision.reasonable_range": "low must be below high",
    }
    for key, text in shown.items():
        assert text in message(window, key), key
    assert message(window, "inputs[#4].label") == ""  # fields without problems stay quiet
    titles = [window.steps.item(k).text() for k in range(6)]
    assert titles[0].endswith("1 problem")
    assert titles[1].endswith("4 problems")
    assert titles[4].endswith("2 problems")
    assert titles[3].endswith("2 problems")
    assert titles[2] == "3  Fit and assess"
    assert find(window, QLabel, "assessState").text().startswith("✖ Out of date")
    type_named(qtbot, window, "inputs[#1].knots", "4")
    window.validate()
    assert message(window, "inputs[#1].transform") == ""
    window.ws.mark_saved()


def test_data_problems_are_listed_with_rows_and_columns(qtbot: Any, tmp_path: Path) -> None:
    dev = write_cohorts(tmp_path)["dev"]
    lines = dev.read_text("utf-8").splitlines()
    lines[3] = lines[3].replace(",137.0,", ",,", 1) if ",137.0," in lines[3] else lines[3]
    cells = lines[4].split(",")
    cells[4] = ""
    lines[4] = ",".join(cells)
    holed = tmp_path / "holed.csv"
    holed.write_text("\n".join(lines) + "\n", "utf-8")
    window = AuthoringWindow(fill_workspace(Workspace(), holed))
    window.ask_unsaved = lambda _p: "discard"
    qtbot.addWidget(window)
    window.validate()
    box = find(window, QLabel, "dataProblems")
    assert not box.isHidden()
    assert "missing values" in box.text()
    assert "'sodium'" in box.text()
    window.ws.data.complete_case = True
    window.validate()
    assert box.isHidden()
    assert "left out" in find(window, QLabel, "dataCheck").text()
    window.ws.mark_saved()


@pytest.mark.parametrize("answer", ["cancel", "discard", "save"])
def test_closing_with_unsaved_changes_asks(qtbot: Any, tmp_path: Path, answer: str) -> None:
    window = AuthoringWindow()
    qtbot.addWidget(window)
    window.show()
    asked: list[str] = []

    def ask(_parent: QWidget) -> str:
        asked.append(answer)
        return answer

    window.ask_unsaved = ask
    project = tmp_path / "answer.cbproject.json"
    window.ask_path = lambda *_a: str(project)
    type_named(qtbot, window, "dataset_name", "Something typed")
    assert window.ws.dirty
    assert window.windowTitle().endswith("new project *")
    closed = window.close()
    assert asked == [answer]
    assert closed is (answer != "cancel")
    assert project.exists() is (answer == "save")
    if answer == "cancel":
        assert window.isVisible()
        window.ws.mark_saved()


def test_closing_without_changes_does_not_ask(qtbot: Any) -> None:
    window = AuthoringWindow()
    qtbot.addWidget(window)
    window.show()
    window.ask_unsaved = lambda _p: pytest.fail("asked with nothing unsaved")
    assert window.close()


def _named(widget: QWidget, labels: list[QLabel]) -> bool:
    if widget.accessibleName().strip():
        return True
    if isinstance(widget, QAbstractButton) and widget.text().strip():
        return True
    return any(label.buddy() is widget for label in labels)


def test_every_control_has_a_name_and_takes_the_keyboard(
        qtbot: Any, tmp_path: Path, fitted_state: dict[str, Any]) -> None:
    window = fitted_window(qtbot, tmp_path, fitted_state)
    window.page("publish").show_preview()
    preview = window.page("publish").preview
    labels = window.findChildren(QLabel)
    kinds = (QLineEdit, QComboBox, QPlainTextEdit, QAbstractButton, QTableWidget)
    unnamed = []
    for kind in kinds:
        for widget in window.findChildren(kind):
            if preview is not None and preview.isAncestorOf(widget):
                continue  # the clinic form has its own tests
            if widget.objectName().startswith("qt_") or type(widget).__name__ == "QToolButton":
                continue  # corner buttons and scroll arrows Qt adds itself
            if not _named(widget, labels):
                unnamed.append(f"{type(widget).__name__} {widget.objectName()!r}")
            assert widget.focusPolicy().value != 0, widget.objectName()
    assert unnamed == [], "\n".join(unnamed)
    window.ws.mark_saved()


def test_time_left_is_said_once_a_little_is_done() -> None:
    assert time_left(10.0, 1, 100) == ""
    assert time_left(10.0, 50, 100) == "about 10 s left"
    assert time_left(60.0, 25, 100) == "about 3 min 0 s left"
    assert time_left(0.1, 99, 100) == "less than a second left"
