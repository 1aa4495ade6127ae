"""Test-wide settings: Qt offscreen and a non-interactive matplotlib backend."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
os.environ.setdefault("MPLBACKEND", "Agg")
