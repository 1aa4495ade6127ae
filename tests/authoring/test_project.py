"""The project file: round trip, atomic write, relative paths, versions, damaged files, and a
data file changed since saving."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from calcbuilder.authoring import ExternalData, ProjectError, Workspace, load_project, save_project
from calcbuilder.authoring.project import PROJECT_FORMAT, PROJECT_VERSION
from tests.authoring.demo import fill_workspace, write_cohorts


@pytest.fixture
def saved(tmp_path: Path) -> tuple[Workspace, Path]:
    files = write_cohorts(tmp_path)
    ws = fill_workspace(Workspace(), files["dev"])
    ws.assess.externals.append(ExternalData(files["ext"], "Demo Hospital B (synthetic)"))
    ws.inputs.draft("age").developed_low = "66"
    ws.inputs.draft("age").developed_edited = True
    path = save_project(ws, tmp_path / "delirium.cbproject.json")
    return ws, path


def test_saving_and_reopening_gives_the_same_workspace(saved: tuple[Workspace, Path]) -> None:
    ws, path = saved
    assert not ws.dirty
    assert ws.project_path == path
    opened = load_project(path)
    again = opened.workspace
    assert opened.notes == []
    assert again.to_dict(path.parent) == ws.to_dict(path.parent)
    assert again.recipe_dict() == ws.recipe_dict()
    assert again.data.loaded
    assert again.data.n_rows == 1500
    assert not again.dirty


def test_the_file_is_versioned_json_with_relative_paths(saved: tuple[Workspace, Path]) -> None:
    _, path = saved
    doc = json.loads(path.read_text("utf-8"))
    assert doc["format"] == PROJECT_FORMAT
    assert doc["format_version"] == PROJECT_VERSION
    assert doc["workspace"]["data"]["path"] == "development.csv"
    assert doc["workspace"]["assess"]["externals"][0]["path"] == "external.csv"
    assert [p.name for p in path.parent.iterdir() if p.name.startswith(".")] == []  # no temp


def test_edits_make_the_workspace_dirty_until_saved(saved: tuple[Workspace, Path]) -> None:
    ws, path = saved
    ws.about.title = "Changed"
    ws.touch()
    assert ws.dirty
    save_project(ws, path)
    assert not ws.dirty
    assert load_project(path).workspace.about.title == "Changed"


def test_a_changed_data_file_is_said_on_reopening(saved: tuple[Workspace, Path]) -> None:
    ws, path = saved
    assert ws.data.path is not None
    with ws.data.path.open("a", encoding="utf-8") as handle:
        handle.write("70,1,I-II,0,140,80,3,general,0,0\n")
    notes = load_project(path).notes
    assert notes
    assert "has changed since the project was saved" in notes[0]


def test_a_missing_data_file_is_said_not_fatal(saved: tuple[Workspace, Path]) -> None:
    ws, path = saved
    assert ws.data.path is not None
    ws.data.path.unlink()
    opened = load_project(path)
    assert "could not be read again" in opened.notes[0]
    assert opened.workspace.inputs.ids == ws.inputs.ids


@pytest.mark.parametrize(("content", "message"), [
    ("not json", "not JSON"),
    ('{"format": "something-else"}', "not a calcbuilder project file"),
    (json.dumps({"format": PROJECT_FORMAT, "format_version": 99, "workspace": {}}),
     "saved by a newer calcbuilder"),
    (json.dumps({"format": PROJECT_FORMAT, "format_version": "1", "workspace": {}}),
     "format_version must be a whole number"),
    (json.dumps({"format": PROJECT_FORMAT, "format_version": 1}), "workspace section"),
])
def test_files_that_are_not_projects_are_refused(tmp_path: Path, content: str,
                                                 message: str) -> None:
    path = tmp_path / "x.cbproject.json"
    path.write_text(content, "utf-8")
    with pytest.raises(ProjectError, match=message):
        load_project(path)


def test_a_project_name_must_say_what_it_is(tmp_path: Path) -> None:
    with pytest.raises(ProjectError, match=r"must end in \.cbproject\.json"):
        save_project(Workspace(), tmp_path / "x.json")
    with pytest.raises(ProjectError, match="not found"):
        load_project(tmp_path / "none.cbproject.json")
