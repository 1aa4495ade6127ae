"""Start the authoring workspace (``calcbuilder author [PROJECT]``)."""

from __future__ import annotations

from pathlib import Path

__all__ = ["run_workspace"]


def run_workspace(project: str | Path | None = None) -> int:
    """Open the workspace (with ``project`` when given) and run until it is closed."""
    from ..app import make_app
    from .window import AuthoringWindow

    app = make_app()
    app.setApplicationName("calcbuilder authoring")
    window = AuthoringWindow()
    if project is not None:
        window.open_project(Path(project))
    window.show()
    return int(app.exec())
