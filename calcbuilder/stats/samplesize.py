"""Minimum sample size for developing a prediction model with a binary outcome.

Implements the three criteria of Riley et al. (2019, part II) [1]_ [2]_:

(i)   expected global shrinkage factor at least ``S`` (default 0.9)::

          n1 = p / ((S - 1) * ln(1 - R2_CS / S))

(ii)  small optimism, an absolute difference of at most 0.05 between apparent
      and adjusted Nagelkerke R2::

          max_R2_CS = 1 - (phi**phi * (1 - phi)**(1 - phi))**2
          S2 = R2_CS / (R2_CS + 0.05 * max_R2_CS)
          n2 = p / ((S2 - 1) * ln(1 - R2_CS / S2))

(iii) overall risk estimated within ``margin`` (default 0.05) with 95% confidence::

          n3 = (1.96 / margin)**2 * phi * (1 - phi)

      (1.96 as in the published formula, not the exact normal quantile).

Each ``n`` is rounded up; the answer is the largest. Rounding up treats a value
within 5e-10 of an integer as that integer, so floating-point noise such as
``30.000000000000004`` does not add a participant. The expected number of events
is ``ceil(n * phi)``. The mean-absolute-prediction-error criterion of the 2020
BMJ guide is not included.

References
----------
.. [1] Riley RD, Snell KIE, Ensor J, Burke DL, Harrell FE Jr, Moons KGM,
       Collins GS. Minimum sample size for developing a multivariable prediction
       model: PART II - binary and time-to-event outcomes. Stat Med
       2019;38(7):1276-1296.
.. [2] Riley RD, Ensor J, Snell KIE, et al. Calculating the sample size required
       for developing a clinical prediction model. BMJ 2020;368:m441.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

from .errors import StatsInputError

__all__ = ["SampleSizeResult", "max_r2_cs", "sample_size_binary"]

OPTIMISM_DELTA = 0.05
"""Largest acceptable optimism in Nagelkerke R2 (criterion ii)."""

Z_OVERALL_RISK = 1.96
"""Normal quantile for criterion (iii), as printed by Riley et al. (2019)."""


@dataclass(frozen=True)
class SampleSizeResult:
    """Result of :func:`sample_size_binary`.

    Attributes
    ----------
    n : int
        Minimum number of participants (the largest of the three criteria).
    events : int
        Expected number of events, ``ceil(n * prevalence)``.
    per_parameter : float
        Expected events per candidate predictor parameter, ``events / n_parameters``.
    criterion : str
        The binding criterion: ``"shrinkage"``, ``"optimism"`` or
        ``"overall_risk"`` (the first in that order when two tie).
    n_shrinkage, n_optimism, n_overall_risk : int
        The rounded-up size each criterion requires on its own.
    max_r2_cs : float
        The largest Cox-Snell R2 attainable at this prevalence.
    """

    n: int
    events: int
    per_parameter: float
    criterion: str
    n_shrinkage: int
    n_optimism: int
    n_overall_risk: int
    max_r2_cs: float


def _ceil(x: float) -> int:
    return math.ceil(round(x, 9))


def _real(value: object, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise StatsInputError(f"{name} must be a number; got {value!r}")
    out = float(value)
    if not math.isfinite(out):
        raise StatsInputError(f"{name} must be finite; got {out}")
    return out


def _open_unit(value: object, name: str) -> float:
    out = _real(value, name)
    if not 0 < out < 1:
        raise StatsInputError(f"{name} must lie strictly inside (0, 1); got {out}")
    return out


def max_r2_cs(prevalence: float) -> float:
    """Largest Cox-Snell R2 a model can reach when the outcome proportion is ``prevalence``.

    Parameters
    ----------
    prevalence : float
        Outcome proportion, strictly inside (0, 1).

    Returns
    -------
    float
        ``1 - exp(2 lnL_null / n) = 1 - (phi**phi * (1 - phi)**(1 - phi))**2`` [1]_.

    References
    ----------
    .. [1] Riley RD et al. Stat Med 2019;38(7):1276-1296.
    """
    phi = _open_unit(prevalence, "prevalence")
    loglik_null_per_row = phi * math.log(phi) + (1 - phi) * math.log(1 - phi)
    return -math.expm1(2 * loglik_null_per_row)


def _n_for_shrinkage(p: int, r2: float, s: float) -> float:
    return p / ((s - 1) * math.log(1 - r2 / s))


def _check_parameters(n_parameters: object) -> int:
    if isinstance(n_parameters, bool) or not isinstance(n_parameters, numbers.Integral):
        raise StatsInputError(f"n_parameters must be a positive integer; got {n_parameters!r}")
    if int(n_parameters) < 1:
        raise StatsInputError(f"n_parameters must be a positive integer; got {int(n_parameters)}")
    return int(n_parameters)


def _check_r2(r2_cs: object, max_r2: float, prevalence: float, shrinkage: float) -> float:
    r2 = _real(r2_cs, "r2_cs")
    if not 0 < r2 < max_r2:
        raise StatsInputError(
            f"r2_cs must lie strictly inside (0, max R2_CS) = (0, {max_r2:.6g}), the largest "
            f"Cox-Snell R2 possible at prevalence {prevalence:g}; got {r2}"
        )
    if r2 >= shrinkage:
        raise StatsInputError(
            f"r2_cs must be below shrinkage ({shrinkage:g}) for criterion (i); got {r2}"
        )
    return r2


def sample_size_binary(
    n_parameters: int,
    prevalence: float,
    r2_cs: float,
    *,
    shrinkage: float = 0.9,
    margin: float = 0.05,
) -> SampleSizeResult:
    """Minimum development sample size for a binary-outcome prediction model.

    Parameters
    ----------
    n_parameters : int
        Number of candidate predictor parameters (each dummy variable, spline
        term and interaction counts), a positive integer.
    prevalence : float
        Anticipated outcome proportion, strictly inside (0, 1).
    r2_cs : float
        Anticipated (adjusted) Cox-Snell R2 of the new model, strictly inside
        (0, max R2_CS); see :func:`max_r2_cs`.
    shrinkage : float, optional
        Target expected global shrinkage factor for criterion (i), in (0, 1).
    margin : float, optional
        Target absolute margin of error for the overall risk, criterion (iii),
        in (0, 1).

    Returns
    -------
    SampleSizeResult
        ``n``, the expected ``events`` (rounded up), events ``per_parameter``,
        the binding ``criterion`` and each criterion's own size [1]_ [2]_.

    References
    ----------
    .. [1] Riley RD et al. Stat Med 2019;38(7):1276-1296.
    .. [2] Riley RD et al. BMJ 2020;368:m441.
    """
    p = _check_parameters(n_parameters)
    phi = _open_unit(prevalence, "prevalence")
    s = _open_unit(shrinkage, "shrinkage")
    m = _open_unit(margin, "margin")
    max_r2 = max_r2_cs(phi)
    r2 = _check_r2(r2_cs, max_r2, phi, s)
    s_optimism = r2 / (r2 + OPTIMISM_DELTA * max_r2)
    sizes = {
        "shrinkage": _ceil(_n_for_shrinkage(p, r2, s)),
        "optimism": _ceil(_n_for_shrinkage(p, r2, s_optimism)),
        "overall_risk": _ceil((Z_OVERALL_RISK / m) ** 2 * phi * (1 - phi)),
    }
    binding = max(sizes, key=lambda k: sizes[k])  # first of equal maxima
    n = sizes[binding]
    events = _ceil(n * phi)
    return SampleSizeResult(
        n=n,
        events=events,
        per_parameter=events / p,
        criterion=binding,
        n_shrinkage=sizes["shrinkage"],
        n_optimism=sizes["optimism"],
        n_overall_risk=sizes["overall_risk"],
        max_r2_cs=max_r2,
    )
