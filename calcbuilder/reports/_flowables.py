"""Drawn pieces of the risk sheet: the icon array and the ruled note lines (private).

Meaning never rests on colour: people with the outcome are drawn filled dark,
the others white with a grey outline, so the array reads the same in grayscale.
Imported only when a sheet is built (reportlab).
"""

from __future__ import annotations

from reportlab.lib import colors
from reportlab.platypus import Flowable

__all__ = ["AFFECTED", "UNAFFECTED_EDGE", "IconArray", "NoteLines", "icon_array"]

AFFECTED = colors.Color(0.18, 0.18, 0.22)
UNAFFECTED_EDGE = colors.Color(0.45, 0.45, 0.45)
_PITCH = 1.3  # row height in icon widths
_GAP = 0.5  # extra gap between 10 x 10 blocks, in icon widths


class IconArray(Flowable):
    """``total`` people (100 or 1,000) of which the first ``n_affected`` are filled.

    People are filled from the top left, row by row, in blocks of 10 x 10 so
    they can be counted; 1,000 people are 5 blocks across and 2 down. Drawn
    straight on the canvas (a head and a rounded body per person).

    Parameters
    ----------
    n_affected : int
        People with the outcome (0..total).
    total : int
        100 or 1000.
    width : float
        Width in points; the height follows.
    """

    def __init__(self, n_affected: int, total: int, width: float) -> None:
        super().__init__()
        self.n_affected, self.total = n_affected, total
        self.across = 1 if total <= 100 else 5
        cols = 10 * self.across
        self.w = width / (cols + (self.across - 1) * _GAP)
        block_rows = total // cols // 10
        self.width = width
        self.height = self.w * (total // cols * _PITCH + (block_rows - 1) * _GAP)

    def _origin(self, i: int) -> tuple[float, float]:
        block, k = divmod(i, 100)
        b_row, b_col = divmod(block, self.across)
        r, c = divmod(k, 10)
        top = (b_row * (10 * _PITCH + _GAP) + r * _PITCH) * self.w
        return (b_col * (10 + _GAP) + c) * self.w, self.height - top - (_PITCH - 0.05) * self.w

    def draw(self) -> None:
        canvas, w = self.canv, self.w
        canvas.saveState()
        canvas.setLineWidth(0.4 if w >= 8 else 0.25)
        for i in range(self.total):
            filled = i < self.n_affected
            canvas.setFillColor(AFFECTED if filled else colors.white)
            canvas.setStrokeColor(AFFECTED if filled else UNAFFECTED_EDGE)
            x, y = self._origin(i)
            canvas.roundRect(x + 0.2 * w, y, 0.6 * w, 0.66 * w, 0.22 * w, stroke=1, fill=1)
            canvas.circle(x + 0.5 * w, y + 0.93 * w, 0.19 * w, stroke=1, fill=1)
        canvas.restoreState()


def icon_array(n_affected: int, total: int, width: float) -> IconArray:
    """The icon array flowable (see :class:`IconArray`)."""
    return IconArray(n_affected, total, width)


class NoteLines(Flowable):
    """Ruled lines for handwritten notes that fill the rest of the frame.

    Asks for all the height left (at least ``min_lines`` lines); when even that
    does not fit, platypus moves it to a new page, which tells the sheet
    builder to use a denser layout.
    """

    def __init__(self, min_lines: int, pitch: float) -> None:
        super().__init__()
        self.min_lines = min_lines
        self.pitch = pitch
        self.lines = min_lines

    def wrap(self, availWidth: float, availHeight: float) -> tuple[float, float]:
        self.width = availWidth
        self.lines = max(self.min_lines, int((availHeight - 2) // self.pitch))
        self.height = self.lines * self.pitch
        return self.width, self.height

    def draw(self) -> None:
        canvas = self.canv
        canvas.saveState()
        canvas.setStrokeColor(colors.Color(0.6, 0.6, 0.6))
        canvas.setLineWidth(0.5)
        for i in range(1, self.lines + 1):
            y = self.height - i * self.pitch
            canvas.line(0, y, self.width, y)
        canvas.restoreState()
