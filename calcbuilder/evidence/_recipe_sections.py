"""The smaller tables of a recipe (private): outcome, about, decision, cautions, fit, dataset,
interactions."""

from __future__ import annotations

import itertools
import re
import tomllib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..calc.problems import Problems
from ._recipe_read import (
    at,
    check_keys,
    fmt,
    read_bool,
    read_date,
    read_number,
    read_table,
    read_text,
    read_text_list,
    type_name,
)
from ._tokens import Token, token

__all__ = [
    "DEVELOPED_RANGES",
    "DatasetInfo",
    "FitOptions",
    "Interaction",
    "Outcome",
    "default_cautions",
    "parse_about",
    "parse_cautions",
    "parse_dataset",
    "parse_decision",
    "parse_fit",
    "parse_interactions",
    "parse_outcome",
]

ABOUT_TEXTS = ("title", "intended_use", "population", "outcome", "horizon")
ABOUT_KEYS = (*ABOUT_TEXTS, "version", "exclusions", "authors", "organisation", "contact",
              "released", "review_by", "references", "synthetic")
DEVELOPED_RANGES = ("observed", "p01-p99")
_SEMVER = re.compile(r"(0|[1-9][0-9]*)\.(0|[1-9][0-9]*)\.(0|[1-9][0-9]*)")
# shipped inside the package (the top-level templates/ folder links here)
CAUTIONS_FILE = Path(__file__).resolve().parents[1] / "templates" / "cautions.toml"


@dataclass(frozen=True)
class Outcome:
    """The outcome column and the value in it that means the event happened."""

    column: str
    event: Token = 1.0

    def to_dict(self) -> dict[str, Any]:
        """Recipe form."""
        event = int(self.event) if isinstance(self.event, float) and self.event.is_integer() \
            else self.event
        return {"column": self.column, "event": event}


@dataclass(frozen=True)
class FitOptions:
    """``[fit]``: penalisation, the developed range rule and the anticipated R2_CS."""

    firth: bool = False
    developed_range: str = "observed"
    anticipated_r2_cs: float | None = None

    def to_dict(self) -> dict[str, Any]:
        """Recipe form (unset options left out)."""
        out: dict[str, Any] = {"firth": self.firth, "developed_range": self.developed_range}
        if self.anticipated_r2_cs is not None:
            out["anticipated_r2_cs"] = self.anticipated_r2_cs
        return out


@dataclass(frozen=True)
class DatasetInfo:
    """``[dataset]``: how the development data are described in the evidence."""

    name: str | None = None
    period: str | None = None
    population: str | None = None

    def to_dict(self) -> dict[str, Any]:
        """Recipe form (unset fields left out)."""
        return {k: v for k, v in vars(self).items() if v is not None}


@dataclass(frozen=True)
class Interaction:
    """A product term of two inputs' terms."""

    name: str
    of: tuple[str, str]

    def to_dict(self) -> dict[str, Any]:
        """Recipe form."""
        return {"name": self.name, "of": list(self.of)}


def parse_outcome(raw: Mapping[str, Any], problems: Problems) -> Outcome | None:
    """``[outcome]``: ``column`` (required) and ``event`` (default 1)."""
    table = read_table(raw, "outcome", "", problems, required=True)
    if table is None:
        return None
    check_keys(table, ("column", "event"), "outcome", problems)
    column = read_text(table, "column", "outcome", problems)
    event_raw = table.get("event", 1)
    event = token(event_raw) if isinstance(event_raw, str | int | float) else None
    if event is None:
        problems.add("outcome.event", f"must be the number, text or true/false that marks an "
                     f"event in the outcome column (got {event_raw!r})")
    if column is None or event is None:
        return None
    return Outcome(column.strip(), event)


def parse_about(raw: Mapping[str, Any], problems: Problems) -> dict[str, Any] | None:
    """``[about]``: the calculator's ``about`` section; ``released`` may be left out."""
    table = read_table(raw, "about", "", problems, required=True)
    if table is None:
        return None
    before = len(problems.items)
    check_keys(table, ABOUT_KEYS, "about", problems)
    out: dict[str, Any] = {k: read_text(table, k, "about", problems) for k in ABOUT_TEXTS}
    version = read_text(table, "version", "about", problems)
    if version is not None and not _SEMVER.fullmatch(version):
        problems.add("about.version", f"must be a version like 1.0.0 (got {version!r})")
    out["version"] = version
    for key in ("exclusions", "authors", "references"):
        out[key] = read_text_list(table, key, "about", problems)
    for key in ("organisation", "contact"):
        out[key] = read_text(table, key, "about", problems, required=False)
    out["released"] = read_date(table, "released", "about", problems, required=False)
    out["review_by"] = read_date(table, "review_by", "about", problems)
    if out["released"] and out["review_by"] and out["review_by"] <= out["released"]:
        problems.add("about.review_by", f"must be after about.released "
                     f"({out['released'].isoformat()}); got {out['review_by'].isoformat()}")
    out["synthetic"] = read_bool(table, "synthetic", "about", problems, False)
    if len(problems.items) > before:
        return None
    return {k: v for k, v in out.items() if v not in (None, ())}


