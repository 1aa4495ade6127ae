"""Step 2, the other way: import an existing model and describe its inputs.

Instead of fitting, the author can bring a model made elsewhere: a coefficient
table (CSV) or a PMML document. The importers (:mod:`calcbuilder.calc.importers`)
need an *inputs description* (TOML): the workspace writes one from its own steps
-- the inputs as described on the Inputs page (calculator fields only), About
and cautions, Decision -- plus the test vectors the author supplies as a CSV file
(one column per input id and a ``risk`` column with the risk the original
software computed; at least five rows) and, for PMML, the target category that
means the event. An existing description file can be used instead.
The import then runs ``calcbuilder import table|pmml SOURCE --inputs FILE``.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..evidence._tokens import token
from ._paths import absolute, relative
from .inputs_step import InputDraft

__all__ = ["DESCRIPTION_INPUT_KEYS", "MODES", "ImportStep", "read_test_vectors"]

MODES = ("fit", "table", "pmml")
"""``fit``: fit a recipe to the data; ``table`` / ``pmml``: import a model."""
DESCRIPTION_INPUT_KEYS = ("id", "column", "label", "kind", "unit", "alt_units", "limits",
                          "developed", "decimals", "required", "group", "help", "choices")


def _cell(draft: InputDraft | None, value: Any) -> Any:
    tok = token(value)
    if tok is None or draft is None:
        return tok
    if draft.kind == "yes_no":
        key = tok.casefold() if isinstance(tok, str) else tok
        if key in (1.0, "yes", "true", "y"):
            return True
        if key in (0.0, "no", "false", "n"):
            return False
        return tok
    if draft.kind == "choice":
        return tok if isinstance(tok, str) else (str(int(tok)) if tok.is_integer() else str(tok))
    return tok


def read_test_vectors(path: Path, drafts: Sequence[InputDraft]) -> list[dict[str, Any]]:
    """Test vectors from a CSV/Excel file: one row each, columns = input ids and ``risk``.

    Cells are read with the data rules (numbers, yes/no, blanks); anything the
    description cannot use is passed on for it to refuse with its path.

    Raises
    ------
    DataError
        The file cannot be read, or it has no ``risk`` column.
    """
    from ..evidence import DataError, read_table

    table = read_table(path)
    columns = [str(c) for c in table.columns]
    if "risk" not in columns:
        raise DataError(f"{path.name}: needs a 'risk' column with the risk the original "
                        "software computed for each row")
    by_id = {d.id: d for d in drafts}
    out = []
    for k, row in enumerate(table.to_dict(orient="records"), start=1):
        values = {str(c): _cell(by_id.get(str(c)), v) for c, v in row.items()
                  if c not in ("risk", "name") and token(v) is not None}
        risk = token(row["risk"])
        name = str(row.get("name") or f"{path.name} row {k + 1}")
        out.append({"name": name, "values": values, "risk": risk})
    return out


@dataclass
class ImportStep:
    """How the model comes about: fitted (``fit``) or imported (``table``, ``pmml``)."""

    mode: str = "fit"
    source: Path | None = None
    vectors: Path | None = None
    description: Path | None = None
    pmml_event: str = ""

    @property
    def importing(self) -> bool:
        return self.mode in ("table", "pmml")

    def problems(self) -> dict[str, list[str]]:
        """What is missing before importing, by field key."""
        if not self.importing:
            return {}
        out: dict[str, list[str]] = {}
        if self.source is None:
            out["import.source"] = ["choose the model file (coefficient table or PMML)"]
        if self.description is None and self.vectors is None:
            out["import.vectors"] = ["choose the test-vector file (or an inputs description "
                                     "file that holds them)"]
        if self.mode == "pmml" and self.description is None and not self.pmml_event.strip():
            out["import.pmml_event"] = ["required: the target category that means the event"]
        return out

    def description_dict(self, drafts: Sequence[InputDraft], about: Mapping[str, Any],
                         decision: Mapping[str, Any], cautions: Sequence[str]
                         ) -> dict[str, Any]:
        """The inputs description (TOML form) written from the workspace's steps."""
        inputs = [{k: v for k, v in d.recipe_entry().items() if k in DESCRIPTION_INPUT_KEYS}
                  for d in drafts]
        vectors = read_test_vectors(self.vectors, drafts) if self.vectors is not None else []
        about_out = dict(about)
        if not about_out.get("released"):  # as for a recipe: blank means the day it is written
            import datetime as dt

            about_out["released"] = dt.date.today().isoformat()
        out: dict[str, Any] = {"cautions": list(cautions), "about": about_out,
                               "inputs": inputs, "decision": dict(decision),
                               "test_vectors": vectors}
        if self.mode == "pmml":
            out["pmml"] = {"event": self.pmml_event.strip()}
        return out

    def to_dict(self, base: Path | None) -> dict[str, Any]:
        return {"mode": self.mode, "source": relative(self.source, base),
                "vectors": relative(self.vectors, base),
                "description": relative(self.description, base), "pmml_event": self.pmml_event}

    @classmethod
    def from_dict(cls, raw: Mapping[str, Any], base: Path | None) -> ImportStep:
        mode = str(raw.get("mode", "fit"))
        return cls(mode=mode if mode in MODES else "fit", source=absolute(raw.get("source"), base),
                   vectors=absolute(raw.get("vectors"), base),
                   description=absolute(raw.get("description"), base),
                   pmml_event=str(raw.get("pmml_event", "")))
