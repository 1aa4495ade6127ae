"""Step 3, Fit and assess: the settings of the long steps, and what they produced.

:class:`AssessStep` holds the settings as typed (seed, resamples, external data
sets, the recalibration, the reference calculator) and the results: the
calculator document after the stages run so far, the stages themselves (so the
same sequence can be run again with final texts before publishing), ROC points
and the comparison, and the *basis* the results were made from -- a digest of
the recipe, the data file and the settings. When the basis of the current
workspace differs, the results are out of date (:meth:`AssessStep.state`).

The evidence numbers shown beside the plots are read from the document's
evidence sets (:meth:`AssessStep.evidence_rows`); nothing is computed here.
"""

from __future__ import annotations

import random
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ._paths import absolute, relative
from .pipeline import StageResult

__all__ = ["METRIC_NAMES", "AssessStep", "EvidenceRow", "ExternalData"]

METRIC_NAMES = {"auc": "AUC", "calibration_intercept": "Calibration intercept",
                "calibration_slope": "Calibration slope", "brier": "Brier score",
                "scaled_brier": "Scaled Brier score", "ici": "ICI", "oe_ratio": "O:E ratio"}
"""Metrics shown beside the plots, in order, with their names on screen."""
RECAL_METHODS = ("intercept", "slope")


@dataclass
class ExternalData:
    """An external validation data set (outcome and event: as recorded, when blank)."""

    path: Path | None = None
    label: str = ""
    outcome: str = ""
    event: str = ""


@dataclass(frozen=True)
class EvidenceRow:
    """One evidence set as shown: id, kind, label, n, events and metric texts."""

    id: str
    kind: str
    label: str
    n: int
    events: int
    metrics: dict[str, str]


def _metric_text(m: Mapping[str, Any] | None) -> str:
    if not m or m.get("value") is None:
        return "-"
    text = f"{round(m['value'], 3) + 0.0:.3f}"  # + 0.0: never print -0.000
    if m.get("low") is not None and m.get("high") is not None:
        text += f" ({round(m['low'], 3) + 0.0:.3f} to {round(m['high'], 3) + 0.0:.3f})"
    return text


def _whole(text: str, name: str, low: int, problems: dict[str, list[str]]) -> int | None:
    try:
        value = int(text.strip())
    except ValueError:
        problems.setdefault(name, []).append(f"must be a whole number (got {text!r})")
        return None
    if value < low:
        problems.setdefault(name, []).append(f"must be at least {low} (got {value})")
        return None
    return value


