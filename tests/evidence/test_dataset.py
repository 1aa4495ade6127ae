"""Reading data files: CSV, Parquet and Excel written by pandas to temporary files; every
refusal's message."""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from calcbuilder.demo.scenario import make_cohort
from calcbuilder.evidence import DataError, file_sha256, read_table
from calcbuilder.evidence.dataset import file_row


def demo_frame() -> pd.DataFrame:
    """The synthetic development cohort with its defects (missing values, wrong units)."""
    return pd.DataFrame(make_cohort("development").raw)


def refusal(path: Path, **kwargs: str) -> str:
    with pytest.raises(DataError) as caught:
        read_table(path, **kwargs)
    return str(caught.value)


# --- reading each type -------------------------------------------------------------------------


def test_csv_cells_are_text_as_written(tmp_path: Path) -> None:
    path = tmp_path / "d.csv"
    path.write_text("age , sex,score\n70,m,1.50\n71,f,\n", encoding="utf-8")
    df = read_table(path)
    assert list(df.columns) == ["age", "sex", "score"]
    assert df.to_dict("list") == {"age": ["70", "71"], "sex": ["m", "f"], "score": ["1.50", ""]}


def test_csv_with_byte_order_mark(tmp_path: Path) -> None:
    path = tmp_path / "bom.csv"
    path.write_bytes(b"\xef\xbb\xbfage,sex\n70,m\n")
    assert list(read_table(path).columns) == ["age", "sex"]


def test_csv_of_the_demo_cohort(tmp_path: Path) -> None:
    df = demo_frame()
    path = tmp_path / "demo.csv"
    df.to_csv(path, index=False)
    back = read_table(path)
    assert back.shape == df.shape
    assert list(back.columns) == list(df.columns)
    assert back["asa"].tolist() == df["asa"].tolist()
    np.testing.assert_array_equal(pd.to_numeric(back["age"]).to_numpy(), df["age"].to_numpy())


def test_parquet_round_trip(tmp_path: Path) -> None:
    df = demo_frame()
    path = tmp_path / "demo.parquet"
    df.to_parquet(path, index=False)
    back = read_table(path)
    pd.testing.assert_frame_equal(back, df)


def test_excel_round_trip(tmp_path: Path) -> None:
    df = demo_frame().head(200)
    path = tmp_path / "demo.xlsx"
    df.to_excel(path, index=False, sheet_name="patients")
    back = read_table(path)
    assert back.attrs["sheet"] == "patients"
    assert list(back.columns) == list(df.columns)
    assert back.shape == df.shape
    np.testing.assert_array_equal(back["creatinine"].to_numpy(dtype=float),
                                  df["creatinine"].to_numpy())
    assert back["asa"].tolist() == df["asa"].tolist()


def test_excel_sheet_choice(tmp_path: Path) -> None:
    path = tmp_path / "two.xlsx"
    with pd.ExcelWriter(path) as writer:
        pd.DataFrame({"notes": ["codebook"]}).to_excel(writer, sheet_name="about", index=False)
        pd.DataFrame({"age": [70, 80]}).to_excel(writer, sheet_name="data", index=False)
    assert list(read_table(path).columns) == ["notes"]
    assert read_table(path, sheet="data")["age"].tolist() == [70, 80]
    assert refusal(path, sheet="Data") == ("'two.xlsx' has no sheet 'Data'; its sheets are: "
                                           "about, data")


def test_trailing_empty_rows_dropped_others_kept(tmp_path: Path) -> None:
    path = tmp_path / "gaps.csv"
    path.write_text("a,b\n1,2\n,\n3,4\n,\n\n", encoding="utf-8")
    df = read_table(path)
    assert df["a"].tolist() == ["1", "", "3"]


def test_file_row_numbers_match_spreadsheet_rows() -> None:
    assert file_row(0) == 2  # the header is row 1


# --- refusals ----------------------------------------------------------------------------------


def test_missing_file_and_folder(tmp_path: Path) -> None:
    assert refusal(tmp_path / "none.csv") == f"data file not found: {tmp_path / 'none.csv'}"
    folder = tmp_path / "data.csv"
    folder.mkdir()
    assert refusal(folder) == f"{folder} is a folder, not a data file"


