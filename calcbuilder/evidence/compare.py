"""Comparing a new model with a reference model on the same patients.

Every number comes from :mod:`calcbuilder.stats` on the same rows:

* discrimination: each model's AUC and the paired DeLong test of the
  difference (``compare_auc``, methods.md 1.4) [1]_;
* reclassification: categorical NRI at the given cuts with its event and
  non-event parts, category-free NRI and IDI (methods.md 5) [2]_ [3]_;
* clinical usefulness: net benefit of each model, and their difference, at
  thresholds inside the new model's reasonable range (methods.md 4) [4]_;
* calibration of each model: calibration-in-the-large (offset intercept) and
  slope with 95% Wald intervals, and observed/expected (methods.md 3.3).

NRI and IDI can reward a miscalibrated model: a model whose risks are shifted or
too extreme can "improve" reclassification without predicting better
[5]_ [6]_ [7]_ [8]_. A warning is therefore added whenever either model is
miscalibrated on these data by the rule of :attr:`CalibrationSummary.miscalibrated`
(the slope's 95% CI excludes 1, or the intercept's excludes 0).

References
----------
.. [1] DeLong ER, DeLong DM, Clarke-Pearson DL. Comparing the areas under two or
       more correlated receiver operating characteristic curves: a nonparametric
       approach. Biometrics 1988;44:837-845.
.. [2] Pencina MJ, D'Agostino RB Sr, D'Agostino RB Jr, Vasan RS. Stat Med
       2008;27:157-172.
.. [3] Pencina MJ, D'Agostino RB Sr, Steyerberg EW. Stat Med 2011;30:11-21.
.. [4] Vickers AJ, Elkin EB. Med Decis Making 2006;26:565-574.
.. [5] Kerr KF, Wang Z, Janes H, McClelland RL, Psaty BM, Pepe MS. Net
       reclassification indices for evaluating risk prediction instruments: a
       critical review. Epidemiology 2014;25:114-121 (its point on miscalibration
       recalled from memory, not re-read).
.. [6] Leening MJG, Vedder MM, Witteman JCM, Pencina MJ, Steyerberg EW. Net
       reclassification improvement: computation, interpretation, and
       controversies. Ann Intern Med 2014;160:122-131 (recalled from memory).
.. [7] Pepe MS, Fan J, Feng Z, Gerds T, Hilden J. The net reclassification
       index (NRI): a misleading measure of prediction improvement even with
       independent test data sets. Stat Biosci 2015;7:282-295 (recalled from
       memory, not checked).
.. [8] Hilden J, Gerds TA. A note on the evaluation of novel biomarkers: do not
       rely on integrated discrimination improvement and net reclassification
       index. Stat Med 2014;33:3405-3414 (recalled from memory, not checked).
"""

from __future__ import annotations

import itertools
import math
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..calc.sections import Decision
from ..errors import CalcbuilderError
from ..stats import (
    AUCComparison,
    IDIResult,
    NRIResult,
    compare_auc,
    continuous_nri,
    decision_curve,
    idi,
    nri,
)
from .recalibrate import CalibrationSummary

__all__ = [
    "MISCALIBRATION_RULE",
    "ComparisonResult",
    "compare_risks",
    "comparison_thresholds",
    "default_cuts",
    "parse_cuts",
    "reclassification_block",
    "result_dict",
]

FloatArray = NDArray[np.float64]
MAX_THRESHOLDS = 10
"""At most about this many thresholds in the net-benefit table (range ends added)."""
MISCALIBRATION_RULE = ("the calibration slope's 95% CI excludes 1 or the calibration "
                       "intercept's (calibration-in-the-large) 95% CI excludes 0")
_LITERATURE = ("NRI and IDI can reward a miscalibrated model: shifted or too extreme risks can "
               "'improve' reclassification without predicting better (Kerr et al., "
               "Epidemiology 2014; Leening et al., Ann Intern Med 2014; Pepe et al., Stat "
               "Biosci 2015 - citations recalled from memory)")


@dataclass(frozen=True)
class ComparisonResult:
    """A new model against a reference model on the same rows.

    ``auc.auc_a`` is the new model's AUC, ``auc.auc_b`` the reference's and
    ``auc.difference`` new minus reference. Net-benefit arrays are aligned with
    ``thresholds``. ``warnings`` are sentences for the reader.
    """

    new_name: str
    ref_name: str
    n: int
    events: int
    auc: AUCComparison
    cuts: tuple[float, ...]
    nri: NRIResult
    continuous_nri: NRIResult
    idi: IDIResult
    thresholds: FloatArray
    nb_new: FloatArray
    nb_ref: FloatArray
    nb_treat_all: FloatArray
    calibration_new: CalibrationSummary
    calibration_ref: CalibrationSummary
    warnings: tuple[str, ...]
    ref_fingerprint: str | None = None

    @property
    def nb_difference(self) -> FloatArray:
        """Net benefit of the new model minus the reference's, at each threshold."""
        return self.nb_new - self.nb_ref


