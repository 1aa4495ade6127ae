"""Render sample risk sheets to PDF and PNG for review (synthetic test calculators only).

Usage::

    .venv/bin/python scripts/render_sheet.py OUT_FOLDER [--dpi 80]

Writes, for a few cases (1, 4 and 25 inputs; A4 and Letter; a risk under 1%
with 1,000 icons; an extrapolated value; a threshold outside the authors'
range; long caution texts), ``<case>.pdf`` and ``<case>.png`` (first page, via ``pdftoppm`` when it
is installed). The calculators come from ``tests/fixtures_calc.py``.
"""

from __future__ import annotations

import argparse
import datetime as dt
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from calcbuilder.calc.document import load_calculator  # noqa: E402
from calcbuilder.clinic import ClinicSession, Threshold  # noqa: E402
from calcbuilder.reports.sheet import make_sheet  # noqa: E402
from tests.fixtures_calc import patient_values, write_calculator  # noqa: E402

WHEN = dt.datetime(2026, 12, 2, 14, 5)
LONG_CAUTIONS = [
    "This calculator gives an estimate for people like the patient described, based on the data "
    "it was developed and validated on. It cannot know everything about this patient. Use it "
    "alongside clinical judgement, the patient's own values and preferences, and your local "
    "protocols; it does not tell anyone what to do.",
    "Check that the patient belongs to the population the calculator was built for; outside it, "
    "the estimate may be wrong.",
    "The interval shows the statistical uncertainty of the model's estimate; it does not cover "
    "every source of error.",
]
CASES: dict[str, dict[str, Any]] = {
    "a4-4-inputs": {"n": 4, "patient": 3, "ref": "Bed 12 / Zoë Łukasiewicz"},
    "letter-4-inputs": {"n": 4, "patient": 1, "page": "Letter"},
    "a4-1-input-low-risk": {"n": 1, "patient": 0},
    "a4-25-inputs": {"n": 25, "patient": 2, "ref": "MRN 000-123",
                     "set": {"age": "93", "creatinine": ("1.47", "mg/dL")}},
    "letter-25-inputs-threshold-60": {"n": 25, "patient": 4, "page": "Letter", "threshold": 60},
    "letter-25-inputs-long-cautions": {"n": 25, "patient": 3, "page": "Letter", "threshold": 60,
                                       "cautions": LONG_CAUTIONS, "ref": "Ward 7, bed 3"},
    "a4-4-inputs-real-no-evidence": {"n": 4, "patient": 2, "synthetic": False,
                                     "evidence": False, "threshold": 35},
}


def _session(folder: Path, name: str, case: dict[str, Any]) -> ClinicSession:
    n = case["n"]
    path = write_calculator(folder, f"{name}.calc.json", n_inputs=n,
                            synthetic=case.get("synthetic", True),
                            with_evidence=case.get("evidence", True),
                            cautions=case.get("cautions"))
    session = ClinicSession(load_calculator(path))
    for key, value in patient_values(n, case["patient"]).items():
        session.set_value(key, value if isinstance(value, bool) else str(value))
    for key, value in case.get("set", {}).items():
        typed, unit = value if isinstance(value, tuple) else (value, None)
        session.set_unit(key, unit)
        session.set_value(key, typed)
    session.set_patient_ref(case.get("ref", ""))
    if "threshold" in case:
        session.set_threshold(Threshold.from_percent(case["threshold"]))
    return session


def render(out: Path, dpi: int) -> list[Path]:
    """Write every case into ``out``; return the PDFs written."""
    out.mkdir(parents=True, exist_ok=True)
    written = []
    with tempfile.TemporaryDirectory() as tmp:
        for name, case in CASES.items():
            session = _session(Path(tmp), name, case)
            pdf = out / f"{name}.pdf"
            info = make_sheet(session, pdf, page=case.get("page", "A4"), printed_at=WHEN)
            print(f"{pdf.name}: {info.pages} page(s), layout {info.layout}")
            written.append(pdf)
            if shutil.which("pdftoppm"):
                subprocess.run(["pdftoppm", "-r", str(dpi), "-png", "-singlefile", str(pdf),
                                str(out / name)], check=True)
    return written


def main() -> None:
    """Command line entry point."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out", type=Path)
    parser.add_argument("--dpi", type=int, default=80)
    args = parser.parse_args()
    render(args.out, args.dpi)


if __name__ == "__main__":
    main()
