"""Make every picture of the user guide (docs/images/*.png) from the synthetic demo.

Usage::

    .venv/bin/python scripts/screenshots_all.py [OUT_FOLDER] [--bootstrap 200] [--max-kb 150]

SYNTHETIC, NOT FOR CLINICAL USE. Runs the one-command demo
(:func:`calcbuilder.demo.pipeline.run_demo`) in a temporary folder, then, in the
same ways as ``scripts/screenshots_form.py``, ``scripts/render_sheet.py`` and
``scripts/render_report.py`` (which do it for the test calculators):

* the clinic form, offscreen, on the signed demo calculator: empty; filled with
  the demo's made-up patient on each of its three tabs; with a refused value
  and extrapolated ones; with extrapolated values only; the same file when its
  signer is not trusted, when it is past its review-by date, and when it was
  changed after signing;
* the demo risk sheet and chosen evidence-report pages, rendered by ``pdftoppm``.

Every PNG is downscaled and reduced to a palette until it is at most
``--max-kb`` kilobytes (default 150), and written to OUT_FOLDER (default
``docs/images``). Nothing from the temporary folder is kept.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import Any

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
os.environ.setdefault("MPLBACKEND", "Agg")
ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from PIL import Image  # noqa: E402
from pypdf import PdfReader  # noqa: E402

from calcbuilder.calc.keys import TrustedKeys, load_private_key  # noqa: E402
from calcbuilder.calc.signing import sign_document  # noqa: E402
from calcbuilder.demo.pipeline import DEMO_PATIENT, FILE_NAMES, run_demo  # noqa: E402

SIZE = (1360, 900)
REPORT_PAGES = {  # picture name -> a heading to find (past the contents on page 1)
    "report-title": "Contents",
    "report-bootstrap": "Internal validation",
    "report-decision": "Decision curves",
    "report-reclassification": "Reclassification against",
}


def shrink(path: Path, max_kb: int, width: int) -> None:
    """Downscale ``path`` to at most ``width`` pixels wide, palette PNG, under ``max_kb``."""
    image = Image.open(path).convert("RGB")
    while True:
        if image.width > width:
            image = image.resize((width, round(image.height * width / image.width)),
                                 Image.Resampling.LANCZOS)
        image.quantize(colors=128, method=Image.Quantize.MEDIANCUT).save(path, optimize=True)
        if path.stat().st_size <= max_kb * 1000 or width < 500:
            return
        width = int(width * 0.85)


def typed_patient() -> list[tuple[str, str, str | None]]:
    """The demo patient as (input, text typed, unit)."""
    out = []
    for input_id, value in DEMO_PATIENT.items():
        typed, unit = value if isinstance(value, tuple) else (value, None)
        text = ("yes" if typed else "no") if isinstance(typed, bool) else str(typed)
        out.append((input_id, text, unit))
    return out


class FormShots:
    """The clinic form on the demo calculator, one window per picture."""

    def __init__(self, demo: Path, work: Path, out: Path) -> None:
        from calcbuilder.gui.app import make_app

        make_app()
        self.demo, self.work, self.out = demo, work, out
        self.calc = demo / FILE_NAMES["calculator"]
        pub = demo / FILE_NAMES["public_key"]
        self.trusted = TrustedKeys(work / "no-trusted-keys", extra_files=(pub,))
        self.stranger = TrustedKeys(work / "no-trusted-keys")

    def window(self, path: Path, trusted: TrustedKeys | None = None,
               values: list[tuple[str, str, str | None]] | None = None) -> Any:
        from calcbuilder.gui.app import ClinicWindow

        window = ClinicWindow(trusted=trusted or self.trusted)
        window.resize(*SIZE)
        if window.open_path(path):
            for input_id, text, unit in values or []:
                if unit:
                    window.set_unit(input_id, unit)
                window.set_value(input_id, text)
        window.show()
        return window

    def save(self, name: str, window: Any, tab: int = 0) -> Path:
        if window.body is not None:
            window.body.sections.setCurrentIndex(tab)
        window.settle()
        target = self.out / f"{name}.png"
        window.grab().save(str(target))
        window.close()
        return target

    def edited_copy(self, name: str, change: Callable[[dict[str, Any]], None],
                    resign: bool) -> Path:
        """A copy of the demo file with ``change`` applied, signed again or left tampered."""
        doc = json.loads(self.calc.read_text("utf-8"))
        change(doc)
        if resign:
            key = load_private_key(self.demo / FILE_NAMES["private_key"], None)
            doc = sign_document(doc, key)
        path = self.work / name
        path.write_text(json.dumps(doc, ensure_ascii=False), "utf-8")
        return path

    def all(self) -> list[Path]:
        patient = typed_patient()
        far = [("age", "99", None), *patient[1:6], ("sodium", "121", None), *patient[7:]]
        odd = [far[0], ("cog_errors", "12", None), *far[2:]]

        def past(doc: dict[str, Any]) -> None:
            doc["about"]["released"], doc["about"]["review_by"] = "2024-01-15", "2025-01-15"

        def altered(doc: dict[str, Any]) -> None:
            doc["model"]["intercept"] += 0.5

        expired = self.edited_copy("expired.calc.json", past, resign=True)
        tampered = self.edited_copy("tampered.calc.json", altered, resign=False)
        return [
            self.save("form-empty", self.window(self.calc)),
            self.save("form-filled", self.window(self.calc, values=patient)),
            self.save("form-why", self.window(self.calc, values=patient), tab=1),
            self.save("form-evidence", self.window(self.calc, values=patient), tab=2),
            self.save("form-messages", self.window(self.calc, values=odd)),
            self.save("form-extrapolated", self.window(self.calc, values=far)),
            self.save("form-unknown-signer",
                      self.window(self.calc, trusted=self.stranger, values=patient)),
            self.save("form-expired", self.window(expired, values=patient)),
            self.save("form-tampered", self.window(tampered)),
        ]


def pdf_pages(pdf: Path, pages: dict[str, str], out: Path, dpi: int) -> list[Path]:
    """Render the first page holding each heading (``pdftoppm``) as ``<name>.png``."""
    reader = PdfReader(pdf)
    texts = [" ".join((p.extract_text() or "").split()) for p in reader.pages]
    made = []
    for name, heading in pages.items():
        first = 0 if heading in texts[0] and heading in ("Contents", "SYNTHETIC") else 1
        number = next((i + 1 for i, t in enumerate(texts) if i >= first and heading in t),
                      None)
        if number is None:
            print(f"{pdf.name}: no page with {heading!r}; {name}.png not made")
            continue
        subprocess.run(["pdftoppm", "-r", str(dpi), "-png", "-singlefile", "-f", str(number),
                        "-l", str(number), str(pdf), str(out / name)], check=True)
        made.append(out / f"{name}.png")
    return made


def main(argv: list[str] | None = None) -> int:
    """Run the demo and write every guide picture."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out", type=Path, nargs="?", default=ROOT / "docs" / "images")
    parser.add_argument("--bootstrap", type=int, default=200)
    parser.add_argument("--max-kb", type=int, default=150)
    args = parser.parse_args(argv)
    if shutil.which("pdftoppm") is None:
        print("pdftoppm not found: apt-get install poppler-utils", file=sys.stderr)
        return 1
    args.out.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp)
        os.environ["CALCBUILDER_CONFIG_DIR"] = str(work / "config")
        demo = work / "demo"
        run_demo(demo, n_boot=args.bootstrap)
        made = FormShots(demo, work, args.out).all()
        made += pdf_pages(demo / FILE_NAMES["sheet"], {"sheet": "SYNTHETIC"}, args.out, 110)
        made += pdf_pages(demo / FILE_NAMES["report"], REPORT_PAGES, args.out, 90)
    for path in made:
        shrink(path, args.max_kb, 1100 if path.name.startswith("form") else 900)
        print(f"{path} ({path.stat().st_size // 1000} kB)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
