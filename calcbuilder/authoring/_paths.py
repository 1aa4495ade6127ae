"""Paths in a project file: relative to the project's folder when inside it (private)."""

from __future__ import annotations

from pathlib import Path

__all__ = ["absolute", "relative"]


def relative(path: Path | None, base: Path | None) -> str | None:
    """``path`` as stored: relative to ``base`` (POSIX form) when below it, else absolute."""
    if path is None:
        return None
    if base is not None:
        try:
            return Path(path).resolve().relative_to(base.resolve()).as_posix()
        except ValueError:
            pass
    return str(Path(path).resolve())


def absolute(text: str | None, base: Path | None) -> Path | None:
    """A stored path made absolute against ``base`` (None for an empty entry)."""
    if not text:
        return None
    path = Path(text)
    return path if path.is_absolute() or base is None else base / path
