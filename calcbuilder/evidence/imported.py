"""``calcbuilder import evidence``: attach performance evidence computed elsewhere.

A summary (JSON or CSV, both described in ``docs/evidence-import.md``) gives the
metrics with their intervals, the dataset size and events, and optionally a
decision-curve table, calibration points, grouped calibration and a risk
histogram. It is checked for consistency before it is attached as an evidence
set of kind ``imported`` with its stated ``source``:

* ``events <= n``; ``low <= value <= high`` for every metric and point;
  AUC, Brier and the calibration errors within [0, 1];
* decision-curve thresholds strictly increasing inside (0, 1); the model's
  net benefit at most the prevalence (its largest possible value); treat-all
  (when given) equal to ``prevalence - (1 - prevalence) t / (1 - t)`` within
  :data:`ROUNDING` (values rounded to 3 decimals pass) -- the stored treat-all
  is then recomputed exactly from ``events / n``, and a note says so;
* calibration risks within [0, 1] and non-decreasing; histogram edges strictly
  increasing within [0, 1], whole non-negative counts adding up to the events
  and non-events of the dataset.

Every problem is reported at once (CSV: with its row number, header = row 1).

References
----------
.. [1] Vickers AJ, Elkin EB. Decision curve analysis: a novel method for evaluating
       prediction models. Med Decis Making 2006;26:565-574 (net benefit of treating all).
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Mapping
from itertools import pairwise
from pathlib import Path
from typing import Any

from ..calc.document import Calculator, load_calculator, save_calculator
from ..calc.jsonio import read_json_file
from ..errors import CalcFileError
from ._tokens import token
from .errors import _ProblemsError
from .metrics import with_evidence_set

__all__ = ["CSV_COLUMNS", "ROUNDING", "SummaryError", "import_evidence", "read_summary"]

ROUNDING = 5e-4
"""Largest difference allowed between a supplied treat-all net benefit and the prevalence's."""
CSV_COLUMNS = ("section", "name", "value", "low", "high", "events", "nonevents")
UNIT_METRICS = ("auc", "brier", "ici", "e50", "e90", "emax")
SET_KEYS = ("kind", "label", "source", "created", "dataset", "settings", "metrics",
            "calibration_curve", "grouped_calibration", "decision_curve", "risk_histogram",
            "reclassification", "notes")


class SummaryError(_ProblemsError):
    """An evidence summary that cannot be read or is inconsistent; lists every problem."""


class _Report:
    """Problems, each named by its place (a JSON path, or a CSV row and path)."""

    def __init__(self, rows: Mapping[str, int] | None = None) -> None:
        self.rows: dict[str, int] = dict(rows or {})
        self.items: list[str] = []

    def add(self, path: str, message: str) -> None:
        row = self.rows.get(path)
        self.items.append(f"row {row} ({path}): {message}" if row else f"{path}: {message}")


# --- reading -----------------------------------------------------------------------------------


def _cell_number(text: str, where: str, report: _Report) -> float | None:
    if not text.strip():
        return None
    tok = token(text)
    if isinstance(tok, float):
        return tok
    report.add(where, f"'{text}' is not a number")
    return None


def _whole(value: float | None) -> int | float | None:
    return int(value) if value is not None and value.is_integer() else value


def _csv_rows(path: Path) -> list[dict[str, str]]:
    try:
        text = path.read_bytes().decode("utf-8-sig")
    except FileNotFoundError:
        raise SummaryError(f"evidence summary not found: {path}") from None
    except UnicodeDecodeError:
        raise SummaryError(f"evidence summary {path.name} is not UTF-8 text; save it as "
                           "CSV UTF-8") from None
    reader = csv.DictReader(io.StringIO(text))
    header = [h.strip() for h in reader.fieldnames or []]
    unknown = [h for h in header if h not in CSV_COLUMNS]
    if "section" not in header or "name" not in header or unknown:
        raise SummaryError(f"evidence summary {path.name}: the header row must name columns "
                           f"from {', '.join(CSV_COLUMNS)} (section and name required); got "
                           f"{', '.join(header) or 'nothing'}")
    return [{(k or "").strip(): (v or "").strip() for k, v in row.items()} for row in reader]


_SECTIONS = ("set", "dataset", "setting", "metric", "decision", "calibration", "group",
             "histogram")


