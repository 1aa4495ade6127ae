"""Type, tables and small building blocks of the evidence report (private; reportlab).

The fonts are DejaVu Sans and DejaVu Sans Mono (:mod:`calcbuilder.reports.fonts`),
so µ, ≥, ², χ and accented names print. Headings carry a ``level`` attribute
that the document template reads for the table of contents.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from reportlab.lib import colors
from reportlab.lib.styles import ParagraphStyle
from reportlab.platypus import CondPageBreak, Flowable, Paragraph, Spacer, Table, TableStyle

from ._sheet_style import GREY, INK, PALE, esc
from .fonts import FONT, FONT_BOLD, FONT_MONO, register_fonts

if TYPE_CHECKING:
    from ..calc.document import Calculator, LoadedCalculator

__all__ = [
    "GREY",
    "INK",
    "PALE",
    "RULE",
    "Context",
    "ReportStyles",
    "bullets",
    "esc",
    "facts_table",
    "grid_table",
    "heading",
    "notice",
    "para",
    "subheading",
]

RULE = colors.Color(0.55, 0.55, 0.55)
HEAD_FILL = colors.Color(0.88, 0.88, 0.88)


class ReportStyles:
    """Paragraph styles of the report (body 8.5 pt, table cells 7.5 pt)."""

    def __init__(self) -> None:
        register_fonts()
        base = ParagraphStyle("r-body", fontName=FONT, fontSize=8.5, leading=11, textColor=INK,
                              spaceAfter=3)
        self.body = base
        self.small = ParagraphStyle("r-small", base, fontSize=7.5, leading=9.5, spaceAfter=2)
        self.grey = ParagraphStyle("r-grey", self.small, textColor=GREY)
        self.cell = ParagraphStyle("r-cell", base, fontSize=7.5, leading=9.2, spaceAfter=0)
        self.cell_bold = ParagraphStyle("r-cell-bold", self.cell, fontName=FONT_BOLD)
        self.cell_mono = ParagraphStyle("r-cell-mono", self.cell, fontName=FONT_MONO,
                                        fontSize=7, leading=9)
        self.cell_tiny = ParagraphStyle("r-cell-tiny", self.cell_mono, fontSize=6.2,
                                        leading=8.2)
        self.mono = ParagraphStyle("r-mono", self.small, fontName=FONT_MONO, fontSize=7.2)
        self.equation = ParagraphStyle("r-eq", base, fontSize=8.5, leading=12.5, leftIndent=14,
                                       firstLineIndent=-14, spaceAfter=1)
        self.formula = ParagraphStyle("r-formula", base, fontSize=7.8, leading=13,
                                      spaceAfter=1)
        self.title = ParagraphStyle("r-title", base, fontName=FONT_BOLD, fontSize=19,
                                    leading=23, spaceAfter=4)
        self.subtitle = ParagraphStyle("r-subtitle", base, fontSize=11, leading=14,
                                       textColor=GREY, spaceAfter=8)
        self.h1 = ParagraphStyle("r-h1", base, fontName=FONT_BOLD, fontSize=12.5, leading=15,
                                 spaceBefore=12, spaceAfter=5)
        self.h2 = ParagraphStyle("r-h2", base, fontName=FONT_BOLD, fontSize=9.5, leading=12,
                                 spaceBefore=7, spaceAfter=3)
        self.band = ParagraphStyle("r-band", base, fontName=FONT_BOLD, fontSize=10, leading=13,
                                   textColor=colors.white, spaceAfter=0)
        self.toc = ParagraphStyle("r-toc", base, fontSize=8.5, leading=11.5, spaceAfter=0)


@dataclass(frozen=True)
class Context:
    """What every section builder needs: the file, the styles, the text width, the date."""

    loaded: LoadedCalculator
    st: ReportStyles
    width: float
    generated_at: dt.datetime

    @property
    def calc(self) -> Calculator:
        """The validated calculator."""
        return self.loaded.calculator

    @property
    def synthetic(self) -> bool:
        """True for demonstration material."""
        return self.loaded.calculator.about.synthetic


def para(text: str, style: ParagraphStyle) -> Paragraph:
    """A paragraph of plain text (escaped for reportlab's markup)."""
    return Paragraph(esc(text), style)


def heading(number: str, text: str, style: ParagraphStyle, level: int = 0) -> Paragraph:
    """A numbered heading; ``level`` 0 headings go into the table of contents."""
    out = Paragraph(f"{esc(number)}&nbsp;&nbsp;{esc(text)}" if number else esc(text), style)
    out.toc_level = level  # read by the document template
    out.toc_text = f"{number}  {text}" if number else text
    return out


def subheading(text: str, st: ReportStyles, *, room: float = 110,
               level: int = 1) -> list[Flowable]:
    """A second-level heading that starts a new page when less than ``room`` points are left
    (so it is never stranded at the foot of a page, and long tables still start under it)."""
    return [CondPageBreak(room), heading("", text, st.h2, level=level)]


def bullets(markups: Sequence[str], style: ParagraphStyle) -> list[Flowable]:
    """Bulleted paragraphs with a hanging indent (markup already escaped)."""
    hanging = ParagraphStyle(f"{style.name}-bullet", style, leftIndent=style.fontSize * 1.3,
                             bulletIndent=style.fontSize * 0.2, bulletFontName=FONT,
                             bulletFontSize=style.fontSize)
    return [Paragraph(markup, hanging, bulletText="•") for markup in markups]


class _RuledTable(Table):
    """A table that splits across pages only with at least a few rows on each side."""

    MIN_FIRST, MIN_LAST = 3, 2

    def _counts(self, parts: list[Flowable]) -> tuple[int, int]:
        head = self.repeatRows if isinstance(self.repeatRows, int) else 0
        first, last = (len(p._cellvalues) - head for p in parts)
        return first, last

    def split(self, availWidth: float, availHeight: float) -> list[Flowable]:
        parts = list(super().split(availWidth, availHeight))
        if len(parts) != 2:
            return parts
        first, last = self._counts(parts)
        if last < self.MIN_LAST:  # carry rows over so the next page does not start with one
            head = self.repeatRows if isinstance(self.repeatRows, int) else 0
            end = head + first
            cut = sum(self._rowHeights[end - (self.MIN_LAST - last):end])
            parts = list(super().split(availWidth, availHeight - cut))
            if len(parts) != 2:
                return []
            first, last = self._counts(parts)
        if first < self.MIN_FIRST or last < self.MIN_LAST:
            return []  # move the whole table on rather than leave a row or two behind
        return parts


def grid_table(rows: Sequence[Sequence[Any]], widths: Sequence[float], *,
               header_rows: int = 1, align_right: Sequence[int] = (),
               zebra: bool = True, compact: bool = False) -> Table:
    """A ruled table with a grey header row; repeats its header on a new page and never
    leaves fewer than three rows at the foot of a page or two at the top of the next."""
    table = _RuledTable([list(r) for r in rows], colWidths=list(widths),
                        repeatRows=header_rows, hAlign="LEFT")
    style: list[tuple[Any, ...]] = [
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("LINEBELOW", (0, 0), (-1, -1), 0.3, RULE),
        ("LINEABOVE", (0, 0), (-1, 0), 0.8, INK),
        ("LINEBELOW", (0, -1), (-1, -1), 0.8, INK),
        ("TOPPADDING", (0, 0), (-1, -1), 0.6 if compact else 1.6),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 1.2 if compact else 2.2),
        ("LEFTPADDING", (0, 0), (-1, -1), 3),
        ("RIGHTPADDING", (0, 0), (-1, -1), 3),
    ]
    if header_rows:
        style += [("BACKGROUND", (0, 0), (-1, header_rows - 1), HEAD_FILL),
                  ("LINEBELOW", (0, header_rows - 1), (-1, header_rows - 1), 0.6, INK)]
    if zebra:
        style += [("BACKGROUND", (0, i), (-1, i), PALE)
                  for i in range(header_rows + 1, len(rows), 2)]
    style += [("ALIGN", (c, 0), (c, -1), "RIGHT") for c in align_right]
    table.setStyle(TableStyle(style))
    return table


