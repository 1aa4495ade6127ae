"""One evidence set from outcomes and predicted risks: the calculator file's ``evidence`` entry.

:func:`evidence_set` computes, from ``y`` (0/1, 1 = event) and ``risk``, every
part of a FORMAT.md evidence set by calling :mod:`calcbuilder.stats`:

``metrics`` (each ``{value, low?, high?, se?, p_value?, note?}``, 95% level)
    ``auc`` (DeLong SE, logit-transformed interval [1]_ [2]_); ``brier`` and
    ``scaled_brier`` [3]_; ``calibration_intercept`` (calibration-in-the-large,
    LP as offset) and ``calibration_slope`` [4]_ [5]_ with Wald intervals from the
    Fisher information; ``ici``, ``e50``, ``e90``, ``emax`` [6]_; ``oe_ratio``
    (sum y / sum risk) with ``exp(ln(O/E) +/- 1.96 / sqrt(O))``, the Poisson
    approximation for an observed count against a fixed expected one [7]_;
    ``hosmer_lemeshow`` (statistic, ``p_value``; df in the note and settings:
    g - 2 on development data, g on external data) [8]_; ``spiegelhalter_z`` [9]_.
    Brier, scaled Brier and the ICI family get percentile bootstrap intervals
    from the same resamples as the bands (below); an interval that does not
    contain its estimate (the ICI family is biased upwards in resamples) is not
    stored, and a note says so.
``calibration_curve``
    lowess of y on risk (span 2/3, local linear, no robustness iterations,
    ``delta = 0.01 * range``: R's ``lowess(iter=0)``), at most
    :data:`CURVE_POINTS` points spread evenly over the ranks of the distinct
    risks; ``observed`` is not clipped to [0, 1]. Pointwise percentile band
    (2.5%, 97.5%) over ``band_boot`` resamples of the (y, risk) pairs; each
    resample's curve is interpolated at the stored points, and a point covered
    (inside the resample's risk range) by fewer than half of the resamples gets
    no band (``null``).
``grouped_calibration``
    10 groups of sorted risk (numpy.array_split; ties ordered non-events first,
    the rule of :func:`calcbuilder.stats.hosmer_lemeshow`), each with its mean
    risk, observed proportion, Wilson score 95% interval [10]_ and size.
``decision_curve``
    net benefit at thresholds 0.01..0.99 (treated when risk >= threshold) of
    the model and of treating all [11]_, with a pointwise percentile band of
    the model's net benefit from the same resamples.
``risk_histogram``
    counts of events and non-events in 50 bins of width 0.02 with fixed edges
    0, 0.02, ..., 1 (each bin closed on the left, the last also on the right).

Resamples: ``numpy.random.default_rng(seed)``, one ``rng.integers(0, n, n)`` per
resample; with ``seed=None`` a seed is drawn and recorded in ``settings``.

References
----------
.. [1] DeLong ER, DeLong DM, Clarke-Pearson DL. Biometrics 1988;44:837-845.
.. [2] Pepe MS. The Statistical Evaluation of Medical Tests for Classification and
       Prediction. Oxford University Press 2003.
.. [3] Steyerberg EW, Vickers AJ, Cook NR, et al. Epidemiology 2010;21:128-138.
.. [4] Cox DR. Biometrika 1958;45:562-565.
.. [5] Van Calster B, Nieboer D, Vergouwe Y, et al. J Clin Epidemiol 2016;74:167-176.
.. [6] Austin PC, Steyerberg EW. Stat Med 2019;38:4051-4065.
.. [7] Breslow NE, Day NE. Statistical Methods in Cancer Research, vol. II. IARC 1987.
.. [8] Hosmer DW, Lemeshow S. Commun Stat A 1980;9:1043-1069.
.. [9] Spiegelhalter DJ. Stat Med 1986;5:421-433.
.. [10] Wilson EB. J Am Stat Assoc 1927;22:209-212.
.. [11] Vickers AJ, Elkin EB. Med Decis Making 2006;26:565-574.
"""

from __future__ import annotations

import datetime as dt
import math
import warnings
from collections.abc import Callable, Mapping
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .. import __version__
from .. import stats as st
from ..errors import CalcbuilderError
from ._evidence_bands import add_scalar_bands, percentiles, resample_bands

__all__ = [
    "CURVE_POINTS",
    "HISTOGRAM_EDGES",
    "KINDS",
    "EvidenceError",
    "evidence_set",
    "number",
    "with_evidence_set",
]