def _csv_summary(path: Path) -> tuple[dict[str, Any], _Report]:
    raw: dict[str, Any] = {"dataset": {}, "metrics": {}}
    rep = _Report()
    lists: dict[str, list[dict[str, Any]]] = {s: [] for s in _SECTIONS[4:]}
    for k, row in enumerate(_csv_rows(path), start=2):
        section, name = row.get("section", ""), row.get("name", "")
        if section not in _SECTIONS:
            rep.items.append(f"row {k}: section '{section}' is not one of {', '.join(_SECTIONS)}")
            continue
        if section in lists:
            lists[section].append({**row, "_row": k})
        else:
            _csv_scalar(raw, section, name, {**row, "_row": k}, rep)
    for section, items in lists.items():
        _csv_series(raw, section, items, rep)
    return raw, rep


def _csv_scalar(raw: dict[str, Any], section: str, name: str, row: Mapping[str, Any],
                rep: _Report) -> None:
    text, k = row.get("value", ""), row["_row"]
    if section == "set":
        if name == "note":
            raw.setdefault("notes", []).append(text)
        else:
            raw[name] = text
        rep.rows[name] = k
    elif section in ("dataset", "setting"):
        key = "dataset" if section == "dataset" else "settings"
        value: Any = text
        if name in ("n", "events", "excluded") or (section == "setting"
                                                  and isinstance(token(text), float)):
            value = _whole(_cell_number(text, f"{key}.{name}", rep))
        elif name == "synthetic":
            value = text.lower() in ("true", "yes", "1")
        raw.setdefault(key, {})[name] = value
        rep.rows[f"{key}.{name}"] = k
    else:  # metric
        where = f"metrics.{name}"
        rep.rows[where] = k
        entry = {f: _cell_number(row.get(f, ""), where, rep) for f in ("value", "low", "high")}
        raw["metrics"][name] = {f: v for f, v in entry.items() if v is not None or f == "value"}


def _csv_series(raw: dict[str, Any], section: str, items: list[dict[str, Any]],
                rep: _Report) -> None:
    if not items:
        return
    key = {"decision": "decision_curve", "calibration": "calibration_curve",
           "group": "grouped_calibration", "histogram": "risk_histogram"}[section]
    cols = {f: [_cell_number(r.get(f, ""), f"{key}[{i}]", rep) for i, r in enumerate(items)]
            for f in ("name", "value", "low", "high", "events", "nonevents")}
    for i, r in enumerate(items):
        rep.rows[f"{key}[{i}]"] = r["_row"]
    bands = {"low": cols["low"], "high": cols["high"]} if any(
        v is not None for v in cols["low"] + cols["high"]) else {}
    if section == "decision":
        raw[key] = {"thresholds": cols["name"], "model": cols["value"],
                    **{f"model_{b}": v for b, v in bands.items()}}
    elif section == "calibration":
        raw[key] = {"risk": cols["name"], "observed": cols["value"], **bands}
    elif section == "group":
        raw[key] = [{"mean_risk": m, "observed": o, "low": lo, "high": hi,
                     "n": _whole((e or 0) + (ne or 0))} for m, o, lo, hi, e, ne in
                    zip(cols["name"], cols["value"], cols["low"], cols["high"], cols["events"],
                        cols["nonevents"], strict=True)]
    else:
        edges = [*cols["name"], cols["value"][-1]]
        for i in range(len(items) - 1):
            if cols["value"][i] != cols["name"][i + 1]:
                rep.add(f"{key}[{i}]", "bins must be contiguous: its upper edge must equal the "
                        "next row's lower edge")
        raw[key] = {"edges": edges, "events": [_whole(v) for v in cols["events"]],
                    "nonevents": [_whole(v) for v in cols["nonevents"]]}


# --- checking ----------------------------------------------------------------------------------


def _is_num(x: Any) -> bool:
    return isinstance(x, int | float) and not isinstance(x, bool) and math.isfinite(x)


