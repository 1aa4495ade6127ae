"""Type, colours and layouts of the risk sheet (private; reportlab)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from reportlab.lib import colors
from reportlab.lib.styles import ParagraphStyle
from reportlab.platypus import Flowable, Table, TableStyle

from .fonts import FONT, FONT_BOLD, FONT_MONO, register_fonts

__all__ = [
    "BAND", "GREY", "INK", "LAYOUTS", "PALE", "Layout", "Styles", "boxed", "esc", "table_style",
]

INK = colors.Color(0.1, 0.1, 0.1)
GREY = colors.Color(0.4, 0.4, 0.4)
PALE = colors.Color(0.95, 0.95, 0.95)
BAND = colors.Color(0.2, 0.2, 0.2)


@dataclass(frozen=True)
class Layout:
    """Type sizes and spacing of one density of the sheet."""

    name: str
    body: float
    small: float
    values: float
    max_rows: int
    icon_width: float
    note_lines: int
    margin_mm: float = 14.0


LAYOUTS = (
    Layout("roomy", 9.0, 7.5, 8.5, 10, 118, 4),
    Layout("compact", 8.5, 7.0, 7.5, 9, 108, 3),
    Layout("dense", 8.0, 6.5, 6.8, 9, 96, 3),
    Layout("tight", 7.5, 6.2, 6.2, 9, 84, 2, 12.0),
    Layout("smallest", 7.0, 6.0, 6.0, 9, 76, 2, 10.0),
)
"""Tried in this order; the first that fits one page is used."""


class Styles:
    """The paragraph styles of one layout (DejaVu Sans, registered on first use)."""

    def __init__(self, lay: Layout) -> None:
        register_fonts()
        base = ParagraphStyle("body", fontName=FONT, fontSize=lay.body,
                              leading=lay.body * 1.25, textColor=INK)
        self.body = base
        self.small = ParagraphStyle("small", base, fontSize=lay.small, leading=lay.small * 1.25)
        self.grey = ParagraphStyle("grey", self.small, textColor=GREY)
        self.mono = ParagraphStyle("mono", self.small, fontName=FONT_MONO)
        self.h1 = ParagraphStyle("h1", base, fontName=FONT_BOLD, fontSize=14, leading=17)
        self.h2 = ParagraphStyle("h2", base, fontName=FONT_BOLD, fontSize=lay.body + 1.5,
                                 leading=(lay.body + 1.5) * 1.2, spaceBefore=lay.body * 0.55,
                                 spaceAfter=2)
        self.big = ParagraphStyle("big", base, fontName=FONT_BOLD, fontSize=20, leading=23)
        self.band = ParagraphStyle("band", base, fontName=FONT_BOLD, fontSize=10, leading=12,
                                   textColor=colors.white)
        self.values = ParagraphStyle("values", base, fontSize=lay.values,
                                     leading=lay.values * 1.2)


def esc(text: str) -> str:
    """Text made safe for reportlab's paragraph markup."""
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


def table_style(commands: list[Any]) -> TableStyle:
    """A table style whose cells use DejaVu Sans (reportlab would default to Helvetica)."""
    return TableStyle([("FONTNAME", (0, 0), (-1, -1), FONT), *commands])


def boxed(content: list[Flowable], width: float, *, line: float, dash: bool = False,
          fill: colors.Color = PALE) -> Table:
    """``content`` in a one-cell table with a border (dashed on request) and a fill."""
    table = Table([[content]], colWidths=[width])
    box: tuple[Any, ...] = ("BOX", (0, 0), (-1, -1), line, INK)
    if dash:
        box = (*box, None, (3, 2))
    table.setStyle(table_style([
        box, ("BACKGROUND", (0, 0), (-1, -1), fill),
        ("LEFTPADDING", (0, 0), (-1, -1), 6), ("RIGHTPADDING", (0, 0), (-1, -1), 6),
        ("TOPPADDING", (0, 0), (-1, -1), 4), ("BOTTOMPADDING", (0, 0), (-1, -1), 5)]))
    return table
