"""The reference patient against which "why this estimate" contributions are shown.

A contribution measured from zero (``coefficient x value``) is arithmetic, not
explanation: an age of 80 "contributes" a large number only because ages are
far from zero. The clinic form and the risk sheet therefore show each input's
contribution *compared with a reference patient*:

* a number input at the middle of the range the model was developed on (or of
  its hard limits when no developed range is stated);
* a yes/no input at "no";
* a choice input at the model's reference level (the first choice when the
  model names none).

The shown contributions then add up to the linear predictor of this patient
minus that of the reference patient, so larger bars mean "moves the estimate
more than the reference patient's value would".
"""

from __future__ import annotations

from collections.abc import Mapping

from ..calc.document import Calculator
from ..calc.inputs import InputSpec
from ..calc.model import Levels
from ..calc.scoring import score

__all__ = ["reference_contributions", "reference_values"]


def _choice_reference(calc: Calculator, spec: InputSpec) -> str:
    for term in calc.model.terms:
        if term.input == spec.id and isinstance(term.transform, Levels):
            return term.transform.reference
    return spec.choices[0].value


def _reference_value(calc: Calculator, spec: InputSpec) -> float | bool | str:
    if spec.kind == "yes_no":
        return False
    if spec.kind == "choice":
        return _choice_reference(calc, spec)
    span = spec.developed or spec.limits
    assert span is not None  # hard limits are required for number inputs
    return (span.low + span.high) / 2


def reference_values(calc: Calculator) -> dict[str, float | bool | str]:
    """The reference patient's canonical value for every input the model reads."""
    return {spec.id: _reference_value(calc, spec) for spec in calc.inputs
            if spec.id in calc.model.inputs_read}


def reference_contributions(calc: Calculator) -> Mapping[str, float]:
    """Each input's contribution to the linear predictor for the reference patient."""
    values = reference_values(calc)
    s = score(calc.model, {k: [v] for k, v in values.items()})
    return {k: float(v[0]) for k, v in s.contributions.items()}
