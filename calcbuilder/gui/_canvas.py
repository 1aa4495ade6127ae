"""A matplotlib Qt canvas that scales its figure like a picture (imported only when drawing).

The figure builders lay a figure out for its own size in inches. Shown in a
narrower column, a plain canvas would keep the font sizes and squeeze the plot
until labels collide; this canvas instead changes the figure's dots per inch so
the figure keeps its designed size in inches and its proportions, and everything
in it shrinks or grows together.
"""

from __future__ import annotations

from typing import Any

from matplotlib.backends.backend_qtagg import FigureCanvasQTAgg
from matplotlib.figure import Figure
from PySide6.QtCore import QSize
from PySide6.QtGui import QResizeEvent
from PySide6.QtWidgets import QSizePolicy

__all__ = ["ScaledCanvas"]


class ScaledCanvas(FigureCanvasQTAgg):
    """Keeps the figure's designed size in inches; the widget width sets the scale."""

    def __init__(self, figure: Figure) -> None:
        width, height = (float(v) for v in figure.get_size_inches())
        self.design = (width, height)
        super().__init__(figure)
        policy = QSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Preferred)
        policy.setHeightForWidth(True)
        self.setSizePolicy(policy)

    @property
    def aspect(self) -> float:
        """Height over width of the designed figure."""
        return self.design[1] / self.design[0]

    def hasHeightForWidth(self) -> bool:  # noqa: N802 (Qt override)
        return True

    def heightForWidth(self, width: int) -> int:  # noqa: N802 (Qt override)
        """The figure's proportions: the height follows the (capped) width."""
        return max(round(min(width, self.maximumWidth()) * self.aspect), 40)

    def sizeHint(self) -> QSize:  # noqa: N802 (Qt override)
        width = min(self.maximumWidth(), 480)
        return QSize(width, self.heightForWidth(width))

    def resizeEvent(self, event: QResizeEvent) -> None:  # noqa: N802 (Qt override)
        pixels = max(event.size().width(), 40)
        self._set_scale(pixels / self.design[0])
        super().resizeEvent(event)

    def _set_scale(self, dpi: float) -> None:
        figure: Any = self.figure
        # matplotlib's Qt canvas multiplies _original_dpi by the screen's pixel ratio
        # (FigureCanvasBase._set_device_pixel_ratio); keep both in step.
        figure._original_dpi = dpi
        figure.dpi = dpi * self.device_pixel_ratio
