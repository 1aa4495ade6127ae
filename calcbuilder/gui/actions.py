"""Form actions: print the risk sheet, save it as PDF, and the About box.

The risk sheet is always made by :func:`calcbuilder.reports.sheet.make_sheet`, so
the printed and the saved sheet are the same document. :func:`print_sheet` takes
a :class:`QPrinter` (tests pass a PDF printer); :func:`ask_and_print` is only the
thin dialog around it. Patient values are written only where the user saves or
prints a sheet.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Literal

from PySide6.QtCore import QBuffer, QByteArray, QIODevice
from PySide6.QtGui import QPageSize, QPainter
from PySide6.QtPrintSupport import QPrintDialog, QPrinter
from PySide6.QtWidgets import QFileDialog, QMessageBox, QWidget

from .. import __version__
from ..clinic.session import ClinicSession
from ..clinic.threshold import Threshold
from ..errors import CalcbuilderError

if TYPE_CHECKING:
    from PySide6.QtPdf import QPdfDocument

__all__ = ["about_text", "ask_and_print", "ask_and_save", "page_name", "print_sheet",
           "save_sheet"]

PDF_FILTER = "PDF documents (*.pdf)"


Page = Literal["A4", "Letter"]


def page_name(printer: QPrinter) -> Page:
    """``"Letter"`` when the printer's page is US Letter, else ``"A4"``."""
    size = printer.pageLayout().pageSize().id()
    return "Letter" if size == QPageSize.PageSizeId.Letter else "A4"


def save_sheet(session: ClinicSession, path: str | Path, *, page: Page = "A4",
               threshold: Threshold | None = None) -> Path:
    """Write the risk sheet as a PDF at ``path`` (what the user chose to save)."""
    from ..reports.sheet import make_sheet

    target = Path(path)
    make_sheet(session, target, page=page, threshold=threshold)
    return target


def print_sheet(session: ClinicSession, printer: QPrinter, *,
                threshold: Threshold | None = None) -> None:
    """Print the risk sheet on ``printer``.

    A printer set to PDF output with a file name receives the sheet itself.
    A real printer gets the sheet's pages drawn at its resolution, from the PDF
    held in memory (nothing is written to disk); this needs the optional QtPdf
    module, and without it the user is told to save the PDF instead.
    """
    page = page_name(printer)
    if printer.outputFormat() == QPrinter.OutputFormat.PdfFormat and printer.outputFileName():
        save_sheet(session, printer.outputFileName(), page=page, threshold=threshold)
        return
    try:
        from PySide6.QtPdf import QPdfDocument
    except ImportError:
        raise CalcbuilderError(
            "printing to a printer needs the Qt PDF module (PySide6-Pdf), which is not "
            "installed; save the risk sheet as PDF and print it from a PDF viewer") from None
    from ..reports.sheet import sheet_bytes

    data, _info = sheet_bytes(session, page=page, threshold=threshold)
    buffer = QBuffer()
    buffer.setData(QByteArray(data))
    buffer.open(QIODevice.OpenModeFlag.ReadOnly)
    document = QPdfDocument()
    document.load(buffer)
    try:
        _paint_pages(document, printer)
    finally:
        document.close()
        buffer.close()


def _paint_pages(document: QPdfDocument, printer: QPrinter) -> None:
    painter = QPainter(printer)
    try:
        area = printer.pageRect(QPrinter.Unit.DevicePixel).toRect()
        for index in range(document.pageCount()):
            if index:
                printer.newPage()
            painter.drawImage(area.topLeft(), document.render(index, area.size()))
    finally:
        painter.end()


def ask_and_print(parent: QWidget, session: ClinicSession, threshold: Threshold | None) -> bool:
    """The print dialog, then :func:`print_sheet`; False when cancelled."""
    printer = QPrinter(QPrinter.PrinterMode.HighResolution)
    dialog = QPrintDialog(printer, parent)
    dialog.setWindowTitle("Print the risk sheet")
    if dialog.exec() != QPrintDialog.DialogCode.Accepted:
        return False
    print_sheet(session, printer, threshold=threshold)
    return True


def ask_and_save(parent: QWidget, session: ClinicSession, threshold: Threshold | None
                 ) -> Path | None:
    """Ask where to save the sheet (nothing is suggested from patient values)."""
    name, _filter = QFileDialog.getSaveFileName(parent, "Save the risk sheet as PDF",
                                                "risk-sheet.pdf", PDF_FILTER)
    if not name:
        return None
    if not name.lower().endswith(".pdf"):
        name += ".pdf"
    return save_sheet(session, name, threshold=threshold)


def about_text(session: ClinicSession | None) -> str:
    """The About box: the calculator's provenance and what the form does with data."""
    lines = [f"calcbuilder clinic form, software version {__version__}.",
             "This form keeps patient values in memory only: it writes them nowhere unless "
             "you save or print a risk sheet, and it makes no network connection."]
    if session is not None:
        calc, loaded = session.calculator, session.loaded
        about = calc.about
        lines += ["", f"{about.title}, version {about.version}",
                  f"Released {about.released.isoformat()}; review by {about.review_by.isoformat()}",
                  f"For: {about.intended_use}", f"Population: {about.population}"]
        lines += [f"Authors: {', '.join(about.authors)}"] if about.authors else []
        lines += [f"Organisation: {about.organisation}"] if about.organisation else []
        lines += [f"Contact: {about.contact}"] if about.contact else []
        lines += [f"Reference: {ref}" for ref in about.references]
        lines += ["", f"Signature: {loaded.verification.message}",
                  f"Fingerprint: {loaded.fingerprint}"]
        if loaded.path is not None:
            lines.append(f"File: {loaded.path}")
    return "\n".join(lines)


def show_about(parent: QWidget, session: ClinicSession | None) -> None:
    box = QMessageBox(QMessageBox.Icon.Information, "About this calculator", about_text(session),
                      QMessageBox.StandardButton.Close, parent)
    box.setObjectName("aboutBox")
    box.exec()
