"""The whole path in the desktop workspace, driven as a user would: from opening the synthetic
demo data to a signed calculator that equals what the command line makes from the same choices."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QCheckBox, QComboBox, QLabel

from calcbuilder.authoring import Workspace
from calcbuilder.calc.canonical import fingerprint
from calcbuilder.cli import main
from calcbuilder.evidence import load_recipe
from calcbuilder.gui.authoring.dialogs import NewKey
from calcbuilder.gui.authoring.window import AuthoringWindow
from tests.authoring.conftest import click, find, pick, type_named, write_text
from tests.authoring.demo import (
    ABOUT,
    DATASET,
    DECISION,
    EXAMPLE,
    INPUTS,
    PREDICTORS,
    write_cohorts,
)

SEED, BANDS, B = "11", "20", "10"
PASS = "a long synthetic passphrase"
LINES = ("label", "unit", "decimals", "group", "help", "limit_low", "limit_high", "knots",
         "reference")


def without_timestamps(document: dict[str, Any]) -> dict[str, Any]:
    doc = json.loads(json.dumps({k: v for k, v in document.items() if k != "signature"}))
    for ev in doc["evidence"]:
        ev.pop("created", None)
    return doc


def fill_data_page(qtbot: Any, window: AuthoringWindow, dev: Path,
                   answer_files: list[Path]) -> None:
    answer_files.append(dev)
    click(qtbot, window, "dataFileButton")
    pick(window, "outcomeColumn", "delirium")
    assert find(window, QComboBox, "eventValue").currentData() == "1"
    for column in PREDICTORS:
        window.page("data").tick(column)
    for attr, text in DATASET.items():
        type_named(qtbot, window, attr, text)


def fill_inputs_page(qtbot: Any, window: AuthoringWindow) -> None:
    assert window.ws.inputs.ids == PREDICTORS
    for k, input_id in enumerate(PREDICTORS):
        key, wanted = f"inputs[#{k + 1}]", INPUTS[input_id]
        if "transform" in wanted:
            pick(window, f"{key}.transform", wanted["transform"])
        for attr in LINES:
            if attr in wanted:
                type_named(qtbot, window, f"{key}.{attr}", wanted[attr])
        if "choices" in wanted:
            write_text(window, f"{key}.choices",
                       "\n".join(f"{v} = {label}" for v, label in wanted["choices"]))
        if "alt_units" in wanted:
            unit = wanted["alt_units"][0]
            type_named(qtbot, window, f"{key}.alt_units", f"{unit.unit} = {unit.factor}")


def fill_text_pages(qtbot: Any, window: AuthoringWindow) -> None:
    for key, text in ABOUT.items():
        if key in ("intended_use", "exclusions", "authors"):
            write_text(window, f"about.{key}", text)
        else:
            type_named(qtbot, window, f"about.{key}", text)
    synthetic = find(window, QCheckBox, "about.synthetic")
    window.go_to(3)
    qtbot.mouseClick(synthetic, Qt.MouseButton.LeftButton)
    assert window.ws.about.synthetic
    window.go_to(4)
    for attr in ("default_threshold", "range_low", "range_high"):
        type_named(qtbot, window, f"decision.{attr}", DECISION[attr])
    write_text(window, "decision.rationale", DECISION["rationale"])


def test_data_to_signed_file_equals_the_command_line(
        qtbot: Any, tmp_path: Path, answer_files: list[Path]) -> None:
    files = write_cohorts(tmp_path)
    window = AuthoringWindow()
    window.ask_unsaved = lambda _p: "discard"  # closing at the end of the test never blocks
    qtbot.addWidget(window)
    window.show()
    project = tmp_path / "demo.cbproject.json"
    window.ask_path = lambda *_a: str(project)
    fill_data_page(qtbot, window, files["dev"], answer_files)
    window.go_to(1)
    fill_inputs_page(qtbot, window)
    fill_text_pages(qtbot, window)
    window.validate()
    assert window.ws.recipe_problems() == []
    assert "Sample size:" in find(window, QLabel, "dataCheck").text()

    window.go_to(2)
    for name, value in (("seed", SEED), ("bandBoot", BANDS), ("nBoot", B)):
        type_named(qtbot, window, name, value)
    click(qtbot, window, "fitButton")
    qtbot.waitUntil(lambda: window.ws.assess.document is not None and not window.runner.busy,
                    timeout=120_000)
    assert project.exists()  # the project was saved first; the recipe lies beside it
    recipe = tmp_path / "demo.recipe.toml"
    assert load_recipe(recipe).to_dict() == load_recipe(EXAMPLE).to_dict()
    click(qtbot, window, "bootstrapButton")
    qtbot.waitUntil(lambda: window.ws.assess.has_stage("bootstrap") and not window.runner.busy,
                    timeout=120_000)
    assert find(window, QLabel, "assessState").text().startswith("✔ Up to date")

    window.go_to(5)
    page = window.page("publish")
    page.ask_new_key = lambda _p, _f: NewKey(tmp_path, "author", PASS)
    page.ask_passphrase = lambda _p, _k: PASS
    click(qtbot, window, "newKeyButton")
    click(qtbot, window, "publishButton")
    qtbot.waitUntil(lambda: window.ws.publish.last is not None, timeout=120_000)
    published = window.ws.publish.last
    assert published is not None
    assert published.report is not None
    assert published.report.read_bytes().startswith(b"%PDF")
    state = page.preview.findChild(QLabel, "signatureState").text()
    assert "verified" in state.lower()
    click(qtbot, window, "previewWindowButton")
    assert page.separate.isVisible()
    assert page.separate.session.calculator.fingerprint == published.file_fingerprint

    (tmp_path / "pass.txt").write_text(PASS + "\n", "utf-8")
    cli = tmp_path / "cli"
    cli.mkdir()
    assert main(["fit", str(files["dev"]), "--recipe", str(recipe), "-o",
                 str(cli / "fit.calc.json"), "--band-boot", BANDS, "--seed", SEED]) == 0
    assert main(["assess", str(cli / "fit.calc.json"), "--data", str(files["dev"]),
                 "--bootstrap", B, "--seed", SEED, "-o", str(cli / "boot.calc.json")]) == 0
    assert main(["sign", str(cli / "boot.calc.json"), "--key", str(tmp_path / "author.key"),
                 "--passphrase-file", str(tmp_path / "pass.txt"), "-o",
                 str(cli / "signed.calc.json")]) == 0
    ours = json.loads(published.calculator.read_text("utf-8"))
    theirs = json.loads((cli / "signed.calc.json").read_text("utf-8"))
    assert fingerprint(without_timestamps(ours)) == fingerprint(without_timestamps(theirs))
    assert ours["signature"]["key_fingerprint"] == theirs["signature"]["key_fingerprint"]
    window.ws.mark_saved()


def test_a_reopened_project_shows_its_choices(qtbot: Any, tmp_path: Path) -> None:
    from calcbuilder.authoring import save_project
    from tests.authoring.demo import fill_workspace

    files = write_cohorts(tmp_path)
    path = save_project(fill_workspace(Workspace(), files["dev"]),
                        tmp_path / "again.cbproject.json")
    window = AuthoringWindow()
    qtbot.addWidget(window)
    assert window.open_project(path)
    assert find(window, QComboBox, "outcomeColumn").currentData() == "delirium"
    assert find(window, QLabel, "dataCheck").text().startswith("Rows: 1,500 read")
    assert find(window, QComboBox, "inputs[#1].transform").currentData() == "rcs"
    assert not window.ws.dirty
    assert "again.cbproject.json" in window.windowTitle()
    assert "SYNTHETIC" in window.windowTitle()
    assert not find(window, QLabel, "syntheticBanner").isHidden()
