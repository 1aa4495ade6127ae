"""Entry point of the standalone clinic form, ``calcbuilder-clinic`` (PyInstaller one-folder).

Usage::

    calcbuilder-clinic [FILE.calc.json ...]      open the form (one window per file)
    calcbuilder-clinic --check [FILE ...]        list each calculator's trust state; no window
    calcbuilder-clinic --selftest [--screenshot OUT.png]

Without FILE arguments the ``*.calc.json`` files beside the program are opened;
with none there either, an empty form opens (File > Open, or drag a file in).

Trusted keys: the user's own list (``calcbuilder keys``; ``<config>/trusted-keys``,
see :mod:`calcbuilder.calc.keys`) plus every ``*.pub`` file in the
``trusted-keys/`` folder beside the program, which clinic IT fills when it
installs the program. Keys beside the program are read, never copied anywhere.

The program holds patient values in memory only; they reach the disk only when
the user saves or prints a risk sheet. It opens no network connection: an audit
hook refuses every Python-level socket connection and name lookup
(:func:`install_network_guard`), and the build leaves out Qt's network module.

``--selftest`` checks the build itself with the bundled synthetic calculator and
prints ``selftest ok`` (exit 0), or the first failure (exit 1); see
:func:`run_selftest`. It reads no user settings and writes nothing unless
``--screenshot`` is given.
"""

from __future__ import annotations

import argparse
import importlib.util
import os
import sys
import time
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from calcbuilder import __version__
from calcbuilder.calc.document import LoadedCalculator, load_calculator
from calcbuilder.calc.keys import TrustedKeys, load_public_key
from calcbuilder.calc.signing import TrustState
from calcbuilder.errors import CalcbuilderError

PROGRAM = "calcbuilder-clinic"
KEYS_FOLDER = "trusted-keys"
CALC_PATTERN = "*.calc.json"
# Inside the build (sys._MEIPASS) and, when run from source, in the test fixtures.
SELFTEST_FOLDER = "selftest"
SELFTEST_CALC = "selftest.calc.json"
SELFTEST_KEY = "selftest-signer.pub"
# Never part of the standalone build: authoring side and heavy statistics.
FORBIDDEN_MODULES = ("pandas", "scipy", "statsmodels", "sklearn", "pytest",
                     "calcbuilder.evidence", "calcbuilder.demo", "calcbuilder.cli",
                     "calcbuilder.gui.authoring")
NETWORK_EVENTS = frozenset({
    "socket.connect", "socket.getaddrinfo", "socket.gethostbyname", "socket.gethostbyaddr",
    "socket.sendto", "socket.sendmsg", "urllib.Request", "http.client.connect",
})
TOLERANCE = 1e-9  # the same tolerance as the loader's test-vector check
EXIT_OK, EXIT_FAILED, EXIT_USAGE = 0, 1, 2


class NetworkRefusedError(RuntimeError):
    """Raised by the audit hook when anything tries to reach the network."""


class SelftestError(Exception):
    """A self-test step failed; the message says which and why."""


def is_frozen() -> bool:
    """True inside the PyInstaller build."""
    return bool(getattr(sys, "frozen", False))


def program_dir() -> Path:
    """The folder of the program (where clinic IT puts calculators and ``trusted-keys/``)."""
    if is_frozen():
        return Path(sys.executable).resolve().parent
    return Path(__file__).resolve().parent


def selftest_files() -> tuple[Path, Path]:
    """The bundled self-test calculator and the public key that signed it."""
    bundle = getattr(sys, "_MEIPASS", None)
    folder = (Path(bundle) / SELFTEST_FOLDER if bundle
              else Path(__file__).resolve().parents[1] / "tests" / "packaging" / "fixtures")
    return folder / SELFTEST_CALC, folder / SELFTEST_KEY


# --- no network ---------------------------------------------------------------------------

def _refuse_network(event: str, _args: tuple[Any, ...]) -> None:
    if event in NETWORK_EVENTS:
        raise NetworkRefusedError(f"{PROGRAM} makes no network connections ({event} refused)")


def install_network_guard() -> None:
    """Refuse every Python-level network access for the rest of the process (cannot be undone)."""
    sys.addaudithook(_refuse_network)


# --- trusted keys and calculator files ----------------------------------------------------

