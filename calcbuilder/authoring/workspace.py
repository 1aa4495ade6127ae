"""The authoring workspace: the six steps together, the recipe they make, and what is out of date.

:class:`Workspace` owns one state object per step and composes the recipe
from them (:meth:`Workspace.recipe_dict`); :meth:`Recipe.from_dict
<calcbuilder.evidence.Recipe.from_dict>` judges it and its problems are handed
to the step and the field they are about (:meth:`Workspace.problems_by_step`).
Long work is described as stage specs (:mod:`calcbuilder.authoring.pipeline`)
which the caller runs -- in a worker thread in the desktop workspace.

Texts before numbers: a recipe needs the About and Decision texts, which
come after fitting in the steps. Until they are complete, fitting uses
clearly marked draft texts (:data:`DRAFT_ABOUT`, :data:`DRAFT_DECISION`); the
numbers do not depend on them, and publishing runs the recorded stages again
with the final recipe so that the published file is exactly what the command
line makes from that recipe.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..errors import CalcbuilderError
from ..evidence import DataError, Prepared, Recipe, RecipeError, prepare
from .about_step import AboutStep, default_cautions
from .assess_step import AssessStep
from .data_step import DataStep
from .decision_step import DecisionStep
from .import_step import ImportStep
from .inputs_step import InputsStep
from .problems import split_problem
from .publish_step import PublishStep
from .toml_text import dumps_toml

__all__ = ["DRAFT_ABOUT", "DRAFT_DECISION", "STEPS", "STEP_TITLES", "DataCheck", "Workspace"]

STEPS = ("data", "inputs", "assess", "about", "decision", "publish")
STEP_TITLES = {"data": "Data", "inputs": "Inputs", "assess": "Fit and assess",
               "about": "About and cautions", "decision": "Decision", "publish": "Publish"}
PROJECT_SUFFIX = ".cbproject.json"
DRAFT_ABOUT: dict[str, Any] = {
    "title": "Draft (texts not written yet)", "version": "0.0.1",
    "intended_use": "Draft made while the About texts are unfinished; not for use.",
    "population": "Not described yet.", "outcome": "Not described yet.",
    "horizon": "Not described yet."}
DRAFT_DECISION: dict[str, Any] = {
    "default_threshold": 0.1, "reasonable_range": [0.05, 0.3],
    "rationale": "Draft values while the Decision step is unfinished."}
_TEXT_SECTIONS = ("about", "decision", "cautions")


def _step_of(path: str) -> str:
    top = path.split(".", 1)[0].split("[", 1)[0]
    if top in ("inputs", "interactions") or path == "fit.developed_range":
        return "inputs"
    if path == "fit.firth":
        return "assess"
    if top in ("about", "cautions"):
        return "about"
    if top == "decision":
        return "decision"
    return "data"


def _digest(value: Any) -> str:
    text = json.dumps(value, sort_keys=True, default=str, ensure_ascii=False)
    return hashlib.sha256(text.encode()).hexdigest()


@dataclass(frozen=True)
class DataCheck:
    """The data checked against the recipe as it stands (``calcbuilder fit``'s first step).

    ``prepared`` is None when the check could not run: ``waiting`` says what is
    missing, or ``problems`` lists what is wrong with the data.
    """

    prepared: Prepared | None = None
    problems: tuple[str, ...] = ()
    waiting: str = ""


@dataclass
class Workspace:
    """All six steps, the project file they are saved in, and the unsaved-changes count."""

    data: DataStep = field(default_factory=DataStep)
    inputs: InputsStep = field(default_factory=InputsStep)
    source: ImportStep = field(default_factory=ImportStep)
    assess: AssessStep = field(default_factory=AssessStep)
    about: AboutStep = field(default_factory=AboutStep)
    decision: DecisionStep = field(default_factory=DecisionStep)
    publish: PublishStep = field(default_factory=PublishStep)
    project_path: Path | None = None
    revision: int = 0
    saved_revision: int = 0

    # -- changes ------------------------------------------------------------------------------

    def touch(self) -> None:
        """Record a change (views call this after every edit)."""
        self.revision += 1

    @property
    def dirty(self) -> bool:
        """True when there are changes not saved in the project file."""
        return self.revision != self.saved_revision

    def mark_saved(self) -> None:
        self.saved_revision = self.revision

    # -- the recipe ---------------------------------------------------------------------------

    def recipe_dict(self) -> dict[str, Any]:
        """The recipe made by the steps, as :meth:`Recipe.from_dict` reads it."""
        out: dict[str, Any] = {"recipe_version": 1}
        outcome = self.data.outcome_dict()
        if outcome is not None:
            out["outcome"] = outcome
        out["inputs"] = self.inputs.recipe_inputs()
        if self.inputs.interactions:
            out["interactions"] = self.inputs.recipe_interactions()
        out["about"] = self.about.about_dict()
        out["decision"] = self.decision.decision_dict()
        out["cautions"] = self.about.cautions_list()
        fit: dict[str, Any] = {"firth": self.assess.firth,
                               "developed_range": self.inputs.developed_rule}
        r2 = self.data.r2_value()
        if r2 is not None:
            fit["anticipated_r2_cs"] = r2
        out["fit"] = fit
        dataset = self.data.dataset_dict()
        if dataset:
            out["dataset"] = dataset
        return out

    def recipe_problems(self) -> list[str]:
        """Every problem of the recipe (``"key.path: message"``); empty when it is usable."""
        try:
            Recipe.from_dict(self.recipe_dict())
        except RecipeError as exc:
            return exc.problems or [exc.heading]
        return []

    def problems_by_step(self, problems: list[str] | None = None) -> dict[str, list[str]]:
        """The recipe's problems split by the step whose fields they are about."""
        out: dict[str, list[str]] = {s: [] for s in STEPS}
        for text in self.recipe_problems() if problems is None else problems:
            out[_step_of(split_problem(text)[0])].append(text)
        return out

    def fitting_recipe(self) -> tuple[Recipe | None, list[str], bool]:
        """The recipe to fit with: (recipe or None, its problems, draft texts used).

        When only About, Decision or cautions have problems, those sections are
        replaced by the draft texts and the recipe is usable for fitting.
        """
        raw = self.recipe_dict()
        problems = self.recipe_problems()
        if not problems:
            return Recipe.from_dict(raw), [], False
        bad = {split_problem(p)[0].split(".", 1)[0].split("[", 1)[0] for p in problems}
        if not bad <= set(_TEXT_SECTIONS):
            return None, problems, False
        if "about" in bad:
            raw["about"] = {**DRAFT_ABOUT, "synthetic": self.about.synthetic,
                            "review_by": (dt.date.today() + dt.timedelta(days=365)).isoformat()}
        if "decision" in bad:
            raw["decision"] = dict(DRAFT_DECISION)
        if "cautions" in bad:
            raw["cautions"] = default_cautions(self.about.synthetic)
        try:
            return Recipe.from_dict(raw), problems, True
        except RecipeError as exc:  # defensive: the drafts are valid
            return None, exc.problems, False

    # -- the data check -------------------------------------------------------------------------

    def data_check(self) -> DataCheck:
        """:func:`calcbuilder.evidence.prepare` on the data with the recipe as it stands.

        Also refreshes the developed ranges the Inputs step shows.
        """
        if not self.data.loaded:
            return DataCheck(waiting="Open a data file.")
        if not self.data.outcome_column:
            return DataCheck(waiting="Choose the outcome column and the value meaning the event.")
        if not self.inputs.drafts:
            return DataCheck(waiting="Choose at least one predictor.")
        recipe, problems, _ = self.fitting_recipe()
        if recipe is None:
            n = len(problems)
            return DataCheck(problems=tuple(p for p in problems if _step_of(
                split_problem(p)[0]) == "data"),
                waiting=f"The recipe has {n} problem{'s' if n != 1 else ''}: see the steps "
                        "marked in the list.")
        assert self.data.table is not None
        try:
            prepared = prepare(self.data.table, recipe, complete_case=self.data.complete_case)
        except (DataError, RecipeError) as exc:
            return DataCheck(problems=tuple(exc.problems or [exc.heading]))
        self.inputs.data_ranges = dict(prepared.developed)
        return DataCheck(prepared=prepared)

    # -- long work ------------------------------------------------------------------------------

    def _common_basis(self) -> dict[str, Any]:
        a = self.assess
        return {"data": self.data.sha256, "complete_case": self.data.complete_case,
                "seed": a.seed, "band_boot": a.band_boot, "source": self.source.to_dict(None)}

    def bases(self) -> tuple[str, str]:
        """(full basis, model basis) of the workspace as it stands (see :class:`AssessStep`)."""
        recipe, _, _ = self.fitting_recipe()
        raw = recipe.to_dict() if recipe is not None else self.recipe_dict()
        model = {k: v for k, v in raw.items() if k not in (*_TEXT_SECTIONS, "dataset")}
        common = self._common_basis()
        return _digest({**common, "recipe": raw}), _digest({**common, "recipe": model})

    def state(self) -> str:
        """:meth:`AssessStep.state` against the workspace as it stands."""
        basis, model_basis = self.bases()
        return self.assess.state(basis, model_basis)

    def sibling(self, ending: str) -> Path:
        """``<project name><ending>`` beside the project file (the project must be saved)."""
        if self.project_path is None:
            raise CalcbuilderError("save the project first: the recipe and the inputs "
                                   "description are written beside the project file")
        name = self.project_path.name.removesuffix(PROJECT_SUFFIX).removesuffix(".json")
        return self.project_path.with_name(name + ending)

    def write_recipe(self, recipe: Recipe) -> Path:
        """Write the recipe beside the project (``calcbuilder fit --recipe`` reads it)."""
        from ..calc.atomic import atomic_write_text

        path = self.sibling(".recipe.toml")
        header = ["Fitting recipe written by the calcbuilder authoring workspace.",
                  f"Fit again with: calcbuilder fit DATA --recipe {path.name} -o OUT.calc.json"]
        if recipe.about.get("synthetic"):
            header.insert(0, "SYNTHETIC DEMONSTRATION MATERIAL - not for clinical use.")
        atomic_write_text(path, dumps_toml(recipe.to_dict(), header=header))
        return path

    def first_spec(self, *, final: bool = False) -> tuple[dict[str, Any], bool]:
        """The fit (or import) stage spec, writing the recipe or description file first.

        Returns the spec and whether draft texts were used. ``final`` refuses
        draft texts (publishing).

        Raises
        ------
        RecipeError
            The recipe (or, with ``final``, any text) has problems.
        CalcbuilderError
            The data or the model source is missing, or the project is not saved.
        """
        if self.source.importing:
            return self._import_spec(final=final), False
        recipe, problems, draft = self.fitting_recipe()
        if recipe is None or (final and problems):
            raise RecipeError("the recipe cannot be used yet", problems)
        if self.data.path is None:
            raise CalcbuilderError("open the development data first (step 1)")
        path = self.write_recipe(recipe)
        return {"stage": "fit", "data": str(self.data.path), "recipe": str(path),
                "complete_case": self.data.complete_case}, draft

    def _import_spec(self, *, final: bool) -> dict[str, Any]:
        from ..calc.atomic import atomic_write_text

        src = self.source
        missing = src.problems()
        if missing:
            raise CalcbuilderError("; ".join(m for ms in missing.values() for m in ms))
        desc = src.description
        if desc is None:
            problems = [p for p in self.recipe_problems()
                        if _step_of(split_problem(p)[0]) in ("about", "decision")]
            if final and problems:
                raise RecipeError("the texts are not complete yet", problems)
            raw = src.description_dict(self.inputs.drafts, self.about.about_dict(),
                                       self.decision.decision_dict(), self.about.cautions_list())
            desc = self.sibling(".inputs.toml")
            atomic_write_text(desc, dumps_toml(raw, header=[
                "Inputs description written by the calcbuilder authoring workspace.",
                f"Import again with: calcbuilder import {src.mode} SOURCE --inputs {desc.name}"]))
        return {"stage": "import", "kind": src.mode, "source": str(src.source),
                "inputs": str(desc)}

    def stage_spec(self, kind: str, index: int = 0) -> dict[str, Any]:
        """The spec of a later stage: ``bootstrap``, ``external`` (by index), ``recalibrate``
        or ``compare``."""
        a = self.assess
        if kind == "bootstrap":
            if self.data.path is None:
                raise CalcbuilderError("open the development data first (step 1)")
            return {"stage": "bootstrap", "data": str(self.data.path), "n_boot": int(a.n_boot)}
        if kind == "external":
            ext = a.externals[index]
            if ext.path is None:
                raise CalcbuilderError("choose the external data file")
            return {"stage": "external", "data": str(ext.path), "label": ext.label.strip(),
                    "outcome": ext.outcome, "event": ext.event}
        if kind == "recalibrate":
            if a.recal_path is None:
                raise CalcbuilderError("choose the data of the local population")
            return {"stage": "recalibrate", "data": str(a.recal_path), "method": a.recal_method,
                    "label": a.recal_label}
        if kind == "compare":
            data = a.compare_path or self.data.path
            if a.reference_path is None or data is None:
                raise CalcbuilderError("choose the reference calculator file and the data")
            return {"stage": "compare", "reference": str(a.reference_path), "data": str(data),
                    "cuts": a.compare_cuts}
        raise ValueError(kind)

    def publish_plan(self) -> list[dict[str, Any]] | None:
        """None when the results can be published as they are; else the stages to run again
        with the final recipe (the recorded ones, with a fresh first stage)."""
        if self.assess.document is None:
            raise CalcbuilderError("fit the model (or import one) in step 3 first")
        if self.state() == "current":
            return None
        first, _ = self.first_spec(final=True)
        return [first, *self.assess.stages[1:]]

    # -- project file ---------------------------------------------------------------------------

    def to_dict(self, base: Path | None) -> dict[str, Any]:
        return {"data": self.data.to_dict(base), "inputs": self.inputs.to_dict(),
                "source": self.source.to_dict(base), "assess": self.assess.to_dict(base),
                "about": self.about.to_dict(), "decision": self.decision.to_dict(),
                "publish": self.publish.to_dict(base)}

    @classmethod
    def from_dict(cls, raw: dict[str, Any], base: Path | None) -> Workspace:
        return cls(data=DataStep.from_dict(raw.get("data") or {}, base),
                   inputs=InputsStep.from_dict(raw.get("inputs") or {}),
                   source=ImportStep.from_dict(raw.get("source") or {}, base),
                   assess=AssessStep.from_dict(raw.get("assess") or {}, base),
                   about=AboutStep.from_dict(raw.get("about") or {}),
                   decision=DecisionStep.from_dict(raw.get("decision") or {}),
                   publish=PublishStep.from_dict(raw.get("publish") or {}, base))