def test_unsupported_types(tmp_path: Path) -> None:
    path = tmp_path / "data.sav"
    path.write_bytes(b"x")
    assert refusal(path) == ("cannot read 'data.sav': unsupported file type '.sav'; use CSV "
                             "(.csv), Parquet (.parquet) or Excel (.xlsx, .xlsm)")
    old = tmp_path / "old.xls"
    old.write_bytes(b"x")
    assert refusal(old) == ("cannot read 'old.xls': the old Excel format (.xls) is not "
                            "supported; save it as an Excel workbook (.xlsx) or as CSV UTF-8")
    bare = tmp_path / "data"
    bare.write_bytes(b"x")
    assert "unsupported file type '(no ending)'" in refusal(bare)


def test_undecodable_bytes(tmp_path: Path) -> None:
    path = tmp_path / "latin.csv"
    path.write_bytes("name,age\nJosé,70\n".encode("latin-1"))
    assert refusal(path) == ("cannot read 'latin.csv': it is not UTF-8 text (byte 0xe9 on line 2 "
                             "cannot be decoded); save it as 'CSV UTF-8' and try again")
    wide = tmp_path / "wide.csv"
    wide.write_bytes("age\n70\n".encode("utf-16"))
    assert refusal(wide) == "cannot read 'wide.csv': it is UTF-16 text; save it as 'CSV UTF-8'"


def test_semicolon_separated(tmp_path: Path) -> None:
    path = tmp_path / "semi.csv"
    path.write_text("age;creatinine\n70;1,1\n", encoding="utf-8")
    assert refusal(path) == ("cannot read 'semi.csv': its columns look separated by semicolons; "
                             "calcbuilder reads comma-separated files: save it as CSV "
                             "(comma-separated, UTF-8)")


def test_ragged_row(tmp_path: Path) -> None:
    path = tmp_path / "ragged.csv"
    path.write_text("age,sodium\n70,139\n71,1,39\n", encoding="utf-8")
    assert refusal(path) == ("cannot read 'ragged.csv' as CSV: row 3 has 3 cells but the rows "
                             "before it have 2; look for an unquoted comma or a missing cell in "
                             "that row (header = row 1)")


def test_empty_and_header_only(tmp_path: Path) -> None:
    empty = tmp_path / "empty.csv"
    empty.write_text("\n\n", encoding="utf-8")
    assert refusal(empty) == "cannot read 'empty.csv': the file is empty"
    header = tmp_path / "header.csv"
    header.write_text("age,sex\n", encoding="utf-8")
    assert refusal(header) == "cannot read 'header.csv': it has a header row but no data rows"


def test_column_names(tmp_path: Path) -> None:
    path = tmp_path / "dup.csv"
    path.write_text("age,sex,age\n1,2,3\n", encoding="utf-8")
    assert refusal(path) == ("cannot read 'dup.csv': the column name 'age' appears more than "
                             "once (columns 1 and 3); names must be unique")
    path.write_text("age,,sex\n1,2,3\n", encoding="utf-8")
    assert refusal(path) == ("cannot read 'dup.csv': column 2 has no name in the header row "
                             "(row 1); every column needs a name")
    sheet = tmp_path / "blank.xlsx"
    pd.DataFrame([[None, None], ["age", "sex"], [70, "m"]]).to_excel(sheet, index=False,
                                                                      header=False)
    assert refusal(sheet) == ("cannot read 'blank.xlsx': row 1 is empty; the first row must hold "
                              "the column names")


def test_damaged_binary_files(tmp_path: Path) -> None:
    book = tmp_path / "broken.xlsx"
    book.write_bytes(b"this is not a workbook")
    assert refusal(book).startswith("cannot read 'broken.xlsx' as an Excel workbook (.xlsx): ")
    table = tmp_path / "broken.parquet"
    table.write_bytes(b"this is not parquet")
    assert refusal(table).startswith("cannot read 'broken.parquet' as Parquet: ")


# --- checksum ----------------------------------------------------------------------------------


def test_file_sha256(tmp_path: Path) -> None:
    path = tmp_path / "d.csv"
    data = b"age\n" + b"70\n" * 600_000  # more than one read block
    path.write_bytes(data)
    assert file_sha256(path) == hashlib.sha256(data).hexdigest()
    with pytest.raises(DataError, match=r"^data file not found: "):
        file_sha256(tmp_path / "gone.csv")
