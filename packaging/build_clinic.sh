#!/usr/bin/env bash
# Build the standalone clinic form, dist/calcbuilder-clinic/ (PyInstaller one-folder).
#
# Usage: packaging/build_clinic.sh [options] [FILE.calc.json ...] [KEY.pub ...]
#
#   FILE.calc.json  calculator files to put beside the program (it opens them at start)
#   KEY.pub         public keys to put in trusted-keys/ beside the program
#   --fresh         delete the build venv and PyInstaller's cache first
#   --no-selftest   do not run the finished program's --selftest at the end
#   --prepare       only make the build venv (step 1), then stop
#   --distpath DIR  put the program in DIR/calcbuilder-clinic (default: dist)
#
# Steps: (1) a lean venv, build/clinic-venv, holding only what the clinic form
# needs plus PyInstaller; (2) PyInstaller with packaging/clinic.spec; (3) the
# SOUP list (SOUP.txt, soup.json, licences/) written into the build folder by
# packaging/soup.py, which fails the build if pandas/scipy/statsmodels/
# scikit-learn were collected; (4) calculators and keys copied beside the
# program and checked with its --check; (5) the program's --selftest.
# Everything it writes is under build/ and dist/ (both git-ignored).
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/.." && pwd)
VENV=$ROOT/build/clinic-venv
WORK=$ROOT/build/clinic-work
SRC=$ROOT/build/clinic-src
DISTPATH=$ROOT/dist
PYTHON=${PYTHON:-python3}
t0=$SECONDS

fresh=0 selftest=1 prepare=0 calcs=() keys=()
while [ $# -gt 0 ]; do
  case $1 in
    --fresh) fresh=1 ;;
    --no-selftest) selftest=0 ;;
    --prepare) prepare=1 ;;
    --distpath) [ $# -ge 2 ] || { echo "build_clinic: --distpath needs a folder" >&2; exit 2; }
                DISTPATH=$(realpath -m "$2"); shift ;;
    -h|--help) sed -n '2,21p' "$0"; exit 0 ;;
    *.json) calcs+=("$(realpath -m "$1")") ;;  # relative to where the script was called
    *.pub) keys+=("$(realpath -m "$1")") ;;
    *) echo "build_clinic: unknown argument '$1' (see --help)" >&2; exit 2 ;;
  esac
  shift
done
DIST=$DISTPATH/calcbuilder-clinic
cd "$ROOT"
# One build at a time: test runs started side by side share build/clinic-venv.
mkdir -p build
exec 9>build/clinic-build.lock
flock 9
for f in "${calcs[@]}" "${keys[@]}"; do
  [ -f "$f" ] || { echo "build_clinic: no such file: $f" >&2; exit 2; }
done

# System packages: objdump (binutils) for PyInstaller, and the two X11 libraries
# Qt's xcb plugin needs that many images lack (desktop-stack.md 1). Libraries
# missing at build time are not bundled and must then exist on each clinic PC.
need=()
command -v objdump >/dev/null 2>&1 || need+=(binutils)
if command -v dpkg >/dev/null 2>&1; then
  for pkg in libxcb-icccm4 libxcb-keysyms1; do
    dpkg -s "$pkg" >/dev/null 2>&1 || need+=("$pkg")
  done
fi
if [ "${#need[@]}" -gt 0 ]; then
  if [ "$(id -u)" = "0" ] && command -v apt-get >/dev/null 2>&1; then
    export DEBIAN_FRONTEND=noninteractive
    apt_install() { apt-get install -y -qq --no-install-recommends "${need[@]}" >/dev/null; }
    apt_install || { apt-get update -qq && apt_install; }
  elif ! command -v objdump >/dev/null 2>&1; then
    echo "build_clinic: objdump not found; install binutils" >&2; exit 1
  else
    echo "build_clinic: warning: ${need[*]} not installed; they will not be bundled" >&2
  fi
fi

# --- 1. the lean build venv ---------------------------------------------------------------
if [ "$fresh" = 1 ]; then rm -rf "$VENV" "$WORK"; fi
[ -x "$VENV/bin/python" ] || "$PYTHON" -m venv "$VENV"
PIP=("$VENV/bin/python" -m pip install -q --disable-pip-version-check)
quiet_pip() {  # the image's global pip config prints one harmless warning per package
  "${PIP[@]}" "$@" 2>&1 | { grep -v "^WARNING: Location" || true; }
}
# Same versions as the developer venv the test suite ran in, when there is one.
constraints=()
if [ -x "$ROOT/.venv/bin/python" ]; then
  "$ROOT/.venv/bin/python" -m pip list --format=freeze --exclude-editable \
    --disable-pip-version-check >"$ROOT/build/clinic-constraints.txt"
  constraints=(-c "$ROOT/build/clinic-constraints.txt")
fi
# Only what the clinic form imports (pyproject's full list would bring pandas,
# scipy and statsmodels). PySide6-Pdf: printing to a printer (QtPdf); pin it with
# Essentials, its 0.0.1 placeholder must never be picked.
quiet_pip "${constraints[@]}" numpy matplotlib PySide6-Essentials "PySide6-Pdf>=6.8" \
  reportlab cryptography platformdirs rfc8785 jsonschema threadpoolctl pyinstaller
# calcbuilder itself, without its dependencies, from a clean copy of the sources
# (building in the working tree would leave build/lib and egg-info behind).
rm -rf "$SRC" && mkdir -p "$SRC"
cp pyproject.toml README.md "$SRC/"
tar --exclude=__pycache__ -cf - calcbuilder | tar -xf - -C "$SRC"
quiet_pip --no-deps --force-reinstall "$SRC"
echo "[build_clinic] venv ready after $((SECONDS - t0)) s"
[ "$prepare" = 0 ] || exit 0

# --- 2. PyInstaller -----------------------------------------------------------------------
t1=$SECONDS
"$VENV/bin/pyinstaller" --noconfirm --log-level WARN --distpath "$DISTPATH" \
  --workpath "$WORK" packaging/clinic.spec
echo "[build_clinic] PyInstaller done in $((SECONDS - t1)) s"

# --- 3. SOUP list (fails on forbidden libraries) -------------------------------------------
"$VENV/bin/python" packaging/soup.py --collected "$WORK/clinic/collected.json" --out "$DIST"

# --- 4. calculators and trusted keys beside the program ------------------------------------
if [ "${#keys[@]}" -gt 0 ]; then
  mkdir -p "$DIST/trusted-keys"
  cp -- "${keys[@]}" "$DIST/trusted-keys/"
fi
if [ "${#calcs[@]}" -gt 0 ]; then
  for f in "${calcs[@]}"; do  # the program opens the *.calc.json files beside it
    base=$(basename "$f"); base=${base%.json}; base=${base%.calc}
    cp -- "$f" "$DIST/$base.calc.json"
  done
fi
if [ "${#calcs[@]}" -gt 0 ] || [ "${#keys[@]}" -gt 0 ]; then
  "$DIST/calcbuilder-clinic" --check
fi

# --- 5. self-test ---------------------------------------------------------------------------
if [ "$selftest" = 1 ]; then
  # offscreen Qt when there is no display (CI, servers)
  if [ -z "${DISPLAY:-}${WAYLAND_DISPLAY:-}" ]; then export QT_QPA_PLATFORM=offscreen; fi
  "$DIST/calcbuilder-clinic" --selftest
fi
echo "[build_clinic] $DIST: $(du -sh "$DIST" | cut -f1); total $((SECONDS - t0)) s"