def _check_dataset(ds: Any, rep: _Report) -> tuple[int, int] | None:
    ds = ds if isinstance(ds, Mapping) else {}
    if not ds.get("name"):
        rep.add("dataset.name", "the dataset needs a name")
    found: dict[str, int] = {}
    for key in ("n", "events"):
        value = ds.get(key)
        if not (_is_num(value) and float(value).is_integer() and value >= (key == "n")):
            rep.add(f"dataset.{key}", f"must be a whole number{' >= 1' if key == 'n' else ''}; "
                    f"got {value!r}")
            return None
        found[key] = int(value)
    if found["events"] > found["n"]:
        rep.add("dataset.events", f"{found['events']} events cannot exceed n = {found['n']}")
        return None
    return found["n"], found["events"]


def _ordered(low: Any, value: Any, high: Any) -> bool:
    return not (_is_num(low) and _is_num(value) and _is_num(high)) or low <= value <= high


def _check_metrics(metrics: Any, rep: _Report) -> None:
    if not isinstance(metrics, Mapping):
        rep.add("metrics", "must be a table of metrics")
        return
    for name, m in metrics.items():
        where = f"metrics.{name}"
        if not isinstance(m, Mapping) or not (_is_num(m.get("value")) or m.get("value") is None):
            rep.add(where, "needs a numeric value")
            continue
        if not _ordered(m.get("low"), m["value"], m.get("high")):
            rep.add(where, f"value {m['value']} must lie between low {m.get('low')} and high "
                    f"{m.get('high')}")
        if name in UNIT_METRICS and any(_is_num(v) and not 0 <= v <= 1 for v in m.values()):
            rep.add(where, "must lie within [0, 1]")


def _check_decision(dc: dict[str, Any], prevalence: float, rep: _Report, notes: list[str]
                    ) -> None:
    t, model = dc.get("thresholds") or [], dc.get("model") or []
    if len(t) != len(model) or not all(_is_num(x) for x in t):
        rep.add("decision_curve", "needs one numeric threshold per net benefit")
        return
    for i, ti in enumerate(t):
        if not 0 < ti < 1 or (i and ti <= t[i - 1]):
            rep.add(f"decision_curve[{i}]", f"threshold {ti}: thresholds must be strictly "
                    "increasing inside (0, 1)")
        nb = model[i]
        if _is_num(nb) and nb > prevalence + ROUNDING:
            rep.add(f"decision_curve[{i}]", f"net benefit {nb} exceeds the prevalence "
                    f"{prevalence:.4f}, its largest possible value")
        if not _ordered((dc.get("model_low") or [None] * len(t))[i], nb,
                        (dc.get("model_high") or [None] * len(t))[i]):
            rep.add(f"decision_curve[{i}]", "the net benefit must lie within its band")
    exact = [prevalence - (1 - prevalence) * x / (1 - x) if 0 < x < 1 else None for x in t]
    given = dc.get("treat_all")
    if given is not None:
        for i, (g, e) in enumerate(zip(given, exact, strict=False)):
            if e is not None and not (_is_num(g) and abs(g - e) <= ROUNDING):
                rep.add(f"decision_curve[{i}]", f"treat-all net benefit {g} does not match the "
                        f"stated prevalence {prevalence:.4f} (expected {e:.4f})")
        notes.append("treat-all net benefit recomputed exactly from the stated prevalence "
                     f"(the supplied values agreed within {ROUNDING:g})")
    dc["treat_all"] = exact


def _check_points(raw: Mapping[str, Any], rep: _Report, counts: tuple[int, int]) -> None:
    cal = raw.get("calibration_curve")
    if isinstance(cal, Mapping):
        risk, obs = cal.get("risk") or [], cal.get("observed") or []
        for i, r in enumerate(risk):
            if not (_is_num(r) and 0 <= r <= 1) or (i and _is_num(risk[i - 1]) and r < risk[i - 1]):
                rep.add(f"calibration_curve[{i}]", "risks must lie in [0, 1], non-decreasing")
            elif i < len(obs) and not _ordered((cal.get("low") or [None] * len(risk))[i], obs[i],
                                               (cal.get("high") or [None] * len(risk))[i]):
                rep.add(f"calibration_curve[{i}]", "the observed value must lie within its band")
    for i, g in enumerate(raw.get("grouped_calibration") or []):
        if isinstance(g, Mapping) and not _ordered(g.get("low"), g.get("observed"), g.get("high")):
            rep.add(f"grouped_calibration[{i}]", "observed must lie between low and high")
    hist = raw.get("risk_histogram")
    if isinstance(hist, Mapping):
        _check_histogram(hist, rep, counts)


