"""Step 1, Data: the development data file, its outcome, and what the data say before fitting.

:class:`DataStep` holds the author's choices (file, sheet, outcome column and
event value, complete-case rule, the data's description for the evidence) and
the table read by :func:`calcbuilder.evidence.read_table` -- the reader the
command line uses. Cells are read with the pipeline's own reading rules
(numbers, yes/no texts, what counts as missing), so the counts shown here are
the ones ``calcbuilder fit`` will find. The table itself is never saved in a
project file; the file's SHA-256 is, so a changed file is noticed on reopening.

The sample-size verdict (Riley et al.) and the developed ranges come from
:func:`calcbuilder.evidence.prepare` via :meth:`Workspace.data_check
<calcbuilder.authoring.workspace.Workspace.data_check>`, not from here.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..evidence import file_sha256, read_table
from ..evidence._tokens import token
from ..evidence.dataset import SUPPORTED_TYPES
from ._paths import absolute, relative

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["PREVIEW_ROWS", "ColumnSummary", "DataStep", "event_token", "guess_kind"]

PREVIEW_ROWS = 20
"""Rows shown in the data preview."""
CHOICE_LIMIT = 20
"""A text column with more different values than this is not offered as a choice input."""


@dataclass(frozen=True)
class ColumnSummary:
    """Counts of one data column, read with the pipeline's cell rules.

    Attributes
    ----------
    name : str
    filled, missing : int
        Cells with a value and cells read as missing (blank rows not counted).
    values : tuple of (str, int)
        Up to :data:`CHOICE_LIMIT` + 1 most frequent values as written, with counts.
    distinct : int
        Number of different values.
    numeric : bool
        Every value reads as a number.
    kind : str
        The input kind this column most likely is (:func:`guess_kind`).
    """

    name: str
    filled: int
    missing: int
    values: tuple[tuple[str, int], ...]
    distinct: int
    numeric: bool
    kind: str


def _text(tok: float | str) -> str:
    if isinstance(tok, float):
        return str(int(tok)) if tok.is_integer() and abs(tok) < 1e15 else repr(tok)
    return tok


def guess_kind(values: set[float | str], numeric: bool) -> str:
    """``yes_no`` for 0/1 or yes/no columns, ``number`` for other numbers, else ``choice``."""
    keys = {v.casefold() if isinstance(v, str) else v for v in values}
    if keys and (keys <= {0.0, 1.0} or keys <= {"yes", "no"} or keys <= {"true", "false"}):
        return "yes_no"
    return "number" if numeric else "choice"


def event_token(text: str) -> float | str:
    """The outcome event value as the recipe holds it: a number when the text is one."""
    tok = token(text)
    if tok is None:
        return text
    return int(tok) if isinstance(tok, float) and tok.is_integer() else tok


@dataclass
class DataStep:
    """The author's data choices and the table they refer to.

    Attributes
    ----------
    path : Path or None
        The development data file (CSV, Parquet or Excel).
    sheet : str or None
        Excel only: the sheet read.
    outcome_column, event_value : str or None
        The outcome column and the value in it meaning the event (as text).
    complete_case : bool
        Leave out rows with a missing value (recorded) instead of refusing them.
    predictors : list of str
        Columns chosen as candidate predictors, in the order chosen.
    anticipated_r2_cs : str
        Optional anticipated Cox-Snell R2 for Riley's criteria (text as typed).
    dataset_name, dataset_period, dataset_population : str
        How the data are described in the evidence (recipe ``[dataset]``).
    sha256 : str or None
        SHA-256 of the file when it was read.
    """

    path: Path | None = None
    sheet: str | None = None
    outcome_column: str | None = None
    event_value: str | None = None
    complete_case: bool = False
    predictors: list[str] = field(default_factory=list)
    anticipated_r2_cs: str = ""
    dataset_name: str = ""
    dataset_period: str = ""
    dataset_population: str = ""
    sha256: str | None = None
    table: pd.DataFrame | None = field(default=None, repr=False, compare=False)
    _summaries: dict[str, ColumnSummary] = field(default_factory=dict, repr=False,
                                                 compare=False)

    # -- the file -----------------------------------------------------------------------------

    @staticmethod
    def file_filter() -> str:
        """File-dialog filter text for the supported data files."""
        endings = " ".join(f"*{e}" for e in SUPPORTED_TYPES)
        return f"Data files ({endings});;All files (*)"

    def open(self, path: str | Path, *, sheet: str | None = None) -> list[str]:
        """Read a data file; keep the choices that still fit its columns.

        Returns
        -------
        list of str
            Notes on choices dropped because the file lacks their columns.

        Raises
        ------
        DataError
            The file cannot be read (one message naming the problem and the fix).
        """
        path = Path(path).resolve()
        table = read_table(path, sheet=sheet)
        self.table = table
        self.path, self.sheet = path, sheet
        self.sha256 = file_sha256(path)
        self._summaries = {}
        notes = []
        columns = self.columns
        if self.outcome_column is not None and self.outcome_column not in columns:
            notes.append(f"the outcome column '{self.outcome_column}' is not in {path.name}")
            self.outcome_column, self.event_value = None, None
        gone = [c for c in self.predictors if c not in columns]
        if gone:
            notes.append(f"not in {path.name}: {', '.join(gone)}")
            self.predictors = [c for c in self.predictors if c in columns]
        if not self.dataset_name:
            self.dataset_name = path.stem
        return notes

    @property
    def loaded(self) -> bool:
        """True once a table is in memory."""
        return self.table is not None

    @property
    def columns(self) -> list[str]:
        """The data's column names, in file order."""
        return [] if self.table is None else [str(c) for c in self.table.columns]

    @property
    def n_rows(self) -> int:
        """Data rows in the table (header not counted)."""
        return 0 if self.table is None else int(self.table.shape[0])

    def file_changed(self) -> bool:
        """True when the file's bytes differ from those read (or it can no longer be read)."""
        if self.path is None or self.sha256 is None:
            return False
        try:
            return file_sha256(self.path) != self.sha256
        except Exception:  # a missing file counts as changed; the caller says so
            return True

    # -- what the data hold -------------------------------------------------------------------

    def preview(self, rows: int = PREVIEW_ROWS) -> list[list[str]]:
        """The first ``rows`` rows, every cell as text (missing cells empty)."""
        if self.table is None:
            return []
        out = []
        for row in self.table.head(rows).itertuples(index=False):
            out.append(["" if token(v) is None else str(v) for v in row])
        return out

    def summary(self, column: str) -> ColumnSummary:
        """Counts of one column (computed once per file)."""
        if column not in self._summaries:
            self._summaries[column] = self._summarise(column)
        return self._summaries[column]

    def summaries(self) -> list[ColumnSummary]:
        """:meth:`summary` of every column, in file order."""
        return [self.summary(c) for c in self.columns]

    def _summarise(self, column: str) -> ColumnSummary:
        assert self.table is not None
        from ..evidence.dataset import empty_rows

        blank = empty_rows(self.table)
        counts: Counter[float | str] = Counter()
        missing = 0
        for value, is_blank in zip(self.table[column].tolist(), blank, strict=True):
            if is_blank:
                continue
            tok = token(value)
            if tok is None:
                missing += 1
            else:
                counts[tok] += 1
        numeric = bool(counts) and all(isinstance(v, float) for v in counts)
        top = tuple((_text(v), n) for v, n in counts.most_common(CHOICE_LIMIT + 1))
        return ColumnSummary(column, sum(counts.values()), missing, top, len(counts), numeric,
                             guess_kind(set(counts), numeric))

    def outcome_values(self) -> list[tuple[str, int]]:
        """The outcome column's values with their counts (most frequent first)."""
        if self.outcome_column is None or self.outcome_column not in self.columns:
            return []
        return list(self.summary(self.outcome_column).values)

    def choose_outcome(self, column: str | None) -> None:
        """Set the outcome column; the event value becomes the rarer of two values."""
        self.outcome_column = column or None
        if column in self.predictors:
            self.predictors.remove(column)
        values = self.outcome_values()
        if len(values) == 2:
            numbers = {v for v, _ in values if v in ("1", "0")}
            self.event_value = "1" if numbers == {"1", "0"} else values[-1][0]
        else:
            self.event_value = None

    # -- recipe parts and the project file ------------------------------------------------------

    def outcome_dict(self) -> dict[str, Any] | None:
        """The recipe's ``[outcome]`` table (None before an outcome is chosen)."""
        if not self.outcome_column:
            return None
        out: dict[str, Any] = {"column": self.outcome_column}
        if self.event_value is not None and self.event_value.strip():
            out["event"] = event_token(self.event_value)
        return out

    def dataset_dict(self) -> dict[str, str]:
        """The recipe's ``[dataset]`` table (only the descriptions given)."""
        pairs = (("name", self.dataset_name), ("period", self.dataset_period),
                 ("population", self.dataset_population))
        return {k: v.strip() for k, v in pairs if v.strip()}

    def r2_value(self) -> float | str | None:
        """``anticipated_r2_cs`` as the recipe takes it (text kept for the recipe to refuse)."""
        text = self.anticipated_r2_cs.strip()
        if not text:
            return None
        tok = token(text)
        return tok if isinstance(tok, float) else text

    def to_dict(self, base: Path | None) -> dict[str, Any]:
        """The project-file form (the path relative to ``base`` when below it)."""
        return {
            "path": relative(self.path, base), "sheet": self.sheet, "sha256": self.sha256,
            "outcome_column": self.outcome_column, "event_value": self.event_value,
            "complete_case": self.complete_case, "predictors": list(self.predictors),
            "anticipated_r2_cs": self.anticipated_r2_cs,
            "dataset": {"name": self.dataset_name, "period": self.dataset_period,
                        "population": self.dataset_population},
        }

    @classmethod
    def from_dict(cls, raw: dict[str, Any], base: Path | None) -> DataStep:
        """Read the project-file form (the table is not read: call :meth:`open`)."""
        dataset = raw.get("dataset") or {}
        return cls(
            path=absolute(raw.get("path"), base), sheet=raw.get("sheet"),
            outcome_column=raw.get("outcome_column"), event_value=raw.get("event_value"),
            complete_case=bool(raw.get("complete_case", False)),
            predictors=[str(p) for p in raw.get("predictors", [])],
            anticipated_r2_cs=str(raw.get("anticipated_r2_cs", "")),
            dataset_name=str(dataset.get("name", "")),
            dataset_period=str(dataset.get("period", "")),
            dataset_population=str(dataset.get("population", "")),
            sha256=raw.get("sha256"))

