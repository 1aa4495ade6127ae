"""The risk sheet: one printed page for the conversation with the patient (design.md 7).

Order on the page: the calculator and date; what is estimated (outcome,
horizon); the estimate (N in 100, percentage, interval, icon array) with the
caution box beside it in the top half; the values used (units, extrapolation
marked ▲); the decision threshold in three forms and what deciding by the
model means at it; where the model comes from; the file's signature and
fingerprints; ruled lines for notes. A synthetic calculator carries a dark band
"SYNTHETIC - NOT FOR CLINICAL USE" at the top and in the footer.

One page is guaranteed for calculators with up to 25 inputs: the sheet is built
with the roomiest layout first and, if it spills over, again with denser ones
(smaller type, values in two columns, fewer note lines).

The patient reference is printed on the page and nowhere else: it does not go
into the PDF's metadata and nothing is kept after the file is written.
"""

from __future__ import annotations

import datetime as dt
import io
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

from reportlab.lib import colors
from reportlab.lib.pagesizes import A4, LETTER
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.platypus import (
    BaseDocTemplate,
    Flowable,
    Frame,
    KeepTogether,
    PageTemplate,
    Paragraph,
    Spacer,
    Table,
)
from reportlab.platypus.doctemplate import LayoutError

from .. import __version__
from ..calc.atomic import atomic_write_bytes
from ..clinic.benefit import NetBenefit, risk_versus_threshold
from ..clinic.session import ClinicSession, PatientResult
from ..clinic.threshold import Threshold, format_percent
from ..errors import CalcbuilderError, InputValueError
from ._flowables import NoteLines, icon_array
from ._sheet_style import BAND, GREY, INK, LAYOUTS, Layout, Styles, boxed, esc, table_style
from ._sheet_text import provenance_lines, signature_lines
from .fonts import FONT

__all__ = ["PAGE_SIZES", "SheetInfo", "make_sheet", "sheet_bytes"]

PAGE_SIZES = {"A4": A4, "Letter": LETTER}
Page = Literal["A4", "Letter"]
OUR_CAUTION = ("This sheet supports a conversation between the patient and the clinician. It "
               "does not replace clinical judgement, the patient's own values or local "
               "protocols, and it does not say what anyone should do.")


@dataclass(frozen=True)
class SheetInfo:
    """What :func:`make_sheet` wrote: where, how many pages, which layout."""

    path: Path | None
    pages: int
    layout: str


