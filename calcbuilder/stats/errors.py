"""Errors raised by the statistics core.

All subclass :class:`StatsInputError`, itself a ``ValueError``, so callers can
catch one class. Messages name the argument, the rule and what was received.
"""


class StatsInputError(ValueError):
    """An argument to a statistics function breaks a documented rule."""


class SeparationError(StatsInputError):
    """Complete or quasi-complete separation: the maximum-likelihood estimate does not exist."""


class ConvergenceError(StatsInputError):
    """An iterative fit did not converge within its iteration limit."""


class SingularDesignError(StatsInputError):
    """The design matrix is rank-deficient (a constant or duplicated column)."""


class CancelledError(Exception):
    """A long computation was cancelled through its progress callback."""
