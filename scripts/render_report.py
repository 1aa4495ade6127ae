"""Render sample evidence reports to PDF and PNG pages for review (synthetic calculators only).

Usage::

    .venv/bin/python scripts/render_report.py OUT_FOLDER [--dpi 60] [--only CASE ...]

For each case writes ``<case>.calc.json``, ``<case>.pdf`` and, when ``pdftoppm``
is installed, one ``<case>-<page>.png`` per page. Cases: a logistic model with
every transform and every kind of evidence; the same recalibrated and signed;
a survival-at-horizon model, recalibrated, on Letter paper; a non-synthetic
calculator without any evidence (from ``tests/fixtures_calc.py``); a 25-input
calculator. The calculators come from ``tests/reports/report_fixtures.py`` and
``tests/fixtures_calc.py``.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import shutil
import subprocess
import sys
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from calcbuilder.calc.document import load_calculator  # noqa: E402
from calcbuilder.reports.evidence_report import make_report  # noqa: E402
from tests.fixtures_calc import make_calculator  # noqa: E402
from tests.reports.report_fixtures import rich_document  # noqa: E402

WHEN = dt.datetime(2026, 12, 2, 14, 5)
CASES: dict[str, dict[str, Any]] = {
    "logistic-full": {"rich": {}},
    "logistic-recalibrated-signed": {"rich": {"recalibrated": True, "signed": True}},
    "survival-recalibrated-letter": {"rich": {"family": "survival_at_horizon",
                                              "recalibrated": True}, "page": "Letter"},
    "real-no-evidence": {"simple": {"n_inputs": 4, "with_evidence": False,
                                    "synthetic": False}},
    "simple-25-inputs": {"simple": {"n_inputs": 25}},
}


def _document(case: dict[str, Any]) -> dict[str, Any]:
    if "rich" in case:
        return rich_document(**case["rich"])
    return make_calculator(**case["simple"])


def render(folder: Path, name: str, case: dict[str, Any], dpi: int) -> Path:
    """Write one case's calculator, PDF and PNG pages; return the PDF path."""
    calc_path = folder / f"{name}.calc.json"
    calc_path.write_text(json.dumps(_document(case), ensure_ascii=False), "utf-8")
    pdf = folder / f"{name}.pdf"
    info = make_report(load_calculator(calc_path), pdf, page=case.get("page", "A4"),
                       generated_at=WHEN)
    print(f"{pdf} ({info.pages} pages)")
    if shutil.which("pdftoppm"):
        for old in folder.glob(f"{name}-*.png"):
            old.unlink()
        subprocess.run(["pdftoppm", "-r", str(dpi), "-png", str(pdf), str(folder / name)],
                       check=True)
    else:
        print("pdftoppm not found: no PNG pages (apt-get install poppler-utils)")
    return pdf


def main(argv: list[str] | None = None) -> int:
    """Render the chosen cases (all by default)."""
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("folder", type=Path)
    parser.add_argument("--dpi", type=int, default=60)
    parser.add_argument("--only", nargs="*", choices=sorted(CASES), default=None)
    args = parser.parse_args(argv)
    args.folder.mkdir(parents=True, exist_ok=True)
    for name in args.only or CASES:
        render(args.folder, name, CASES[name], args.dpi)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
