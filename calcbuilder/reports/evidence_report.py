"""The evidence report: a multi-page PDF for reviewers and governance (design.md 8).

Sections, in order (numbered as in :data:`SECTION_TITLES`): a title block with
the file's key facts, fingerprint and signature state, and a table of
contents; purpose and scope; the data behind the evidence; the inputs; the
model equation written out in full, the coefficient table and the covariance
matrix; apparent performance; bootstrap optimism correction; external
validation; (imported evidence, when there is any); recalibration;
calibration plots; decision curves; reclassification against the reference
model; sample-size adequacy; limitations and cautions; test vectors; checksum
and signature.

Every page carries a footer with the title, version, the first 16 characters
of the fingerprint, the signature state and "page N of M"; a synthetic
calculator also gets a dark "SYNTHETIC — NOT FOR CLINICAL USE" strip at the top
of every page and the same words in the footer. A file whose signature does
not verify gets no report (:class:`~calcbuilder.errors.SignatureError`): a
well-printed report must not lend credibility to an altered file.
"""

from __future__ import annotations

import datetime as dt
import io
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

from reportlab.lib.pagesizes import A4, LETTER
from reportlab.lib.units import mm
from reportlab.pdfgen.canvas import Canvas
from reportlab.platypus import (
    BaseDocTemplate,
    CondPageBreak,
    Flowable,
    Frame,
    KeepTogether,
    PageBreak,
    PageTemplate,
    Paragraph,
    Spacer,
)
from reportlab.platypus.tableofcontents import TableOfContents

from .. import __version__
from ..calc.atomic import atomic_write_bytes
from ..calc.document import LoadedCalculator
from ..calc.signing import TrustState
from ..errors import CalcbuilderError, SignatureError
from ._report_closing import (
    limitations_story,
    reclassification_story,
    sample_size_story,
    signature_story,
)
from ._report_coefficients import coefficient_story, covariance_story
from ._report_equation import equation_story
from ._report_figures import calibration_story, decision_story
from ._report_sections import data_story, inputs_story, scope_story, title_story
from ._report_style import GREY, Context, ReportStyles, heading, subheading
from ._report_tables import (
    apparent_story,
    bootstrap_story,
    external_story,
    imported_story,
    recalibration_story,
)
from ._report_text import STATE_SHORT, SYNTHETIC_MARK
from ._report_vectors import vectors_story
from .fonts import FONT, FONT_BOLD

__all__ = ["APPENDIX_TITLE", "PAGE_SIZES", "SECTION_TITLES", "ReportInfo", "make_report",
           "report_bytes"]

PAGE_SIZES = {"A4": A4, "Letter": LETTER}
Page = Literal["A4", "Letter"]
Story = Callable[[Context], list[Flowable]]
_MARGIN = 16 * mm
_SECTION_ROOM = 150  # points: a section starts on a new page when less is left
_BAND = 7 * mm


_INLINE_COVARIANCE = 8  # larger covariance matrices go to the appendix
APPENDIX_TITLE = "Appendix: covariance matrix of the coefficients"


def _covariance_in_appendix(ctx: Context) -> bool:
    cov = ctx.calc.model.covariance
    return cov is not None and len(cov) > _INLINE_COVARIANCE


def _model_story(ctx: Context) -> list[Flowable]:
    st = ctx.st
    out = [*equation_story(ctx.calc, st), *subheading("Coefficients", st),
           *coefficient_story(ctx.calc, st, ctx.width),
           *subheading("Covariance matrix of the coefficients", st, room=60)]
    if _covariance_in_appendix(ctx):
        size = len(ctx.calc.model.covariance or ())
        return [*out, Paragraph(f"The {size} × {size} matrix is printed in the appendix at "
                                "the end of this report.", st.body)]
    return out + covariance_story(ctx.calc, st, ctx.width)