class _Sheet:
    """Builds the story of one sheet for one layout."""

    def __init__(self, session: ClinicSession, threshold: Threshold, lay: Layout,
                 width: float, printed_at: dt.datetime) -> None:
        self.session = session
        self.calc = session.calculator
        self.result: PatientResult = session.result()
        self.threshold = threshold
        self.benefit: NetBenefit = session.benefit(threshold)
        self.lay = lay
        self.width = width
        self.s = Styles(lay)
        self.printed_at = printed_at
        self.comma = session.decimal_comma

    def pct(self, p: float) -> str:
        return format_percent(p, decimal_comma=self.comma)

    def story(self) -> list[Flowable]:
        out: list[Flowable] = []
        if self.session.synthetic:
            out += [boxed([Paragraph("SYNTHETIC — NOT FOR CLINICAL USE · demonstration "
                                      "material built from made-up data", self.s.band)],
                           self.width, line=1.5, fill=BAND),
                    Spacer(1, 4)]
        out += self.header() + self.question() + [self.estimate_row()]
        out += self.values_block() + self.threshold_block() + self.provenance_block()
        out += self.signature_block()
        out += [Paragraph("Notes from the discussion", self.s.h2),
                NoteLines(self.lay.note_lines, self.lay.body * 2.3)]
        return out

    def header(self) -> list[Flowable]:
        about = self.calc.about
        ref = esc(self.session.patient_ref) if self.session.patient_ref else "_" * 22
        left = [Paragraph(esc(about.title), self.s.h1),
                Paragraph(f"Risk sheet · calculator version {esc(about.version)} · printed "
                          f"{self.printed_at:%Y-%m-%d %H:%M}", self.s.small)]
        right = [Paragraph(f"Patient reference: <b>{ref}</b>", self.s.body)]
        table = Table([[left, right]], colWidths=[self.width * 0.64, self.width * 0.36])
        table.setStyle(table_style([("VALIGN", (0, 0), (-1, -1), "TOP"),
                                   ("LEFTPADDING", (0, 0), (-1, -1), 0),
                                   ("RIGHTPADDING", (0, 0), (-1, -1), 0),
                                   ("LINEBELOW", (0, 0), (-1, -1), 0.8, INK)]))
        out: list[Flowable] = [table, Spacer(1, 3)]
        notices = [b for b in self.session.banners if not b.startswith("SYNTHETIC")]
        if notices:
            out += [boxed([Paragraph("<b>! </b>" + esc(n), self.s.small) for n in notices],
                           self.width, line=1, dash=True, fill=colors.white), Spacer(1, 3)]
        return out

    def question(self) -> list[Flowable]:
        about = self.calc.about
        return [Paragraph("What is estimated", self.s.h2),
                Paragraph(f"The chance of <b>{esc(about.outcome)}</b>, <b>{esc(about.horizon)}"
                          f"</b>, for people like this patient ({esc(about.population)}).",
                          self.s.body)]

    def estimate_text(self) -> list[Flowable]:
        r = self.result
        n, total = r.frequency or (0, 100)
        big = (r.phrase or "").split(" people like this")[0]
        out: list[Flowable] = [Paragraph(big[0].upper() + big[1:], self.s.big),
                               Paragraph("people like this would have the outcome.", self.s.body),
                               Spacer(1, 4)]
        interval = (f" (95% interval {self.pct(r.low)} to {self.pct(r.high)})"
                    if r.low is not None and r.high is not None else " (no interval available)")
        out.append(Paragraph(f"Estimated risk: <b>{self.pct(r.risk or 0.0)}</b>{interval}",
                             self.s.body))
        out.append(Paragraph(f"■ {n:,} with the outcome &nbsp; □ {total - n:,} without, "
                             f"of {total:,} people", self.s.small))
        cohort = self.session.cohort_sentence()
        if cohort:
            out.append(Paragraph(esc(cohort), self.s.small))
        if r.extrapolated:
            out.append(Paragraph("<b>▲ Extrapolation:</b> some values lie outside the range the "
                                 "model was developed on (marked ▲ below); the estimate may be "
                                 "less reliable.", self.s.small))
        out.append(Paragraph(esc(r.interval_note or ""), self.s.grey))
        return out

    def estimate_row(self) -> Table:
        r = self.result
        n, total = r.frequency or (0, 100)
        left_w, box_w = self.width * 0.6, self.width * 0.4 - 6
        if total <= 100:
            icons = icon_array(n, total, self.lay.icon_width * 0.85)
            inner = Table([[icons, self.estimate_text()]],
                          colWidths=[self.lay.icon_width, left_w - self.lay.icon_width])
        else:
            icons = icon_array(n, total, left_w * 0.75)
            inner = Table([[self.estimate_text()], [icons]], colWidths=[left_w])
        inner.setStyle(table_style([("VALIGN", (0, 0), (-1, -1), "TOP"),
                                   ("LEFTPADDING", (0, 0), (-1, -1), 0)]))
        table = Table([[[Paragraph("This patient's estimate", self.s.h2), inner],
                        self.caution_box(box_w)]], colWidths=[left_w + 6, box_w])
        table.setStyle(table_style([("VALIGN", (0, 0), (-1, -1), "TOP"),
                                   ("LEFTPADDING", (0, 0), (-1, -1), 0),
                                   ("RIGHTPADDING", (0, 0), (-1, -1), 0),
                                   ("TOPPADDING", (1, 0), (1, 0), 8)]))
        return table

    def caution_box(self, width: float) -> Table:
        items: list[Flowable] = [Paragraph("Please keep in mind", self.s.h2)]
        items += [self.bullet(esc(text), self.s.small) for text in self.calc.cautions]
        if self.session.synthetic:
            items.append(self.bullet("<b>Synthetic, not for clinical use.</b>", self.s.small))
        items.append(self.bullet(OUR_CAUTION, self.s.small))
        return boxed(items, width, line=1.6)

    def values_block(self) -> list[Flowable]:
        lines = self.result.values_used
        columns = min(3, -(-len(lines) // self.lay.max_rows))
        per = -(-len(lines) // columns)
        gap = 8
        col_w = (self.width - gap * (columns - 1)) / columns if columns > 1 else \
            min(self.width, 380)
        tables = [self._values_table(lines[i * per:(i + 1) * per], col_w) for i in range(columns)]
        row: list[Any] = []
        for i, t in enumerate(tables):
            row += [t] + ([""] if i < columns - 1 else [])
        widths = [w for i in range(columns) for w in ([col_w, gap] if i < columns - 1
                                                       else [col_w])]
        outer = Table([row], colWidths=widths, hAlign="LEFT")
        outer.setStyle(table_style([("VALIGN", (0, 0), (-1, -1), "TOP"),
                                   ("LEFTPADDING", (0, 0), (-1, -1), 0),
                                   ("RIGHTPADDING", (0, 0), (-1, -1), 0)]))
        out: list[Flowable] = [Paragraph("Values used", self.s.h2), outer]
        if any(line.extrapolated for line in lines):
            out.append(Paragraph("▲ outside the range of values the model was developed on",
                                 self.s.grey))
        return out

    def _values_table(self, lines: Any, width: float) -> Table:
        st = self.s.values
        rows = [[Paragraph(esc(line.label), st),
                 Paragraph(("<b>▲</b> " if line.extrapolated else "") + esc(line.text), st)]
                for line in lines]
        table = Table(rows or [["", ""]], colWidths=[width * 0.55, width * 0.45])
        table.setStyle(table_style([("LINEBELOW", (0, 0), (-1, -1), 0.3, GREY),
                                   ("VALIGN", (0, 0), (-1, -1), "TOP"),
                                   ("TOPPADDING", (0, 0), (-1, -1), 1),
                                   ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5),
                                   ("LEFTPADDING", (0, 0), (-1, -1), 2)]))
        return table

    def threshold_block(self) -> list[Flowable]:
        t, r, b = self.threshold, self.result, self.benefit
        comma, st = self.comma, self.s
        n = t.number_text(decimal_comma=comma)
        cells = [
            ("As a risk", t.percent_text(decimal_comma=comma),
             "the risk above which an intervention is favoured"),
            ("As people intervened for", f"1 in {n}",
             f"intervening for {n} people at this risk reaches about 1 who would have the "
             "outcome"),
            ("As harm : benefit", t.ratio_text(decimal_comma=comma),
             "harm of an unnecessary intervention : benefit of a needed one"),
        ]
        rows = [[Paragraph(head, st.grey) for head, _, _ in cells],
                [Paragraph(f"<b>{esc(value)}</b>", st.body) for _, value, _ in cells],
                [Paragraph(esc(words), st.grey) for _, _, words in cells]]
        forms = Table(rows, colWidths=[self.width / 3] * 3)
        forms.setStyle(table_style([("BOX", (0, 0), (-1, -1), 0.5, GREY),
                                   ("LINEBEFORE", (1, 0), (-1, -1), 0.5, GREY),
                                   ("VALIGN", (0, 0), (-1, -1), "TOP"),
                                   ("TOPPADDING", (0, 0), (-1, -1), 0.5),
                                   ("BOTTOMPADDING", (0, 0), (-1, -1), 1)]))
        out: list[Flowable] = [Paragraph("The decision threshold", st.h2), forms, Spacer(1, 3)]
        out.append(Paragraph("<b>" + esc(risk_versus_threshold(
            r.risk or 0.0, t, r.low, r.high, decimal_comma=comma)) + "</b>", st.body))
        out += [self.bullet(esc(text), st.body) for text in b.statements]
        out += [self.bullet("<b>" + esc(text) + "</b>", st.body, "⚠") for text in b.warnings]
        explain = (" Net benefit weighs people with the outcome found against unnecessary "
                   "interventions at the harm : benefit ratio above." if b.available else "")
        out.append(Paragraph(esc(b.source) + explain, st.grey))
        return out

    @staticmethod
    def bullet(markup: str, style: ParagraphStyle, mark: str = "•") -> Paragraph:
        hanging = ParagraphStyle(f"{style.name}-bullet", style, leftIndent=style.fontSize * 1.2,
                                 bulletIndent=0, bulletFontName=FONT,
                                 bulletFontSize=style.fontSize)
        return Paragraph(markup, hanging, bulletText=mark)

    def provenance_block(self) -> list[Flowable]:
        lines = provenance_lines(self.calc, self.benefit.evidence)
        return [Paragraph("Where the model comes from", self.s.h2),
                *[Paragraph(esc(text), self.s.small) for text in lines]]

    def signature_block(self) -> list[Flowable]:
        rows = [[Paragraph(label, self.s.small),
                 Paragraph(esc(text), self.s.mono if "fingerprint" in label.lower()
                           or label == "Signing key" else self.s.small)]
                for label, text in signature_lines(self.session.loaded)]
        table = Table(rows, colWidths=[70, self.width - 70])
        table.setStyle(table_style([("VALIGN", (0, 0), (-1, -1), "TOP"),
                                   ("LEFTPADDING", (0, 0), (-1, -1), 0),
                                   ("TOPPADDING", (0, 0), (-1, -1), 0.5),
                                   ("BOTTOMPADDING", (0, 0), (-1, -1), 0.5)]))
        return [Paragraph("The calculator file", self.s.h2), KeepTogether(table)]


def _footer(session: ClinicSession, printed_at: dt.datetime, margin: float) -> Any:
    def draw(canvas: Any, doc: Any) -> None:
        canvas.saveState()
        canvas.setFont(FONT, 6.5)
        canvas.setFillColor(GREY)
        left = f"calcbuilder {__version__} · printed {printed_at:%Y-%m-%d %H:%M}"
        if session.synthetic:
            left = "SYNTHETIC — NOT FOR CLINICAL USE · " + left
        canvas.drawString(margin, margin * 0.45, left)
        canvas.drawRightString(doc.pagesize[0] - margin, margin * 0.45,
                               "calcbuilder keeps no copy of this sheet or of the values on it.")
        canvas.restoreState()
    return draw


def _build(session: ClinicSession, threshold: Threshold, page: Page, lay: Layout,
           printed_at: dt.datetime) -> tuple[bytes, int]:
    """The PDF for one layout and its page count (0 when platypus cannot place a piece)."""
    size = PAGE_SIZES[page]
    margin = lay.margin_mm * mm
    buffer = io.BytesIO()
    doc = BaseDocTemplate(buffer, pagesize=size, leftMargin=margin, rightMargin=margin,
                          topMargin=margin, bottomMargin=margin,
                          title=f"Risk sheet: {session.calculator.about.title}",
                          author="calcbuilder", creator=f"calcbuilder {__version__}",
                          subject="Risk sheet", initialFontName=FONT, initialFontSize=9)
    frame = Frame(margin, margin, size[0] - 2 * margin, size[1] - 2 * margin, id="page",
                  leftPadding=0, rightPadding=0, topPadding=0, bottomPadding=0)
    footer = _footer(session, printed_at, margin)
    doc.addPageTemplates([PageTemplate("sheet", [frame], onPage=footer)])
    story = _Sheet(session, threshold, lay, frame._width, printed_at).story()
    try:
        doc.build(story)
    except LayoutError:
        return b"", 0
    return buffer.getvalue(), doc.page


def sheet_bytes(session: ClinicSession, *, page: Page = "A4",
                threshold: Threshold | None = None,
                printed_at: dt.datetime | None = None) -> tuple[bytes, SheetInfo]:
    """The risk sheet as PDF bytes (for printing or saving), with what was built.

    The layouts are tried roomiest first; the first that fits one page is used.
    If none does (texts far longer than any calculator tested), the densest
    layout is used on as many pages as it needs: nothing is ever cut.

    Raises
    ------
    InputValueError
        When the values do not allow a risk (every blocking message is listed).
    CalcbuilderError
        For an unknown page size, or a piece of text too large for any page.
    """
    if page not in PAGE_SIZES:
        raise CalcbuilderError(f"page size must be A4 or Letter; got {page!r}")
    result = session.result()
    if not result.ok:
        listed = "; ".join(m.text for m in result.all_messages if m.blocking)
        raise InputValueError(f"no risk sheet: the values do not allow a risk ({listed})")
    when = printed_at or dt.datetime.now().astimezone()
    chosen = threshold or session.threshold
    data, pages = b"", 0
    for lay in LAYOUTS:
        data, pages = _build(session, chosen, page, lay, when)
        if pages == 1:
            break
    if not data:
        raise CalcbuilderError("the risk sheet could not be laid out: a text in the "
                               "calculator file is too long for a page")
    return data, SheetInfo(None, pages, lay.name)


def make_sheet(session: ClinicSession, path: str | Path, *, page: Page = "A4",
               threshold: Threshold | None = None,
               printed_at: dt.datetime | None = None) -> SheetInfo:
    """Write the one-page risk sheet to ``path`` atomically.

    Parameters
    ----------
    session : ClinicSession
        The patient's values (the risk must be computable).
    path : str or path-like
        The PDF to write; an existing file is replaced only when writing succeeded.
    page : {"A4", "Letter"}
    threshold : Threshold, optional
        Default: the session's threshold (the calculator's default until changed).
    printed_at : datetime, optional
        The date and time printed; default now.

    Returns
    -------
    SheetInfo
    """
    data, info = sheet_bytes(session, page=page, threshold=threshold, printed_at=printed_at)
    written = atomic_write_bytes(path, data)
    return SheetInfo(written, info.pages, info.layout)
