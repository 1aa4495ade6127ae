"""The workspace's long stages without Qt: the same calculator as the command line, cancelling
writes nothing, results go out of date when the recipe changes, signing and the report."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest

from calcbuilder.authoring import Workspace, save_project
from calcbuilder.authoring.pipeline import StageResult, run_stage, run_stages
from calcbuilder.authoring.publish_step import create_key, open_key, sign_and_write, write_report
from calcbuilder.calc.canonical import fingerprint
from calcbuilder.calc.document import load_calculator
from calcbuilder.calc.keys import TrustedKeys
from calcbuilder.calc.signing import TrustState
from calcbuilder.cli import main
from calcbuilder.errors import CalcbuilderError, SignatureError
from calcbuilder.stats import CancelledError
from tests.authoring.demo import fill_workspace, write_cohorts

SEED, BANDS, B = 7, 20, 10
PASS = "correct horse battery staple"


def quiet(_what: str, _done: int, _total: int) -> bool:
    return True


def without_timestamps(document: dict[str, Any]) -> dict[str, Any]:
    """The payload with the evidence sets' creation times left out."""
    doc = json.loads(json.dumps({k: v for k, v in document.items() if k != "signature"}))
    for ev in doc["evidence"]:
        ev.pop("created", None)
    return doc


def run(ws: Workspace, kind: str, **kw: Any) -> StageResult:
    if kind == "fit":
        spec, draft = ws.first_spec()
        result = run_stage(spec, None, band_boot=BANDS, seed=SEED, report=quiet)
        basis, model = ws.bases()
        ws.assess.start(result, spec, basis=basis, model_basis=model, draft_texts=draft)
        return result
    spec = ws.stage_spec(kind, **kw)
    result = run_stage(spec, ws.assess.document, band_boot=BANDS, seed=SEED, report=quiet)
    ws.assess.add(result, spec)
    return result


