"""``calcbuilder fit``, ``assess`` and ``import evidence``: output, exit codes, every bad-input
message with nothing written, usage errors, Ctrl-C during the bootstrap, the progress bar."""

from __future__ import annotations

import contextlib
import io
import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

from calcbuilder.calc.document import load_calculator
from calcbuilder.cli import authoring, main
from calcbuilder.cli.progress import progress_bar
from calcbuilder.demo.scenario import make_cohort

EXAMPLE = Path(__file__).resolve().parents[2] / "templates" / "recipe-example.toml"


def run(capsys: pytest.CaptureFixture[str], *argv: Any) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    """The synthetic demo cohorts as CSV and a calculator fitted on the development one."""
    tmp = tmp_path_factory.mktemp("demo")
    dev, ext = tmp / "development.csv", tmp / "external.csv"
    pd.DataFrame(make_cohort("development").clean).to_csv(dev, index=False)
    pd.DataFrame(make_cohort("external").clean).to_csv(ext, index=False)
    assert main(["fit", str(dev), "--recipe", str(EXAMPLE), "-o", str(tmp / "demo.calc.json"),
                 "--band-boot", "10", "--seed", "1"]) == 0
    return {"tmp": tmp, "dev": dev, "ext": ext, "calc": tmp / "demo.calc.json"}


def test_fit_prints_the_data_checks_and_writes_a_valid_file(
        demo: dict[str, Path], capsys: pytest.CaptureFixture[str]) -> None:
    out_file = demo["tmp"] / "again.calc.json"
    code, out, _ = run(capsys, "fit", demo["dev"], "--recipe", EXAMPLE, "-o", out_file,
                       "--band-boot", "0")
    assert code == 0
    assert "1,500 rows read, 1,500 used" in out
    assert "Missing values: none" in out
    assert "events per parameter" in out
    assert "the binding criterion is" in out
    assert "Fitted by maximum likelihood" in out
    assert "AUC: " in out
    assert "SYNTHETIC DEMONSTRATION MATERIAL - not for clinical use" in out
    assert load_calculator(out_file).calculator.about.synthetic


