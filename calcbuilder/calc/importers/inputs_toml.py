"""The inputs description: everything a calculator needs besides the coefficients (TOML).

The TOML mirrors FORMAT.md section by section, so a description reads like the
calculator file it becomes (reference with a full example: ``docs/importing.md``)::

    [about]            # FORMAT.md "about" fields; dates as TOML dates or "YYYY-MM-DD"
    [[inputs]]         # FORMAT.md input fields, plus `column` (see below)
    [decision]         # FORMAT.md "decision"
    cautions = [...]   # FORMAT.md "cautions"
    [[test_vectors]]   # name, values, risk: risks computed by the original software
    [[terms]]          # coefficient tables only: table term -> input + transform
    [pmml]             # PMML only: event = the target category that means the event

Keys that are not FORMAT.md's:

* ``inputs[].column``: the name the model source uses for the input (a table's
  term name, a PMML field, a data frame column); default: the input id.
* ``terms``: for a coefficient table whose term names are not simply input ids
  (see :mod:`calcbuilder.calc.importers.table`).
* ``pmml.event``: which target category is the event (see
  :mod:`calcbuilder.calc.importers.pmml`).

Unknown keys are refused with their path (``inputs[2].unti``), positions counted
from 0 as in the calculator file's own messages. Values are checked when the
calculator is assembled (the same checks as loading a calculator file), except
the inputs, which are checked here because the importers need their kinds.
"""

from __future__ import annotations

import datetime as dt
import difflib
import tomllib
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..inputs import InputSpec, parse_inputs
from ..problems import Problems, join
from ._common import ModelImportError, raise_problems

__all__ = [
    "ABOUT_KEYS",
    "INPUT_KEYS",
    "TRANSFORM_KEYS",
    "InputsDescription",
    "TermEntry",
    "load_description",
    "parse_description",
]

MAX_BYTES = 2 * 1024 * 1024
MIN_VECTORS = 5
TOP_KEYS = ("about", "inputs", "decision", "cautions", "test_vectors", "terms", "pmml")
ABOUT_KEYS = ("title", "version", "intended_use", "population", "outcome", "horizon",
              "exclusions", "authors", "organisation", "contact", "released", "review_by",
              "references", "synthetic")
INPUT_KEYS = ("id", "column", "label", "kind", "unit", "alt_units", "limits", "developed",
              "decimals", "required", "group", "help", "choices")
DECISION_KEYS = ("default_threshold", "reasonable_range", "rationale", "bands")
TRANSFORM_KEYS: dict[str, tuple[str, ...]] = {
    "linear": (), "log": ("shift",), "sqrt": (), "power": ("exponent",), "rcs": ("knots",),
    "hinges": ("knots",), "indicator": ("level",), "levels": ("reference", "levels"),
    "product": ("of",),
}
_NESTED = {  # (section key, sub key) -> allowed keys of each entry
    "alt_units": ("unit", "factor", "offset"), "limits": ("low", "high"),
    "developed": ("low", "high"), "choices": ("value", "label"),
}


@dataclass(frozen=True)
class TermEntry:
    """One ``[[terms]]`` entry: a coefficient-table term and how it enters the model."""

    name: str
    input: str | None
    transform: dict[str, Any]
    truncate: Mapping[str, Any] | None
    path: str


@dataclass(frozen=True)
class InputsDescription:
    """A checked inputs description (build with :func:`load_description`)."""

    source: str
    about: Mapping[str, Any]
    inputs: tuple[InputSpec, ...]
    columns: Mapping[str, str]
    decision: Mapping[str, Any]
    cautions: tuple[str, ...]
    test_vectors: tuple[Mapping[str, Any], ...]
    terms: tuple[TermEntry, ...] = ()
    pmml_event: str | None = None

    def require_vectors(self, problems: Problems) -> None:
        """Record a problem unless the description gives enough test vectors."""
        if len(self.test_vectors) < MIN_VECTORS:
            problems.add(self.source, f"needs at least {MIN_VECTORS} [[test_vectors]], each "
                         "with the risk the original analysis software computed for its "
                         f"values (got {len(self.test_vectors)}); they prove the import "
                         "reproduces the model")

    def input_named(self, name: str) -> InputSpec | None:
        """The input whose ``column`` (or, without one, whose id) is ``name``."""
        for spec in self.inputs:
            if self.columns.get(spec.id, spec.id) == name:
                return spec
        return None

    def input_by_id(self, input_id: str) -> InputSpec | None:
        """The input with this id, or None."""
        return next((s for s in self.inputs if s.id == input_id), None)

    def document(
        self,
        model: Mapping[str, Any],
        *,
        extra_cautions: Iterable[str] = (),
        test_vectors: Iterable[Mapping[str, Any]] = (),
    ) -> dict[str, Any]:
        """The calculator document (FORMAT.md) with this description and ``model``."""
        vectors = [dict(v) for v in self.test_vectors] + [dict(v) for v in test_vectors]
        return {
            "format": "calcbuilder-calculator",
            "format_version": 1,
            "about": dict(self.about),
            "inputs": [spec.to_dict() for spec in self.inputs],
            "model": dict(model),
            "evidence": [],
            "decision": dict(self.decision),
            "cautions": [*self.cautions, *extra_cautions],
            "test_vectors": vectors,
        }


