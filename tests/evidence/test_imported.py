"""calcbuilder import evidence: JSON and CSV summaries, every consistency check's message,
treat-all recomputed from the stated prevalence, nothing written on failure."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from calcbuilder.calc.document import Calculator, load_calculator
from calcbuilder.evidence.imported import SummaryError, import_evidence, read_summary
from calcbuilder.evidence.metrics import evidence_set
from tests.fixtures_calc import make_calculator

DOCS_CSV = (Path(__file__).resolve().parents[2] / "docs" / "evidence-import.md")


def calc() -> Calculator:
    return Calculator.from_dict(make_calculator(with_evidence=False))


def summary(**change: Any) -> dict[str, Any]:
    out: dict[str, Any] = {
        "label": "Published validation", "source": "Example et al., Table 3 (test)",
        "dataset": {"name": "Test Site C", "n": 1000, "events": 120},
        "metrics": {"auc": {"value": 0.74, "low": 0.70, "high": 0.78},
                    "brier": {"value": 0.099}},
        "decision_curve": {"thresholds": [0.05, 0.1, 0.2], "model": [0.072, 0.041, 0.012]},
    }
    out.update(change)
    return out


def write_json(tmp: Path, raw: Any, name: str = "s.json") -> Path:
    path = tmp / name
    path.write_text(json.dumps(raw), "utf-8")
    return path


def problems(path: Path) -> list[str]:
    with pytest.raises(SummaryError) as caught:
        read_summary(path)
    return caught.value.problems or [str(caught.value)]


def test_json_summary_is_attached_as_imported(tmp_path: Path) -> None:
    new, ev, removed = import_evidence(calc(), write_json(tmp_path, summary()),
                                       output=tmp_path / "o.calc.json")
    assert ev["kind"] == "imported"
    assert ev["id"] == "imported-1"
    assert not removed
    stored = load_calculator(tmp_path / "o.calc.json").calculator.evidence[-1]
    assert stored.raw["source"] == "Example et al., Table 3 (test)"
    prev = 0.12
    assert list(stored.raw["decision_curve"]["treat_all"]) == [
        prev - (1 - prev) * t / (1 - t) for t in (0.05, 0.1, 0.2)]
    assert new.evidence[-1].metric("auc")["value"] == 0.74


def test_an_evidence_set_round_trips(tmp_path: Path) -> None:
    rng = np.random.default_rng(3)
    risk = rng.random(400) * 0.6
    y = (rng.random(400) < risk).astype(float)
    ev = evidence_set(y, risk, kind="external", label="Elsewhere", dataset={"name": "Site D"},
                      band_boot=10, seed=1)
    ev.pop("id")
    ev["kind"], ev["source"] = "imported", "a calcbuilder run elsewhere"
    got = read_summary(write_json(tmp_path, ev))
    assert got["metrics"] == ev["metrics"]
    assert got["risk_histogram"] == ev["risk_histogram"]
    assert got["decision_curve"]["treat_all"] == pytest.approx(ev["decision_curve"]["treat_all"],
                                                               rel=1e-14)


def test_rounded_treat_all_passes_and_is_recomputed(tmp_path: Path) -> None:
    dc = {"thresholds": [0.1, 0.2], "model": [0.03, 0.01], "treat_all": [0.022, -0.1]}
    got = read_summary(write_json(tmp_path, summary(decision_curve=dc)))
    assert got["decision_curve"]["treat_all"] == [0.12 - 0.88 / 9, 0.12 - 0.88 / 4]
    assert any("recomputed exactly" in n for n in got["notes"])


@pytest.mark.parametrize(("change", "expected"), [
    ({"dataset": {"name": "x", "n": 100, "events": 120}}, "120 events cannot exceed n = 100"),
    ({"dataset": {"name": "x", "n": 10.5, "events": 1}}, "dataset.n: must be a whole number"),
    ({"metrics": {"auc": {"value": 0.74, "low": 0.75, "high": 0.8}}},
     "metrics.auc: value 0.74 must lie between low 0.75 and high 0.8"),
    ({"metrics": {"brier": {"value": 1.2}}}, "metrics.brier: must lie within [0, 1]"),
    ({"decision_curve": {"thresholds": [0.1, 0.1], "model": [0.01, 0.0]}},
     "decision_curve[1]: threshold 0.1: thresholds must be strictly increasing"),
    ({"decision_curve": {"thresholds": [0.1], "model": [0.3]}},
     "net benefit 0.3 exceeds the prevalence 0.1200"),
    ({"decision_curve": {"thresholds": [0.1], "model": [0.03], "treat_all": [0.05]}},
     "treat-all net benefit 0.05 does not match the stated prevalence 0.1200"),
    ({"decision_curve": {"thresholds": [0.1], "model": [0.03], "model_low": [0.04],
                         "model_high": [0.05]}}, "the net benefit must lie within its band"),
    ({"risk_histogram": {"edges": [0, 0.5, 1], "events": [100, 21], "nonevents": [800, 80]}},
     "risk_histogram.events: counts add up to 121, but the dataset has 120 events"),
    ({"risk_histogram": {"edges": [0, 0.6, 0.5], "events": [100, 20], "nonevents": [800, 80]}},
     "edges must be strictly increasing"),
    ({"calibration_curve": {"risk": [0.2, 0.1], "observed": [0.2, 0.1]}},
     "calibration_curve[1]: risks must lie in [0, 1], non-decreasing"),
    ({"kind": "external"}, "imported evidence has kind 'imported'"),
    ({"source": ""}, "source: required text"),
    ({"colour": "red"}, "colour: unknown field"),
])
def test_inconsistent_json_is_refused(tmp_path: Path, change: dict[str, Any],
                                      expected: str) -> None:
    found = problems(write_json(tmp_path, summary(**change)))
    assert any(expected in p for p in found), found


def test_problems_are_all_reported_and_nothing_is_written(tmp_path: Path) -> None:
    bad = summary(source="", metrics={"auc": {"value": 2.0}})
    out = tmp_path / "never.calc.json"
    with pytest.raises(SummaryError) as caught:
        import_evidence(calc(), write_json(tmp_path, bad), output=out)
    assert len(caught.value.problems) == 2
    assert not out.exists()


def _docs_example() -> str:
    text = DOCS_CSV.read_text("utf-8")
    block = text.split("```\nsection,name,value,low,high,events,nonevents\nset,")[1]
    return "section,name,value,low,high,events,nonevents\nset," + block.split("```")[0]


def test_csv_example_of_the_documentation(tmp_path: Path) -> None:
    path = tmp_path / "s.csv"
    path.write_text(_docs_example(), "utf-8")
    new, ev, _ = import_evidence(calc(), path, output=tmp_path / "o.calc.json")
    assert ev["label"] == "Published validation, Demo Hospital C"
    assert ev["dataset"] == {"name": "Demo Hospital C (synthetic)", "n": 1000, "events": 120}
    assert ev["metrics"]["auc"] == {"value": 0.74, "low": 0.70, "high": 0.78}
    assert ev["decision_curve"]["model_low"] == [0.06, 0.03]
    assert [g["n"] for g in ev["grouped_calibration"]] == [500, 500]
    assert ev["risk_histogram"] == {"edges": [0.0, 0.5, 1.0], "events": [100, 20],
                                    "nonevents": [870, 10]}
    assert new.evidence[-1].kind == "imported"


def test_csv_problems_name_their_rows(tmp_path: Path) -> None:
    text = _docs_example().replace("metric,auc,0.74,0.70,0.78", "metric,auc,0.74,0.75,0.78")
    text = text.replace("decision,0.10,0.041", "decision,0.04,0.041")
    text = text.replace("metric,calibration_slope,0.91", "metric,calibration_slope,O.91")
    text = text.replace("histogram,0.5,1,,,20,10", "histogram,0.6,1,,,20,10")
    text += "colour,red,1,,,,\n"
    path = tmp_path / "s.csv"
    path.write_text(text, "utf-8")
    found = problems(path)
    assert "row 7 (metrics.auc): value 0.74 must lie between low 0.75 and high 0.78" in found
    assert "row 8 (metrics.calibration_slope): 'O.91' is not a number" in found
    assert any(p.startswith("row 10 (decision_curve[1]): threshold 0.04") for p in found)
    assert any(p.startswith("row 13 (risk_histogram[0]): bins must be contiguous")
               for p in found)
    assert any(p.startswith("row 15: section 'colour' is not one of") for p in found)


def test_unreadable_summaries(tmp_path: Path) -> None:
    assert "use a .json or .csv file" in problems(write_json(tmp_path, {}, "s.txt"))[0]
    (tmp_path / "b.json").write_text("{\"label\": NaN}", "utf-8")
    assert "NaN is not a number" in problems(tmp_path / "b.json")[0]
    (tmp_path / "h.csv").write_text("what,ever\n1,2\n", "utf-8")
    assert "the header row must name columns" in problems(tmp_path / "h.csv")[0]
    assert "evidence summary not found" in problems(tmp_path / "none.csv")[0]
    assert "one JSON object" in problems(write_json(tmp_path, [1, 2]))[0]
