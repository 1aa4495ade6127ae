"""Benchmark: the lowess calibration curve on 200,000 rows (target: under 0.5 s).

Run with ``.venv/bin/python tests/bench/bench_lowess.py``. Not collected by pytest.
Times ``calibration_curve`` (span 2/3, no robustness iterations, delta = 1% of the
risk range) against ``statsmodels.nonparametric.lowess(y, p, frac=2/3, it=0,
delta=0.01*range)`` with the same settings, and prints the ratio of the times and
the largest absolute difference between the two curves at the observed risks, for
continuous risks and for risks rounded to 3 decimals (ties). Data are synthetic.
"""

from __future__ import annotations

import sys
import time

import numpy as np

from calcbuilder.stats import calibration_curve

N_ROWS = 200_000
LIMIT_SECONDS = 0.5
REPEATS = 3


def _timed(func, *args, **kwargs):
    """Best wall time of REPEATS calls, the first (cold) call time, and the last result."""
    times = []
    for _ in range(REPEATS):
        start = time.perf_counter()
        result = func(*args, **kwargs)
        times.append(time.perf_counter() - start)
    return min(times), times[0], result


def _synthetic(rng: np.random.Generator, decimals: int | None):
    """Risks from a logistic model; outcomes from a miscalibrated version of it."""
    lp = rng.normal(-1.2, 1.3, N_ROWS)
    y = (rng.random(N_ROWS) < 1.0 / (1.0 + np.exp(-(0.8 * lp + 0.2)))).astype(np.float64)
    risk = 1.0 / (1.0 + np.exp(-lp))
    return y, (risk if decimals is None else np.round(risk, decimals))


def main() -> int:
    from statsmodels.nonparametric.smoothers_lowess import lowess as sm_lowess

    rng = np.random.default_rng(20240602)
    worst = 0.0
    for label, decimals in (("continuous risks", None), ("risks rounded to 3 dp", 3)):
        y, risk = _synthetic(rng, decimals)
        delta = 0.01 * float(np.ptp(risk))
        ours, ours_cold, curve = _timed(calibration_curve, y, risk)
        theirs, _, ref = _timed(
            sm_lowess, y, risk, frac=2 / 3, it=0, delta=delta, return_sorted=False
        )
        at_rows = curve.observed[np.searchsorted(curve.risk, risk)]
        diff = float(np.max(np.abs(at_rows - ref)))
        worst = max(worst, ours_cold, ours)
        print(f"{label}: {N_ROWS:,} rows, {curve.risk.size:,} distinct risks, delta {delta:.3g}")
        print(f"  calcbuilder calibration_curve  best {ours:.3f} s (first call {ours_cold:.3f} s)")
        print(f"  statsmodels lowess (it=0)      best {theirs:.3f} s")
        print(f"  ratio ours / statsmodels       {ours / theirs:.2f}")
        print(f"  max |curve difference|         {diff:.3g}")
    ok = worst < LIMIT_SECONDS
    print(f"slowest call {worst:.3f} s: {'PASS' if ok else 'FAIL'} (limit {LIMIT_SECONDS} s)")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
