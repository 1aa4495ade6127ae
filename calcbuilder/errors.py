"""The error hierarchy of calcbuilder outside the statistics core.

Every error meant for a user derives from :class:`CalcbuilderError`; the CLI
prints its message as one line and exits 1. The statistics core keeps its own
:class:`calcbuilder.stats.StatsInputError` (a ``ValueError``) because it may not
import anything of ours; the CLI catches both.
"""


class CalcbuilderError(Exception):
    """Base class of every user-facing calcbuilder error."""


class CalcFileError(CalcbuilderError):
    """A calculator file is malformed, inconsistent or untrusted.

    ``problems`` lists every problem found, each as ``"json.path: message"``.
    """

    def __init__(self, message: str, problems: list[str] | None = None) -> None:
        self.problems = list(problems or [])
        if self.problems:
            message = message + "\n" + "\n".join(f"  - {p}" for p in self.problems)
        super().__init__(message)


class InputValueError(CalcbuilderError):
    """A patient value is missing, unparsable or implausible."""


class SignatureError(CalcbuilderError):
    """A signature is missing, does not verify, or a key cannot be used."""