def clinic_trusted_keys(keys_dir: Path) -> tuple[TrustedKeys, list[str]]:
    """The user's trusted list plus the readable ``*.pub`` files in ``keys_dir``.

    Returns the keys and one message per key file beside the program that could
    not be read (such files are left out, never half-trusted).
    """
    files: list[Path] = []
    problems: list[str] = []
    if keys_dir.is_dir():
        for path in sorted(keys_dir.glob("*.pub")):
            try:
                load_public_key(path)
            except CalcbuilderError as exc:
                problems.append(f"{exc} (this key is not trusted)")
                continue
            files.append(path)
    return TrustedKeys(extra_files=tuple(files)), problems


def calculators_beside(folder: Path) -> list[Path]:
    """The calculator files installed beside the program, by name."""
    return sorted(folder.glob(CALC_PATTERN))


def describe(loaded: LoadedCalculator) -> list[str]:
    """What clinic IT needs to know about one calculator file (``--check``)."""
    about = loaded.calculator.about
    review = about.review_by.isoformat() + (" (PAST: ask the authors for a current version)"
                                            if loaded.expired else "")
    return [f"  title:       {about.title}", f"  version:     {about.version}",
            f"  signature:   {loaded.state.value}: {loaded.verification.message}",
            f"  fingerprint: {loaded.fingerprint}", f"  review by:   {review}"]


def check_files(paths: Sequence[Path], trusted: TrustedKeys, out: Callable[[str], None]) -> int:
    """Load each calculator as the form would and report it; 1 if any is refused."""
    status = EXIT_OK
    out(f"user's trusted-key folder: {trusted.directory}")
    for entry in trusted.entries():
        out(f"trusted key: {entry.name}  {entry.key_fingerprint}  ({entry.path})")
    if not paths:
        out("no calculator files given and none beside the program")
    for path in paths:
        out(str(path))
        try:
            loaded = load_calculator(path, trusted=trusted)
        except (CalcbuilderError, OSError) as exc:
            out(f"  REFUSED: {exc}")
            status = EXIT_FAILED
            continue
        out("\n".join(describe(loaded)))
        if loaded.state is TrustState.TAMPERED:
            out("  REFUSED: the form will not compute with this file")
            status = EXIT_FAILED
    return status


# --- the self-test ------------------------------------------------------------------------

def _vector_risks(loaded: LoadedCalculator) -> list[str]:
    """Every stored test vector re-typed into a ClinicSession must give its stated risk."""
    from calcbuilder.clinic.session import ClinicSession

    vectors = loaded.calculator.test_vectors
    if not vectors:
        raise SelftestError("the self-test calculator has no test vectors")
    for vector in vectors:
        session = ClinicSession(loaded)
        for input_id, value in vector.values.items():
            session.set_value(input_id, value)
        result = session.result()
        if result.risk is None or not abs(result.risk - vector.risk) <= TOLERANCE:
            raise SelftestError(f"test vector {vector.name!r}: expected risk {vector.risk!r}, "
                                f"the session computed {result.risk!r}")
        if result.low is None or result.high is None or not result.low < result.risk < result.high:
            raise SelftestError(f"test vector {vector.name!r}: no proper 95% interval "
                                f"({result.low!r}, {result.high!r})")
    return [f"{len(vectors)} test vectors recomputed through ClinicSession (within {TOLERANCE:g})"]


def _spline_basis() -> list[str]:
    """Spline terms score inside the build (their path once pulled in scipy, which is absent).

    Compared with Harrell's restricted cubic spline written out by hand.
    """
    import numpy as np

    from calcbuilder.calc.transforms import rcs_columns

    knots = (68.0, 74.0, 79.0, 88.0)
    x = np.array([60.0, 70.0, 77.0, 85.0, 95.0])

    def cube(v: float) -> float:
        return max(v, 0.0) ** 3

    t1, tk1, tk = knots[0], knots[-2], knots[-1]
    expected = [[xi] + [(cube(xi - tj) - cube(xi - tk1) * (tk - tj) / (tk - tk1)
                         + cube(xi - tk) * (tk1 - tj) / (tk - tk1)) / (tk - t1) ** 2
                        for tj in knots[:-2]] for xi in x]
    worst = float(np.max(np.abs(rcs_columns(x, knots) - np.array(expected))))
    if not worst <= 1e-12:
        raise SelftestError(f"spline basis differs from the hand-written one by {worst:.3g}")
    return ["restricted cubic spline basis matches the hand-written formula"]


