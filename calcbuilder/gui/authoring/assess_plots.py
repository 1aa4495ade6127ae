"""The evidence plots of the workspace, each with its numbers beside it.

Figures come from :mod:`calcbuilder.plots` (the builders the clinic form and the
evidence report use) fed with numbers stored in the evidence sets -- ROC
points from :mod:`calcbuilder.authoring.pipeline` -- and are drawn only when
shown (:class:`calcbuilder.gui.figures.FigureBox`). The one figure of our own
here, the risk distributions, draws the stored histogram counts as they are.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from PySide6.QtWidgets import QComboBox, QGridLayout, QHBoxLayout, QLabel, QVBoxLayout, QWidget

from ...authoring.assess_step import METRIC_NAMES
from ..figures import FigureBox

__all__ = ["PlotsPanel", "distribution_figure", "metric_text"]


def metric_text(ev: Mapping[str, Any], names: Sequence[str]) -> str:
    """``AUC 0.731 (0.70 to 0.76) · Calibration slope ...`` from the stored metrics."""
    parts = []
    for name in names:
        m = ev.get("metrics", {}).get(name)
        if not m or m.get("value") is None:
            continue
        text = f"{METRIC_NAMES.get(name, name)} {m['value']:.3f}"
        if m.get("low") is not None and m.get("high") is not None:
            text += f" ({m['low']:.3f} to {m['high']:.3f})"
        parts.append(text)
    return " · ".join(parts)


def distribution_figure(hist: Mapping[str, Any], *, synthetic: bool, title: str) -> Any:
    """Predicted risks of patients with and without the outcome (stored counts per bin)."""
    import numpy as np

    from ...plots import style as st

    style = st.SCREEN
    edges = np.asarray(hist["edges"], dtype=float)
    events = np.asarray(hist["events"], dtype=float)
    nonevents = np.asarray(hist["nonevents"], dtype=float)
    filled = np.flatnonzero(events + nonevents > 0)
    right = float(edges[filled[-1] + 1]) if filled.size else 1.0
    fig = st.new_figure((5.6, 4.4), style)
    top, bottom = fig.subplots(2, 1, sharex=True)
    for ax, counts, look, word in ((top, events, st.EVENTS, "with the outcome"),
                                   (bottom, nonevents, st.NONEVENTS, "without the outcome")):
        st.style_axes(ax, style)
        ax.bar(edges[:-1], counts, width=np.diff(edges), align="edge", color=look.face,
               edgecolor=look.edge, hatch=look.hatch, linewidth=style.thin * 0.6)
        ax.set_ylabel("Patients", **st.font(style))
        ax.text(0.99, 0.95, f"{word} ({counts.sum():,.0f})", transform=ax.transAxes,
                ha="right", va="top", **st.font(style, "small"))
    bottom.set_xlim(0, right)
    st.percent_axis(bottom, "x")
    bottom.set_xlabel("Predicted risk, %", **st.font(style))
    return st.finish(fig, style, synthetic=synthetic, title=title)


class PlotsPanel(QWidget):
    """ROC, calibration, decision curve and risk distributions of a chosen evidence set."""

    def __init__(self) -> None:
        super().__init__()
        self.setObjectName("plotsPanel")
        self.evidence: list[dict[str, Any]] = []
        self.roc: dict[str, tuple[list[float], list[float]]] = {}
        self.synthetic = False
        self.marks: tuple[float | None, tuple[float, float] | None] = (None, None)
        col = QVBoxLayout(self)
        col.setContentsMargins(0, 0, 0, 0)
        row = QHBoxLayout()
        label = QLabel("Evidence set &shown:")
        self.chooser = QComboBox()
        self.chooser.setObjectName("plotSet")
        self.chooser.setAccessibleName("Evidence set shown in the plots")
        label.setBuddy(self.chooser)
        self.chooser.currentIndexChanged.connect(lambda _i: self._draw())
        row.addWidget(label)
        row.addWidget(self.chooser, 1)
        col.addLayout(row)
        grid = QGridLayout()
        self.boxes: dict[str, FigureBox] = {}
        self.captions: dict[str, QLabel] = {}
        for k, (name, placeholder) in enumerate((
                ("roc", "The ROC curve appears after fitting."),
                ("calibration", "The calibration plot appears after fitting."),
                ("decision", "The decision curve appears after fitting."),
                ("distribution", "The risk distributions appear after fitting."))):
            cell = QVBoxLayout()
            box = FigureBox(placeholder, name=f"{name}Figure", min_height=160)
            caption = QLabel("")
            caption.setObjectName(f"{name}Numbers")
            caption.setWordWrap(True)
            cell.addWidget(box)
            cell.addWidget(caption)
            grid.addLayout(cell, k // 2, k % 2)
            self.boxes[name], self.captions[name] = box, caption
        col.addLayout(grid)

    def show_evidence(self, evidence: list[dict[str, Any]],
                      roc: Mapping[str, tuple[list[float], list[float]]], *, synthetic: bool,
                      marks: tuple[float | None, tuple[float, float] | None] = (None, None)
                      ) -> None:
        """Show these evidence sets (the chosen one kept when it is still there)."""
        current = self.chooser.currentData()
        self.evidence, self.roc, self.synthetic, self.marks = evidence, dict(roc), synthetic, marks
        self.chooser.blockSignals(True)
        self.chooser.clear()
        for ev in evidence:
            self.chooser.addItem(f"{ev['label']} [{ev['id']}]", ev["id"])
        index = self.chooser.findData(current)
        self.chooser.setCurrentIndex(index if index >= 0 else 0)
        self.chooser.blockSignals(False)
        self._draw()

    def set_marks(self, marks: tuple[float | None, tuple[float, float] | None]) -> None:
        """Redraw the decision curve with this threshold and reasonable range."""
        self.marks = marks
        ev = self._chosen()
        if ev is not None:
            self._decision(ev)

    def _chosen(self) -> dict[str, Any] | None:
        wanted = self.chooser.currentData()
        return next((e for e in self.evidence if e["id"] == wanted), None)

    def _draw(self) -> None:
        ev = self._chosen()
        if ev is None:
            for box in self.boxes.values():
                box.set_builder(None)
            for caption in self.captions.values():
                caption.clear()
            return
        self._roc(ev)
        self._calibration(ev)
        self._decision(ev)
        self._distribution(ev)

    def _roc(self, ev: dict[str, Any]) -> None:
        points = self.roc.get(ev["id"])
        box = self.boxes["roc"]
        self.captions["roc"].setText(metric_text(ev, ["auc"]))
        if points is None:
            box.set_builder(None, "No ROC points for this set (it is made on the same data "
                                  "as another set, or was imported).")
            return
        m = ev.get("metrics", {}).get("auc") or {}
        reference = self.roc.get("reference")

        def build() -> Any:
            from ...plots import roc_figure

            return roc_figure(points[0], points[1], auc=m.get("value"), auc_low=m.get("low"),
                              auc_high=m.get("high"), label="Model",
                              reference=reference, synthetic=self.synthetic,
                              title=f"ROC curve: {ev['label']}")
        box.set_builder(build)

    def _calibration(self, ev: dict[str, Any]) -> None:
        curve = ev.get("calibration_curve")
        self.captions["calibration"].setText(metric_text(
            ev, ["calibration_intercept", "calibration_slope", "ici", "oe_ratio", "brier"]))
        if not curve:
            self.boxes["calibration"].set_builder(None, "This set stores no calibration curve "
                                                        "(see the apparent set).")
            return

        def build() -> Any:
            from ...plots import calibration_figure

            grouped = [(g["mean_risk"], g["observed"], g.get("low"), g.get("high"))
                       for g in ev.get("grouped_calibration", ())] or None
            hist = ev.get("risk_histogram")
            return calibration_figure(
                curve["risk"], curve["observed"], band_low=curve.get("low"),
                band_high=curve.get("high"), grouped=grouped,
                histogram=(hist["edges"], hist["events"], hist["nonevents"]) if hist else None,
                synthetic=self.synthetic, title=f"Calibration: {ev['label']}")
        self.boxes["calibration"].set_builder(build)

    def _decision(self, ev: dict[str, Any]) -> None:
        dc = ev.get("decision_curve")
        threshold, span = self.marks
        if not dc:
            self.boxes["decision"].set_builder(None, "This set stores no decision curve.")
            return
        text = "Net benefit per 100 patients, model vs treat all"
        if threshold is not None:
            t = dc["thresholds"]
            k = min(range(len(t)), key=lambda i: abs(t[i] - threshold))
            text += (f"; at {t[k]:.0%}: model {dc['model'][k] * 100:.2f}, treat all "
                     f"{dc['treat_all'][k] * 100:.2f}")
        self.captions["decision"].setText(text)

        def build() -> Any:
            from ...plots import decision_curve_figure

            return decision_curve_figure(
                dc["thresholds"], dc["model"], dc["treat_all"], model_low=dc.get("model_low"),
                model_high=dc.get("model_high"), reasonable_range=span, threshold=threshold,
                label="Model", show_all_thresholds=True, synthetic=self.synthetic,
                title=f"Decision curve: {ev['label']}")
        self.boxes["decision"].set_builder(build)

    def _distribution(self, ev: dict[str, Any]) -> None:
        hist = ev.get("risk_histogram")
        ds = ev.get("dataset", {})
        self.captions["distribution"].setText(
            f"{ds.get('n', 0):,} patients, {ds.get('events', 0):,} with the outcome")
        if not hist:
            self.boxes["distribution"].set_builder(None, "This set stores no risk histogram.")
            return
        self.boxes["distribution"].set_builder(lambda: distribution_figure(
            hist, synthetic=self.synthetic, title=f"Predicted risks: {ev['label']}"))

    def flush(self) -> None:
        for box in self.boxes.values():
            box.flush()
