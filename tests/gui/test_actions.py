"""Form actions: clear, print and save the risk sheet, About; no network, nothing stored."""

from __future__ import annotations

import socket

import pytest
from pypdf import PdfReader
from PySide6.QtCore import Qt
from PySide6.QtPrintSupport import QPrinter
from PySide6.QtWidgets import QComboBox, QFileDialog, QLineEdit, QMessageBox

from calcbuilder.gui import actions
from calcbuilder.gui.inputs_panel import NOT_ANSWERED

from .conftest import choose, choose_unit, label, type_into

REF = "Ward 7 bed 4711"


def fill(qtbot, window):
    type_into(qtbot, window, "age", "83")
    choose_unit(window, "creatinine", "mg/dL")
    type_into(qtbot, window, "creatinine", "1.9")
    choose(window, "falls", "yes")
    choose(window, "living", "assisted")
    qtbot.keyClicks(window.findChild(QLineEdit, "patientRef"), REF)


def pdf_text(path):
    reader = PdfReader(str(path))
    return len(reader.pages), " ".join(" ".join(p.extract_text().split()) for p in reader.pages)


def test_clear_wipes_every_value_and_the_patient_reference(qtbot, open_form, calc_file):
    window = open_form(calc_file)
    fill(qtbot, window)
    assert window.session.patient_ref == REF
    assert window.session.result().risk is not None
    assert window.print_action.isEnabled()
    assert window.save_action.isEnabled()
    qtbot.mouseClick(window.body.clear_button, Qt.MouseButton.LeftButton)
    session = window.session
    assert all(session.value(i) is None for i in window.body.inputs.ids())
    assert session.unit("creatinine") == "µmol/L"
    assert session.patient_ref == ""
    assert window.findChild(QLineEdit, "patientRef").text() == ""
    for input_id in ("age", "creatinine"):
        assert window.findChild(QLineEdit, input_id).text() == ""
    for input_id in ("falls", "living"):
        assert window.findChild(QComboBox, input_id).currentText() == NOT_ANSWERED
    assert window.findChild(QComboBox, "creatinine_unit").currentText() == "µmol/L"
    assert label(window, "risk").text() == "—"
    assert label(window, "creatinine_canonical").text() == ""
    assert not label(window, "age_message").isVisible()
    assert window.body.why.table.rowCount() == 0
    assert not window.body.print_button.isEnabled()
    assert not window.print_action.isEnabled()
    assert not window.save_action.isEnabled()
    assert window.clear_action.isEnabled()


def test_print_goes_through_a_qprinter(qtbot, open_form, calc_file, tmp_path):
    window = open_form(calc_file)
    fill(qtbot, window)
    printer = QPrinter(QPrinter.PrinterMode.HighResolution)
    printer.setOutputFormat(QPrinter.OutputFormat.PdfFormat)
    out = tmp_path / "printed.pdf"
    printer.setOutputFileName(str(out))
    actions.print_sheet(window.session, printer, threshold=window.body.threshold.current())
    pages, text = pdf_text(out)
    assert pages == 1
    risk = window.session.result().risk
    assert f"{risk * 100:.1f}%" in text
    assert REF in text
    assert "SYNTHETIC" in text


def test_printing_on_paper_without_qtpdf_says_what_to_do(qtbot, open_form, calc_file,
                                                         monkeypatch):
    window = open_form(calc_file)
    fill(qtbot, window)
    printer = QPrinter()
    printer.setOutputFormat(QPrinter.OutputFormat.NativeFormat)
    monkeypatch.setitem(__import__("sys").modules, "PySide6.QtPdf", None)  # not installed
    with pytest.raises(Exception, match="save the risk sheet as PDF"):
        actions.print_sheet(window.session, printer)


def test_save_sheet_writes_only_where_the_user_chose(qtbot, open_form, calc_file, tmp_path,
                                                     monkeypatch):
    window = open_form(calc_file)
    fill(qtbot, window)
    target = tmp_path / "chosen" / "sheet"
    target.parent.mkdir()
    monkeypatch.setattr(QFileDialog, "getSaveFileName",
                        staticmethod(lambda *_a, **_k: (str(target), actions.PDF_FILTER)))
    window.save_sheet()
    saved = target.with_suffix(".pdf")
    assert sorted(p.name for p in target.parent.iterdir()) == ["sheet.pdf"]
    pages, text = pdf_text(saved)
    assert pages == 1
    assert REF in text


def test_failed_save_is_reported_not_raised(qtbot, open_form, calc_file, tmp_path, monkeypatch):
    window = open_form(calc_file)
    fill(qtbot, window)
    target = tmp_path / "no-such-folder" / "sheet.pdf"
    monkeypatch.setattr(QFileDialog, "getSaveFileName",
                        staticmethod(lambda *_a, **_k: (str(target), actions.PDF_FILTER)))
    shown = []
    monkeypatch.setattr(QMessageBox, "warning", staticmethod(lambda *a: shown.append(a[1:])))
    window.save_sheet()
    assert shown
    assert shown[0][0] == "The risk sheet was not made"
    assert not target.exists()


def test_about_names_the_calculator_and_the_data_rules(open_form, calc_file):
    window = open_form(calc_file)
    text = actions.about_text(window.session)
    assert "Test calculator with 4 input(s), version 1.2.0" in text
    assert window.session.loaded.fingerprint in text
    assert "makes no network connection" in text
    assert "writes them nowhere unless you save or print a risk sheet" in text


def test_no_network_and_no_patient_values_on_disk(qtbot, open_form, calc_file, tmp_path,
                                                  monkeypatch):
    def refuse(*args, **kwargs):
        raise AssertionError("the clinic form must not open network connections")

    for name in ("socket", "create_connection", "getaddrinfo", "socketpair"):
        monkeypatch.setattr(socket, name, refuse)
    home = tmp_path / "home"
    home.mkdir()
    monkeypatch.setenv("HOME", str(home))
    monkeypatch.chdir(home)
    before = set(tmp_path.rglob("*"))
    window = open_form(calc_file)
    fill(qtbot, window)
    window.flush()  # draw every figure (matplotlib imported here)
    target = tmp_path / "out" / "sheet.pdf"
    target.parent.mkdir()
    actions.save_sheet(window.session, target)
    # matplotlib may build its font cache on first import in this process (no patient data)
    after = {p for p in set(tmp_path.rglob("*")) - before
             if "matplotlib" not in p.parts and p.name not in (".cache", ".config")}
    assert after == {target.parent, target}
    assert not any(b"4711" in p.read_bytes() for p in tmp_path.rglob("*")
                   if p.is_file() and p != target)
