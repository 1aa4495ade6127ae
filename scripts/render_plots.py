"""Render every calcbuilder figure from synthetic numbers, as PNGs for review.

Usage::

    .venv/bin/python scripts/render_plots.py OUTPUT_FOLDER [--dpi 110]

SYNTHETIC DATA, NOT FOR CLINICAL USE. A seeded simulated cohort (about 1,500
patients, about 12% events) is scored by a slightly miscalibrated "model" and a
weaker "reference model"; the evidence arrays come from ``calcbuilder.stats``
the way an evidence set would hold them. Each figure is drawn for the screen
and for print, and the patient figures for a few risks including edge cases.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure

from calcbuilder import plots
from calcbuilder.stats import auc_ci, calibration_curve, decision_curve, roc_points

SEED = 20261202
GRID = np.linspace(0.01, 0.6, 60)  # where bootstrap calibration bands are read off


@dataclass(frozen=True)
class Cohort:
    """Simulated outcomes with the model's and the reference model's risks."""

    y: np.ndarray
    risk: np.ndarray
    ref_risk: np.ndarray


def _expit(x: np.ndarray) -> np.ndarray:
    return 1.0 / (1.0 + np.exp(-x))


def make_cohort(n: int = 1500, seed: int = SEED) -> Cohort:
    """About 12% events; the model is a little over-confident, the reference noisier."""
    rng = np.random.default_rng(seed)
    lp = rng.normal(-2.35, 1.05, n)
    y = (rng.random(n) < _expit(lp)).astype(float)
    risk = _expit(1.12 * lp + 0.15 + rng.normal(0, 0.25, n))
    ref_risk = _expit(0.6 * lp - 0.8 + rng.normal(0, 0.7, n))
    return Cohort(y, risk, ref_risk)


def _wilson(events: float, n: float) -> tuple[float, float]:
    z = 1.959964
    p = events / n
    centre = (p + z * z / (2 * n)) / (1 + z * z / n)
    half = z * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / (1 + z * z / n)
    return max(0.0, centre - half), min(1.0, centre + half)


def grouped_rows(c: Cohort, groups: int = 10) -> list[tuple[float, float, float, float]]:
    """Tenths of predicted risk: mean risk, observed proportion, Wilson 95% CI."""
    order = np.argsort(c.risk)
    rows = []
    for idx in np.array_split(order, groups):
        low, high = _wilson(float(c.y[idx].sum()), float(idx.size))
        rows.append((float(c.risk[idx].mean()), float(c.y[idx].mean()), low, high))
    return rows


def bootstrap_bands(c: Cohort, thresholds: np.ndarray, reps: int = 120,
                    seed: int = SEED) -> tuple[np.ndarray, np.ndarray]:
    """Percentile 95% bands of the calibration curve (on GRID) and of net benefit."""
    rng = np.random.default_rng(seed + 1)
    cal, nb = [], []
    for _ in range(reps):
        i = rng.integers(0, c.y.size, c.y.size)
        curve = calibration_curve(c.y[i], c.risk[i])
        cal.append(np.interp(GRID, curve.risk, curve.observed))
        nb.append(decision_curve(c.y[i], c.risk[i], thresholds).model)
    return np.percentile(cal, [2.5, 97.5], axis=0), np.percentile(nb, [2.5, 97.5], axis=0)


def _histograms(c: Cohort) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    edges = np.linspace(0, 1, 51)
    events, _ = np.histogram(c.risk[c.y == 1], edges)
    nonevents, _ = np.histogram(c.risk[c.y == 0], edges)
    return edges, events.astype(float), nonevents.astype(float)


def _icons_for(risk: float, **kw: object) -> Figure:
    n, total = plots.icon_counts(risk)
    return plots.icon_array_figure(n, total=total, outcome="delirium", **kw)  # type: ignore[arg-type]


def figures(c: Cohort, medium: str) -> dict[str, Callable[[], Figure]]:
    """Every figure for one medium, as name -> zero-argument builder."""
    roc, ref_roc = roc_points(c.y, c.risk), roc_points(c.y, c.ref_risk)
    a, a_ref = auc_ci(c.y, c.risk), auc_ci(c.y, c.ref_risk)
    curve = calibration_curve(c.y, c.risk)
    t = np.arange(1, 100) / 100
    dc, dc_ref = decision_curve(c.y, c.risk, t), decision_curve(c.y, c.ref_risk, t)
    (cal_lo, cal_hi), (nb_lo, nb_hi) = bootstrap_bands(c, t)
    hist = _histograms(c)
    inside = GRID <= curve.risk.max()
    kw = {"medium": medium, "synthetic": True}
    labels = ["Age (years)", "Cognitive screen errors", "ASA physical status",
              "Hearing or vision impairment", "Serum sodium (mmol/L)",
              "Serum creatinine (µmol/L)", "Daily medicines", "Anaesthesia type",
              "Heavy alcohol use"]
    contrib = [0.92, 0.61, 0.35, 0.28, -0.12, 0.07, 0.18, -0.22, 0.0]
    return {
        "roc": lambda: plots.roc_figure(
            1 - roc.specificity, roc.sensitivity, auc=a.value, auc_low=a.low, auc_high=a.high,
            reference=(1 - ref_roc.specificity, ref_roc.sensitivity),
            reference_label="Model in current use", reference_auc=a_ref.value, **kw),
        "calibration": lambda: plots.calibration_figure(
            curve.risk, curve.observed, grouped=grouped_rows(c), histogram=hist, **kw),
        "calibration_band": lambda: plots.calibration_figure(
            GRID[inside], np.interp(GRID[inside], curve.risk, curve.observed),
            band_low=cal_lo[inside], band_high=cal_hi[inside], title="Demo Hospital A", **kw),
        "decision_form": lambda: plots.decision_curve_figure(
            t, dc.model, dc.treat_all, reasonable_range=(0.05, 0.30), threshold=0.10,
            patient_risk=0.143, **kw),
        "decision_outside": lambda: plots.decision_curve_figure(
            t, dc.model, dc.treat_all, reasonable_range=(0.05, 0.30), threshold=0.40,
            patient_risk=0.004, **kw),
        "decision_report": lambda: plots.decision_curve_figure(
            t, dc.model, dc.treat_all, model_low=nb_lo, model_high=nb_hi,
            reasonable_range=(0.05, 0.30), reference=dc_ref.model,
            reference_label="Model in current use", show_all_thresholds=True, **kw),
        "icons_14": lambda: plots.icon_array_figure(14, outcome="delirium", **kw),
        "icons_0.4pct": lambda: _icons_for(0.004, **kw),
        "icons_0": lambda: plots.icon_array_figure(0, total=1000, **kw),
        "position": lambda: plots.risk_position_figure(
            hist[0], hist[1] + hist[2], 0.143, **kw),
        "position_high": lambda: plots.risk_position_figure(
            hist[0], hist[1] + hist[2], 0.81, **kw),
        "contributions": lambda: plots.contributions_figure(labels, contrib, **kw),
    }


def main(argv: list[str] | None = None) -> int:
    """Write ``<name>_<medium>.png`` for every figure into the folder given."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("folder", type=Path, help="output folder (created if missing)")
    parser.add_argument("--dpi", type=float, default=110.0, help="PNG resolution (default 110)")
    args = parser.parse_args(argv)
    args.folder.mkdir(parents=True, exist_ok=True)
    cohort = make_cohort()
    for medium in ("screen", "print"):
        for name, build in figures(cohort, medium).items():
            path = args.folder / f"{name}_{medium}.png"
            path.write_bytes(plots.figure_png_bytes(build(), dpi=args.dpi))
            print(path)
    return 0


if __name__ == "__main__":
    sys.exit(main())
