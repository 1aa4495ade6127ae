"""The one-command demo as library code: from synthetic cohorts to a signed calculator.

SYNTHETIC, NOT FOR CLINICAL USE. :func:`run_demo` goes through the whole
authoring job on the demo scenario (:mod:`calcbuilder.demo.scenario`) with the
library's public functions, writing into one folder under fixed names:

1. ``cohort-development.csv`` (Demo Hospital A, raw: with its missing values
   and its implausible entries) and ``cohort-external.csv`` (Demo Hospital B,
   raw as well);
2. a first fit on the raw development file with the complete-case option; it is
   refused, and the refusal messages are kept (two creatinine values that look
   like mg/dL, one sodium with a misplaced decimal point);
3. ``cohort-development-cleaned.csv``: a copy in which each value outside its
   input's hard limits is converted when it is plausible in an alternative unit
   of that input (what the "check the unit" message advises) and emptied
   otherwise; the fit then runs on it with the complete-case option, leaving
   out the rows with a missing value (recorded in the evidence);
4. bootstrap optimism correction (the recipe re-run on every resample);
5. external validation on Demo Hospital B (refused and incomplete rows left
   out and counted);
6. intercept recalibration for Demo Hospital B;
7. comparison with the reference model "in current use" on Hospital B
   (``reference.calc.json``; :mod:`calcbuilder.demo.reference`), stored as the
   reclassification block of the recalibrated evidence set;
8. a fresh, unencrypted **demo** key pair (``demo-key.key``, ``demo-key.pub``)
   and the signed calculator ``demo.calc.json``;
9. the evidence report ``demo-evidence.pdf`` and the risk sheet
   ``demo-sheet.pdf`` of a made-up patient.

The recipe is shipped as ``calcbuilder/demo/recipe.toml``; a copy with the
review-by date set a year ahead is written as ``demo-recipe.toml``.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import re
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from ..calc.atomic import atomic_write_bytes, atomic_write_text
from ..calc.document import Calculator, LoadedCalculator, load_calculator, save_calculator
from ..calc.jsonio import dumps_pretty
from ..calc.keys import TrustedKeys, generate_private_key, key_fingerprint, public_key_pem
from ..calc.signing import sign_document
from ..evidence import load_recipe
from ..evidence.errors import DataError
from .cohort_files import clean_columns, write_csv
from .reference import reference_document
from .scenario import DEMO_SEED, make_cohort

__all__ = ["DEFAULT_BOOTSTRAP", "DEMO_PATIENT", "FILE_NAMES", "RECIPE_PATH", "DemoResult",
           "MadeFile", "run_demo"]

RECIPE_PATH = Path(__file__).with_name("recipe.toml")
DEFAULT_BOOTSTRAP = 200
HOSPITAL_B = "Demo Hospital B (synthetic)"
FILE_NAMES = {
    "calculator": "demo.calc.json", "public_key": "demo-key.pub",
    "private_key": "demo-key.key", "report": "demo-evidence.pdf", "sheet": "demo-sheet.pdf",
    "development": "cohort-development.csv", "cleaned": "cohort-development-cleaned.csv",
    "external": "cohort-external.csv", "reference": "reference.calc.json",
    "recipe": "demo-recipe.toml",
}
"""Fixed file names inside the output folder, by role."""
DEMO_PATIENT: dict[str, Any] = {
    "age": "77", "cog_errors": "2", "sensory": True, "alcohol": False, "asa": "III",
    "medicines": "7", "sodium": "138", "creatinine": ("1.1", "mg/dL"),
    "anaesthesia": "general"}
"""A made-up patient for the sample risk sheet (values as typed; creatinine in mg/dL)."""
PATIENT_REF = "SYNTHETIC DEMO PATIENT (made up)"
KEY_NOTE = (b"calcbuilder DEMO signing key, made by 'calcbuilder demo' for synthetic demo "
            b"calculators only.\nIt is NOT protected by a passphrase. Never use it, or trust "
            b"its public key, for anything else.\n\n")
KEY_LABEL = "calcbuilder demo key (synthetic demo only, not for clinical use)"

Step = Callable[[str], None]
Progress = Callable[[int, int], Any]


@dataclass(frozen=True)
class MadeFile:
    """One file of the demo: its role, name, description and fingerprints.

    ``sha256`` is the SHA-256 of the file's bytes (None when it was not made);
    ``fingerprint`` is the calculator fingerprint of a calculator file or the
    key fingerprint of a key file.
    """

    role: str
    name: str
    what: str
    sha256: str | None
    fingerprint: str | None = None

    @property
    def made(self) -> bool:
        """True when the file was written."""
        return self.sha256 is not None


@dataclass
class DemoResult:
    """What :func:`run_demo` made and found (everything synthetic)."""

    out: Path
    seed: int
    n_boot: int
    files: list[MadeFile] = field(default_factory=list)
    refusals: list[str] = field(default_factory=list)
    cleaning: list[str] = field(default_factory=list)
    numbers: dict[str, Any] = field(default_factory=dict)
    missing: list[str] = field(default_factory=list)
    signature_state: str = ""
    seconds: float = 0.0

    def file(self, role: str) -> MadeFile:
        """The file with this role (see :data:`FILE_NAMES`)."""
        return next(f for f in self.files if f.role == role)

    def to_dict(self) -> dict[str, Any]:
        """Everything as JSON-ready values."""
        return {
            "synthetic": True, "not_for_clinical_use": True, "out": str(self.out),
            "seed": self.seed, "bootstrap": self.n_boot, "seconds": round(self.seconds, 2),
            "signature_state": self.signature_state,
            "files": [{"role": f.role, "name": f.name, "path": str(self.out / f.name),
                       "what": f.what, "made": f.made, "sha256": f.sha256,
                       "fingerprint": f.fingerprint} for f in self.files],
            "refused_on_raw_data": self.refusals, "cleaning": self.cleaning,
            "numbers": self.numbers, "missing": self.missing,
        }


@dataclass(frozen=True)
class _Run:
    """One demo run: where it writes, what it records, its settings and callbacks."""

    out: Path
    result: DemoResult
    seed: int
    n_boot: int
    progress: Progress | None
    step: Step

    def path(self, role: str) -> Path:
        """The file with this role."""
        return self.out / FILE_NAMES[role]


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _recipe_copy(path: Path, today: dt.date) -> None:
    text = RECIPE_PATH.read_text(encoding="utf-8")
    review = today.replace(year=today.year + 1) if not (today.month == 2 and today.day == 29) \
        else today + dt.timedelta(days=365)
    text, n = re.subn(r"(?m)^review_by = \S+", f"review_by = {review.isoformat()}", text)
    if n != 1:
        raise DataError(f"{RECIPE_PATH}: expected one 'review_by = ...' line, found {n}")
    atomic_write_text(path, text)


def _first_fit(run: _Run) -> list[str]:
    """The fit on the raw file; the refusals it reports (none expected to pass)."""
    from ..evidence.fit import fit_calculator

    run.step("Fitting on the raw development file (complete case): expecting refusals")
    try:
        fit_calculator(run.path("development"), run.path("recipe"), complete_case=True,
                       band_boot=0)
    except DataError as exc:
        return list(exc.problems) or [str(exc)]
    return []


def _cohorts(run: _Run) -> None:
    run.step("Generating the synthetic cohorts (Demo Hospital A and B)")
    development = make_cohort("development", run.seed).raw
    write_csv(run.path("development"), development)
    write_csv(run.path("external"), make_cohort("external", run.seed).raw)
    _recipe_copy(run.path("recipe"), dt.date.today())
    run.result.refusals = _first_fit(run)
    cleaned, run.result.cleaning = clean_columns(development, load_recipe(run.path("recipe")))
    write_csv(run.path("cleaned"), cleaned)


def _develop(run: _Run) -> Calculator:
    """Fit, bootstrap, external validation and recalibration; the updated calculator."""
    from ..evidence.assess import assess_bootstrap, assess_external
    from ..evidence.fit import fit_calculator
    from ..evidence.recalibrate import recalibrate
    from ..evidence.scoring_data import load_scored_data, resolve_outcome

    cleaned, external, seed = run.path("cleaned"), run.path("external"), run.seed
    run.step("Fitting the model on the cleaned copy (complete case; spline for age)")
    fitted = fit_calculator(cleaned, run.path("recipe"), complete_case=True, seed=seed)
    run.step(f"Bootstrap optimism correction ({run.n_boot} resamples)")
    boot = assess_bootstrap(fitted.calculator, cleaned, n_boot=run.n_boot, seed=seed,
                            progress=run.progress)
    run.step("External validation on Demo Hospital B")
    ext = assess_external(boot.calculator, external, label=HOSPITAL_B, drop_refused=True,
                          seed=seed, population="Synthetic adults aged 65+ having elective "
                          "hip or knee replacement at a second hospital (older, sicker case-mix)",
                          period="simulated")
    run.step("Recalibrating the intercept for Demo Hospital B")
    data = load_scored_data([ext.calculator], external,
                            resolve_outcome(None, None, [ext.calculator]))
    recal = recalibrate(ext.calculator, data, "intercept", name=HOSPITAL_B, seed=seed)
    s = fitted.prepared.summary
    run.result.numbers.update({
        "development_rows_read": s.rows_read, "development_rows_used": s.rows_used,
        "development_rows_left_out": s.rows_dropped, "development_events": s.events,
        "external_rows_read": ext.rows.read, "external_rows_used": ext.rows.used,
        "external_rows_left_out": ext.rows.dropped,
        "auc_apparent": _value(boot.calculator, "apparent", "auc"),
        "auc_optimism_corrected": _value(boot.calculator, "bootstrap", "auc"),
        "auc_external": _value(ext.calculator, "external", "auc"),
        "recalibration_intercept": recal.fit.intercept,
        "external_before": recal.before.to_dict(), "external_after": recal.after.to_dict(),
    })
    return recal.calculator


def _value(calc: Calculator, kind: str, metric: str) -> float | None:
    for ev in calc.evidence:
        found = ev.metric(metric) if ev.kind == kind else None
        if found is not None:
            return None if found.get("value") is None else float(found["value"])
    return None


def _compare(run: _Run, calc: Calculator) -> Calculator:
    """Write the reference calculator, compare on Hospital B, store the comparison."""
    from ..evidence.compare import (
        compare_risks,
        comparison_thresholds,
        default_cuts,
        reclassification_block,
    )
    from ..evidence.scoring_data import load_scored_data, resolve_outcome

    run.step("Comparing with the reference model in current use (on Demo Hospital B)")
    ref = Calculator.from_dict(reference_document())
    save_calculator(ref, run.path("reference"))
    data = load_scored_data([calc, ref], run.path("external"),
                            resolve_outcome(None, None, [calc]))
    cuts = default_cuts(calc.decision) or (0.05, 0.15)
    compared = compare_risks(
        data.y, data.risks[0], data.risks[1], cuts=cuts,
        thresholds=comparison_thresholds(calc.decision),
        new_name=f"{calc.about.title} {calc.about.version}",
        ref_name=f"{ref.about.title} {ref.about.version}", ref_fingerprint=ref.fingerprint)
    k = int(np.argmin(np.abs(compared.thresholds - calc.decision.default_threshold)))
    run.result.numbers["comparison"] = {
        "auc_new": compared.auc.auc_a, "auc_reference": compared.auc.auc_b,
        "auc_difference": compared.auc.difference, "nri_total": compared.nri.total,
        "threshold": float(compared.thresholds[k]),
        "net_benefit_new": float(compared.nb_new[k]),
        "net_benefit_reference": float(compared.nb_ref[k]),
        "net_benefit_treat_all": float(compared.nb_treat_all[k])}
    return _publishable(calc, reclassification_block(compared))


def _publishable(calc: Calculator, block: dict[str, Any]) -> Calculator:
    """Attach the comparison to the recalibrated evidence set; say where the model is for."""
    payload = calc.payload()
    target = next(e for e in reversed(payload["evidence"]) if e["kind"] == "recalibrated")
    target["reclassification"] = {**block, "note": (
        "Compared on the Demo Hospital B rows after the intercept update, which was fitted on "
        "the same rows; calibration-in-the-large is right by construction there.")}
    target["notes"] = [*target.get("notes", []), "The reclassification block compares this "
                       "recalibrated model with the synthetic reference model in current use."]
    payload["about"]["population"] = (
        "Adults aged 65 or over having elective hip or knee replacement at Demo Hospital B "
        "(synthetic); developed on the synthetic Demo Hospital A cohort and recalibrated "
        "(intercept) for Hospital B")
    return Calculator.from_dict(payload)


def _sign(run: _Run, calc: Calculator) -> tuple[str, str]:
    """A fresh demo key pair and the signed file; (file fingerprint, key fingerprint)."""
    from cryptography.hazmat.primitives import serialization

    run.step("Signing with a fresh demo key (unencrypted, demo only)")
    key = generate_private_key()
    pem = key.private_bytes(serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
                            serialization.NoEncryption())
    atomic_write_bytes(run.path("private_key"), KEY_NOTE + pem, mode=0o600)
    atomic_write_bytes(run.path("public_key"), public_key_pem(key.public_key(), KEY_LABEL))
    atomic_write_text(run.path("calculator"), dumps_pretty(sign_document(calc.to_dict(), key)))
    return calc.fingerprint, key_fingerprint(key.public_key())


def _report(run: _Run, loaded: LoadedCalculator) -> None:
    run.step("Writing the evidence report")
    try:
        from ..reports.evidence_report import make_report
    except ImportError as exc:  # another part of calcbuilder still being written
        run.result.missing.append(f"{FILE_NAMES['report']}: the evidence report module is "
                                  f"not available ({exc}); everything else was made")
        return
    info = make_report(loaded, run.path("report"))
    run.result.numbers["report_pages"] = info.pages


def _sheet(run: _Run, loaded: LoadedCalculator) -> None:
    from ..clinic.session import ClinicSession
    from ..reports.sheet import make_sheet

    run.step("Writing the risk sheet of a made-up patient")
    session = ClinicSession(loaded)
    for input_id, value in DEMO_PATIENT.items():
        typed, unit = value if isinstance(value, tuple) else (value, None)
        session.set_unit(input_id, unit)
        session.set_value(input_id, typed)
    session.set_patient_ref(PATIENT_REF)
    info = make_sheet(session, run.path("sheet"))
    patient = session.result()
    run.result.numbers.update({"sheet_pages": info.pages, "sample_patient_risk": patient.risk,
                           "sample_patient_low": patient.low, "sample_patient_high": patient.high})


def _describe(out: Path, result: DemoResult, fps: dict[str, str]) -> None:
    what = {
        "calculator": "the signed calculator file (synthetic demo)",
        "public_key": "demo public key: trust it only to try the demo",
        "private_key": "demo PRIVATE key, unencrypted: demo use only",
        "report": "evidence report (PDF)", "sheet": "risk sheet of a made-up patient (1 page)",
        "development": "Demo Hospital A cohort, raw (with its defects)",
        "cleaned": "cleaned copy the model was fitted on",
        "external": "Demo Hospital B cohort, raw (external validation)",
        "reference": "reference model in current use (unsigned)",
        "recipe": "the fitting recipe used (review-by a year ahead)",
    }
    for role, name in FILE_NAMES.items():
        path = out / name
        result.files.append(MadeFile(role, name, what[role],
                                     _sha256(path) if path.exists() else None, fps.get(role)))


def run_demo(out: str | Path, *, seed: int = DEMO_SEED, n_boot: int = DEFAULT_BOOTSTRAP,
             progress: Progress | None = None, step: Step | None = None) -> DemoResult:
    """Run the whole synthetic demo into ``out`` (created if missing; files replaced).

    Parameters
    ----------
    out : str or Path
        Output folder; the files get the names of :data:`FILE_NAMES`.
    seed : int
        Seed of the cohorts, the bootstrap and the evidence bands.
    n_boot : int
        Bootstrap resamples of the optimism correction (default 200).
    progress : callable, optional
        ``progress(done, total)`` during the bootstrap.
    step : callable, optional
        Called with a sentence as each step starts.

    Returns
    -------
    DemoResult
    """
    started = time.perf_counter()
    say = step or (lambda _text: None)
    folder = Path(out)
    folder.mkdir(parents=True, exist_ok=True)
    result = DemoResult(folder, seed, n_boot)
    run = _Run(folder, result, seed, n_boot, progress, say)
    _cohorts(run)
    calc = _compare(run, _develop(run))
    file_fp, key_fp = _sign(run, calc)
    trusted = TrustedKeys(extra_files=(run.path("public_key"),))
    loaded = load_calculator(run.path("calculator"), trusted=trusted)
    result.signature_state = loaded.state.value
    _report(run, loaded)
    _sheet(run, loaded)
    ref_fp = load_calculator(run.path("reference")).fingerprint
    _describe(folder, result, {"calculator": file_fp, "public_key": key_fp,
                               "private_key": key_fp, "reference": ref_fp})
    result.seconds = time.perf_counter() - started
    return result
