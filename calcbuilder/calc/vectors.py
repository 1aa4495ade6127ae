"""Re-score a calculator's test vectors: the check that catches mistyped coefficients.

The author stores input sets with the risk the original analysis software
computed. On every load each set is checked like a patient's values and
scored by our code; a difference above :data:`TOLERANCE` on the risk refuses
the file, naming the vector.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import CalcbuilderError
from .checking import check_patient
from .problems import Problems, join
from .scoring import score

if TYPE_CHECKING:
    from .document import Calculator

__all__ = ["TOLERANCE", "check_test_vectors", "vector_risks"]

TOLERANCE = 1e-9


def _label(i: int, name: str) -> str:
    return f"{join('test_vectors', i)} ({name!r})"


def vector_risks(calc: Calculator, problems: Problems) -> dict[int, float]:
    """Our risk for every vector whose values pass input checking (index -> risk)."""
    accepted: dict[int, dict[str, Any]] = {}
    for i, vec in enumerate(calc.test_vectors):
        checked = check_patient(calc.inputs, vec.values)
        if not checked.ok:
            texts = "; ".join(m.text for m in checked.all_messages if m.severity == "error")
            problems.add(_label(i, vec.name), f"its values are refused by the inputs: {texts}")
            continue
        accepted[i] = dict(checked.values)
    if not accepted:
        return {}
    columns = {
        spec.id: np.array([accepted[i].get(spec.id) for i in accepted], dtype=object)
        for spec in calc.inputs
    }
    for spec in calc.inputs:
        if spec.kind != "choice":
            columns[spec.id] = columns[spec.id].astype(float)
    try:
        risks = score(calc.model, columns).risk
    except CalcbuilderError as exc:
        problems.add("test_vectors", f"could not be scored: {exc}")
        return {}
    return {i: float(r) for i, r in zip(accepted, risks, strict=True)}


def check_test_vectors(calc: Calculator) -> None:
    """Raise :class:`CalcFileError` unless every vector reproduces its stated risk."""
    problems = Problems()
    ours = vector_risks(calc, problems)
    for i, risk in ours.items():
        vec = calc.test_vectors[i]
        diff = abs(risk - vec.risk)
        if not diff <= TOLERANCE:
            problems.add(
                _label(i, vec.name),
                f"the file states risk {vec.risk:.12g} but the model computes {risk:.12g} "
                f"(difference {diff:.3g} > {TOLERANCE:g}); a coefficient, knot or transform "
                "may have been mistyped, so the file is refused",
            )
    problems.raise_if_any("the calculator's test vectors do not reproduce")
