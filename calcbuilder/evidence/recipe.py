"""The fitting recipe: which columns, how each enters the model, and what the calculator says.

A recipe is a TOML file (format reference: ``docs/recipe.md``; a complete example:
``templates/recipe-example.toml``). :func:`load_recipe` reads it and
:meth:`Recipe.from_dict` checks it, reporting every problem at once with its key
path (``inputs[age].transform.knots: ...``); unknown keys are refused so that a
typo never passes silently.

The recipe knows everything about the calculator except what only the data can
tell: the developed range of each number, the choices of a choice input whose
choices are read from the data, the knots of a spline given as a count, and the
reference level of such a choice input. :mod:`calcbuilder.evidence.datacheck`
fills those in.
"""

from __future__ import annotations

import datetime as dt
import tomllib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, cast

from ..calc.inputs import Choice, Range
from ..calc.problems import Problems
from ._recipe_inputs import DEFAULT_NO, DEFAULT_YES, InputEntry, parse_input_entries
from ._recipe_read import check_keys
from ._recipe_sections import (
    DEVELOPED_RANGES,
    DatasetInfo,
    FitOptions,
    Interaction,
    Outcome,
    parse_about,
    parse_cautions,
    parse_dataset,
    parse_decision,
    parse_fit,
    parse_interactions,
    parse_outcome,
)
from ._recipe_transform import KIND_TRANSFORMS, PlannedTerm
from .errors import RecipeError

__all__ = [
    "DEFAULT_NO",
    "DEFAULT_YES",
    "DEVELOPED_RANGES",
    "KIND_TRANSFORMS",
    "RECIPE_VERSION",
    "DatasetInfo",
    "FitOptions",
    "InputEntry",
    "Interaction",
    "Outcome",
    "PlannedTerm",
    "Recipe",
    "load_recipe",
]

RECIPE_VERSION = 1
ABOUT_ORDER = ("title", "version", "intended_use", "population", "outcome", "horizon",
               "exclusions", "authors", "organisation", "contact", "released", "review_by",
               "references", "synthetic")
TOP_KEYS = ("recipe_version", "outcome", "inputs", "interactions", "about", "decision",
            "cautions", "fit", "dataset")


