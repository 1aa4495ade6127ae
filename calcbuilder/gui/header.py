"""The header strip: which calculator this is, whether it can be trusted, and one caution.

Always shown: title, version, intended use (one line, full text in the tooltip),
the file fingerprint (short, full in the tooltip), the signature state, the
review-by date and one caution line. Shown when they apply, and never closable:
the trust banner (unsigned, unknown signer, past review-by) and the synthetic
marker. A refused file replaces all of it with the refusal and its reason.
"""

from __future__ import annotations

from dataclasses import dataclass

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QFrame, QHBoxLayout, QLabel, QVBoxLayout, QWidget

from .look import CAUTION_LINE, SYMBOL, box, set_state, sized

__all__ = ["HeaderInfo", "HeaderStrip"]

_STATE_WORDS = {
    "verified": (SYMBOL["ok"], "Signature verified"),
    "unknown_signer": (SYMBOL["banner"], "Signed by a key not on this clinic's list"),
    "unsigned": (SYMBOL["banner"], "Not signed"),
    "tampered": (SYMBOL["refused"], "Signature check failed"),
}


@dataclass(frozen=True)
class HeaderInfo:
    """What the strip shows; built by the window from the session, never computed here."""

    title: str
    version: str
    intended_use: str
    fingerprint: str
    state: str  # TrustState value: verified | unknown_signer | unsigned | tampered
    state_message: str
    review_by: str
    expired: bool
    synthetic: bool
    banners: tuple[str, ...] = ()


def _label(name: str, *, wrap: bool = False, selectable: bool = False) -> QLabel:
    label = QLabel()
    label.setObjectName(name)
    label.setWordWrap(wrap)
    if selectable:
        label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
    return label


class _OneLine(QLabel):
    """A label that shows one line, elided to its width, with the full text as tooltip."""

    def __init__(self, name: str) -> None:
        super().__init__()
        self.setObjectName(name)
        self._full = ""
        self.setMinimumWidth(120)

    def set_full_text(self, text: str) -> None:
        self._full = text
        self.setToolTip(text)
        self.setAccessibleDescription(text)
        self._elide()

    def full_text(self) -> str:
        return self._full

    def resizeEvent(self, event: object) -> None:  # noqa: N802 (Qt override)
        super().resizeEvent(event)  # type: ignore[arg-type]  # QResizeEvent
        self._elide()

    def _elide(self) -> None:
        metrics = self.fontMetrics()
        self.setText(metrics.elidedText(self._full, Qt.TextElideMode.ElideRight,
                                        max(self.width() - 4, 60)))


class HeaderStrip(QFrame):
    """The strip across the top of the form (objectName ``header``)."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("header")
        box(self, "strip")
        self.title = _label("title", selectable=True)
        self.version = _label("version")
        self.synthetic = _label("syntheticMarker")
        self.intended_use = _OneLine("intendedUse")
        self.signature = _label("signatureState")
        self.review_by = _label("reviewBy")
        self.fingerprint = _label("fingerprint", selectable=True)
        self.caution = _label("cautionLine", wrap=True)
        self.caution.setText(f"{SYMBOL['info']}  {CAUTION_LINE}")
        self.banner = _label("trustBanner", wrap=True)
        self.refusal = _label("refusal", wrap=True, selectable=True)
        self._style()
        self._layout_strip()
        self.show_empty()

    def _style(self) -> None:
        sized(self.title, 13, bold=True)
        for label in (self.version, self.signature, self.review_by, self.fingerprint):
            set_state(label, "note")
        set_state(self.intended_use, "note")
        set_state(self.caution, "ok")
        font = self.caution.font()
        font.setItalic(True)
        self.caution.setFont(font)
        box(self.synthetic, "marker")
        box(self.banner, "banner")
        box(self.refusal, "refusal")

    def _layout_strip(self) -> None:
        top = QHBoxLayout()
        top.addWidget(self.title)
        top.addWidget(self.version)
        top.addStretch(1)
        top.addWidget(self.synthetic)
        self.facts = QWidget()
        facts = QHBoxLayout(self.facts)
        facts.setContentsMargins(0, 0, 0, 0)
        for widget in (self.signature, self.review_by, self.fingerprint):
            facts.addWidget(widget)
        facts.addStretch(1)
        facts.setSpacing(24)
        box = QVBoxLayout(self)
        box.setContentsMargins(12, 8, 12, 8)
        box.setSpacing(4)
        box.addLayout(top)
        box.addWidget(self.intended_use)
        box.addWidget(self.facts)
        box.addWidget(self.caution)
        box.addWidget(self.banner)
        box.addWidget(self.refusal)

    def show_empty(self) -> None:
        """No calculator open yet: the caution line and an invitation only."""
        self.title.setText("No calculator open")
        self.version.clear()
        self.intended_use.set_full_text(
            "Open a calculator file (*.calc.json) with File ▸ Open, or drop it on this window.")
        for label in (self.signature, self.review_by, self.fingerprint):
            label.clear()
            label.setToolTip("")
        self.facts.hide()
        self.synthetic.hide()
        self.banner.hide()
        self.refusal.hide()

    def show_info(self, info: HeaderInfo) -> None:
        """Show an opened calculator (which may still be refused when tampered)."""
        self.title.setText(info.title)
        self.version.setText(f"version {info.version}")
        self.intended_use.set_full_text(f"For: {info.intended_use}")
        symbol, words = _STATE_WORDS.get(info.state, (SYMBOL["banner"], info.state))
        self.signature.setText(f"{symbol} {words}")
        self.signature.setToolTip(info.state_message)
        expired = f"  {SYMBOL['banner']} past this date" if info.expired else ""
        self.review_by.setText(f"Review by {info.review_by}{expired}")
        self.fingerprint.setText(f"Fingerprint {info.fingerprint[:12]}…")
        self.fingerprint.setToolTip(f"SHA-256 of the calculator's content:\n{info.fingerprint}")
        self.fingerprint.setAccessibleDescription(info.fingerprint)
        self.facts.show()
        self.synthetic.setText(f"{SYMBOL['synthetic']} SYNTHETIC, not for clinical use")
        self.synthetic.setVisible(info.synthetic)
        self.banner.setText("\n".join(f"{SYMBOL['banner']}  {b}" for b in info.banners))
        self.banner.setVisible(bool(info.banners))
        self.refusal.hide()

    def show_refused(self, file_name: str, explanation: str, fingerprint: str | None = None
                     ) -> None:
        """A file that must not be used: say so and why, in place of the usual facts.

        Nothing from inside a refused file (not even its title) is shown as fact,
        only its file name and, when it could be computed, its fingerprint.
        """
        self.show_empty()
        self.title.setText(f"Refused: {file_name}")
        self.intended_use.set_full_text("This calculator file was refused; no risk can be shown.")
        if fingerprint:
            self.fingerprint.setText(f"Fingerprint {fingerprint[:12]}…")
            self.fingerprint.setToolTip(f"SHA-256 of the file's content:\n{fingerprint}")
            self.signature.setText(f"{SYMBOL['refused']} Signature check failed")
            self.facts.show()
        self.refusal.setText(f"{SYMBOL['refused']}  REFUSED: {explanation}")
        self.refusal.show()

    def banner_text(self) -> str:
        """The permanent banner's text ('' when there is none)."""
        return self.banner.text() if not self.banner.isHidden() else ""