KINDS = ("apparent", "bootstrap", "external", "recalibrated", "imported")
CURVE_POINTS = 200
HISTOGRAM_EDGES = np.arange(51) / 50
Z95 = 1.959963984540054
SMOOTHER = ("lowess of y on risk: span 2/3, local linear, tricube weights, no robustness "
            "iterations, delta = 0.01 x range(risk) (R lowess(iter=0))")
Progress = Callable[[int, int], bool | None]
FloatArray = NDArray[np.float64]


class EvidenceError(CalcbuilderError):
    """Outcomes, risks or a description that cannot make a valid evidence set."""


def number(x: Any) -> float | None:
    """A JSON-safe float (``None`` for NaN or infinity)."""
    value = float(x)
    return value if math.isfinite(value) else None


def _check(y: ArrayLike, risk: ArrayLike) -> tuple[FloatArray, FloatArray]:
    yv = np.asarray(y, dtype=float).ravel()
    rv = np.asarray(risk, dtype=float).ravel()
    if yv.size != rv.size:
        raise EvidenceError(f"outcomes and risks differ in length ({yv.size} and {rv.size})")
    if not np.isin(yv, (0.0, 1.0)).all():
        raise EvidenceError("outcomes must be coded 0/1 (1 = event)")
    bad = ~np.isfinite(rv) | (rv < 0) | (rv > 1)
    if bad.any():
        raise EvidenceError(f"risks must lie in [0, 1]; {int(bad.sum())} do not (first at row "
                            f"{int(np.flatnonzero(bad)[0])})")
    events = int(yv.sum())
    if min(events, yv.size - events) < 2:
        raise EvidenceError(f"an evidence set needs at least 2 events and 2 non-events; the "
                            f"data have {events} and {yv.size - events} among {yv.size} rows")
    return yv, rv


def _dataset(dataset: Mapping[str, Any], y: FloatArray) -> dict[str, Any]:
    if not dataset.get("name"):
        raise EvidenceError("the dataset needs a name (dataset['name'])")
    out = dict(dataset)
    n, events = int(y.size), int(y.sum())
    for key, value in (("n", n), ("events", events)):
        if key in out and out[key] != value:
            raise EvidenceError(f"dataset['{key}'] is {out[key]} but the data have {value}")
        out[key] = value
    return out


def _interval(value: float, low: float | None = None, high: float | None = None, **extra: Any
              ) -> dict[str, Any]:
    out: dict[str, Any] = {"value": number(value)}
    if low is not None and high is not None:
        out["low"], out["high"] = number(low), number(high)
    out.update({k: v for k, v in extra.items() if v is not None})
    return out


def _attempt(name: str, notes: list[str], make: Callable[[], dict[str, Any]]
             ) -> dict[str, dict[str, Any]]:
    """One metric, or a note saying why it could not be computed."""
    try:
        return {name: make()}
    except st.StatsInputError as exc:
        notes.append(f"{name} not computed: {exc}")
        return {}


def _auc(y: FloatArray, risk: FloatArray) -> dict[str, Any]:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", st.IntervalNotEstimableWarning)
        est = st.auc_ci(y, risk, method="logit")
    if not math.isfinite(est.low):
        return _interval(est.value, se=number(est.se), note="DeLong SE is 0: no interval")
    return _interval(est.value, est.low, est.high, se=number(est.se))


def _oe(y: FloatArray, risk: FloatArray) -> dict[str, Any]:
    observed, expected = float(y.sum()), float(risk.sum())
    if expected <= 0:
        raise st.StatsInputError("every risk is 0, so the expected count is 0")
    ratio = observed / expected
    half = Z95 / math.sqrt(observed)
    return _interval(ratio, ratio * math.exp(-half), ratio * math.exp(half),
                     note=f"observed {observed:g} / expected {expected:.6g}")


def _hosmer(y: FloatArray, risk: FloatArray, external: bool) -> dict[str, Any]:
    groups = min(10, y.size)
    hl = st.hosmer_lemeshow(y, risk, groups=groups, external=external)
    return _interval(hl.statistic, p_value=number(hl.p_value),
                     note=f"{groups} groups of sorted risk; df {hl.df} "
                          f"({'external' if external else 'development'} data)")


def _calibration(f: Callable[..., st.CalibrationEstimate], y: FloatArray, risk: FloatArray
                 ) -> Callable[[], dict[str, Any]]:
    def make() -> dict[str, Any]:
        est = f(y, risk)
        return _interval(est.value, est.low, est.high, se=number(est.se))
    return make


