"""Benchmark: batched bootstrap validation against a straightforward statsmodels loop.

Run with ``.venv/bin/python tests/bench/bench_bootstrap.py`` (options: ``--help``).
Not collected by pytest (``norecursedirs = tests/bench``).

For simulated data with p = 8 predictors and n = 2,000 / 20,000 / 200,000 it times:

* ours -- ``bootstrap_optimism(X, y, PlainLogistic(), ["auc", "brier",
  "calibration_slope"], n_boot=B)``: Harrell's optimism correction, each
  resample refitted and scored on itself and on the original data;
* the reference -- the textbook loop on the SAME resample indices (one
  ``rng.integers(0, n, n)`` per resample from ``default_rng(seed)``): copy the
  rows, ``statsmodels Logit`` refit, scikit-learn ``roc_auc_score`` and
  ``brier_score_loss``, calibration slope by ``statsmodels Logit`` on
  ``logit(p)``, on the resample and on the original data.

Both run in the same process, one after the other. It prints both times, their
ratio, the largest difference between the two sets of per-resample values and
between the corrected estimates, and the peak memory of our run (tracemalloc).
Where the reference loop times fewer resamples than B, its time is extrapolated
linearly and the line says so. ``--blas`` also times ours with BLAS left at its
default thread count, to check the one-thread choice.
"""

from __future__ import annotations

import argparse
import time
import tracemalloc
from collections.abc import Iterator
from contextlib import contextmanager

import numpy as np
import statsmodels.api as sm
from sklearn.metrics import brier_score_loss, roc_auc_score

from calcbuilder.stats import _batch_core
from calcbuilder.stats.resampling import BootstrapValidation, PlainLogistic, bootstrap_optimism

METRICS = ["auc", "brier", "calibration_slope"]
P = 8


def simulate(n: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Synthetic cohort: 6 continuous and 2 binary predictors, about 25% events."""
    rng = np.random.default_rng(seed)
    X = np.column_stack([rng.normal(size=(n, 6)), rng.random((n, 2)) < 0.3]).astype(float)
    beta = np.array([-1.5, 0.8, -0.5, 0.3, 0.0, 0.2, -0.1, 0.7, 0.4])
    eta = beta[0] + X @ beta[1:]
    y = (rng.random(n) < 1.0 / (1.0 + np.exp(-eta))).astype(float)
    return X, y


def _slope(y: np.ndarray, p: np.ndarray) -> float:
    lp = np.log(p / (1.0 - p))
    return float(sm.Logit(y, sm.add_constant(lp)).fit(disp=0).params[1])


def _scores(y: np.ndarray, p: np.ndarray) -> list[float]:
    return [roc_auc_score(y, p), brier_score_loss(y, p), _slope(y, p)]


def reference_loop(X: np.ndarray, y: np.ndarray, n_boot: int, seed: int) -> dict[str, np.ndarray]:
    """The straightforward loop: statsmodels refits, scikit-learn metrics, copied rows."""
    n = y.size
    Z = sm.add_constant(X, has_constant="add")
    rng = np.random.default_rng(seed)
    apparent = _scores(y, sm.Logit(y, Z).fit(disp=0).predict(Z))
    boot, test = np.empty((n_boot, 3)), np.empty((n_boot, 3))
    for b in range(n_boot):
        idx = rng.integers(0, n, n)
        fit = sm.Logit(y[idx], Z[idx]).fit(disp=0)
        boot[b] = _scores(y[idx], fit.predict(Z[idx]))
        test[b] = _scores(y, fit.predict(Z))
    return {"apparent": np.array(apparent), "boot": boot, "test": test}


@contextmanager
def blas_threads(limit: int | None) -> Iterator[None]:
    old = _batch_core.BLAS_THREADS
    _batch_core.BLAS_THREADS = limit
    try:
        yield
    finally:
        _batch_core.BLAS_THREADS = old


def time_ours(
    X: np.ndarray, y: np.ndarray, n_boot: int, seed: int
) -> tuple[float, BootstrapValidation]:
    t0 = time.perf_counter()
    res = bootstrap_optimism(X, y, PlainLogistic(), METRICS, n_boot=n_boot, seed=seed)
    return time.perf_counter() - t0, res


def peak_memory_mb(X: np.ndarray, y: np.ndarray, seed: int) -> float:
    """Peak numpy memory of our bootstrap (a few chunks; the peak does not grow with B)."""
    n_boot = 3 * _batch_core.chunk_rows(y.size)
    tracemalloc.start()
    bootstrap_optimism(X, y, PlainLogistic(), METRICS, n_boot=n_boot, seed=seed)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return peak / 2**20


def run(n: int, n_boot: int, ref_boot: int, seed: int, compare_blas: bool) -> None:
    X, y = simulate(n, seed)
    t_ours, res = time_ours(X, y, n_boot, seed)
    t0 = time.perf_counter()
    ref = reference_loop(X, y, ref_boot, seed)
    t_ref_measured = time.perf_counter() - t0
    t_ref = t_ref_measured * n_boot / ref_boot
    diff_rep = max(
        np.abs(res.bootstrap_values[:ref_boot] - ref["boot"]).max(),
        np.abs(res.test_values[:ref_boot] - ref["test"]).max(),
    )
    apparent = np.array([res[m].apparent for m in METRICS])
    print(f"\nn = {n:,}, p = {P}, B = {n_boot}, events = {int(y.sum()):,}")
    print(f"  ours (batched)           {t_ours:9.2f} s   failed resamples: {res.n_failed}")
    note = (
        ""
        if ref_boot == n_boot
        else f"  (measured {t_ref_measured:.2f} s for {ref_boot} resamples, x{n_boot / ref_boot:g})"
    )
    print(f"  statsmodels + sklearn    {t_ref:9.2f} s{note}")
    print(f"  ratio                    {t_ref / t_ours:9.1f} x")
    print(
        f"  largest difference: per-resample values {diff_rep:.2e}, "
        f"apparent {np.abs(apparent - ref['apparent']).max():.2e}"
    )
    if ref_boot == n_boot:
        corr_ref = ref["apparent"] - (ref["boot"] - ref["test"]).mean(axis=0)
        corr = np.array([res[m].corrected for m in METRICS])
        print(
            f"  largest difference of the corrected estimates {np.abs(corr - corr_ref).max():.2e}"
        )
    print(f"  peak memory of ours (tracemalloc) {peak_memory_mb(X, y, seed):7.1f} MB")
    if compare_blas:
        with blas_threads(None):
            t_default, _ = time_ours(X, y, n_boot, seed)
        print(
            f"  ours with BLAS threads left at default: {t_default:.2f} s "
            f"(one thread: {t_ours:.2f} s)"
        )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[2_000, 20_000, 200_000])
    parser.add_argument("--n-boot", type=int, default=200)
    parser.add_argument(
        "--ref-boot-large",
        type=int,
        default=10,
        help="reference resamples timed at n >= 100,000 (then extrapolated)",
    )
    parser.add_argument("--seed", type=int, default=20240611)
    parser.add_argument("--blas", action="store_true", help="also time ours with default BLAS")
    args = parser.parse_args()
    print("bootstrap validation benchmark (synthetic data); metrics:", ", ".join(METRICS))
    for n in args.sizes:
        ref_boot = args.n_boot if n < 100_000 else min(args.ref_boot_large, args.n_boot)
        run(n, args.n_boot, ref_boot, args.seed, args.blas)


if __name__ == "__main__":
    main()
