"""Patsy factors as calculator transforms (private to the fitted-model importer).

See :mod:`calcbuilder.calc.importers.fitted` for the table of accepted forms.
Factor codes are read with :mod:`ast` (never evaluated) and matched against a
closed set of shapes; categorical factors must use a treatment contrast.
"""

from __future__ import annotations

import ast
from dataclasses import dataclass
from typing import Any

from ..inputs import InputSpec
from .inputs_toml import InputsDescription

__all__ = ["SPLINE_FUNCTIONS", "Factor", "categorical_factor", "category_text",
           "numeric_factor", "parse_numeric"]

SPLINE_FUNCTIONS = ("cr", "bs", "cc", "te")
_FORMS = ("x, np.log(x), np.log(x + c), np.log1p(x), np.sqrt(x), I(x ** k), C(x) or a text/"
          "bool column with treatment contrast, and products a:b of these")
_SPLINE_TEXT = (
    "spline bases from patsy (cr, bs, cc, te) cannot be carried over: calcbuilder's rcs "
    "transform builds its own basis (Harrell's restricted cubic spline, knots stored in the "
    "file). Refit with transform = {type = \"rcs\", knots = [...]} in a fitting recipe "
    "(calcbuilder fit), or on columns from calcbuilder.stats.splines.rcs_basis, and import "
    "that")


@dataclass(frozen=True)
class Factor:
    """One patsy factor as a calculator term: its name, input, transform and column names."""

    name: str
    input: str
    transform: dict[str, Any]
    pieces: tuple[str, ...]
    column: str


def _call_name(node: ast.expr) -> str:
    if isinstance(node, ast.Name):
        return node.id
    if isinstance(node, ast.Attribute):
        return f"{_call_name(node.value)}.{node.attr}"
    return ""


def _constant(node: ast.expr) -> float | None:
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub | ast.UAdd):
        inner = _constant(node.operand)
        return None if inner is None else (-inner if isinstance(node.op, ast.USub) else inner)
    if isinstance(node, ast.Constant):
        value = node.value
        if isinstance(value, int | float) and not isinstance(value, bool):
            return float(value)
    return None


def _shifted(node: ast.expr) -> tuple[str, float] | None:
    """``x`` -> (x, 0); ``x + c`` / ``c + x`` -> (x, c); ``x - c`` -> (x, -c)."""
    if isinstance(node, ast.Name):
        return node.id, 0.0
    if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Add | ast.Sub):
        left, right = node.left, node.right
        if isinstance(node.op, ast.Add) and isinstance(right, ast.Name):
            left, right = right, left
        c = _constant(right)
        if isinstance(left, ast.Name) and c is not None:
            return left.id, c if isinstance(node.op, ast.Add) else -c
    return None


def _expression(code: str) -> ast.expr | None:
    try:
        return ast.parse(code.strip(), mode="eval").body
    except SyntaxError:
        return None


def _call_form(node: ast.Call) -> tuple[str, dict[str, Any]] | None:
    """``np.log(x [+- c])``, ``np.log1p(x)``, ``np.sqrt(x)`` or ``I(x ** k)``, else None."""
    fn, arg = _call_name(node.func), node.args[0]
    base = fn.rsplit(".", 1)[-1] if fn.startswith(("np.", "numpy.")) else ""
    shifted = _shifted(arg)
    if base == "log" and shifted is not None:
        return shifted[0], {"type": "log", "shift": shifted[1]}
    if base in ("log1p", "sqrt") and isinstance(arg, ast.Name):
        return arg.id, {"type": "log", "shift": 1.0} if base == "log1p" else {"type": "sqrt"}
    if fn == "I" and isinstance(arg, ast.BinOp) and isinstance(arg.op, ast.Pow):
        k = _constant(arg.right)
        if isinstance(arg.left, ast.Name) and k is not None and k != 0:
            return arg.left.id, ({"type": "linear"} if k == 1
                                 else {"type": "power", "exponent": k})
    return None


def parse_numeric(code: str) -> tuple[str, dict[str, Any]] | str:
    """The column and transform of a numeric factor's code, or why it cannot be represented."""
    node = _expression(code)
    if isinstance(node, ast.Name):
        return node.id, {"type": "linear"}
    form = None
    if isinstance(node, ast.Call) and len(node.args) == 1 and not node.keywords:
        form = _call_form(node)
    if form is not None:
        return form
    if isinstance(node, ast.Call) and _call_name(node.func) in SPLINE_FUNCTIONS:
        return _SPLINE_TEXT
    return f"{code!r} is not one of the forms calcbuilder can represent: {_FORMS}"


