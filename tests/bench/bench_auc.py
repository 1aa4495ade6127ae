"""Benchmark: AUC with its DeLong SE on 2,000,000 rows (target: under 1 s).

Run with ``.venv/bin/python tests/bench/bench_auc.py``. Not collected by pytest.
Prints our time (auc_ci: AUC, DeLong SE and logit interval), the time of
``sklearn.metrics.roc_auc_score`` alone (AUC only), their ratio and the largest
absolute difference between the two AUC values, for continuous risks (no ties)
and for risks rounded to 3 decimals (heavy ties). Data are synthetic.
"""

from __future__ import annotations

import sys
import time

import numpy as np

from calcbuilder.stats import auc_ci

N_ROWS = 2_000_000
LIMIT_SECONDS = 1.0
REPEATS = 3


def _timed(func, *args):
    """Best wall time of REPEATS calls, the first (cold) call time, and the last result."""
    times = []
    for _ in range(REPEATS):
        start = time.perf_counter()
        result = func(*args)
        times.append(time.perf_counter() - start)
    return min(times), times[0], result


def _synthetic(rng: np.random.Generator, decimals: int | None):
    y = (rng.random(N_ROWS) < 0.3).astype(np.float64)
    risk = np.clip(rng.normal(0.3 + 0.15 * y, 0.15), 0.0, 1.0)
    return y, (risk if decimals is None else np.round(risk, decimals))


def main() -> int:
    from sklearn.metrics import roc_auc_score

    rng = np.random.default_rng(20240601)
    worst = 0.0
    for label, decimals in (("continuous risks", None), ("risks rounded to 3 dp", 3)):
        y, risk = _synthetic(rng, decimals)
        ours, ours_cold, res = _timed(auc_ci, y, risk)
        theirs, _, ref = _timed(roc_auc_score, y, risk)
        diff = abs(res.value - ref)
        worst = max(worst, ours_cold, ours)
        print(f"{label}: {N_ROWS:,} rows, AUC {res.value:.6f}, DeLong SE {res.se:.3g}")
        print(f"  calcbuilder auc_ci      best {ours:.3f} s (first call {ours_cold:.3f} s)")
        print(f"  sklearn roc_auc_score   best {theirs:.3f} s (AUC only)")
        print(f"  ratio ours / sklearn    {ours / theirs:.2f}")
        print(f"  max |AUC difference|    {diff:.3g}")
    ok = worst < LIMIT_SECONDS
    print(f"slowest call {worst:.3f} s: {'PASS' if ok else 'FAIL'} (limit {LIMIT_SECONDS} s)")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
