"""``calcbuilder demo``: the whole job on the synthetic demo scenario, in one command.

``calcbuilder demo [--out DIR] [--no-window] [--seed S] [--bootstrap B] [--json]``
    Generate the synthetic cohorts, fit the model (spline for age), validate it
    (bootstrap, Demo Hospital B), recalibrate it for Hospital B, compare it with
    the reference model, sign it with a fresh demo key, write the evidence report
    and a sample risk sheet, print what was made and where, and open the clinic
    form on the result when a display is available (``--no-window`` skips it).
    Everything is synthetic and not for clinical use
    (:func:`calcbuilder.demo.pipeline.run_demo`).
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

__all__ = ["display_available", "register"]

EXIT_USAGE = 2
SYNTHETIC = "SYNTHETIC DEMONSTRATION MATERIAL - NOT FOR CLINICAL USE"
CAUTION = ("Every number here describes made-up patients. calcbuilder supports, and never "
           "replaces, clinical judgement; local protocols and regulations decide whether and "
           "how a calculator may be used.")
NO_DISPLAY_PLATFORMS = ("offscreen", "minimal")


def register(sub: argparse._SubParsersAction) -> None:
    """Register ``demo``."""
    from ..demo.scenario import DEMO_SEED

    p = sub.add_parser(
        "demo", help="run the whole job on synthetic demo data (not for clinical use)",
        description="Make synthetic cohorts, fit, validate, recalibrate, compare, sign, write "
                    "the evidence report and a sample risk sheet, then open the clinic form "
                    "on the result. Everything is synthetic and not for clinical use.",
        epilog="The files get fixed names in DIR: demo.calc.json (signed), demo-key.pub, "
               "demo-key.key (unencrypted DEMO key), demo-evidence.pdf, demo-sheet.pdf, "
               "cohort-development.csv, cohort-development-cleaned.csv, cohort-external.csv, "
               "reference.calc.json, demo-recipe.toml. Existing files are replaced.")
    p.add_argument("--out", type=Path, default=Path("demo-output"), metavar="DIR",
                   help="folder for the files (default: demo-output)")
    p.add_argument("--no-window", action="store_true",
                   help="do not open the clinic form at the end")
    p.add_argument("--seed", type=int, default=DEMO_SEED, metavar="S",
                   help=f"seed of the cohorts and resamples (default {DEMO_SEED})")
    p.add_argument("--bootstrap", type=int, default=200, metavar="B",
                   help="bootstrap resamples of the optimism correction (default 200)")
    p.add_argument("--json", action="store_true", help="print the summary as one JSON object")
    p.set_defaults(func=_cmd_demo)


def display_available(env: dict[str, str] | None = None) -> bool:
    """True when a window can be shown: a display, or a Qt platform that draws one.

    Without ``DISPLAY``, ``WAYLAND_DISPLAY`` and ``QT_QPA_PLATFORM`` no window is
    tried; an offscreen or minimal Qt platform draws nothing a person could see.
    """
    env = dict(os.environ) if env is None else env
    platform = env.get("QT_QPA_PLATFORM", "").strip().lower()
    if platform:
        return platform.split(":")[0] not in NO_DISPLAY_PLATFORMS
    return bool(env.get("DISPLAY") or env.get("WAYLAND_DISPLAY"))


def _usage(message: str) -> int:
    print(f"calcbuilder demo: error: {message}", file=sys.stderr)
    return EXIT_USAGE


def _cmd_demo(args: argparse.Namespace) -> int:
    from rich.console import Console

    from ..demo.pipeline import run_demo

    if args.bootstrap < 1:
        return _usage(f"--bootstrap must be at least 1; got {args.bootstrap}")
    if args.seed < 0:
        return _usage(f"--seed must be 0 or more; got {args.seed}")
    err = Console(stderr=True, highlight=False)
    try:
        with _live(err, enabled=not args.json and sys.stderr.isatty()) as (step, progress):
            result = run_demo(args.out, seed=args.seed, n_boot=args.bootstrap,
                              progress=progress, step=step)
    except KeyboardInterrupt:
        print(f"calcbuilder demo: interrupted; the files already in {args.out} are an "
              "incomplete demo: run it again to replace them", file=sys.stderr)
        return 1
    if args.json:
        print(json.dumps(result.to_dict(), ensure_ascii=False, indent=2, allow_nan=False))
    else:
        _print_summary(result)
    if not args.no_window and display_available():
        return _open_form(result)
    return 0


@contextmanager
def _live(console: Any, *, enabled: bool
          ) -> Iterator[tuple[Callable[[str], None], Callable[[int, int], bool] | None]]:
    """Step lines and a bar (current step; resamples during the bootstrap) on a terminal."""
    if not enabled:
        yield (lambda _text: None), None
        return
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    columns = (TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
               TimeElapsedColumn())
    with Progress(*columns, console=console, transient=True) as bar:
        tasks = [bar.add_task("calcbuilder demo", total=None)]

        def step(text: str) -> None:  # a fresh task per step: no count until one is known
            bar.console.print(f"[dim]- {text}[/dim]")
            bar.remove_task(tasks.pop())
            tasks.append(bar.add_task(text[:48], total=None))

        def progress(done: int, total: int) -> bool:
            bar.update(tasks[-1], completed=done, total=total)
            return True

        yield step, progress


def _short(fp: str | None) -> str:
    return f"{fp[:12]}..." if fp else "-"


def _files_table(result: Any) -> Any:
    from rich.table import Table

    table = Table(title=f"calcbuilder demo: files in {result.out}", title_justify="left",
                  caption=SYNTHETIC, caption_justify="left")
    table.add_column("file", style="bold", no_wrap=True)
    table.add_column("what it is", min_width=24, ratio=1)
    table.add_column("fingerprint or SHA-256", no_wrap=True)
    for f in result.files:
        if not f.made:
            table.add_row(f.name, f"[red]NOT MADE[/red] - {f.what}", "-")
        elif f.fingerprint:
            table.add_row(f.name, f.what, f"fp {_short(f.fingerprint)}")
        else:
            table.add_row(f.name, f.what, f"sha256 {_short(f.sha256)}")
    return table


def _est(e: dict[str, Any]) -> str:
    return f"{e['value']:+.2f} (95% CI {e['low']:+.2f} to {e['high']:+.2f})"


def _lines(result: Any) -> list[str]:
    n = result.numbers
    before, after = n["external_before"], n["external_after"]
    c = n["comparison"]
    return [f"Raw Demo Hospital A file refused by the fit (as intended, {len(result.refusals)} "
           "problems):", *(f"  - {r}" for r in result.refusals),
           "Cleaned copy (values outside the hard limits converted when plausible in an "
           "alternative unit, else emptied):", *(f"  - {r}" for r in result.cleaning),
           f"Fit on the cleaned copy, complete case: {n['development_rows_used']:,} of "
           f"{n['development_rows_read']:,} rows used ({n['development_rows_left_out']} left "
           f"out), {n['development_events']} events; age as a restricted cubic spline.",
           f"AUC: apparent {n['auc_apparent']:.3f}, optimism-corrected "
           f"{n['auc_optimism_corrected']:.3f} ({result.n_boot} bootstrap resamples), "
           f"Demo Hospital B {n['auc_external']:.3f} ({n['external_rows_used']} of "
           f"{n['external_rows_read']} rows; {n['external_rows_left_out']} refused or "
           "incomplete rows left out).",
           f"Hospital B calibration-in-the-large: before {_est(before['intercept'])}, after "
           f"the intercept update {_est(after['intercept'])} (fitted on the same rows).",
           f"Against the reference model on Hospital B: AUC {c['auc_new']:.3f} vs "
           f"{c['auc_reference']:.3f}; net benefit at {c['threshold']:.0%}: "
           f"{c['net_benefit_new']:.4f} vs {c['net_benefit_reference']:.4f} (treat all "
           f"{c['net_benefit_treat_all']:.4f}).",
           f"Signature: {result.signature_state} with the demo key (trusted for this run only).",
           f"Sample risk sheet: a made-up patient, estimated risk "
           f"{n['sample_patient_risk']:.1%}, {n.get('sheet_pages', '?')} page."]


def _print_summary(result: Any) -> None:
    from rich.console import Console

    out = Console(highlight=False, soft_wrap=True)
    out.print(_files_table(result))
    for line in _lines(result):
        out.print(line, markup=False)
    for piece in result.missing:
        out.print(f"[bold red]MISSING:[/bold red] {piece}")
    calc = result.out / "demo.calc.json"
    pub = result.out / "demo-key.pub"
    out.print(f"Open it yourself: calcbuilder form {calc} --trust {pub}", markup=False)
    out.print(f"Check it: calcbuilder check {calc} --trust {pub}", markup=False)
    out.print("The demo key is unencrypted and made for this demo only: never trust it, or "
              "sign with it, for anything else.", markup=False)
    out.print(f"Done in {result.seconds:.1f} s. [bold]{SYNTHETIC}[/bold]")
    out.print(CAUTION, markup=False)


def _open_form(result: Any) -> int:
    """Open the clinic form on the signed demo calculator, filled with the made-up patient."""
    from ..calc.keys import TrustedKeys
    from ..demo.pipeline import DEMO_PATIENT, FILE_NAMES
    from ..gui.app import ClinicWindow, make_app

    app = make_app()
    trusted = TrustedKeys(extra_files=(result.out / FILE_NAMES["public_key"],))
    window = ClinicWindow(trusted=trusted)
    window.resize(1360, 900)
    if window.open_path(result.out / FILE_NAMES["calculator"]):
        for input_id, value in DEMO_PATIENT.items():
            typed, unit = value if isinstance(value, tuple) else (value, None)
            if unit:
                window.set_unit(input_id, unit)
            window.set_value(input_id, ("yes" if typed else "no") if isinstance(typed, bool)
                             else typed)
    window.show()
    return int(app.exec())
