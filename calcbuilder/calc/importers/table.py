"""Import a coefficient table (CSV) with an inputs description (TOML).

The table (reference: ``docs/importing.md``)::

    term,coefficient,std_error
    (Intercept),-6.24,0.61
    age,-0.018,0.004
    educ[2],0.057,0.42
    spline_age[1],0.02,
    spline_age[2],0.15,

* UTF-8 (a byte-order mark is allowed), comma-separated, a header naming the
  columns ``term``, ``coefficient`` and optionally ``std_error``, one row per
  model column. Numbers are plain decimals (``-0.5``, ``1.2e-3``); anything else
  in the coefficient column is refused with its row (the header is row 1).
* The intercept row is named ``(Intercept)``, ``intercept`` or ``const`` (any case).
* A term with one column has one row named after the term. A term with several
  columns has one row per column named ``term[label]``: the level value for
  ``levels`` (``asa[III]``), the column number from 1 for ``rcs``, ``hinges`` and
  multi-column products (``age[1]`` is x itself, ``age[2]`` the first non-linear
  column, in FORMAT.md's column order).
* Each term is explained by a ``[[terms]]`` entry of the description, or by
  default when its name is an input's ``column`` (or id): a number input is
  ``linear``, a yes/no input an ``indicator``, a choice input ``levels`` whose
  reference is the one choice without a row; ``a:b`` is the ``product`` of the
  one-column terms ``a`` and ``b``. A row no rule explains is refused.
* Standard errors are checked but not used: alone they give only a diagonal
  covariance, which misstates the uncertainty of a risk (the covariances between
  coefficients are missing), so the calculator has no covariance and a caution
  says that intervals are unavailable.
"""

from __future__ import annotations

import csv
import io
import math
import re
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..document import Calculator
from ..inputs import InputSpec
from ..problems import Problems
from ._common import (
    NO_COVARIANCE_CAUTION,
    Column,
    ModelImportError,
    PlannedTerm,
    assemble_model,
    raise_problems,
    validate,
    write_calculator,
)
from .inputs_toml import InputsDescription, TermEntry, load_description

__all__ = [
    "INTERCEPT_NAMES",
    "CoefficientRow",
    "import_table",
    "parse_coefficient_table",
    "read_coefficient_table",
    "table_document",
]

INTERCEPT_NAMES = ("(intercept)", "intercept", "const")
MAX_BYTES = 5 * 1024 * 1024
_NUMBER = re.compile(r"[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?")
_BRACKET = re.compile(r"(.+)\[([^\[\]]+)\]")
_HEADER = ("term", "coefficient", "std_error")


@dataclass(frozen=True)
class CoefficientRow:
    """One row of a coefficient table (``line`` counts the header as row 1)."""

    line: int
    term: str
    coefficient: float
    std_error: float | None = None

    @property
    def stem(self) -> str:
        """The term the row belongs to (``age`` for ``age[2]``)."""
        match = _BRACKET.fullmatch(self.term)
        return match.group(1) if match else self.term

    @property
    def label(self) -> str | None:
        """The column label in brackets, or None for a one-column term."""
        match = _BRACKET.fullmatch(self.term)
        return match.group(2) if match else None

    def where(self, source: str) -> str:
        """``COEFS.csv row 4 (term 'age')`` for messages."""
        return f"{source} row {self.line} (term {self.term!r})"


def read_coefficient_table(path: str | Path) -> list[CoefficientRow]:
    """Read and check a coefficient table; every problem is reported at once.

    Raises
    ------
    ModelImportError
        The file is unreadable, not UTF-8, or has a bad header, row or number.
    """
    p = Path(path)
    try:
        data = p.read_bytes()
    except FileNotFoundError:
        raise ModelImportError(f"coefficient table {p} does not exist") from None
    except OSError as exc:
        raise ModelImportError(f"coefficient table {p} cannot be read "
                               f"({exc.strerror or exc})") from None
    if len(data) > MAX_BYTES:
        raise ModelImportError(f"coefficient table {p}: larger than {MAX_BYTES} bytes")
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ModelImportError(f"coefficient table {p} is not UTF-8 text (byte {exc.start}); "
                               "save it as UTF-8") from None
    return parse_coefficient_table(text, str(p))


def parse_coefficient_table(text: str, source: str) -> list[CoefficientRow]:
    """Parse the text of a coefficient table (see :func:`read_coefficient_table`)."""
    problems = Problems()
    try:
        records = [r for r in csv.reader(io.StringIO(text, newline=""), strict=True)
                   if any(cell.strip() for cell in r)]
    except csv.Error as exc:
        raise ModelImportError(f"{source} is not a readable CSV table: {exc}") from None
    if not records:
        raise ModelImportError(f"{source} is empty; write a header 'term,coefficient' and "
                               "one row per coefficient")
    header = [cell.strip().lower() for cell in records[0]]
    _check_header(header, source)
    rows = [row for row in (_row(r, i + 2, header, source, problems)
                            for i, r in enumerate(records[1:])) if row is not None]
    first: dict[str, int] = {}
    for row in rows:
        if row.term in first:
            problems.add(f"{source} row {row.line}", f"term {row.term!r} appears twice "
                         f"(first at row {first[row.term]})")
        first.setdefault(row.term, row.line)
    raise_problems(problems, f"coefficient table {source} cannot be used")
    return rows


