"""The two supported PMML model elements, read into columns (private to the PMML importer).

Standard elements relied on (PMML 4.0-4.4, recalled from memory of the standard):

``RegressionModel`` with ``functionName="classification"`` and
``normalizationMethod="logit"``: each ``RegressionTable`` (``intercept``,
``targetCategory``) gives ``y = intercept + sum(coefficient * predictor)`` from
``NumericPredictor`` (``name``, ``exponent``, ``coefficient``: ``x ** exponent``),
``CategoricalPredictor`` (``name``, ``value``, ``coefficient``: 1 when the field
equals the value) and ``PredictorTerm`` (``coefficient`` and ``FieldRef``
children: the product of the fields). With ``logit`` normalisation a table's
category gets ``1 / (1 + exp(-y))``, and the last category gets one minus the
others. Supported: the event's table first, optionally followed by one empty
table (intercept 0, no predictors) for the other category.

``GeneralRegressionModel`` with ``modelType="generalizedLinear"`` and
``linkFunction="logit"`` (``distribution`` binomial): ``ParameterList/Parameter``
names the parameters; ``FactorList`` / ``CovariateList`` ``Predictor`` elements
name categorical and continuous fields; ``PPMatrix/PPCell`` (``predictorName``,
``parameterName``, ``value``) says what each parameter multiplies: a factor
cell is 1 when the field equals ``value``, a covariate cell is the field raised
to the power ``value``, several cells multiply; a parameter without cells is
the intercept. ``ParamMatrix/PCell`` (``parameterName``, ``beta``) gives the
coefficients and ``PCovMatrix/PCovCell`` (``pRow``, ``pCol``, ``value``) their
covariance. For ``functionName="classification"`` the probability is that of
the category other than ``targetReferenceCategory`` (or of the PCells'
``targetCategory``), which must be the description's ``[pmml] event``.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from xml.etree.ElementTree import Element

from ._common import Column
from ._pmml_read import Reader
from ._pmml_terms import Atom, SourceColumn

__all__ = ["ModelColumns", "general_regression", "regression_model"]

SHARED = ("MiningSchema", "Targets", "LocalTransformations")
_TABLE_ITEMS = ("NumericPredictor", "CategoricalPredictor", "PredictorTerm")
_GRM_PARTS = ("ParameterList", "FactorList", "CovariateList", "PPMatrix", "PCovMatrix",
              "ParamMatrix")
_GRM_REFUSED = ("offsetVariable", "offsetValue", "trialsVariable", "trialsValue",
                "linkParameter", "cumulativeLink", "distParameter", "baselineStrataVariable",
                "endTimeVariable", "startTimeVariable", "subjectIDVariable", "statusVariable")


@dataclass(frozen=True)
class ModelColumns:
    """A PMML model read into an intercept, its columns and (optionally) their covariance."""

    intercept: Column
    columns: list[SourceColumn]
    covariance: list[list[float]] | None = None
    complete: bool = True  # False when a column could not be read (its problem is recorded)


def _event_missing(r: Reader, where: str, hint: str) -> None:
    r.problems.add(where, f"the inputs description needs [pmml] event = the target category "
                   f"that means the event ({hint})")


# -- RegressionModel -------------------------------------------------------------------------

def regression_model(r: Reader, el: Element, event: str | None) -> ModelColumns | None:
    """Read a RegressionModel (module docstring); None after recording problems."""
    where = "RegressionModel"
    r.require(el, "functionName", where, ("classification",))
    r.require(el, "normalizationMethod", where, ("logit",), default="none")
    r.require(el, "isScorable", where, ("true",), default="true")
    tables = [c for tag, c in r.children(el, where, (*SHARED, "RegressionTable"))
              if tag == "RegressionTable"]
    if not tables:
        r.problems.add(where, "has no RegressionTable")
        return None
    for k, extra in enumerate(tables[1:], start=2):
        items = list(r.children(extra, f"RegressionTable[{k}]", _TABLE_ITEMS))
        if k > 2 or items or r.number(extra, "intercept", f"RegressionTable[{k}]") != 0:
            r.problems.add(f"RegressionTable[{k}]", "only the first RegressionTable may have "
                           "coefficients; calcbuilder imports binary logistic models (the "
                           "event's table, then optionally an empty one with intercept 0)")
        elif event is not None and extra.get("targetCategory") == event:
            r.problems.add(f"RegressionTable[{k}]", f"targetCategory={event!r} is the event; "
                           "the event's coefficients must be in the first RegressionTable")
    category = tables[0].get("targetCategory")
    if event is None:
        _event_missing(r, "RegressionTable[1]", f"this table is for targetCategory={category!r}")
    elif category != event:
        r.problems.add("RegressionTable[1]", f"targetCategory={category!r} is not the event "
                       f"category {event!r} given by [pmml] event; the first RegressionTable "
                       "must hold the event's coefficients")
    intercept = r.number(tables[0], "intercept", "RegressionTable[1]")
    read = [_table_item(r, tag, item) for tag, item in
            r.children(tables[0], "RegressionTable[1]", _TABLE_ITEMS)]
    columns = [c for c in read if c is not None]
    if intercept is None:
        return None
    return ModelColumns(Column(intercept), columns, complete=len(columns) == len(read))


def _table_item(r: Reader, tag: str, item: Element) -> SourceColumn | None:
    name = item.get("name") or ""
    if tag == "NumericPredictor":
        where = f"NumericPredictor name={name!r}"
        list(r.children(item, where, ()))
        exponent = r.number(item, "exponent", where, default=1.0)
        if exponent == 0:
            r.problems.add(where, "exponent 0 makes a constant; put it in the intercept")
            exponent = None
        atoms: tuple[Atom, ...] = (Atom(name, None, exponent or 1.0),)
    elif tag == "CategoricalPredictor":
        where = f"CategoricalPredictor name={name!r} value={item.get('value')!r}"
        list(r.children(item, where, ()))
        atoms, exponent = (Atom(name, item.get("value") or ""),), 1.0
    else:
        refs = [ref.get("field") or "" for _, ref in
                r.children(item, "PredictorTerm", ("FieldRef",))]
        where = f"PredictorTerm ({' x '.join(refs)})"
        atoms, exponent = tuple(Atom(f) for f in refs), 1.0
        if len(refs) < 2:
            r.problems.add(where, "a PredictorTerm needs two FieldRef elements")
            return None
    coefficient = r.number(item, "coefficient", where)
    if coefficient is None or exponent is None:
        return None
    return SourceColumn(atoms, coefficient, None, where)


# -- GeneralRegressionModel ------------------------------------------------------------------

def general_regression(r: Reader, el: Element, event: str | None) -> ModelColumns | None:
    """Read a GeneralRegressionModel (module docstring); None after recording problems."""
    where = "GeneralRegressionModel"
    r.require(el, "modelType", where, ("generalizedLinear",))
    function = r.require(el, "functionName", where, ("regression", "classification"))
    r.require(el, "linkFunction", where, ("logit",))
    r.require(el, "distribution", where, ("binomial",), default="binomial")
    r.require(el, "isScorable", where, ("true",), default="true")
    r.refuse_attributes(el, where, _GRM_REFUSED)
    parts: dict[str, Element] = {}
    for tag, child in r.children(el, where, (*SHARED, *_GRM_PARTS)):
        if tag in parts and tag in _GRM_PARTS:
            r.problems.add(where, f"has two {tag} elements")
        parts.setdefault(tag, child)
    missing = [p for p in ("ParameterList", "PPMatrix", "ParamMatrix") if p not in parts]
    for needed in missing:
        r.problems.add(where, f"has no {needed}")
    if missing or function is None:
        return None
    category = _grm_category(r, el, parts, function, event)
    params = _parameters(r, parts["ParameterList"])
    cells = _pp_cells(r, parts, params, category)
    betas = _betas(r, parts["ParamMatrix"], params, category)
    intercepts = [p for p in params if not cells.get(p)]
    if len(intercepts) != 1:
        r.problems.add("ParameterList", "exactly one parameter must be the intercept (no "
                       f"PPCell); got {len(intercepts)}: {', '.join(intercepts) or 'none'}")
    covariance = (_covariance(r, parts["PCovMatrix"], params) if "PCovMatrix" in parts
                  else None)
    if len(intercepts) != 1 or len(betas) != len(params):
        return None
    index = {p: i for i, p in enumerate(params)}
    columns = [SourceColumn(tuple(cells[p]), betas[p], index[p], f"Parameter {p!r}")
               for p in params if p not in intercepts]
    return ModelColumns(Column(betas[intercepts[0]], index[intercepts[0]]), columns, covariance)


def _grm_category(r: Reader, el: Element, parts: Mapping[str, Element], function: str,
                  event: str | None) -> str | None:
    """The target category the PCells may name (classification), after the event checks."""
    where = "GeneralRegressionModel"
    if function == "regression":
        if event not in (None, "1"):
            r.problems.add(where, f"functionName=\"regression\" predicts the mean of a 0/1 "
                           f"target, the probability of 1; [pmml] event {event!r} must be "
                           "\"1\" or left out")
        return None
    reference = el.get("targetReferenceCategory")
    named = {c.get("targetCategory") for c in parts["ParamMatrix"]} - {None}
    if event is None:
        _event_missing(r, where, f"targetReferenceCategory={reference!r}")
    elif reference == event:
        r.problems.add(where, f"targetReferenceCategory={reference!r} is the event; the model "
                       "must give the probability of the event")
    elif reference is None and not named:
        r.problems.add(where, "cannot tell which target category the probability is for: set "
                       "targetReferenceCategory or the PCells' targetCategory")
    return event


def _parameters(r: Reader, el: Element) -> list[str]:
    params: list[str] = []
    for _, p in r.children(el, "ParameterList", ("Parameter",)):
        name = p.get("name") or ""
        if not name or name in params:
            r.problems.add("ParameterList", f"parameter name {name!r} is empty or repeated")
        if r.number(p, "referencePoint", f"Parameter {name!r}", default=0.0) != 0:
            r.problems.add(f"Parameter {name!r}", "a non-zero referencePoint is not supported")
        params.append(name)
    return params


def _names(r: Reader, parts: Mapping[str, Element], tag: str) -> list[str]:
    if tag not in parts:
        return []
    return [p.get("name") or "" for _, p in r.children(parts[tag], tag, ("Predictor",))
            if not list(r.children(p, f"{tag}/Predictor {p.get('name')!r}", ()))]


def _pp_cells(r: Reader, parts: Mapping[str, Element], params: list[str],
              category: str | None) -> dict[str, list[Atom]]:
    factors, covariates = _names(r, parts, "FactorList"), _names(r, parts, "CovariateList")
    cells: dict[str, list[Atom]] = {}
    for _, cell in r.children(parts["PPMatrix"], "PPMatrix", ("PPCell",)):
        pred, param = cell.get("predictorName") or "", cell.get("parameterName") or ""
        value = cell.get("value") or ""
        where = f"PPCell predictorName={pred!r} parameterName={param!r}"
        if param not in params:
            r.problems.add(where, "names no Parameter of the ParameterList")
        if cell.get("targetCategory") not in (None, category):
            r.problems.add(where, f"targetCategory={cell.get('targetCategory')!r} is not the "
                           "event")
        if pred in factors:
            atom = Atom(pred, value)
        elif pred in covariates:
            exponent = r.number(cell, "value", where)
            atom = Atom(pred, None, exponent if exponent else 1.0)
            if exponent == 0:
                r.problems.add(where, "value (exponent) 0 is not supported")
        else:
            r.problems.add(where, "predictorName is in neither the FactorList nor the "
                           "CovariateList")
            continue
        if any(a.field == pred for a in cells.get(param, [])):
            r.problems.add(where, f"predictor {pred!r} appears twice in parameter {param!r}")
        cells.setdefault(param, []).append(atom)
    return cells


def _betas(r: Reader, el: Element, params: list[str], category: str | None) -> dict[str, float]:
    betas: dict[str, float] = {}
    seen: set[str] = set()
    for _, cell in r.children(el, "ParamMatrix", ("PCell",)):
        param = cell.get("parameterName") or ""
        where = f"PCell parameterName={param!r}"
        if param not in params or param in seen:
            r.problems.add(where, "names no Parameter, or a parameter already given")
            continue
        seen.add(param)
        if cell.get("targetCategory") not in (None, category):
            r.problems.add(where, f"targetCategory={cell.get('targetCategory')!r} is not the "
                           "event")
        beta = r.number(cell, "beta", where)
        if beta is not None:
            betas[param] = beta
    for param in params:
        if param not in seen:
            r.problems.add(f"Parameter {param!r}", "has no PCell (beta) in the ParamMatrix")
    return betas


def _covariance(r: Reader, el: Element, params: list[str]) -> list[list[float]] | None:
    n = len(params)
    index = {p: i for i, p in enumerate(params)}
    cov: list[list[float | None]] = [[None] * n for _ in range(n)]
    for _, cell in r.children(el, "PCovMatrix", ("PCovCell",)):
        row, col = cell.get("pRow") or "", cell.get("pCol") or ""
        where = f"PCovCell pRow={row!r} pCol={col!r}"
        value = r.number(cell, "value", where)
        if row not in index or col not in index:
            r.problems.add(where, "names no Parameter")
            continue
        i, j = index[row], index[col]
        for a, b in ((i, j), (j, i)):
            if cov[a][b] is not None and cov[a][b] != value:
                r.problems.add(where, "contradicts another PCovCell for the same pair")
            cov[a][b] = value
    missing = [(params[i], params[j]) for i in range(n) for j in range(i + 1) if cov[i][j] is None]
    if missing:
        r.problems.add("PCovMatrix", f"lacks {len(missing)} entries, e.g. pRow={missing[0][0]!r} "
                       f"pCol={missing[0][1]!r}; give every pair (one triangle is enough)")
        return None
    return [[float(v or 0.0) for v in row] for row in cov]