def load_description(path: str | Path) -> InputsDescription:
    """Read and check an inputs description TOML file.

    Raises
    ------
    ModelImportError
        The file cannot be read or parsed, or has problems (all listed with their paths).
    """
    p = Path(path)
    try:
        if p.stat().st_size > MAX_BYTES:
            raise ModelImportError(f"inputs description {p}: larger than {MAX_BYTES} bytes")
        text = p.read_bytes().decode("utf-8-sig")
    except FileNotFoundError:
        raise ModelImportError(f"inputs description {p} does not exist") from None
    except UnicodeDecodeError as exc:
        raise ModelImportError(
            f"inputs description {p} is not UTF-8 text (byte {exc.start}); save it as UTF-8"
        ) from None
    except OSError as exc:
        raise ModelImportError(
            f"inputs description {p} cannot be read ({exc.strerror or exc})"
        ) from None
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ModelImportError(f"inputs description {p} is not valid TOML: {exc}") from None
    return parse_description(raw, str(p))


def parse_description(raw: Mapping[str, Any], source: str) -> InputsDescription:
    """Check a parsed inputs description; ``source`` names it in messages.

    Raises
    ------
    ModelImportError
        Listing every problem with its key path.
    """
    problems = Problems()
    _keys(raw, TOP_KEYS, "", problems)
    about = _about(_table(raw, "about", problems, required=True), problems)
    inputs, columns = _inputs(raw.get("inputs"), problems)
    decision = _table(raw, "decision", problems, required=True)
    _keys(decision, DECISION_KEYS, "decision", problems)
    for i, band in enumerate(_entries(decision.get("bands"), "decision.bands", problems)):
        _keys(band, ("label", "upper"), join("decision.bands", i), problems)
    cautions = raw.get("cautions", [])
    if not isinstance(cautions, list) or not all(isinstance(c, str) for c in cautions):
        problems.add("cautions", "must be a list of texts")
        cautions = []
    vectors = _entries(raw.get("test_vectors"), "test_vectors", problems)
    for i, vec in enumerate(vectors):
        _keys(vec, ("name", "values", "risk"), join("test_vectors", i), problems)
    terms = _terms(raw.get("terms"), problems)
    pmml = _table(raw, "pmml", problems)
    _keys(pmml, ("event",), "pmml", problems)
    event = pmml.get("event")
    if event is not None and (not isinstance(event, str) or not event):
        problems.add("pmml.event", f"must be the category text, in quotes (got {event!r})")
    _json_ready(raw, "", problems)
    raise_problems(problems, f"inputs description {source} cannot be used")
    return InputsDescription(
        source, about, inputs, columns, dict(decision), tuple(cautions),
        tuple(dict(v) for v in vectors), terms, event if isinstance(event, str) else None,
    )


def _keys(table: Mapping[str, Any], allowed: Iterable[str], path: str, problems: Problems) -> None:
    allowed = tuple(allowed)
    for key in table:
        if key not in allowed:
            close = difflib.get_close_matches(key, allowed, n=1, cutoff=0.6)
            hint = f" (did you mean '{close[0]}'?)" if close else ""
            if path and key in TOP_KEYS:
                hint = (f" (in TOML a top-level key such as {key} must come before the "
                        "first [table] header)")
            problems.add(join(path, key), f"unknown key '{key}'{hint}; allowed here: "
                         f"{', '.join(allowed)}")


def _table(
    raw: Mapping[str, Any], key: str, problems: Problems, *, required: bool = False
) -> Mapping[str, Any]:
    value = raw.get(key)
    if value is None:
        if required:
            problems.add(key, f"required: add a [{key}] table")
        return {}
    if not isinstance(value, Mapping):
        problems.add(key, f"must be a table (got {type(value).__name__})")
        return {}
    return value


def _entries(value: Any, path: str, problems: Problems) -> list[Mapping[str, Any]]:
    """An array of tables (``[[x]]``); an absent key is an empty list."""
    if value is None:
        return []
    if not isinstance(value, list) or not all(isinstance(v, Mapping) for v in value):
        problems.add(path, f"must be an array of tables ([[{path}]] entries)")
        return []
    return value