def _check_histogram(hist: Mapping[str, Any], rep: _Report, counts: tuple[int, int]) -> None:
    edges = hist.get("edges") or []
    if not all(_is_num(e) and 0 <= e <= 1 for e in edges) or any(
            b <= a for a, b in pairwise(edges)):
        rep.add("risk_histogram", "edges must be strictly increasing within [0, 1]")
    n, events = counts
    for key, total in (("events", events), ("nonevents", n - events)):
        values = hist.get(key) or []
        if not all(_is_num(v) and v >= 0 and float(v).is_integer() for v in values):
            rep.add(f"risk_histogram.{key}", "counts must be whole numbers >= 0")
        elif sum(values) != total:
            rep.add(f"risk_histogram.{key}", f"counts add up to {sum(values):g}, but the dataset "
                    f"has {total} {key}")


def _check(raw: Any, rep: _Report) -> dict[str, Any]:
    if not isinstance(raw, Mapping):
        raise SummaryError("an evidence summary must be one JSON object (an evidence set)")
    unknown = [k for k in raw if k not in SET_KEYS]
    for key in unknown:
        rep.add(key, f"unknown field; allowed: {', '.join(SET_KEYS)}")
    if raw.get("kind", "imported") != "imported":
        rep.add("kind", f"imported evidence has kind 'imported'; got {raw.get('kind')!r}")
    for key in ("label", "source"):
        if not isinstance(raw.get(key), str) or not raw[key].strip():
            rep.add(key, "required text (source: where the numbers come from)")
    out = {k: v for k, v in raw.items() if k != "kind"}
    counts = _check_dataset(raw.get("dataset"), rep)
    _check_metrics(raw.get("metrics"), rep)
    notes = list(raw.get("notes") or [])
    if counts is not None:
        if isinstance(raw.get("decision_curve"), Mapping):
            out["decision_curve"] = dict(raw["decision_curve"])
            _check_decision(out["decision_curve"], counts[1] / counts[0], rep, notes)
        _check_points(raw, rep, counts)
    if notes:
        out["notes"] = notes
    return {"kind": "imported", **out}


def read_summary(path: str | Path) -> dict[str, Any]:
    """Read and check an evidence summary (``.json`` or ``.csv``).

    Returns
    -------
    dict
        The evidence set (kind ``imported``, provisional id) ready to attach.

    Raises
    ------
    SummaryError
        Unreadable file or any inconsistency (all listed).
    """
    path = Path(path)
    if path.suffix.lower() == ".json":
        try:
            raw, rep = read_json_file(path, source=f"evidence summary {path.name}"), _Report()
        except CalcFileError as exc:
            raise SummaryError(str(exc)) from None
    elif path.suffix.lower() == ".csv":
        raw, rep = _csv_summary(path)
    else:
        raise SummaryError(f"evidence summary {path.name}: use a .json or .csv file "
                           "(docs/evidence-import.md)")
    out = _check(raw, rep)
    if rep.items:
        n = len(rep.items)
        raise SummaryError(f"evidence summary {path.name} cannot be attached: {n} problem"
                           f"{'s' if n != 1 else ''}", rep.items)
    return {"id": "imported-1", **out}


def import_evidence(calc: str | Path | Calculator, summary: str | Path, *,
                    output: str | Path | None = None,
                    ) -> tuple[Calculator, dict[str, Any], bool]:
    """Attach a checked summary to a calculator and write the new file atomically.

    Returns
    -------
    (Calculator, dict, bool)
        The new calculator, the set added (with its unique id) and whether a
        signature was removed.
    """
    c = calc if isinstance(calc, Calculator) else load_calculator(calc).calculator
    evidence = read_summary(summary)
    doc, removed = with_evidence_set(c.to_dict(), evidence)
    k = len(doc["evidence"]) - 1
    try:
        new = Calculator.from_dict(doc)
    except CalcFileError as exc:
        problems = [p.replace(f"evidence[{k}]", "summary") for p in exc.problems]
        raise SummaryError(f"evidence summary {Path(summary).name} does not fit the "
                           "calculator file format", problems or [str(exc)]) from None
    if output is not None:
        save_calculator(new, output)
    return new, doc["evidence"][-1], removed
