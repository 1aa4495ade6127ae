"""Import a logistic regression from a PMML 4.x document (with an inputs description).

The XML is parsed with ``defusedxml.ElementTree`` only, with document types,
entities and external references forbidden: a file declaring any of them is
refused before anything is read. The root must be ``PMML`` in one of the
namespaces ``http://www.dmg.org/PMML-4_0`` ... ``PMML-4_4``.

Supported subset (details in ``docs/importing.md`` and the private modules
``_pmml_models``, ``_pmml_read`` and ``_pmml_terms``, which name the standard
elements they rely on):

* one model element, ``RegressionModel`` (classification, ``logit``
  normalisation, binary) or ``GeneralRegressionModel`` (``generalizedLinear``,
  ``logit`` link, binomial; its ``PCovMatrix`` becomes the covariance);
* a ``DataDictionary``; ``DerivedField`` ln(x), ln(x + c), ln(x - c) and sqrt(x)
  in ``TransformationDictionary`` or ``LocalTransformations``;
* ``MiningSchema`` with one target field; ``Targets`` without rescaling;
* ``Header``, ``MiningBuildTask``, ``Extension``, ``Output``, ``ModelStats``,
  ``ModelExplanation`` and ``ModelVerification`` are skipped (they do not
  change the scores).

Everything else (other models, normalisations, links, functions, offsets,
several targets, any other element or expression) is refused with the element
named. Fields map to inputs through the description's ``column`` (default: the
input id); which target category is the event is stated there (``[pmml] event``).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any
from xml.etree.ElementTree import Element

from ..document import Calculator
from ._common import (
    NO_COVARIANCE_CAUTION,
    ModelImportError,
    assemble_model,
    raise_problems,
    validate,
    write_calculator,
)
from ._pmml_models import ModelColumns, general_regression, regression_model
from ._pmml_read import Reader, data_dictionary, derived_fields, mining_schema
from ._pmml_terms import FieldInfo, SourceColumn, build_terms
from .inputs_toml import InputsDescription, load_description

__all__ = ["NAMESPACES", "import_pmml", "parse_pmml", "pmml_document", "read_pmml"]

NAMESPACES = {f"http://www.dmg.org/PMML-4_{minor}": f"4.{minor}" for minor in range(5)}
MAX_BYTES = 50 * 1024 * 1024
MODEL_ELEMENTS = (
    "AnomalyDetectionModel", "AssociationModel", "BayesianNetworkModel", "BaselineModel",
    "ClusteringModel", "GaussianProcessModel", "GeneralRegressionModel", "MiningModel",
    "NaiveBayesModel", "NearestNeighborModel", "NeuralNetwork", "RegressionModel",
    "RuleSetModel", "SequenceModel", "Scorecard", "SupportVectorMachineModel", "TextModel",
    "TimeSeriesModel", "TreeModel",
)
SUPPORTED_MODELS = ("RegressionModel", "GeneralRegressionModel")
_TOP = ("Header", "MiningBuildTask", "DataDictionary", "TransformationDictionary",
        *MODEL_ELEMENTS)


def read_pmml(path: str | Path) -> Element:
    """Read and safely parse a PMML file (see :func:`parse_pmml`)."""
    p = Path(path)
    try:
        if p.stat().st_size > MAX_BYTES:
            raise ModelImportError(f"PMML file {p}: larger than {MAX_BYTES} bytes")
        data = p.read_bytes()
    except FileNotFoundError:
        raise ModelImportError(f"PMML file {p} does not exist") from None
    except OSError as exc:
        raise ModelImportError(f"PMML file {p} cannot be read ({exc.strerror or exc})") from None
    return parse_pmml(data, str(p))


def parse_pmml(data: bytes, source: str) -> Element:
    """Parse XML with defusedxml, refusing DTDs, entities and external references.

    Raises
    ------
    ModelImportError
        The text is not well-formed XML or declares any of the above.
    """
    from defusedxml import DTDForbidden, EntitiesForbidden, ExternalReferenceForbidden
    from defusedxml.ElementTree import ParseError, fromstring

    safety = "for safety, document types and entities are never read, and PMML needs none"
    try:
        root: Element = fromstring(data, forbid_dtd=True, forbid_entities=True,
                                   forbid_external=True)
    except DTDForbidden:
        raise ModelImportError(f"{source}: refused: the file declares a document type "
                               f"(<!DOCTYPE ...>); {safety}") from None
    except EntitiesForbidden:
        raise ModelImportError(f"{source}: refused: the file declares an entity "
                               f"(<!ENTITY ...>); {safety}") from None
    except ExternalReferenceForbidden:
        raise ModelImportError(f"{source}: refused: the file refers to an external "
                               f"resource; {safety}") from None
    except ParseError as exc:
        raise ModelImportError(f"{source} is not well-formed XML ({exc})") from None
    except (LookupError, ValueError) as exc:  # e.g. an unknown encoding in the XML declaration
        raise ModelImportError(
            f"{source} cannot be read as XML ({exc}); save it as UTF-8"
        ) from None
    return root


def _namespace(root: Element, source: str) -> str:
    tag = str(root.tag)
    ns, _, local = tag[1:].partition("}") if tag.startswith("{") else ("", "", tag)
    if local != "PMML" or ns not in NAMESPACES:
        raise ModelImportError(
            f"{source}: not a PMML 4.0-4.4 document: the root element is {tag!r}; expected "
            "PMML in a namespace http://www.dmg.org/PMML-4_0 ... http://www.dmg.org/PMML-4_4")
    version = root.get("version", NAMESPACES[ns])
    if not version.startswith("4."):
        raise ModelImportError(f"{source}: PMML version {version!r} is not supported (4.0-4.4)")
    return ns


def _shared_parts(r: Reader, model: Element, fields: dict[str, FieldInfo]) -> None:
    """LocalTransformations (derived fields) and Targets (no rescaling) of the model.

    The model readers report unsupported children; this pass only reads these two.
    """
    for child in model:
        tag = r.tag(child) if isinstance(child.tag, str) else ""
        if tag == "LocalTransformations":
            derived_fields(r, child, tag, fields)
        elif tag == "Targets":
            for _, target in r.children(child, tag, ("Target",)):
                r.refuse_attributes(target, "Targets/Target", ("rescaleConstant",
                                    "rescaleFactor", "castInteger", "min", "max"))


def _model_element(r: Reader, root: Element) -> tuple[Element | None, dict[str, FieldInfo]]:
    fields: dict[str, FieldInfo] = {}
    models: list[Element] = []
    dictionaries = 0
    for tag, child in r.children(root, "PMML", _TOP):
        if tag == "DataDictionary":
            dictionaries += 1
            fields.update(data_dictionary(r, child))
        elif tag == "TransformationDictionary":
            derived_fields(r, child, tag, fields)
        elif tag in MODEL_ELEMENTS:
            models.append(child)
            if tag not in SUPPORTED_MODELS:
                r.problems.add(tag, f"<{tag}> is not supported; calcbuilder imports "
                               "RegressionModel and GeneralRegressionModel (logistic)")
    if dictionaries != 1:
        r.problems.add("PMML", f"needs exactly one DataDictionary (got {dictionaries})")
    if len(models) != 1:
        r.problems.add("PMML", f"needs exactly one model element (got {len(models)})")
    return (models[0] if len(models) == 1 else None), fields


def _check_fields(r: Reader, columns: list[SourceColumn], fields: dict[str, FieldInfo],
                  active: set[str]) -> list[SourceColumn]:
    good = []
    for col in columns:
        bad = [a.field for a in col.atoms if a.field not in fields]
        bad += [fields[a.field].data_field for a in col.atoms if a.field in fields
                and fields[a.field].data_field not in active]
        for name in bad:
            r.problems.add(col.where, f"field {name!r} is not an active field of the model "
                           "(DataField or DerivedField listed in the MiningSchema)")
        if not bad:
            good.append(col)
    return good


def pmml_document(root: Element, desc: InputsDescription, source: str) -> dict[str, Any]:
    """The calculator document (FORMAT.md) for a parsed PMML document and a description.

    Raises
    ------
    ModelImportError
        Listing every problem found, each naming the PMML element.
    """
    r = Reader(source, _namespace(root, source))
    model, fields = _model_element(r, root)
    columns: ModelColumns | None = None
    active: set[str] = set()
    if model is not None and r.tag(model) in SUPPORTED_MODELS:
        where = r.tag(model)
        _shared_parts(r, model, fields)
        target, active = mining_schema(r, model, where, fields)
        if where == "RegressionModel":
            columns = regression_model(r, model, desc.pmml_event)
        else:
            columns = general_regression(r, model, desc.pmml_event)
        _check_target(r, target, fields, desc.pmml_event)
    desc.require_vectors(r.problems)
    terms = []
    if columns is not None and columns.complete:  # else products would report missing terms
        kept = _check_fields(r, columns.columns, fields, active)
        terms = build_terms(kept, fields, desc, r.problems)
    raise_problems(r.problems, f"PMML file {source} cannot be imported")
    assert columns is not None  # every None path recorded a problem
    doc_model = assemble_model(columns.intercept, terms, columns.covariance)
    cautions = [] if columns.covariance is not None else [
        NO_COVARIANCE_CAUTION.format(source="a PMML model without a PCovMatrix")]
    return desc.document(doc_model, extra_cautions=cautions)


def _check_target(r: Reader, target: str | None, fields: dict[str, FieldInfo],
                  event: str | None) -> None:
    if target is None or event is None:
        return
    values = fields[target].values if target in fields else ()
    if values and event not in values:
        r.problems.add(f"DataField {target!r}", f"the event category {event!r} ([pmml] event) "
                       f"is not one of its values ({', '.join(values)})")


def import_pmml(pmml: str | Path, inputs: str | Path,
                output: str | Path | None = None) -> Calculator:
    """Import a PMML logistic regression with its inputs description.

    Parameters
    ----------
    pmml : path
        The PMML 4.x document.
    inputs : path
        The inputs description (TOML): about, inputs, decision, cautions, test
        vectors and ``[pmml] event``.
    output : path, optional
        Where to write the calculator file (atomically; nothing is written on failure).

    Returns
    -------
    Calculator
        The validated calculator (its test vectors re-scored).

    Raises
    ------
    ModelImportError
        Any problem with the PMML, the description or the resulting calculator.
    """
    desc = load_description(inputs)
    root = read_pmml(pmml)
    calc = validate(pmml_document(root, desc, str(pmml)), str(pmml))
    if output is not None:
        write_calculator(calc, output)
    return calc
