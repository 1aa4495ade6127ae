"""``calcbuilder form``: open the clinic form, optionally filled in, or save a screenshot of it.

``calcbuilder form FILE [--value ID=VALUE ...] [--unit ID=UNIT ...] [--threshold PCT]
[--trust PUBKEY ...] [--screenshot OUT.png]``

Values are typed into the form exactly as a user would type them (the form
checks them); ``--screenshot`` renders the filled form offscreen, saves a PNG
and exits 0 without keeping a window. Qt is imported only by this command.
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path
from typing import TYPE_CHECKING

from ..calc.keys import TrustedKeys
from ..errors import CalcbuilderError

if TYPE_CHECKING:
    from ..gui.app import ClinicWindow

__all__ = ["register"]

EXIT_USAGE = 2


def _pair(text: str) -> tuple[str, str]:
    name, sep, value = text.partition("=")
    if not sep or not name.strip():
        raise argparse.ArgumentTypeError(f"expected ID=VALUE, got {text!r}")
    return name.strip(), value


def register(sub: argparse._SubParsersAction) -> None:
    """Register ``form``."""
    form = sub.add_parser(
        "form", help="open the clinic form for a calculator file",
        description="Open the clinic form. Values given here are typed into the form as a "
                    "user would; nothing is stored. With --screenshot the filled form is "
                    "rendered offscreen to a PNG and the command exits.")
    form.add_argument("file", type=Path, nargs="?", metavar="FILE",
                      help="calculator file (*.calc.json); without it the form opens empty")
    form.add_argument("--value", type=_pair, action="append", default=[], metavar="ID=VALUE",
                      help="a patient value, e.g. age=72 or falls=yes (repeatable)")
    form.add_argument("--unit", type=_pair, action="append", default=[], metavar="ID=UNIT",
                      help="the unit a value is entered in, e.g. creatinine=mg/dL (repeatable)")
    form.add_argument("--threshold", type=float, metavar="PCT",
                      help="decision threshold in percent, e.g. 15")
    form.add_argument("--trust", type=Path, action="append", default=[], metavar="PUBKEY",
                      help="also trust this public key file for this session (repeatable)")
    form.add_argument("--screenshot", type=Path, metavar="OUT.png",
                      help="save a PNG of the form and exit (rendered offscreen)")
    form.add_argument("--size", default="1360x900", metavar="WxH",
                      help="window size for --screenshot (default 1360x900)")
    form.set_defaults(func=_cmd_form)


def _size(text: str) -> tuple[int, int]:
    width, sep, height = text.lower().partition("x")
    if not sep or not width.isdigit() or not height.isdigit():
        raise CalcbuilderError(f"--size: expected WIDTHxHEIGHT such as 1360x900; got {text!r}")
    return int(width), int(height)


def _cmd_form(args: argparse.Namespace) -> int:
    if args.screenshot is not None:
        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    if (args.value or args.unit or args.threshold is not None) and args.file is None:
        print("calcbuilder form: error: --value, --unit and --threshold need a FILE",
              file=sys.stderr)
        return EXIT_USAGE
    size = _size(args.size)
    from ..clinic.threshold import Threshold
    from ..gui.app import ClinicWindow, make_app

    app = make_app()
    window = ClinicWindow(trusted=TrustedKeys(extra_files=tuple(args.trust)))
    window.resize(*size)
    opened = args.file is not None and window.open_path(args.file)
    if opened:
        try:
            for input_id, unit in args.unit:
                window.set_unit(input_id, unit)
            for input_id, value in args.value:
                window.set_value(input_id, value)
        except (KeyError, ValueError) as exc:
            message = f"unknown input {exc}" if isinstance(exc, KeyError) else str(exc)
            print(f"calcbuilder form: error: {message}", file=sys.stderr)
            return EXIT_USAGE
        if args.threshold is not None:
            window.set_threshold(Threshold.from_percent(args.threshold))
    if args.screenshot is None:
        window.show()
        return int(app.exec())
    return _screenshot(window, args.screenshot)


def _screenshot(window: ClinicWindow, path: Path) -> int:
    window.show()
    window.settle()
    if not window.grab().save(str(path)):
        raise CalcbuilderError(f"could not write the screenshot {path}")
    window.close()
    print(f"Saved a screenshot of the form to {path}")
    return 0
