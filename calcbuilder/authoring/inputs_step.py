"""Step 2, Inputs: one draft per predictor; together they ARE the recipe's ``[[inputs]]``.

Every field is kept as the author typed it. :meth:`InputDraft.recipe_entry`
writes the recipe entry (numbers converted where the text is a number; any
other text passed on as typed), and :meth:`Recipe.from_dict
<calcbuilder.evidence.Recipe.from_dict>` judges it: its problems come back with
key paths (``inputs[age].transform.knots``) that :mod:`calcbuilder.authoring.problems`
routes to the field they are about. No rule of the recipe is repeated here.

The developed range is filled in from the data by :func:`calcbuilder.evidence.prepare`
(observed or 1st-99th percentile, as the recipe's ``fit.developed_range`` says);
only a range the author edits is written into the recipe.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping
from dataclasses import asdict, dataclass, field, fields
from typing import Any

from ..evidence._tokens import token
from ..evidence.recipe import KIND_TRANSFORMS
from .data_step import ColumnSummary

__all__ = ["KINDS", "TRANSFORM_SETTINGS", "AltUnitDraft", "InputDraft", "InputsStep",
           "draft_for_column", "make_id", "number_or_text"]

KINDS = ("number", "yes_no", "choice")
TRANSFORM_SETTINGS: dict[str, tuple[str, ...]] = {
    "linear": (), "log": ("shift",), "sqrt": (), "power": ("exponent",), "rcs": ("knots",),
    "hinges": ("knots",), "indicator": ("level",), "levels": ("reference",),
}
"""Which draft fields each transform uses (recipe ``transform`` settings)."""
DEVELOPED_RULES = ("observed", "p01-p99")


def number_or_text(text: str) -> float | int | str | None:
    """A typed value as the recipe takes it: None when blank, a number when it reads as
    one (whole numbers as int), else the text itself (for the recipe to refuse by name)."""
    stripped = text.strip()
    if not stripped:
        return None
    tok = token(stripped)
    if isinstance(tok, float):
        return int(tok) if tok.is_integer() and abs(tok) < 2**53 else tok
    return stripped


def _codes(text: str) -> list[Any]:
    return [number_or_text(part) for part in text.split(",") if part.strip()]


def _knots(text: str) -> Any:
    parts = [p for p in re.split(r"[,;\s]+", text.strip()) if p]
    if len(parts) == 1:
        return number_or_text(parts[0])
    return [number_or_text(p) for p in parts]


def make_id(name: str, taken: Iterable[str] = ()) -> str:
    """An input id from a column name: lower case letters, digits and ``_``, starting
    with a letter, unique among ``taken``."""
    base = re.sub(r"[^a-z0-9_]+", "_", name.strip().lower()).strip("_") or "input"
    if not base[0].isalpha():
        base = "x_" + base
    used, out, k = set(taken), base, 2
    while out in used:
        out, k = f"{base}_{k}", k + 1
    return out


@dataclass
class AltUnitDraft:
    """An alternative unit: canonical value = value x factor + offset."""

    unit: str = ""
    factor: str = ""
    offset: str = ""

    def recipe_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {"unit": self.unit.strip(), "factor": number_or_text(self.factor)}
        if out["factor"] is None:
            out["factor"] = self.factor
        if self.offset.strip():
            out["offset"] = number_or_text(self.offset)
        return out


@dataclass
class InputDraft:
    """One predictor as the author describes it (every typed value kept as text)."""

    id: str
    column: str
    label: str = ""
    kind: str = "number"
    unit: str = ""
    alt_units: list[AltUnitDraft] = field(default_factory=list)
    limit_low: str = ""
    limit_high: str = ""
    developed_low: str = ""
    developed_high: str = ""
    developed_edited: bool = False
    decimals: str = ""
    required: bool = True
    group: str = ""
    help: str = ""
    choices: list[tuple[str, str]] = field(default_factory=list)
    choices_from_data: bool = False
    transform: str = ""
    knots: str = ""
    shift: str = ""
    exponent: str = ""
    reference: str = ""
    level: str = ""
    truncate_low: str = ""
    truncate_high: str = ""
    yes: str = ""
    no: str = ""

    @property
    def transform_type(self) -> str:
        """The transform in force: the one chosen, else the kind's default."""
        return self.transform or KIND_TRANSFORMS.get(self.kind, ("linear",))[0]

    def transform_dict(self) -> str | dict[str, Any] | None:
        """The recipe's ``transform`` value (None: the kind's default, left out)."""
        if not self.transform:
            return None
        out: dict[str, Any] = {"type": self.transform}
        values = {"knots": _knots(self.knots) if self.knots.strip() else None,
                  "shift": number_or_text(self.shift), "exponent": number_or_text(self.exponent),
                  "reference": self.reference.strip() or None, "level": self.level.strip() or None}
        for key in TRANSFORM_SETTINGS.get(self.transform, ()):
            if values[key] is not None:
                out[key] = values[key]
        return out

    def recipe_entry(self) -> dict[str, Any]:
        """The recipe's ``[[inputs]]`` entry (only what was given; see the module notes)."""
        out: dict[str, Any] = {"id": self.id.strip(), "label": self.label, "kind": self.kind}
        if self.column.strip() and self.column.strip() != self.id.strip():
            out["column"] = self.column.strip()
        if self.kind == "number":
            self._number_fields(out)
        if not self.required:
            out["required"] = False
        for key in ("group", "help"):
            if getattr(self, key).strip():
                out[key] = getattr(self, key).strip()
        if self.kind == "choice" and not self.choices_from_data:
            out["choices"] = [{"value": v, "label": lab or v} for v, lab in self.choices]
        transform = self.transform_dict()
        if transform is not None:
            out["transform"] = transform
        if self.kind == "yes_no":
            for key in ("yes", "no"):
                if getattr(self, key).strip():
                    out[key] = _codes(getattr(self, key))
        return out

    def _number_fields(self, out: dict[str, Any]) -> None:
        if self.unit.strip():
            out["unit"] = self.unit.strip()
        if self.alt_units:
            out["alt_units"] = [a.recipe_dict() for a in self.alt_units]
        for key, low, high, given in (
                ("limits", self.limit_low, self.limit_high, True),
                ("developed", self.developed_low, self.developed_high, self.developed_edited),
                ("truncate", self.truncate_low, self.truncate_high, True)):
            pair = {k: number_or_text(v) for k, v in (("low", low), ("high", high))}
            pair = {k: v for k, v in pair.items() if v is not None}
            if given and pair:
                out[key] = pair
        if self.decimals.strip():
            out["decimals"] = number_or_text(self.decimals)

    def to_dict(self) -> dict[str, Any]:
        """Project-file form."""
        out = asdict(self)
        out["choices"] = [list(c) for c in self.choices]
        return out

    @classmethod
    def from_dict(cls, raw: Mapping[str, Any]) -> InputDraft:
        """Read the project-file form (unknown keys ignored)."""
        known = {f.name for f in fields(cls)}
        values = {k: v for k, v in raw.items() if k in known}
        values["alt_units"] = [AltUnitDraft(**a) for a in raw.get("alt_units", [])]
        values["choices"] = [(str(c[0]), str(c[1])) for c in raw.get("choices", [])]
        return cls(**values)


