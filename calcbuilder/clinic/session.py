"""One patient at the clinic form: values as typed, checks, risk and its plain-word forms.

:class:`ClinicSession` holds what the clinician typed (in memory only; nothing
is ever written by this module) and gives a :class:`PatientResult`: every
input's messages, and -- when no message blocks -- the risk, its interval, the
contributions, the natural frequency, where the risk falls in the development
cohort, and the values used as they will be printed.

Natural frequency rule (the same denominator everywhere on the form and sheet):
the denominator is 100, or 1,000 when the risk is below 1% or above 99%;
``N = round(risk x denominator)`` rounding half up. A risk above 0 that rounds to
0 is said as "fewer than 1 in 1,000"; a risk below 1 that rounds to 1,000 as
"more than 999 in 1,000". Otherwise: "about N in 100 people like this".

Cohort position: the percentage of the development cohort (the ``apparent``
evidence set, else ``bootstrap``, with a ``risk_histogram``) whose predicted
risk is lower, taking patients as spread evenly within each histogram bin.

Module-level imports: standard library, numpy and calcbuilder.calc only
(the clinic form's start-up path).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, NamedTuple

import numpy as np

from ..calc import messages as say
from ..calc.checking import PatientCheck, check_patient
from ..calc.document import Calculator, LoadedCalculator
from ..calc.evidence_sets import EvidenceSet
from ..calc.inputs import InputSpec
from ..calc.messages import Message
from ..calc.numbers import format_number, format_significant
from ..calc.scoring import score
from ..calc.signing import TrustState
from ..errors import InputValueError
from .benefit import NetBenefit, net_benefit_at
from .reference import reference_contributions
from .threshold import Threshold, format_percent

__all__ = [
    "SYNTHETIC_NOTICE",
    "ClinicSession",
    "Contribution",
    "PatientResult",
    "ValueLine",
    "cohort_percentile",
    "natural_frequency",
]

SYNTHETIC_NOTICE = ("SYNTHETIC, NOT FOR CLINICAL USE: this calculator is demonstration or test "
                    "material built from made-up data.")


class Contribution(NamedTuple):
    """One input's contribution to the linear predictor (``input_id, label, value``)."""

    input_id: str
    label: str
    value: float


class ValueLine(NamedTuple):
    """One value as used and printed: ``"1.2 mg/dL (= 106 µmol/L)"``, ``"yes"``, a choice label."""

    input_id: str
    label: str
    text: str
    extrapolated: bool


@dataclass(frozen=True)
class PatientResult:
    """The checked values and, when they allow it, the risk and its plain-word forms.

    Attributes
    ----------
    check : PatientCheck
        Every input's canonical value and messages.
    risk, low, high : float or None
        Risk and interval (``low``/``high`` None when the file has no covariance).
    interval_note : str or None
        How the interval was made.
    contributions : tuple of Contribution
        Each input's contribution to the linear predictor compared with the
        reference patient (:mod:`calcbuilder.clinic.reference`), sorted by
        absolute value, largest first (ties keep the input order).
    frequency : (int, int) or None
        ``(N, denominator)``, see the module notes.
    phrase : str or None
        ``"about 12 in 100 people like this"``.
    cohort_percentile : float or None
        Percentage of the development cohort with a lower predicted risk.
    values_used : tuple of ValueLine
        Every input as it will be printed (only when the risk was computed).
    model_needs : tuple of Message
        Optional inputs left empty that the model nevertheless reads (blocking).
    """

    check: PatientCheck
    risk: float | None = None
    low: float | None = None
    high: float | None = None
    interval_note: str | None = None
    contributions: tuple[Contribution, ...] = ()
    frequency: tuple[int, int] | None = None
    phrase: str | None = None
    cohort_percentile: float | None = None
    values_used: tuple[ValueLine, ...] = ()
    model_needs: tuple[Message, ...] = ()

    @property
    def ok(self) -> bool:
        """True when the risk was computed."""
        return self.risk is not None

    @property
    def messages(self) -> dict[str, tuple[Message, ...]]:
        """Messages by input id (see :attr:`PatientCheck.messages`), plus :attr:`model_needs`."""
        out = self.check.messages
        for message in self.model_needs:
            out[message.input_id] = (*out.get(message.input_id, ()), message)
        return out

    @property
    def all_messages(self) -> tuple[Message, ...]:
        """Every message in the calculator's input order."""
        return tuple(m for ms in self.messages.values() for m in ms)

    @property
    def extrapolated(self) -> tuple[str, ...]:
        """Ids of inputs outside the range the model was developed on."""
        return self.check.extrapolated


def _half_up(x: float) -> int:
    return math.floor(round(x, 9) + 0.5)


