"""Screenshots of the clinic form for review and the user guide (synthetic calculators only).

Usage::

    .venv/bin/python scripts/screenshots_form.py OUT_FOLDER [--size 1360x900] [--gray]

Writes one PNG per case into OUT_FOLDER: the form with no calculator, an empty
form, a filled form (signed by a trusted key, creatinine in mg/dL), each tab,
values with messages (refused, extrapolated), a threshold outside the authors'
range, a tampered file, an unsigned file, an unknown signer past its review
date, and a 25-input calculator. ``--gray`` also writes a grayscale copy of each
(``*-gray.png``) to check that nothing relies on colour. The calculators come
from ``tests/fixtures_calc.py``; the form runs offscreen and nothing is kept.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import Any

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey  # noqa: E402
from PySide6.QtGui import QImage  # noqa: E402

from calcbuilder.calc.keys import TrustedKeys, public_key_pem  # noqa: E402
from calcbuilder.calc.signing import sign_document  # noqa: E402
from calcbuilder.clinic.threshold import Threshold  # noqa: E402
from calcbuilder.gui.app import ClinicWindow, make_app  # noqa: E402
from tests.fixtures_calc import make_calculator, patient_values, write_calculator  # noqa: E402

PATIENT = {"age": "78", "creatinine": "1.3", "falls": "yes", "living": "assisted"}


def _with_calibration(key: Ed25519PrivateKey) -> dict[str, Any]:
    """The test calculator with a (made-up) calibration curve in its external set, signed."""
    doc = make_calculator()
    external = next(e for e in doc["evidence"] if e["kind"] == "external")
    risk = [0.03, 0.08, 0.15, 0.25, 0.35, 0.45, 0.55]
    external["calibration_curve"] = {
        "risk": risk, "observed": [0.07, 0.16, 0.27, 0.4, 0.5, 0.58, 0.64],
        "low": [0.05, 0.13, 0.24, 0.36, 0.45, 0.51, 0.55],
        "high": [0.09, 0.19, 0.3, 0.44, 0.55, 0.65, 0.73]}
    return sign_document(doc, key)


class Shots:
    """Writes the calculators and keys once, then one window per case."""

    def __init__(self, out: Path, folder: Path, size: tuple[int, int], gray: bool) -> None:
        self.out, self.folder, self.size, self.gray = out, folder, size, gray
        key = Ed25519PrivateKey.generate()
        pub = folder / "demo-signer.pub"
        pub.write_bytes(public_key_pem(key.public_key(), "Test signing unit"))
        self.trusted = TrustedKeys(folder / "no-such-folder", extra_files=(pub,))
        self.signed = folder / "signed.calc.json"
        self.signed.write_text(json.dumps(_with_calibration(key), ensure_ascii=False), "utf-8")
        self.unsigned = write_calculator(folder, "unsigned.calc.json")
        self.stranger = write_calculator(folder, "stranger.calc.json", signed=True,
                                         review_by="2026-02-01")
        self.wide = write_calculator(folder, "wide.calc.json", n_inputs=25, signed=True, key=key)
        doc = make_calculator(signed=True, key=key)
        doc["about"]["title"] = "Test calculator (edited after signing)"
        self.tampered = folder / "tampered.calc.json"
        self.tampered.write_text(json.dumps(doc, ensure_ascii=False), "utf-8")

    def window(self, path: Path | None) -> ClinicWindow:
        window = ClinicWindow(trusted=self.trusted)
        window.resize(*self.size)
        if path is not None:
            window.open_path(path)
        window.show()
        return window

    def save(self, name: str, window: ClinicWindow, tab: int = 0) -> None:
        if window.body is not None:
            window.body.sections.setCurrentIndex(tab)
        window.settle()
        target = self.out / f"{name}.png"
        window.grab().save(str(target))
        if self.gray:
            image = QImage(str(target)).convertToFormat(QImage.Format.Format_Grayscale8)
            image.save(str(self.out / f"{name}-gray.png"))
        window.close()
        print(target)


def fill(window: ClinicWindow, values: dict[str, Any], units: dict[str, str] | None = None
         ) -> ClinicWindow:
    for input_id, unit in (units or {}).items():
        window.set_unit(input_id, unit)
    for input_id, value in values.items():
        window.set_value(input_id, value)
    return window


def cases(s: Shots) -> dict[str, Callable[[], None]]:
    mg = {"creatinine": "mg/dL"}
    return {
        "01-no-calculator": lambda: s.save("01-no-calculator", s.window(None)),
        "02-empty-form": lambda: s.save("02-empty-form", s.window(s.signed)),
        "03-filled-threshold": lambda: s.save(
            "03-filled-threshold", fill(s.window(s.signed), PATIENT, mg)),
        "04-filled-why": lambda: s.save("04-filled-why", fill(s.window(s.signed), PATIENT, mg), 1),
        "05-filled-evidence": lambda: s.save(
            "05-filled-evidence", fill(s.window(s.signed), PATIENT, mg), 2),
        "06-messages-refused": lambda: s.save("06-messages-refused", fill(
            s.window(s.signed), {"age": "7O", "creatinine": "1.3", "falls": "yes"})),
        "07-extrapolated": lambda: s.save("07-extrapolated", _extrapolated(s)),
        "08-tampered": lambda: s.save("08-tampered", s.window(s.tampered)),
        "09-unsigned": lambda: s.save("09-unsigned", fill(s.window(s.unsigned), PATIENT, mg)),
        "10-unknown-signer-expired": lambda: s.save(
            "10-unknown-signer-expired", fill(s.window(s.stranger), PATIENT, mg)),
        "11-25-inputs": lambda: s.save("11-25-inputs", fill(s.window(s.wide), _wide_values())),
    }


def _wide_values() -> dict[str, str]:
    values = patient_values(25, 2)
    return {k: ("yes" if v else "no") if isinstance(v, bool) else str(v)
            for k, v in values.items()}


def _extrapolated(s: Shots) -> ClinicWindow:
    window = fill(s.window(s.signed), {**PATIENT, "age": "96", "creatinine": "320"})
    window.set_threshold(Threshold.from_percent(60))
    return window


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out", type=Path, metavar="OUT_FOLDER")
    parser.add_argument("--size", default="1360x900", help="window size WxH")
    parser.add_argument("--gray", action="store_true", help="also write grayscale copies")
    parser.add_argument("--only", action="append", default=[], help="case name (repeatable)")
    args = parser.parse_args(argv)
    width, height = (int(v) for v in args.size.lower().split("x"))
    args.out.mkdir(parents=True, exist_ok=True)
    make_app()
    with tempfile.TemporaryDirectory() as folder:
        shots = Shots(args.out, Path(folder), (width, height), args.gray)
        for name, take in cases(shots).items():
            if not args.only or name in args.only:
                take()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
