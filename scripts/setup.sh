#!/usr/bin/env bash
# Set up a fresh Debian/Ubuntu machine for calcbuilder: the system libraries Qt
# needs (offscreen and X11), poppler for PDF previews, then a virtual
# environment in .venv with calcbuilder and its test tools installed.
set -euo pipefail
cd "$(dirname "$0")/.."

SUDO=""
if [ "$(id -u)" != "0" ] && command -v sudo >/dev/null 2>&1; then SUDO="sudo"; fi
if command -v apt-get >/dev/null 2>&1; then
  export DEBIAN_FRONTEND=noninteractive
  $SUDO apt-get update -qq
  $SUDO apt-get install -y -qq --no-install-recommends \
    libgl1 libegl1 libxkbcommon0 libglib2.0-0 libfontconfig1 libdbus-1-3 fonts-dejavu-core \
    xvfb xauth libxcb-cursor0 libxcb-icccm4 libxcb-image0 libxcb-keysyms1 libxcb-render-util0 \
    libxcb-shape0 libxkbcommon-x11-0 poppler-utils >/dev/null
else
  echo "setup: apt-get not found; install the Qt runtime libraries listed in this script by hand" >&2
fi

[ -x .venv/bin/python ] || python3 -m venv .venv
# The image's global pip config may print one harmless "Location ... is ignored" warning per package.
.venv/bin/python -m pip install -q --upgrade pip 2>&1 | { grep -v "^WARNING: Location" || true; }
.venv/bin/python -m pip install -q -e '.[test]' 2>&1 | { grep -v "^WARNING: Location" || true; }
echo "setup: done (.venv ready)"
