"""Step 4, About and cautions: what the calculator says about itself.

The fields are the recipe's ``[about]`` table and its ``cautions`` list, kept as
typed; :meth:`Recipe.from_dict <calcbuilder.evidence.Recipe.from_dict>` judges
them (dates, the version's form, review-by after release, non-empty texts).
Lists (exclusions, authors, references) are typed one per line.

Caution texts start from ``templates/cautions.toml`` -- the same default texts
the recipe uses when it names none (``always.long``, plus ``synthetic.text`` for
synthetic material) -- and the author edits them. The template's other texts
are offered as additions (:meth:`AboutStep.offered_cautions`).
"""

from __future__ import annotations

import tomllib
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field, fields
from typing import Any

from ..evidence._recipe_sections import CAUTIONS_FILE

__all__ = ["AboutStep", "caution_templates", "default_cautions"]

LIST_FIELDS = ("exclusions", "authors", "references")
TEXT_FIELDS = ("title", "version", "intended_use", "population", "outcome", "horizon",
               "organisation", "contact", "released", "review_by")


def caution_templates() -> dict[str, str]:
    """The texts of ``templates/cautions.toml`` by name (``always.long``, ...)."""
    with CAUTIONS_FILE.open("rb") as handle:
        raw = tomllib.load(handle)
    return {f"{section}.{key}": str(text) for section, table in raw.items()
            for key, text in table.items()}


def default_cautions(synthetic: bool) -> list[str]:
    """The recipe's default cautions: ``always.long`` (and ``synthetic.text`` when synthetic)."""
    texts = caution_templates()
    out = [texts["always.long"]]
    if synthetic:
        out.append(texts["synthetic.text"])
    return out


def _lines(text: str) -> list[str]:
    return [line.strip() for line in text.splitlines() if line.strip()]


@dataclass
class AboutStep:
    """The ``[about]`` fields and the caution texts, as typed (lists one item per line)."""

    title: str = ""
    version: str = "0.1.0"
    intended_use: str = ""
    population: str = ""
    outcome: str = ""
    horizon: str = ""
    exclusions: str = ""
    authors: str = ""
    organisation: str = ""
    contact: str = ""
    released: str = ""
    review_by: str = ""
    references: str = ""
    synthetic: bool = False
    cautions: list[str] = field(default_factory=lambda: default_cautions(False))

    def set_synthetic(self, synthetic: bool) -> None:
        """Mark the material synthetic or not; the synthetic caution text follows."""
        text = caution_templates()["synthetic.text"]
        self.synthetic = synthetic
        if synthetic and text not in self.cautions:
            self.cautions.append(text)
        elif not synthetic and text in self.cautions:
            self.cautions.remove(text)

    def offered_cautions(self) -> dict[str, str]:
        """Template texts not yet among the cautions (name -> text)."""
        return {k: v for k, v in caution_templates().items()
                if v not in self.cautions and k != "always.short"}

    def about_dict(self) -> dict[str, Any]:
        """The recipe's ``[about]`` table (blank optional fields left out)."""
        out: dict[str, Any] = {}
        for key in TEXT_FIELDS:
            value = getattr(self, key).strip()
            if value or key in ("title", "version", "intended_use", "population", "outcome",
                                "horizon", "review_by"):
                out[key] = value
        for key in LIST_FIELDS:
            items = _lines(getattr(self, key))
            if items:
                out[key] = items
        out["synthetic"] = self.synthetic
        return out

    def cautions_list(self) -> list[str]:
        """The recipe's ``cautions`` (blank texts kept for the recipe to refuse by position)."""
        return list(self.cautions)

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)

    @classmethod
    def from_dict(cls, raw: Mapping[str, Any]) -> AboutStep:
        known = {f.name for f in fields(cls)}
        return cls(**{k: v for k, v in raw.items() if k in known})
