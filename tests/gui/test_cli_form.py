"""``calcbuilder form``: filled screenshots offscreen, exit codes, no window kept."""

from __future__ import annotations

import pytest
from PySide6.QtGui import QImage
from PySide6.QtWidgets import QApplication, QMainWindow

from calcbuilder.cli import main
from calcbuilder.gui.app import ClinicWindow
from tests.fixtures_calc import write_calculator

VALUES = ["--value", "age=72", "--unit", "creatinine=mg/dL", "--value", "creatinine=1.4",
          "--value", "falls=yes", "--value", "living=Assisted living"]


def open_windows():
    return [w for w in QApplication.topLevelWidgets()
            if isinstance(w, ClinicWindow) and w.isVisible()]


def test_screenshot_of_the_filled_form(qapp, tmp_path, capsys):
    path = write_calculator(tmp_path)
    out = tmp_path / "form.png"
    code = main(["form", str(path), *VALUES, "--threshold", "30", "--screenshot", str(out),
                 "--size", "1200x800"])
    assert code == 0, capsys.readouterr().err
    image = QImage(str(out))
    assert (image.width(), image.height()) == (1200, 800)
    assert f"Saved a screenshot of the form to {out}" in capsys.readouterr().out
    assert not open_windows()


def test_values_reach_the_form(qapp, tmp_path, monkeypatch):
    shown = {}

    def grab(window):
        shown["risk"] = window.session.result().risk
        shown["unit"] = window.session.unit("creatinine")
        shown["threshold"] = window.session.threshold.pt
        return QMainWindow.grab(window)

    monkeypatch.setattr(ClinicWindow, "grab", grab)
    path = write_calculator(tmp_path)
    assert main(["form", str(path), *VALUES, "--threshold", "30",
                 "--screenshot", str(tmp_path / "f.png")]) == 0
    assert shown["risk"] is not None
    assert shown["unit"] == "mg/dL"
    assert shown["threshold"] == pytest.approx(0.3)


@pytest.mark.parametrize(("argv", "words"), [
    (["--value", "weight=80"], "unknown input"),
    (["--value", "falls=maybe"], "'maybe' is not an answer of falls"),
    (["--unit", "age=months"], "age has no unit 'months'"),
    (["--value", "age"], "expected ID=VALUE"),
])
def test_bad_values_are_usage_errors(qapp, tmp_path, capsys, argv, words):
    path = write_calculator(tmp_path)
    code = main(["form", str(path), *argv, "--screenshot", str(tmp_path / "x.png")])
    assert code == 2
    assert words in capsys.readouterr().err
    assert not (tmp_path / "x.png").exists()


def test_values_need_a_file(qapp, capsys, tmp_path):
    assert main(["form", "--value", "age=1", "--screenshot", str(tmp_path / "x.png")]) == 2
    assert "need a FILE" in capsys.readouterr().err


def test_refused_file_screenshot_shows_the_refusal(qapp, tmp_path):
    path = tmp_path / "broken.calc.json"
    path.write_text("{}", "utf-8")
    out = tmp_path / "refused.png"
    assert main(["form", str(path), "--screenshot", str(out)]) == 0
    assert out.exists()
