"""Bootstrap optimism, Efron's .632/.632+ and k-fold cross-validation.

Three kinds of check: independent slow loops written here on the SAME resample
indices (copied rows, statsmodels ``Logit`` refits, scikit-learn metrics); the
analytic cases of methods.md 6.4; and behaviour (seeds, progress, cancellation,
failed resamples, bad input).
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from sklearn.metrics import brier_score_loss, roc_auc_score
from threadpoolctl import threadpool_info

from calcbuilder.stats import _batch_core
from calcbuilder.stats._resample_estimators import combine_632
from calcbuilder.stats.calibration import brier
from calcbuilder.stats.errors import CancelledError, StatsInputError
from calcbuilder.stats.logistic import fit_logistic
from calcbuilder.stats.resampling import (
    Metric,
    PlainLogistic,
    bootstrap_optimism,
    cross_validate,
    efron_632plus,
)

METRICS = ["auc", "brier", "calibration_slope"]
SAME = 1e-9  # same resamples, two converged Newton fits (ours vs statsmodels Logit)


def _anes96(rows: int = 400) -> tuple[np.ndarray, np.ndarray]:
    d = sm.datasets.anes96.load_pandas().data.iloc[:rows]
    cols = ["logpopul", "TVnews", "selfLR", "ClinLR", "DoleLR", "PID", "age", "educ", "income"]
    return d[cols].to_numpy(float), d["vote"].to_numpy(float)


def _sm_fit(X, y):
    """Outside reference: statsmodels Logit (Newton), intercept first."""
    return sm.Logit(y, sm.add_constant(X, has_constant="add")).fit(disp=0).params


def _risk(coef, X):
    return 1 / (1 + np.exp(-(coef[0] + X @ coef[1:])))


def _scores(y, p):
    """Outside references: sklearn roc_auc_score, brier_score_loss; slope by statsmodels Logit."""
    slope = sm.Logit(y, sm.add_constant(np.log(p / (1 - p)))).fit(disp=0).params[1]
    return [roc_auc_score(y, p), brier_score_loss(y, p), slope]


def _logistic_procedure(X, y, w):
    coef = fit_logistic(X, y, weights=w).coef
    return lambda Xnew: _risk(coef, np.asarray(Xnew))


@pytest.fixture(scope="module")
def anes():
    return _anes96()


@pytest.fixture(scope="module")
def anes_boot(anes):
    X, y = anes
    return bootstrap_optimism(X, y, PlainLogistic(), METRICS, n_boot=20, seed=12345)


# --- Harrell's bootstrap against a slow loop on copied rows -----------------------------


def test_bootstrap_equals_slow_loop_on_the_same_indices(anes, anes_boot):
    X, y = anes
    rng = np.random.default_rng(12345)  # methods.md 6.6 (a): one integers(0, n, n) per resample
    boot, test = [], []
    for _ in range(20):
        idx = rng.integers(0, y.size, y.size)
        coef = _sm_fit(X[idx], y[idx])
        boot.append(_scores(y[idx], _risk(coef, X[idx])))
        test.append(_scores(y, _risk(coef, X)))
    np.testing.assert_allclose(anes_boot.bootstrap_values, boot, rtol=0, atol=SAME)
    np.testing.assert_allclose(anes_boot.test_values, test, rtol=0, atol=SAME)
    apparent = _scores(y, _risk(_sm_fit(X, y), X))
    for j, name in enumerate(METRICS):
        est = anes_boot[name]
        optimism = np.mean(np.array(boot)[:, j] - np.array(test)[:, j])
        assert abs(est.apparent - apparent[j]) < SAME
        assert abs(est.optimism - optimism) < SAME
        assert abs(est.corrected - (apparent[j] - optimism)) < SAME
        assert est.n_used == 20
    assert anes_boot.n_failed == 0
    assert anes_boot.seed == 12345


def test_slow_path_procedure_equals_fast_path(anes, anes_boot):
    X, y = anes
    slow = bootstrap_optimism(X, y, _logistic_procedure, METRICS, n_boot=20, seed=12345)
    np.testing.assert_allclose(slow.bootstrap_values, anes_boot.bootstrap_values, atol=1e-10)
    np.testing.assert_allclose(slow.test_values, anes_boot.test_values, atol=1e-10)


def test_apparent_and_resample_calibration_slopes_are_one(anes_boot):
    # methods.md 3.3 [ANALYTIC]: an ML logistic model has slope 1 on its own data
    assert abs(anes_boot["calibration_slope"].apparent - 1) < 1e-9
    np.testing.assert_allclose(anes_boot.bootstrap_values[:, 2], 1.0, atol=1e-9)


def test_reproducible_seed_generator_and_recorded_entropy(anes, anes_boot):
    X, y = anes
    again = bootstrap_optimism(X, y, PlainLogistic(), METRICS, n_boot=20, seed=12345)
    np.testing.assert_array_equal(again.test_values, anes_boot.test_values)
    gen = bootstrap_optimism(
        X, y, PlainLogistic(), METRICS, n_boot=20, seed=np.random.default_rng(12345)
    )
    np.testing.assert_array_equal(gen.test_values, anes_boot.test_values)
    assert gen.seed is None  # a Generator's state is the caller's to record
    fresh = bootstrap_optimism(X, y, PlainLogistic(), ["brier"], n_boot=5)
    assert isinstance(fresh.seed, int)
    assert 0 <= fresh.seed < 2**53  # held exactly by JSON numbers
    replay = bootstrap_optimism(X, y, PlainLogistic(), ["brier"], n_boot=5, seed=fresh.seed)
    np.testing.assert_array_equal(replay.test_values, fresh.test_values)


def test_results_do_not_depend_on_chunk_sizes(anes, anes_boot, monkeypatch):
    X, y = anes
    monkeypatch.setattr(_batch_core, "FIT_BYTES", 3 * 8 * y.size)
    monkeypatch.setattr(_batch_core, "WORK_BYTES", 2 * _batch_core.WORK_ARRAYS * 8 * y.size)
    small = bootstrap_optimism(X, y, PlainLogistic(), METRICS, n_boot=20, seed=12345)
    np.testing.assert_allclose(small.test_values, anes_boot.test_values, rtol=0, atol=1e-12)


def test_custom_metric_from_scalar_function(anes, anes_boot):
    X, y = anes
    mine = Metric.from_scalar("my_brier", lambda yy, r, w: brier(yy, r, weights=w))
    res = bootstrap_optimism(X, y, PlainLogistic(), [mine], n_boot=20, seed=12345)
    assert abs(res["my_brier"].corrected - anes_boot["brier"].corrected) < 1e-12


# --- methods.md 6.4 analytic checks ---------------------------------------------------


def test_intercept_only_brier_optimism_is_exact_per_resample():
    # methods.md 6.4 [ANALYTIC]: with d = ybar_b - ybar, the resample model predicts
    # ybar_b; Brier on the resample ybar_b(1 - ybar_b), on the original data
    # ybar(1 - ybar) + d^2, so optimism_b = d(1 - 2 ybar) - 2 d^2 (our sign: boot - test).
    n, y = 40, np.r_[np.ones(12), np.zeros(28)]
    res = bootstrap_optimism(np.empty((n, 0)), y, PlainLogistic(), ["brier"], n_boot=300, seed=5)
    rng = np.random.default_rng(5)
    ybar = y.mean()
    d = np.array([y[rng.integers(0, n, n)].mean() - ybar for _ in range(300)])
    got = res.bootstrap_values[:, 0] - res.test_values[:, 0]
    np.testing.assert_allclose(got, d * (1 - 2 * ybar) - 2 * d**2, rtol=0, atol=1e-12)


def test_intercept_only_expected_brier_optimism_monte_carlo():
    # methods.md 6.4 [ANALYTIC]: E[optimism_Brier] = 2 ybar(1-ybar)/n in size; negative here
    # because optimism = boot - test and lower Brier is better. With ybar = 1/2 each
    # optimism_b = -2 d^2 has sd about 2 sqrt(2) V (V = ybar(1-ybar)/n): 4 Monte-Carlo sd.
    n, B = 50, 4000
    y = np.r_[np.ones(25), np.zeros(25)]
    res = bootstrap_optimism(np.empty((n, 0)), y, PlainLogistic(), ["brier"], n_boot=B, seed=2)
    V = 0.25 / n
    assert abs(res["brier"].optimism - (-2 * V)) < 4 * 2 * np.sqrt(2) * V / np.sqrt(B)


@pytest.mark.parametrize("procedure", [PlainLogistic(), "mean"])
def test_leave_one_out_brier_of_intercept_only_model(procedure):
    # methods.md 6.4 [ANALYTIC]: LOO-Brier = ybar(1-ybar) n^2/(n-1)^2
    n, y = 30, np.r_[np.ones(11), np.zeros(19)]
    if procedure == "mean":  # the slow path: a user procedure predicting the weighted mean

        def procedure(X, yy, w):
            rate = float(np.sum(w * yy) / np.sum(w))
            return lambda Xn: np.full(len(Xn), rate)

    res = cross_validate(np.empty((n, 0)), y, procedure, ["brier"], k=n, stratify=False, seed=0)
    expected = y.mean() * (1 - y.mean()) * n**2 / (n - 1) ** 2
    assert abs(res["brier"].pooled - expected) < 1e-12
    assert abs(res["brier"].fold_mean - expected) < 1e-12
    assert res["brier"].folds_used == n


def test_632plus_arithmetic_check_value():
    # methods.md 6.4 [ANALYTIC]: apparent AUC 0.85, OOB AUC 0.80, gamma 0.5
    rel, w, e632, e632p = combine_632(0.15, 0.20, 0.5)
    assert abs(rel - 1 / 7) < 1e-12
    assert abs(w - 0.632 / (1 - 0.368 / 7)) < 1e-12  # 0.6670687575
    assert abs((1 - e632) - 0.8184) < 1e-12
    assert abs((1 - e632p) - 0.8166465621230398) < 1e-12
    # no overfitting beyond the no-information rate: R clipped, .632+ = .632 when R = 0
    assert combine_632(0.2, 0.1, 0.5)[0] == 0.0
    assert combine_632(0.2, 0.1, 0.5)[3] == pytest.approx(0.368 * 0.2 + 0.632 * 0.1)


def test_efron_632plus_equals_slow_out_of_bag_loop(anes):
    X, y = anes
    n, B = y.size, 15
    res = efron_632plus(X, y, PlainLogistic(), ["brier", "auc"], n_boot=B, seed=7)
    rng = np.random.default_rng(7)
    loss, count, aucs = np.zeros(n), np.zeros(n), []
    for _ in range(B):
        idx = rng.integers(0, n, n)
        out = np.setdiff1d(np.arange(n), idx)
        p = _risk(_sm_fit(X[idx], y[idx]), X)
        loss[out] += (p[out] - y[out]) ** 2
        count[out] += 1
        aucs.append(roc_auc_score(y[out], p[out]))
    p_app = _risk(_sm_fit(X, y), X)
    seen = count > 0
    # Efron & Tibshirani 1997 as written in methods.md 6.2, recomputed here
    for name, err, err1, gamma in [
        (
            "brier",
            brier_score_loss(y, p_app),
            np.mean(loss[seen] / count[seen]),
            y.mean() - 2 * y.mean() * p_app.mean() + np.mean(p_app**2),
        ),
        ("auc", 1 - roc_auc_score(y, p_app), 1 - np.mean(aucs), 0.5),
    ]:
        err1p = min(err1, gamma)
        rel = (err1p - err) / (gamma - err) if err1p > err and gamma > err else 0.0
        w = 0.632 / (1 - 0.368 * rel)
        e632, e632p = 0.368 * err + 0.632 * err1, (1 - w) * err + w * err1p
        est = res[name]
        flip = (lambda v: 1 - v) if name == "auc" else (lambda v: v)
        assert abs(est.estimate_632 - flip(e632)) < SAME
        assert abs(est.estimate_632plus - flip(e632p)) < SAME
        assert abs(est.relative_overfitting - rel) < 1e-6
    assert res.n_never_out_of_bag == int(np.sum(~seen))


# --- cross-validation against a slow loop on the documented folds ---------------------


def _documented_folds(rng, y, k):
    # the rule stated in cross_validate's Notes
    order = np.r_[rng.permutation(np.flatnonzero(y == 1)), rng.permutation(np.flatnonzero(y == 0))]
    labels = np.empty(y.size, int)
    labels[order] = np.arange(y.size) % k
    return labels


def test_cross_validation_equals_slow_loop(anes):
    X, y = anes
    k, repeats = 5, 2
    res = cross_validate(X, y, PlainLogistic(), METRICS, k=k, repeats=repeats, seed=3)
    rng = np.random.default_rng(3)
    labels = [_documented_folds(rng, y, k) for _ in range(repeats)]
    pooled, folds = [], []
    for r, lab in enumerate(labels):
        oof = np.empty(y.size)
        for f in range(k):
            test = lab == f
            oof[test] = _risk(_sm_fit(X[~test], y[~test]), X[test])
            folds.append(_scores(y[test], oof[test]))
            assert abs(np.sum(y[test]) - np.sum(y) / k) < 1  # stratified
        np.testing.assert_allclose(res.out_of_fold[r], oof, rtol=0, atol=SAME)
        pooled.append(_scores(y, oof))
    np.testing.assert_allclose(res.fold_values, folds, rtol=0, atol=SAME)
    for j, name in enumerate(METRICS):
        assert abs(res[name].pooled - np.mean(np.array(pooled)[:, j])) < SAME
        assert abs(res[name].fold_mean - np.mean(np.array(folds)[:, j])) < SAME
        assert res[name].folds_used == k * repeats


# --- progress, cancellation, failed resamples -----------------------------------------


def test_progress_reports_and_cancellation(anes, monkeypatch):
    X, y = anes
    monkeypatch.setattr(_batch_core, "FIT_BYTES", 4 * 8 * y.size)  # chunks of 4 resamples
    seen = []
    bootstrap_optimism(
        X,
        y,
        PlainLogistic(),
        ["brier"],
        n_boot=10,
        seed=1,
        progress=lambda d, t: seen.append((d, t)),
    )
    assert seen == [(0, 10), (4, 10), (8, 10), (10, 10)]
    with pytest.raises(CancelledError, match="cancelled after 4 of 10"):
        bootstrap_optimism(
            X, y, PlainLogistic(), ["brier"], n_boot=10, seed=1, progress=lambda d, _t: d < 4
        )
    with pytest.raises(CancelledError):
        cross_validate(X, y, _logistic_procedure, ["auc"], k=5, progress=lambda d, _t: d < 2)
    with pytest.raises(CancelledError):
        efron_632plus(X, y, PlainLogistic(), n_boot=10, progress=lambda d, _t: d == 0)


def _quasi_separable():
    # x = 0: one event among ten; x = 1: five of ten. A resample without that one event
    # has no event at x = 0: quasi-separation, no maximum-likelihood estimate.
    x = np.r_[np.zeros(10), np.ones(10)][:, None]
    y = np.r_[1.0, np.zeros(9), np.ones(5), np.zeros(5)]
    return x, y


@pytest.mark.parametrize("procedure", [PlainLogistic(), _logistic_procedure])
def test_failed_resamples_are_counted_listed_and_left_out(procedure):
    x, y = _quasi_separable()
    res = bootstrap_optimism(x, y, procedure, ["auc", "brier"], n_boot=40, seed=4)
    rng = np.random.default_rng(4)
    lost = [b for b in range(40) if 0 not in rng.integers(0, 20, 20)]  # row 0 = the event
    assert lost, "the seed must produce some failing resamples"
    assert [f.resample for f in res.failures] == lost
    assert res.n_failed == len(lost)
    assert all("separation" in f.reason.lower() for f in res.failures)
    assert res["auc"].n_used == 40 - len(lost)
    assert np.isnan(res.test_values[lost]).all()
    good = np.setdiff1d(np.arange(40), lost)
    opt = np.mean(res.bootstrap_values[good, 1] - res.test_values[good, 1])
    assert abs(res["brier"].optimism - opt) < 1e-15


def test_every_resample_failing_is_an_error():
    def fail(X, y, w):
        raise ValueError("no fit today")

    with pytest.raises(StatsInputError, match=r"every resample failed.*no fit today"):
        bootstrap_optimism([[0.0]] * 4, [0, 1, 0, 1], _FirstOnly(fail), ["brier"], n_boot=3, seed=1)


class _FirstOnly:
    """A procedure that fits the original data and then fails on every resample."""

    def __init__(self, then):
        self.calls, self.then = 0, then

    def __call__(self, X, y, w):
        self.calls += 1
        if self.calls == 1:
            return lambda Xn: np.full(len(Xn), 0.5)
        return self.then(X, y, w)


def test_blas_is_held_to_one_thread_while_resampling(anes):
    X, y = anes
    threads = []

    def spy(XX, yy, w):
        threads.append(max(i["num_threads"] for i in threadpool_info() if i["user_api"] == "blas"))
        return _logistic_procedure(XX, yy, w)

    bootstrap_optimism(X, y, spy, ["brier"], n_boot=2, seed=1)
    assert threads[1:] == [1, 1]


# --- bad input --------------------------------------------------------------------------

X4, Y4 = [[0.0], [1.0], [2.0], [3.0], [1.5], [0.5]], [0, 1, 0, 1, 1, 0]


def _fail_on_everything(X, y, w):
    raise ValueError("no fit today")


BOOT, CV, E632, PL = bootstrap_optimism, cross_validate, efron_632plus, PlainLogistic()
BAD_INPUT = [  # (function, positional arguments, keyword arguments, expected message)
    (BOOT, (X4, Y4, PL), {"n_boot": 0}, "n_boot must be an integer >= 1; got 0"),
    (BOOT, (X4, Y4, PL), {"n_boot": True}, "n_boot must be an integer"),
    (BOOT, (X4, Y4, PL), {"seed": -1}, "seed must be a non-negative int"),
    (BOOT, (X4, Y4, PL), {"seed": "x"}, "seed must be"),
    (BOOT, (X4, Y4, PL, ["c-index"]), {}, "metrics must be names from"),
    (BOOT, (X4, Y4, PL, []), {}, "at least one measure"),
    (BOOT, (X4, Y4, PL, ["auc", "auc"]), {}, "must not repeat"),
    (E632, (X4, Y4, PL, ["calibration_slope"]), {}, "names from ['auc', 'brier']"),
    (BOOT, (X4, Y4, 42), {}, "procedure must be PlainLogistic() or a callable"),
    (BOOT, (X4[:5], Y4, _logistic_procedure), {}, "X must have the same number of rows as y (6)"),
    (BOOT, (X4[:5], Y4, PL), {}, "X must have the same length as y"),
    (BOOT, ([["a"]] * 6, Y4, PL), {}, "X must be a numeric"),
    (BOOT, (X4, [0, 1, 0, 1, 2, 0], PL), {}, "y must be coded 0/1"),
    (BOOT, (X4, [0] * 6, PL), {}, "both events and non-events"),
    (BOOT, (X4, Y4, lambda *_: 0.5), {}, "must return a predict(X) function"),
    (BOOT, (X4, Y4, lambda *_: lambda *_: [1.5] * 6), {}, "(original data) must lie in [0, 1]"),
    (BOOT, (X4, [0, 1, 0, 1, 1, 0], lambda *_: lambda *_: [0.5] * 6), {}, "slope cannot be"),
    (BOOT, ([[0.0], [1.0], [2.0], [3.0]], [0, 0, 1, 1], PL), {}, "separation"),
    (BOOT, (X4, Y4, _fail_on_everything), {}, "ValueError: no fit today (on the original data)"),
    (CV, (X4, Y4, PL), {"k": 1}, "k must be an integer >= 2"),
    (CV, (X4, Y4, PL), {"k": 4}, "k must be at most the smaller outcome class (3)"),
    (CV, (X4, Y4, PL), {"k": 7, "stratify": False}, "k must be at most n"),
    (CV, (X4, Y4, PL), {"k": 2, "repeats": 0}, "repeats must be an integer >= 1"),
    (CV, (X4, Y4, PL), {"k": 2, "stratify": "yes"}, "stratify must be True or False"),
]


@pytest.mark.parametrize(("func", "args", "kwargs", "message"), BAD_INPUT)
def test_bad_input_names_the_argument(func, args, kwargs, message):
    with pytest.raises(StatsInputError) as info:
        func(*args, **kwargs)
    assert message in str(info.value)


def test_procedure_predictions_invalid_on_a_resample_name_it():
    calls = []

    def bad_later(X, y, w):
        calls.append(1)
        return lambda Xn: np.full(len(Xn), 0.5 if len(calls) == 1 else np.nan)

    with pytest.raises(
        StatsInputError, match=r"risk predicted by the procedure \(resample 0\) must be finite"
    ):
        bootstrap_optimism(X4, Y4, bad_later, ["brier"], n_boot=2, seed=1)


# --- memory bound at n = 200,000, p = 8 (the resamples are chunked) ----------------------


@pytest.mark.slow
def test_peak_memory_stays_bounded_at_large_n():
    import tracemalloc

    n = 200_000
    rng = np.random.default_rng(0)
    X = rng.normal(size=(n, 8))
    y = (rng.random(n) < 1 / (1 + np.exp(1 - X[:, 0]))).astype(float)
    tracemalloc.start()
    bootstrap_optimism(
        X, y, PlainLogistic(), METRICS, n_boot=_batch_core.fit_rows_per_chunk(n) + 1, seed=1
    )
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert peak < 300 * 2**20, f"peak {peak / 2**20:.0f} MB"