def _about(about: Mapping[str, Any], problems: Problems) -> dict[str, Any]:
    _keys(about, ABOUT_KEYS, "about", problems)
    out = dict(about)
    for key in ("released", "review_by"):
        value = about.get(key)
        if isinstance(value, dt.datetime):
            problems.add(join("about", key), f"must be a date without a time (got {value})")
        elif isinstance(value, dt.date):
            out[key] = value.isoformat()
    return out


def _inputs(value: Any, problems: Problems) -> tuple[tuple[InputSpec, ...], dict[str, str]]:
    entries = _entries(value, "inputs", problems)
    if value is None:
        problems.add("inputs", "required: add at least one [[inputs]] entry")
    raw_inputs, columns = [], {}
    for i, entry in enumerate(entries):
        where = join("inputs", i)
        _keys(entry, INPUT_KEYS, where, problems)
        for key, allowed in _NESTED.items():
            sub = entry.get(key)
            for j, item in enumerate(sub if isinstance(sub, list) else [sub]):
                if isinstance(item, Mapping):
                    _keys(item, allowed, join(where, key) if not isinstance(sub, list)
                          else join(join(where, key), j), problems)
        column = entry.get("column")
        if column is not None and (not isinstance(column, str) or not column):
            problems.add(join(where, "column"), f"must be non-empty text (got {column!r})")
        elif isinstance(column, str) and isinstance(entry.get("id"), str):
            columns[entry["id"]] = column
        raw_inputs.append({k: v for k, v in entry.items() if k != "column"})
    specs = parse_inputs(raw_inputs, "inputs", problems) if raw_inputs else None
    _unique_columns(columns, problems)
    return (specs or ()), columns


def _unique_columns(columns: Mapping[str, str], problems: Problems) -> None:
    seen: dict[str, str] = {}
    for input_id, column in columns.items():
        if column in seen and seen[column] != input_id:
            problems.add("inputs", f"inputs {seen[column]!r} and {input_id!r} both read "
                         f"column {column!r}")
        seen.setdefault(column, input_id)


def _terms(value: Any, problems: Problems) -> tuple[TermEntry, ...]:
    out = []
    for i, entry in enumerate(_entries(value, "terms", problems)):
        where = join("terms", i)
        _keys(entry, ("name", "input", "transform", "truncate"), where, problems)
        name, transform = entry.get("name"), entry.get("transform")
        if not isinstance(name, str) or not name:
            problems.add(join(where, "name"), f"must be the table's term name (got {name!r})")
        if not isinstance(transform, Mapping) or transform.get("type") not in TRANSFORM_KEYS:
            got = transform.get("type") if isinstance(transform, Mapping) else transform
            problems.add(join(where, "transform"), "must be a table with type = one of "
                         f"{', '.join(TRANSFORM_KEYS)} (got {got!r})")
            continue
        _keys(transform, ("type", *TRANSFORM_KEYS[transform["type"]]),
              join(where, "transform"), problems)
        truncate = entry.get("truncate")
        if truncate is not None and not isinstance(truncate, Mapping):
            problems.add(join(where, "truncate"), "must be a table with low and/or high")
            truncate = None
        _keys(truncate or {}, ("low", "high"), join(where, "truncate"), problems)
        product = transform["type"] == "product"
        if product == ("input" in entry):
            problems.add(join(where, "input"), "a product term has no input" if product
                         else "required: the id of the input this term reads")
        if isinstance(name, str) and name:
            out.append(TermEntry(name, entry.get("input"), dict(transform),
                                 dict(truncate) if truncate else None, where))
    _unique_term_names(out, problems)
    return tuple(out)


def _unique_term_names(terms: list[TermEntry], problems: Problems) -> None:
    first: dict[str, str] = {}
    for term in terms:
        if term.name in first:
            problems.add(join(term.path, "name"),
                         f"duplicate term name {term.name!r} (first at {first[term.name]})")
        first.setdefault(term.name, term.path)


def _json_ready(value: Any, path: str, problems: Problems) -> None:
    """Dates and times are only allowed as about.released / about.review_by."""
    if isinstance(value, Mapping):
        for key, item in value.items():
            _json_ready(item, join(path, str(key)), problems)
    elif isinstance(value, list):
        for i, item in enumerate(value):
            _json_ready(item, join(path, i), problems)
    elif isinstance(value, dt.date | dt.time) and path not in ("about.released",
                                                                "about.review_by"):
        problems.add(path, f"must not be a TOML date or time (got {value}); write text or "
                     "a number")
