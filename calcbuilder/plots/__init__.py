"""Figure builders shared by the clinic form, the risk sheet and the evidence report.

Every builder takes plain numbers (floats and numpy arrays; risks as proportions
in [0, 1]) and returns a :class:`matplotlib.figure.Figure` made without pyplot,
so it can be shown in a Qt canvas (``FigureCanvasQTAgg(fig)``), saved as PNG or
PDF, or turned into PNG bytes for reportlab with :func:`figure_png_bytes`.

Importing this package imports matplotlib (but not pyplot, Qt, scipy or pandas);
the clinic form imports it only when it first draws.
"""

from .curves import calibration_figure, roc_figure
from .decision import decision_curve_figure
from .patient import (
    cohort_percentile,
    contributions_figure,
    icon_array_figure,
    icon_counts,
    risk_position_figure,
)
from .style import SYNTHETIC_STAMP, PlotInputError, figure_png_bytes

__all__ = [
    "SYNTHETIC_STAMP",
    "PlotInputError",
    "calibration_figure",
    "cohort_percentile",
    "contributions_figure",
    "decision_curve_figure",
    "figure_png_bytes",
    "icon_array_figure",
    "icon_counts",
    "risk_position_figure",
    "roc_figure",
]
