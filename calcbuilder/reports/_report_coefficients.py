"""The coefficient table and the covariance matrix of the evidence report (private).

Coefficients are printed as stored (shortest round-trip decimal). Standard
errors are the square roots of the covariance diagonal when the file has a
covariance matrix; 95% Wald limits are ``β ± 1.959964 SE``. An odds ratio
(logistic) or hazard ratio (survival at a horizon, complementary log-log link)
``exp(β)`` is shown only where one column alone has a meaning: a linear term
(per unit), an indicator, or a level against the reference level.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from reportlab.platypus import Flowable, Paragraph, Spacer

from ..calc.document import Calculator
from ..calc.scoring import Z95
from ._report_equation import columns
from ._report_style import ReportStyles, esc, grid_table
from ._report_text import exact, sig

__all__ = ["coefficient_story", "covariance_story", "standard_errors"]

_MATRIX_BLOCK = 7  # covariance columns per printed block


def standard_errors(calc: Calculator) -> list[float | None]:
    """SE of each coefficient (intercept first for logistic), None without a covariance."""
    model = calc.model
    size = model.n_columns + (1 if model.family == "logistic" else 0)
    if model.covariance is None:
        return [None] * size
    return [math.sqrt(row[i]) if row[i] >= 0 else None for i, row in enumerate(model.covariance)]


def _g(value: float | None) -> str:
    """A derived number to 5 significant digits ('—' for None)."""
    return "—" if value is None else f"{value:.5g}"


def _ci(beta: float, se: float | None) -> tuple[float, float] | None:
    if se is None:
        return None
    return beta - Z95 * se, beta + Z95 * se


def _ratio(beta: float, ci: tuple[float, float] | None) -> str:
    try:
        text = sig(math.exp(beta), 4)
        if ci is not None:
            text += f" ({sig(math.exp(ci[0]), 4)} to {sig(math.exp(ci[1]), 4)})"
    except OverflowError:
        return "too large to print"
    return text


def _row(st: ReportStyles, number: str, term: str, symbol: str, beta: float, *,
         se: float | None, ratio: str | None) -> list[Flowable]:
    ci = _ci(beta, se)
    return [Paragraph(number, st.cell), Paragraph(esc(term), st.cell),
            Paragraph(symbol, st.cell), Paragraph(exact(beta), st.cell_tiny),
            Paragraph(_g(se), st.cell_tiny),
            Paragraph("—" if ci is None else f"{_g(ci[0])} to {_g(ci[1])}", st.cell_tiny),
            Paragraph("—" if ratio is None else f"{_ratio(beta, ci)}<br/>"
                      f"<font color='#555555'>{ratio}</font>", st.cell)]


def _widths(width: float) -> list[float]:
    parts = [16, 60, 90, 92, 46, 100, 111]
    scale = width / sum(parts)
    return [p * scale for p in parts]


def coefficient_story(calc: Calculator, st: ReportStyles, width: float) -> list[Flowable]:
    """The coefficient table with its notes."""
    model = calc.model
    survival = model.family != "logistic"
    ratio_name = "Hazard ratio" if survival else "Odds ratio"
    head = ["#", "Term", "Column", "Coefficient (as stored)", "SE", "95% CI",
            f"{ratio_name} (95% CI)"]
    rows: list[Sequence[Flowable]] = [[Paragraph(h, st.cell_bold) for h in head]]
    ses = standard_errors(calc)
    offset = 0
    if not survival:
        assert model.intercept is not None  # logistic files always have one
        rows.append(_row(st, "0", "(intercept)", "β<sub>0</sub>", model.intercept, se=ses[0],
                         ratio=None))
        offset = 1
    coefs = [c for term in model.terms for c in term.coefficients]
    for i, (col, beta) in enumerate(zip(columns(model), coefs, strict=True)):
        name = col.term if col.index == 0 else ""
        rows.append(_row(st, str(i + 1), name, col.symbol, beta, se=ses[i + offset],
                         ratio=col.ratio))
    out: list[Flowable] = [grid_table(rows, _widths(width))]
    notes = ["Coefficients are printed exactly as stored in the file (the shortest decimal "
             "that reads back to the same number); everything else in the table is rounded."]
    if survival:
        notes.append("The centring value of each column is printed, exactly as stored, in the "
                     "linear predictor above.")
    if model.covariance is None:
        notes.append("The file holds no covariance matrix, so standard errors, confidence "
                     "intervals and the interval around each patient's risk are not available.")
    else:
        notes.append("SE = square root of the covariance diagonal; 95% CI = coefficient ± "
                     "1.959964 × SE (Wald).")
    notes.append(f"{ratio_name}s are exp(coefficient), shown only where one column alone has a "
                 "meaning (a straight-line term per unit of the input, an indicator, or one "
                 "level against the reference level); spline, hinge, transformed and "
                 "interaction columns have no ratio of their own.")
    out.append(Spacer(1, 3))
    out += [Paragraph(esc(n), st.grey) for n in notes]
    return out


def _names(calc: Calculator) -> list[str]:
    names = ["β0"] if calc.model.family == "logistic" else []
    return names + [f"β{i}" for i in range(1, calc.model.n_columns + 1)]


def covariance_story(calc: Calculator, st: ReportStyles, width: float) -> list[Flowable]:
    """The covariance matrix in blocks of columns (values to 10 significant digits)."""
    cov = calc.model.covariance
    if cov is None:
        return [Paragraph("Not provided in the calculator file.", st.small)]
    names = _names(calc)
    intercept = " (β0 is the intercept)" if calc.model.family == "logistic" else ""
    out: list[Flowable] = [Paragraph(
        f"Rows and columns follow the numbering of the coefficient table{intercept}. Values "
        "are rounded to 10 significant digits; the file holds them exactly.", st.grey)]
    size = len(names)
    per = -(-size // -(-size // _MATRIX_BLOCK))  # blocks of near-equal width
    for start in range(0, size, per):
        stop = min(size, start + per)
        head = ["", *names[start:stop]]
        rows: list[list[Flowable]] = [[Paragraph(h, st.cell_bold) for h in head]]
        for r in range(size):
            rows.append([Paragraph(names[r], st.cell_bold)]
                        + [Paragraph(f"{cov[r][c]:.10g}", st.cell_tiny)
                           for c in range(start, stop)])
        label_w = 26
        col_w = min(72.0, (width - label_w) / _MATRIX_BLOCK)
        out += [grid_table(rows, [label_w] + [col_w] * (stop - start), compact=True),
                Spacer(1, 5)]
    return out
