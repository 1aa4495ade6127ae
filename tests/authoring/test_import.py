"""Importing a model instead of fitting: a description written from the workspace's own steps,
or an existing description file; problems name their fields; the GUI switches mode."""

from __future__ import annotations

import math
import tomllib
from pathlib import Path
from typing import Any

import pytest

from calcbuilder.authoring import InputDraft, Workspace, save_project
from calcbuilder.authoring.pipeline import run_stage
from calcbuilder.calc.importers import ModelImportError
from calcbuilder.errors import CalcbuilderError
from tests.authoring.demo import ABOUT, DECISION

FIXTURES = Path(__file__).resolve().parents[1] / "calc" / "fixtures" / "import"
INTERCEPT, AGE, SENSORY = -4.0, 0.03, 0.7


def quiet(*_: Any) -> bool:
    return True


def risk(age: float, sensory: bool) -> float:
    return 1 / (1 + math.exp(-(INTERCEPT + AGE * age + SENSORY * sensory)))


def small_model(tmp_path: Path) -> Workspace:
    """A two-input synthetic model described in the workspace, with its table and vectors."""
    (tmp_path / "coefs.csv").write_text(
        f"term,coefficient\n(Intercept),{INTERCEPT}\nage,{AGE}\nsensory,{SENSORY}\n", "utf-8")
    rows = [(70, True), (80, False), (66, False), (90, True), (75, True)]
    (tmp_path / "vectors.csv").write_text(
        "age,sensory,risk\n" + "".join(f"{a},{'yes' if s else 'no'},{risk(a, s)!r}\n"
                                       for a, s in rows), "utf-8")
    ws = Workspace()
    ws.inputs.drafts = [
        InputDraft(id="age", column="age", label="Age", kind="number", unit="years",
                   limit_low="18", limit_high="110"),
        InputDraft(id="sensory", column="sensory", label="Hearing or vision impairment",
                   kind="yes_no")]
    for key, value in ABOUT.items():
        setattr(ws.about, key, value)
    ws.about.set_synthetic(True)
    for key, value in DECISION.items():
        setattr(ws.decision, key, value)
    ws.source.mode, ws.source.source = "table", tmp_path / "coefs.csv"
    ws.source.vectors = tmp_path / "vectors.csv"
    save_project(ws, tmp_path / "imported.cbproject.json")
    return ws


def test_a_table_is_imported_with_the_inputs_described_in_the_workspace(
        tmp_path: Path) -> None:
    ws = small_model(tmp_path)
    spec, draft = ws.first_spec()
    assert spec["stage"] == "import"
    assert not draft
    description = tomllib.loads(Path(spec["inputs"]).read_text("utf-8"))
    assert [i["id"] for i in description["inputs"]] == ["age", "sensory"]
    assert len(description["test_vectors"]) == 5
    assert description["test_vectors"][0]["values"] == {"age": 70.0, "sensory": True}
    result = run_stage(spec, None, band_boot=0, seed=1, report=quiet)
    doc = result.document
    assert doc["model"]["intercept"] == INTERCEPT
    assert doc["evidence"] == []
    assert doc["about"]["synthetic"] is True
    assert "Imported coefs.csv" in result.lines[0]


def test_a_wrong_vector_risk_is_refused_naming_the_vector(tmp_path: Path) -> None:
    ws = small_model(tmp_path)
    assert ws.source.vectors is not None
    text = ws.source.vectors.read_text("utf-8").replace(f"{risk(80, False)!r}", "0.5")
    ws.source.vectors.write_text(text, "utf-8")
    spec, _ = ws.first_spec()
    with pytest.raises(ModelImportError) as caught:
        run_stage(spec, None, band_boot=0, seed=1, report=quiet)
    assert any("vectors.csv row 3" in p for p in caught.value.problems)


def test_an_existing_description_file_is_used_as_it_is(tmp_path: Path) -> None:
    ws = Workspace()
    ws.source.mode = "table"
    ws.source.source = FIXTURES / "anes96.coefficients.csv"
    ws.source.description = FIXTURES / "anes96.inputs.toml"
    save_project(ws, tmp_path / "anes.cbproject.json")
    spec, _ = ws.first_spec()
    assert spec["inputs"] == str(FIXTURES / "anes96.inputs.toml")
    result = run_stage(spec, None, band_boot=0, seed=1, report=quiet)
    assert result.document["model"]["terms"]


def test_what_is_missing_before_importing_is_said_by_field() -> None:
    ws = Workspace()
    ws.source.mode = "pmml"
    assert set(ws.source.problems()) == {"import.source", "import.vectors",
                                         "import.pmml_event"}
    with pytest.raises(CalcbuilderError, match="choose the model file"):
        ws.first_spec()


def test_the_inputs_page_switches_to_importing(qtbot: Any, tmp_path: Path) -> None:
    from PySide6.QtWidgets import QRadioButton

    from calcbuilder.gui.authoring.window import AuthoringWindow
    from tests.authoring.conftest import click, find, message

    ws = small_model(tmp_path)
    ws.source.mode = "fit"
    window = AuthoringWindow(ws)
    window.ask_unsaved = lambda _p: "discard"
    qtbot.addWidget(window)
    window.show()
    window.go_to(1)
    page = window.page("inputs")
    assert page.import_box.isHidden()
    page.mode_buttons["table"].click()
    assert ws.source.mode == "table"
    assert not page.import_box.isHidden()
    ws.source.vectors = None
    window.validate()
    assert "test-vector file" in message(window, "import.vectors")
    ws.source.vectors = tmp_path / "vectors.csv"
    window.go_to(2)
    assert find(window, QRadioButton, "mode_table").isChecked()
    window.page("assess").refresh()
    click(qtbot, window, "fitButton")
    qtbot.waitUntil(lambda: ws.assess.document is not None and not window.runner.busy,
                    timeout=60_000)
    assert ws.assess.stages[0]["stage"] == "import"