_SECTIONS: tuple[tuple[str, Story], ...] = (
    ("Purpose and scope", scope_story),
    ("Data behind the evidence", data_story),
    ("Inputs", inputs_story),
    ("The model equation", _model_story),
    ("Apparent performance", apparent_story),
    ("Internal validation: bootstrap optimism correction", bootstrap_story),
    ("External validation", external_story),
    ("Imported evidence", imported_story),
    ("Recalibration", recalibration_story),
    ("Calibration plots", calibration_story),
    ("Decision curves", decision_story),
    ("Reclassification against the reference model", reclassification_story),
    ("Sample-size adequacy", sample_size_story),
    ("Limitations and cautions", limitations_story),
    ("Test vectors", vectors_story),
    ("Checksum and signature", signature_story),
)
_CONDITIONAL = {"Imported evidence": "imported"}

SECTION_TITLES: tuple[str, ...] = tuple(t for t, _ in _SECTIONS if t not in _CONDITIONAL)
"""The headings every report has (imported evidence adds one when present)."""


@dataclass(frozen=True)
class ReportInfo:
    """What :func:`make_report` wrote: where, how many pages, which section headings."""

    path: Path | None
    pages: int
    sections: tuple[str, ...]


def _sections(ctx: Context) -> list[tuple[str, Story]]:
    kinds = {e.kind for e in ctx.calc.evidence}
    return [(t, f) for t, f in _SECTIONS if t not in _CONDITIONAL or _CONDITIONAL[t] in kinds]


def _story(ctx: Context, sections: list[tuple[str, Story]]) -> list[Flowable]:
    st = ctx.st
    toc = TableOfContents(dotsMinLevel=0)
    toc.levelStyles = [st.toc]
    out = title_story(ctx)
    out += [Spacer(1, 4), heading("", "Contents", st.h2, level=9), toc, PageBreak()]
    for number, (title, build) in enumerate(sections, start=1):
        body = build(ctx)
        first = body[:1]
        if first and isinstance(first[0], KeepTogether):  # never nest: it forces a page break
            first = list(first[0]._content)
        out += [CondPageBreak(_SECTION_ROOM),
                KeepTogether([heading(f"{number}.", title, st.h1), *first])]
        out += body[1:]
    if _covariance_in_appendix(ctx):
        out += [PageBreak(), heading("A.", APPENDIX_TITLE, st.h1),
                *covariance_story(ctx.calc, st, ctx.width)]
    return out


class _Template(BaseDocTemplate):
    """Sends level-0 headings to the table of contents."""

    def afterFlowable(self, flowable: Flowable) -> None:  # noqa: N802 - reportlab's name
        if getattr(flowable, "toc_level", None) == 0:
            self.notify("TOCEntry", (0, flowable.toc_text, self.page))


def _canvas_maker(ctx: Context) -> type[Canvas]:
    about = ctx.calc.about
    left = f"{about.title} · version {about.version} · file {ctx.loaded.fingerprint[:16]}"
    state = STATE_SHORT[ctx.loaded.state]
    synthetic = ctx.synthetic

    class _Numbered(Canvas):
        """Holds every page until the end so the footer can say 'page N of M'."""

        def __init__(self, *args: Any, **kwargs: Any) -> None:
            super().__init__(*args, **kwargs)
            self._pages: list[dict[str, Any]] = []

        def showPage(self) -> None:  # noqa: N802 - reportlab's name
            self._pages.append(dict(self.__dict__))
            self._startPage()

        def save(self) -> None:
            total = len(self._pages)
            for number, page in enumerate(self._pages, start=1):
                self.__dict__.update(page)
                self._decorate(number, total)
                super().showPage()
            super().save()

        def _decorate(self, number: int, total: int) -> None:
            width, height = self._pagesize
            self.saveState()
            if synthetic:
                self.setFillColorRGB(0.15, 0.15, 0.15)
                self.rect(0, height - _BAND, width, _BAND, stroke=0, fill=1)
                self.setFillColorRGB(1, 1, 1)
                self.setFont(FONT_BOLD, 8.5)
                self.drawCentredString(width / 2, height - _BAND + 2.4 * mm,
                                       f"{SYNTHETIC_MARK} · made-up demonstration data")
            self.setFillColor(GREY)
            self.setFont(FONT, 6.8)
            y = _MARGIN * 0.5
            self.drawString(_MARGIN, y, _fit(self, left, width * 0.62))
            self.drawRightString(width - _MARGIN, y, f"{state} · page {number} of {total}")
            self.setFont(FONT_BOLD if synthetic else FONT, 6.8)
            line2 = (f"{SYNTHETIC_MARK} · " if synthetic else "") + (
                f"Evidence report made by calcbuilder {__version__} on "
                f"{ctx.generated_at:%Y-%m-%d}")
            self.drawString(_MARGIN, y - 8.5, line2)
            self.restoreState()

    return _Numbered