def _sheet(loaded: LoadedCalculator) -> tuple[bytes, list[str]]:
    """Make the risk sheet for the first vector in memory (reportlab and fonts work)."""
    from calcbuilder.clinic.session import ClinicSession
    from calcbuilder.reports.sheet import sheet_bytes

    session = ClinicSession(loaded)
    for input_id, value in loaded.calculator.test_vectors[0].values.items():
        session.set_value(input_id, value)
    data, info = sheet_bytes(session, page="A4")
    if not data.startswith(b"%PDF") or info.pages != 1:
        raise SelftestError(f"the risk sheet is not a one-page PDF ({info.pages} pages)")
    return data, [f"risk sheet made in memory ({len(data):,} bytes, 1 page, layout {info.layout})"]


def _form(loaded: LoadedCalculator, trusted: TrustedKeys, pdf: bytes,
          screenshot: Path | None) -> list[str]:
    """Build the form window offscreen, type the first vector, draw it and grab it."""
    if sys.platform.startswith("linux") and not (os.environ.get("DISPLAY")
                                                 or os.environ.get("WAYLAND_DISPLAY")):
        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from calcbuilder.gui.app import ClinicWindow, make_app

    app = make_app()
    window = ClinicWindow(trusted=trusted)
    try:
        window.resize(1360, 900)
        if loaded.path is None or not window.open_path(loaded.path):
            raise SelftestError("the form refused the self-test calculator")
        vector = loaded.calculator.test_vectors[0]
        for input_id, value in vector.values.items():  # typed or chosen as a user would
            typed = ("yes" if value else "no") if isinstance(value, bool) else str(value)
            window.set_value(input_id, typed)
        window.show()
        window.settle()
        risk = window.session.result().risk if window.session else None
        if risk is None or not abs(risk - vector.risk) <= TOLERANCE:
            raise SelftestError(f"the form computed risk {risk!r}, expected {vector.risk!r}")
        image = window.grab().toImage()
        small = image.scaled(24, 24)
        colours = {small.pixel(x, y) for x in range(24) for y in range(24)}
        if image.isNull() or len(colours) < 3:
            raise SelftestError("the grabbed form window is empty")
        if screenshot is not None and not image.save(str(screenshot)):
            raise SelftestError(f"could not save the screenshot to {screenshot}")
        lines = [f"form built and grabbed ({image.width()}x{image.height()}, platform "
                 f"{app.platformName()}, figures drawn: {'matplotlib' in sys.modules})"]
    finally:
        window.close()
        window.deleteLater()
    return lines + _pdf_pages(pdf)


def _pdf_pages(pdf: bytes) -> list[str]:
    """Render the sheet with QtPdf, as printing to a printer does (required in the build)."""
    try:
        from PySide6.QtCore import QBuffer, QByteArray, QIODevice
        from PySide6.QtPdf import QPdfDocument
    except ImportError as exc:
        if is_frozen():
            raise SelftestError(f"QtPdf is missing from the build ({exc}); printing to a "
                                "printer would not work") from exc
        return ["QtPdf not installed here: printer path not checked"]
    buffer = QBuffer()
    buffer.setData(QByteArray(pdf))
    buffer.open(QIODevice.OpenModeFlag.ReadOnly)
    document = QPdfDocument()
    document.load(buffer)
    pages = document.pageCount()
    document.close()
    if pages != 1:
        raise SelftestError(f"QtPdf read {pages} pages from the one-page risk sheet")
    return ["risk sheet rendered by QtPdf (printer path)"]


def _build_contents(guarded: bool) -> list[str]:
    """Inside the build: no forbidden module can be imported, the network guard works."""
    present = [name for name in FORBIDDEN_MODULES if importlib.util.find_spec(name) is not None]
    if present:
        raise SelftestError(f"the build contains modules it must not: {', '.join(present)}")
    lines = [f"not in the build: {', '.join(FORBIDDEN_MODULES)}"]
    if guarded:
        import socket

        try:
            socket.create_connection(("127.0.0.1", 9), timeout=0.5).close()
        except NetworkRefusedError:
            lines.append("network access refused by the guard")
        except OSError as exc:
            raise SelftestError(f"the network guard let a connection through ({exc})") from exc
        else:
            raise SelftestError("the network guard let a connection through")
    return lines