@dataclass
class AssessStep:
    """Settings and results of fitting and assessing (see the module notes)."""

    seed: str = field(default_factory=lambda: str(random.SystemRandom().randrange(1, 2**31)))
    band_boot: str = "200"
    n_boot: str = "200"
    firth: bool = False
    externals: list[ExternalData] = field(default_factory=list)
    recal_path: Path | None = None
    recal_method: str = "intercept"
    recal_label: str = ""
    reference_path: Path | None = None
    compare_path: Path | None = None
    compare_cuts: str = ""
    document: dict[str, Any] | None = None
    stages: list[dict[str, Any]] = field(default_factory=list)
    lines: list[str] = field(default_factory=list)
    roc: dict[str, tuple[list[float], list[float]]] = field(default_factory=dict)
    comparison: dict[str, Any] | None = None
    basis: str | None = None
    model_basis: str | None = None
    draft_texts: bool = False

    # -- settings -----------------------------------------------------------------------------

    def settings_problems(self) -> dict[str, list[str]]:
        """Problems of the typed settings, by field key (``assess.seed``, ...)."""
        problems: dict[str, list[str]] = {}
        _whole(self.seed, "assess.seed", 0, problems)
        _whole(self.band_boot, "assess.band_boot", 0, problems)
        _whole(self.n_boot, "assess.n_boot", 1, problems)
        for k, ext in enumerate(self.externals):
            if ext.path is None:
                problems.setdefault(f"assess.externals[{k}]", []).append("choose a data file")
            if not ext.label.strip():
                problems.setdefault(f"assess.externals[{k}].label", []).append(
                    "required: name the data set (e.g. 'Hospital B, 2025')")
        if self.recal_method not in RECAL_METHODS:
            problems.setdefault("assess.recal_method", []).append(
                f"must be one of {', '.join(RECAL_METHODS)}")
        return problems

    def numbers(self) -> tuple[int, int, int]:
        """(seed, band_boot, n_boot); ValueError when a setting is not usable."""
        if self.settings_problems():
            raise ValueError("the fit settings have problems")
        return int(self.seed), int(self.band_boot), int(self.n_boot)

    # -- results ------------------------------------------------------------------------------

    def state(self, basis: str | None, model_basis: str | None) -> str:
        """``none`` (nothing run), ``current``, ``texts`` (only about/decision/cautions
        changed: numbers still right, publishing runs the stages again) or ``stale``."""
        if self.document is None:
            return "none"
        if model_basis != self.model_basis:
            return "stale"
        return "current" if basis == self.basis and not self.draft_texts else "texts"

    def start(self, result: StageResult, spec: dict[str, Any], *, basis: str,
              model_basis: str, draft_texts: bool) -> None:
        """Results of a fit (or import): everything earlier is replaced."""
        self.document, self.stages = result.document, [spec]
        self.lines, self.roc = list(result.lines), dict(result.roc)
        self.comparison = None
        self.basis, self.model_basis, self.draft_texts = basis, model_basis, draft_texts

    def add(self, result: StageResult, spec: dict[str, Any]) -> None:
        """Results of a later stage (bootstrap, external, recalibrate, compare)."""
        self.document = result.document
        self.stages.append(spec)
        self.lines += ["", *result.lines]
        self.roc.update(result.roc)
        if result.comparison is not None:
            self.comparison = result.comparison

    def clear(self) -> None:
        self.document, self.stages, self.lines, self.roc = None, [], [], {}
        self.comparison, self.basis, self.model_basis, self.draft_texts = None, None, None, False

    def evidence(self) -> list[dict[str, Any]]:
        return list((self.document or {}).get("evidence", []))

    def evidence_rows(self) -> list[EvidenceRow]:
        """Every evidence set with its metrics as text (corrected values for bootstrap sets)."""
        out = []
        for ev in self.evidence():
            metrics = {name: _metric_text(ev.get("metrics", {}).get(name))
                       for name in METRIC_NAMES}
            ds = ev.get("dataset", {})
            out.append(EvidenceRow(ev["id"], ev["kind"], ev["label"], int(ds.get("n", 0)),
                                   int(ds.get("events", 0)), metrics))
        return out

    def has_stage(self, kind: str) -> bool:
        return any(s["stage"] == kind for s in self.stages)

    # -- project file ---------------------------------------------------------------------------

    def to_dict(self, base: Path | None) -> dict[str, Any]:
        return {
            "seed": self.seed, "band_boot": self.band_boot, "n_boot": self.n_boot,
            "firth": self.firth,
            "externals": [{"path": relative(e.path, base), "label": e.label,
                           "outcome": e.outcome, "event": e.event} for e in self.externals],
            "recalibration": {"path": relative(self.recal_path, base),
                              "method": self.recal_method, "label": self.recal_label},
            "compare": {"reference": relative(self.reference_path, base),
                        "data": relative(self.compare_path, base), "cuts": self.compare_cuts},
            "results": {"document": self.document, "stages": self.stages, "lines": self.lines,
                        "roc": {k: [list(v[0]), list(v[1])] for k, v in self.roc.items()},
                        "comparison": self.comparison, "basis": self.basis,
                        "model_basis": self.model_basis, "draft_texts": self.draft_texts},
        }

    @classmethod
    def from_dict(cls, raw: Mapping[str, Any], base: Path | None) -> AssessStep:
        recal, cmp_ = raw.get("recalibration") or {}, raw.get("compare") or {}
        res = raw.get("results") or {}
        return cls(
            seed=str(raw.get("seed", "1")), band_boot=str(raw.get("band_boot", "200")),
            n_boot=str(raw.get("n_boot", "200")), firth=bool(raw.get("firth", False)),
            externals=[ExternalData(absolute(e.get("path"), base), str(e.get("label", "")),
                                    str(e.get("outcome", "")), str(e.get("event", "")))
                       for e in raw.get("externals", [])],
            recal_path=absolute(recal.get("path"), base),
            recal_method=str(recal.get("method", "intercept")),
            recal_label=str(recal.get("label", "")),
            reference_path=absolute(cmp_.get("reference"), base),
            compare_path=absolute(cmp_.get("data"), base), compare_cuts=str(cmp_.get("cuts", "")),
            document=res.get("document"), stages=list(res.get("stages", [])),
            lines=list(res.get("lines", [])),
            roc={k: (list(v[0]), list(v[1])) for k, v in (res.get("roc") or {}).items()},
            comparison=res.get("comparison"), basis=res.get("basis"),
            model_basis=res.get("model_basis"), draft_texts=bool(res.get("draft_texts")))
