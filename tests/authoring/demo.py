"""The synthetic demo cohort and the choices that make the example recipe, for the workspace tests.

:data:`CHOICES` describes, field by field, what an author types into the
workspace to get ``templates/recipe-example.toml`` (the recipe the command-line
tests fit); :func:`fill_workspace` applies them to the state objects directly,
the Qt tests type them into the widgets. Everything here is synthetic.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pandas as pd

from calcbuilder.authoring import AltUnitDraft, Workspace
from calcbuilder.demo.scenario import make_cohort

EXAMPLE = Path(__file__).resolve().parents[2] / "templates" / "recipe-example.toml"
PREDICTORS = ["age", "cog_errors", "sensory", "alcohol", "asa", "medicines", "sodium",
              "creatinine", "anaesthesia"]
# id -> the draft fields typed (as text), beyond what the workspace guesses from the data
INPUTS: dict[str, dict[str, Any]] = {
    "age": {"label": "Age", "unit": "years", "limit_low": "18", "limit_high": "110",
            "decimals": "0", "group": "Patient", "help": "Age on the day of surgery.",
            "transform": "rcs", "knots": "4"},
    "cog_errors": {"label": "Cognitive screen errors", "limit_low": "0", "limit_high": "10",
                   "decimals": "0", "group": "Patient",
                   "help": "Errors on the 10-item pre-operative cognitive screen (0 to 10).",
                   "transform": "linear"},
    "sensory": {"label": "Hearing or vision impairment", "group": "Patient",
                "help": "Hearing or vision impairment not corrected by aids."},
    "alcohol": {"label": "Heavy alcohol use", "group": "Patient"},
    "asa": {"label": "ASA physical status", "group": "Patient", "transform": "levels",
            "reference": "I-II",
            "choices": [("I-II", "ASA I or II"), ("III", "ASA III"), ("IV", "ASA IV")]},
    "medicines": {"label": "Regular daily medicines", "unit": "medicines", "limit_low": "0",
                  "limit_high": "40", "decimals": "0", "group": "Patient"},
    "sodium": {"label": "Serum sodium", "unit": "mmol/L", "limit_low": "100",
               "limit_high": "180", "decimals": "0", "group": "Laboratory",
               "help": "Most recent pre-operative value."},
    "creatinine": {"label": "Serum creatinine", "unit": "µmol/L", "limit_low": "10",
                   "limit_high": "2000", "decimals": "0", "group": "Laboratory",
                   "help": "Most recent pre-operative value.",
                   "alt_units": [AltUnitDraft("mg/dL", "88.42")]},
    "anaesthesia": {"label": "Planned anaesthesia", "group": "Surgery", "transform": "levels",
                    "reference": "neuraxial",
                    "choices": [("neuraxial", "Spinal or epidural"), ("general", "General")]},
}
ABOUT: dict[str, Any] = {
    "title": "Delirium after joint replacement (synthetic demo)",
    "version": "0.1.0",
    "intended_use": "Demonstrates how calcbuilder estimates the risk of delirium after elective "
                    "hip or knee replacement; synthetic, not for clinical use.",
    "population": "Adults aged 65 or over having elective hip or knee replacement (synthetic "
                  "Demo Hospital A cohort).",
    "outcome": "Delirium (an acute disturbance of attention and awareness)",
    "horizon": "within 7 days after surgery",
    "exclusions": "Not for use in any real patient: the data and the model are synthetic.\n"
                  "Not for use in emergency surgery or hip fracture.",
    "authors": "calcbuilder demo",
    "organisation": "calcbuilder (synthetic demonstration)",
    "review_by": "2027-12-31",
}
DECISION = {"default_threshold": "0.1", "range_low": "0.05", "range_high": "0.3",
            "rationale": "Synthetic example: a delirium-prevention bundle is low-risk and cheap, "
                         "so a low threshold is reasonable; above 30% nearly everyone would be "
                         "offered it anyway."}
DATASET = {"dataset_name": "Demo Hospital A (synthetic)", "dataset_period": "simulated",
           "dataset_population": "Synthetic adults aged 65+ having elective hip or knee "
                                 "replacement."}


def write_cohorts(folder: Path) -> dict[str, Path]:
    """The synthetic development and external cohorts as CSV files."""
    dev, ext = folder / "development.csv", folder / "external.csv"
    pd.DataFrame(make_cohort("development").clean).to_csv(dev, index=False)
    pd.DataFrame(make_cohort("external").clean).to_csv(ext, index=False)
    return {"dev": dev, "ext": ext}


def fill_workspace(ws: Workspace, dev: Path, *, seed: int = 7, band_boot: int = 20,
                   n_boot: int = 10) -> Workspace:
    """Make the example recipe's choices in the state objects (no Qt)."""
    ws.data.open(dev)
    ws.data.choose_outcome("delirium")
    for key, value in DATASET.items():
        setattr(ws.data, key, value)
    ws.data.predictors = list(PREDICTORS)
    ws.inputs.sync_columns(ws.data.predictors, {s.name: s for s in ws.data.summaries()})
    for draft in ws.inputs.drafts:
        for key, value in INPUTS[draft.id].items():
            setattr(draft, key, value)
    for key, value in ABOUT.items():
        setattr(ws.about, key, value)
    ws.about.set_synthetic(True)
    for key, value in DECISION.items():
        setattr(ws.decision, key, value)
    ws.assess.seed, ws.assess.band_boot, ws.assess.n_boot = str(seed), str(band_boot), str(n_boot)
    ws.touch()
    return ws
