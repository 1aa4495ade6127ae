"""A place on the form for a matplotlib figure, importing matplotlib only when it draws.

:class:`FigureBox` shows a short text until it is given a figure builder; the
builder runs (and matplotlib with the Qt canvas is imported) the first time the
box is drawn while visible, so opening the form never pays for matplotlib.
Redraws are coalesced: many changes within ``delay_ms`` draw once.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from PySide6.QtCore import Qt, QTimer
from PySide6.QtGui import QShowEvent
from PySide6.QtWidgets import QLabel, QSizePolicy, QVBoxLayout, QWidget

__all__ = ["FigureBox", "FigureBuilder"]

FigureBuilder = Callable[[], Any]
"""A function returning a :class:`matplotlib.figure.Figure` (built on demand)."""


class FigureBox(QWidget):
    """Holds at most one figure; ``set_builder(None)`` shows the placeholder text."""

    def __init__(self, placeholder: str, *, name: str, min_height: int = 220,
                 max_width: int = 16777215, delay_ms: int = 120,
                 parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName(name)
        self._min_height = min_height
        self._max_width = max_width
        policy = QSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Preferred)
        policy.setHeightForWidth(True)
        self.setSizePolicy(policy)
        self._placeholder = QLabel(placeholder)
        self._placeholder.setWordWrap(True)
        self._placeholder.setProperty("state", "note")
        self._layout = QVBoxLayout(self)
        self._layout.setContentsMargins(0, 0, 0, 0)
        self._layout.addWidget(self._placeholder)
        self._canvas: Any = None
        self._builder: FigureBuilder | None = None
        self._pending = False
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(delay_ms)
        self._timer.timeout.connect(self.draw_now)
        self._show_placeholder()

    @property
    def canvas(self) -> Any:
        """The FigureCanvasQTAgg once something was drawn, else None."""
        return self._canvas

    def set_builder(self, builder: FigureBuilder | None, placeholder: str | None = None) -> None:
        """Draw ``builder``'s figure soon (or show the placeholder when None)."""
        self._builder = builder
        if placeholder is not None:
            self._placeholder.setText(placeholder)
        if builder is None:
            self._timer.stop()
            self._pending = False
            self._show_placeholder()
            return
        self._pending = True
        if self.isVisible():
            self._timer.start()

    def flush(self) -> None:
        """Draw a pending figure now, visible or not (tests, screenshots, printing)."""
        if self._pending:
            self.draw_now()

    def draw_now(self) -> None:
        self._timer.stop()
        if not self._pending or self._builder is None:
            return
        self._pending = False
        figure = self._builder()
        self._show_figure(figure)

    def showEvent(self, event: QShowEvent) -> None:  # noqa: N802 (Qt override)
        super().showEvent(event)
        if self._pending:
            self._timer.start()

    def _show_placeholder(self) -> None:
        if self._canvas is not None:
            self._canvas.hide()
        self._placeholder.show()
        self.setMinimumHeight(self._min_height if self._placeholder.text() else 0)
        self.updateGeometry()

    def _show_figure(self, figure: Any) -> None:
        from ._canvas import ScaledCanvas

        if self._canvas is not None:
            self._layout.removeWidget(self._canvas)
            self._canvas.figure.clear()
            self._canvas.deleteLater()
        canvas = ScaledCanvas(figure)
        canvas.setMinimumSize(40, 40)
        self._layout.addWidget(canvas, 0, Qt.AlignmentFlag.AlignHCenter)
        self._canvas = canvas
        self._placeholder.hide()
        canvas.setMaximumWidth(self._max_width)
        self.setMinimumHeight(0)
        self.updateGeometry()
        canvas.draw_idle()
