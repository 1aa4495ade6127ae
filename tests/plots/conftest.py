"""Realistic synthetic evidence arrays shared by the figure tests (seeded, numpy only)."""

from __future__ import annotations

import numpy as np
import pytest


def _expit(x: np.ndarray) -> np.ndarray:
    return 1.0 / (1.0 + np.exp(-x))


@pytest.fixture(scope="module")
def cohort() -> dict[str, np.ndarray]:
    """About 600 patients, about 12% events; the model is mildly miscalibrated."""
    rng = np.random.default_rng(7)
    lp = rng.normal(-2.3, 1.0, 600)
    y = (rng.random(600) < _expit(lp)).astype(float)
    risk = _expit(1.1 * lp + 0.1 + rng.normal(0, 0.3, 600))
    return {"y": y, "risk": risk}


@pytest.fixture(scope="module")
def roc_arrays(cohort) -> tuple[np.ndarray, np.ndarray]:
    y, risk = cohort["y"], cohort["risk"]
    cuts = np.unique(risk)[::-1]
    tpr = np.array([0.0, *[(risk[y == 1] >= c).mean() for c in cuts]])
    fpr = np.array([0.0, *[(risk[y == 0] >= c).mean() for c in cuts]])
    return fpr, tpr


@pytest.fixture(scope="module")
def decision(cohort) -> dict[str, np.ndarray]:
    """Net benefit at thresholds 1%..99% (Vickers & Elkin 2006 formula)."""
    y, risk = cohort["y"], cohort["risk"]
    t = np.arange(1, 100) / 100
    odds = t / (1 - t)
    treat = risk[None, :] >= t[:, None]
    tp = (treat & (y == 1)).mean(axis=1)
    fp = (treat & (y == 0)).mean(axis=1)
    prev = y.mean()
    model = tp - fp * odds
    return {"t": t, "model": model, "treat_all": prev - (1 - prev) * odds,
            "low": model - 0.01, "high": model + 0.01, "ref": 0.8 * model}


@pytest.fixture(scope="module")
def histogram(cohort) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    edges = np.linspace(0, 1, 41)
    y, risk = cohort["y"], cohort["risk"]
    return (edges, np.histogram(risk[y == 1], edges)[0].astype(float),
            np.histogram(risk[y == 0], edges)[0].astype(float))
