"""The model equation, written out so anyone can re-implement and check it (private).

Every column of the design matrix gets a symbol (``age``, ``ln(creatinine)``,
``S₁(age)``, ``[falls = yes]``, ...); the linear predictor is printed as the
sum of coefficient × symbol, one column per line, and every symbol that is not
an input itself is defined with its numbers: truncation bounds, log shift,
exponent, spline knots (the restricted cubic spline in Harrell's
parameterisation, written out term by term), hinge knots, indicator levels and
the reference level, products. Coefficients are printed as stored in the file
(:func:`calcbuilder.reports._report_text.exact`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from reportlab.platypus import Flowable, KeepTogether, Paragraph

from ..calc.document import Calculator
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
    Truncate,
)
from ._report_style import ReportStyles, bullets, esc
from ._report_text import exact

__all__ = ["Column", "columns", "definition_lines", "equation_lines", "link_lines"]


@dataclass(frozen=True)
class Column:
    """One column of the design matrix: its term, position and printed symbol.

    ``ratio`` says what ``exp(coefficient)`` compares (None when a ratio of one
    column alone means nothing, e.g. a spline or a product column).
    """

    term: str
    index: int
    symbol: str
    ratio: str | None


def _minus(var: str, value: float) -> str:
    """'(x − 68)' or '(x + 5)' for a negative constant."""
    if value < 0:
        return f"({var} + {exact(-value)})"
    return f"({var} − {exact(value)})"


def _difference(a: float, b: float) -> str:
    """'(88 − 68)' with a negative second value in brackets."""
    right = f"({exact(b)})" if b < 0 else exact(b)
    return f"({exact(a)} − {right})"


def variable(term: TermSpec) -> str:
    """The input as this term uses it: its id, marked with the truncation bounds if any."""
    name = esc(term.input or term.name)
    cut = term.truncate
    if cut is None or (cut.low is None and cut.high is None):
        return f"<i>{name}</i>"
    if cut.low is not None and cut.high is not None:
        bounds = f"[{exact(cut.low)}, {exact(cut.high)}]"
    elif cut.low is not None:
        bounds = f"≥{exact(cut.low)}"
    else:
        bounds = f"≤{exact(cut.high)}"
    return f"<i>{name}</i><sub>{bounds}</sub>"


def _spline_name(term: TermSpec, model: ModelSpec) -> str:
    """'S' or, when two spline terms read the same input, 'S' with the term name."""
    twins = [t for t in model.terms if isinstance(t.transform, Rcs) and t.input == term.input]
    return "S" if len(twins) < 2 else f"S[{esc(term.name)}]"


def _single(t: Linear | Log | Sqrt | Power, x: str) -> tuple[str, str | None]:
    """Symbol and ratio meaning of a one-column transform of a number."""
    if isinstance(t, Linear):
        return x, "per 1 unit higher"
    if isinstance(t, Log):
        inner = x if t.shift == 0 else _minus(x, -t.shift)[1:-1]
        return f"ln({inner})", None
    if isinstance(t, Sqrt):
        return f"√({x})", None
    return f"{x}<super>{exact(t.exponent)}</super>", None


def _symbols(term: TermSpec, model: ModelSpec, done: dict[str, list[Column]]) -> list[Column]:
    t, x, one = term.transform, variable(term), term.name
    if isinstance(t, Product):
        left, right = done[t.of[0]], done[t.of[1]]
        cols = [Column(one, i * len(right) + j, f"{a.symbol} × {b.symbol}", None)
                for i, a in enumerate(left) for j, b in enumerate(right)]
    elif isinstance(t, Linear | Log | Sqrt | Power):
        cols = [Column(one, 0, *_single(t, x))]
    elif isinstance(t, Rcs):
        s = _spline_name(term, model)
        cols = [Column(one, 0, x, None)] + [
            Column(one, j, f"{s}<sub>{j}</sub>({x})", None) for j in range(1, len(t.knots) - 1)]
    elif isinstance(t, Hinges):
        cols = [Column(one, 0, x, None)] + [
            Column(one, j, f"{_minus(x, k)}<sub>+</sub>", None)
            for j, k in enumerate(t.knots, start=1)]
    elif isinstance(t, Indicator):
        level = "yes" if t.level is None else esc(t.level)
        other = "no" if t.level is None else "any other answer"
        cols = [Column(one, 0, f"[{x} = {level}]", f"{level} vs {other}")]
    else:
        cols = [Column(one, j, f"[{x} = {esc(level)}]", f"{esc(level)} vs {esc(t.reference)}")
                for j, level in enumerate(t.levels)]
    return cols


def columns(model: ModelSpec) -> list[Column]:
    """Every column of the model, in coefficient order."""
    done: dict[str, list[Column]] = {}
    out: list[Column] = []
    for term in model.terms:
        done[term.name] = _symbols(term, model, done)
        out += done[term.name]
    return out


def _signed(value: float, first: bool) -> str:
    if first:
        return exact(value)
    return f"− {exact(-value)}" if value < 0 else f"+ {exact(value)}"


def link_lines(model: ModelSpec) -> list[str]:
    """How the risk follows from the linear predictor (markup, one formula per line)."""
    recal = model.recalibration
    eta = "η′" if recal is not None else "η"
    lines: list[str] = []
    if model.family == "logistic":
        lines.append("η = β<sub>0</sub> + Σ<sub>j</sub> β<sub>j</sub> x<sub>j</sub> "
                     "(the intercept plus each coefficient times its column, below)")
        if recal is not None:
            lines.append(_recal_line(recal.intercept, recal.slope))
        lines.append(f"risk = 1 / (1 + exp(−{eta}))")
        return lines
    surv = model.survival
    assert surv is not None  # checked on load for this family
    s0 = surv.baseline_survival
    lines.append("lp = Σ<sub>j</sub> β<sub>j</sub> (x<sub>j</sub> − c<sub>j</sub>) "
                 "(each coefficient times its column minus the column's centring value c<sub>j"
                 "</sub>, below)")
    lines.append(f"S<sub>0</sub> = {exact(s0)}: baseline survival at {exact(surv.horizon)} "
                 f"{esc(surv.horizon_unit)}, for a person with every column at its centring value")
    if recal is None:
        lines.append("risk = 1 − S<sub>0</sub><super>exp(lp)</super>, equivalently "
                     "risk = 1 − exp(−exp(η)) with η = ln(−ln S<sub>0</sub>) + lp = "
                     f"{exact(math.log(-math.log(s0)))} + lp")
        return lines
    lines.append(f"η = ln(−ln S<sub>0</sub>) + lp = {exact(math.log(-math.log(s0)))} + lp "
                 "(complementary log-log scale)")
    lines.append(_recal_line(recal.intercept, recal.slope))
    lines.append("risk = 1 − exp(−exp(η′))")
    return lines


def _recal_line(a: float, b: float) -> str:
    if b == 1:
        return (f"η′ = a + η with a = {exact(a)} (recalibration in the large, slope 1; see "
                "the Recalibration section)")
    return (f"η′ = a + b · η with a = {exact(a)} and b = {exact(b)} "
            "(recalibration; see the Recalibration section)")


def equation_lines(calc: Calculator) -> list[str]:
    """The linear predictor written out, one column per line (markup)."""
    model = calc.model
    cols = columns(model)
    centre = model.survival.centre if model.survival is not None else None
    coefs = [c for term in model.terms for c in term.coefficients]
    if model.family == "logistic":
        lines = [f"η = {exact(model.intercept)}"]
        first = False
    else:
        lines = ["lp ="]
        first = True
    for i, (col, beta) in enumerate(zip(cols, coefs, strict=True)):
        symbol = col.symbol
        if centre is not None:
            symbol = f"({symbol} − {exact(centre[i])})" if centre[i] >= 0 else \
                f"({symbol} + {exact(-centre[i])})"
        lines.append(f"&nbsp;&nbsp;&nbsp;{_signed(beta, first)} × {symbol}")
        first = False
    return lines


def _truncation_line(term: TermSpec, cut: Truncate) -> str:
    name = f"<i>{esc(term.input or term.name)}</i>"
    parts = []
    if cut.low is not None:
        parts.append(f"values below {exact(cut.low)} count as {exact(cut.low)}")
    if cut.high is not None:
        parts.append(f"values above {exact(cut.high)} count as {exact(cut.high)}")
    return (f"{variable(term)} = {name} limited before transforming for term "
            f"‘{esc(term.name)}’: {' and '.join(parts)}.")


def _spline_lines(term: TermSpec, model: ModelSpec, knots: tuple[float, ...]) -> list[str]:
    x, s = variable(term), _spline_name(term, model)
    k = len(knots)
    t1, tk1, tk = knots[0], knots[-2], knots[-1]
    out = [f"Spline term ‘{esc(term.name)}’: {k} knots at "
           f"{', '.join(exact(v) for v in knots)}; columns {x} and "
           + ", ".join(f"{s}<sub>{j}</sub>({x})" for j in range(1, k - 1)) + ", where"]
    for j in range(1, k - 1):
        tj = knots[j - 1]
        out.append(
            f"{s}<sub>{j}</sub>({x}) = [ {_minus(x, tj)}<sub>+</sub><super>3</super> − "
            f"{_minus(x, tk1)}<sub>+</sub><super>3</super> · {_difference(tk, tj)} / "
            f"{_difference(tk, tk1)} + {_minus(x, tk)}<sub>+</sub><super>3</super> · "
            f"{_difference(tk1, tj)} / {_difference(tk, tk1)} ] / "
            f"{_difference(tk, t1)}<super>2</super>")
    return out


RCS_GENERAL = (
    "Restricted cubic splines use Harrell's parameterisation. With knots t<sub>1</sub> &lt; … "
    "&lt; t<sub>k</sub>, a spline term has the columns x and S<sub>j</sub>(x) for j = 1, …, "
    "k − 2, with S<sub>j</sub>(x) = [ (x − t<sub>j</sub>)<sub>+</sub><super>3</super> − "
    "(x − t<sub>k−1</sub>)<sub>+</sub><super>3</super> (t<sub>k</sub> − t<sub>j</sub>) / "
    "(t<sub>k</sub> − t<sub>k−1</sub>) + (x − t<sub>k</sub>)<sub>+</sub><super>3</super> "
    "(t<sub>k−1</sub> − t<sub>j</sub>) / (t<sub>k</sub> − t<sub>k−1</sub>) ] / "
    "(t<sub>k</sub> − t<sub>1</sub>)<super>2</super>. The division by "
    "(t<sub>k</sub> − t<sub>1</sub>)<super>2</super> is the normalisation used by Hmisc's "
    "rcspline.eval with norm = 2; the curve is linear below t<sub>1</sub> and above "
    "t<sub>k</sub>. Other spline bases (for example natural-spline bases) span the same "
    "curves with different coefficients, so these coefficients only fit this basis.")


def definition_lines(model: ModelSpec) -> list[str]:
    """Definitions of every symbol that is not an input value itself (markup)."""
    out = ["(u)<sub>+</sub> = max(u, 0); [A] = 1 when A holds, otherwise 0; ln is the natural "
           "logarithm; every number input enters in its canonical unit (see the inputs table)."]
    for term in model.terms:
        if term.truncate is not None:
            out.append(_truncation_line(term, term.truncate))
    for term in model.terms:
        t = term.transform
        if isinstance(t, Rcs):
            out += _spline_lines(term, model, t.knots)
        elif isinstance(t, Hinges):
            out.append(f"Linear-spline term ‘{esc(term.name)}’: hinges at "
                       f"{', '.join(exact(v) for v in t.knots)}; the slope changes at each.")
        elif isinstance(t, Levels):
            out.append(f"Term ‘{esc(term.name)}’ codes <i>{esc(term.input or '')}</i> with "
                       f"reference level ‘{esc(t.reference)}’ (all its columns 0) and one "
                       f"column for each of: {', '.join(esc(v) for v in t.levels)}.")
        elif isinstance(t, Product):
            out.append(f"Interaction term ‘{esc(term.name)}’: every product of the columns of "
                       f"‘{esc(t.of[0])}’ and ‘{esc(t.of[1])}’ (first term's columns outer).")
    return out


def equation_story(calc: Calculator, st: ReportStyles) -> list[Flowable]:
    """The risk formula, the linear predictor and the definitions as paragraphs."""
    out: list[Flowable] = [Paragraph(line, st.equation) for line in link_lines(calc.model)]
    lines = [Paragraph(line, st.equation) for line in equation_lines(calc)]
    out += [KeepTogether([Paragraph("The linear predictor, column by column:", st.body),
                          *lines[:2]]), *lines[2:]]
    defs = bullets(definition_lines(calc.model), st.formula)
    out += [KeepTogether([Paragraph("Definitions:", st.body), *defs[:1]]), *defs[1:]]
    if any(isinstance(t.transform, Rcs) for t in calc.model.terms):
        out.append(Paragraph(RCS_GENERAL, st.formula))
    return out