def _spiegelhalter(y: FloatArray, risk: FloatArray) -> dict[str, Any]:
    z = st.spiegelhalter_z(y, risk)
    return _interval(z.statistic, p_value=number(z.p_value))


def _point_metrics(y: FloatArray, risk: FloatArray, external: bool, notes: list[str]
                   ) -> dict[str, dict[str, Any]]:
    errors = st.calibration_errors(y, risk)
    out: dict[str, dict[str, Any]] = {}
    out |= _attempt("auc", notes, lambda: _auc(y, risk))
    out["brier"] = _interval(st.brier(y, risk))
    out["scaled_brier"] = _interval(st.scaled_brier(y, risk))
    out |= _attempt("calibration_intercept", notes,
                    _calibration(st.calibration_intercept, y, risk))
    out |= _attempt("calibration_slope", notes, _calibration(st.calibration_slope, y, risk))
    for key in ("ici", "e50", "e90", "emax"):
        out[key] = _interval(getattr(errors, key))
    out |= _attempt("oe_ratio", notes, lambda: _oe(y, risk))
    out |= _attempt("hosmer_lemeshow", notes, lambda: _hosmer(y, risk, external))
    out |= _attempt("spiegelhalter_z", notes, lambda: _spiegelhalter(y, risk))
    return out


def _thin(curve: st.CalibrationCurve) -> tuple[FloatArray, FloatArray]:
    m = curve.risk.size
    keep = np.unique(np.round(np.linspace(0, m - 1, min(m, CURVE_POINTS))).astype(np.intp))
    return np.asarray(curve.risk[keep]), np.asarray(curve.observed[keep])


def _grouped(y: FloatArray, risk: FloatArray) -> list[dict[str, Any]]:
    from scipy.stats import binomtest

    out = []
    for rows in np.array_split(np.lexsort((y, risk)), min(10, y.size)):
        k, m = int(y[rows].sum()), int(rows.size)
        ci = binomtest(k, m).proportion_ci(confidence_level=0.95, method="wilson")
        out.append({"mean_risk": float(risk[rows].mean()), "observed": k / m,
                    "low": float(ci.low), "high": float(ci.high), "n": m})
    return out


def _histogram(y: FloatArray, risk: FloatArray) -> dict[str, Any]:
    return {"edges": HISTOGRAM_EDGES.tolist(),
            "events": np.histogram(risk[y == 1], HISTOGRAM_EDGES)[0].astype(int).tolist(),
            "nonevents": np.histogram(risk[y == 0], HISTOGRAM_EDGES)[0].astype(int).tolist()}


def _listed(values: FloatArray) -> list[float | None]:
    return [number(v) for v in values]


def _settings(extra: Mapping[str, Any] | None, ours: dict[str, Any]) -> dict[str, Any]:
    extra = dict(extra or {})
    clash = sorted(set(extra) & set(ours))
    if clash:
        raise EvidenceError(f"settings {clash} are recorded by evidence_set itself; use other "
                            "names")
    for key, value in extra.items():
        if value is not None and not isinstance(value, str | int | float | bool):
            raise EvidenceError(f"settings['{key}'] must be a number, text, true/false or "
                                f"null; got {type(value).__name__}")
    return ours | extra


def _draw_seed(seed: int | None) -> int:
    if seed is None:
        return int(np.random.SeedSequence().generate_state(1)[0])
    if isinstance(seed, bool) or not isinstance(seed, int | np.integer) or seed < 0:
        raise EvidenceError(f"seed must be a non-negative whole number; got {seed!r}")
    return int(seed)


