"""Write the SOUP list (software of unknown provenance) of the standalone clinic build.

Run by ``packaging/build_clinic.sh`` with the BUILD venv's Python, after
PyInstaller::

    build/clinic-venv/bin/python packaging/soup.py \\
        --collected build/clinic-work/clinic/collected.json --out dist/calcbuilder-clinic

Every file PyInstaller collected (``collected.json``, written by ``clinic.spec``)
is traced to its owner, so the list holds exactly what is inside the build:

* a Python distribution of the build venv (``importlib.metadata``: name,
  version, licence; purpose from :data:`PURPOSES` or "needed by ...");
* the Python runtime itself (standard library, ``libpython``);
* a system library copied from the build machine (Debian package via ``dpkg -S``).

Distributions installed in the venv but not collected (PyInstaller's own tools,
pip) are listed separately as not shipped. Writes ``SOUP.txt``, ``soup.json``
and ``licences/`` (the licence files of each component) into ``--out``.
Exit 1, after writing, when a forbidden library or authoring module was collected.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import platform
import re
import shutil
import subprocess
import sys
from dataclasses import asdict, dataclass, field
from importlib import metadata
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
OURS = "calcbuilder"
FORBIDDEN = ("pandas", "scipy", "statsmodels", "scikit-learn", "pytest", "patsy", "formulaic")
FORBIDDEN_MODULES = ("calcbuilder.evidence", "calcbuilder.demo", "calcbuilder.cli",
                     "calcbuilder.gui.authoring")
PURPOSES = {
    "numpy": "array arithmetic: scoring, intervals, input checks",
    "matplotlib": "figures on the form and the risk sheet (icon array, curves)",
    "pyside6-essentials": "Qt for Python: the form window, dialogs, printing (Qt 6, LGPL)",
    "pyside6-pdf": "QtPdf: draws the risk-sheet PDF on a printer",
    "shiboken6": "runtime of the Qt for Python bindings",
    "reportlab": "makes the risk-sheet PDF",
    "cryptography": "verifies Ed25519 signatures of calculator files (OpenSSL inside)",
    "platformdirs": "finds the user's settings folder (trusted keys)",
    "rfc8785": "canonical JSON (RFC 8785) for fingerprints and signatures",
    "jsonschema": "checks calculator files against the published schema",
    "threadpoolctl": "limits numerical library threads (statistics core)",
    "pillow": "images for matplotlib and reportlab",
    "pyinstaller": "bootloader and start-up code of the frozen program",
}
# SPDX id -> file in Debian's /usr/share/common-licenses (the LGPL builds on the GPL).
COMMON_LICENCES = {"LGPL-3.0": "LGPL-3", "GPL-2.0": "GPL-2", "GPL-3.0": "GPL-3"}
LICENCE_FILE = re.compile(r"^(licen[cs]e|copying|notice|authors)", re.IGNORECASE)


@dataclass
class Component:
    """One piece of third-party software inside the build."""

    name: str
    version: str
    licence: str
    purpose: str
    kind: str  # "python distribution", "python runtime" or "system library"
    files: int = 0
    required_by: list[str] = field(default_factory=list)
    licence_files: list[str] = field(default_factory=list)


def norm(name: str) -> str:
    """PEP 503 normalised distribution name."""
    return re.sub(r"[-_.]+", "-", name).lower()


def licence_of(dist: metadata.Distribution) -> str:
    """SPDX expression, else a one-line License field, else the licence classifiers."""
    meta = dist.metadata
    expression = _field(meta, "License-Expression")
    if expression:
        return expression
    text = _field(meta, "License")
    if text and "\n" not in text and len(text) <= 80:
        return text
    classifiers = [c.split("::")[-1].strip() for c in meta.get_all("Classifier") or []
                   if c.startswith("License ::")]
    if classifiers:
        return " / ".join(dict.fromkeys(classifiers))
    return "see the licence files" if text else "not stated (see the licence files)"


def _field(meta: metadata.PackageMetadata, key: str) -> str:
    """The first value of a metadata field, stripped ('' when absent)."""
    values = meta.get_all(key) or []
    return str(values[0]).strip() if values else ""


def requirements(dist: metadata.Distribution) -> set[str]:
    """Normalised names of what a distribution needs (extras left out)."""
    out = set()
    for line in dist.requires or []:
        if "extra ==" in line:
            continue
        match = re.match(r"[A-Za-z0-9][A-Za-z0-9._-]*", line)
        if match:
            out.add(norm(match.group(0)))
    return out


def owners(site_dirs: list[str]) -> dict[Path, metadata.Distribution]:
    """Every installed file of the build venv, resolved, mapped to its distribution."""
    found: dict[Path, metadata.Distribution] = {}
    for dist in metadata.distributions(path=site_dirs):
        for name in dist.files or []:
            found[Path(str(dist.locate_file(name))).resolve()] = dist
    return found


def collected_sources(manifest: dict[str, list[list[str]]]) -> list[tuple[str, Path]]:
    """(name inside the build, source path) of everything PyInstaller collected."""
    out = []
    for section in ("pure", "binaries", "datas", "scripts"):
        for name, src in manifest.get(section, []):
            if src:
                out.append((name, Path(src)))
    return out


def _spellings(path: Path) -> set[str]:
    """The names dpkg may know a library by (as found, resolved, with or without /usr)."""
    names = {str(path), str(path.resolve())}
    for text in list(names):
        names.add(text[4:] if text.startswith("/usr/lib/") else "/usr" + text)
    return names


def debian_packages(paths: list[Path]) -> dict[Path, tuple[str, str]]:
    """Debian package and version owning each system file (one ``dpkg -S`` call).

    Files dpkg does not know are left out; without dpkg the result is empty.
    """
    if not paths or shutil.which("dpkg") is None:
        return {}
    spellings = {path: _spellings(path) for path in paths}
    names = sorted(set().union(*spellings.values()))
    listed = subprocess.run(["dpkg", "-S", *names], capture_output=True, text=True,
                            check=False).stdout
    owner: dict[str, str] = {}
    for line in listed.splitlines():  # "pkg[:arch][, pkg2]: /path"
        packages, sep, where = line.partition(": ")
        if sep and not line.startswith("diversion"):
            owner[where.strip()] = packages.split(",")[0].split(":")[0].strip()
    found = {path: next((owner[n] for n in sorted(spellings[path]) if n in owner), "")
             for path in paths}
    wanted = sorted({package for package in found.values() if package})
    queried = subprocess.run(["dpkg-query", "-W", "-f=${Package} ${Version}\n", *wanted],
                             capture_output=True, text=True, check=False).stdout
    versions = dict(line.split(" ", 1) for line in queried.splitlines() if " " in line)
    return {path: (package, versions.get(package, "unknown"))
            for path, package in found.items() if package}


def _system_libraries(system: list[Path], components: dict[str, Component]) -> None:
    """Add the system libraries PyInstaller copied from the build machine."""
    packages = debian_packages(system)
    for package, version in packages.values():
        comp = components.setdefault(f"deb:{package}", Component(
            package, version, f"see /usr/share/doc/{package}/copyright",
            "shared library used by Qt or Python extension modules", "system library"))
        comp.files += 1
    for src in (s for s in system if s not in packages):
        components[f"file:{src}"] = Component(src.name, "unknown", "unknown (origin not found)",
                                              "shared library from the build machine",
                                              "system library", 1)


def trace(sources: list[tuple[str, Path]], site_dirs: list[str]) -> dict[str, Component]:
    """Group collected files by owner into components (our own package left out)."""
    owned = owners(site_dirs)
    base = Path(sys.base_prefix).resolve()
    components: dict[str, Component] = {}
    dists: dict[str, metadata.Distribution] = {}
    system: list[Path] = []
    for _name, src in sources:
        dist = owned.get(src.resolve())
        if dist is not None:
            key = norm(dist.metadata["Name"])
            dists[key] = dist
            if key not in components:
                components[key] = Component(
                    dist.metadata["Name"], dist.version, licence_of(dist),
                    PURPOSES.get(key, ""), "python distribution")
            components[key].files += 1
        elif src.resolve().is_relative_to(base):
            runtime = components.setdefault("python", Component(
                "Python", platform.python_version(), "PSF-2.0",
                "the Python interpreter and standard library", "python runtime"))
            runtime.files += 1
        elif src.resolve().is_relative_to(ROOT):
            continue  # our own entry script and the self-test fixtures
        else:
            system.append(src)
    _system_libraries(system, components)
    for key, dist in dists.items():
        for needed in requirements(dist):
            if needed in components and needed != key:
                components[needed].required_by.append(dist.metadata["Name"])
    components.pop(OURS, None)
    for comp in components.values():
        comp.required_by.sort(key=str.lower)
        if not comp.purpose:
            comp.purpose = ("needed by " + ", ".join(comp.required_by)) if comp.required_by \
                else "collected by PyInstaller"
    return components


def copy_licences(components: dict[str, Component], site_dirs: list[str], out: Path) -> None:
    """Copy each component's licence files into ``out/licences/<name>/``."""
    target = out / "licences"
    shutil.rmtree(target, ignore_errors=True)
    wanted = {norm(c.name): c for c in components.values() if c.kind == "python distribution"}
    for dist in metadata.distributions(path=site_dirs):
        comp = wanted.get(norm(dist.metadata["Name"]))
        if comp is None:
            continue
        for name in dist.files or []:
            path = Path(str(dist.locate_file(name)))
            in_info = any(part.endswith(".dist-info") for part in Path(name).parts)
            if in_info and LICENCE_FILE.match(path.name) and path.is_file():
                dest = target / f"{comp.name}-{comp.version}" / path.name
                _copy(path, dest, comp, out)
    for comp in components.values():
        if comp.kind == "python distribution" and not comp.licence_files:
            _common_licences(comp, target, out)
        elif comp.kind == "python runtime":
            source = Path(sys.base_prefix) / "lib" / f"python{sys.version_info[0]}." \
                f"{sys.version_info[1]}" / "LICENSE.txt"
            _copy(source, target / f"Python-{comp.version}" / "LICENSE.txt", comp, out)
        elif comp.kind == "system library" and comp.licence.startswith("see /"):
            source = Path(comp.licence.removeprefix("see "))
            _copy(source, target / f"debian-{comp.name}" / "copyright", comp, out)