def _threshold(value: Any, where: str, problems: Problems) -> float | None:
    if isinstance(value, bool) or not isinstance(value, int | float) or not 0 < value < 1:
        problems.add(where, f"must be a risk strictly between 0 and 1, e.g. 0.1 (got {value!r})")
        return None
    return float(value)


def parse_decision(raw: Mapping[str, Any], problems: Problems) -> dict[str, Any] | None:
    """``[decision]``: default threshold, reasonable range, rationale, optional bands."""
    table = read_table(raw, "decision", "", problems, required=True)
    if table is None:
        return None
    before = len(problems.items)
    check_keys(table, ("default_threshold", "reasonable_range", "rationale", "bands"),
               "decision", problems)
    default = None
    if "default_threshold" not in table:
        problems.add("decision.default_threshold", "required")
    else:
        default = _threshold(table["default_threshold"], "decision.default_threshold", problems)
    span = _range(table.get("reasonable_range"), problems)
    if default is not None and span is not None and not span[0] <= default <= span[1]:
        problems.add("decision.default_threshold", f"must lie inside reasonable_range "
                     f"[{fmt(span[0])}, {fmt(span[1])}] (got {fmt(default)})")
    rationale = read_text(table, "rationale", "decision", problems)
    bands = _bands(table.get("bands"), problems)
    if len(problems.items) > before or default is None or span is None:
        return None
    out: dict[str, Any] = {"default_threshold": default, "reasonable_range": list(span),
                           "rationale": rationale}
    if bands:
        out["bands"] = bands
    return out


def _range(raw: Any, problems: Problems) -> tuple[float, float] | None:
    where = "decision.reasonable_range"
    if not isinstance(raw, list) or len(raw) != 2:
        problems.add(where, f"must be [low, high], two risks such as [0.05, 0.3] (got {raw!r})")
        return None
    low = _threshold(raw[0], f"{where}[#1]", problems)
    high = _threshold(raw[1], f"{where}[#2]", problems)
    if low is None or high is None:
        return None
    if not low < high:
        problems.add(where, f"low must be below high (got [{fmt(low)}, {fmt(high)}])")
        return None
    return low, high


def _bands(raw: Any, problems: Problems) -> list[dict[str, Any]] | None:
    if raw is None:
        return None
    if not isinstance(raw, list) or not raw:
        problems.add("decision.bands", f"must be a list of {{label, upper}} tables (got {raw!r})")
        return None
    out: list[dict[str, Any]] = []
    for k, band in enumerate(raw):
        where = f"decision.bands[#{k + 1}]"
        if not isinstance(band, Mapping):
            problems.add(where, f"must be a table with label and upper (got {type_name(band)})")
            continue
        check_keys(band, ("label", "upper"), where, problems)
        label = read_text(band, "label", where, problems)
        upper = read_number(band, "upper", where, problems)
        if label is not None and upper is not None:
            out.append({"label": label, "upper": upper})
    uppers: list[float] = [b["upper"] for b in out]
    if len(out) == len(raw) and (any(b <= a for a, b in itertools.pairwise(uppers))
                                 or uppers[-1] != 1 or uppers[0] <= 0):
        problems.add("decision.bands", "upper limits must increase and the last must be 1 (got "
                     f"{', '.join(map(fmt, uppers))})")
    return out


def default_cautions(synthetic: bool) -> tuple[str, ...]:
    """The default caution texts: ``always.long`` of ``templates/cautions.toml``, and
    ``synthetic.text`` for synthetic material."""
    with CAUTIONS_FILE.open("rb") as handle:
        texts = tomllib.load(handle)
    out = [texts["always"]["long"]]
    if synthetic:
        out.append(texts["synthetic"]["text"])
    return tuple(out)


