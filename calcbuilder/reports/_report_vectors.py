"""The test-vector section of the evidence report (private).

Each test vector is an input set with the risk the authors' analysis software
computed. The table is transposed (one column per vector, one row per input)
so that calculators with many inputs still fit; blocks of at most
:data:`PER_BLOCK` vectors follow each other. Below the inputs come the linear
predictor and the risk recomputed by this calcbuilder, then the stored risk,
exactly as in the file, and the difference.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from reportlab.platypus import Flowable, KeepTogether, Paragraph, Spacer

from .. import __version__
from ..calc.checking import check_patient
from ..calc.document import Calculator
from ..calc.inputs import InputSpec
from ..calc.scoring import Score, score
from ..errors import CalcbuilderError
from ._report_style import Context, esc, grid_table
from ._report_text import exact

__all__ = ["PER_BLOCK", "vector_scores", "vectors_story"]

PER_BLOCK = 5


def vector_scores(calc: Calculator) -> Score | None:
    """Our scores of every test vector, in order (None if any vector cannot be scored)."""
    values: list[dict[str, Any]] = []
    for vec in calc.test_vectors:
        checked = check_patient(calc.inputs, vec.values)
        if not checked.ok:
            return None
        values.append(dict(checked.values))
    cols: dict[str, np.ndarray] = {}
    for spec in calc.inputs:
        col = np.array([v.get(spec.id) for v in values], dtype=object)
        cols[spec.id] = col if spec.kind == "choice" else col.astype(float)
    try:
        return score(calc.model, cols)
    except CalcbuilderError:
        return None


def _value_text(spec: InputSpec, value: Any) -> str:
    if value is None:
        return "—"
    if spec.kind == "yes_no":
        return "yes" if value in (True, 1, "yes") else "no"
    if spec.kind == "choice":
        return esc(str(value))
    unit = f" {esc(spec.unit)}" if spec.unit else ""
    return f"{exact(value)}{unit}"


def _block(ctx: Context, start: int, stop: int, scores: Score | None, per: int) -> Flowable:
    st, calc = ctx.st, ctx.calc
    vectors = calc.test_vectors[start:stop]
    head = ["Input"] + [f"{i + 1}. {esc(v.name)}" for i, v in enumerate(vectors, start)]
    rows: list[list[Flowable]] = [[Paragraph(h, st.cell_bold) for h in head]]
    for spec in calc.inputs:
        rows.append([Paragraph(f"{esc(spec.label)} <font color='#555555'>({esc(spec.id)})</font>",
                               st.cell)]
                    + [Paragraph(_value_text(spec, v.values.get(spec.id)), st.cell_mono)
                       for v in vectors])
    model = calc.model
    if scores is not None:
        lp_name = ("Linear predictor η" if model.family == "logistic"
                   else "Centred linear predictor lp")
        if model.recalibration is not None:
            lp_name += " (before recalibration)"
        lines = [(lp_name, scores.linear_predictor)]
        if model.recalibration is not None or model.family != "logistic":
            lines.append(("η′ after recalibration" if model.recalibration is not None
                          else "η = ln(−ln S0) + lp", scores.eta))
        lines.append((f"Risk recomputed by calcbuilder {__version__}", scores.risk))
        for label, arr in lines:
            rows.append([Paragraph(esc(label), st.cell)]
                        + [Paragraph(f"{float(arr[i]):.12g}", st.cell_tiny)
                           for i in range(start, stop)])
    rows.append([Paragraph("<b>Risk stated in the file</b>", st.cell)]
                + [Paragraph(f"<b>{exact(v.risk)}</b>", st.cell_tiny) for v in vectors])
    if scores is not None:
        rows.append([Paragraph("Difference (recomputed − stated)", st.cell)]
                    + [Paragraph(f"{float(scores.risk[i]) - v.risk:.1e}", st.cell_tiny)
                       for i, v in enumerate(vectors, start)])
    label_w = 104.0
    col_w = (ctx.width - label_w) / per
    return grid_table(rows, [label_w] + [col_w] * len(vectors), zebra=True)


def vectors_story(ctx: Context) -> list[Flowable]:
    """Every test vector with its inputs, intermediate values and risks."""
    st, calc = ctx.st, ctx.calc
    scores = vector_scores(calc)
    intro = Paragraph(
        "Test vectors let anyone check an implementation of the equation: with the inputs in "
        "each column (canonical units), a correct implementation reproduces the stated risk. "
        "calcbuilder re-scores every vector whenever it opens the file and refuses the file if "
        "any risk differs by more than 1e-9.", st.body)
    out: list[Flowable] = []
    total = len(calc.test_vectors)
    per = -(-total // -(-total // PER_BLOCK))  # blocks of near-equal size
    for start in range(0, total, per):
        stop = min(total, start + per)
        block = _block(ctx, start, stop, scores, per)
        out += [KeepTogether([intro, block] if start == 0 else [block]), Spacer(1, 6)]
    if scores is None:
        out.append(Paragraph("The vectors could not be re-scored for this report.", st.grey))
    return out
