"""What a page needs from the window that holds it (a protocol, so pages stay testable)."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any, Protocol

from ...authoring import Workspace

__all__ = ["Host"]


class Host(Protocol):
    """The window as its pages see it."""

    ws: Workspace

    def changed(self, *, structure: bool = False) -> None:
        """An edit was made (``structure``: inputs added/removed/reordered)."""

    def run_job(self, name: str, work: Callable[[Any], Any],
                done: Callable[[Any], None]) -> bool:
        """Run long work in the worker; ``done(result)`` on the window's thread."""

    def save_first(self) -> bool:
        """Make sure the project is saved (asks for a name); False when the author declines."""

    def tell(self, title: str, text: str) -> None:
        """Show a message to the author."""