def natural_frequency(risk: float) -> tuple[int, int, str]:
    """``(N, denominator, phrase)`` for ``risk`` (rule in the module notes).

    Examples
    --------
    >>> natural_frequency(0.123)
    (12, 100, 'about 12 in 100 people like this')
    >>> natural_frequency(0.0004)
    (0, 1000, 'fewer than 1 in 1,000 people like this')
    """
    denominator = 1000 if (risk < 0.01 or risk > 0.99) else 100
    n = _half_up(risk * denominator)
    if n == 0 and risk > 0:
        return 0, denominator, f"fewer than 1 in {denominator:,} people like this"
    if n == denominator and risk < 1:
        return n, denominator, f"more than {denominator - 1:,} in {denominator:,} people like this"
    return n, denominator, f"about {n:,} in {denominator:,} people like this"


def _development_histogram(sets: tuple[EvidenceSet, ...]) -> EvidenceSet | None:
    for kind in ("apparent", "bootstrap"):
        found = [e for e in sets if e.kind == kind and "risk_histogram" in e.raw]
        if found:
            return found[-1]
    return None


def cohort_percentile(evidence: EvidenceSet, risk: float) -> float | None:
    """Percentage of the evidence set's cohort with a lower predicted risk (None if unusable)."""
    h = evidence.raw["risk_histogram"]
    edges = np.array([np.nan if e is None else e for e in h["edges"]], dtype=float)
    counts = np.add(np.asarray(h["events"], dtype=float), np.asarray(h["nonevents"], dtype=float))
    widths = np.diff(edges)
    if not (np.all(np.isfinite(edges)) and np.all(widths > 0) and counts.sum() > 0):
        return None
    share = np.clip((risk - edges[:-1]) / widths, 0.0, 1.0)
    return float(100.0 * np.sum(share * counts) / counts.sum())


def _number_text(spec: InputSpec, value: float, unit: str | None, comma: bool | None) -> str:
    def canonical_text(v: float) -> str:
        if spec.decimals is not None:
            return format_number(v, decimals=spec.decimals, decimal_comma=comma)
        return format_significant(v, 6, decimal_comma=comma)

    conv = spec.unit_named(unit)
    base = f"{canonical_text(value)} {spec.unit or ''}".strip()
    if conv is None or conv.is_identity:
        return base
    entered = format_significant(conv.from_canonical(value), 10, decimal_comma=comma)
    return f"{entered} {conv.unit} (= {base})"


def _value_text(spec: InputSpec, value: Any, unit: str | None, comma: bool | None) -> str:
    if value is None:
        return "not given"
    if spec.kind == "yes_no":
        return "yes" if value else "no"
    if spec.kind == "choice":
        choice = spec.choice(str(value))
        return choice.label if choice else str(value)
    return _number_text(spec, float(value), unit, comma)


