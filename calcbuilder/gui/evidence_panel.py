"""Evidence: how well the model did, on whom and when, and what it is not for.

``evidenceSummary`` is a table with one column per evidence set (kind, data,
period, population, size, the stored metrics with their intervals);
``calibrationSet`` chooses which set's calibration plot ``calibrationFigure``
shows (the most trustworthy first); ``limitations`` lists the target population,
the exclusions and the prediction horizon. Values are shown as stored in the
calculator file; nothing is recomputed.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from PySide6.QtWidgets import (
    QAbstractItemView,
    QComboBox,
    QHeaderView,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from ..calc.evidence_sets import TRUST_ORDER, EvidenceSet
from ..clinic.benefit import EVIDENCE_KIND_WORDS
from ..clinic.session import ClinicSession
from .figures import FigureBox
from .look import SYMBOL, state_label

__all__ = ["EvidencePanel", "metric_text"]

_METRICS = (
    ("auc", "AUC (c statistic)"),
    ("calibration_slope", "Calibration slope"),
    ("calibration_intercept", "Calibration intercept"),
    ("brier", "Brier score"),
)


def metric_text(metric: Mapping[str, Any] | None) -> str:
    """``"0.78 (0.74 to 0.81)"``; ``"not stated"`` when absent."""
    if not metric or metric.get("value") is None:
        return "not stated"
    text = f"{metric['value']:.3g}"
    if metric.get("low") is not None and metric.get("high") is not None:
        text += f" ({metric['low']:.3g} to {metric['high']:.3g})"
    return text.replace("-", "−")


def _rows(sets: tuple[EvidenceSet, ...]) -> list[tuple[str, list[str]]]:
    def dataset(e: EvidenceSet, key: str) -> str:
        return str(e.raw["dataset"].get(key) or "not stated")

    rows = [
        ("Kind", [EVIDENCE_KIND_WORDS.get(e.kind, e.kind) for e in sets]),
        ("Data", [dataset(e, "name") for e in sets]),
        ("Period", [dataset(e, "period") for e in sets]),
        ("Population", [dataset(e, "population") for e in sets]),
        ("People (with the outcome)", [f"{e.n:,} ({e.events:,})" for e in sets]),
    ]
    for key, name in _METRICS:
        rows.append((name, [metric_text(e.metric(key)) for e in sets]))
    extra = sorted({k for e in sets for k in e.raw.get("metrics", {})} - {k for k, _ in _METRICS})
    rows.extend((key.replace("_", " ").capitalize(), [metric_text(e.metric(key)) for e in sets])
                for key in extra)
    return rows


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
        self.summary = self._summary_table(calc.evidence)
        self.chooser = QComboBox()
        self.chooser.setObjectName("calibrationSet")
        self.chooser.setAccessibleName("Evidence set for the calibration plot")
        self._calibrated = [e for e in _by_trust(calc.evidence)
                            if "calibration_curve" in e.raw or "grouped_calibration" in e.raw]
        for e in self._calibrated:
            self.chooser.addItem(e.label, e.id)
        self.figure = FigureBox("This calculator holds no calibration curve.",
                                name="calibrationFigure", min_height=360)
        self.limitations = state_label(self._limitations_text(), "ok", "limitations")
        box = QVBoxLayout(self)
        if not calc.evidence:
            box.addWidget(state_label(f"{SYMBOL['warning']} This calculator holds no evidence "
                                      "of its performance.", "warning", "noEvidence"))
        box.addWidget(self.summary)
        box.addWidget(state_label("Calibration: estimated against observed risk", "ok"))
        box.addWidget(self.chooser)
        box.addWidget(self.figure, 1)
        box.addWidget(self.limitations)
        self.chooser.currentIndexChanged.connect(self._draw)
        self.chooser.setVisible(bool(self._calibrated))
        self._draw()

    @staticmethod
    def _summary_table(sets: tuple[EvidenceSet, ...]) -> QTableWidget:
        rows = _rows(sets)
        table = QTableWidget(len(rows), len(sets))
        table.setObjectName("evidenceSummary")
        table.setHorizontalHeaderLabels([e.label for e in sets])
        table.setVerticalHeaderLabels([name for name, _ in rows])
        table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        table.setWordWrap(True)
        table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        for i, (_name, cells) in enumerate(rows):
            for j, text in enumerate(cells):
                item = QTableWidgetItem(text)
                item.setToolTip(text)
                table.setItem(i, j, item)
        table.resizeRowsToContents()
        table.setFixedHeight(table.horizontalHeader().height()
                             + sum(table.rowHeight(i) for i in range(len(rows))) + 4)
        table.setVisible(bool(sets))
        return table

    def _limitations_text(self) -> str:
        about = self._session.calculator.about
        lines = [f"Built for: {about.population}.",
                 f"Estimates: {about.outcome}, {about.horizon}."]
        lines += [f"{SYMBOL['refused']} {text}" for text in about.exclusions]
        return "Who this calculator is for\n" + "\n".join(lines)

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
