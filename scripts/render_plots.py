"""Render every calcbuilder figure from synthetic numbers, as PNGs for review.

Usage::

    .venv/bin/python scripts/render_plots.py OUTPUT_FOLDER [--dpi 110] [--reps 120]

SYNTHETIC DATA, NOT FOR CLINICAL USE. A seeded simulated cohort (about 1,500
patients, about 12% events) is scored by a slightly miscalibrated "model" and a
weaker "reference model", and the arrays an evidence set would hold are worked
out here with plain numpy (short textbook formulas, so this script keeps
working while the statistics core changes; the real numbers come from
``calcbuilder.stats``). Each figure is drawn for the screen and for print, and
the patient figures for a few risks including edge cases.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from matplotlib.figure import Figure

from calcbuilder import plots

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


def roc(y: np.ndarray, risk: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """False- and true-positive rates with every distinct risk as a threshold."""
    values = np.unique(risk)[::-1]
    tp = np.array([(risk[y == 1] >= v).sum() for v in values], dtype=float)
    fp = np.array([(risk[y == 0] >= v).sum() for v in values], dtype=float)
    m, n = (y == 1).sum(), (y == 0).sum()
    return np.concatenate(([0.0], fp / n)), np.concatenate(([0.0], tp / m))


def auc_hanley(y: np.ndarray, risk: np.ndarray) -> tuple[float, float, float]:
    """AUC (Mann-Whitney, ties 1/2) with the Hanley-McNeil 1982 Wald 95% CI."""
    ranks = np.argsort(np.argsort(risk, kind="stable"), kind="stable") + 1.0
    for v in np.unique(risk):  # midranks for ties
        tie = risk == v
        ranks[tie] = ranks[tie].mean()
    m, n = float((y == 1).sum()), float((y == 0).sum())
    a = (ranks[y == 1].sum() - m * (m + 1) / 2) / (m * n)
    q1, q2 = a / (2 - a), 2 * a * a / (1 + a)
    se = np.sqrt((a * (1 - a) + (m - 1) * (q1 - a * a) + (n - 1) * (q2 - a * a)) / (m * n))
    return float(a), float(a - 1.959964 * se), float(a + 1.959964 * se)


def smooth(y: np.ndarray, risk: np.ndarray, at: np.ndarray, frac: float = 2 / 3) -> np.ndarray:
    """Local-linear tricube smoother of y on risk (lowess without robustness steps)."""
    k = int(np.ceil(frac * y.size))
    out = np.empty(at.size)
    for j, x0 in enumerate(at):
        d = np.abs(risk - x0)
        h = np.partition(d, k - 1)[k - 1]
        w = np.clip(1 - (d / h) ** 3, 0, None) ** 3
        xm = np.average(risk, weights=w)
        ym = np.average(y, weights=w)
        slope = np.sum(w * (risk - xm) * (y - ym)) / np.sum(w * (risk - xm) ** 2)
        out[j] = ym + slope * (x0 - xm)
    return out


def net_benefit(y: np.ndarray, risk: np.ndarray, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Net benefit of the model (treat if risk >= t) and of treating all."""
    n, odds = y.size, t / (1 - t)
    treat = risk[None, :] >= t[:, None]
    tp = (treat & (y[None, :] == 1)).sum(axis=1) / n
    fp = (treat & (y[None, :] == 0)).sum(axis=1) / n
    prev = y.mean()
    return tp - fp * odds, prev - (1 - prev) * odds


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
        cal.append(smooth(c.y[i], c.risk[i], GRID))
        nb.append(net_benefit(c.y[i], c.risk[i], thresholds)[0])
    return np.percentile(cal, [2.5, 97.5], axis=0), np.percentile(nb, [2.5, 97.5], axis=0)


def _histograms(c: Cohort) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    edges = np.linspace(0, 1, 41)
    events, _ = np.histogram(c.risk[c.y == 1], edges)
    nonevents, _ = np.histogram(c.risk[c.y == 0], edges)
    return edges, events.astype(float), nonevents.astype(float)


def _icons_for(risk: float, **kw: Any) -> Figure:
    n, total = plots.icon_counts(risk)
    return plots.icon_array_figure(n, total=total, outcome="delirium", **kw)


def figures(c: Cohort, medium: str, reps: int = 120) -> dict[str, Callable[[], Figure]]:
    """Every figure for one medium, as name -> zero-argument builder."""
    fpr, tpr = roc(c.y, c.risk)
    ref_fpr, ref_tpr = roc(c.y, c.ref_risk)
    a, a_low, a_high = auc_hanley(c.y, c.risk)
    curve_x = np.quantile(c.risk, np.linspace(0, 1, 80))
    curve_y = smooth(c.y, c.risk, curve_x)
    t = np.arange(1, 100) / 100
    nb, nb_all = net_benefit(c.y, c.risk, t)
    nb_ref, _ = net_benefit(c.y, c.ref_risk, t)
    (cal_lo, cal_hi), (nb_lo, nb_hi) = bootstrap_bands(c, t, reps)
    hist = _histograms(c)
    inside = curve_x.max() >= GRID
    kw: dict[str, Any] = {"medium": medium, "synthetic": True}
    labels = ["Age (years)", "Cognitive screen errors", "ASA physical status",
              "Hearing or vision impairment", "Serum sodium (mmol/L)",
              "Serum creatinine (µmol/L)", "Daily medicines", "Anaesthesia type",
              "Heavy alcohol use"]
    contrib = [0.92, 0.61, 0.35, 0.28, -0.12, 0.07, 0.18, -0.22, 0.0]
    return {
        "roc": lambda: plots.roc_figure(
            fpr, tpr, auc=a, auc_low=a_low, auc_high=a_high, reference=(ref_fpr, ref_tpr),
            reference_label="Model in current use",
            reference_auc=auc_hanley(c.y, c.ref_risk)[0], **kw),
        "calibration": lambda: plots.calibration_figure(
            curve_x, curve_y, grouped=grouped_rows(c), histogram=hist, **kw),
        "calibration_band": lambda: plots.calibration_figure(
            GRID[inside], np.interp(GRID[inside], curve_x, curve_y),
            band_low=cal_lo[inside], band_high=cal_hi[inside], title="Demo Hospital A", **kw),
        "decision_form": lambda: plots.decision_curve_figure(
            t, nb, nb_all, reasonable_range=(0.05, 0.30), threshold=0.10,
            patient_risk=0.143, **kw),
        "decision_outside": lambda: plots.decision_curve_figure(
            t, nb, nb_all, reasonable_range=(0.05, 0.30), threshold=0.40,
            patient_risk=0.004, **kw),
        "decision_report": lambda: plots.decision_curve_figure(
            t, nb, nb_all, model_low=nb_lo, model_high=nb_hi,
            reasonable_range=(0.05, 0.30), reference=nb_ref,
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
    parser.add_argument("--reps", type=int, default=120,
                        help="bootstrap resamples for the confidence bands (default 120)")
    args = parser.parse_args(argv)
    args.folder.mkdir(parents=True, exist_ok=True)
    cohort = make_cohort()
    for medium in ("screen", "print"):
        for name, build in figures(cohort, medium, args.reps).items():
            path = args.folder / f"{name}_{medium}.png"
            path.write_bytes(plots.figure_png_bytes(build(), dpi=args.dpi))
            print(path)
    return 0


if __name__ == "__main__":
    sys.exit(main())