class ClinicSession:
    """One patient's values for one calculator, in memory only.

    Parameters
    ----------
    loaded : LoadedCalculator
        The calculator as loaded; a TAMPERED file is refused here
        (:class:`calcbuilder.errors.CalcFileError`).
    decimal_comma : bool or None
        ``True`` when numbers are typed (and shown) with a decimal comma.
    """

    def __init__(self, loaded: LoadedCalculator, *, decimal_comma: bool | None = None) -> None:
        loaded.require_computable()
        self.loaded = loaded
        self._specs = {spec.id: spec for spec in loaded.calculator.inputs}
        self._decimal_comma = decimal_comma
        self._values: dict[str, object] = {}
        self._units: dict[str, str | None] = {}
        self._patient_ref = ""
        self._threshold = Threshold(loaded.calculator.decision.default_threshold)
        self._result: PatientResult | None = None
        self._benefit: NetBenefit | None = None
        self._cohort = _development_histogram(loaded.calculator.evidence)
        self._reference: Mapping[str, float] | None = None

    # --- the calculator ----------------------------------------------------------

    @property
    def calculator(self) -> Calculator:
        """The calculator in use."""
        return self.loaded.calculator

    @property
    def inputs(self) -> tuple[InputSpec, ...]:
        """The inputs in the author's order."""
        return self.loaded.calculator.inputs

    @property
    def synthetic(self) -> bool:
        """True for demo and test calculators (always say "synthetic, not for clinical use")."""
        return self.calculator.about.synthetic

    @property
    def banners(self) -> tuple[str, ...]:
        """Permanent notices: synthetic, unsigned or unknown signer, past the review date."""
        out = [SYNTHETIC_NOTICE] if self.synthetic else []
        if self.loaded.state is not TrustState.VERIFIED:
            out.append(self.loaded.verification.message)
        if self.loaded.expired:
            out.append(f"Past its review date ({self.calculator.about.review_by.isoformat()}): "
                       "the authors meant to re-check this calculator by then. Ask them for a "
                       "current version.")
        return tuple(out)

    @property
    def banner(self) -> str | None:
        """All :attr:`banners` in one text, or None when there is nothing to say."""
        return " ".join(self.banners) or None

    # --- what the clinician types ------------------------------------------------

    def _spec(self, input_id: str) -> InputSpec:
        try:
            return self._specs[input_id]
        except KeyError:
            known = ", ".join(self._specs)
            raise InputValueError(f"'{input_id}' is not an input of this calculator; its "
                                  f"inputs are: {known}") from None

    def _changed(self) -> None:
        self._result = None

    def set_value(self, input_id: str, raw: object) -> None:
        """Set a value as entered: text as typed, ``True``/``False``, a choice value, or None."""
        self._spec(input_id)
        self._values[input_id] = raw
        self._changed()

    def value(self, input_id: str) -> object:
        """The value as entered (None when empty)."""
        self._spec(input_id)
        return self._values.get(input_id)

    def set_unit(self, input_id: str, unit: str | None) -> None:
        """Choose the unit a number is entered in (None: the calculator's own unit)."""
        self._spec(input_id)
        self._units[input_id] = unit
        self._changed()

    def unit(self, input_id: str) -> str | None:
        """The unit chosen for an input (its canonical unit unless changed)."""
        return self._units.get(input_id) or self._spec(input_id).unit

    @property
    def decimal_comma(self) -> bool | None:
        """``True`` when numbers are typed and shown with a decimal comma."""
        return self._decimal_comma

    @decimal_comma.setter
    def decimal_comma(self, value: bool | None) -> None:
        self._decimal_comma = value
        self._changed()

    @property
    def patient_ref(self) -> str:
        """A reference printed on the sheet (never stored)."""
        return self._patient_ref

    def set_patient_ref(self, text: str | None) -> None:
        """Set the patient reference to print (blank: none)."""
        self._patient_ref = (text or "").strip()

    @property
    def threshold(self) -> Threshold:
        """The decision threshold in use (the calculator's default until changed)."""
        return self._threshold

    def set_threshold(self, threshold: Threshold) -> None:
        """Use another decision threshold."""
        self._threshold = threshold
        self._benefit = None

    def clear(self) -> None:
        """Wipe every value and the patient reference; units back to the calculator's own."""
        self._values.clear()
        self._units.clear()
        self._patient_ref = ""
        self._changed()

    # --- results -----------------------------------------------------------------

    def result(self) -> PatientResult:
        """Check every value and, when nothing blocks, compute the risk (cached until a change)."""
        if self._result is None:
            self._result = self._compute()
        return self._result

    def benefit(self, threshold: Threshold | None = None) -> NetBenefit:
        """Net benefit at ``threshold`` (default: :attr:`threshold`), from the evidence."""
        if threshold is not None and threshold != self._threshold:
            return net_benefit_at(self.calculator, threshold)
        if self._benefit is None:
            self._benefit = net_benefit_at(self.calculator, self._threshold)
        return self._benefit

    def _compute(self) -> PatientResult:
        check = check_patient(self.inputs, self._values, units=self._units,
                              decimal_comma=self._decimal_comma)
        model = self.calculator.model
        unread = tuple(Message.of(spec.id, "missing", say.missing(spec.label))
                       for spec in self.inputs
                       if spec.id in model.inputs_read and check.values[spec.id] is None
                       and check.checked[spec.id].ok)
        if not check.ok or unread:
            return PatientResult(check, model_needs=unread)
        s = score(model, {k: [check.values[k]] for k in model.inputs_read})
        risk = float(s.risk[0])
        n, denominator, phrase = natural_frequency(risk)
        interval = s.interval_available
        return PatientResult(
            check=check, risk=risk,
            low=float(s.low[0]) if interval else None,
            high=float(s.high[0]) if interval else None,
            interval_note=s.interval_note,
            contributions=self._contributions({k: float(v[0]) for k, v in
                                               s.contributions.items()}),
            frequency=(n, denominator), phrase=phrase,
            cohort_percentile=cohort_percentile(self._cohort, risk) if self._cohort else None,
            values_used=self._value_lines(check),
        )

    def _contributions(self, raw: dict[str, float]) -> tuple[Contribution, ...]:
        """Contributions compared with the reference patient (see :mod:`.reference`)."""
        if self._reference is None:
            self._reference = reference_contributions(self.calculator)
        ref = self._reference
        items = [Contribution(spec.id, spec.label, raw[spec.id] - ref.get(spec.id, 0.0))
                 for spec in self.inputs if spec.id in raw]
        return tuple(sorted(items, key=lambda c: -abs(c.value)))

    def _value_lines(self, check: PatientCheck) -> tuple[ValueLine, ...]:
        return tuple(
            ValueLine(spec.id, spec.label,
                      _value_text(spec, result.value, result.unit, self._decimal_comma),
                      result.extrapolated)
            for spec, result in zip(self.inputs, check.checked.values(), strict=True)
        )

    def cohort_sentence(self) -> str | None:
        """Where the risk falls among the development cohort, in words (None if unknown)."""
        result = self.result()
        if result.cohort_percentile is None or self._cohort is None or result.risk is None:
            return None
        pct = result.cohort_percentile
        share = ("fewer than 1%" if pct < 1 else "more than 99%" if pct > 99
                 else f"about {_half_up(pct)}%")
        name = self._cohort.raw["dataset"]["name"]
        return (f"In the development data from {name}, {share} of patients had a lower estimated "
                f"risk than {format_percent(result.risk, decimal_comma=self._decimal_comma)}.")
