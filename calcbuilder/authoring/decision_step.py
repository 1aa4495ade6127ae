"""Step 5, Decision: default threshold, reasonable range with its rationale, named risk bands.

Thresholds and band limits are risks as proportions (0.10 for 10%), typed as
text and judged by :meth:`Recipe.from_dict <calcbuilder.evidence.Recipe.from_dict>`
(``decision.default_threshold: must lie inside reasonable_range ...``).
:meth:`DecisionStep.marks` gives what the decision-curve preview draws while the
author edits: plain numbers read from the fields, or None where a field does
not read as a risk yet.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from .inputs_step import number_or_text

__all__ = ["DecisionStep"]


def _given(text: str) -> Any:
    value = number_or_text(text)
    return text if value is None else value


def _risk(text: str) -> float | None:
    value = number_or_text(text)
    if isinstance(value, int | float) and 0 < value < 1:
        return float(value)
    return None


@dataclass
class DecisionStep:
    """The ``[decision]`` fields as typed."""

    default_threshold: str = "0.1"
    range_low: str = "0.05"
    range_high: str = "0.3"
    rationale: str = ""
    bands: list[tuple[str, str]] = field(default_factory=list)

    def decision_dict(self) -> dict[str, Any]:
        """The recipe's ``[decision]`` table."""
        out: dict[str, Any] = {}
        threshold = number_or_text(self.default_threshold)
        if threshold is not None:
            out["default_threshold"] = threshold
        out["reasonable_range"] = [number_or_text(self.range_low),
                                   number_or_text(self.range_high)]
        out["rationale"] = self.rationale
        if self.bands:
            out["bands"] = [{"label": label, "upper": _given(upper)} for label, upper in self.bands]
        return out

    def marks(self) -> tuple[float | None, tuple[float, float] | None]:
        """(threshold, reasonable range) for the decision-curve preview, where they read."""
        low, high = _risk(self.range_low), _risk(self.range_high)
        span = (low, high) if low is not None and high is not None and low < high else None
        return _risk(self.default_threshold), span

    def to_dict(self) -> dict[str, Any]:
        return {"default_threshold": self.default_threshold, "range_low": self.range_low,
                "range_high": self.range_high, "rationale": self.rationale,
                "bands": [list(b) for b in self.bands]}

    @classmethod
    def from_dict(cls, raw: Mapping[str, Any]) -> DecisionStep:
        return cls(default_threshold=str(raw.get("default_threshold", "0.1")),
                   range_low=str(raw.get("range_low", "0.05")),
                   range_high=str(raw.get("range_high", "0.3")),
                   rationale=str(raw.get("rationale", "")),
                   bands=[(str(b[0]), str(b[1])) for b in raw.get("bands", [])])
