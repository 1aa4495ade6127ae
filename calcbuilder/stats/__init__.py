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

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from .errors import (
    CancelledError,
    ConvergenceError,
    SeparationError,
    SingularDesignError,
    StatsInputError,
)

# Public names by submodule. Submodules load on first use (PEP 562), so that
# e.g. the clinic form can use ``calcbuilder.stats.splines`` without loading
# scipy through the fitting modules.
_PUBLIC: dict[str, tuple[str, ...]] = {
    "discrimination": (
        "AUCComparison",
        "AUCEstimate",
        "IntervalNotEstimableWarning",
        "auc",
        "auc_ci",
        "compare_auc",
    ),
    "calibration": (
        "CalibrationCurve",
        "CalibrationErrors",
        "CalibrationEstimate",
        "HosmerLemeshowResult",
        "SpiegelhalterResult",
        "brier",
        "calibration_curve",
        "calibration_errors",
        "calibration_intercept",
        "calibration_slope",
        "cox_snell_r2",
        "hosmer_lemeshow",
        "nagelkerke_r2",
        "scaled_brier",
        "spiegelhalter_z",
    ),
    "decision": (
        "DecisionCurve",
        "decision_curve",
        "net_benefit",
        "net_benefit_treat_all",
    ),
    "reclassification": (
        "IDIResult",
        "NRIResult",
        "continuous_nri",
        "idi",
        "nri",
    ),
    "logistic": (
        "LogisticFit",
        "fit_logistic",
    ),
    "samplesize": (
        "SampleSizeResult",
        "max_r2_cs",
        "sample_size_binary",
    ),
    "separation": (
        "SeparationResult",
        "detect_separation",
    ),
    "splines": (
        "DEFAULT_KNOT_QUANTILES",
        "rcs_basis",
        "rcs_knots",
    ),
    "thresholds": (
        "Classification",
        "ROCPoints",
        "YoudenPoint",
        "classify",
        "roc_points",
        "youden",
    ),
    "resampling": (
        "BootstrapValidation",
        "CVEstimate",
        "CrossValidation",
        "Efron632Estimate",
        "Efron632Validation",
        "FitProcedure",
        "Metric",
        "OptimismEstimate",
        "PlainLogistic",
        "Predictor",
        "ResampleFailure",
        "bootstrap_optimism",
        "cross_validate",
        "efron_632plus",
    ),
}
_SOURCE = {name: module for module, names in _PUBLIC.items() for name in names}

__all__ = [
    "CancelledError",
    "ConvergenceError",
    "SeparationError",
    "SingularDesignError",
    "StatsInputError",
    *_SOURCE,
]


def __getattr__(name: str) -> Any:
    module = _SOURCE.get(name)
    if module is None:
        if name in _PUBLIC:
            return importlib.import_module(f"{__name__}.{name}")
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(f"{__name__}.{module}"), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__) | set(_PUBLIC))


if TYPE_CHECKING:
    from .calibration import (
        CalibrationCurve,
        CalibrationErrors,
        CalibrationEstimate,
        HosmerLemeshowResult,
        SpiegelhalterResult,
        brier,
        calibration_curve,
        calibration_errors,
        calibration_intercept,
        calibration_slope,
        cox_snell_r2,
        hosmer_lemeshow,
        nagelkerke_r2,
        scaled_brier,
        spiegelhalter_z,
    )
    from .decision import (
        DecisionCurve,
        decision_curve,
        net_benefit,
        net_benefit_treat_all,
    )
    from .discrimination import (
        AUCComparison,
        AUCEstimate,
        IntervalNotEstimableWarning,
        auc,
        auc_ci,
        compare_auc,
    )
    from .logistic import (
        LogisticFit,
        fit_logistic,
    )
    from .reclassification import (
        IDIResult,
        NRIResult,
        continuous_nri,
        idi,
        nri,
    )
    from .resampling import (
        BootstrapValidation,
        CrossValidation,
        CVEstimate,
        Efron632Estimate,
        Efron632Validation,
        FitProcedure,
        Metric,
        OptimismEstimate,
        PlainLogistic,
        Predictor,
        ResampleFailure,
        bootstrap_optimism,
        cross_validate,
        efron_632plus,
    )
    from .samplesize import (
        SampleSizeResult,
        max_r2_cs,
        sample_size_binary,
    )
    from .separation import (
        SeparationResult,
        detect_separation,
    )
    from .splines import (
        DEFAULT_KNOT_QUANTILES,
        rcs_basis,
        rcs_knots,
    )
    from .thresholds import (
        Classification,
        ROCPoints,
        YoudenPoint,
        classify,
        roc_points,
        youden,
    )
