"""Evidence: how well the model did, on whom and when, and what it is not for.

``evidenceSummary`` holds one box per evidence set, most trustworthy first
(objectName ``evidence_<id>``: kind, data and period, population, size, the
stored metrics with their intervals);
``calibrationSet`` chooses which set's calibration plot ``calibrationFigure``
shows (the most trustworthy first); ``limitations`` lists the target population,
the exclusions and the prediction horizon. Values are shown as stored in the
calculator file; nothing is recomputed.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QComboBox,
    QFormLayout,
    QGroupBox,
    QLabel,
    QVBoxLayout,
    QWidget,
)

from ..calc.evidence_sets import TRUST_ORDER, EvidenceSet, metric_label
from ..clinic.benefit import EVIDENCE_KIND_WORDS
from ..clinic.session import ClinicSession
from .figures import FigureBox
from .look import SYMBOL, heading, state_label

__all__ = ["EvidencePanel", "metric_text"]

_METRICS = (
    ("auc", "AUC (c statistic)"),
    ("calibration_slope", "Calibration slope"),
    ("calibration_intercept", "Calibration intercept"),
    ("brier", "Brier score"),
)


def _number(value: float) -> str:
    """Three significant digits, but 0.000 rather than 2.58e-18 for a value that is zero."""
    return f"{value:.3f}" if abs(value) < 0.0005 else f"{value:.3g}"


def metric_text(metric: Mapping[str, Any] | None) -> str:
    """``"0.78 (0.74 to 0.81)"``; ``"not stated"`` when absent."""
    if not metric or metric.get("value") is None:
        return "not stated"
    text = _number(metric["value"])
    if metric.get("low") is not None and metric.get("high") is not None:
        text += f" ({_number(metric['low'])} to {_number(metric['high'])})"
    return text.replace("-", "−")


def _set_lines(e: EvidenceSet) -> list[tuple[str, str]]:
    """One evidence set as (name, text) lines: what, where, when, who, how many, how well."""
    ds = e.raw["dataset"]
    where = ", ".join(str(ds[k]) for k in ("name", "period") if ds.get(k))
    lines = [("Kind", EVIDENCE_KIND_WORDS.get(e.kind, e.kind)),
             ("Data", where or "not stated"),
             ("Population", str(ds.get("population") or "not stated")),
             ("People", f"{e.n:,}, of whom {e.events:,} with the outcome")]
    lines += [(name, metric_text(e.metric(key))) for key, name in _METRICS]
    extra = sorted(set(e.raw.get("metrics", {})) - {k for k, _ in _METRICS})
    lines += [(metric_label(key), metric_text(e.metric(key))) for key in extra]
    return lines


def _set_box(e: EvidenceSet) -> QGroupBox:
    box = QGroupBox(e.label)
    box.setObjectName(f"evidence_{e.id}")
    form = QFormLayout(box)
    form.setRowWrapPolicy(QFormLayout.RowWrapPolicy.WrapLongRows)
    for name, text in _set_lines(e):
        value = QLabel(text)
        value.setWordWrap(True)
        value.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        form.addRow(name, value)
    return box


def _by_trust(sets: tuple[EvidenceSet, ...]) -> list[EvidenceSet]:
    rank = {kind: i for i, kind in enumerate(TRUST_ORDER)}
    return sorted(sets, key=lambda e: rank.get(e.kind, len(rank)))


class EvidencePanel(QWidget):
    """The evidence tab (objectName ``evidencePanel``)."""

    def __init__(self, session: ClinicSession, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("evidencePanel")
        self._session = session
        calc = session.calculator
        self.summary = QWidget()
        self.summary.setObjectName("evidenceSummary")
        sets_box = QVBoxLayout(self.summary)
        sets_box.setContentsMargins(0, 0, 0, 0)
        for e in _by_trust(calc.evidence):
            sets_box.addWidget(_set_box(e))
        self.chooser = QComboBox()
        self.chooser.setObjectName("calibrationSet")
        self.chooser.setAccessibleName("Evidence set for the calibration plot")
        self._calibrated = [e for e in _by_trust(calc.evidence)
                            if "calibration_curve" in e.raw or "grouped_calibration" in e.raw]
        for e in self._calibrated:
            self.chooser.addItem(e.label, e.id)
        self.figure = FigureBox("This calculator holds no calibration curve.",
                                name="calibrationFigure", min_height=40)
        self.limitations = state_label(self._limitations_text(), "ok", "limitations")
        box = QVBoxLayout(self)
        if not calc.evidence:
            box.addWidget(state_label(f"{SYMBOL['warning']} This calculator holds no evidence "
                                      "of its performance.", "warning", "noEvidence"))
        box.addWidget(heading("How well the model did, and on whom"))
        box.addWidget(self.summary)
        box.addWidget(heading("Calibration: estimated against observed risk"))
        box.addWidget(self.chooser)
        box.addWidget(self.figure)
        box.addWidget(heading("Who this calculator is for"))
        box.addWidget(self.limitations)
        box.addStretch(1)
        self.chooser.currentIndexChanged.connect(self._draw)
        self.chooser.setVisible(bool(self._calibrated))
        self._draw()

    def _limitations_text(self) -> str:
        about = self._session.calculator.about
        lines = [f"Built for: {about.population}.",
                 f"Estimates: {about.outcome}, {about.horizon}."]
        lines += [f"{SYMBOL['refused']} {text}" for text in about.exclusions]
        return "\n".join(lines)

    def _draw(self) -> None:
        index = self.chooser.currentIndex()
        if not 0 <= index < len(self._calibrated):
            self.figure.set_builder(None)
            return
        raw = self._calibrated[index].raw
        synthetic = self._session.synthetic
        title = self._calibrated[index].label

        def build() -> Any:
            from ..plots import calibration_figure

            curve = raw.get("calibration_curve") or {}
            grouped = [(g["mean_risk"], g["observed"], g.get("low"), g.get("high"))
                       for g in raw.get("grouped_calibration", ())] or None
            hist = raw.get("risk_histogram")
            return calibration_figure(
                curve.get("risk", ()), curve.get("observed", ()),
                band_low=curve.get("low"), band_high=curve.get("high"), grouped=grouped,
                histogram=(hist["edges"], hist["events"], hist["nonevents"]) if hist else None,
                synthetic=synthetic, title=title)

        self.figure.set_builder(build)

    def flush(self) -> None:
        self.figure.flush()
