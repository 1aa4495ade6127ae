"""Benchmark: ``calcbuilder assess --bootstrap 200`` end to end, against a straightforward loop.

Run with ``.venv/bin/python tests/bench/bench_assess.py`` (options: ``--help``). Not collected
by pytest (``norecursedirs = tests/bench``). All data are synthetic (our own generators);
nothing is downloaded.

Cases:

* **demo** -- the synthetic demo development cohort (Demo Hospital A, 1,500 rows, 9 inputs,
  age as a 4-knot spline placed from the data, so the slow path re-runs the recipe per
  resample). Target: assess under 10 s. The reference is a straightforward loop on the same
  resample indices: knots by numpy quantiles, patsy ``cr`` basis, statsmodels GLM refit,
  scikit-learn AUC/Brier, statsmodels calibration fits and lowess, net benefit by hand; its
  time for ``--ref-b`` resamples is extrapolated linearly to B and the ratio printed.
* **large** -- a synthetic 200,000-row cohort with 8 inputs (5 numbers, 2 yes/no, 1 choice with
  a named reference level: nothing data-driven, so the fast batched path runs). Target:
  assess under 90 s.

Each case runs ``calcbuilder fit`` (timed, with ``--band-boot`` as given) and then
``calcbuilder assess FILE --data DATA --bootstrap B -o OUT`` through the command-line entry
point in this process. Times are wall clock and process CPU; the machines are shared, so wall
time can exceed CPU time when other work runs. Peak resident memory is printed at the end.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import resource
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from calcbuilder.cli import main  # noqa: E402
from calcbuilder.demo.scenario import make_cohort  # noqa: E402

EXAMPLE = ROOT / "templates" / "recipe-example.toml"
LARGE_RECIPE = """
# SYNTHETIC benchmark recipe (not for clinical use)
[outcome]
column = "event"
""" + "".join(f"""
[[inputs]]
id = "x{k}"
label = "Marker {k}"
kind = "number"
limits = {{ low = -100, high = 100 }}
""" for k in range(1, 6)) + """
[[inputs]]
id = "flag_a"
label = "Flag A"
kind = "yes_no"
yes = [1]
no = [0]
[[inputs]]
id = "flag_b"
label = "Flag B"
kind = "yes_no"
yes = [1]
no = [0]
[[inputs]]
id = "group"
label = "Group"
kind = "choice"
choices = ["a", "b", "c"]
transform = { type = "levels", reference = "a" }
[about]
title = "Benchmark calculator (synthetic)"
version = "0.0.1"
intended_use = "Benchmarking calcbuilder only; synthetic, not for clinical use."
population = "Synthetic rows."
outcome = "Synthetic event."
horizon = "none"
review_by = 2099-01-01
synthetic = true
[decision]
default_threshold = 0.2
reasonable_range = [0.05, 0.5]
rationale = "benchmark"
"""


def large_cohort(n: int, seed: int = 1) -> pd.DataFrame:
    """Synthetic cohort: 5 numbers, 2 yes/no, a 3-level choice; about 25% events."""
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 5)).round(3)
    flags = (rng.random((n, 2)) < 0.3).astype(int)
    group = rng.choice(np.array(["a", "b", "c"]), size=n, p=[0.5, 0.3, 0.2])
    eta = (-1.5 + X @ np.array([0.8, -0.5, 0.3, 0.0, 0.2]) + flags @ np.array([0.7, 0.4])
           + np.where(group == "b", 0.3, 0.0) + np.where(group == "c", -0.4, 0.0))
    y = (rng.random(n) < 1 / (1 + np.exp(-eta))).astype(int)
    df = pd.DataFrame(X, columns=[f"x{k}" for k in range(1, 6)])
    df["flag_a"], df["flag_b"], df["group"], df["event"] = flags[:, 0], flags[:, 1], group, y
    return df


def timed(argv: list[str]) -> tuple[float, float]:
    wall, cpu = time.perf_counter(), time.process_time()
    with contextlib.redirect_stdout(io.StringIO()):
        code = main(argv)
    if code != 0:
        raise SystemExit(f"command failed ({code}): {' '.join(argv)}")
    return time.perf_counter() - wall, time.process_time() - cpu


def reference_demo(data: Path, B: int, seed: int) -> float:
    """Seconds for B resamples of the straightforward statsmodels/sklearn/patsy loop."""
    import statsmodels.api as sm
    import statsmodels.formula.api as smf
    from sklearn.metrics import brier_score_loss, roc_auc_score
    from statsmodels.nonparametric.smoothers_lowess import lowess

    df = pd.read_csv(data)
    df["asa"] = pd.Categorical(df["asa"], ["I-II", "III", "IV"])
    t = np.arange(1, 100) / 100
    rest = ("cog_errors + sensory + alcohol + asa + medicines + sodium + creatinine + "
            "C(anaesthesia, Treatment('neuraxial'))")

    def measures(y: np.ndarray, p: np.ndarray) -> None:
        lp = np.log(p / (1 - p))
        roc_auc_score(y, p)
        brier_score_loss(y, p)
        sm.Logit(y, sm.add_constant(lp)).fit(disp=0)
        sm.GLM(y, np.ones_like(y), family=sm.families.Binomial(), offset=lp).fit()
        lowess(y, p, frac=2 / 3, it=0, delta=0.01 * np.ptp(p), return_sorted=False)
        treat = p[None, :] >= t[:, None]
        ((treat & (y == 1)).sum(1) - (treat & (y == 0)).sum(1) * t / (1 - t)) / y.size

    rng = np.random.default_rng(seed)
    start = time.perf_counter()
    y = df["delirium"].to_numpy(float)
    for _ in range(B):
        rows = df.iloc[rng.integers(0, len(df), len(df))]
        k = np.quantile(rows["age"], [0.05, 0.35, 0.65, 0.95])
        formula = (f"delirium ~ cr(age, knots=[{k[1]}, {k[2]}], lower_bound={k[0]}, "
                   f"upper_bound={k[3]}, constraints='center') + {rest}")
        fit = smf.glm(formula, rows, family=sm.families.Binomial()).fit()
        measures(rows["delirium"].to_numpy(float), np.asarray(fit.fittedvalues))
        measures(y, np.asarray(fit.predict(df)))
    return time.perf_counter() - start


def run_case(name: str, data: Path, recipe: Path, tmp: Path, args: argparse.Namespace) -> float:
    calc, out = tmp / f"{name}.calc.json", tmp / f"{name}-assessed.calc.json"
    wall, cpu = timed(["fit", str(data), "--recipe", str(recipe), "-o", str(calc),
                       "--band-boot", str(args.band_boot), "--seed", "1", "--json"])
    print(f"[{name}] fit (band-boot {args.band_boot}): wall {wall:.1f} s, cpu {cpu:.1f} s")
    wall, cpu = timed(["assess", str(calc), "--data", str(data), "--bootstrap", str(args.b),
                       "--seed", "2", "-o", str(out), "--json"])
    print(f"[{name}] assess --bootstrap {args.b}: wall {wall:.1f} s, cpu {cpu:.1f} s")
    return wall


def main_bench() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--b", type=int, default=200, help="bootstrap resamples (default 200)")
    parser.add_argument("--n-large", type=int, default=200_000, help="rows of the large case")
    parser.add_argument("--band-boot", type=int, default=200, help="fit's band resamples")
    parser.add_argument("--ref-b", type=int, default=10, help="resamples of the reference loop")
    parser.add_argument("--only", choices=("demo", "large"), help="run one case only")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        tmp = Path(folder)
        if args.only in (None, "demo"):
            data = tmp / "development.csv"
            pd.DataFrame(make_cohort("development").clean).to_csv(data, index=False)
            ours = run_case("demo", data, EXAMPLE, tmp, args)
            ref = reference_demo(data, args.ref_b, 2) * args.b / args.ref_b
            print(f"[demo] reference loop (statsmodels/sklearn/patsy), {args.ref_b} resamples "
                  f"extrapolated to {args.b}: {ref:.1f} s; ratio {ref / ours:.1f}x "
                  f"(target: ours < 10 s)")
        if args.only in (None, "large"):
            data = tmp / "large.csv"
            large_cohort(args.n_large).to_csv(data, index=False)
            recipe = tmp / "large.toml"
            recipe.write_text(LARGE_RECIPE, "utf-8")
            run_case("large", data, recipe, tmp, args)
            print("[large] target: assess < 90 s")
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"peak resident memory of this process: {peak:.0f} MB")


if __name__ == "__main__":
    main_bench()