@pytest.fixture(scope="module")
def fitted(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    """A saved demo workspace, fitted and bootstrapped (B = 10), and a signing key."""
    tmp = tmp_path_factory.mktemp("pipeline")
    files = write_cohorts(tmp)
    ws = fill_workspace(Workspace(), files["dev"], seed=SEED, band_boot=BANDS, n_boot=B)
    save_project(ws, tmp / "demo.cbproject.json")
    run(ws, "fit")
    run(ws, "bootstrap")
    keys = create_key(tmp, "author", PASS)
    return {"ws": ws, "tmp": tmp, "keys": keys, **files}


def test_fit_and_bootstrap_give_the_calculator_the_command_line_makes(
        fitted: dict[str, Any]) -> None:
    ws, tmp, keys = fitted["ws"], fitted["tmp"], fitted["keys"]
    assert ws.state() == "current"
    ours = sign_and_write(ws.assess.document, open_key(keys.private_key, PASS),
                          tmp / "ours.calc.json")
    recipe = ws.sibling(".recipe.toml")
    (tmp / "pass.txt").write_text(PASS + "\n", "utf-8")
    assert main(["fit", str(fitted["dev"]), "--recipe", str(recipe), "-o",
                 str(tmp / "cli-fit.calc.json"), "--band-boot", str(BANDS), "--seed",
                 str(SEED)]) == 0
    assert main(["assess", str(tmp / "cli-fit.calc.json"), "--data", str(fitted["dev"]),
                 "--bootstrap", str(B), "--seed", str(SEED), "-o",
                 str(tmp / "cli-boot.calc.json")]) == 0
    assert main(["sign", str(tmp / "cli-boot.calc.json"), "--key", str(keys.private_key),
                 "--passphrase-file", str(tmp / "pass.txt"), "-o",
                 str(tmp / "cli.calc.json")]) == 0
    theirs = json.loads((tmp / "cli.calc.json").read_text("utf-8"))
    mine = json.loads(ours.calculator.read_text("utf-8"))
    assert fingerprint(without_timestamps(mine)) == fingerprint(without_timestamps(theirs))
    assert [e["kind"] for e in mine["evidence"]] == ["apparent", "bootstrap"]
    assert mine["about"]["synthetic"] is True
    settings = mine["evidence"][0]["settings"]
    assert settings["recipe_file"] == recipe.name
    assert mine["signature"]["key_fingerprint"] == keys.key_fingerprint


def test_the_signed_file_verifies_and_gets_its_evidence_report(fitted: dict[str, Any]) -> None:
    ws, tmp, keys = fitted["ws"], fitted["tmp"], fitted["keys"]
    published = sign_and_write(ws.assess.document, open_key(keys.private_key, PASS),
                               tmp / "report-me.calc.json")
    published = write_report(published, keys.public_key, tmp / "report-me.pdf", "A4")
    assert published.report_pages > 1
    assert (tmp / "report-me.pdf").read_bytes().startswith(b"%PDF")
    loaded = load_calculator(published.calculator,
                             trusted=TrustedKeys(tmp / "none", extra_files=(keys.public_key,)))
    assert loaded.state is TrustState.VERIFIED
    assert loaded.fingerprint == published.file_fingerprint


def test_a_wrong_passphrase_and_an_invalid_document_write_nothing(
        fitted: dict[str, Any]) -> None:
    tmp, keys = fitted["tmp"], fitted["keys"]
    with pytest.raises(SignatureError, match="wrong passphrase"):
        open_key(keys.private_key, "not it")
    broken = dict(fitted["ws"].assess.document)
    broken["test_vectors"] = broken["test_vectors"][:1]
    with pytest.raises(CalcbuilderError):
        sign_and_write(broken, open_key(keys.private_key, PASS), tmp / "broken.calc.json")
    assert not (tmp / "broken.calc.json").exists()


def test_cancelling_the_bootstrap_raises_and_leaves_the_results_as_they_were(
        fitted: dict[str, Any]) -> None:
    ws = fitted["ws"]
    before = list(ws.assess.stages)
    files_before = sorted(fitted["tmp"].iterdir())
    calls: list[int] = []

    def cancel_at_once(_what: str, done: int, _total: int) -> bool:
        calls.append(done)
        return False

    spec = {**ws.stage_spec("bootstrap"), "n_boot": 500}
    with pytest.raises(CancelledError):
        run_stage(spec, ws.assess.document, band_boot=BANDS, seed=SEED, report=cancel_at_once)
    assert calls
    assert ws.assess.stages == before
    assert sorted(fitted["tmp"].iterdir()) == files_before  # nothing was written


def test_changes_make_results_out_of_date_and_publishing_runs_the_stages_again(
        fitted: dict[str, Any]) -> None:
    ws = fitted["ws"]
    assert ws.publish_plan() is None
    old_title = ws.about.title
    ws.about.title = "A new title (synthetic)"
    assert ws.state() == "texts"  # the numbers stand; the texts changed
    plan = ws.publish_plan()
    assert plan is not None
    assert [s["stage"] for s in plan] == ["fit", "bootstrap"]
    ws.about.title = old_title
    recipe = ws.fitting_recipe()[0]
    assert recipe is not None
    ws.write_recipe(recipe)
    assert ws.state() == "current"
    ws.inputs.draft("age").knots = "3"
    assert ws.state() == "stale"
    ws.inputs.draft("age").knots = "4"
    assert ws.state() == "current"


def test_external_validation_recalibration_and_comparison_add_evidence(
        fitted: dict[str, Any], tmp_path: Path) -> None:
    ws = fill_workspace(Workspace(), fitted["dev"], seed=SEED, band_boot=BANDS, n_boot=B)
    save_project(ws, tmp_path / "more.cbproject.json")
    run(ws, "fit")
    from calcbuilder.authoring import ExternalData

    ws.assess.externals.append(ExternalData(fitted["ext"], "Demo Hospital B (synthetic)"))
    result = run(ws, "external", index=0)
    assert any(line.startswith("AUC ") for line in result.lines)
    ws.assess.recal_path, ws.assess.recal_method = fitted["ext"], "intercept"
    ws.assess.recal_label = "Demo Hospital B (synthetic)"
    run(ws, "recalibrate")
    kinds = [e["kind"] for e in ws.assess.document["evidence"]]  # type: ignore[index]
    assert kinds == ["apparent", "external", "recalibrated"]
    assert set(ws.assess.roc) == {"apparent-1", "external-1", "recalibrated-1"}
    reference = tmp_path / "reference.calc.json"
    reference.write_text(fitted["tmp"].joinpath("ours.calc.json").read_text("utf-8")
                         if fitted["tmp"].joinpath("ours.calc.json").exists()
                         else json.dumps(ws.assess.document), "utf-8")
    ws.assess.reference_path, ws.assess.compare_cuts = reference, "10,20"
    result = run(ws, "compare")
    assert result.comparison is not None
    assert "auc_difference" in result.comparison
    apparent = ws.assess.document["evidence"][0]  # type: ignore[index]
    assert apparent["reclassification"]["cuts"] == [0.1, 0.2]
    again = run_stages(ws.assess.stages, band_boot=BANDS, seed=SEED, report=quiet)
    assert fingerprint(without_timestamps(again.document)) == fingerprint(
        without_timestamps(ws.assess.document))  # type: ignore[arg-type]


def test_settings_are_checked_before_anything_runs() -> None:
    ws = Workspace()
    ws.assess.seed, ws.assess.n_boot, ws.assess.band_boot = "x", "0", "-1"
    problems = ws.assess.settings_problems()
    assert set(problems) == {"assess.seed", "assess.n_boot", "assess.band_boot"}
    with pytest.raises(CalcbuilderError, match="save the project first"):
        ws.sibling(".recipe.toml")
