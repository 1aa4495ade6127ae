"""Reading a development or validation data file into a table, with one clear message on failure.

Supported: CSV (``.csv``, UTF-8, with or without a byte-order mark, comma-separated,
first row = column names), Parquet (``.parquet``, needs ``pyarrow``) and Excel
workbooks (``.xlsx``, ``.xlsm``; the first sheet unless one is named). The old
binary Excel format (``.xls``) is refused with the way out (save as ``.xlsx``).

Conventions the data checks rely on:

* CSV cells are returned as text, exactly as written (no type guessing), so that
  :func:`calcbuilder.evidence.datacheck.prepare` can name every cell it cannot
  read; Parquet and Excel cells keep their stored types.
* Column names have surrounding spaces removed; a blank or repeated column name
  is refused.
* Completely empty rows at the end of the file are dropped; rows are otherwise
  kept in file order, so the table's row ``i`` (from 0) is the file's row ``i + 2``
  as a spreadsheet numbers it: the header is row 1 (:func:`file_row`).
"""

from __future__ import annotations

import hashlib
import io
import math
import re
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .errors import DataError

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["ROW_NOTE", "SUPPORTED_TYPES", "empty_rows", "file_row", "file_sha256", "read_table"]

SUPPORTED_TYPES = {".csv": "CSV", ".parquet": "Parquet", ".xlsx": "Excel", ".xlsm": "Excel"}
"""File name endings read by :func:`read_table` (compared in lower case)."""

ROW_NOTE = "header = row 1"
"""How row numbers in messages are counted (said in every message that gives rows)."""

_UTF8_BOM = b"\xef\xbb\xbf"
_UTF16_BOMS = (b"\xff\xfe", b"\xfe\xff")
_FIELDS = re.compile(r"Expected (\d+) fields in line (\d+), saw (\d+)")


def file_row(position: int) -> int:
    """The row number a person sees in the file for table row ``position`` (from 0)."""
    return position + 2


def _read_bytes(path: Path) -> bytes:
    try:
        return path.read_bytes()
    except FileNotFoundError:
        raise DataError(f"data file not found: {path}") from None
    except IsADirectoryError:
        raise DataError(f"{path} is a folder, not a data file") from None
    except OSError as exc:
        raise DataError(f"cannot read data file {path}: {exc.strerror or exc}") from None


def file_sha256(path: str | Path) -> str:
    """SHA-256 (lower-case hex) of a file's bytes, for the provenance of an evidence set.

    Parameters
    ----------
    path : str or Path
        The file.

    Returns
    -------
    str
        64 hexadecimal digits.

    Raises
    ------
    DataError
        The file is missing or cannot be read.
    """
    path = Path(path)
    digest = hashlib.sha256()
    try:
        with path.open("rb") as handle:
            for block in iter(lambda: handle.read(1 << 20), b""):
                digest.update(block)
    except FileNotFoundError:
        raise DataError(f"data file not found: {path}") from None
    except IsADirectoryError:
        raise DataError(f"{path} is a folder, not a data file") from None
    except OSError as exc:
        raise DataError(f"cannot read data file {path}: {exc.strerror or exc}") from None
    return digest.hexdigest()