def test_fit_json(demo: dict[str, Path], capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run(capsys, "fit", demo["dev"], "--recipe", EXAMPLE, "-o",
                       demo["tmp"] / "j.calc.json", "--band-boot", "0", "--json")
    info = json.loads(out)
    assert code == 0
    assert info["rows_used"] == 1500
    assert info["synthetic"] is True
    assert "(intercept)" in info["coefficients"]
    assert info["apparent"]["calibration_slope"]["value"] == pytest.approx(1.0, abs=1e-8)


def _broken(tmp: Path, change: Any) -> Path:
    df = pd.DataFrame(make_cohort("development").clean)
    path = tmp / "broken.csv"
    change(df).to_csv(path, index=False)
    return path


@pytest.mark.parametrize(("change", "message"), [
    (lambda df: df.drop(columns="delirium"),
     "the recipe names column 'delirium' (outcome.column) but the data have no such column"),
    (lambda df: df.assign(delirium=np.where(np.arange(len(df)) == 3, 7, df.delirium)),
     "outcome column 'delirium' must have two values; found 3"),
    (lambda df: df.astype(object).assign(sodium=["14O" if i == 0 else v
                                                 for i, v in enumerate(df.sodium)]),
     "'14O'"),
    (lambda df: df.drop(columns="medicines"),
     "names column 'medicines' (inputs[medicines].column) but the data have no such column"),
    (lambda df: df.assign(delirium=(np.arange(len(df)) < 8).astype(int)),
     "too few events to fit: 8 events"),
    (lambda df: df.astype(object).assign(creatinine=["" if i in (4, 9) else v
                                                     for i, v in enumerate(df.creatinine)]),
     "fill them in, or use the complete-case option (calcbuilder fit --complete-case)"),
])
def test_fit_refusals_exit_1_and_write_nothing(tmp_path: Path, capsys: pytest.CaptureFixture[str],
                                               change: Any, message: str) -> None:
    out_file = tmp_path / "never.calc.json"
    code, out, err = run(capsys, "fit", _broken(tmp_path, change), "--recipe", EXAMPLE, "-o",
                         out_file)
    assert code == 1
    assert err.startswith("calcbuilder fit: error: ")
    assert message in err
    assert out == ""
    assert not out_file.exists()


def test_fit_unreadable_data(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    (tmp_path / "d.csv").write_bytes(b"age;delirium\n70;1\n")
    code, _, err = run(capsys, "fit", tmp_path / "d.csv", "--recipe", EXAMPLE, "-o",
                       tmp_path / "o.calc.json")
    assert code == 1
    assert "separated by semicolons" in err
    assert not (tmp_path / "o.calc.json").exists()


def test_complete_case_option(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    data = _broken(tmp_path, lambda df: df.astype(object).assign(
        creatinine=["" if i in (4, 9) else v for i, v in enumerate(df.creatinine)]))
    code, out, _ = run(capsys, "fit", data, "--recipe", EXAMPLE, "-o", tmp_path / "o.calc.json",
                       "--complete-case", "--band-boot", "0")
    assert code == 0
    assert "1,498 used (2 left out" in out
    assert "complete-case: left out 2 of 1500 rows" in out


def test_assess_bootstrap_external_and_predictions(
        demo: dict[str, Path], capsys: pytest.CaptureFixture[str]) -> None:
    tmp = demo["tmp"]
    code, out, _ = run(capsys, "assess", demo["calc"], "--data", demo["dev"], "--bootstrap", "20",
                       "--seed", "4", "-o", tmp / "b.calc.json")
    assert code == 0
    assert "Added evidence set 'bootstrap-1'" in out
    assert "slow path: the recipe is re-run on every resample" in out
    assert "apparent  optimism  corrected" in out
    assert "--seed 4 reproduces these resamples" in out
    code, out, _ = run(capsys, "assess", tmp / "b.calc.json", "--data", demo["ext"], "--external",
                       "--label", "Demo Hospital B (synthetic)", "--band-boot", "5", "-o",
                       tmp / "c.calc.json", "--json", "--population", "Adults 65+ (synthetic)",
                       "--period", "2025")
    info = json.loads(out)
    assert code == 0
    assert info["evidence_id"] == "external-1"
    assert info["rows"]["used"] == 800
    external = load_calculator(tmp / "c.calc.json").calculator.evidence[-1].raw["dataset"]
    assert (external["population"], external["period"]) == ("Adults 65+ (synthetic)", "2025")
    y = make_cohort("external").clean["delirium"]
    pd.DataFrame({"delirium": y, "p": np.full(y.size, 0.2)}).to_csv(tmp / "p.csv", index=False)
    code, out, _ = run(capsys, "assess", tmp / "c.calc.json", "--predictions", tmp / "p.csv",
                       "--risk-column", "p", "--label", "Supplied", "--band-boot", "0", "-o",
                       tmp / "d.calc.json")
    assert code == 0
    assert "Added evidence set 'imported-1' (imported" in out
    kinds = [e.kind for e in load_calculator(tmp / "d.calc.json").calculator.evidence]
    assert kinds == ["apparent", "bootstrap", "external", "imported"]


@pytest.mark.parametrize(("extra", "message"), [
    (["--external"], "--external needs --label TEXT"),
    (["--label", "x"], "--label goes with --external or --predictions"),
    (["--external", "--label", "x", "--recipe", "r.toml"], "--recipe is for the bootstrap"),
    (["--bootstrap", "0"], "--bootstrap must be at least 1"),
])
def test_assess_usage_errors_exit_2(demo: dict[str, Path], capsys: pytest.CaptureFixture[str],
                                    extra: list[str], message: str) -> None:
    code, _, err = run(capsys, "assess", demo["calc"], "--data", demo["dev"], "-o",
                       demo["tmp"] / "x.calc.json", *extra)
    assert code == 2
    assert message in err
    assert not (demo["tmp"] / "x.calc.json").exists()


def test_assess_refused_rows(demo: dict[str, Path], tmp_path: Path,
                             capsys: pytest.CaptureFixture[str]) -> None:
    df = pd.DataFrame(make_cohort("external").clean).astype(object)
    df.loc[0, "sodium"] = 1390  # a misplaced decimal point
    df.to_csv(tmp_path / "e.csv", index=False)
    code, _, err = run(capsys, "assess", demo["calc"], "--data", tmp_path / "e.csv",
                       "--external", "--label", "B", "-o", tmp_path / "o.calc.json")
    assert code == 1
    assert "1 of 800 rows cannot be used (1 with a refused input value)" in err
    assert "row 2: Serum sodium" in err
    assert not (tmp_path / "o.calc.json").exists()


def test_ctrl_c_during_the_bootstrap_writes_nothing(
        demo: dict[str, Path], monkeypatch: pytest.MonkeyPatch,
        capsys: pytest.CaptureFixture[str]) -> None:
    @contextlib.contextmanager
    def pressing_ctrl_c(description: str, *, enabled: bool | None = None) -> Iterator[Any]:
        del description, enabled

        def callback(done: int, _total: int) -> bool:
            if done >= 3:
                raise KeyboardInterrupt
            return True

        yield callback

    monkeypatch.setattr(authoring, "progress_bar", pressing_ctrl_c)
    out_file = demo["tmp"] / "interrupted.calc.json"
    code, _, err = run(capsys, "assess", demo["calc"], "--data", demo["dev"], "-o", out_file)
    assert code == 1
    assert "interrupted; nothing was written" in err
    assert not out_file.exists()
    assert not list(demo["tmp"].glob(".*.tmp"))


def test_ctrl_c_during_fit_writes_nothing(demo: dict[str, Path], monkeypatch: pytest.MonkeyPatch,
                                          capsys: pytest.CaptureFixture[str]) -> None:
    @contextlib.contextmanager
    def pressing_ctrl_c(description: str, *, enabled: bool | None = None) -> Iterator[Any]:
        del description, enabled

        def callback(done: int, _total: int) -> bool:
            raise KeyboardInterrupt

        yield callback

    monkeypatch.setattr(authoring, "progress_bar", pressing_ctrl_c)
    out_file = demo["tmp"] / "interrupted-fit.calc.json"
    code, out, err = run(capsys, "fit", demo["dev"], "--recipe", EXAMPLE, "-o", out_file)
    assert code == 1
    assert "calcbuilder fit: interrupted; nothing was written" in err
    assert out == ""
    assert not out_file.exists()


def test_import_evidence_command(demo: dict[str, Path], tmp_path: Path,
                                 capsys: pytest.CaptureFixture[str]) -> None:
    summary = {"label": "Published", "source": "Example et al. (test)",
               "dataset": {"name": "Site C", "n": 500, "events": 60},
               "metrics": {"auc": {"value": 0.71, "low": 0.65, "high": 0.77}}}
    (tmp_path / "s.json").write_text(json.dumps(summary), "utf-8")
    code, out, _ = run(capsys, "import", "evidence", demo["calc"], tmp_path / "s.json", "-o",
                       tmp_path / "o.calc.json")
    assert code == 0
    assert "Added evidence set 'imported-1'" in out
    summary["dataset"]["events"] = 600
    (tmp_path / "s.json").write_text(json.dumps(summary), "utf-8")
    code, _, err = run(capsys, "import", "evidence", demo["calc"], tmp_path / "s.json", "-o",
                       tmp_path / "p.calc.json")
    assert code == 1
    assert "600 events cannot exceed n = 500" in err
    assert not (tmp_path / "p.calc.json").exists()


def test_progress_bar_draws_on_a_terminal_and_is_silent_otherwise(
        capsys: pytest.CaptureFixture[str]) -> None:
    from rich.console import Console

    screen = io.StringIO()
    terminal = Console(file=screen, force_terminal=True, width=100)
    with progress_bar("Bootstrap", enabled=True, console=terminal) as bar:
        assert bar(3, 4) is True
        terminal.file.flush()
        drawn = screen.getvalue()
    assert "Bootstrap" in drawn
    assert "ETA" in drawn
    with progress_bar("Bootstrap") as bar:  # pytest's stderr is not a terminal: nothing drawn
        assert bar(1, 2) is True
    assert capsys.readouterr().err == ""