def _common_licences(comp: Component, target: Path, out: Path) -> None:
    """For wheels that ship no licence text (PySide6, shiboken6): the texts their
    licence expression names, from the build machine's common-licenses folder."""
    for spdx, text in COMMON_LICENCES.items():
        if spdx in comp.licence:
            source = Path("/usr/share/common-licenses") / text
            _copy(source, target / f"{comp.name}-{comp.version}" / text, comp, out)


def _copy(source: Path, dest: Path, comp: Component, out: Path) -> None:
    if source.is_file():
        dest.parent.mkdir(parents=True, exist_ok=True)
        shutil.copyfile(source, dest)
        comp.licence_files.append(dest.relative_to(out).as_posix())


def build_info() -> dict[str, object]:
    """What was built, from which sources, with which tools."""
    def git(*args: str) -> str:
        done = subprocess.run(["git", *args], cwd=ROOT, capture_output=True, text=True,
                              check=False)
        return done.stdout.strip() if done.returncode == 0 else "unknown"

    return {"program": "calcbuilder-clinic", "calcbuilder": metadata.version(OURS),
            "source_commit": git("rev-parse", "HEAD"),
            "source_changed_since_commit": bool(git("status", "--porcelain", "--",
                                                    "calcbuilder", "packaging")),
            "built_at": dt.datetime.now(dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
            "python": platform.python_version(), "platform": platform.platform(),
            "pyinstaller": metadata.version("pyinstaller")}


def write(out: Path, info: dict[str, object], components: list[Component],
          not_shipped: list[str], problems: list[str]) -> None:
    """``soup.json`` and ``SOUP.txt`` in ``out``."""
    (out / "soup.json").write_text(json.dumps(
        {"build": info, "components": [asdict(c) for c in components],
         "installed_in_build_venv_but_not_shipped": not_shipped, "problems": problems},
        indent=1, ensure_ascii=False) + "\n", "utf-8")
    lines = ["SOUP list: third-party software inside this build of calcbuilder-clinic",
             "(every file PyInstaller collected, traced to its owner; soup.json has the same)",
             ""]
    lines += [f"{key:28} {value}" for key, value in info.items()]
    sections = (("python distribution", "Python distributions (from the build venv)"),
                ("python runtime", "Python runtime"),
                ("system library", "System libraries copied from the build machine "
                 "(Debian packages)"))
    for kind, title in sections:
        rows = [c for c in components if c.kind == kind]
        if not rows:
            continue
        lines += ["", f"{title}: {len(rows)}", ""]
        for c in rows:
            lines += [f"{c.name} {c.version}", f"    licence: {c.licence}",
                      f"    purpose: {c.purpose}"]
    missing = [c.name for c in components if not c.licence_files]
    lines += ["", "Licence texts: licences/ beside this file.",
              "No licence text found for (add before distributing): "
              + (", ".join(missing) or "none"),
              "Installed in the build venv but not shipped: " + ", ".join(not_shipped)]
    lines += [f"PROBLEM: {p}" for p in problems]
    (out / "SOUP.txt").write_text("\n".join(lines) + "\n", "utf-8")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Write SOUP.txt and soup.json for the build.")
    parser.add_argument("--collected", type=Path, required=True,
                        help="collected.json written by packaging/clinic.spec")
    parser.add_argument("--out", type=Path, required=True, help="the build folder")
    args = parser.parse_args(argv)
    manifest = json.loads(args.collected.read_text("utf-8"))
    site_dirs = [p for p in sys.path if p.endswith("site-packages")]
    components = trace(collected_sources(manifest), site_dirs)
    copy_licences(components, site_dirs, args.out)
    ordered = sorted(components.values(), key=lambda c: (c.kind != "python distribution",
                                                         c.name.lower()))
    shipped = {norm(c.name) for c in ordered} | {OURS}
    not_shipped = sorted(d.metadata["Name"] for d in metadata.distributions(path=site_dirs)
                         if norm(d.metadata["Name"]) not in shipped)
    problems = [f"forbidden library collected: {c.name}" for c in ordered
                if norm(c.name) in FORBIDDEN]
    problems += [f"authoring module collected: {name}" for name, _src in manifest["pure"]
                 if any(name == m or name.startswith(m + ".") for m in FORBIDDEN_MODULES)]
    write(args.out, build_info(), ordered, not_shipped, problems)
    print(f"[soup] {len(ordered)} components written to {args.out / 'SOUP.txt'}")
    for problem in problems:
        print(f"[soup] ERROR: {problem}", file=sys.stderr)
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
