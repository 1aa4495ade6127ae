"""Bootstrap bands and intervals of an evidence set (private to :mod:`.metrics`).

Each resample draws ``rng.integers(0, n, n)`` rows of the (y, risk) pairs from
``numpy.random.default_rng(seed)``; per resample the Brier score, scaled Brier
score, ICI family, the calibration curve at the stored points and the model's
net benefit are computed by :mod:`calcbuilder.stats`. Bands and intervals are
pointwise 2.5% and 97.5% percentiles.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .. import stats as st
from ..stats.errors import CancelledError

__all__ = ["BAND_SCALARS", "add_scalar_bands", "percentiles", "resample_bands"]

FloatArray = NDArray[np.float64]
Progress = Callable[[int, int], bool | None]


BAND_SCALARS = ("brier", "scaled_brier", "ici", "e50", "e90", "emax")


def _one_resample(yb: FloatArray, rb: FloatArray, points: FloatArray, thresholds: FloatArray
                  ) -> tuple[list[float], FloatArray, FloatArray]:
    """Scalar metrics, curve at ``points`` and model net benefit of one resample."""
    errors = st.calibration_errors(yb, rb)
    try:
        scaled = st.scaled_brier(yb, rb)
    except st.StatsInputError:  # one outcome class in the resample
        scaled = math.nan
    scalars = [st.brier(yb, rb), scaled, errors.ici, errors.e50, errors.e90, errors.emax]
    curve = st.calibration_curve(yb, rb)
    at = np.interp(points, curve.risk, curve.observed, left=np.nan, right=np.nan)
    return scalars, at, st.decision_curve(yb, rb, thresholds).model


def resample_bands(y: FloatArray, risk: FloatArray, points: FloatArray, thresholds: FloatArray, *,
           B: int, seed: int, progress: Progress | None) -> dict[str, FloatArray]:
    rng = np.random.default_rng(seed)
    n = y.size
    scalars = np.full((B, len(BAND_SCALARS)), np.nan)
    curves = np.full((B, points.size), np.nan)
    nets = np.full((B, thresholds.size), np.nan)
    for b in range(B):
        idx = rng.integers(0, n, n)
        s, curves[b], nets[b] = _one_resample(y[idx], risk[idx], points, thresholds)
        scalars[b] = s
        if progress is not None and progress(b + 1, B) is False:
            raise CancelledError("cancelled while resampling for the evidence bands")
    return {"scalars": scalars, "curves": curves, "nets": nets}


def percentiles(values: FloatArray, min_share: float = 0.5) -> tuple[FloatArray, FloatArray]:
    """Pointwise 2.5% and 97.5% percentiles of the columns; NaN where too few values."""
    ok = np.isfinite(values)
    enough = ok.sum(axis=0) >= max(2, min_share * values.shape[0])
    low, high = np.full(values.shape[1], np.nan), np.full(values.shape[1], np.nan)
    if enough.any():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            q = np.nanpercentile(values[:, enough], [2.5, 97.5], axis=0)
        low[enough], high[enough] = q[0], q[1]
    return low, high


def add_scalar_bands(metrics: dict[str, dict[str, Any]], scalars: FloatArray,
                      notes: list[str]) -> None:
    low, high = percentiles(scalars)
    for j, key in enumerate(BAND_SCALARS):
        value = metrics[key]["value"]
        if not (math.isfinite(low[j]) and math.isfinite(high[j])):
            continue
        if value is not None and low[j] <= value <= high[j]:
            metrics[key]["low"], metrics[key]["high"] = float(low[j]), float(high[j])
        else:
            notes.append(f"{key}: bootstrap percentile interval ({low[j]:.4g} to {high[j]:.4g}) "
                         "does not contain the estimate, so no interval is stored")
