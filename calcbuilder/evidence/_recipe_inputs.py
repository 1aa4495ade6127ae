"""The ``[[inputs]]`` entries of a recipe (private to :mod:`calcbuilder.evidence.recipe`).

Each entry is split in two: the fields of the calculator file's ``inputs``
section (checked by :func:`calcbuilder.calc.inputs.parse_inputs`, so a recipe
can never describe an input the calculator file would refuse) and the recipe's
own keys (``column``, ``transform``, ``truncate``, ``yes``, ``no``), checked here.
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from typing import Any

from ..calc.inputs import InputSpec, parse_inputs
from ..calc.model import Truncate
from ..calc.numbers import format_number
from ..calc.problems import Problems
from ._recipe_read import at, check_keys, read_text, type_name
from ._recipe_transform import PlannedTerm, parse_transform, parse_truncate
from ._tokens import Token, match_key, show, token

__all__ = ["DEFAULT_NO", "DEFAULT_YES", "InputEntry", "parse_input_entries"]

CALC_KEYS = ("id", "label", "kind", "unit", "alt_units", "limits", "developed", "decimals",
             "required", "group", "help", "choices")
RECIPE_KEYS = ("column", "transform", "truncate", "yes", "no")
DEFAULT_YES: tuple[Token, ...] = (1.0, "true", "yes", "y")
DEFAULT_NO: tuple[Token, ...] = (0.0, "false", "no", "n")
_ID = re.compile(r"[a-z][a-z0-9_]*")
_PLACEHOLDER = ({"value": "choice 1", "label": "choice 1"},
                {"value": "choice 2", "label": "choice 2"})


@dataclass(frozen=True)
class InputEntry:
    """One ``[[inputs]]`` entry: the calculator input, its data column and its term.

    Attributes
    ----------
    spec : InputSpec
        The calculator input (``choices`` empty when they come from the data;
        ``developed`` set only when the recipe gives it explicitly).
    column : str
        The data column holding the input's values (canonical unit).
    term : PlannedTerm
        How the input enters the model.
    path : str
        The entry's key path in messages, ``inputs[age]``.
    yes, no : tuple
        For a yes_no input, the cell readings meaning yes and no.
    choices_from_data : bool
        True when a choice input's choices are the values found in the data.
    """

    spec: InputSpec
    column: str
    term: PlannedTerm
    path: str
    yes: tuple[Token, ...] = ()
    no: tuple[Token, ...] = ()
    choices_from_data: bool = False

    @property
    def id(self) -> str:
        """The input id."""
        return self.spec.id

    @property
    def kind(self) -> str:
        """``number``, ``yes_no`` or ``choice``."""
        return self.spec.kind

    def to_dict(self) -> dict[str, Any]:
        """The recipe form of the entry (defaults written out)."""
        out = self.spec.to_dict()
        if self.choices_from_data:
            out.pop("choices", None)
        out["column"] = self.column
        out["transform"] = self.term.transform_dict()
        if self.term.truncate is not None:
            out["truncate"] = self.term.truncate.to_dict()
        if self.kind == "yes_no":
            out["yes"], out["no"] = list(self.yes), list(self.no)
        return out


def entry_paths(raw_list: Sequence[Any]) -> list[str]:
    """``inputs[<id>]`` for entries with a unique valid id, else ``inputs[#<position>]``."""
    ids = [r.get("id") if isinstance(r, Mapping) else None for r in raw_list]
    return [
        f"inputs[{i}]" if isinstance(i, str) and _ID.fullmatch(i) and ids.count(i) == 1
        else f"inputs[#{k + 1}]"
        for k, i in enumerate(ids)
    ]


def parse_input_entries(raw_list: Any, problems: Problems) -> tuple[InputEntry, ...] | None:
    """Check every ``[[inputs]]`` entry; the entries, or None when any problem was found.

    Parameters
    ----------
    raw_list : object
        The ``inputs`` value of the recipe (a list of tables).
    problems : Problems
        Every problem is added here with its key path.
    """
    before = len(problems.items)
    if not isinstance(raw_list, list) or not raw_list:
        problems.add("inputs", "the recipe needs at least one [[inputs]] entry")
        return None
    paths = entry_paths(raw_list)
    calc_forms: list[dict[str, Any]] = []
    for raw, path in zip(raw_list, paths, strict=True):
        if not isinstance(raw, Mapping):
            problems.add(path, f"must be a table (got {type_name(raw)})")
            calc_forms.append({})
            continue
        check_keys(raw, CALC_KEYS + RECIPE_KEYS, path, problems)
        calc_forms.append(_calc_form(raw, path, problems))
    specs = _parse_specs(calc_forms, paths, problems)
    if specs is None or len(problems.items) > before:
        _recipe_keys_only(raw_list, paths, problems)
        return None
    entries = [
        _entry(raw, spec, path, problems)
        for raw, spec, path in zip(raw_list, specs, paths, strict=True)
    ]
    _check_columns(entries, problems)
    if len(problems.items) > before:
        return None
    return tuple(e for e in entries if e is not None)


def _recipe_keys_only(raw_list: list[Any], paths: list[str], problems: Problems) -> None:
    """Check the recipe keys of entries whose calculator fields were usable (more at once)."""
    kinds = ("number", "yes_no", "choice")
    for raw, path in zip(raw_list, paths, strict=True):
        if isinstance(raw, Mapping) and raw.get("kind") in kinds:
            _recipe_fields(raw, raw["kind"], None, path, problems)


def _calc_form(raw: Mapping[str, Any], path: str, problems: Problems) -> dict[str, Any]:
    """The entry's calculator-file fields; choices written as ``{value, label}`` tables."""
    form = {k: raw[k] for k in CALC_KEYS if k in raw}
    if raw.get("kind") == "choice":
        if "choices" in raw:
            choices = _choice_tables(raw["choices"], at(path, "choices"), problems)
            form["choices"] = choices if choices is not None else list(_PLACEHOLDER)
        else:
            form["choices"] = list(_PLACEHOLDER)  # filled in from the data later
    return form


def _choice_tables(raw: Any, path: str, problems: Problems) -> list[dict[str, Any]] | None:
    if not isinstance(raw, list):
        problems.add(path, f"must be a list of choices (got {type_name(raw)})")
        return None
    out: list[dict[str, Any]] = []
    for k, item in enumerate(raw):
        where = f"{path}[#{k + 1}]"
        if isinstance(item, bool):
            problems.add(where, "must be text or a {value, label} table (got true/false)")
        elif isinstance(item, int | float):
            text = format_number(item)
            out.append({"value": text, "label": text})
        elif isinstance(item, str):
            out.append({"value": item.strip(), "label": item.strip()})
        elif isinstance(item, Mapping):
            check_keys(item, ("value", "label"), where, problems)
            value = item.get("value")
            value = format_number(value) if isinstance(value, int | float) and not isinstance(
                value, bool) else value
            out.append({"value": value, "label": item.get("label", value)})
        else:
            problems.add(where, f"must be text or a {{value, label}} table (got {type_name(item)})")
    return out


def _parse_specs(
    forms: list[dict[str, Any]], paths: list[str], problems: Problems
) -> tuple[InputSpec, ...] | None:
    """Run the calculator file's own input checks, naming entries as the recipe does."""
    found = Problems()
    specs = parse_inputs(forms, "inputs", found)
    for item in found.items:
        named = re.sub(r"inputs\[(\d+)\]", lambda m: paths[int(m.group(1))], item)
        problems.items.append(re.sub(r"(choices|alt_units)\[(\d+)\]",
                                     lambda m: f"{m.group(1)}[#{int(m.group(2)) + 1}]", named))
    return specs


def _entry(
    raw: Mapping[str, Any], spec: InputSpec, path: str, problems: Problems
) -> InputEntry | None:
    from_data = spec.kind == "choice" and "choices" not in raw
    if from_data:
        spec = replace(spec, choices=())
    recipe = _recipe_fields(raw, spec.kind, spec, path, problems)
    if recipe is None:
        return None
    column, term, yes, no = recipe
    return InputEntry(spec, column, term, path, yes, no, from_data)


def _recipe_fields(
    raw: Mapping[str, Any], kind: str, spec: InputSpec | None, path: str, problems: Problems
) -> tuple[str, PlannedTerm, tuple[Token, ...], tuple[Token, ...]] | None:
    before = len(problems.items)
    column = raw.get("column", raw.get("id"))
    if "column" in raw:
        column = read_text(raw, "column", path, problems)
    for key, owner in (("yes", "yes_no"), ("no", "yes_no"), ("truncate", "number")):
        if key in raw and kind != owner:
            problems.add(at(path, key), f"only {owner} inputs take '{key}' (this input is {kind})")
    truncate: Truncate | None = None
    if "truncate" in raw and kind == "number":
        truncate = parse_truncate(raw["truncate"], at(path, "truncate"), problems)
    input_id = str(raw.get("id"))
    term = parse_transform(raw.get("transform"), kind=kind, input_id=input_id, spec=spec,
                           truncate=truncate, entry_path=path, problems=problems)
    yes, no = _yes_no(raw, path, problems) if kind == "yes_no" else ((), ())
    if len(problems.items) > before or term is None or not isinstance(column, str):
        return None
    return column.strip(), term, yes, no


def _yes_no(
    raw: Mapping[str, Any], path: str, problems: Problems
) -> tuple[tuple[Token, ...], tuple[Token, ...]]:
    yes = _codes(raw, "yes", DEFAULT_YES, path, problems)
    no = _codes(raw, "no", DEFAULT_NO, path, problems)
    both = {match_key(t) for t in yes} & {match_key(t) for t in no}
    for key in sorted(both, key=str):
        problems.add(at(path, "no"), f"{show(key)} is listed under both yes and no")
    return yes, no


def _codes(
    raw: Mapping[str, Any], key: str, default: tuple[Token, ...], path: str, problems: Problems
) -> tuple[Token, ...]:
    if key not in raw:
        return default
    value = raw[key]
    if not isinstance(value, list) or not value:
        problems.add(at(path, key), f"must be a non-empty list of values (got {value!r})")
        return ()
    out: list[Token] = []
    for k, item in enumerate(value):
        tok = token(item) if isinstance(item, str | int | float) else None
        if tok is None:
            problems.add(
                f"{at(path, key)}[#{k + 1}]",
                f"must be a number, text or true/false that is not read as missing (got {item!r})",
            )
        else:
            out.append(tok)
    return tuple(out)


def _check_columns(entries: list[InputEntry | None], problems: Problems) -> None:
    first: dict[str, str] = {}
    for entry in entries:
        if entry is None:
            continue
        if entry.column in first:
            problems.add(
                at(entry.path, "column"),
                f"column '{entry.column}' is already read by {first[entry.column]}; "
                "each input needs its own column",
            )
        else:
            first[entry.column] = entry.path
