"""Tests of gpctools.io: user sheets and chromatogram exports in many dialects.

All test files are written into ``tmp_path`` from Python, so every dialect is visible here.
Expected values are the values written ("derived": a reader must return what was
written); float comparisons use the round-trip tolerance stated beside them.
"""

from __future__ import annotations

import io
import zipfile
from pathlib import Path

import pandas as pd
import pytest

from gpctools.errors import InputFormatError
from gpctools.io import read_sheet, sheet_row_number

# ============================================================================ helpers


def write_xlsx(path: Path, sheets: dict[str, list[list[object]]]) -> Path:
    """Write a workbook with openpyxl; each sheet is a list of rows (None = empty cell)."""
    import openpyxl

    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    for name, rows in sheets.items():
        ws = wb.create_sheet(name)
        for r, row in enumerate(rows, start=1):
            for c, value in enumerate(row, start=1):
                if value is not None:
                    ws.cell(row=r, column=c, value=value)
    wb.save(path)
    return path


# ============================================================================ read_sheet


def test_sheet_semicolon_utf8_bom_decimal_comma(tmp_path: Path) -> None:
    p = tmp_path / "runs.csv"
    p.write_text(
        "\n sample ; ratio [A]/[M] [-] ;note;\n\nr1;0,01;first\n;;\nr2;0,02;\n",
        encoding="utf-8-sig",
    )
    df = read_sheet(p)
    assert list(df.columns) == ["sample", "ratio [A]/[M] [-]", "note"]
    assert df["sample"].tolist() == ["r1", "r2"]
    # derived: 0,01 with a decimal comma is 0.01; exact because both parse the same text.
    assert df["ratio [A]/[M] [-]"].tolist() == [0.01, 0.02]
    assert df.attrs["source_rows"] == [4, 6]
    assert df.attrs["header_row"] == 2
    assert sheet_row_number(df, 1) == 6
    assert pd.isna(df.loc[1, "note"])


def test_sheet_comma_keeps_types(tmp_path: Path) -> None:
    p = tmp_path / "batch.csv"
    p.write_text('file,injection,"label, long",volume [uL]\na.csv,1,"x, y",20.5\nb.csv,2,z,30\n')
    df = read_sheet(p)
    assert list(df.columns) == ["file", "injection", "label, long", "volume [uL]"]
    assert df["injection"].tolist() == [1, 2]
    assert pd.api.types.is_integer_dtype(df["injection"])
    assert df["label, long"].tolist() == ["x, y", "z"]
    assert df["volume [uL]"].tolist() == [20.5, 30.0]


def test_sheet_tab_utf16(tmp_path: Path) -> None:
    p = tmp_path / "spec.txt"
    p.write_text("quantity\tlow\thigh\nMn [g/mol]\t1000\t2000\n", encoding="utf-16")
    df = read_sheet(p)
    assert df.columns.tolist() == ["quantity", "low", "high"]
    assert df["low"].tolist() == [1000]


def test_sheet_cp1252_degree_sign(tmp_path: Path) -> None:
    p = tmp_path / "recipe.csv"
    p.write_bytes("name;T [°C]\nrun A;60\n".encode("cp1252"))
    df = read_sheet(p)
    assert df.columns.tolist() == ["name", "T [°C]"]


def test_sheet_xlsx_first_and_named_sheet(tmp_path: Path) -> None:
    p = write_xlsx(
        tmp_path / "runs.xlsx",
        {
            "runs": [
                [None],
                [None, " sample ", "ratio [-]"],
                [None, "r1", 0.01],
                [],
                [None, "r2", 0.02],
            ],
            "other": [["a", "b"], [1, 2]],
        },
    )
    df = read_sheet(p)
    assert df.columns.tolist() == ["sample", "ratio [-]"]
    assert df["ratio [-]"].tolist() == [0.01, 0.02]
    assert df.attrs["source_rows"] == [3, 5]
    assert df.attrs["sheet"] == "runs"
    df2 = read_sheet(p, sheet="other")
    assert df2.columns.tolist() == ["a", "b"]
    assert read_sheet(p, sheet=1).columns.tolist() == ["a", "b"]


def test_sheet_wrong_sheet_lists_available(tmp_path: Path) -> None:
    p = write_xlsx(tmp_path / "w.xlsx", {"runs": [["a"], [1]], "notes": [["b"]]})
    with pytest.raises(InputFormatError) as exc:
        read_sheet(p, sheet="Runz")
    msg = str(exc.value)
    assert "w.xlsx" in msg and "'runs'" in msg and "'notes'" in msg
    with pytest.raises(InputFormatError, match="out of range"):
        read_sheet(p, sheet=5)


def test_sheet_formula_without_saved_value(tmp_path: Path) -> None:
    p = write_xlsx(tmp_path / "f.xlsx", {"s": [["a", "b"], [1, "=A2*2"]]})
    with pytest.raises(InputFormatError) as exc:
        read_sheet(p)
    assert "B2" in str(exc.value) and exc.value.row == 2


def test_sheet_duplicate_headers(tmp_path: Path) -> None:
    p = tmp_path / "d.csv"
    p.write_text("sample,Mn,mn\nx,1,2\n")
    with pytest.raises(InputFormatError) as exc:
        read_sheet(p)
    assert "d.csv" in str(exc.value) and "twice" in str(exc.value) and exc.value.row == 1


def test_sheet_value_without_header(tmp_path: Path) -> None:
    p = tmp_path / "h.csv"
    p.write_text("a,b\n1,2\n3,4,5\n")
    with pytest.raises(InputFormatError) as exc:
        read_sheet(p)
    assert exc.value.row == 3 and "no header" in str(exc.value)


@pytest.mark.parametrize(
    ("name", "content", "needle"),
    [
        ("missing.csv", None, "not found"),
        ("empty.csv", b"", "empty"),
        ("blank.csv", b"\n \n\t\n", "empty"),
        ("text.xlsx", b"a,b\n1,2\n", "rename it to .csv"),
        ("image.csv", b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "PNG"),
        ("old.xls", b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 100, ".xlsx"),
        ("bin.csv", bytes(range(256)) * 4, "binary"),
    ],
)
def test_sheet_bad_files(tmp_path: Path, name: str, content: bytes | None, needle: str) -> None:
    p = tmp_path / name
    if content is not None:
        p.write_bytes(content)
    with pytest.raises(InputFormatError) as exc:
        read_sheet(p)
    assert name in str(exc.value) and needle in str(exc.value)


def test_sheet_zip_not_workbook(tmp_path: Path) -> None:
    p = tmp_path / "z.xlsx"
    with zipfile.ZipFile(p, "w") as zf:
        zf.writestr("hello.txt", "hi")
    with pytest.raises(InputFormatError, match="not an .xlsx workbook"):
        read_sheet(p)


def test_sheet_zip_bomb_refused(tmp_path: Path) -> None:
    p = tmp_path / "bomb.xlsx"
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", compression=zipfile.ZIP_DEFLATED) as zf:
        zf.writestr("[Content_Types].xml", "<x/>")
        zf.writestr("xl/workbook.xml", "<x/>")
        zf.writestr("xl/worksheets/sheet1.xml", b"\x00" * 20_000_000)  # ~1000-fold
    p.write_bytes(buf.getvalue())
    with pytest.raises(InputFormatError, match="zip bomb"):
        read_sheet(p)
