"""Checks on the rows used for fitting (private): unusable predictors, warnings, events.

Rules (documented in ``docs/recipe.md``):

* Error: a predictor with a single value in every row used (a number with no
  spread, a yes/no always the same, a choice with one value), and a listed
  choice that never occurs: its effect cannot be estimated.
* Warning, near-constant: one value in more than 99% of the rows used, or a
  number whose standard deviation is below 1e-9 times its largest absolute value.
* Warning, collinear: between number and yes/no inputs, a Pearson correlation
  with ``|r| > 0.95`` (the pair is named), or, for an input in no such pair, a
  variance inflation factor above 10 (the diagonal of the inverse correlation
  matrix of those inputs; left out when that matrix is singular).
* Error, too few events: fewer rows in the smaller outcome class than model
  parameters + 1. Warning: fewer than 10 events (smaller class) per parameter.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..calc.numbers import format_number
from ._recipe_inputs import InputEntry
from ._tokens import show

__all__ = [
    "COLLINEAR_R",
    "MIN_EVENTS_PER_PARAMETER",
    "NEAR_CONSTANT_SHARE",
    "TINY_SPREAD",
    "VIF_LIMIT",
    "collinearity_warnings",
    "constant_checks",
    "event_checks",
]

NEAR_CONSTANT_SHARE = 0.99
COLLINEAR_R = 0.95
VIF_LIMIT = 10.0
TINY_SPREAD = 1e-9
MIN_EVENTS_PER_PARAMETER = 10.0


def _shown(value: Any) -> str:
    return show(float(value)) if isinstance(value, float | np.floating) else show(str(value))


def constant_checks(
    entries: Sequence[InputEntry],
    values: Mapping[str, NDArray[Any]],
    choices: Mapping[str, Sequence[str]],
) -> tuple[list[str], list[str]]:
    """Problems (single-valued predictors, absent choices) and near-constant warnings."""
    problems: list[str] = []
    warnings: list[str] = []
    n = len(next(iter(values.values()))) if values else 0
    for entry in entries:
        x = values[entry.id]
        uniques, counts = np.unique(x.astype(str) if entry.kind == "choice" else x,
                                    return_counts=True)
        top = int(np.argmax(counts))
        top_value = uniques[top]
        if entry.kind == "yes_no":
            top_text = "yes" if float(top_value) == 1 else "no"
        else:
            top_text = _shown(top_value)
        if len(uniques) == 1:
            problems.append(f"column '{entry.column}' has the same value ({top_text}) in every "
                            "row used; its effect cannot be estimated: remove the input from "
                            "the recipe or use other data")
            continue
        if entry.kind == "choice":
            absent = [c for c in choices[entry.id] if c not in set(uniques.tolist())]
            for choice in absent:
                problems.append(f"column '{entry.column}': the choice '{choice}' does not occur "
                                "in the rows used; its effect cannot be estimated: remove it "
                                f"from {entry.path}.choices or merge it with another choice")
        if entry.kind == "number" and _tiny_spread(x):
            warnings.append(f"column '{entry.column}': almost no spread (standard deviation "
                            f"{np.std(x):.3g} around {np.mean(x):.6g}); its effect will be "
                            "estimated poorly: check the column and its unit")
        share = counts[top] / n
        if share > NEAR_CONSTANT_SHARE:
            warnings.append(f"column '{entry.column}': one value ({top_text}) in "
                            f"{100 * share:.1f}% of the rows used ({counts[top]} of {n}); its "
                            "effect will be estimated poorly")
    return problems, warnings


def _tiny_spread(x: NDArray[Any]) -> bool:
    """Standard deviation below ``TINY_SPREAD`` times the size of the values."""
    values = np.asarray(x, dtype=float)
    return bool(np.std(values) <= TINY_SPREAD * max(1.0, float(np.max(np.abs(values)))))


def collinearity_warnings(
    entries: Sequence[InputEntry], values: Mapping[str, NDArray[Any]]
) -> list[str]:
    """Strongly correlated pairs and high variance inflation among number and yes/no inputs."""
    used = [e for e in entries if e.kind != "choice" and np.std(values[e.id]) > 0]
    if len(used) < 2:
        return []
    x = np.column_stack([values[e.id] for e in used])
    r = np.corrcoef(x, rowvar=False)
    out = []
    paired: set[int] = set()
    for i in range(len(used)):
        for j in range(i + 1, len(used)):
            if abs(r[i, j]) > COLLINEAR_R:
                paired |= {i, j}
                out.append(f"columns '{used[i].column}' and '{used[j].column}' are strongly "
                           f"correlated (r = {r[i, j]:.3f}); the model will separate their "
                           "effects poorly: consider keeping only one")
    vif = _vif(r)
    for k, entry in enumerate(used):
        if vif is not None and vif[k] > VIF_LIMIT and k not in paired:
            out.append(f"column '{entry.column}': variance inflation factor "
                       f"{format_number(round(float(vif[k]), 1))} (above "
                       f"{format_number(VIF_LIMIT)}): it is largely explained by the other "
                       "inputs, so its effect will be estimated poorly")
    return out


def _vif(r: NDArray[np.float64]) -> NDArray[np.float64] | None:
    """Diagonal of the inverse correlation matrix; None when it is singular."""
    if np.linalg.cond(r) > 1e12:
        return None
    return np.asarray(np.diag(np.linalg.inv(r)), dtype=np.float64)


def event_checks(events: int, non_events: int, n_parameters: int) -> tuple[list[str], list[str]]:
    """Too few events to fit at all (problem) or fewer than 10 per parameter (warning)."""
    smaller = min(events, non_events)
    which = "events" if events <= non_events else "non-events"
    needed = n_parameters + 1
    if smaller < needed:
        common = int(MIN_EVENTS_PER_PARAMETER * n_parameters)
        return [f"too few {which} to fit: {events} events and {non_events} non-events for "
                f"{n_parameters} model parameters; each outcome needs at least {needed} rows "
                f"(one more than the parameters), and about {common} (10 per parameter) is a "
                "common minimum: use fewer inputs, fewer knots or more data"], []
    per = smaller / n_parameters
    if per < MIN_EVENTS_PER_PARAMETER:
        return [], [f"{per:.1f} {which} per model parameter ({smaller} {which}, {n_parameters} "
                    f"parameters), fewer than {format_number(MIN_EVENTS_PER_PARAMETER)}: expect "
                    "overfitting; look at the optimism-corrected performance and consider "
                    "fewer parameters"]
    return [], []
