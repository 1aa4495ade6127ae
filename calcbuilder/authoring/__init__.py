"""The authoring workspace's state, without Qt: one plain-Python object per step.

The desktop workspace (:mod:`calcbuilder.gui.authoring`) is a thin view over
these objects, and the tests drive them directly. Every number comes from the
same functions the command line calls (:mod:`calcbuilder.evidence`,
:mod:`calcbuilder.calc`); nothing here computes statistics of its own.

* :class:`Workspace` -- the steps together, the recipe they make, staleness;
* :class:`DataStep`, :class:`InputsStep` (+ :class:`ImportStep`),
  :class:`AssessStep`, :class:`AboutStep`, :class:`DecisionStep`,
  :class:`PublishStep` -- one per step;
* :mod:`.pipeline` -- the long stages as plain functions (run in a worker);
* :mod:`.problems` -- the pipeline's problems routed to their fields;
* :mod:`.project` -- the ``*.cbproject.json`` project file.
"""

from .about_step import AboutStep
from .assess_step import AssessStep, ExternalData
from .data_step import DataStep
from .decision_step import DecisionStep
from .import_step import ImportStep
from .inputs_step import AltUnitDraft, InputDraft, InputsStep
from .project import OpenedProject, ProjectError, load_project, save_project
from .publish_step import PublishStep
from .workspace import STEP_TITLES, STEPS, DataCheck, Workspace

__all__ = [
    "STEPS",
    "STEP_TITLES",
    "AboutStep",
    "AltUnitDraft",
    "AssessStep",
    "DataCheck",
    "DataStep",
    "DecisionStep",
    "ExternalData",
    "ImportStep",
    "InputDraft",
    "InputsStep",
    "OpenedProject",
    "ProjectError",
    "PublishStep",
    "Workspace",
    "load_project",
    "save_project",
]