def parse_cuts(text: str) -> tuple[float, ...]:
    """Read category cuts given in percent (``"10,20"``) as proportions (0.1, 0.2).

    Raises
    ------
    CalcbuilderError
        A cut that is not a number, not strictly inside (0, 100), or cuts not
        strictly increasing.
    """
    parts = [p.strip().removesuffix("%").strip() for p in text.split(",")]
    values = []
    for part in parts:
        try:
            value = float(part)
        except ValueError:
            raise CalcbuilderError(f"--cuts must be percentages separated by commas, e.g. "
                                   f"--cuts 10,20; could not read {part!r}") from None
        if not 0.0 < value < 100.0:
            raise CalcbuilderError(f"--cuts must lie strictly between 0 and 100 (percent); "
                                   f"got {part}")
        values.append(value)
    for a, b in itertools.pairwise(values):
        if not a < b:
            raise CalcbuilderError(f"--cuts must be strictly increasing; got {a:g} then {b:g}")
    return tuple(v / 100.0 for v in values)


def default_cuts(decision: Decision) -> tuple[float, ...] | None:
    """The upper limits of the decision bands except the last (None without bands)."""
    uppers = tuple(b.upper for b in decision.bands[:-1])
    return uppers or None


def comparison_thresholds(decision: Decision) -> FloatArray:
    """A compact grid of thresholds inside the reasonable range.

    The range ends and the default threshold, plus the whole percentages inside
    the range that are multiples of the smallest step among 1, 2, 5, 10, 20, 25
    and 50 points giving at most :data:`MAX_THRESHOLDS` of them.
    """
    low, high = decision.reasonable_range
    k_lo, k_hi = math.ceil(low * 100 - 1e-9), math.floor(high * 100 + 1e-9)
    ks: list[int] = []
    for step in (1, 2, 5, 10, 20, 25, 50):
        ks = [k for k in range(k_lo, k_hi + 1) if k % step == 0]
        if len(ks) <= MAX_THRESHOLDS:
            break
    grid = {k / 100 for k in ks} | {low, high, decision.default_threshold}
    return np.array(sorted(t for t in grid if 0.0 < t < 1.0))


def _miscalibration_warning(named: list[tuple[str, CalibrationSummary]]) -> str | None:
    off = [(name, c) for name, c in named if c.miscalibrated]
    if not off:
        return None
    described = "; ".join(
        f"{name}: slope {c.slope.value:.2f} (95% CI {c.slope.low:.2f} to {c.slope.high:.2f}), "
        f"intercept {c.intercept.value:.2f} (95% CI {c.intercept.low:.2f} to "
        f"{c.intercept.high:.2f})" for name, c in off)
    return (f"{_LITERATURE}. On these data the calibration is off (rule: "
            f"{MISCALIBRATION_RULE}) for {described}. Read the NRI and IDI with caution; "
            "recalibrate first (calcbuilder recalibrate) or judge by AUC, calibration and "
            "net benefit.")