def run_selftest(calculator: Path, key: Path, *, gui: bool = True,
                 screenshot: Path | None = None, guarded: bool = False,
                 out: Callable[[str], None] = print) -> None:
    """Check the program end to end; raise :class:`SelftestError` on the first failure.

    Only ``key`` is trusted (the user's own list is not read). The steps are the
    functions above, in order; the last runs inside the build only.
    """
    trusted = TrustedKeys(directory=key.parent / "no-user-keys-in-selftest",
                          extra_files=(key,))
    started = time.perf_counter()
    loaded = load_calculator(calculator, trusted=trusted)
    if loaded.state is not TrustState.VERIFIED:
        raise SelftestError(f"signature: expected verified, got {loaded.state.value}: "
                            f"{loaded.verification.message}")
    lines = ["calculator loaded, schema checked, signature verified"]
    lines += _vector_risks(loaded) + _spline_basis()
    pdf, sheet_lines = _sheet(loaded)
    lines += sheet_lines
    if gui:
        lines += _form(loaded, trusted, pdf, screenshot)
    if is_frozen():
        lines += _build_contents(guarded)
    for line in lines:
        out(f"selftest: {line}")
    out(f"selftest: {time.perf_counter() - started:.2f} s")


# --- command line -------------------------------------------------------------------------

def parse_args(argv: Sequence[str] | None) -> argparse.Namespace:
    parser = argparse.ArgumentParser(
        prog=PROGRAM, description="calcbuilder clinic form (standalone). Opens calculator "
        "files given here, else those beside the program. Patient values stay in memory.")
    parser.add_argument("files", nargs="*", type=Path, metavar="FILE",
                        help="calculator files (*.calc.json) to open")
    parser.add_argument("--check", action="store_true",
                        help="report each calculator's signature and review date; no window")
    parser.add_argument("--selftest", action="store_true",
                        help="check this program with its bundled test calculator and exit")
    parser.add_argument("--screenshot", type=Path, metavar="OUT.png",
                        help="with --selftest: save the grabbed form window as PNG")
    parser.add_argument("--version", action="version", version=f"{PROGRAM} {__version__}")
    return parser.parse_args(argv)


def open_forms(paths: Sequence[Path], trusted: TrustedKeys, problems: Sequence[str]) -> int:
    """One form window per calculator file (an empty form when there is none); run Qt."""
    from PySide6.QtWidgets import QMessageBox

    from calcbuilder.gui.app import ClinicWindow, make_app

    app = make_app()
    windows = []
    for index, path in enumerate(paths or [None]):
        window = ClinicWindow(trusted=trusted)
        if path is not None:
            window.open_path(path)
        window.move(window.x() + 40 * index, window.y() + 40 * index)
        window.show()
        windows.append(window)
    if problems:
        QMessageBox.warning(windows[0], "Some trusted keys could not be read",
                            "Tell your IT department:\n\n" + "\n\n".join(problems))
    return int(app.exec())


def main(argv: Sequence[str] | None = None) -> int:
    args = parse_args(argv)
    install_network_guard()
    if args.screenshot is not None and not args.selftest:
        print(f"{PROGRAM}: error: --screenshot needs --selftest", file=sys.stderr)
        return EXIT_USAGE
    if args.selftest:
        try:
            run_selftest(*selftest_files(), screenshot=args.screenshot, guarded=True)
        except Exception as exc:  # any failure is the answer: say which, exit 1
            print(f"selftest FAILED: {type(exc).__name__}: {exc}")
            return EXIT_FAILED
        print("selftest ok")
        return EXIT_OK
    trusted, problems = clinic_trusted_keys(program_dir() / KEYS_FOLDER)
    paths = list(args.files) or calculators_beside(program_dir())
    if args.check:
        for problem in problems:
            print(f"trusted key problem: {problem}")
        return check_files(paths, trusted, print) or (EXIT_FAILED if problems else EXIT_OK)
    for problem in problems:
        print(f"{PROGRAM}: warning: {problem}", file=sys.stderr)
    return open_forms(paths, trusted, problems)


if __name__ == "__main__":
    sys.exit(main())
