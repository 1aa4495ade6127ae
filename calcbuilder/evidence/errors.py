"""Errors of the authoring pipeline: a recipe that cannot be used, data that cannot be fitted.

Both carry every problem found (``problems``), so the author can fix them all in
one go; the message lists them one per line under a one-line heading.
"""

from __future__ import annotations

from ..errors import CalcbuilderError

__all__ = ["DataError", "RecipeError"]


class _ProblemsError(CalcbuilderError):
    """A user-facing error that lists several problems under one heading."""

    def __init__(self, message: str, problems: list[str] | None = None) -> None:
        self.problems = list(problems or [])
        self.heading = message
        if self.problems:
            message = message + "\n" + "\n".join(f"  - {p}" for p in self.problems)
        super().__init__(message)


class RecipeError(_ProblemsError):
    """A recipe file is unreadable, or has unknown keys, missing keys or wrong values.

    ``problems`` lists each problem as ``"key.path: message"``.
    """


class DataError(_ProblemsError):
    """A data file cannot be read, or its values cannot be used to fit the model.

    ``problems`` lists each problem in words naming the column, the rows (numbered
    as in the file: the header is row 1) and the values seen.
    """
