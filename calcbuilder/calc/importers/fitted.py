"""Import a fitted statsmodels logistic regression (formula API) with an inputs description.

Accepted results: ``smf.logit(formula, data).fit()`` and
``smf.glm(formula, data, family=sm.families.Binomial()).fit()`` (logit link), fitted
with a patsy formula, with an intercept and without offset or exposure. The
patsy design information (``result.model.data.design_info``, called
``model_spec`` in newer statsmodels) gives the terms, their factors and their
contrasts; each factor must be one of (``x`` a data column):

=========================================  =========================================
factor in the formula                      calculator transform
=========================================  =========================================
``x`` (numbers)                            ``linear`` (``indicator`` for a yes/no input:
                                           the column holds 1 for yes, 0 for no)
``np.log(x)``, ``np.log(x + c)``,          ``log`` with shift 0, c, -c, 1
``np.log(x - c)``, ``np.log1p(x)``
``np.sqrt(x)``                             ``sqrt``
``I(x ** k)``                              ``power`` with exponent k
``C(x)``, ``C(x, Treatment(...))``, or a   ``levels`` (reference = the treatment
text/bool column (treatment contrast)      reference), ``indicator`` for True of a bool
=========================================  =========================================

and a term is one factor or the product ``a:b`` of two factors that are also
terms of their own with the same coding. Spline bases (``cr``, ``bs``, ``cc``,
``te``) are refused: calcbuilder's ``rcs`` builds its own basis, so refit with
an ``rcs`` transform (fitting recipe) or on columns of
:func:`calcbuilder.stats.splines.rcs_basis`. Anything else is refused naming the
term. Categories become choice values as text (``2.0`` -> ``"2"``).

The covariance (``result.cov_params()``) is carried over. Test vectors: rows of
the training data spread evenly over it (named by position, counted from 0), with
``result.predict`` as the risk (the original analysis software), added to the
description's own vectors.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from ..document import Calculator
from ..inputs import InputSpec
from ..problems import Problems
from ._common import (
    Column,
    ModelImportError,
    PlannedTerm,
    assemble_model,
    raise_problems,
    validate,
    write_calculator,
)
from ._fitted_factors import (
    SPLINE_FUNCTIONS,
    Factor,
    categorical_factor,
    category_text,
    numeric_factor,
    parse_numeric,
)
from .inputs_toml import InputsDescription, load_description

__all__ = ["SPLINE_FUNCTIONS", "category_text", "fitted_document", "import_fitted",
           "parse_numeric"]


# -- the result, its design and its terms ----------------------------------------------------

def _check_result(result: Any) -> Any:
    """The patsy DesignInfo of a supported logistic fit; refuse anything else."""
    from patsy import DesignInfo
    from statsmodels.discrete.discrete_model import Logit
    from statsmodels.genmod.families import Binomial
    from statsmodels.genmod.families.links import Logit as LogitLink
    from statsmodels.genmod.generalized_linear_model import GLM

    model = getattr(result, "model", None)
    if model is None:
        raise ModelImportError(f"{type(result).__name__} is not a fitted statsmodels result")
    if isinstance(model, GLM):
        # exact type: statsmodels' Probit, Cauchy and other CDF links subclass Logit
        if not isinstance(model.family, Binomial) or type(model.family.link) is not LogitLink:
            raise ModelImportError(f"the fitted GLM has family {type(model.family).__name__} "
                                   f"with link {type(model.family.link).__name__}; calcbuilder "
                                   "imports logistic regression (Binomial, logit link)")
    elif type(model) is not Logit:
        raise ModelImportError(f"cannot import {type(model).__name__} results; calcbuilder "
                               "imports smf.logit(...).fit() and smf.glm(..., family="
                               "Binomial()).fit() results")
    retvals = getattr(result, "mle_retvals", None) or {}
    if not bool(getattr(result, "converged", retvals.get("converged", True))):
        raise ModelImportError("the fit did not converge, so its coefficients are not the "
                               "model's estimates; refit until it converges (more iterations, "
                               "rescaled inputs) and import that")
    for name in ("offset", "exposure"):
        if getattr(model, name, None) is not None:
            raise ModelImportError(f"the model was fitted with an {name}; a calculator has no "
                                   f"{name}, so its risks would differ")
    data = model.data
    design = (getattr(data, "design_info", None) or getattr(data, "model_spec", None)
              or getattr(getattr(data, "orig_exog", None), "design_info", None))
    if not isinstance(design, DesignInfo):
        raise ModelImportError("the result was not fitted from a patsy formula (use "
                               "statsmodels.formula.api with a formula such as "
                               "'outcome ~ age + C(asa)')")
    return design


def _factor(factor: Any, design: Any, contrasts: Any, desc: InputsDescription) -> Factor | str:
    info = design.factor_infos[factor]
    if not hasattr(factor, "code"):
        return f"factor {factor!r} is not a formula expression"
    if info.type == "categorical":
        return categorical_factor(factor, info, contrasts[factor], desc)
    parsed = numeric_factor(factor, desc)
    if not isinstance(parsed, str) and info.num_columns != 1:
        return f"{factor.code!r} makes {info.num_columns} columns"
    return parsed


def _plan_terms(result: Any, design: Any, desc: InputsDescription,
                problems: Problems) -> tuple[Column | None, list[PlannedTerm]]:
    names = list(result.params.index)
    position = {n: i for i, n in enumerate(names)}
    params = [float(v) for v in result.params]
    intercept: Column | None = None
    main: dict[Any, tuple[Factor, Any]] = {}
    terms: list[PlannedTerm] = []
    for term in design.terms:
        where, codings = f"term {term.name()!r}", design.term_codings[term]
        if not term.factors:
            intercept = Column(params[position["Intercept"]], position["Intercept"])
            continue
        sub = codings[0]
        if len(codings) != 1 or len(sub.factors) > 2:
            problems.add(where, "products of more than two factors, or interactions without "
                         "their main effects, cannot be represented")
            continue
        made = [_factor(f, design, sub.contrast_matrices, desc) for f in sub.factors]
        bad = [m for m in made if isinstance(m, str)]
        for message in bad:
            problems.add(where, message)
        if bad:
            continue
        facs = [m for m in made if isinstance(m, Factor)]
        if len(facs) == 1:
            main[sub.factors[0]] = (facs[0], sub.contrast_matrices.get(sub.factors[0]))
            cols = [Column(params[position[p]], position[p]) for p in facs[0].pieces]
            terms.append(PlannedTerm(facs[0].name, facs[0].input, facs[0].transform, cols))
        else:
            product = _product(sub, facs, main, where=where, problems=problems,
                               columns=(position, params))
            if product is not None:
                terms.append(product)
    if intercept is None:
        problems.add("formula", "the model has no intercept (a formula with '- 1' or '0 +'); "
                     "a calculator's logistic model needs one")
    return intercept, terms


def _product(sub: Any, facs: list[Factor], main: dict[Any, tuple[Factor, Any]], *,
             where: str, problems: Problems,
             columns: tuple[dict[str, int], list[float]]) -> PlannedTerm | None:
    position, params = columns
    for factor, fac in zip(sub.factors, facs, strict=True):
        own = main.get(factor)
        same = own is not None and own[0].pieces == fac.pieces
        if not same:
            problems.add(where, f"{factor.code!r} must also be a term of its own, coded the same "
                         "way (a calculator product combines two terms)")
            return None
    a, b = facs
    names = [f"{pa}:{pb}" for pa in a.pieces for pb in b.pieces]  # row-major, as FORMAT.md
    missing = [n for n in names if n not in position]
    if missing:  # pragma: no cover - patsy names product columns this way
        problems.add(where, f"cannot find the columns {', '.join(missing)}")
        return None
    cols = [Column(params[position[n]], position[n]) for n in names]
    return PlannedTerm(f"{a.name}:{b.name}", None, {"type": "product", "of": [a.name, b.name]},
                       cols)


def _check_yes_no(result: Any, terms: list[PlannedTerm], desc: InputsDescription,
                  problems: Problems) -> None:
    """A yes/no input read as a number must hold only 0 and 1 in the training data."""
    frame = result.model.data.frame
    for term in terms:
        spec = desc.input_by_id(term.input) if term.input else None
        column = desc.columns.get(term.input or "", term.input or "")
        if spec is None or spec.kind != "yes_no" or column not in frame.columns:
            continue
        values = frame[column].dropna()
        if not values.isin([0, 1]).all():
            odd = sorted(set(values[~values.isin([0, 1])].tolist()), key=str)[:3]
            problems.add(f"term {term.name!r}", f"yes/no input {spec.id!r} reads column "
                         f"{column!r}, which holds {', '.join(map(repr, odd))} besides 0 and 1")


def _vector_value(spec: InputSpec, value: Any) -> Any:
    if spec.kind == "number":
        return float(value)
    if spec.kind == "yes_no":
        if isinstance(value, bool) or value in (0, 1):
            return bool(value)
        raise ModelImportError(f"input {spec.id!r} is yes/no but its column holds {value!r}; "
                               "code it 0/1 or True/False")
    return category_text(value)


def _test_vectors(result: Any, desc: InputsDescription, n_vectors: int) -> list[dict[str, Any]]:
    import numpy as np

    frame = result.model.data.frame
    columns = {s.id: desc.columns.get(s.id, s.id) for s in desc.inputs}
    present = {i: c for i, c in columns.items() if c in frame.columns}
    complete = frame.loc[:, list(dict.fromkeys(present.values()))].notna().all(axis=1)
    positions = np.flatnonzero(complete.to_numpy())
    if len(positions) == 0:
        raise ModelImportError("no complete row of the training data to make test vectors from")
    picks = sorted(set(np.linspace(0, len(positions) - 1, n_vectors).round().astype(int)))
    chosen = frame.iloc[positions[picks]]
    risks = np.asarray(result.predict(chosen), dtype=float)
    vectors = []
    for position, (_, row), risk in zip(positions[picks], chosen.iterrows(), risks,
                                        strict=True):
        values = {i: _vector_value(desc.input_by_id(i), row[c])  # type: ignore[arg-type]
                  for i, c in present.items()}
        vectors.append({"name": f"training data row {position}", "values": values,
                        "risk": float(risk)})
    return vectors


def fitted_document(result: Any, desc: InputsDescription, *,
                    n_vectors: int = 8) -> dict[str, Any]:
    """The calculator document (FORMAT.md) for a fitted statsmodels result and a description.

    Parameters
    ----------
    result : statsmodels results
        From ``smf.logit(...).fit()`` or ``smf.glm(..., family=Binomial()).fit()``.
    desc : InputsDescription
        About, inputs (``column`` = the data column), decision, cautions.
    n_vectors : int, default 8
        Training rows turned into test vectors (risks from ``result.predict``).

    Raises
    ------
    ModelImportError
        The result or one of its terms cannot be represented (every term named).
    """
    design = _check_result(result)
    problems = Problems()
    intercept, terms = _plan_terms(result, design, desc, problems)
    _check_yes_no(result, terms, desc, problems)
    raise_problems(problems, "the fitted model cannot be imported")
    assert intercept is not None  # recorded as a problem otherwise
    covariance = result.cov_params()
    model = assemble_model(intercept, terms, [[float(v) for v in row]
                                              for row in covariance.to_numpy()])
    return desc.document(model, test_vectors=_test_vectors(result, desc, n_vectors))


def import_fitted(result: Any, inputs: str | Path | InputsDescription,
                  output: str | Path | None = None, *, n_vectors: int = 8) -> Calculator:
    """Import a fitted statsmodels logistic regression; write it if ``output`` is given.

    Parameters
    ----------
    result : statsmodels results
        See :func:`fitted_document`.
    inputs : path or InputsDescription
        The inputs description (TOML file or already loaded).
    output : path, optional
        Where to write the calculator file (atomically; nothing is written on failure).
    n_vectors : int, default 8
        Training rows turned into test vectors.

    Returns
    -------
    Calculator
        The validated calculator (its test vectors re-scored against ``result.predict``).
    """
    desc = inputs if isinstance(inputs, InputsDescription) else load_description(inputs)
    calc = validate(fitted_document(result, desc, n_vectors=n_vectors), "the fitted model")
    if output is not None:
        write_calculator(calc, output)
    return calc
