"""Collect every problem in a calculator file with its JSON path, report them together."""

from __future__ import annotations

from dataclasses import dataclass, field

from ..errors import CalcFileError


def join(path: str, key: str | int) -> str:
    """Extend a JSON path: ``join("inputs", 3) == "inputs[3]"``, ``join("about", "title")``."""
    if isinstance(key, int):
        return f"{path}[{key}]"
    return f"{path}.{key}" if path else key


@dataclass
class Problems:
    """A list of ``"path: message"`` strings, collected instead of failing at the first."""

    items: list[str] = field(default_factory=list)

    def add(self, path: str, message: str) -> None:
        """Record one problem at a JSON path (``"$"`` for the whole document)."""
        self.items.append(f"{path or '$'}: {message}")

    def __bool__(self) -> bool:
        return bool(self.items)

    def raise_if_any(self, what: str) -> None:
        """Raise :class:`CalcFileError` listing every problem, if there is any."""
        if self.items:
            n = len(self.items)
            raise CalcFileError(f"{what}: {n} problem{'s' if n > 1 else ''}", self.items)
