"""Benchmark: a 99-threshold decision curve on 2,000,000 rows (budget 0.25 s).

Run ``.venv/bin/python tests/bench/bench_decision_curve.py``. Prints the time of
:func:`calcbuilder.stats.decision_curve` (best of several runs), the time of a
straightforward loop (one boolean mask per threshold) measured in the same run,
their ratio and the largest absolute difference between the two. Exits 1 if
the budget is exceeded or the two disagree. Data are synthetic.
"""

from __future__ import annotations

import sys
import time

import numpy as np

from calcbuilder.stats import decision_curve

__all__ = ["loop_net_benefit", "main"]

N_ROWS = 2_000_000
BUDGET_S = 0.25
REPEATS = 5


def loop_net_benefit(y: np.ndarray, risk: np.ndarray, thresholds: np.ndarray) -> np.ndarray:
    """Reference: for each threshold, a mask ``risk >= t`` and two sums."""
    n = y.size
    events = y == 1
    out = np.empty(thresholds.size)
    for k, t in enumerate(thresholds):
        treat = risk >= t
        tp = np.count_nonzero(treat & events)
        fp = np.count_nonzero(treat & ~events)
        out[k] = tp / n - fp / n * t / (1 - t)
    return out


def _best_time(fn, repeats: int) -> tuple[float, object]:
    best, result = float("inf"), None
    for _ in range(repeats):
        start = time.perf_counter()
        result = fn()
        best = min(best, time.perf_counter() - start)
    return best, result


def main() -> int:
    rng = np.random.default_rng(2024)
    risk = rng.beta(1.2, 4.0, N_ROWS)
    risk[: N_ROWS // 10] = np.round(risk[: N_ROWS // 10], 2)  # 10% tie with thresholds
    y = (rng.random(N_ROWS) < risk).astype(np.int8)
    thresholds = np.arange(1, 100) / 100

    ours_s, dc = _best_time(lambda: decision_curve(y, risk), REPEATS)
    loop_s, ref = _best_time(lambda: loop_net_benefit(y, risk, thresholds), 2)
    w = rng.integers(0, 3, N_ROWS).astype(float)
    weighted_s, _ = _best_time(lambda: decision_curve(y, risk, weights=w), 2)
    diff = float(np.max(np.abs(dc.model - ref)))  # type: ignore[union-attr]

    print(f"rows {N_ROWS:,}, thresholds {thresholds.size} (synthetic data)")
    print(f"decision_curve (unweighted, best of {REPEATS}): {ours_s:.4f} s  (budget {BUDGET_S} s)")
    print(f"mask loop reference (best of 2):            {loop_s:.4f} s")
    print(f"ratio loop / ours:                          {loop_s / ours_s:.1f}x")
    print(f"max abs difference in net benefit:          {diff:.3g}")
    print(f"decision_curve with weights (best of 2):    {weighted_s:.4f} s  (information)")
    ok = ours_s < BUDGET_S and diff <= 1e-12
    print("PASS" if ok else "FAIL")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
