"""Drawn pieces of the risk sheet: the icon array and the ruled note lines (private).

Meaning never rests on colour: people with the outcome are drawn filled dark,
the others white with a grey outline, so the array reads the same in grayscale.
Imported only when a sheet is built (reportlab).
"""

from __future__ import annotations

from reportlab.graphics.shapes import Circle, Drawing, Rect
from reportlab.lib import colors
from reportlab.platypus import Flowable

__all__ = ["AFFECTED", "UNAFFECTED_EDGE", "NoteLines", "icon_array"]

AFFECTED = colors.Color(0.18, 0.18, 0.22)
UNAFFECTED_EDGE = colors.Color(0.45, 0.45, 0.45)
_PITCH = 1.3  # row height in icon widths
_GAP = 0.5  # extra gap between 10 x 10 blocks, in icon widths


def _person(x: float, y: float, w: float, filled: bool) -> list[Circle | Rect]:
    """One person: a head and a rounded body, ``(x, y)`` the bottom-left of the cell."""
    fill = AFFECTED if filled else colors.white
    edge = AFFECTED if filled else UNAFFECTED_EDGE
    stroke = 0.4 if w >= 8 else 0.25
    body = Rect(x + 0.2 * w, y, 0.6 * w, 0.66 * w, rx=0.22 * w, ry=0.22 * w,
                fillColor=fill, strokeColor=edge, strokeWidth=stroke)
    head = Circle(x + 0.5 * w, y + 0.93 * w, 0.19 * w, fillColor=fill, strokeColor=edge,
                  strokeWidth=stroke)
    return [body, head]


def icon_array(n_affected: int, total: int, width: float) -> Drawing:
    """``total`` people (100 or 1,000) of which the first ``n_affected`` are filled.

    People are filled from the top left, row by row, in blocks of 10 x 10 so
    they can be counted; 1,000 people are 5 blocks across and 2 down.

    Parameters
    ----------
    n_affected : int
        People with the outcome (0..total).
    total : int
        100 or 1000.
    width : float
        Width of the drawing in points; the height follows.
    """
    blocks_across = 1 if total <= 100 else 5
    cols = 10 * blocks_across
    rows = total // cols
    w = width / (cols + (blocks_across - 1) * _GAP)
    block_rows = rows // 10
    height = w * (rows * _PITCH + (block_rows - 1) * _GAP)
    drawing = Drawing(width, height)
    for i in range(total):
        block, k = divmod(i, 100)
        b_row, b_col = divmod(block, blocks_across)
        r, c = divmod(k, 10)
        x = (b_col * (10 + _GAP) + c) * w
        top = (b_row * (10 * _PITCH + _GAP) + r * _PITCH) * w
        for shape in _person(x, height - top - _PITCH * w + 0.05 * w, w, i < n_affected):
            drawing.add(shape)
    return drawing


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
