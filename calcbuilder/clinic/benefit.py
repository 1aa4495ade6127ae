"""Net benefit at the chosen decision threshold, in plain words (methods.md 4.1).

The numbers come from the most trustworthy evidence set holding a decision
curve (external > recalibrated > bootstrap > apparent > imported, see
:func:`calcbuilder.calc.evidence_sets.most_trustworthy`); nothing is recomputed
from patient data. At a threshold ``pt`` between two stored thresholds the net
benefit of the model and of treat-all are interpolated linearly; treat-all is
also computed from its closed form ``prev - (1 - prev) * pt / (1 - pt)`` as a
cross-check (:attr:`NetBenefit.treat_all_exact`). Treat-none is 0.

What the numbers mean, per 100 people like those in the evidence set
(``w = pt / (1 - pt)``, the harm : benefit ratio):

* ``100 * NB_model`` = people with the outcome found per 100, net of the
  unnecessary interventions (each weighted ``w``): deciding by the model is worth
  the same as finding that many people with the outcome and intervening for no
  one else;
* ``100 * (NB_model - NB_all) / w`` = net unnecessary interventions avoided per
  100 compared with intervening for everyone, with no one with the outcome missed
  (Vickers et al. 2008, methods.md 4.1).

The model "does better" than a default only when its net benefit is higher by
more than ``1e-9``; a tie counts as not better.

Only the standard library, numpy and calcbuilder.calc are imported (start-up path).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..calc.document import Calculator
from ..calc.evidence_sets import EvidenceSet, most_trustworthy
from .threshold import Threshold, format_percent

__all__ = [
    "EVIDENCE_KIND_WORDS",
    "NetBenefit",
    "evidence_source_text",
    "net_benefit_at",
    "risk_versus_threshold",
]

EVIDENCE_KIND_WORDS = {
    "external": "external validation in another population",
    "recalibrated": "validation after recalibration to a new population",
    "bootstrap": "development data, corrected for optimism by bootstrap",
    "apparent": "development data, not corrected for optimism",
    "imported": "evidence imported from another source",
}
_TIE = 1e-9


@dataclass(frozen=True)
class NetBenefit:
    """Net benefit at one threshold and what it means, ready to show or print.

    Attributes
    ----------
    threshold : Threshold
    evidence : EvidenceSet or None
        The evidence set the numbers come from (None when no set has a decision curve).
    covered : bool
        True when the threshold lies in the authors' reasonable range.
    model, treat_all : float or None
        Net benefit of deciding by the model and of intervening for everyone
        (None when the evidence cannot give them at this threshold).
    treat_all_exact : float or None
        Treat-all from its closed form with the evidence set's prevalence.
    treat_none : float
        Always 0.
    statements : tuple of str
        The comparison with no one and with everyone, in plain words.
    warnings : tuple of str
        Not covered by the evidence; the model does not do better than a default.
    source : str
        Which evidence set the numbers come from, in words.
    """

    threshold: Threshold
    evidence: EvidenceSet | None
    covered: bool
    model: float | None
    treat_all: float | None
    treat_all_exact: float | None
    statements: tuple[str, ...]
    warnings: tuple[str, ...]
    source: str
    treat_none: float = 0.0

    @property
    def available(self) -> bool:
        """True when the evidence gives net benefit at this threshold."""
        return self.model is not None and self.treat_all is not None

    @property
    def beats_treat_all(self) -> bool | None:
        """The model's net benefit is higher than intervening for everyone (None: unknown)."""
        if self.model is None or self.treat_all is None:
            return None
        return self.model > self.treat_all + _TIE

    @property
    def beats_treat_none(self) -> bool | None:
        """The model's net benefit is higher than intervening for no one (None: unknown)."""
        return None if self.model is None else self.model > _TIE

    @property
    def interventions_avoided(self) -> float | None:
        """Net unnecessary interventions avoided per 100, against intervening for everyone."""
        if self.model is None or self.treat_all is None:
            return None
        return (self.model - self.treat_all) / self.threshold.odds * 100.0


def evidence_source_text(evidence: EvidenceSet) -> str:
    """``"Test Site B: external validation ... (1,500 people, 412 with the outcome)"``."""
    kind = EVIDENCE_KIND_WORDS.get(evidence.kind, evidence.kind)
    return (f"{evidence.label}: {kind} ({evidence.n:,} people, {evidence.events:,} with the "
            "outcome)")


def _interp(x: float, xs: np.ndarray, ys: np.ndarray) -> float | None:
    """Linear interpolation at ``x``; None outside the grid or next to a missing value."""
    if xs.size == 0 or not xs[0] <= x <= xs[-1]:
        return None
    j = int(np.searchsorted(xs, x, side="left"))
    if xs[j] == x:
        return None if math.isnan(ys[j]) else float(ys[j])
    y0, y1 = ys[j - 1], ys[j]
    if math.isnan(y0) or math.isnan(y1):
        return None
    return float(y0 + (y1 - y0) * (x - xs[j - 1]) / (xs[j] - xs[j - 1]))


def _column(curve: Mapping[str, Any], key: str) -> np.ndarray:
    return np.array([np.nan if v is None else v for v in curve.get(key, ())], dtype=float)