def category_text(value: Any) -> str:
    """A category as a choice value: text as is, whole numbers without ``.0``."""
    if isinstance(value, str):
        return value
    number = float(value)
    return str(int(number)) if number.is_integer() else repr(number)


def _categorical_column(code: str) -> str | None:
    node = _expression(code)
    if isinstance(node, ast.Name):
        return node.id
    if (isinstance(node, ast.Call) and _call_name(node.func) == "C" and node.args
            and isinstance(node.args[0], ast.Name)):
        return node.args[0].id
    return None


def _treatment(matrix: Any, categories: tuple[Any, ...]) -> tuple[Any, list[Any]] | None:
    """(reference, levels in column order) of a treatment contrast, else None."""
    import numpy as np

    m = np.asarray(matrix, dtype=float)
    if m.shape != (len(categories), len(categories) - 1) or not np.isin(m, (0, 1)).all():
        return None
    zero_rows = [i for i in range(m.shape[0]) if not m[i].any()]
    if len(zero_rows) != 1 or not (m.sum(axis=0) == 1).all() or not (m.sum(axis=1) <= 1).all():
        return None
    levels = [categories[int(np.flatnonzero(m[:, j])[0])] for j in range(m.shape[1])]
    return categories[zero_rows[0]], levels


def _input(column: str, desc: InputsDescription) -> InputSpec | str:
    spec = desc.input_named(column)
    if spec is None:
        return (f"column {column!r} is not an input of {desc.source}: add an [[inputs]] "
                f"entry with id or column = {column!r}")
    return spec


def numeric_factor(factor: Any, desc: InputsDescription) -> Factor | str:
    parsed = parse_numeric(factor.code)
    if isinstance(parsed, str):
        return parsed
    column, transform = parsed
    spec = _input(column, desc)
    if isinstance(spec, str):
        return spec
    if spec.kind == "yes_no" and transform["type"] == "linear":
        transform = {"type": "indicator"}
    elif spec.kind != "number":
        return f"input {spec.id!r} is {spec.kind}; {factor.code!r} needs a number input"
    return Factor(factor.name(), spec.id, transform, (factor.name(),), column)


def categorical_factor(factor: Any, info: Any, contrast: Any,
                        desc: InputsDescription) -> Factor | str:
    column = _categorical_column(factor.code)
    if column is None:
        return f"{factor.code!r} is not one of the forms calcbuilder can represent: {_FORMS}"
    coded = _treatment(contrast.matrix, tuple(info.categories))
    if coded is None:
        return (f"{factor.code!r} is not coded with a treatment contrast against one reference "
                "level (full-rank or other contrasts cannot be represented)")
    spec = _input(column, desc)
    if isinstance(spec, str):
        return spec
    transform = _category_transform(factor.code, spec, tuple(info.categories), *coded)
    if isinstance(transform, str):
        return transform
    pieces = tuple(factor.name() + suffix for suffix in contrast.column_suffixes)
    return Factor(factor.name(), spec.id, transform, pieces, column)


def _category_transform(code: str, spec: InputSpec, categories: tuple[Any, ...],
                        reference: Any, levels: list[Any]) -> dict[str, Any] | str:
    """``indicator`` (bool column, yes/no input) or ``levels`` (choice input), else why not."""
    if spec.kind == "yes_no":
        if (reference, levels) != (False, [True]):
            return (f"yes/no input {spec.id!r} needs a bool column coded True against the "
                    f"reference False (got reference {reference!r})")
        return {"type": "indicator"}
    if spec.kind != "choice" or any(isinstance(c, bool) for c in categories):
        return f"input {spec.id!r} is {spec.kind}; categories of {code!r} need a choice"
    texts = [category_text(c) for c in categories]
    choices = [c.value for c in spec.choices]
    if sorted(texts) != sorted(choices):
        return (f"the categories of {code!r} ({', '.join(texts)}) differ from the "
                f"choices of input {spec.id!r} ({', '.join(choices)})")
    return {"type": "levels", "reference": category_text(reference),
            "levels": [category_text(v) for v in levels]}
