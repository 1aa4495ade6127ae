"""Sample-size adequacy and the final consistency check of the plan (private to datacheck)."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from ..calc.inputs import parse_inputs
from ..calc.model import InputInfo, ModelSpec
from ..calc.problems import Problems
from ..stats import SampleSizeResult, StatsInputError, max_r2_cs, sample_size_binary
from ._terms import ResolvedTerm
from .errors import DataError, RecipeError

__all__ = [
    "CONSERVATIVE_R2_SHARE",
    "SampleSizeCheck",
    "SizeOutcome",
    "consistency_check",
    "sample_size_check",
]

CONSERVATIVE_R2_SHARE = 0.15
"""Anticipated R2_CS, as a share of the largest possible, when the recipe gives none."""


@dataclass(frozen=True)
class SampleSizeCheck:
    """Riley et al.'s minimum sample size compared with the rows used.

    Attributes
    ----------
    n_parameters : int
        Model parameters besides the intercept.
    rows, events, non_events : int
        The rows used and their outcome counts.
    events_per_parameter : float
        Rows in the smaller outcome class per parameter.
    r2_cs : float
        Anticipated Cox-Snell R2 used for criteria (i) and (ii).
    r2_cs_note : str
        Where ``r2_cs`` came from, in words.
    required : SampleSizeResult
        :func:`calcbuilder.stats.sample_size_binary` at the observed prevalence.
    """

    n_parameters: int
    rows: int
    events: int
    non_events: int
    events_per_parameter: float
    r2_cs: float
    r2_cs_note: str
    required: SampleSizeResult

    @property
    def prevalence(self) -> float:
        """Events / rows."""
        return self.events / self.rows

    @property
    def adequate(self) -> bool:
        """True when the rows used meet the largest of the three criteria."""
        return self.rows >= self.required.n

    def describe(self) -> str:
        """One sentence for reports and the terminal."""
        req = self.required
        verdict = "meets" if self.adequate else "falls short of"
        return (f"{self.rows} rows ({self.events} events, {self.n_parameters} parameters) "
                f"{verdict} Riley et al.'s minimum of {req.n} rows ({req.events} events); the "
                f"binding criterion is {_CRITERIA[req.criterion]} (shrinkage {req.n_shrinkage}, "
                f"optimism {req.n_optimism}, overall risk {req.n_overall_risk}); {self.r2_cs_note}")


_CRITERIA = {
    "shrinkage": "(i) expected shrinkage of at least 0.9",
    "optimism": "(ii) optimism in Nagelkerke R2 of at most 0.05",
    "overall_risk": "(iii) overall risk within 0.05",
}


@dataclass(frozen=True)
class SizeOutcome:
    """The check and any warnings it raises."""

    check: SampleSizeCheck
    warnings: tuple[str, ...]


def sample_size_check(
    rows: int, events: int, non_events: int, n_parameters: int, anticipated: float | None
) -> SizeOutcome:
    """Riley et al.'s criteria at the observed prevalence (see :class:`SampleSizeCheck`).

    Raises
    ------
    DataError
        When the recipe's anticipated R2_CS is not below the largest possible.
    """
    prevalence = events / rows
    largest = max_r2_cs(prevalence)
    if anticipated is None:
        r2 = CONSERVATIVE_R2_SHARE * largest
        note = (f"anticipated R2_CS {r2:.4f} is 15% of the largest possible ({largest:.4f}) at "
                f"the observed prevalence {prevalence:.3f}, the conservative value Riley et al. "
                "suggest when no earlier estimate is available")
    else:
        r2 = anticipated
        note = f"anticipated R2_CS {r2:g} is from the recipe (fit.anticipated_r2_cs)"
    try:
        required = sample_size_binary(n_parameters, prevalence, r2)
    except StatsInputError as exc:
        raise DataError(f"fit.anticipated_r2_cs: cannot be used at the observed prevalence "
                        f"{prevalence:.3f}: {exc}") from None
    check = SampleSizeCheck(n_parameters, rows, events, non_events,
                            min(events, non_events) / n_parameters, r2, note, required)
    warnings = () if check.adequate else (
        f"sample size: {check.describe()}; expect overfitting and rely on the "
        "optimism-corrected evidence",)
    return SizeOutcome(check, warnings)


def consistency_check(inputs: list[dict[str, Any]], terms: Sequence[ResolvedTerm]) -> None:
    """Check the prepared inputs and terms with the calculator file's own rules.

    Raises
    ------
    RecipeError
        If they would make an invalid calculator file (a calcbuilder defect).
    """
    problems = Problems()
    specs = parse_inputs(inputs, "inputs", problems)
    if specs is not None:
        kinds = {
            s.id: InputInfo(s.kind, tuple(c.value for c in s.choices),
                            (s.limits.low, s.limits.high) if s.limits else None)
            for s in specs
        }
        model = {"family": "logistic", "intercept": 0.0,
                 "terms": [t.to_dict([0.0] * t.n_columns) for t in terms]}
        ModelSpec.from_dict(model, "model", problems, kinds)
    if problems:
        raise RecipeError("the prepared inputs and terms fail the calculator file's checks "
                          "(please report this as a calcbuilder defect)", problems.items)