def _check_header(header: list[str], source: str) -> None:
    wanted = "the header must name the columns term, coefficient and optionally std_error"
    if len(header) == 1 and ";" in header[0]:
        raise ModelImportError(f"{source} row 1: {wanted}, separated by commas (found ';')")
    if header not in (list(_HEADER[:2]), list(_HEADER)):
        raise ModelImportError(f"{source} row 1: {wanted}, in this order (got "
                               f"{', '.join(header)})")


def _row(
    cells: list[str], line: int, header: list[str], source: str, problems: Problems
) -> CoefficientRow | None:
    where = f"{source} row {line}"
    if len(cells) != len(header):
        problems.add(where, f"has {len(cells)} cells; the header has {len(header)}")
        return None
    term = cells[0].strip()
    if not term:
        problems.add(where, "the term name is empty")
        return None
    where = f"{where} (term {term!r})"
    coefficient = _number(cells[1], where, "coefficient", problems)
    std_error = None
    if len(cells) == 3 and cells[2].strip():
        std_error = _number(cells[2], where, "std_error", problems)
        if std_error is not None and not std_error > 0:
            problems.add(where, f"std_error must be positive (got {cells[2].strip()!r})")
    if coefficient is None:
        return None
    return CoefficientRow(line, term, coefficient, std_error)


def _number(text: str, where: str, column: str, problems: Problems) -> float | None:
    cleaned = text.strip()
    if not _NUMBER.fullmatch(cleaned):
        problems.add(where, f"{column} {cleaned!r} is not a number (write a plain decimal "
                     "such as -0.0183 or 1.2e-3)")
        return None
    value = float(cleaned)
    if math.isinf(value):
        problems.add(where, f"{column} {cleaned!r} is too large for a number")
        return None
    return value


# -- mapping rows to terms -------------------------------------------------------------------

def _stems(rows: list[CoefficientRow]) -> dict[str, list[CoefficientRow]]:
    groups: dict[str, list[CoefficientRow]] = {}
    for row in rows:
        groups.setdefault(row.stem, []).append(row)
    return groups


def _default_entry(stem: str, desc: InputsDescription) -> TermEntry | None:
    spec = desc.input_named(stem)
    if spec is None:
        return None
    transform: dict[str, Any] = {
        "number": {"type": "linear"}, "yes_no": {"type": "indicator"},
        "choice": {"type": "levels"},
    }[spec.kind]
    return TermEntry(stem, spec.id, transform, None, f"default for input {spec.id!r}")


def _labels(entry: TermEntry, spec: InputSpec | None, group: list[CoefficientRow],
            counts: Mapping[str, int]) -> list[str | None] | str:
    """The expected column labels of a term, or a message saying why there are none."""
    t = entry.transform
    kind = t["type"]
    if kind in ("rcs", "hinges"):
        knots = t.get("knots")
        if not isinstance(knots, list) or not knots:
            return f"{kind} needs a list of knots"
        n = len(knots) - 1 if kind == "rcs" else len(knots) + 1
        return [str(i) for i in range(1, n + 1)]
    if kind == "levels":
        return _level_labels(entry, spec, group)
    if kind == "product":
        of = t.get("of")
        if not (isinstance(of, list) and len(of) == 2 and all(o in counts for o in of)):
            return f"a product needs `of` = two terms of the table (got {of!r})"
        n = counts[of[0]] * counts[of[1]]
        return [None] if n == 1 else [str(i) for i in range(1, n + 1)]
    return [None]


def _level_labels(entry: TermEntry, spec: InputSpec | None,
                  group: list[CoefficientRow]) -> list[str | None] | str:
    t = entry.transform
    if spec is None or spec.kind != "choice":
        return "a levels term needs a choice input"
    choices = [c.value for c in spec.choices]
    if "levels" in t:
        return list(t["levels"]) if isinstance(t["levels"], list) else "levels must be a list"
    unknown = [row.term for row in group if row.label not in choices]
    if unknown:
        return (f"{', '.join(unknown)}: not a choice of input {spec.id!r} (choices: "
                f"{', '.join(choices)})")
    reference = t.get("reference")
    if reference is None:
        named = {row.label for row in group}
        missing = [c for c in choices if c not in named]
        if len(missing) != 1:
            return (f"cannot tell the reference level of input {spec.id!r}: the choices "
                    f"without a row are {missing or 'none'}; exactly one is needed (or set "
                    "it in a [[terms]] entry)")
        reference = missing[0]
    t["reference"] = reference
    t["levels"] = [c for c in choices if c != reference]
    return list(t["levels"])


