"""Benchmark: score 1,000,000 synthetic patients with intervals (not collected by pytest).

The model is synthetic (made-up coefficients, not for clinical use): 9 inputs, a 5-knot
restricted cubic spline, log, hinges, sqrt, truncation, two levels terms, two yes/no
indicators and an age x sex interaction; 17 columns plus the intercept, with a covariance
matrix. Target: well under 1 s for scoring (the 3 s budget also covers input checking).
For scale, the same risks are computed patient by patient with a straightforward Python
loop on a subsample, and the per-patient ratio is printed.

Run: ``.venv/bin/python tests/bench/bench_scoring.py``
"""

from __future__ import annotations

import math
import time

import numpy as np

from calcbuilder.calc.model import ModelSpec
from calcbuilder.calc.problems import Problems
from calcbuilder.calc.scoring import score

N = 1_000_000
CHOICES = {
    "smoking": ("never", "former", "current"),
    "anaesthesia": ("general", "neuraxial", "regional"),
}
KINDS = {
    "age": "number", "sex": "yes_no", "creat": "number", "bmi": "number", "sbp": "number",
    "hb": "number", "diabetes": "yes_no",
    "smoking": ("choice", CHOICES["smoking"]), "anaesthesia": ("choice", CHOICES["anaesthesia"]),
}  # fmt: skip


def synthetic_model() -> ModelSpec:
    """A made-up model (synthetic, not for clinical use) through the real loader."""
    rng = np.random.default_rng(20261202)
    terms = [
        {"name": "age", "input": "age", "transform": {"type": "rcs", "knots": [40, 55, 65, 75, 88]},
         "truncate": {"low": 18, "high": 100}, "coefficients": [0.03, 0.2, -0.4, 0.3]},
        {"name": "sex", "input": "sex", "transform": {"type": "indicator"}, "coefficients": [0.3]},
        {"name": "creat", "input": "creat", "transform": {"type": "log"}, "coefficients": [0.5]},
        {"name": "bmi", "input": "bmi", "transform": {"type": "hinges", "knots": [25, 30]},
         "coefficients": [-0.02, 0.03, 0.05]},
        {"name": "sbp", "input": "sbp", "transform": {"type": "linear"},
         "truncate": {"low": 80, "high": 200}, "coefficients": [0.004]},
        {"name": "hb", "input": "hb", "transform": {"type": "sqrt"}, "coefficients": [-0.3]},
        {"name": "diabetes", "input": "diabetes", "transform": {"type": "indicator"},
         "coefficients": [0.25]},
        {"name": "smoking", "input": "smoking",
         "transform": {"type": "levels", "reference": "never", "levels": ["former", "current"]},
         "coefficients": [0.1, 0.4]},
        {"name": "anaesthesia", "input": "anaesthesia",
         "transform": {"type": "levels", "reference": "general",
                       "levels": ["neuraxial", "regional"]},
         "coefficients": [-0.2, -0.1]},
        {"name": "age_sex", "transform": {"type": "product", "of": ["age", "sex"]},
         "coefficients": [0.01, -0.02, 0.03, -0.01]},
    ]  # fmt: skip
    p = 1 + sum(len(t["coefficients"]) for t in terms)
    A = rng.normal(size=(p, p)) * 0.01
    V = (A @ A.T).tolist()
    raw = {"family": "logistic", "intercept": -4.0, "terms": terms, "covariance": V}
    problems = Problems()
    model = ModelSpec.from_dict(raw, "model", problems, KINDS)
    problems.raise_if_any("synthetic model")
    assert model is not None
    return model


def synthetic_values(n: int) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(1)
    return {
        "age": rng.uniform(18, 100, n),
        "sex": rng.random(n) < 0.5,
        "creat": rng.uniform(30, 600, n),
        "bmi": rng.uniform(15, 50, n),
        "sbp": rng.uniform(70, 220, n),
        "hb": rng.uniform(60, 180, n),
        "diabetes": rng.random(n) < 0.2,
        "smoking": np.array(CHOICES["smoking"])[rng.integers(0, 3, n)],
        "anaesthesia": np.array(CHOICES["anaesthesia"])[rng.integers(0, 3, n)],
    }


def loop_risk(model: ModelSpec, values: dict[str, np.ndarray], i: int) -> float:
    """Straightforward one-patient scoring (risk only) for the ratio."""
    from calcbuilder.calc.scoring import design_matrix

    one = {k: v[i : i + 1] for k, v in values.items()}
    x = design_matrix(model, one)[0]
    beta = [c for t in model.terms for c in t.coefficients]
    eta = float(model.intercept or 0.0) + sum(b * v for b, v in zip(beta, x, strict=True))
    return 1 / (1 + math.exp(-eta))


def main() -> None:
    model = synthetic_model()
    values = synthetic_values(N)
    score(model, {k: v[:1000] for k, v in values.items()})  # warm-up (lazy imports)
    best = cpu = math.inf
    for _ in range(3):
        start, start_cpu = time.perf_counter(), time.process_time()
        s = score(model, values)
        best = min(best, time.perf_counter() - start)
        cpu = min(cpu, time.process_time() - start_cpu)
    assert s.interval_available
    assert np.all((s.low <= s.risk) & (s.risk <= s.high))
    m = 2000
    start = time.perf_counter()
    slow = [loop_risk(model, values, i) for i in range(m)]
    per_loop = (time.perf_counter() - start) / m
    np.testing.assert_allclose(s.risk[:m], slow, rtol=1e-12, atol=1e-15)
    print(f"score(): {N:,} patients, {model.n_columns} columns + intercept, with 95% intervals "
          f"and contributions: {best:.3f} s wall, {cpu:.3f} s CPU (best of 3)")  # fmt: skip
    print(f"per-patient loop: {per_loop * 1e6:.1f} us/patient -> {per_loop * N:.1f} s for {N:,}; "
          f"ratio {per_loop * N / best:.0f}x")  # fmt: skip


if __name__ == "__main__":
    main()