def parse_cautions(raw: Mapping[str, Any], synthetic: bool, problems: Problems
                   ) -> tuple[str, ...] | None:
    """``cautions``: a list of texts; when left out, :func:`default_cautions`."""
    if "cautions" not in raw:
        try:
            return default_cautions(synthetic)
        except (OSError, KeyError, tomllib.TOMLDecodeError) as exc:
            problems.add("cautions", f"no cautions given and the default texts could not be read "
                         f"from {CAUTIONS_FILE} ({exc}); write cautions = [\"...\"] in the recipe")
            return None
    texts = read_text_list(raw, "cautions", "", problems)
    if texts is not None and not texts:
        problems.add("cautions", "must list at least one caution text (or leave the key out to "
                     "use the default text)")
        return None
    return texts


def parse_fit(raw: Mapping[str, Any], problems: Problems) -> FitOptions:
    """``[fit]``: ``firth``, ``developed_range``, ``anticipated_r2_cs``."""
    table = read_table(raw, "fit", "", problems) or {}
    check_keys(table, ("firth", "developed_range", "anticipated_r2_cs"), "fit", problems)
    firth = read_bool(table, "firth", "fit", problems, False)
    rule = table.get("developed_range", "observed")
    if rule not in DEVELOPED_RANGES:
        problems.add("fit.developed_range", f"must be 'observed' or 'p01-p99' (got {rule!r})")
        rule = "observed"
    r2 = read_number(table, "anticipated_r2_cs", "fit", problems, required=False)
    if r2 is not None and not 0 < r2 < 1:
        problems.add("fit.anticipated_r2_cs", f"must lie strictly between 0 and 1 (got {fmt(r2)})")
        r2 = None
    return FitOptions(firth, str(rule), r2)


def parse_dataset(raw: Mapping[str, Any], problems: Problems) -> DatasetInfo:
    """``[dataset]``: optional ``name``, ``period`` and ``population`` texts."""
    table = read_table(raw, "dataset", "", problems) or {}
    check_keys(table, ("name", "period", "population"), "dataset", problems)
    found = {k: read_text(table, k, "dataset", problems, required=False)
             for k in ("name", "period", "population")}
    return DatasetInfo(**found)


def parse_interactions(raw: Mapping[str, Any], input_ids: Sequence[str], problems: Problems
                       ) -> tuple[Interaction, ...]:
    """``[[interactions]]``: each ``of = [a, b]`` names two different inputs; optional ``name``."""
    items = raw.get("interactions", [])
    if not isinstance(items, list):
        problems.add("interactions", f"must be a list of [[interactions]] tables (got "
                     f"{type_name(items)})")
        return ()
    out: list[Interaction] = []
    for k, item in enumerate(items):
        where = f"interactions[#{k + 1}]"
        if not isinstance(item, Mapping):
            problems.add(where, f"must be a table with of = [a, b] (got {type_name(item)})")
            continue
        check_keys(item, ("of", "name"), where, problems)
        found = _interaction(item, where, input_ids, problems)
        if found is not None:
            out.append(found)
    _unique_interactions(out, input_ids, problems)
    return tuple(out)


def _interaction(item: Mapping[str, Any], where: str, input_ids: Sequence[str],
                 problems: Problems) -> Interaction | None:
    of = item.get("of")
    if not (isinstance(of, list) and len(of) == 2 and all(isinstance(x, str) for x in of)):
        problems.add(at(where, "of"), f"must name two inputs, e.g. of = [\"age\", \"sensory\"] "
                     f"(got {of!r})")
        return None
    unknown = [x for x in of if x not in input_ids]
    for name in unknown:
        problems.add(at(where, "of"), f"'{name}' is not an input id of this recipe (inputs: "
                     f"{', '.join(input_ids)})")
    if of[0] == of[1]:
        problems.add(at(where, "of"), f"must name two different inputs (got '{of[0]}' twice)")
    name = read_text(item, "name", where, problems, required=False) or f"{of[0]}*{of[1]}"
    if unknown or of[0] == of[1]:
        return None
    return Interaction(name, (of[0], of[1]))


def _unique_interactions(found: list[Interaction], input_ids: Sequence[str], problems: Problems
                         ) -> None:
    names: set[str] = set(input_ids)
    pairs: set[frozenset[str]] = set()
    for item in found:
        if item.name in names:
            problems.add("interactions", f"the term name '{item.name}' is used twice; give the "
                         "interaction another name")
        if frozenset(item.of) in pairs:
            problems.add("interactions", f"the interaction of '{item.of[0]}' and '{item.of[1]}' "
                         "is listed twice")
        names.add(item.name)
        pairs.add(frozenset(item.of))
