"""The decision threshold in three equivalent forms (design.md 6, methods.md 4.1).

A decision threshold ``pt`` is the risk above which an intervention is favoured.
It can be stated three ways, all exactly equivalent:

* a **percentage**: ``100 * pt``;
* a **number willing to intervene**: ``N = 1 / pt`` -- among people whose risk
  is exactly ``pt``, intervening for ``N`` of them reaches about one who would
  have the outcome, and the threshold says that trade is just acceptable;
* a **harm : benefit** ratio: ``pt / (1 - pt) = harm / benefit``, the harm of
  an unnecessary intervention against the benefit of a needed one.

Rounding rules for display (the stored ``pt`` is never rounded):

* percentages (:func:`format_percent`): one decimal, a trailing ``.0`` dropped
  (``15%``, ``12.5%``); below 1% two significant digits (``0.25%``); never
  shown as 0% or 100%.
* ``N`` and the ratio share one precision, chosen from ``N``: two decimals when
  ``N < 2``, one when ``N < 10``, whole numbers from 10 (``1.67``, ``6.7``, ``12``).
  The ratio is written ``1 : k`` when ``pt <= 50%``, with ``k`` = the shown ``N``
  minus one (exactly, so the two forms always agree), and ``k : 1`` with
  ``k = pt / (1 - pt)`` (one decimal when below 10) when ``pt > 50%``.

Only the standard library is imported (clinic start-up path).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from decimal import ROUND_HALF_UP, Decimal

from ..errors import CalcbuilderError

__all__ = ["Threshold", "ThresholdError", "format_percent", "format_ratio_number"]


class ThresholdError(CalcbuilderError, ValueError):
    """A decision threshold outside (0, 1), or a form that cannot give one."""


def _half_up(value: float, decimals: int) -> str:
    """``value`` rounded half up (as written in decimal) to ``decimals`` places."""
    quantum = Decimal(1).scaleb(-decimals)
    return _plain(Decimal(repr(value)).quantize(quantum, rounding=ROUND_HALF_UP))


def _plain(value: Decimal) -> str:
    text = format(value, "f")
    return text.rstrip("0").rstrip(".") if "." in text else text


def format_percent(p: float, *, decimal_comma: bool | None = False) -> str:
    """A proportion written as a percentage for people (rules in the module notes).

    Examples
    --------
    >>> format_percent(0.15), format_percent(0.125), format_percent(0.0025)
    ('15%', '12.5%', '0.25%')
    >>> format_percent(0.00001), format_percent(0.99999)
    ('less than 0.01%', 'more than 99.9%')
    """
    pct = 100.0 * float(p)
    if not math.isfinite(pct):
        return "unknown"
    if 0 < pct < 0.01:
        text = "less than 0.01%"
    elif 99.95 <= pct < 100:
        text = "more than 99.9%"
    elif 0 < pct < 1:
        digits = 1 - math.floor(math.log10(pct))  # two significant digits
        text = _half_up(pct, digits) + "%"
    else:
        text = _half_up(pct, 1) + "%"
    return text.replace(".", ",") if decimal_comma else text


def format_ratio_number(value: float, decimals: int, *, decimal_comma: bool | None = False
                        ) -> str:
    """``value`` rounded half up to ``decimals`` places, trailing zeros dropped."""
    text = _half_up(value, decimals)
    return text.replace(".", ",") if decimal_comma else text


def _check(pt: float, what: str) -> float:
    if isinstance(pt, bool) or not isinstance(pt, int | float):
        raise ThresholdError(f"{what}: must be a number; got {pt!r}")
    if not (math.isfinite(pt) and 0.0 < pt < 1.0):
        raise ThresholdError(f"decision threshold from {what}: must lie strictly between 0% "
                             "and 100%")
    return float(pt)


@dataclass(frozen=True)
class Threshold:
    """A decision threshold ``pt`` strictly inside (0, 1), shown in three forms.

    Build it with one of the ``from_*`` constructors, which validate.

    Attributes
    ----------
    pt : float
        The threshold as a proportion.
    """

    pt: float

    def __post_init__(self) -> None:
        _check(self.pt, f"the proportion {self.pt!r}")

    # --- constructors -------------------------------------------------------------

    @classmethod
    def from_probability(cls, pt: float) -> Threshold:
        """From a proportion, e.g. 0.15."""
        return cls(_check(pt, f"the proportion {pt!r}"))

    @classmethod
    def from_percent(cls, percent: float) -> Threshold:
        """From a percentage, e.g. 15 for 15%."""
        if isinstance(percent, bool) or not isinstance(percent, int | float):
            raise ThresholdError(f"percentage: must be a number; got {percent!r}")
        return cls(_check(percent / 100.0, f"the percentage {percent:g}%"))

    @classmethod
    def from_number_willing(cls, n: float) -> Threshold:
        """From the number of people one is willing to intervene for to reach one (``N > 1``)."""
        if isinstance(n, bool) or not isinstance(n, int | float) or not n > 1:
            raise ThresholdError(f"number willing to intervene: must be a number above 1 "
                                 f"(1 person would mean a threshold of 100%); got {n!r}")
        return cls(_check(1.0 / n, f"1 in {n:g}"))

    @classmethod
    def from_harm_benefit(cls, harm: float, benefit: float = 1.0) -> Threshold:
        """From a harm : benefit ratio (both positive): ``pt = harm / (harm + benefit)``."""
        for name, value in (("harm", harm), ("benefit", benefit)):
            if isinstance(value, bool) or not isinstance(value, int | float) \
                    or not (math.isfinite(value) and value > 0):
                raise ThresholdError(f"harm : benefit ratio: {name} must be a positive number; "
                                     f"got {value!r}")
        return cls(_check(harm / (harm + benefit), f"the ratio {harm:g} : {benefit:g}"))

    # --- the three forms as numbers ------------------------------------------------

    @property
    def percent(self) -> float:
        """``100 * pt``."""
        return 100.0 * self.pt

    @property
    def number_willing(self) -> float:
        """``N = 1 / pt``: people intervened for to reach one who would have the outcome."""
        return 1.0 / self.pt

    @property
    def odds(self) -> float:
        """``pt / (1 - pt)`` = harm / benefit (the weight of a false positive in net benefit)."""
        return self.pt / (1.0 - self.pt)

    @property
    def harm_benefit(self) -> tuple[float, float]:
        """The ratio as ``(harm, benefit)``, the smaller side equal to 1."""
        return (1.0, 1.0 / self.odds) if self.pt <= 0.5 else (self.odds, 1.0)

    # --- the three forms as text ---------------------------------------------------

    def _decimals(self) -> int:
        n = self.number_willing
        return 2 if n < 2 else 1 if n < 10 else 0

    def percent_text(self, *, decimal_comma: bool | None = False) -> str:
        """``"15%"`` (see :func:`format_percent`)."""
        return format_percent(self.pt, decimal_comma=decimal_comma)

    def number_text(self, *, decimal_comma: bool | None = False) -> str:
        """``N`` as shown: ``"6.7"``, ``"12"``."""
        return format_ratio_number(self.number_willing, self._decimals(),
                                   decimal_comma=decimal_comma)

    def ratio_text(self, *, decimal_comma: bool | None = False) -> str:
        """The harm : benefit ratio as shown: ``"1 : 5.7"`` or ``"1.5 : 1"``."""
        if self.pt <= 0.5:  # k = shown N - 1, exactly, so the two forms always agree
            k = _plain(Decimal(self.number_text()) - 1)
            return f"1 : {k.replace('.', ',') if decimal_comma else k}"
        big = format_ratio_number(self.odds, 1 if self.odds < 10 else 0,
                                  decimal_comma=decimal_comma)
        return f"{big} : 1"

    def sentences(self, *, decimal_comma: bool | None = False) -> tuple[str, str, str]:
        """The three forms in plain words (percentage, number willing, harm : benefit)."""
        n = self.number_text(decimal_comma=decimal_comma)
        return (
            f"Decision threshold: {self.percent_text(decimal_comma=decimal_comma)} risk.",
            f"Intervening for {n} people at this risk to reach 1 who would have the outcome "
            "is the trade this threshold accepts.",
            f"Harm : benefit = {self.ratio_text(decimal_comma=decimal_comma)}: the harm of an "
            "unnecessary intervention weighed against the benefit of a needed one.",
        )
