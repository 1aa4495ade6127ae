"""Screenshots of every step of the authoring workspace, at 100%, 125% and 200% scaling.

Usage::

    .venv/bin/python scripts/screenshots_author.py OUT_FOLDER [--size 1280x860]
        [--scales 1,1.25,2]

Writes ``<NN>-<step>-<scale>.png`` into OUT_FOLDER for each scale: the six steps
on the synthetic demo cohort (fitted, bootstrap B = 10, an external validation
and a recalibration on the synthetic Demo Hospital B cohort), the Inputs page
with problems beside their fields, the worker panel during a bootstrap, and the
Publish page after signing with the clinic form preview. Each scale runs in
its own process (Qt reads ``QT_SCALE_FACTOR`` at start-up). Everything is
synthetic and made in a temporary folder that is removed afterwards.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
from pathlib import Path
from typing import Any

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
ROOT = Path(__file__).resolve().parents[1]
PASSPHRASE = "synthetic demo passphrase"
sys.path.insert(0, str(ROOT))


def _pipeline(ws: Any) -> dict[str, Any]:
    """Fit, bootstrap, external validation and recalibration, without the worker; the
    document after the fit."""
    from calcbuilder.authoring import ExternalData
    from calcbuilder.authoring.pipeline import run_stage

    def quiet(*_: Any) -> bool:
        return True

    seed, bands, _ = ws.assess.numbers()
    spec, draft = ws.first_spec()
    basis, model_basis = ws.bases()
    ws.assess.start(run_stage(spec, None, band_boot=bands, seed=seed, report=quiet), spec,
                    basis=basis, model_basis=model_basis, draft_texts=draft)
    fitted = dict(ws.assess.document)
    ext = Path(spec["data"]).with_name("external.csv")
    ws.assess.externals.append(ExternalData(ext, "Demo Hospital B (synthetic)"))
    ws.assess.recal_path, ws.assess.recal_label = ext, "Demo Hospital B (synthetic)"
    for kind in ("bootstrap", "external", "recalibrate"):
        spec = ws.stage_spec(kind, 0)
        result = run_stage(spec, ws.assess.document, band_boot=bands, seed=seed, report=quiet)
        ws.assess.add(result, spec)
    return fitted


def _grab(window: Any, out: Path, name: str) -> None:
    window.settle()
    window.grab().save(str(out / name))
    print(out / name)


def _prepared(tmp: Path) -> tuple[Any, Any, dict[str, Any]]:
    """The demo workspace, fitted and assessed, with a demo key; (workspace, keys, fitted)."""
    from calcbuilder.authoring import Workspace, save_project
    from calcbuilder.authoring.publish_step import create_key
    from tests.authoring.demo import fill_workspace, write_cohorts

    files = write_cohorts(tmp)
    ws = fill_workspace(Workspace(), files["dev"], seed=20261202, band_boot=50, n_boot=10)
    save_project(ws, tmp / "delirium-demo.cbproject.json")
    ws.decision.bands = [("lower", "0.1"), ("higher", "1")]
    fitted = _pipeline(ws)
    keys = create_key(tmp, "demo-author", PASSPHRASE)
    ws.publish.key_path = keys.private_key
    ws.publish.suggest(tmp, ws.about.title)
    save_project(ws, tmp / "delirium-demo.cbproject.json")
    return ws, keys, fitted


def _steps(window: Any, out: Path, tag: str) -> None:
    from PySide6.QtWidgets import QScrollArea

    for k, step in enumerate(("data", "inputs", "assess", "about", "decision")):
        window.go_to(k)
        _grab(window, out, f"{k + 1:02d}-{step}-{tag}.png")
        if step == "assess":
            page = window.page("assess")
            page.findChild(QScrollArea, "assessScroll").ensureWidgetVisible(
                page.plots.boxes["distribution"], 0, 0)
            _grab(window, out, f"{k + 1:02d}-assess-plots-{tag}.png")


def _publish(window: Any, out: Path, tag: str, keys: Any) -> None:
    from calcbuilder.authoring.publish_step import open_key, sign_and_write, write_report

    ws = window.ws
    window.go_to(5)
    window.page("publish").show_preview()
    _grab(window, out, f"06-publish-preview-{tag}.png")
    doc, output = ws.assess.document, ws.publish.output
    if doc is None or output is None:
        raise SystemExit("nothing to publish")
    done = sign_and_write(doc, open_key(keys.private_key, PASSPHRASE), output)
    if ws.publish.report_path is not None:
        done = write_report(done, keys.public_key, ws.publish.report_path, "A4")
    window.page("publish")._published(None, done, None)
    _grab(window, out, f"07-publish-signed-{tag}.png")


def _problems(window: Any, out: Path, tag: str) -> None:
    ws = window.ws
    saved = (ws.inputs.drafts[0].knots, ws.inputs.drafts[1].limit_low,
             ws.inputs.drafts[2].label, ws.about.review_by)
    ws.inputs.drafts[0].knots = "12"
    ws.inputs.drafts[1].limit_low = "ten"
    ws.inputs.drafts[2].label = ""
    ws.about.review_by = "2027-02-30"
    window.refresh_all()
    window.go_to(1)
    _grab(window, out, f"08-inputs-problems-{tag}.png")
    window.go_to(3)
    _grab(window, out, f"09-about-problems-{tag}.png")
    (ws.inputs.drafts[0].knots, ws.inputs.drafts[1].limit_low, ws.inputs.drafts[2].label,
     ws.about.review_by) = saved
    window.refresh_all()


def _running(window: Any, out: Path, tag: str, fitted: dict[str, Any]) -> None:
    from PySide6.QtWidgets import QApplication

    from calcbuilder.authoring.pipeline import run_stage

    window.go_to(2)
    spec = {**window.ws.stage_spec("bootstrap"), "n_boot": 5000}
    window.run_job("Bootstrap validation", lambda report: run_stage(
        spec, fitted, band_boot=50, seed=1, report=report), lambda _result: None)
    for _ in range(200):
        QApplication.processEvents()
        if window.job_progress.value() > 3:
            break
        window.runner.wait(20)
    _grab(window, out, f"10-assess-running-{tag}.png")
    window.cancel_job()
    window.runner.wait(20000)
    QApplication.processEvents()


def shoot(out: Path, size: tuple[int, int], scale: str) -> None:
    """Every screenshot at the scale Qt was started with."""
    from calcbuilder.gui.app import make_app
    from calcbuilder.gui.authoring.window import AuthoringWindow

    make_app()
    tag = scale.replace(".", "_")
    with tempfile.TemporaryDirectory(prefix="calcbuilder-shots-") as folder:
        ws, keys, fitted = _prepared(Path(folder))
        window = AuthoringWindow(ws)
        window.resize(*size)
        window.show()
        window.refresh_all()
        _steps(window, out, tag)
        _publish(window, out, tag, keys)
        _problems(window, out, tag)
        _running(window, out, tag, fitted)
        window.go_to(1)
        window.page("inputs").mode_buttons["table"].click()
        _grab(window, out, f"11-inputs-import-{tag}.png")
        window.ws.mark_saved()
        window.close()


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out", type=Path)
    parser.add_argument("--size", default="1280x860")
    parser.add_argument("--scales", default="1,1.25,2")
    parser.add_argument("--one", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    args.out.mkdir(parents=True, exist_ok=True)
    width, height = (int(v) for v in args.size.lower().split("x"))
    if args.one:
        shoot(args.out, (width, height), os.environ.get("QT_SCALE_FACTOR", "1"))
        return 0
    for scale in args.scales.split(","):
        env = {**os.environ, "QT_SCALE_FACTOR": scale.strip()}
        code = subprocess.call([sys.executable, __file__, str(args.out), "--size", args.size,
                                "--one"], env=env)
        if code:
            return code
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