@dataclass(frozen=True)
class Recipe:
    """A checked recipe. Build it with :meth:`from_dict` or :func:`load_recipe`.

    Attributes
    ----------
    outcome : Outcome
        Outcome column and event value.
    inputs : tuple of InputEntry
        The inputs in form order, each with its data column and planned term.
    interactions : tuple of Interaction
        Product terms, after the inputs' own terms.
    about : dict
        The calculator's ``about`` section (dates as ``datetime.date``;
        ``released`` may be absent: see :meth:`about_dict`).
    decision : dict
        The calculator's ``decision`` section.
    cautions : tuple of str
        Caution texts.
    fit : FitOptions
        Fitting options.
    dataset : DatasetInfo
        Description of the development data for the evidence set.
    """

    outcome: Outcome
    inputs: tuple[InputEntry, ...]
    about: dict[str, Any]
    decision: dict[str, Any]
    cautions: tuple[str, ...]
    interactions: tuple[Interaction, ...] = ()
    fit: FitOptions = field(default_factory=FitOptions)
    dataset: DatasetInfo = field(default_factory=DatasetInfo)

    @classmethod
    def from_dict(cls, raw: Mapping[str, Any]) -> Recipe:
        """Check a parsed recipe and build it.

        Parameters
        ----------
        raw : mapping
            The recipe as parsed from TOML.

        Returns
        -------
        Recipe

        Raises
        ------
        RecipeError
            Listing every problem found, each as ``"key.path: message"``.
        """
        problems = Problems()
        if not isinstance(raw, Mapping):
            raise RecipeError("the recipe must be a TOML table of settings")
        check_keys(raw, TOP_KEYS, "", problems)
        version = raw.get("recipe_version", RECIPE_VERSION)
        if version != RECIPE_VERSION or isinstance(version, bool):
            problems.add("recipe_version", f"this calcbuilder reads recipe_version = "
                         f"{RECIPE_VERSION} (got {version!r})")
        outcome = parse_outcome(raw, problems)
        inputs = parse_input_entries(raw.get("inputs"), problems)
        ids = [e.id for e in inputs] if inputs is not None else _raw_ids(raw.get("inputs"))
        interactions = parse_interactions(raw, ids, problems)
        about = parse_about(raw, problems)
        decision = parse_decision(raw, problems)
        synthetic = bool(about and about.get("synthetic"))
        cautions = parse_cautions(raw, synthetic, problems)
        fit, dataset = parse_fit(raw, problems), parse_dataset(raw, problems)
        if outcome is not None and inputs is not None:
            _outcome_not_input(outcome, inputs, problems)
        if problems or None in (outcome, inputs, about, decision, cautions):
            n = len(problems.items)
            raise RecipeError(f"the recipe cannot be used: {n} problem{'s' if n != 1 else ''}",
                              problems.items)
        return cls(cast(Outcome, outcome), cast(tuple[InputEntry, ...], inputs),
                   cast(dict[str, Any], about), cast(dict[str, Any], decision),
                   cast(tuple[str, ...], cautions), interactions, fit, dataset)

    def to_dict(self) -> dict[str, Any]:
        """The recipe form with every default written out (``from_dict`` reads it back)."""
        out: dict[str, Any] = {
            "recipe_version": RECIPE_VERSION,
            "outcome": self.outcome.to_dict(),
            "inputs": [e.to_dict() for e in self.inputs],
        }
        if self.interactions:
            out["interactions"] = [i.to_dict() for i in self.interactions]
        out["about"] = {k: list(v) if isinstance(v, tuple) else v for k, v in self.about.items()}
        out["decision"] = dict(self.decision)
        out["cautions"] = list(self.cautions)
        out["fit"] = self.fit.to_dict()
        dataset = self.dataset.to_dict()
        if dataset:
            out["dataset"] = dataset
        return out

    def input(self, input_id: str) -> InputEntry:
        """The entry of the input called ``input_id`` (KeyError if none)."""
        for entry in self.inputs:
            if entry.id == input_id:
                return entry
        raise KeyError(input_id)

    @property
    def columns(self) -> dict[str, str]:
        """Every data column the recipe reads -> the key path that names it."""
        out = {self.outcome.column: "outcome.column"}
        out.update({e.column: f"{e.path}.column" for e in self.inputs})
        return out

    @property
    def term_plan(self) -> tuple[PlannedTerm, ...]:
        """The model terms in order: one per input, then one product per interaction."""
        products = tuple(
            PlannedTerm(i.name, None, "product", {"of": i.of}, None, f"interactions[#{k + 1}]")
            for k, i in enumerate(self.interactions)
        )
        return tuple(e.term for e in self.inputs) + products

    def input_dicts(
        self,
        developed_ranges: Mapping[str, tuple[float, float]],
        data_choices: Mapping[str, Sequence[str]] | None = None,
    ) -> list[dict[str, Any]]:
        """The calculator file's ``inputs`` section (FORMAT.md shape).

        Parameters
        ----------
        developed_ranges : mapping
            Input id -> (low, high) developed range for number inputs; a range
            given explicitly in the recipe (``developed``) takes precedence.
            Inputs in neither get no ``developed`` range.
        data_choices : mapping, optional
            Input id -> choice values found in the data, for choice inputs whose
            choices the recipe leaves to the data (labels = values).

        Returns
        -------
        list of dict

        Raises
        ------
        RecipeError
            When a choice input's choices are neither in the recipe nor given.
        """
        out = []
        for entry in self.inputs:
            spec = entry.spec
            if entry.kind == "number" and spec.developed is None and entry.id in developed_ranges:
                low, high = developed_ranges[entry.id]
                spec = replace(spec, developed=Range(float(low), float(high)))
            if entry.choices_from_data:
                values = (data_choices or {}).get(entry.id)
                if not values:
                    raise RecipeError(f"{entry.path}.choices: not in the recipe and not yet read "
                                      "from the data")
                spec = replace(spec, choices=tuple(Choice(v, v) for v in values))
            out.append(spec.to_dict())
        return out

    def about_dict(self, released: dt.date | None = None) -> dict[str, Any]:
        """The calculator's ``about`` section with ISO dates.

        ``released`` (default: today) is used only when the recipe gives no
        release date; the review-by date must come after it.
        """
        about = dict(self.about)
        day = about.get("released") or released or dt.date.today()
        if about["review_by"] <= day:
            raise RecipeError(f"about.review_by: must be after the release date "
                              f"{day.isoformat()} (got {about['review_by'].isoformat()})")
        about["released"] = day
        out = {k: list(v) if isinstance(v, tuple) else v
               for k, v in sorted(about.items(), key=lambda kv: ABOUT_ORDER.index(kv[0]))}
        out["released"], out["review_by"] = day.isoformat(), about["review_by"].isoformat()
        return out


def _raw_ids(raw_list: Any) -> list[str]:
    """The ids written in the entries, for checking interactions when an entry has problems."""
    if not isinstance(raw_list, list):
        return []
    return [r["id"] for r in raw_list if isinstance(r, Mapping) and isinstance(r.get("id"), str)]


def _outcome_not_input(outcome: Outcome, inputs: Sequence[InputEntry], problems: Problems
                       ) -> None:
    for entry in inputs:
        if entry.column == outcome.column:
            problems.add(f"{entry.path}.column", f"'{entry.column}' is the outcome column; an "
                         "input cannot read the outcome")


def load_recipe(path: str | Path) -> Recipe:
    """Read and check a recipe file (TOML, UTF-8).

    Parameters
    ----------
    path : str or Path
        The recipe file.

    Returns
    -------
    Recipe

    Raises
    ------
    RecipeError
        The file is missing, unreadable or not TOML, or the recipe has problems
        (all listed).
    """
    path = Path(path)
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise RecipeError(f"recipe file not found: {path}") from None
    except IsADirectoryError:
        raise RecipeError(f"{path} is a folder, not a recipe file") from None
    except OSError as exc:
        raise RecipeError(f"cannot read recipe file {path}: {exc.strerror or exc}") from None
    try:
        raw = tomllib.loads(data.decode("utf-8-sig"))
    except UnicodeDecodeError as exc:
        raise RecipeError(f"recipe file {path} is not UTF-8 text (byte {exc.start}); save it "
                          "as UTF-8") from None
    except tomllib.TOMLDecodeError as exc:
        raise RecipeError(f"recipe file {path} is not valid TOML: {exc}") from None
    try:
        return Recipe.from_dict(raw)
    except RecipeError as exc:
        raise RecipeError(f"recipe file {path}: {exc.heading}", exc.problems) from None
