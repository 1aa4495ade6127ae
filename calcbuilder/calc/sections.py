"""The smaller sections of a calculator file: about, decision, cautions, test vectors.

Each ``parse_*`` function receives data that already passed the structural
schema check and adds every semantic problem it finds, with its JSON path, to a
:class:`~calcbuilder.calc.problems.Problems` collector.
"""

from __future__ import annotations

import datetime as dt
import itertools
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

from .problems import Problems, join

__all__ = [
    "About",
    "Band",
    "Decision",
    "TestVector",
    "parse_about",
    "parse_cautions",
    "parse_decision",
    "parse_test_vectors",
]

MIN_TEST_VECTORS = 5


@dataclass(frozen=True)
class About:
    """Who made the calculator, for whom, and until when it may be used."""

    title: str
    version: str
    intended_use: str
    population: str
    outcome: str
    horizon: str
    released: dt.date
    review_by: dt.date
    exclusions: tuple[str, ...] = ()
    authors: tuple[str, ...] = ()
    organisation: str | None = None
    contact: str | None = None
    references: tuple[str, ...] = ()
    synthetic: bool = False

    def expired(self, today: dt.date | None = None) -> bool:
        """True when ``today`` is after the review-by date."""
        return (today or dt.date.today()) > self.review_by

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "title": self.title,
            "version": self.version,
            "intended_use": self.intended_use,
            "population": self.population,
            "outcome": self.outcome,
            "horizon": self.horizon,
        }
        for name in ("exclusions", "authors"):
            if getattr(self, name):
                out[name] = list(getattr(self, name))
        for name in ("organisation", "contact"):
            if getattr(self, name) is not None:
                out[name] = getattr(self, name)
        out["released"] = self.released.isoformat()
        out["review_by"] = self.review_by.isoformat()
        if self.references:
            out["references"] = list(self.references)
        if self.synthetic:
            out["synthetic"] = True
        return out


def _date(raw: str, path: str, problems: Problems) -> dt.date | None:
    try:
        return dt.date.fromisoformat(raw)
    except ValueError:
        problems.add(path, f"must be a real calendar date YYYY-MM-DD; got {raw!r}")
        return None


def parse_about(raw: Mapping[str, Any], path: str, problems: Problems) -> About | None:
    """Build :class:`About`; the review-by date must come after the release date."""
    released = _date(raw["released"], join(path, "released"), problems)
    review_by = _date(raw["review_by"], join(path, "review_by"), problems)
    if released and review_by and review_by <= released:
        problems.add(
            join(path, "review_by"),
            f"must be after the release date {released.isoformat()}; got {review_by.isoformat()}",
        )
        return None
    if released is None or review_by is None:
        return None
    return About(
        title=raw["title"],
        version=raw["version"],
        intended_use=raw["intended_use"],
        population=raw["population"],
        outcome=raw["outcome"],
        horizon=raw["horizon"],
        released=released,
        review_by=review_by,
        exclusions=tuple(raw.get("exclusions", ())),
        authors=tuple(raw.get("authors", ())),
        organisation=raw.get("organisation"),
        contact=raw.get("contact"),
        references=tuple(raw.get("references", ())),
        synthetic=bool(raw.get("synthetic", False)),
    )


@dataclass(frozen=True)
class Band:
    """A named risk band: risks below ``upper`` (and at or above the previous band's)."""

    label: str
    upper: float


@dataclass(frozen=True)
class Decision:
    """The authors' default decision threshold and the range they consider reasonable."""

    default_threshold: float
    reasonable_range: tuple[float, float]
    rationale: str = ""
    bands: tuple[Band, ...] = ()

    def covers(self, threshold: float) -> bool:
        """True when ``threshold`` lies inside the reasonable range (ends included)."""
        low, high = self.reasonable_range
        return low <= threshold <= high

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "default_threshold": self.default_threshold,
            "reasonable_range": list(self.reasonable_range),
        }
        if self.rationale:
            out["rationale"] = self.rationale
        if self.bands:
            out["bands"] = [{"label": b.label, "upper": b.upper} for b in self.bands]
        return out


def parse_decision(raw: Mapping[str, Any], path: str, problems: Problems) -> Decision | None:
    """Build :class:`Decision`: range increasing, default inside it, bands increasing to 1."""
    before = len(problems.items)
    low, high = raw["reasonable_range"]
    if not low < high:
        problems.add(
            join(path, "reasonable_range"), f"must be increasing [low, high]; got [{low}, {high}]"
        )
    elif not low <= raw["default_threshold"] <= high:
        problems.add(
            join(path, "default_threshold"),
            f"must lie inside reasonable_range [{low}, {high}]; got {raw['default_threshold']}",
        )
    bands = tuple(Band(b["label"], float(b["upper"])) for b in raw.get("bands", ()))
    uppers = [b.upper for b in bands]
    if bands and (any(a >= b for a, b in itertools.pairwise(uppers)) or uppers[-1] != 1):
        problems.add(
            join(path, "bands"), f"upper limits must increase and end at 1; got {uppers}"
        )
    if len(problems.items) > before:
        return None
    return Decision(float(raw["default_threshold"]), (float(low), float(high)),
                    raw.get("rationale", ""), bands)


def parse_cautions(raw: list[str], path: str, problems: Problems) -> tuple[str, ...] | None:
    """At least one caution text is required; blank texts are refused."""
    if not raw:
        problems.add(path, "at least one caution text is required")
        return None
    blank = [i for i, text in enumerate(raw) if not text.strip()]
    for i in blank:
        problems.add(join(path, i), "must not be blank")
    return None if blank else tuple(raw)


@dataclass(frozen=True)
class TestVector:
    """An input set with the risk the original analysis software computed for it."""

    __test__ = False  # not a pytest test class despite the name

    name: str
    values: Mapping[str, Any] = field(default_factory=dict)
    risk: float = 0.0

    def to_dict(self) -> dict[str, Any]:
        return {"name": self.name, "values": dict(self.values), "risk": self.risk}


def parse_test_vectors(
    raw: list[Mapping[str, Any]], path: str, problems: Problems, input_ids: set[str]
) -> tuple[TestVector, ...] | None:
    """At least five vectors with distinct names, naming only known inputs."""
    before = len(problems.items)
    if len(raw) < MIN_TEST_VECTORS:
        problems.add(path, f"at least {MIN_TEST_VECTORS} test vectors are required; got {len(raw)}")
    seen: set[str] = set()
    for i, vec in enumerate(raw):
        if vec["name"] in seen:
            problems.add(join(join(path, i), "name"), f"duplicate test vector name {vec['name']!r}")
        seen.add(vec["name"])
        unknown = sorted(set(vec["values"]) - input_ids)
        if unknown:
            problems.add(join(join(path, i), "values"), f"no input named {', '.join(unknown)}")
    if len(problems.items) > before:
        return None
    return tuple(
        TestVector(v["name"], MappingProxyType(dict(v["values"])), float(v["risk"])) for v in raw
    )