def _fit(canvas: Canvas, text: str, width: float) -> str:
    """``text`` shortened with an ellipsis in the middle until it fits ``width``."""
    if canvas.stringWidth(text, FONT, 6.8) <= width:
        return text
    head, tail = text.split(" · version", 1)
    tail = " · version" + tail
    while head and canvas.stringWidth(head + "…" + tail, FONT, 6.8) > width:
        head = head[:-1]
    return head + "…" + tail


def report_bytes(loaded: LoadedCalculator, *, page: Page = "A4",
                 generated_at: dt.datetime | None = None) -> tuple[bytes, ReportInfo]:
    """The evidence report as PDF bytes, with its page count and section headings.

    Parameters
    ----------
    loaded : LoadedCalculator
        A calculator read by :func:`calcbuilder.calc.document.load_calculator`.
    page : {"A4", "Letter"}
    generated_at : datetime, optional
        The date printed as the report's making date; default now.

    Returns
    -------
    (bytes, ReportInfo)

    Raises
    ------
    SignatureError
        When the file's signature does not verify (no report for an altered file).
    CalcbuilderError
        For an unknown page size.
    """
    if page not in PAGE_SIZES:
        raise CalcbuilderError(f"page size must be A4 or Letter; got {page!r}")
    if loaded.state is TrustState.TAMPERED:
        raise SignatureError(f"{loaded.path or 'the calculator file'}: no evidence report for a "
                             f"file whose signature does not verify. "
                             f"{loaded.verification.message}")
    size = PAGE_SIZES[page]
    when = generated_at or dt.datetime.now().astimezone()
    width = size[0] - 2 * _MARGIN
    ctx = Context(loaded, ReportStyles(), width, when)
    about = ctx.calc.about
    buffer = io.BytesIO()
    top = _MARGIN + (_BAND if ctx.synthetic else 0)
    doc = _Template(buffer, pagesize=size, leftMargin=_MARGIN, rightMargin=_MARGIN,
                    topMargin=top, bottomMargin=_MARGIN,
                    title=f"Evidence report: {about.title} {about.version}",
                    author="; ".join(about.authors) or "calcbuilder",
                    subject=f"Evidence report, calculator file {ctx.loaded.fingerprint}",
                    creator=f"calcbuilder {__version__}")
    frame = Frame(_MARGIN, _MARGIN, width, size[1] - _MARGIN - top, id="body",
                  leftPadding=0, rightPadding=0, topPadding=0, bottomPadding=0)
    doc.addPageTemplates([PageTemplate("report", [frame])])
    sections = _sections(ctx)
    doc.multiBuild(_story(ctx, sections), canvasmaker=_canvas_maker(ctx))
    titles = tuple(t for t, _ in sections) + (
        (APPENDIX_TITLE,) if _covariance_in_appendix(ctx) else ())
    return buffer.getvalue(), ReportInfo(None, doc.page, titles)


def make_report(loaded: LoadedCalculator, path: str | Path, *, page: Page = "A4",
                generated_at: dt.datetime | None = None) -> ReportInfo:
    """Write the evidence report to ``path`` atomically (see :func:`report_bytes`).

    Nothing is written when the report cannot be made; an existing file at
    ``path`` is replaced only once the new report is complete.
    """
    data, info = report_bytes(loaded, page=page, generated_at=generated_at)
    written = atomic_write_bytes(path, data)
    return ReportInfo(written, info.pages, info.sections)
