"""Evidence sets inside a calculator file: validated, read-only views.

An evidence set holds the performance of the model on one dataset. The arrays
(calibration curve, decision curve, histogram) stay as stored; this module
checks that they are consistent with each other and with the dataset, so that
numbers computed elsewhere and imported cannot contradict themselves.
"""

from __future__ import annotations

import itertools
from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any

from .problems import Problems, join

__all__ = [
    "METRIC_LABELS",
    "TRUST_ORDER",
    "EvidenceSet",
    "metric_label",
    "most_trustworthy",
    "parse_evidence",
]

# Which evidence the clinic form prefers for net benefit at a threshold.
TRUST_ORDER = ("external", "recalibrated", "bootstrap", "apparent", "imported")
TREAT_ALL_TOLERANCE = 1e-6

METRIC_LABELS: dict[str, str] = {
    "auc": "AUC (c-statistic)",
    "c_statistic": "c-statistic",
    "brier": "Brier score",
    "scaled_brier": "Scaled Brier score",
    "calibration_intercept": "Calibration intercept (calibration-in-the-large)",
    "calibration_slope": "Calibration slope",
    "ici": "Integrated calibration index (ICI)",
    "e50": "E50 (median absolute calibration error)",
    "e90": "E90 (90th percentile of absolute calibration error)",
    "emax": "Emax (largest absolute calibration error)",
    "hosmer_lemeshow": "Hosmer–Lemeshow χ²",
    "spiegelhalter_z": "Spiegelhalter z",
    "oe_ratio": "Observed / expected events (O/E)",
    "cox_snell_r2": "Cox–Snell R²",
    "nagelkerke_r2": "Nagelkerke R²",
    "prevalence": "Proportion with the outcome",
    "mean_risk": "Mean predicted risk",
    "sensitivity": "Sensitivity",
    "specificity": "Specificity",
    "ppv": "Positive predictive value",
    "npv": "Negative predictive value",
}
"""Labels of the metric names we know; others get :func:`metric_label`'s fallback."""


def metric_label(name: str) -> str:
    """The label of a metric name; an unknown name becomes readable words."""
    if name in METRIC_LABELS:
        return METRIC_LABELS[name]
    words = name.replace("_", " ").strip()
    return words[:1].upper() + words[1:] if words else name


@dataclass(frozen=True)
class EvidenceSet:
    """One evidence set; ``raw`` is the validated dictionary as stored in the file."""

    id: str
    kind: str
    label: str
    n: int
    events: int
    raw: Mapping[str, Any]

    @property
    def prevalence(self) -> float:
        return self.events / self.n

    def metric(self, name: str) -> Mapping[str, Any] | None:
        """A metric's ``{value, low, high, ...}`` mapping, or None when absent."""
        metrics: Mapping[str, Any] = self.raw.get("metrics", {})
        return metrics.get(name)

    def to_dict(self) -> dict[str, Any]:
        return _thaw(self.raw)


def _thaw(value: Any) -> Any:
    if isinstance(value, Mapping):
        return {k: _thaw(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_thaw(v) for v in value]
    return value


def _freeze(value: Any) -> Any:
    if isinstance(value, Mapping):
        return MappingProxyType({k: _freeze(v) for k, v in value.items()})
    if isinstance(value, list):
        return tuple(_freeze(v) for v in value)
    return value


def _same_lengths(block: Mapping[str, Any], keys: tuple[str, ...], path: str,
                  problems: Problems) -> None:
    lengths = {k: len(block[k]) for k in keys if k in block}
    if len(set(lengths.values())) > 1:
        problems.add(path, f"arrays must have equal lengths; got {lengths}")


def _check_decision_curve(dc: Mapping[str, Any], prevalence: float, path: str,
                          problems: Problems) -> None:
    t = dc["thresholds"]
    _same_lengths(dc, ("thresholds", "model", "treat_all", "model_low", "model_high"), path,
                  problems)
    if any(x is None or not 0 < x < 1 for x in t):
        problems.add(join(path, "thresholds"), "must all lie strictly inside (0, 1)")
        return
    if any(a >= b for a, b in itertools.pairwise(t)):
        problems.add(join(path, "thresholds"), "must be strictly increasing")
    for i, (ti, nb_all) in enumerate(zip(t, dc["treat_all"], strict=False)):
        expected = prevalence - (1 - prevalence) * ti / (1 - ti)
        if nb_all is None or abs(nb_all - expected) > TREAT_ALL_TOLERANCE:
            problems.add(
                join(join(path, "treat_all"), i),
                f"net benefit of treating all at threshold {ti} must equal "
                f"prevalence - (1 - prevalence) t/(1 - t) = {expected:.6f} for the stated "
                f"prevalence {prevalence:.4f}; got {nb_all}",
            )
            return


def _check_one(raw: Mapping[str, Any], path: str, problems: Problems) -> None:
    ds = raw["dataset"]
    if ds["events"] > ds["n"]:
        problems.add(join(path, "dataset.events"),
                     f"must not exceed dataset.n ({ds['n']}); got {ds['events']}")
        return
    for name, value in raw["metrics"].items():
        low, high, v = value.get("low"), value.get("high"), value.get("value")
        if None not in (low, high, v) and not low <= v <= high:
            problems.add(join(join(path, "metrics"), name),
                         f"value {v} must lie between low {low} and high {high}")
    if "calibration_curve" in raw:
        _same_lengths(raw["calibration_curve"], ("risk", "observed", "low", "high"),
                      join(path, "calibration_curve"), problems)
    if "risk_histogram" in raw:
        h = raw["risk_histogram"]
        if not len(h["edges"]) == len(h["events"]) + 1 == len(h["nonevents"]) + 1:
            problems.add(join(path, "risk_histogram"),
                         "edges must have one more entry than events and nonevents")
    if "decision_curve" in raw:
        _check_decision_curve(raw["decision_curve"], ds["events"] / ds["n"],
                              join(path, "decision_curve"), problems)


def parse_evidence(raw: list[Mapping[str, Any]], path: str,
                   problems: Problems) -> tuple[EvidenceSet, ...] | None:
    """Validate every evidence set; ids must be unique."""
    before = len(problems.items)
    seen: set[str] = set()
    for i, item in enumerate(raw):
        p = join(path, i)
        if item["id"] in seen:
            problems.add(join(p, "id"), f"duplicate evidence set id {item['id']!r}")
        seen.add(item["id"])
        _check_one(item, p, problems)
    if len(problems.items) > before:
        return None
    return tuple(
        EvidenceSet(e["id"], e["kind"], e["label"], e["dataset"]["n"], e["dataset"]["events"],
                    _freeze(e))
        for e in raw
    )


def most_trustworthy(sets: tuple[EvidenceSet, ...], needs: str = "decision_curve", *,
                     recalibrated: bool = False) -> EvidenceSet | None:
    """The most trustworthy evidence set holding ``needs`` (latest wins ties).

    Order: external, recalibrated, bootstrap-corrected, apparent, imported. When
    the model carries a recalibration (``recalibrated=True``), evidence of kind
    ``recalibrated`` describes the model as it now is and comes first: an
    external set made before the update describes the old model.
    """
    order: tuple[str, ...] = TRUST_ORDER
    if recalibrated:
        order = ("recalibrated", *(k for k in TRUST_ORDER if k != "recalibrated"))
    for kind in order:
        found = [e for e in sets if e.kind == kind and needs in e.raw]
        if found:
            return found[-1]
    return None