def _per100(value: float) -> str:
    shown = abs(value) * 100
    return "less than 0.1" if shown < 0.05 else f"{shown:.1f}"


def _statements(nb_model: float, nb_all: float, odds: float) -> tuple[str, str]:
    if nb_model > _TIE:
        none = ("Compared with intervening for no one: deciding by the model is worth the "
                f"same as, in every 100 people, finding {_per100(nb_model)} who would have the "
                "outcome and intervening for no one else.")
    elif nb_model < -_TIE:
        none = ("Compared with intervening for no one: deciding by the model does worse, by "
                f"the equivalent of {_per100(nb_model)} people with the outcome in every 100 "
                "people.")
    else:
        none = ("Compared with intervening for no one: deciding by the model gives no net "
                "benefit at this threshold (the two are equal).")
    avoided = (nb_model - nb_all) / odds
    if avoided * odds > _TIE:
        everyone = ("Compared with intervening for everyone: deciding by the model is worth the "
                    f"same as {_per100(avoided)} fewer unnecessary interventions in every 100 "
                    "people, with no one who would have the outcome missed.")
    else:
        everyone = ("Compared with intervening for everyone: deciding by the model does not do "
                    "better; intervening for everyone is worth the same as, in every 100 "
                    f"people, finding {_per100(nb_all - nb_model)} more who would have the "
                    "outcome, with no extra unnecessary interventions.")
    return none, everyone


def _lag_warning(beats_all: bool, beats_none: bool, pct: str) -> str | None:
    if beats_all and beats_none:
        return None
    if not beats_all and not beats_none:
        which = "intervening for everyone or for no one"
    else:
        which = "intervening for no one" if beats_all else "intervening for everyone"
    return (f"At a threshold of {pct} the evidence shows no advantage of deciding by the model "
            f"over {which}; the model's estimate may add little to this decision.")


def _range_warning(calc: Calculator, threshold: Threshold) -> str | None:
    if calc.decision.covers(threshold.pt):
        return None
    low, high = calc.decision.reasonable_range
    return (f"Not covered by the evidence: {threshold.percent_text()} lies outside the range of "
            f"thresholds the authors consider reasonable ({format_percent(low)} to "
            f"{format_percent(high)}). {calc.decision.rationale}".strip())


def net_benefit_at(calc: Calculator, threshold: Threshold) -> NetBenefit:
    """Net benefit of deciding by the model, of everyone and of no one, at ``threshold``.

    Parameters
    ----------
    calc : Calculator
        The calculator (its evidence sets and decision section are used).
    threshold : Threshold
        The decision threshold.

    Returns
    -------
    NetBenefit
        Numbers, plain-word statements, warnings and the evidence source.
    """
    warnings = [w for w in (_range_warning(calc, threshold),) if w]
    evidence = most_trustworthy(calc.evidence, needs="decision_curve",
                                recalibrated=calc.model.recalibration is not None)
    if evidence is None:
        warnings.append("Not covered by the evidence: this calculator holds no decision curve, "
                        "so the net benefit of deciding by the model is unknown.")
        return NetBenefit(threshold, None, calc.decision.covers(threshold.pt), None, None, None,
                          (), tuple(warnings), "No evidence set with a decision curve.")
    curve = evidence.raw["decision_curve"]
    xs = _column(curve, "thresholds")
    model = _interp(threshold.pt, xs, _column(curve, "model"))
    treat_all = _interp(threshold.pt, xs, _column(curve, "treat_all"))
    exact = evidence.prevalence - (1 - evidence.prevalence) * threshold.odds
    source = "Net benefit from " + evidence_source_text(evidence) + "."
    statements: tuple[str, ...] = ()
    if model is None or treat_all is None:
        warnings.append(f"Not covered by the evidence: its decision curve does not give a value "
                        f"at {threshold.percent_text()}.")
    else:
        statements = _statements(model, treat_all, threshold.odds)
        lag = _lag_warning(model > treat_all + _TIE, model > _TIE, threshold.percent_text())
        warnings.extend([lag] if lag else [])
    return NetBenefit(threshold, evidence, calc.decision.covers(threshold.pt), model, treat_all,
                      exact, statements, tuple(warnings), source)


def risk_versus_threshold(risk: float, threshold: Threshold, low: float | None = None,
                          high: float | None = None, *, decimal_comma: bool | None = False
                          ) -> str:
    """Where this patient's estimate lies against the threshold, in plain words.

    Examples
    --------
    >>> risk_versus_threshold(0.123, Threshold(0.1))
    "The model's estimate for this patient (12.3%) is above the threshold you chose (10%)."
    """
    def pct(p: float) -> str:
        return format_percent(p, decimal_comma=decimal_comma)

    where = "above" if risk > threshold.pt else "below" if risk < threshold.pt else "exactly at"
    text = (f"The model's estimate for this patient ({pct(risk)}) is {where} the threshold you "
            f"chose ({threshold.percent_text(decimal_comma=decimal_comma)})")
    if low is not None and high is not None and math.isfinite(low) and math.isfinite(high) \
            and low <= threshold.pt <= high and where != "exactly at":
        text += (f"; its 95% interval ({pct(low)} to {pct(high)}) includes the threshold, so "
                 "the estimate could lie on either side")
    return text + "."
