"""The statistics core of calcbuilder: pure numpy/scipy, no Qt, no pandas.

Conventions used throughout (see ``methods.md`` for formulas and sources):

* ``y`` is coded 0/1 with 1 = event; ``risk`` is a predicted probability.
* "Positive" / "treat" means ``risk >= threshold``; a risk equal to a threshold
  or to a category cut counts as at or above it.
* ``weights`` are frequency weights: a weight of 2 equals a duplicated row. The
  bootstrap runs on such weights instead of copied rows.
* Bad arguments raise :class:`StatsInputError` (a ``ValueError``) naming the
  argument, the rule and what was received. Data with a single outcome class is
  an error for every measure that needs both classes (never a silent NaN).
* Randomness is always an argument (``seed`` or ``numpy.random.Generator``).
"""

from . import (
    calibration,
    decision,
    discrimination,
    logistic,
    reclassification,
    resampling,
    samplesize,
    separation,
    splines,
)
from .calibration import *  # noqa: F403
from .decision import *  # noqa: F403
from .discrimination import *  # noqa: F403
from .errors import (
    CancelledError,
    ConvergenceError,
    SeparationError,
    SingularDesignError,
    StatsInputError,
)
from .logistic import *  # noqa: F403
from .reclassification import *  # noqa: F403
from .resampling import *  # noqa: F403
from .samplesize import *  # noqa: F403
from .separation import *  # noqa: F403
from .splines import *  # noqa: F403

__all__ = [
    "CancelledError",
    "ConvergenceError",
    "SeparationError",
    "SingularDesignError",
    "StatsInputError",
    *discrimination.__all__,
    *calibration.__all__,
    *decision.__all__,
    *reclassification.__all__,
    *logistic.__all__,
    *samplesize.__all__,
    *separation.__all__,
    *splines.__all__,
    *resampling.__all__,
]