def read_table(path: str | Path, *, sheet: str | None = None) -> pd.DataFrame:
    """Read a CSV, Parquet or Excel data file.

    Parameters
    ----------
    path : str or Path
        The data file; its name ending chooses the reader (:data:`SUPPORTED_TYPES`).
    sheet : str, optional
        Excel only: the sheet to read (default: the first). The sheet read is
        recorded in ``DataFrame.attrs["sheet"]``.

    Returns
    -------
    pandas.DataFrame
        One column per data column (names stripped), rows in file order with a
        default index (row ``i`` is file row ``i + 2``).

    Raises
    ------
    DataError
        With one message naming the file, the problem and the fix: missing or
        unreadable file, unsupported type, text that is not UTF-8, a CSV row
        with the wrong number of cells, a blank or repeated column name, no
        data rows.
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix == ".xls":
        _read_bytes(path)  # a missing file is reported as missing first
        raise DataError(f"cannot read '{path.name}': the old Excel format (.xls) is not "
                        "supported; save it as an Excel workbook (.xlsx) or as CSV UTF-8")
    if suffix not in SUPPORTED_TYPES:
        grouped: dict[str, list[str]] = {}
        for ending, kind in SUPPORTED_TYPES.items():
            grouped.setdefault(kind, []).append(ending)
        named = [f"{kind} ({', '.join(endings)})" for kind, endings in grouped.items()]
        kinds = ", ".join(named[:-1]) + " or " + named[-1]
        raise DataError(f"cannot read '{path.name}': unsupported file type "
                        f"'{suffix or '(no ending)'}'; use {kinds}")
    if suffix == ".csv":
        rows = _read_csv(path)
    elif suffix == ".parquet":
        return _finish(_read_parquet(path), path)
    else:
        rows = _read_excel(path, sheet)
    return _finish(_with_header(rows, path), path)


def _csv_text(path: Path) -> str:
    data = _read_bytes(path)
    if data.startswith(_UTF16_BOMS):
        raise DataError(f"cannot read '{path.name}': it is UTF-16 text; save it as 'CSV UTF-8'")
    data = data.removeprefix(_UTF8_BOM)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise DataError(
            f"cannot read '{path.name}': it is not UTF-8 text (byte 0x{data[exc.start]:02x} on "
            f"line {line} cannot be decoded); save it as 'CSV UTF-8' and try again"
        ) from None
    if not text.strip():
        raise DataError(f"cannot read '{path.name}': the file is empty")
    header = text.splitlines()[0]
    if "," not in header and (";" in header or "\t" in header):
        sep = "semicolons" if ";" in header else "tabs"
        raise DataError(f"cannot read '{path.name}': its columns look separated by {sep}; "
                        "calcbuilder reads comma-separated files: save it as CSV "
                        "(comma-separated, UTF-8)")
    return text


def _read_csv(path: Path) -> pd.DataFrame:
    import pandas as pd

    text = _csv_text(path)
    try:
        return pd.read_csv(io.StringIO(text), header=None, dtype=str, keep_default_na=False,
                           skip_blank_lines=False)
    except pd.errors.ParserError as exc:
        found = _FIELDS.search(str(exc))
        if found:
            expected, line, saw = found.groups()
            raise DataError(
                f"cannot read '{path.name}' as CSV: row {line} has {saw} cells but the rows "
                f"before it have {expected}; look for an unquoted comma or a missing cell in "
                f"that row ({ROW_NOTE})"
            ) from None
        raise DataError(f"cannot read '{path.name}' as CSV: {exc}") from None


def _read_excel(path: Path, sheet: str | None) -> pd.DataFrame:
    import pandas as pd

    _read_bytes(path)  # missing or unreadable: the plain message first
    try:
        frame = pd.read_excel(path, sheet_name=sheet if sheet is not None else 0, header=None,
                              dtype=object, engine="openpyxl")
    except (ValueError, KeyError) as exc:
        if sheet is not None and "not found" in str(exc):
            raise DataError(f"'{path.name}' has no sheet '{sheet}'; its sheets are: "
                            f"{', '.join(_sheet_names(path))}") from None
        raise DataError(f"cannot read '{path.name}' as an Excel workbook: {exc}") from None
    except Exception as exc:  # openpyxl and zipfile raise many types for a damaged workbook
        raise DataError(f"cannot read '{path.name}' as an Excel workbook (.xlsx): "
                        f"{type(exc).__name__}: {exc}") from None
    frame.attrs["sheet"] = sheet if sheet is not None else _sheet_names(path)[0]
    return frame


def _sheet_names(path: Path) -> list[str]:
    from openpyxl import load_workbook

    book = load_workbook(path, read_only=True)
    try:
        return list(book.sheetnames)
    finally:
        book.close()


def _read_parquet(path: Path) -> pd.DataFrame:
    import pandas as pd

    _read_bytes(path)
    try:
        frame = pd.read_parquet(path)
    except ImportError:
        raise DataError("reading Parquet files needs the pyarrow package: install it with "
                        "pip install 'calcbuilder[parquet]', or save the data as CSV") from None
    except Exception as exc:  # pyarrow raises its own error types for damaged files
        raise DataError(f"cannot read '{path.name}' as Parquet: {exc}") from None
    frame.columns = [_column_name(c) for c in frame.columns]
    return frame.reset_index(drop=True)


def _column_name(value: Any) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return ""
    if isinstance(value, float) and value.is_integer():
        value = int(value)
    return str(value).strip()


def _with_header(rows: pd.DataFrame, path: Path) -> pd.DataFrame:
    """Use the first row as column names."""
    if rows.shape[0] == 0:
        raise DataError(f"cannot read '{path.name}': the file is empty")
    names = [_column_name(v) for v in rows.iloc[0].tolist()]
    if not any(names):
        raise DataError(f"cannot read '{path.name}': row 1 is empty; the first row must hold "
                        "the column names")
    frame = rows.iloc[1:].reset_index(drop=True)
    frame.columns = names
    frame.attrs.update(rows.attrs)
    return frame


def _finish(frame: pd.DataFrame, path: Path) -> pd.DataFrame:
    """Check the column names and drop completely empty rows at the end."""
    names = [str(c) for c in frame.columns]
    blank = [k + 1 for k, name in enumerate(names) if not name]
    if blank:
        raise DataError(f"cannot read '{path.name}': column {blank[0]} has no name in the header "
                        "row (row 1); every column needs a name")
    seen: dict[str, int] = {}
    for k, name in enumerate(names):
        if name in seen:
            raise DataError(f"cannot read '{path.name}': the column name '{name}' appears more "
                            f"than once (columns {seen[name] + 1} and {k + 1}); names must be "
                            "unique")
        seen[name] = k
    empty = empty_rows(frame)
    last = len(empty)
    while last > 0 and empty[last - 1]:
        last -= 1
    frame = frame.iloc[:last]
    if frame.shape[0] == 0:
        raise DataError(f"cannot read '{path.name}': it has a header row but no data rows")
    return frame


def empty_rows(frame: pd.DataFrame) -> list[bool]:
    """True for each row whose every cell is missing or blank text."""
    import numpy as np

    blank = np.ones(frame.shape[0], dtype=bool)
    for k in range(frame.shape[1]):
        column = frame.iloc[:, k]
        empty = column.isna().to_numpy()
        if column.dtype == object:
            text = column.map(lambda v: isinstance(v, str))
            stripped = column.where(text, "x").astype(str).str.strip()
            empty |= (text & stripped.eq("")).to_numpy(dtype=bool)
        blank &= empty
    return [bool(x) for x in blank.tolist()]