def facts_table(pairs: Sequence[tuple[str, Flowable | str]], width: float,
                st: ReportStyles, *, label_width: float = 118) -> Table:
    """Label / value rows (a fact sheet); string values are escaped plain text."""
    rows = [[Paragraph(esc(label), st.cell_bold),
             value if not isinstance(value, str) else Paragraph(esc(value), st.cell)]
            for label, value in pairs]
    table = Table(rows, colWidths=[label_width, width - label_width], hAlign="LEFT")
    table.setStyle(TableStyle([
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("LINEBELOW", (0, 0), (-1, -1), 0.3, RULE),
        ("LINEABOVE", (0, 0), (-1, 0), 0.8, INK),
        ("LINEBELOW", (0, -1), (-1, -1), 0.8, INK),
        ("TOPPADDING", (0, 0), (-1, -1), 1.6),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 2.2),
        ("LEFTPADDING", (0, 0), (-1, -1), 3),
    ]))
    return table


def notice(markups: Sequence[str], width: float, st: ReportStyles, *,
           strong: bool = False) -> list[Flowable]:
    """A bordered box of short paragraphs (solid and heavier when ``strong``)."""
    content = [Paragraph(m, st.small) for m in markups]
    table = Table([[content]], colWidths=[width], hAlign="LEFT")
    box: tuple[Any, ...] = ("BOX", (0, 0), (-1, -1), 1.4 if strong else 0.8, INK)
    if not strong:
        box = (*box, None, (3, 2))
    table.setStyle(TableStyle([
        box, ("BACKGROUND", (0, 0), (-1, -1), PALE if strong else colors.white),
        ("LEFTPADDING", (0, 0), (-1, -1), 6), ("RIGHTPADDING", (0, 0), (-1, -1), 6),
        ("TOPPADDING", (0, 0), (-1, -1), 4), ("BOTTOMPADDING", (0, 0), (-1, -1), 4)]))
    return [table, Spacer(1, 5)]
