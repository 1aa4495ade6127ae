"""The model written out as text, so anyone can re-implement and check it.

Pure text formatting of the ``model`` section (no Qt, no computation): every
coefficient at full precision, every transform named as in FORMAT.md.
Column names follow the term: ``age``, ``ln(creatinine + 1)``, ``rcs2(age)``,
``[living = nursing]``; a product multiplies the columns of its two terms.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

from ..calc.inputs import InputSpec
from ..calc.model import (
    Hinges,
    Indicator,
    Levels,
    Linear,
    Log,
    ModelSpec,
    Power,
    Product,
    Rcs,
    Sqrt,
    TermSpec,
)
from ..calc.numbers import format_number

__all__ = ["equation_text"]


def _n(value: float) -> str:
    return format_number(value).replace("-", "−")


def _signed(value: float) -> str:
    return f"− {_n(-value)}" if value < 0 else f"+ {_n(value)}"


def _one_column(x: str, t: object) -> str | None:
    """The name of a one-column transform's column (None for the others)."""
    if isinstance(t, Linear):
        return x
    if isinstance(t, Log):
        return f"ln({x} {_signed(t.shift)})" if t.shift else f"ln({x})"
    if isinstance(t, Sqrt):
        return f"√{x}"
    if isinstance(t, Power):
        return f"{x}^{_n(t.exponent)}"
    return None


def _columns(term: TermSpec, names: Mapping[str, tuple[str, ...]]) -> tuple[str, ...]:
    x = term.input or ""
    t = term.transform
    single = _one_column(x, t)
    if single is not None:
        return (single,)
    if isinstance(t, Rcs):
        return (x, *(f"S{j}({x})" for j in range(1, len(t.knots) - 1)))
    if isinstance(t, Hinges):
        return (x, *(f"({x} − {_n(k)})₊" for k in t.knots))
    if isinstance(t, Indicator | Levels):
        levels = (t.level or "yes",) if isinstance(t, Indicator) else t.levels
        return tuple(f"[{x} = {level}]" for level in levels)
    if isinstance(t, Product):
        left, right = names[t.of[0]], names[t.of[1]]
        return tuple(f"{a} × {b}" for a in left for b in right)
    return (term.name,)  # pragma: no cover - the transform set is closed


_GENERAL = ("(u)₊ = max(u, 0); [A] = 1 when A holds, else 0; ln is the natural logarithm; "
            "every number enters in its canonical unit.")
_RCS = ("Sj(x) = [ (x − tj)₊³ − (x − t(k−1))₊³ · (tk − tj) / (tk − t(k−1)) + (x − tk)₊³ · "
        "(t(k−1) − tj) / (tk − t(k−1)) ] / (tk − t1)², j = 1 .. k − 2 (Harrell's "
        "parameterisation, normalised as Hmisc rcspline.eval with norm = 2).")


def _notes(model: ModelSpec, units: Mapping[str, str]) -> list[str]:
    notes = [_GENERAL]
    if any(isinstance(term.transform, Rcs) for term in model.terms):
        notes.append(_RCS)
    for term in model.terms:
        t = term.transform
        if term.truncate is not None:
            low = "−∞" if term.truncate.low is None else _n(term.truncate.low)
            high = "∞" if term.truncate.high is None else _n(term.truncate.high)
            notes.append(f"{term.input} is first limited to [{low}, {high}].")
        if isinstance(t, Rcs):
            knots = ", ".join(_n(k) for k in t.knots)
            notes.append(f"Sj({term.input}): restricted cubic spline with knots t1..t"
                         f"{len(t.knots)} = {knots}.")
    used = sorted({term.input for term in model.terms if term.input and term.input in units})
    if used:
        notes.append("Units: " + "; ".join(f"{i} in {units[i]}" for i in used) + ".")
    return notes


def _outcome_lines(model: ModelSpec) -> list[str]:
    lines = []
    scale = "η"
    if model.recalibration is not None:
        r = model.recalibration
        lines.append(f"η′ = {_n(r.intercept)} + {_n(r.slope)} × η   "
                     f"(recalibration, {r.method}{'; ' + r.dataset if r.dataset else ''})")
        scale = "η′"
    if model.family == "logistic":
        lines.append(f"risk = 1 / (1 + exp(−{scale}))")
    else:
        lines.append(f"risk = 1 − exp(−exp({scale}))")
    return lines


def equation_text(model: ModelSpec, inputs: Sequence[InputSpec]) -> str:
    """The linear predictor and the risk formula, one column per line."""
    names: dict[str, tuple[str, ...]] = {}
    lines: list[str] = []
    centre = list(model.survival.centre) if model.survival is not None else []
    j = 0
    for term in model.terms:
        cols = _columns(term, names)
        names[term.name] = cols
        for name, coef in zip(cols, term.coefficients, strict=True):
            column = f"({name} − {_n(centre[j])})" if centre else name
            lines.append(f"    {_signed(coef)} × {column}")
            j += 1
    if model.family == "logistic":
        head = [f"η = {_n(model.intercept or 0.0)}   (log-odds)"]
    else:
        assert model.survival is not None
        s = model.survival
        head = [f"η = ln(−ln {_n(s.baseline_survival)})   (complementary log-log; baseline "
                f"survival {_n(s.baseline_survival)} at {_n(s.horizon)} {s.horizon_unit})"]
    units = {spec.id: spec.unit for spec in inputs if spec.unit}
    body = head + lines + [""] + _outcome_lines(model)
    return "\n".join([*body, "", *_notes(model, units)])
