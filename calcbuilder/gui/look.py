"""The clinic form's own look: palette, symbols and the style sheet.

Every state is carried by a symbol and a word first; colour only repeats it,
so the form reads the same in grayscale. The palette is ours: slate ink on
white, a deep blue-green accent, ochre for cautions and brick for refusals,
each paired with a border style (solid, dashed, double) that survives grayscale.
"""

from __future__ import annotations

from PySide6.QtWidgets import QLabel, QWidget

__all__ = [
    "CAUTION_LINE",
    "STYLE_SHEET",
    "SYMBOL",
    "heading",
    "set_state",
    "state_label",
]

#: The one caution line always visible in the header strip (our own words).
CAUTION_LINE = (
    "An estimate to support, not replace, clinical judgement, the patient's own "
    "preferences and local protocols."
)

#: Symbols that carry meaning without colour (all present in DejaVu Sans).
SYMBOL = {
    "error": "✖",
    "warning": "▲",
    "ok": "✔",
    "info": "ℹ",
    "banner": "⚠",
    "synthetic": "◆",
    "refused": "⊘",
}

_INK = "#1f2a33"
_MUTED = "#4d5b66"
_ACCENT = "#1d5c63"
_STRIP = "#e8eef0"
_CAUTION_BG = "#fbf0d4"
_CAUTION_EDGE = "#7a5a00"
_REFUSE_BG = "#f6dede"
_REFUSE_EDGE = "#7d1f1f"

STYLE_SHEET = f"""
QMainWindow, QWidget#formBody {{ background: #ffffff; color: {_INK}; }}
QFrame#header {{ background: {_STRIP}; border-bottom: 2px solid {_ACCENT}; }}
QLabel#title {{ font-size: 17px; font-weight: bold; color: {_INK}; }}
QLabel#version, QLabel#intendedUse, QLabel#reviewBy, QLabel#fingerprint,
QLabel#signatureState {{ color: {_MUTED}; }}
QLabel#cautionLine {{ color: {_INK}; font-style: italic; }}
QLabel#syntheticMarker {{ background: #ffffff; color: {_INK}; font-weight: bold;
    border: 2px dashed {_INK}; padding: 2px 8px; }}
QLabel#trustBanner {{ background: {_CAUTION_BG}; color: {_INK}; font-weight: bold;
    border: 3px dashed {_CAUTION_EDGE}; padding: 6px 10px; }}
QLabel#reviewBanner {{ background: {_CAUTION_BG}; color: {_INK}; font-weight: bold;
    border: 3px dotted {_CAUTION_EDGE}; padding: 6px 10px; }}
QLabel#refusal {{ background: {_REFUSE_BG}; color: {_INK}; border: 4px double {_REFUSE_EDGE};
    padding: 10px 14px; }}
QGroupBox {{ font-weight: bold; border: 1px solid #b9c4ca; margin-top: 14px;
    padding: 10px 8px 6px 8px; }}
QGroupBox::title {{ subcontrol-origin: margin; left: 8px; padding: 0 4px; color: {_ACCENT}; }}
QLabel[state="error"] {{ color: {_REFUSE_EDGE}; font-weight: bold; }}
QLabel[state="warning"] {{ color: {_CAUTION_EDGE}; font-style: italic; }}
QLabel[state="ok"] {{ color: {_INK}; }}
QLabel[state="note"] {{ color: {_MUTED}; }}
QLabel[state="heading"] {{ color: {_ACCENT}; font-weight: bold; font-size: 14px;
    border-bottom: 1px solid #b9c4ca; padding-top: 6px; }}
QLineEdit[state="error"] {{ border: 2px solid {_REFUSE_EDGE}; }}
QLineEdit[state="warning"] {{ border: 2px dashed {_CAUTION_EDGE}; }}
QLabel#risk {{ font-size: 30px; font-weight: bold; color: {_INK}; }}
QLabel#riskExtrapolation {{ background: {_CAUTION_BG}; border: 2px dashed {_CAUTION_EDGE};
    padding: 4px 8px; font-weight: bold; }}
QLabel#cautions {{ border: 1px solid {_MUTED}; padding: 6px 8px; background: #f7f9fa; }}
QLabel#thresholdWarnings {{ background: {_CAUTION_BG}; border: 2px dashed {_CAUTION_EDGE};
    padding: 4px 8px; }}
QTabBar::tab {{ padding: 6px 14px; }}
QTabBar::tab:selected {{ font-weight: bold; border-bottom: 3px solid {_ACCENT}; }}
"""


def set_state(widget: QWidget, state: str) -> None:
    """Set the ``state`` property that the style sheet keys on, and re-polish."""
    if widget.property("state") == state:
        return
    widget.setProperty("state", state)
    style = widget.style()
    style.unpolish(widget)
    style.polish(widget)


def heading(text: str) -> QLabel:
    """A section heading inside a panel."""
    return state_label(text, "heading")


def state_label(text: str, state: str, name: str = "") -> QLabel:
    """A word-wrapped label with a state (``error``, ``warning``, ``ok``, ``note``)."""
    label = QLabel(text)
    label.setWordWrap(True)
    if name:
        label.setObjectName(name)
    set_state(label, state)
    return label