def evidence_set(
    y: ArrayLike,
    risk: ArrayLike,
    *,
    kind: str,
    label: str,
    dataset: Mapping[str, Any],
    settings: Mapping[str, Any] | None = None,
    band_boot: int = 200,
    seed: int | None = None,
    progress: Progress | None = None,
    hl_external: bool | None = None,
) -> dict[str, Any]:
    """An evidence set (FORMAT.md shape) of predicted ``risk`` against outcomes ``y``.

    Parameters
    ----------
    y : array (n,)
        Outcome coded 0/1 (1 = event); at least 2 of each class.
    risk : array (n,)
        Predicted risks in [0, 1].
    kind : {"apparent", "bootstrap", "external", "recalibrated", "imported"}
    label : str
        Short label shown with the evidence.
    dataset : mapping
        ``name`` (required) and optionally ``period``, ``population``,
        ``sha256``, ``excluded``, ``synthetic``; ``n`` and ``events`` are
        computed (if given they must agree).
    settings : mapping, optional
        Extra scalar settings to record (provenance); must not reuse the
        names recorded here.
    band_boot : int
        Resamples of the (y, risk) pairs for the bands and bootstrap
        intervals (0: no bands).
    seed : int, optional
        Seed of the resamples (drawn and recorded when None).
    progress : callable, optional
        ``progress(done, total)`` after each resample; returning False cancels
        with :class:`calcbuilder.stats.CancelledError`.
    hl_external : bool, optional
        Hosmer-Lemeshow df rule: ``True`` for data the model was not fitted
        on (df = g). Default: True for kind ``external`` only.

    Returns
    -------
    dict
        The evidence set with a provisional ``id`` (``"<kind>-1"``); use
        :func:`with_evidence_set` to add it to a calculator with a unique id.

    Raises
    ------
    EvidenceError
        Bad arguments, fewer than 2 events or non-events.
    """
    if kind not in KINDS:
        raise EvidenceError(f"kind must be one of {', '.join(KINDS)}; got {kind!r}")
    if isinstance(band_boot, bool) or not isinstance(band_boot, int) or band_boot < 0:
        raise EvidenceError(f"band_boot must be a whole number >= 0; got {band_boot!r}")
    yv, rv = _check(y, risk)
    used_seed = _draw_seed(seed)
    external = kind == "external" if hl_external is None else bool(hl_external)
    notes: list[str] = []
    metrics = _point_metrics(yv, rv, external, notes)
    px, py = _thin(st.calibration_curve(yv, rv))
    dc = st.decision_curve(yv, rv)
    curve: dict[str, Any] = {"risk": _listed(px), "observed": _listed(py), "smoother": SMOOTHER}
    decision: dict[str, Any] = {"thresholds": dc.thresholds.tolist(), "model": _listed(dc.model),
                                "treat_all": _listed(dc.treat_all)}
    if band_boot:
        bands = resample_bands(yv, rv, px, dc.thresholds, B=band_boot, seed=used_seed,
                               progress=progress)
        add_scalar_bands(metrics, bands["scalars"], notes)
        low, high = percentiles(bands["curves"])
        curve["low"], curve["high"] = _listed(low), _listed(high)
        low, high = percentiles(bands["nets"])
        decision["model_low"], decision["model_high"] = _listed(low), _listed(high)
    ours = {
        "level": 0.95, "auc_interval": "DeLong SE, logit-transformed",
        "calibration_interval": "Wald, inverse Fisher information",
        "oe_interval": "exp(ln(O/E) +/- 1.96/sqrt(O)) (Poisson)",
        "hl_groups": min(10, yv.size), "hl_df_rule": "g" if external else "g - 2",
        "grouping": "sorted risk split into near-equal groups (numpy.array_split)",
        "grouped_interval": "Wilson score", "calibration_smoother": SMOOTHER,
        "calibration_points": len(px), "treat_rule": "treated when risk >= threshold",
        "histogram_bin_width": 0.02, "band_boot": band_boot,
        "band_seed": used_seed if band_boot else None,
        "band_method": "percentile 2.5/97.5 over resamples of (y, risk) pairs, one "
                       "rng.integers(0, n, n) per resample, numpy default_rng(seed)",
    }
    out: dict[str, Any] = {
        "id": f"{kind}-1", "kind": kind, "label": label,
        "created": dt.datetime.now(dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "dataset": _dataset(dataset, yv), "source": f"calcbuilder {__version__}",
        "settings": _settings(settings, ours), "metrics": metrics,
        "calibration_curve": curve, "grouped_calibration": _grouped(yv, rv),
        "decision_curve": decision, "risk_histogram": _histogram(yv, rv),
    }
    if notes:
        out["notes"] = notes
    return out


def with_evidence_set(document: Mapping[str, Any], evidence: Mapping[str, Any]
                      ) -> tuple[dict[str, Any], bool]:
    """A copy of a calculator document with ``evidence`` appended under a unique id.

    The id is ``<kind>-<k>`` with the smallest ``k`` not yet used. Any signature
    is removed (the payload changes, so it would no longer verify).

    Returns
    -------
    (dict, bool)
        The new document and whether a signature was removed.
    """
    doc = {k: v for k, v in document.items() if k != "signature"}
    existing = list(doc.get("evidence", []))
    used = {e.get("id") for e in existing}
    k = 1
    while f"{evidence['kind']}-{k}" in used:
        k += 1
    doc["evidence"] = [*existing, {**evidence, "id": f"{evidence['kind']}-{k}"}]
    return doc, "signature" in document