def _label(name: str) -> str:
    text = re.sub(r"[_\s]+", " ", name).strip()
    return text[:1].upper() + text[1:]


def draft_for_column(summary: ColumnSummary, taken: Iterable[str] = ()) -> InputDraft:
    """A first draft for a data column: kind guessed from its values, label from its name."""
    draft = InputDraft(id=make_id(summary.name, taken), column=summary.name,
                       label=_label(summary.name), kind=summary.kind)
    values = [v for v, _ in summary.values]
    if summary.kind == "yes_no" and summary.numeric:
        draft.yes, draft.no = "1", "0"
    elif summary.kind == "choice":
        draft.choices = [(v, v) for v in sorted(values)]
    return draft


@dataclass
class InputsStep:
    """The predictors in clinic-form order, the model options of the inputs, products.

    Attributes
    ----------
    drafts : list of InputDraft
        In the order the clinic form asks for them.
    interactions : list of (str, str)
        Products of two inputs' terms (input ids).
    developed_rule : str
        ``observed`` or ``p01-p99`` (recipe ``fit.developed_range``).
    data_ranges : dict
        Input id -> developed range found in the data by the last data check
        (shown until the author edits the range; not saved).
    """

    drafts: list[InputDraft] = field(default_factory=list)
    interactions: list[tuple[str, str]] = field(default_factory=list)
    developed_rule: str = "observed"
    data_ranges: dict[str, tuple[float, float]] = field(default_factory=dict)

    @property
    def ids(self) -> list[str]:
        return [d.id for d in self.drafts]

    def draft(self, input_id: str) -> InputDraft:
        """The draft with this id (KeyError if none)."""
        for d in self.drafts:
            if d.id == input_id:
                return d
        raise KeyError(input_id)

    def sync_columns(self, predictors: list[str], summaries: Mapping[str, ColumnSummary]
                     ) -> None:
        """Make the drafts follow the chosen predictor columns: new columns get a draft,
        dropped ones lose theirs; the author's order of the others is kept."""
        keep = [d for d in self.drafts if d.column in predictors]
        have = {d.column for d in keep}
        for column in predictors:
            if column not in have and column in summaries:
                keep.append(draft_for_column(summaries[column], [d.id for d in keep]))
        self.drafts = keep
        ids = set(self.ids)
        self.interactions = [p for p in self.interactions if set(p) <= ids]

    def move(self, index: int, step: int) -> int:
        """Move a draft up (-1) or down (+1) the form; its new index."""
        new = max(0, min(len(self.drafts) - 1, index + step))
        self.drafts.insert(new, self.drafts.pop(index))
        return new

    def developed_shown(self, draft: InputDraft) -> tuple[str, str]:
        """The developed range to show: the author's, else the one found in the data."""
        if draft.developed_edited or draft.id not in self.data_ranges:
            return draft.developed_low, draft.developed_high
        low, high = self.data_ranges[draft.id]
        return f"{low:g}", f"{high:g}"

    def recipe_inputs(self) -> list[dict[str, Any]]:
        """The recipe's ``inputs`` list."""
        return [d.recipe_entry() for d in self.drafts]

    def recipe_interactions(self) -> list[dict[str, Any]]:
        return [{"of": [a, b]} for a, b in self.interactions]

    def to_dict(self) -> dict[str, Any]:
        return {"drafts": [d.to_dict() for d in self.drafts],
                "interactions": [list(p) for p in self.interactions],
                "developed_rule": self.developed_rule}

    @classmethod
    def from_dict(cls, raw: Mapping[str, Any]) -> InputsStep:
        return cls(drafts=[InputDraft.from_dict(d) for d in raw.get("drafts", [])],
                   interactions=[(str(p[0]), str(p[1])) for p in raw.get("interactions", [])],
                   developed_rule=str(raw.get("developed_rule", "observed")))
