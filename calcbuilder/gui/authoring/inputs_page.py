"""Step 2 page: describe every predictor (one card each), or import a model instead.

A view over :class:`calcbuilder.authoring.InputsStep` and
:class:`calcbuilder.authoring.ImportStep`. The cards together are the recipe's
``[[inputs]]``; their order is the clinic form's. Every problem the recipe
finds is shown beside its field on its card, all at once.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtWidgets import (
    QButtonGroup,
    QComboBox,
    QGridLayout,
    QHBoxLayout,
    QLineEdit,
    QPushButton,
    QRadioButton,
    QVBoxLayout,
    QWidget,
)

from ...authoring.import_step import MODES
from ...authoring.inputs_step import DEVELOPED_RULES
from ...authoring.problems import route
from .host import Host
from .input_card import InputCard
from .widgets import (
    FieldSet,
    PathField,
    ProblemBox,
    clear_layout,
    drop,
    grid_row,
    note,
    page_scroll,
    section,
)

__all__ = ["InputsPage"]

MODE_WORDS = {"fit": "Fit a model to the data (recipe)",
              "table": "Import a coefficient table (CSV)", "pmml": "Import a PMML model"}
RULE_WORDS = {"observed": "smallest to largest value used",
              "p01-p99": "1st to 99th percentile"}


class InputsPage(QWidget):
    """Step 2 (objectName ``inputsPage``)."""

    step = "inputs"

    def __init__(self, host: Host) -> None:
        super().__init__()
        self.setObjectName("inputsPage")
        self.host = host
        self.fields = FieldSet()
        self.cards: list[InputCard] = []
        inner = QWidget()
        col = QVBoxLayout(inner)
        col.addWidget(section("Step 2 · Inputs"))
        col.addWidget(note("Describe each predictor as the clinic form will ask for it. The "
                           "recipe checks every field; its messages appear beside the field."))
        col.addWidget(self._mode_box())
        self.import_box = self._import_box()
        col.addWidget(self.import_box)
        self.problems = ProblemBox("inputsProblems")
        col.addWidget(self.problems)
        rule_row = QGridLayout()
        self.rule = QComboBox()
        self.rule.setObjectName("developedRule")
        for rule in DEVELOPED_RULES:
            self.rule.addItem(RULE_WORDS[rule], rule)
        self.rule.activated.connect(self._rule)
        grid_row(rule_row, 0, "Developed ranges from the data: ", self.rule,
                 self.fields.add("fit.developed_range", self.rule, "Developed range rule"))
        col.addLayout(rule_row)
        self.empty = note("Tick the predictors on the Data page first.", "inputsEmpty")
        col.addWidget(self.empty)
        self.card_box = QVBoxLayout()
        col.addLayout(self.card_box)
        col.addWidget(self._interactions())
        col.addStretch(1)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(0, 0, 0, 0)
        self.scroller = page_scroll(inner, "inputsScroll")
        outer.addWidget(self.scroller)

    # -- fit or import ----------------------------------------------------------------------------

    def _mode_box(self) -> QWidget:
        holder = QWidget()
        row = QHBoxLayout(holder)
        row.setContentsMargins(0, 0, 0, 0)
        self.modes = QButtonGroup(self)
        self.mode_buttons: dict[str, QRadioButton] = {}
        for k, mode in enumerate(MODES):
            button = QRadioButton(MODE_WORDS[mode])
            button.setObjectName(f"mode_{mode}")
            self.modes.addButton(button, k)
            self.mode_buttons[mode] = button
            row.addWidget(button)
        row.addStretch(1)
        self.modes.idClicked.connect(lambda k: self._mode(MODES[k]))
        return holder

    def _import_box(self) -> QWidget:
        holder = QWidget()
        grid = QGridLayout(holder)
        grid.setContentsMargins(0, 0, 0, 0)
        self.source = PathField("importSource", "Model file", title="The model to import",
                                filter_text="Model files (*.csv *.pmml *.xml);;All files (*)")
        self.vectors = PathField("importVectors", "Test-vector file",
                                 title="Test vectors (one column per input id, and risk)",
                                 filter_text="Data files (*.csv *.xlsx);;All files (*)")
        self.description = PathField("importDescription", "Inputs description file",
                                     title="An inputs description (TOML)",
                                     filter_text="TOML files (*.toml);;All files (*)")
        self.pmml_event = QLineEdit()
        self.pmml_event.textEdited.connect(self._pmml_event)
        row = 0
        for key, text, widget, attr in (
                ("import.source", "&Model file", self.source, "source"),
                ("import.vectors", "&Test vectors (the original software's risks; at least 5 "
                 "rows)", self.vectors, "vectors"),
                ("import.description", "Or an existing inputs &description (TOML)",
                 self.description, "description")):
            assert isinstance(widget, PathField)
            widget.chosen.connect(lambda p, a=attr: self._import_path(a, p))
            row = grid_row(grid, row, text, widget, self.fields.add(key, widget.edit))
        grid_row(grid, row, "PMML target value meaning the &event", self.pmml_event,
                 self.fields.add("import.pmml_event", self.pmml_event, "PMML event value"))
        return holder

    def _mode(self, mode: str) -> None:
        self.host.ws.source.mode = mode
        self.import_box.setVisible(mode != "fit")
        self.pmml_event.setEnabled(mode == "pmml")
        self.host.changed()

    def _import_path(self, attr: str, path: Path | None) -> None:
        setattr(self.host.ws.source, attr, path)
        self.host.changed()

    def _pmml_event(self, text: str) -> None:
        self.host.ws.source.pmml_event = text
        self.host.changed()

    def _rule(self, index: int) -> None:
        self.host.ws.inputs.developed_rule = self.rule.itemData(index)
        self.host.changed()

    # -- products of two inputs -----------------------------------------------------------------

    def _interactions(self) -> QWidget:
        holder = QWidget()
        col = QVBoxLayout(holder)
        col.setContentsMargins(0, 0, 0, 0)
        col.addWidget(section("Products of two inputs (optional)"))
        row = QHBoxLayout()
        self.left, self.right = QComboBox(), QComboBox()
        self.left.setObjectName("interactionLeft")
        self.left.setAccessibleName("First input of a product")
        self.right.setObjectName("interactionRight")
        self.right.setAccessibleName("Second input of a product")
        add = QPushButton("Add &product")
        add.setObjectName("interactionAdd")
        add.clicked.connect(self._add_interaction)
        for w in (self.left, self.right, add):
            row.addWidget(w)
        row.addStretch(1)
        col.addLayout(row)
        self.interaction_list = QVBoxLayout()
        col.addLayout(self.interaction_list)
        col.addWidget(self.fields.add("interactions", None))
        return holder

    def _add_interaction(self) -> None:
        pair = (self.left.currentData(), self.right.currentData())
        if None not in pair:
            self.host.ws.inputs.interactions.append(pair)
            self.host.changed(structure=True)

    def _remove_interaction(self, k: int) -> None:
        del self.host.ws.inputs.interactions[k]
        self.host.changed(structure=True)

    # -- showing ----------------------------------------------------------------------------------

    def refresh(self) -> None:
        """Rebuild the cards from the drafts (after a structural change)."""
        ws = self.host.ws
        self.mode_buttons[ws.source.mode].setChecked(True)
        self.import_box.setVisible(ws.source.importing)
        self.pmml_event.setEnabled(ws.source.mode == "pmml")
        for field, attr in ((self.source, "source"), (self.vectors, "vectors"),
                            (self.description, "description")):
            field.set_path(getattr(ws.source, attr))
        if self.pmml_event.text() != ws.source.pmml_event:
            self.pmml_event.setText(ws.source.pmml_event)
        self.rule.setCurrentIndex(max(0, self.rule.findData(ws.inputs.developed_rule)))
        for card in self.cards:
            self.card_box.removeWidget(card)
            drop(card)
        self.fields.remove_prefix("inputs[")
        self.cards = [InputCard(k, d, ws.data.columns, self.fields, changed=self.host.changed,
                                move=self._move, developed=ws.inputs.developed_shown)
                      for k, d in enumerate(ws.inputs.drafts)]
        for card in self.cards:
            self.card_box.addWidget(card)
        self.empty.setVisible(not self.cards)
        self._refresh_interactions()

    def _refresh_interactions(self) -> None:
        ids = self.host.ws.inputs.ids
        for combo in (self.left, self.right):
            combo.clear()
            for input_id in ids:
                combo.addItem(input_id, input_id)
        clear_layout(self.interaction_list)
        for k, (a, b) in enumerate(self.host.ws.inputs.interactions):
            button = QPushButton(f"Remove product {a} × {b}")
            button.setObjectName(f"interactionRemove_{k}")
            button.clicked.connect(lambda _=False, k=k: self._remove_interaction(k))
            self.interaction_list.addWidget(button)

    def _move(self, index: int, step: int) -> None:
        new = self.host.ws.inputs.move(index, step)
        self.host.changed(structure=True)
        if 0 <= new < len(self.cards):
            self.scroller.ensureWidgetVisible(self.cards[new])
            self.cards[new].edits["label"].setFocus()

    def refresh_developed(self) -> None:
        for card in self.cards:
            card.refresh_developed()

    def show_problems(self, problems: list[str]) -> None:
        routed = route(problems, self.fields.keys, self.host.ws.inputs.ids)
        for key, texts in self.host.ws.source.problems().items():
            routed.setdefault(key, []).extend(texts)
        self.fields.show(routed)
        self.problems.show_problems(routed.get("", []))