def _match(entry: TermEntry, group: list[CoefficientRow], labels: list[str | None],
           source: str, problems: Problems) -> list[Column] | None:
    by_label = {row.label: row for row in group}
    wanted = [entry.name if lab is None else f"{entry.name}[{lab}]" for lab in labels]
    extra = [row for row in group if row.label not in labels]
    missing = [w for w, lab in zip(wanted, labels, strict=True) if lab not in by_label]
    for row in extra:
        problems.add(row.where(source), f"does not match term {entry.name!r} "
                     f"({entry.transform['type']}), whose rows are {', '.join(wanted)}")
    if missing:
        problems.add(source, f"term {entry.name!r} ({entry.transform['type']}, "
                     f"{entry.path}) has no row {', '.join(missing)}")
    if extra or missing:
        return None
    return [Column(by_label[lab].coefficient) for lab in labels]


def _entry_for(stem: str, desc: InputsDescription, planned: Mapping[str, PlannedTerm],
               ) -> TermEntry | None:
    explicit = next((e for e in desc.terms if e.name == stem), None)
    if explicit is not None:
        return TermEntry(explicit.name, explicit.input, dict(explicit.transform),
                         explicit.truncate, explicit.path)
    default = _default_entry(stem, desc)
    if default is not None:
        return default
    parts = stem.split(":")
    if len(parts) == 2 and all(p in planned and len(planned[p].columns) == 1 for p in parts):
        return TermEntry(stem, None, {"type": "product", "of": parts}, None, "default product")
    return None


def _plan(rows: list[CoefficientRow], desc: InputsDescription, source: str,
          problems: Problems) -> list[PlannedTerm]:
    groups = _stems(rows)
    planned: dict[str, PlannedTerm] = {}
    order = sorted(groups, key=lambda s: ":" in s or _is_product(s, desc))  # factors first
    for stem in order:
        group = groups[stem]
        entry = _entry_for(stem, desc, planned)
        if entry is None:
            hint = ("; a:b is a product by default only when a and b are one-column terms "
                    "of the table" if ":" in stem else "")
            problems.add(group[0].where(source), f"term {stem!r} is not explained: no "
                         f"[[terms]] entry of {desc.source} names it and no input has it "
                         f"as its column or id{hint}")
            continue
        spec = desc.input_by_id(entry.input) if entry.input is not None else None
        counts = {name: len(t.columns) for name, t in planned.items()}
        labels = _labels(entry, spec, group, counts)
        if isinstance(labels, str):
            problems.add(group[0].where(source), f"term {stem!r} ({entry.path}): {labels}")
            continue
        columns = _match(entry, group, labels, source, problems)
        if columns is not None:
            planned[stem] = PlannedTerm(stem, entry.input, dict(entry.transform), columns,
                                        dict(entry.truncate) if entry.truncate else None)
    for entry in desc.terms:
        if entry.name not in groups:
            problems.add(entry.path, f"term {entry.name!r} has no row in {source}")
    return [planned[s] for s in groups if s in planned]


def _is_product(stem: str, desc: InputsDescription) -> bool:
    return any(e.name == stem and e.transform.get("type") == "product" for e in desc.terms)


def table_document(rows: list[CoefficientRow], desc: InputsDescription,
                   source: str) -> dict[str, object]:
    """The calculator document (FORMAT.md) for a coefficient table and a description.

    Raises
    ------
    ModelImportError
        No or several intercept rows, or rows that no term explains or that do not
        match their term's columns (every problem listed).
    """
    problems = Problems()
    intercepts = [r for r in rows if r.term.lower() in INTERCEPT_NAMES]
    if not intercepts:
        problems.add(source, "has no intercept row; name it (Intercept), intercept or const")
    for extra in intercepts[1:]:
        problems.add(extra.where(source), f"a second intercept row (the first is row "
                     f"{intercepts[0].line})")
    terms = _plan([r for r in rows if r not in intercepts], desc, source, problems)
    desc.require_vectors(problems)
    raise_problems(problems, f"coefficient table {source} cannot be imported")
    model = assemble_model(Column(intercepts[0].coefficient), terms)
    caution = NO_COVARIANCE_CAUTION.format(source="a coefficient table")
    return desc.document(model, extra_cautions=[caution])


def import_table(coefficients: str | Path, inputs: str | Path,
                 output: str | Path | None = None) -> Calculator:
    """Import a coefficient table with its inputs description; write it if ``output`` is given.

    Parameters
    ----------
    coefficients : path
        The coefficient table (CSV).
    inputs : path
        The inputs description (TOML, :mod:`calcbuilder.calc.importers.inputs_toml`).
    output : path, optional
        Where to write the calculator file (atomically; nothing is written on failure).

    Returns
    -------
    Calculator
        The validated calculator (its test vectors re-scored).

    Raises
    ------
    ModelImportError
        Any problem with the table, the description or the resulting calculator.
    """
    desc = load_description(inputs)
    rows = read_coefficient_table(coefficients)
    calc = validate(table_document(rows, desc, str(coefficients)), str(coefficients))
    if output is not None:
        write_calculator(calc, output)
    return calc
