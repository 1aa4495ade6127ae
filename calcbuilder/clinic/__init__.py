"""The clinic side without Qt: one patient's session, the decision threshold, net benefit.

* :mod:`.session` -- :class:`ClinicSession` (values as typed, checks, risk,
  natural frequency, cohort position, contributions, banners);
* :mod:`.threshold` -- :class:`Threshold`, the decision threshold in three forms;
* :mod:`.benefit` -- net benefit at the threshold from the most trustworthy evidence.

Only the standard library, numpy and calcbuilder.calc are imported here, so the
clinic form starts quickly. Nothing about a patient is ever written by this package.
"""

from .benefit import NetBenefit, net_benefit_at, risk_versus_threshold
from .session import ClinicSession, Contribution, PatientResult, ValueLine, natural_frequency
from .threshold import Threshold, ThresholdError, format_percent

__all__ = [
    "ClinicSession",
    "Contribution",
    "NetBenefit",
    "PatientResult",
    "Threshold",
    "ThresholdError",
    "ValueLine",
    "format_percent",
    "natural_frequency",
    "net_benefit_at",
    "risk_versus_threshold",
]
