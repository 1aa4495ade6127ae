"""The project file (``*.cbproject.json``): the whole authoring workspace, saved and reopened.

One UTF-8 JSON object of our own format::

    {"format": "calcbuilder-authoring-project", "format_version": 1,
     "saved_by": "calcbuilder 0.1.0", "saved_at": "2026-12-02T10:00:00Z",
     "workspace": {"data": {...}, "inputs": {...}, "source": {...}, "assess": {...},
                   "about": {...}, "decision": {...}, "publish": {...}}}

* Paths are stored relative to the project's folder when they lie inside it.
* The data table is not stored, only its file's SHA-256: on reopening the file is
  read again and a changed file is said (:attr:`OpenedProject.notes`).
* The results of step 3 are stored (the unsigned calculator document, the stages
  run, ROC points), so reopening does not repeat a long bootstrap.
* Written atomically (temporary file, then rename): a crash leaves the old file.
* Versions: :data:`PROJECT_VERSION` is read, older versions are upgraded by
  append-only steps in :data:`UPGRADES`, newer ones are refused.
* The file holds settings and summary numbers, never a private key or passphrase.
"""

from __future__ import annotations

import datetime as dt
import json
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .. import __version__
from ..errors import CalcbuilderError
from .workspace import PROJECT_SUFFIX, Workspace

__all__ = ["PROJECT_FORMAT", "PROJECT_SUFFIX", "PROJECT_VERSION", "OpenedProject",
           "ProjectError", "load_project", "project_bytes", "save_project"]

PROJECT_FORMAT = "calcbuilder-authoring-project"
PROJECT_VERSION = 1
UPGRADES: dict[int, Callable[[dict[str, Any]], dict[str, Any]]] = {}
"""``version -> step`` turning a version-``version`` document into version ``version + 1``."""


class ProjectError(CalcbuilderError):
    """A project file cannot be read or written (the message names the file and the fix)."""


@dataclass
class OpenedProject:
    """A reopened workspace and what the author should know about it."""

    workspace: Workspace
    notes: list[str] = field(default_factory=list)


def project_bytes(workspace: Workspace, path: Path) -> bytes:
    """The project file's content for ``workspace`` saved at ``path``."""
    doc = {"format": PROJECT_FORMAT, "format_version": PROJECT_VERSION,
           "saved_by": f"calcbuilder {__version__}",
           "saved_at": dt.datetime.now(dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
           "workspace": workspace.to_dict(path.parent)}
    return (json.dumps(doc, indent=2, ensure_ascii=False, default=str) + "\n").encode("utf-8")


def save_project(workspace: Workspace, path: str | Path) -> Path:
    """Write the project file atomically; the workspace then counts as saved.

    Raises
    ------
    ProjectError
        The name does not end in ``.cbproject.json``, or the file cannot be written.
    """
    from ..calc.atomic import atomic_write_bytes

    path = Path(path)
    if not path.name.endswith(PROJECT_SUFFIX):
        raise ProjectError(f"{path.name}: a project file name must end in {PROJECT_SUFFIX}")
    try:
        atomic_write_bytes(path, project_bytes(workspace, path))
    except (OSError, CalcbuilderError) as exc:
        raise ProjectError(f"the project could not be saved to {path}: {exc}") from exc
    workspace.project_path = path
    workspace.mark_saved()
    return path


def _upgrade(doc: dict[str, Any], path: Path) -> dict[str, Any]:
    version = doc.get("format_version")
    if not isinstance(version, int) or isinstance(version, bool) or version < 1:
        raise ProjectError(f"{path.name}: format_version must be a whole number from 1 "
                           f"(got {version!r})")
    if version > PROJECT_VERSION:
        raise ProjectError(f"{path.name} was saved by a newer calcbuilder (project format "
                           f"{version}; this one reads up to {PROJECT_VERSION}); update "
                           "calcbuilder to open it")
    while version < PROJECT_VERSION:
        doc = UPGRADES[version](doc)
        version += 1
    return doc


def load_project(path: str | Path) -> OpenedProject:
    """Reopen a project: the workspace, its data file read again when it can be.

    Raises
    ------
    ProjectError
        The file is missing, not JSON, not a project file, or from a newer version.
    """
    path = Path(path)
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise ProjectError(f"project file not found: {path}") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ProjectError(f"cannot read the project file {path}: {exc}") from None
    except json.JSONDecodeError as exc:
        raise ProjectError(f"{path.name} is not a project file (not JSON: line {exc.lineno}, "
                           f"{exc.msg})") from None
    if not isinstance(doc, dict) or doc.get("format") != PROJECT_FORMAT:
        raise ProjectError(f"{path.name} is not a calcbuilder project file (format "
                           f"{PROJECT_FORMAT!r} expected)")
    doc = _upgrade(doc, path)
    raw = doc.get("workspace")
    if not isinstance(raw, dict):
        raise ProjectError(f"{path.name}: the workspace section is missing")
    try:
        workspace = Workspace.from_dict(raw, path.parent)
    except (TypeError, ValueError, KeyError, IndexError) as exc:
        raise ProjectError(f"{path.name}: the workspace section is damaged ({exc})") from None
    workspace.project_path = path
    return OpenedProject(workspace, _reopen_data(workspace))


def _reopen_data(workspace: Workspace) -> list[str]:
    data = workspace.data
    if data.path is None:
        return []
    old = data.sha256
    try:
        notes = data.open(data.path, sheet=data.sheet)
    except CalcbuilderError as exc:
        return [f"The data file could not be read again: {exc}"]
    if old is not None and data.sha256 != old:
        notes.insert(0, f"{data.path.name} has changed since the project was saved; the "
                        "results of step 3 were made from the earlier file")
    return notes
