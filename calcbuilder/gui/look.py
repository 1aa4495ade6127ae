"""The clinic form's own look: palette, symbols, text states and boxed notices.

Every state is carried by a symbol and a word first; colour only repeats it, so
the form reads the same in grayscale: errors are bold with ✖, warnings italic
with ▲, quiet notes plain and muted. The palette is ours: slate ink on white, a
deep blue-green accent, ochre for cautions and brick for refusals, each boxed
notice with its own border style (dashed, dotted, double) that survives grayscale.

Looks are set per widget (fonts and palettes; a style sheet only on the few
bordered notices), never as an application-wide style sheet: that would make Qt
style every widget of the form, and the dialogs, through its slower style-sheet
engine.
"""

from __future__ import annotations

from PySide6.QtGui import QColor, QFont, QPalette
from PySide6.QtWidgets import QLabel, QLineEdit, QWidget

__all__ = [
    "ACCENT",
    "CAUTION_LINE",
    "SYMBOL",
    "box",
    "heading",
    "set_state",
    "sized",
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

INK = "#1f2a33"
MUTED = "#4d5b66"
ACCENT = "#1d5c63"
STRIP = "#e8eef0"
_CAUTION_BG = "#fbf0d4"
_CAUTION_EDGE = "#7a5a00"
_REFUSE_BG = "#f6dede"
_REFUSE_EDGE = "#7d1f1f"

# state -> (text colour, bold, italic)
_TEXT = {
    "ok": (INK, False, False),
    "note": (MUTED, False, False),
    "error": (_REFUSE_EDGE, True, False),
    "warning": (_CAUTION_EDGE, False, True),
    "heading": (ACCENT, True, False),
}
_ENTRY = {
    "ok": "",
    "error": f"QLineEdit {{ border: 2px solid {_REFUSE_EDGE}; padding: 1px; }}",
    "warning": f"QLineEdit {{ border: 2px dashed {_CAUTION_EDGE}; padding: 1px; }}",
}
_BOXES = {
    "caution": f"background: {_CAUTION_BG}; color: {INK}; border: 2px dashed {_CAUTION_EDGE}; "
               "padding: 4px 8px;",
    "banner": f"background: {_CAUTION_BG}; color: {INK}; font-weight: bold; "
              f"border: 3px dashed {_CAUTION_EDGE}; padding: 6px 10px;",
    "refusal": f"background: {_REFUSE_BG}; color: {INK}; border: 4px double {_REFUSE_EDGE}; "
               "padding: 10px 14px;",
    "marker": f"background: #ffffff; color: {INK}; font-weight: bold; border: 2px dashed {INK}; "
              "padding: 2px 8px;",
    "plain": f"background: #f7f9fa; color: {INK}; border: 1px solid {MUTED}; padding: 6px 8px;",
    "strip": f"QFrame#header {{ background: {STRIP}; border-bottom: 2px solid {ACCENT}; }}",
}


def set_state(widget: QWidget, state: str) -> None:
    """Show ``state`` (``ok``, ``note``, ``error``, ``warning``, ``heading``) on a label or entry.

    The state is also kept as the widget's ``state`` property (tests and
    accessibility tools read it).
    """
    if widget.property("state") == state:
        return
    widget.setProperty("state", state)
    if isinstance(widget, QLineEdit):
        widget.setStyleSheet(_ENTRY.get(state, ""))
        return
    colour, bold, italic = _TEXT.get(state, _TEXT["ok"])
    palette = widget.palette()
    palette.setColor(QPalette.ColorRole.WindowText, QColor(colour))
    widget.setPalette(palette)
    font = widget.font()
    font.setBold(bold)
    font.setItalic(italic)
    widget.setFont(font)


def box(widget: QWidget, kind: str) -> QWidget:
    """Give a notice its border and background (``caution``, ``banner``, ``refusal``, ...)."""
    widget.setStyleSheet(_BOXES[kind])
    return widget


def sized(widget: QWidget, points: float, *, bold: bool = False) -> QWidget:
    """Set a widget's font size (points) and weight."""
    font = QFont(widget.font())
    font.setPointSizeF(points)
    font.setBold(bold)
    widget.setFont(font)
    return widget


def heading(text: str) -> QLabel:
    """A section heading inside a panel."""
    label = state_label(text, "heading")
    sized(label, 11, bold=True)
    label.setContentsMargins(0, 8, 0, 2)
    return label


def state_label(text: str, state: str, name: str = "") -> QLabel:
    """A word-wrapped label with a state (``error``, ``warning``, ``ok``, ``note``)."""
    label = QLabel(text)
    label.setWordWrap(True)
    if name:
        label.setObjectName(name)
    set_state(label, state)
    return label