def compare_risks(y: ArrayLike, risk_new: ArrayLike, risk_ref: ArrayLike, *,
                  cuts: tuple[float, ...], thresholds: ArrayLike,
                  new_name: str = "new model", ref_name: str = "reference model",
                  ref_fingerprint: str | None = None) -> ComparisonResult:
    """Compare two models' risks for the same patients.

    Parameters
    ----------
    y : array (n,)
        Outcome coded 0/1 (1 = event); at least 2 events and 2 non-events.
    risk_new, risk_ref : array (n,)
        Risks from the new and the reference model, strictly inside (0, 1).
    cuts : tuple of float
        Risk category cuts for the categorical NRI (proportions, increasing).
    thresholds : array
        Decision thresholds for net benefit, strictly inside (0, 1).
    new_name, ref_name : str
        Names used in warnings and tables.
    ref_fingerprint : str, optional
        The reference calculator's fingerprint, kept for the evidence block.

    Returns
    -------
    ComparisonResult

    References
    ----------
    .. [1] DeLong ER et al. Biometrics 1988;44:837-845.
    .. [2] Pencina MJ et al. Stat Med 2008;27:157-172.
    .. [3] Kerr KF et al. Epidemiology 2014;25:114-121 (recalled from memory).
    """
    yv = np.asarray(y, dtype=float)
    new, ref = np.asarray(risk_new, dtype=float), np.asarray(risk_ref, dtype=float)
    notes: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        auc = compare_auc(yv, new, ref)
    notes.extend(str(w.message) for w in caught)
    dc_new, dc_ref = decision_curve(yv, new, thresholds), decision_curve(yv, ref, thresholds)
    cal_new, cal_ref = CalibrationSummary.of(yv, new), CalibrationSummary.of(yv, ref)
    warning = _miscalibration_warning([(new_name, cal_new), (ref_name, cal_ref)])
    if warning:
        notes.insert(0, warning)
    return ComparisonResult(
        new_name=new_name, ref_name=ref_name, n=int(yv.size), events=int(yv.sum()), auc=auc,
        cuts=tuple(float(c) for c in cuts), nri=nri(yv, ref, new, cuts),
        continuous_nri=continuous_nri(yv, ref, new), idi=idi(yv, ref, new),
        thresholds=dc_new.thresholds, nb_new=dc_new.model, nb_ref=dc_ref.model,
        nb_treat_all=dc_new.treat_all, calibration_new=cal_new, calibration_ref=cal_ref,
        warnings=tuple(notes), ref_fingerprint=ref_fingerprint,
    )


def _num(x: float) -> float | None:
    """A JSON-safe number (NaN and infinities become null)."""
    return float(x) if math.isfinite(x) else None


def _flat_numbers(result: ComparisonResult) -> dict[str, float | None]:
    r = result
    values = {
        "auc_new": r.auc.auc_a, "auc_ref": r.auc.auc_b, "auc_difference": r.auc.difference,
        "auc_difference_se": r.auc.se, "auc_difference_low": r.auc.low,
        "auc_difference_high": r.auc.high, "auc_p_value": r.auc.p_value,
        "nri_events": r.nri.events, "nri_nonevents": r.nri.nonevents, "nri_total": r.nri.total,
        "nri_se": r.nri.se, "nri_p_value": r.nri.p_value,
        "continuous_nri": r.continuous_nri.total,
        "continuous_nri_events": r.continuous_nri.events,
        "continuous_nri_nonevents": r.continuous_nri.nonevents,
        "continuous_nri_p_value": r.continuous_nri.p_value,
        "idi": r.idi.value, "idi_se": r.idi.se, "idi_low": r.idi.low, "idi_high": r.idi.high,
        "idi_p_value": r.idi.p_value,
    }
    return {k: _num(v) for k, v in values.items()}


def result_dict(result: ComparisonResult) -> dict[str, Any]:
    """Everything in ``result`` as one JSON-ready object (NaN written as null)."""
    r = result
    rows = [{"threshold": float(t), "new": _num(a), "reference": _num(b),
             "treat_all": _num(c), "difference": _num(a - b)}
            for t, a, b, c in zip(r.thresholds, r.nb_new, r.nb_ref, r.nb_treat_all,
                                  strict=True)]
    return {
        "new": r.new_name, "reference": r.ref_name, "n": r.n, "events": r.events,
        **_flat_numbers(r), "cuts": list(r.cuts), "net_benefit": rows,
        "calibration": {"new": r.calibration_new.to_dict(),
                        "reference": r.calibration_ref.to_dict()},
        "miscalibration_rule": MISCALIBRATION_RULE, "warnings": list(r.warnings),
    }


def reclassification_block(result: ComparisonResult) -> dict[str, Any]:
    """The ``reclassification`` block of an evidence set (FORMAT.md) for the new model.

    Flat numbers, strings and arrays only: the reference's name (and fingerprint
    when known), the cuts, the NRI parts, category-free NRI, IDI, both AUCs and
    the DeLong test, the net-benefit difference at the thresholds, both models'
    calibration slopes and intercepts, and any warning.
    """
    r = result
    out: dict[str, Any] = {"reference": r.ref_name}
    if r.ref_fingerprint:
        out["reference_fingerprint"] = r.ref_fingerprint
    out.update({"n": r.n, "events": r.events, "cuts": list(r.cuts), **_flat_numbers(r),
                "thresholds": r.thresholds.tolist(),
                "net_benefit_difference": [_num(d) for d in r.nb_difference]})
    for who, cal in (("new", r.calibration_new), ("ref", r.calibration_ref)):
        for what in ("slope", "intercept"):
            est = getattr(cal, what)
            out[f"calibration_{what}_{who}"] = [_num(est.value), _num(est.low), _num(est.high)]
    if r.warnings:
        out["warnings"] = " ".join(r.warnings)
    return out
