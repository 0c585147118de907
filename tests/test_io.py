"""Tests of gpctools.io: user sheets and chromatogram exports in many dialects.

All test files are written into ``tmp_path`` from Python, so every dialect is visible here.
Expected values are the values written ("derived": a reader must return what was
written); float comparisons use the round-trip tolerance stated beside them.
"""

from __future__ import annotations

import io
import json
import zipfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from gpctools.errors import DataError, InputFormatError, MethodError
from gpctools.io import (
    MIN_POINTS,
    Chromatogram,
    ReaderWarning,
    read_chromatogram,
    read_sheet,
    sheet_row_number,
)

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


# ============================================================================ chromatograms

X = np.round(np.linspace(12.0, 20.0, 25), 4)  # elution volume [mL], 25 slices
Y = np.round(np.exp(-0.5 * ((X - 16.0) / 1.2) ** 2), 6)  # a Gaussian peak [mV]


def table(
    sep: str = ",",
    decimal: str = ".",
    header: str | list[str] | None = "Volume (mL),RI (mV)",
    x: np.ndarray = X,
    y: np.ndarray = Y,
    extra: list[str] | None = None,
) -> str:
    """Text of a two-column table; a header string is split at ',' and joined with ``sep``."""
    if isinstance(header, str):
        header = header.split(",")
    lines = [] if header is None else [sep.join(header)]
    for a, b in zip(x, y, strict=True):
        row = [repr(float(a)), repr(float(b))] + (extra or [])
        if decimal == ",":
            row = [c.replace(".", ",") for c in row]
        lines.append(sep.join(row))
    return "\n".join(lines) + "\n"


def put(tmp_path: Path, name: str, text: str, encoding: str = "utf-8") -> Path:
    p = tmp_path / name
    p.write_bytes(text.encode(encoding))
    return p


def check_xy(c: Chromatogram, x: np.ndarray = X, y: np.ndarray = Y) -> None:
    # derived: the reader must return the values written; repr() text round-trips exactly,
    # rtol 1e-15 allows the 1-ulp rounding of pandas' C float parser.
    np.testing.assert_allclose(c.x, x, rtol=1e-15, atol=0)
    np.testing.assert_allclose(c.signal, y, rtol=1e-15, atol=0)
    assert c.x.dtype == np.float64 and c.signal.dtype == np.float64


def test_comma_point_with_metadata(tmp_path: Path) -> None:
    meta = (
        "Sample: PS 12\nFlow rate = 1.0 mL/min\nOperator;J. Doe\nColumn\tmixed bed\n"
        "Batch,42\n[Raw data]\n\n"
    )
    p = put(tmp_path, "run1.csv", meta + table())
    c = read_chromatogram(p)
    check_xy(c)
    assert (c.x_kind, c.x_unit) == ("volume", "mL")
    assert (c.x_column, c.signal_column) == ("Volume (mL)", "RI (mV)")
    assert c.header_row == 8
    assert c.metadata == {
        "Sample": "PS 12",
        "Flow rate": "1.0 mL/min",
        "Operator": "J. Doe",
        "Column": "mixed bed",
        "Batch": "42",
        "[Raw data]": "",
    }
    assert c.path == str(p)
    json.dumps(c.summary())  # JSON-safe


@pytest.mark.parametrize(
    ("sep", "decimal", "encoding"),
    [
        (";", ",", "utf-8"),
        (";", ".", "utf-8-sig"),
        ("\t", ",", "utf-16"),  # Python writes a BOM, little-endian here
        ("\t", ".", "utf-16-le-bom"),
        ("\t", ",", "utf-16-be-bom"),
        (",", ".", "cp1252"),
        (" ", ".", "utf-8"),
        (" ", ",", "utf-8"),
    ],
)
def test_dialects(tmp_path: Path, sep: str, decimal: str, encoding: str) -> None:
    text = "Temperature: 35 °C\n" + table(sep, decimal, header="Volume(mL),RI(mV)")
    if encoding == "utf-16-le-bom":
        data = b"\xff\xfe" + text.encode("utf-16-le")
    elif encoding == "utf-16-be-bom":
        data = b"\xfe\xff" + text.encode("utf-16-be")
    else:
        data = text.encode(encoding)
    p = tmp_path / "trace.txt"
    p.write_bytes(data)
    c = read_chromatogram(p)
    check_xy(c)
    assert c.metadata == {"Temperature": "35 °C"}
    assert c.x_unit == "mL"


def test_crlf_and_cr_line_ends(tmp_path: Path) -> None:
    text = "Info: a\n" + table(";", ",")
    check_xy(read_chromatogram(put(tmp_path, "crlf.csv", text.replace("\n", "\r\n"))))
    check_xy(read_chromatogram(put(tmp_path, "cr.csv", text.replace("\n", "\r"))))


def test_quoted_cells_and_trailing_separators(tmp_path: Path) -> None:
    lines = ['"Sample","PS 1"', '"Volume (mL)","RI (mV)",']
    lines += [f'"{a!r}","{b!r}",' for a, b in zip(X.tolist(), Y.tolist(), strict=True)]
    c = read_chromatogram(put(tmp_path, "q.csv", "\n".join(lines) + "\n"))
    check_xy(c)
    assert c.metadata == {"Sample": "PS 1"}


def test_units_row_under_header(tmp_path: Path) -> None:
    text = "Time;Signal\nmin;mV\n" + table(";", ",", header=None)
    c = read_chromatogram(put(tmp_path, "u.csv", text))
    assert (c.x_kind, c.x_unit, c.x_column, c.header_row) == ("time", "min", "Time (min)", 1)
    check_xy(c)


def test_decreasing_x_is_reversed(tmp_path: Path) -> None:
    c = read_chromatogram(put(tmp_path, "rev.csv", table(x=X[::-1], y=Y[::-1])))
    check_xy(c)  # both arrays reversed together


def test_integer_first_rows_then_decimal_comma(tmp_path: Path) -> None:
    x = np.arange(20.0)
    y = np.r_[np.arange(10.0), np.arange(10.0) + 0.5]
    lines = ["Volume (mL);RI"] + [
        f"{int(a)};{b:g}".replace(".", ",") for a, b in zip(x, y, strict=True)
    ]
    c = read_chromatogram(put(tmp_path, "int.csv", "\n".join(lines) + "\n"))
    check_xy(c, x, y)


@pytest.mark.parametrize(
    ("header", "kind", "unit"),
    [
        ("Time (min)", "time", "min"),
        ("Retention time [min]", "time", "min"),
        ("RT/min", "time", "min"),
        ("t [s]", "time", "s"),
        ("Time in s", "time", "s"),
        ("Time, sec", "time", "s"),
        ("min", "time", "min"),
        ("Zeit (min)", "time", "min"),
        ("Elution volume (mL)", "volume", "mL"),
        ("Volume [ml]", "volume", "mL"),
        ("Ve/mL", "volume", "mL"),
        ("V (mL)", "volume", "mL"),
        ("Volumen", "volume", "mL"),
        ("Retention volume", "volume", "mL"),
        ("mL", "volume", "mL"),
    ],
)
def test_x_header_words(tmp_path: Path, header: str, kind: str, unit: str) -> None:
    c = read_chromatogram(put(tmp_path, "h.tsv", table("\t", ".", header=[header, "Signal"])))
    assert (c.x_kind, c.x_unit, c.x_column) == (kind, unit, header)


@pytest.mark.parametrize(
    ("headers", "chosen"),
    [
        (["Volume (mL)", "LS 90", "UV 254 nm", "RI (mV)"], "RI (mV)"),
        (["Volume (mL)", "LS", "UV254"], "UV254"),
        (["Volume (mL)", "Viscometer", "dRI"], "dRI"),
        (["Volume (mL)", "Refractive index", "Response"], "Refractive index"),
        (["Slice", "Time (min)", "Detector A", "Detector B"], "Detector A"),
        (["Time (min)", "Volume (mL)", "ch1", "ch2"], "ch1"),
        (["Volume (mL)", "log M", "intensity"], "intensity"),
    ],
)
def test_signal_column_preference(tmp_path: Path, headers: list[str], chosen: str) -> None:
    rows = [";".join(headers)]
    for i, (a, b) in enumerate(zip(X, Y, strict=True)):
        cells = []
        for h in headers:
            if h in ("Volume (mL)", "Time (min)"):
                cells.append(repr(float(a)))
            elif h == "Slice":
                cells.append(str(i))
            elif h == chosen:
                cells.append(repr(float(b)))
            else:
                cells.append("7.5")
        rows.append(";".join(cells))
    c = read_chromatogram(put(tmp_path, "d.csv", "\n".join(rows) + "\n"))
    assert c.signal_column == chosen
    check_xy(c)
    if "Volume (mL)" in headers:
        assert c.x_column == "Volume (mL)"  # a volume column is preferred to a time column


def test_columns_by_name_and_index(tmp_path: Path) -> None:
    text = "Volume (mL),RI (mV),UV (mV)\n" + "".join(
        f"{a!r},{b!r},{2 * b!r}\n" for a, b in zip(X.tolist(), Y.tolist(), strict=True)
    )
    p = put(tmp_path, "c.csv", text)
    assert read_chromatogram(p, signal_column="uv (mv)").signal_column == "UV (mV)"
    assert read_chromatogram(p, signal_column="UV").signal_column == "UV (mV)"  # without unit
    c = read_chromatogram(p, x_column=0, signal_column=2)
    check_xy(c, X, 2 * Y)
    with pytest.raises(InputFormatError) as exc:
        read_chromatogram(p, signal_column="LS")
    msg = str(exc.value)
    assert "c.csv" in msg and "'LS'" in msg and "'RI (mV)'" in msg and "'UV (mV)'" in msg
    with pytest.raises(InputFormatError, match="out of range"):
        read_chromatogram(p, signal_column=5)


def test_footer_lines_tolerated(tmp_path: Path) -> None:
    text = table(";", ",") + "\nEnd of data\n\nPeak table\nPeak;Start;End\n1;12,5;18,0\n"
    check_xy(read_chromatogram(put(tmp_path, "f.csv", text)))


def test_headerless_needs_unit(tmp_path: Path) -> None:
    p = put(tmp_path, "raw.dat", table(" ", ".", header=None))
    with pytest.raises(InputFormatError) as exc:
        read_chromatogram(p)
    assert "raw.dat" in str(exc.value) and "x_unit" in str(exc.value)
    c = read_chromatogram(p, x_unit="min")
    assert (c.x_kind, c.x_unit, c.header_row) == ("time", "min", 0)
    assert (c.x_column, c.signal_column) == ("column 0", "column 1")
    check_xy(c)
    p2 = put(tmp_path, "raw2.asc", "X unit: mL\n" + table("\t", ".", header=None))
    assert read_chromatogram(p2).x_unit == "mL"


def test_time_without_unit_read_from_range_or_refused(tmp_path: Path) -> None:
    # An SEC run lasts minutes to about an hour (common practice): a unitless time column
    # ending at <= 100 is minutes, at >= 300 seconds, in between it is refused.
    n = 50
    minutes = put(tmp_path, "t_min.csv", table(header="Time,RI", x=np.linspace(5.0, 30.0, n), y=np.ones(n)))
    with pytest.warns(ReaderWarning, match="read as minutes"):
        c = read_chromatogram(minutes)
    assert (c.x_kind, c.x_unit) == ("time", "min")
    assert c.to_volume(1.0)[-1] == pytest.approx(30.0)
    seconds = put(tmp_path, "t_s.csv", table(header="Time,RI", x=np.linspace(300.0, 1800.0, n), y=np.ones(n)))
    with pytest.warns(ReaderWarning, match="read as seconds"):
        assert read_chromatogram(seconds).x_unit == "s"
    unclear = put(tmp_path, "t_q.csv", table(header="Time,RI", x=np.linspace(20.0, 150.0, n), y=np.ones(n)))
    with pytest.raises(InputFormatError, match="x_unit='min'"):
        read_chromatogram(unclear)
    assert read_chromatogram(unclear, x_unit="s").x_unit == "s"


def test_unit_override_warns(tmp_path: Path) -> None:
    p = put(tmp_path, "w.csv", table(header="Time (min),RI"))
    with pytest.warns(ReaderWarning, match="x_unit='s'"):
        c = read_chromatogram(p, x_unit="s")
    assert c.x_unit == "s" and len(c.warnings) == 1


def test_forced_separator_and_decimal(tmp_path: Path) -> None:
    p = put(tmp_path, "x.txt", table(";", ","))
    check_xy(read_chromatogram(p, separator=";", decimal=","))
    with pytest.raises(InputFormatError, match="separator/decimal mark given"):
        read_chromatogram(p, separator="\t")
    with pytest.raises(MethodError) as exc:
        read_chromatogram(p, separator="|")
    assert exc.value.key == "separator"
    with pytest.raises(MethodError):
        read_chromatogram(p, decimal=";")
    with pytest.raises(MethodError) as exc2:
        read_chromatogram(p, x_unit="h")
    assert exc2.value.key == "x_unit"


def test_forced_encoding(tmp_path: Path) -> None:
    p = put(tmp_path, "e.csv", "Temp: 35 °C\n" + table(), encoding="latin-1")
    assert read_chromatogram(p, encoding="latin-1").metadata["Temp"] == "35 °C"
    with pytest.raises(InputFormatError, match="utf-8"):
        read_chromatogram(p, encoding="utf-8")


def test_unknown_extension_sniffed(tmp_path: Path) -> None:
    check_xy(read_chromatogram(put(tmp_path, "trace.export", table(";", ","))))


# ----------------------------------------------------------------------------- to_volume


def test_to_volume() -> None:
    t = np.linspace(10.0, 20.0, 11)
    c_min = Chromatogram("a", t, np.ones(11), "time", "min", "t", "RI")
    # derived: V = t [min] * F [mL/min]
    np.testing.assert_allclose(c_min.to_volume(0.8), t * 0.8, rtol=1e-15)
    c_s = Chromatogram("a", t * 60, np.ones(11), "time", "s", "t", "RI")
    # derived: V = t [s] / 60 * F
    np.testing.assert_allclose(c_s.to_volume(0.8), t * 0.8, rtol=1e-14)
    c_v = Chromatogram("a", t, np.ones(11), "volume", "mL", "V", "RI")
    np.testing.assert_array_equal(c_v.to_volume(None), t)
    for bad in (None, 0.0, -1.0, float("nan"), "fast"):
        with pytest.raises(MethodError) as exc:
            c_min.to_volume(bad)  # type: ignore[arg-type]
        assert exc.value.key == "flow.rate"


def test_chromatogram_is_immutable_and_checked() -> None:
    x = np.linspace(1.0, 2.0, 12)
    c = Chromatogram("a", x, np.ones(12), "volume", "mL", "V", "RI")
    with pytest.raises(ValueError):
        c.x[0] = 5.0  # read-only array
    x[0] = -1.0
    assert c.x[0] == 1.0  # a copy, the input is not shared
    with pytest.raises(DataError):
        Chromatogram("a", x[::-1], np.ones(12), "volume", "mL", "V", "RI")
    with pytest.raises(DataError):
        Chromatogram("a", np.linspace(1, 2, 12), np.ones(12), "volume", "min", "V", "RI")
    with pytest.raises(DataError):
        Chromatogram("a", np.linspace(1, 2, 12), np.ones(11), "volume", "mL", "V", "RI")


# ----------------------------------------------------------------------------- bad text


def bad(tmp_path: Path, name: str, text: str, **kw: object) -> InputFormatError:
    p = put(tmp_path, name, text)
    with pytest.raises(InputFormatError) as exc:
        read_chromatogram(p, **kw)  # type: ignore[arg-type]
    assert name in str(exc.value)
    return exc.value


def test_bad_no_numeric_table(tmp_path: Path) -> None:
    e = bad(tmp_path, "notes.txt", "This is a note\nabout a sample\n")
    assert "no table of numbers" in str(e)


def test_bad_too_few_points(tmp_path: Path) -> None:
    e = bad(tmp_path, "short.csv", table(x=X[:5], y=Y[:5]))
    assert "only 5 rows" in str(e) and str(MIN_POINTS) in str(e)


def test_bad_not_monotonic(tmp_path: Path) -> None:
    x = X.copy()
    x[10] = x[8]  # goes back at data row 10 -> line 12 (header on line 1)
    e = bad(tmp_path, "mono.csv", table(x=x))
    assert e.row == 12 and "line 12" in str(e) and "line 11" in str(e)


def test_bad_duplicate_x(tmp_path: Path) -> None:
    x = X.copy()
    x[6] = x[5]
    e = bad(tmp_path, "dup.csv", "Sample: a\n\n" + table(x=x))
    # lines: 1 metadata, 2 blank, 3 header, data row k on line k + 4
    assert e.row == 10 and "repeats" in str(e) and "line 9" in str(e)


def test_bad_monotonic_with_blank_lines_inside(tmp_path: Path) -> None:
    x = X.copy()
    x[15] = x[2]
    v = repr(float(X[5]))
    text = table(x=x).replace(f"\n{v},", f"\n\n{v},", 1)  # blank line before row 5
    assert text.count("\n\n") == 1
    e = bad(tmp_path, "blank.csv", text)
    assert e.row == 18  # row 15 -> line 17, +1 for the blank line


def test_bad_text_inside_table(tmp_path: Path) -> None:
    lines = table(";", ",").splitlines()
    lines.insert(8, "Detector overload")
    e = bad(tmp_path, "txt.csv", "\n".join(lines) + "\n")
    assert e.row == 9 and "'Detector overload'" in str(e) and "line 9" in str(e)


def test_bad_empty_cell(tmp_path: Path) -> None:
    lines = table(";", ",").splitlines()
    lines[7] = lines[7].split(";")[0] + ";"
    e = bad(tmp_path, "hole.csv", "\n".join(lines) + "\n")
    assert e.row == 8 and "missing" in str(e) and e.column == "RI (mV)"


def test_bad_truncated_last_line(tmp_path: Path) -> None:
    text = table(";", ",") + "20,5;\n"
    e = bad(tmp_path, "cut.csv", text)
    assert e.row == 27 and "missing" in str(e)


@pytest.mark.parametrize("value", ["inf", "nan", "-inf", "NaN"])
def test_bad_non_finite(tmp_path: Path, value: str) -> None:
    lines = table().splitlines()
    lines[4] = lines[4].split(",")[0] + "," + value
    e = bad(tmp_path, "nf.csv", "\n".join(lines) + "\n")
    assert e.row == 5 and "finite" in str(e)


def test_bad_wrong_decimal_mark(tmp_path: Path) -> None:
    lines = table(";", ",").splitlines()
    lines[6] = "13,5;0.25"
    e = bad(tmp_path, "mark.csv", "\n".join(lines) + "\n")
    assert e.row == 7 and "'0.25'" in str(e) and "decimal comma" in str(e)


@pytest.mark.parametrize(
    ("name", "content", "needle"),
    [
        ("missing.csv", None, "not found"),
        ("empty.csv", b"", "empty"),
        ("picture.csv", b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR" + b"\x00" * 50, "PNG"),
        ("renamed.xlsx", b"Volume;RI\n1;2\n", "rename it to .csv"),
        ("noise.csv", bytes(range(256)) * 8, "binary"),
        ("legacy.xls", b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 100, "save it as"),
        ("report.pdf.txt", b"%PDF-1.4\n%\xe2\xe3\xcf\xd3\n", "PDF"),
    ],
)
def test_bad_files(tmp_path: Path, name: str, content: bytes | None, needle: str) -> None:
    p = tmp_path / name
    if content is not None:
        p.write_bytes(content)
    with pytest.raises(InputFormatError) as exc:
        read_chromatogram(p)
    assert name in str(exc.value) and needle in str(exc.value)


def test_bad_zip_named_csv(tmp_path: Path) -> None:
    p = write_xlsx(tmp_path / "book.xlsx", {"s": [["a"]]})
    q = tmp_path / "book.csv"
    q.write_bytes(p.read_bytes())
    with pytest.raises(InputFormatError, match="rename it to .xlsx"):
        read_chromatogram(q)


# ----------------------------------------------------------------------------- xlsx


def xlsx_trace(tmp_path: Path, rows_extra: list[list[object]] | None = None) -> Path:
    data = [
        ["Sample:", "PS 12"],
        ["Flow rate (mL/min)", 1.0],
        ["Note: second detector attached"],
        [],
        [None, "Time [min]", "LS [mV]", "RI [mV]"],
    ]
    for a, b in zip(X.tolist(), Y.tolist(), strict=True):
        data.append([None, a, 9.0, str(b).replace(".", ",")])  # RI as decimal-comma text
    data += rows_extra or []
    return write_xlsx(tmp_path / "trace.xlsx", {"Summary": [["nothing here"]], "Slices": data})


def test_xlsx_metadata_second_sheet_numeric_text(tmp_path: Path) -> None:
    p = xlsx_trace(tmp_path, [[None, "End of data"]])
    for sheet in ("Slices", "slices", 1):
        c = read_chromatogram(p, sheet=sheet)
        check_xy(c)
        assert (c.x_kind, c.x_unit, c.signal_column, c.header_row) == ("time", "min", "RI [mV]", 5)
        assert c.sheet == "Slices"
        assert c.metadata == {
            "Sample": "PS 12",
            "Flow rate (mL/min)": "1",
            "Note": "second detector attached",
        }
    with pytest.raises(InputFormatError) as exc:
        read_chromatogram(p, sheet="Data")
    assert "'Summary'" in str(exc.value) and "'Slices'" in str(exc.value)
    # The first sheet holds no table: with no sheet chosen the first sheet that does is read.
    assert read_chromatogram(p).sheet == "Slices"
    with pytest.raises(InputFormatError, match="no table of numbers"):
        read_chromatogram(p, sheet="Summary")


def test_xlsx_text_cell_inside(tmp_path: Path) -> None:
    p = xlsx_trace(tmp_path)
    import openpyxl

    wb = openpyxl.load_workbook(p)
    wb["Slices"]["D12"] = "overload"
    wb.save(p)
    with pytest.raises(InputFormatError) as exc:
        read_chromatogram(p, sheet="Slices")
    assert "D12" in str(exc.value) and exc.value.row == 12 and "'overload'" in str(exc.value)


def test_xlsx_formula_without_value(tmp_path: Path) -> None:
    p = xlsx_trace(tmp_path)
    import openpyxl

    wb = openpyxl.load_workbook(p)
    wb["Slices"]["D9"] = "=C9*2"
    wb["Slices"]["C10"] = None
    wb.save(p)
    with pytest.raises(InputFormatError) as exc:
        read_chromatogram(p, sheet="Slices", signal_column="RI")
    assert "D9" in str(exc.value) and "formula" in str(exc.value)


def test_xlsx_empty_cell_and_decreasing(tmp_path: Path) -> None:
    data = [["Volume (mL)", "RI"]] + [
        [a, b] for a, b in zip(X[::-1].tolist(), Y[::-1].tolist(), strict=True)
    ]
    p = write_xlsx(tmp_path / "v.xlsx", {"a": data})
    check_xy(read_chromatogram(p))
    data[6][1] = None
    p = write_xlsx(tmp_path / "v2.xlsx", {"a": data})
    with pytest.raises(InputFormatError) as exc:
        read_chromatogram(p)
    assert "B7" in str(exc.value) and "empty" in str(exc.value)


# ----------------------------------------------------------------------------- property


@st.composite
def traces(draw: st.DrawFn) -> tuple[np.ndarray, np.ndarray]:
    n = draw(st.integers(MIN_POINTS, 60))
    steps = draw(st.lists(st.floats(1e-3, 10.0, allow_nan=False), min_size=n, max_size=n))
    start = draw(st.floats(-100.0, 100.0, allow_nan=False))
    x = start + np.cumsum(steps)
    if not (np.diff(x) > 0).all():  # floating-point ties after cumsum
        x = np.unique(x)
    y = np.asarray(
        draw(st.lists(st.floats(-1e6, 1e6, allow_nan=False), min_size=x.size, max_size=x.size))
    )
    return x, y


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    xy=traces(),
    dialect=st.sampled_from(
        [(",", "."), (";", ","), (";", "."), ("\t", "."), ("\t", ","), (" ", ".")]
    ),
    encoding=st.sampled_from(["utf-8", "utf-8-sig", "utf-16", "cp1252"]),
    header=st.sampled_from(["Volume (mL),RI (mV)", "Ve/mL,Signal", "V [ml],dRI", None]),
    meta=st.lists(st.sampled_from(["Sample: a", "Flow = 1", "Note", "Operator;B"]), max_size=4),
    reverse=st.booleans(),
    crlf=st.booleans(),
)
def test_round_trip_property(
    tmp_path_factory: pytest.TempPathFactory,
    xy: tuple[np.ndarray, np.ndarray],
    dialect: tuple[str, str],
    encoding: str,
    header: str | None,
    meta: list[str],
    reverse: bool,
    crlf: bool,
) -> None:
    x, y = xy
    assume(x.size >= MIN_POINTS)  # np.unique may drop ties below the reader's minimum
    sep, decimal = dialect
    if sep == " " and header is not None:
        header = header.replace(" ", "")
    body = table(sep, decimal, header, x[::-1] if reverse else x, y[::-1] if reverse else y)
    text = "".join(m + "\n" for m in meta) + body
    if crlf:
        text = text.replace("\n", "\r\n")
    p = tmp_path_factory.mktemp("rt") / "t.csv"
    p.write_bytes(text.encode(encoding))
    c = read_chromatogram(p, x_unit=None if header else "mL")
    # derived: written values come back; rtol 1e-15 = 1-ulp rounding of the C parser.
    np.testing.assert_allclose(c.x, x, rtol=1e-15, atol=0)
    np.testing.assert_allclose(c.signal, y, rtol=1e-15, atol=1e-300)


# ----------------------------------------------------------------------------- more dialects


def rows_of(sep: str = ";", decimal: str = ",") -> list[str]:
    return table(sep, decimal, header=None).splitlines()


def test_text_line_early_in_table(tmp_path: Path) -> None:
    rows = rows_of()
    text = "Sample: x\nVolume (mL);RI\n" + rows[0] + "\nDetector overload\n" + "\n".join(rows[1:])
    e = bad(tmp_path, "early.csv", text + "\n")
    assert e.row == 4 and "'Detector overload'" in str(e)


def test_bad_value_in_first_data_row(tmp_path: Path) -> None:
    rows = rows_of()
    rows[0] = "12,0;0.5"
    e = bad(tmp_path, "first.csv", "Volume (mL);RI\n" + "\n".join(rows) + "\n")
    assert e.row == 2 and "'0.5'" in str(e)


def test_text_flag_column_is_ignored(tmp_path: Path) -> None:
    rows = [r + (";ok" if i % 3 else ";") for i, r in enumerate(rows_of())]
    c = read_chromatogram(put(tmp_path, "flag.csv", "Volume (mL);RI;Flag\n" + "\n".join(rows)))
    check_xy(c)


def test_commented_header_and_spaces_after_commas(tmp_path: Path) -> None:
    body = "\n".join(f"{a!r}, {b!r}" for a, b in zip(X.tolist(), Y.tolist(), strict=True))
    c = read_chromatogram(put(tmp_path, "hash.csv", "# Volume (mL), RI (mV)\n" + body))
    assert c.x_column == "Volume (mL)"
    check_xy(c)
    body_ws = "\n".join(f"{a!r}  {b!r}" for a, b in zip(X.tolist(), Y.tolist(), strict=True))
    c2 = read_chromatogram(put(tmp_path, "hash.dat", "# Ve/mL  RI\n" + body_ws))
    assert (c2.x_column, c2.signal_column) == ("Ve/mL", "RI")


def test_header_then_blank_line_and_wider_header(tmp_path: Path) -> None:
    c = read_chromatogram(put(tmp_path, "b.csv", "Volume (mL);RI;UV;LS\n\n" + "\n".join(rows_of())))
    assert c.header_row == 1 and c.signal_column == "RI"
    check_xy(c)


def test_headerless_column_name_refused(tmp_path: Path) -> None:
    e = bad(tmp_path, "nohead.csv", "\n".join(rows_of()), x_column="Volume", x_unit="mL")
    assert "no header row" in str(e)


def test_same_answer_twice_and_file_untouched(tmp_path: Path) -> None:
    p = put(tmp_path, "same.csv", "Sample: a\n" + table(";", ","))
    before = p.read_bytes()
    a = read_chromatogram(str(p))
    b = read_chromatogram(p)
    np.testing.assert_array_equal(a.x, b.x)
    np.testing.assert_array_equal(a.signal, b.signal)
    assert a.summary() == b.summary() and p.read_bytes() == before


def test_long_export_6000_slices(tmp_path: Path) -> None:
    x = np.linspace(10.0, 25.0, 6000)
    y = np.exp(-0.5 * ((x - 17.0) / 0.8) ** 2)
    text = "Sample: long\n" + table("\t", ",", header="Time (min),RI (mV)", x=x, y=y)
    c = read_chromatogram(put(tmp_path, "long.txt", text, encoding="utf-16"))
    check_xy(c, x, y)
    assert c.x_unit == "min" and len(c) == 6000


def test_xlsx_headerless_and_zip_bomb(tmp_path: Path) -> None:
    data = [[a, b] for a, b in zip(X.tolist(), Y.tolist(), strict=True)]
    p = write_xlsx(tmp_path / "raw.xlsx", {"a": data})
    with pytest.raises(InputFormatError, match="x_unit"):
        read_chromatogram(p)
    c = read_chromatogram(p, x_unit="mL")
    check_xy(c)
    assert c.header_row == 0
    bomb = tmp_path / "bomb.xlsx"
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", compression=zipfile.ZIP_DEFLATED) as zf:
        zf.writestr("xl/workbook.xml", "<x/>")
        zf.writestr("xl/worksheets/sheet1.xml", b" " * 30_000_000)
    bomb.write_bytes(buf.getvalue())
    with pytest.raises(InputFormatError) as exc:
        read_chromatogram(bomb)
    assert "bomb.xlsx" in str(exc.value) and "zip bomb" in str(exc.value)


def test_xlsx_without_sheet_takes_first_sheet_with_a_table(tmp_path):
    # Instrument workbooks often open with an information sheet (common practice).
    from openpyxl import Workbook

    wb = Workbook()
    info = wb.active
    info.title = "Info"
    info.append(["Export of one injection"])
    ws = wb.create_sheet("Slices")
    ws.append(["Volume (mL)", "RI (mV)"])
    for i in range(20):
        ws.append([10.0 + 0.1 * i, float(i % 7)])
    p = tmp_path / "two_sheets.xlsx"
    wb.save(p)
    c = read_chromatogram(p)
    assert c.sheet == "Slices"
    assert c.x.size == 20
    with pytest.raises(InputFormatError, match="no table of numbers"):
        read_chromatogram(p, sheet="Info")


def _slices(n: int) -> list[list[object]]:
    return [["Volume (mL)", "RI (mV)"]] + [[10.0 + 0.1 * i, float(i % 7)] for i in range(n)]


def test_xlsx_no_table_anywhere_names_every_sheet_checked(tmp_path: Path) -> None:
    p = write_xlsx(tmp_path / "notes.xlsx", {"Info": [["Export of one injection"]],
                                             "Notes": [["operator", "B"]], "More": [["x"]]})
    with pytest.raises(InputFormatError) as exc:
        read_chromatogram(p)
    e = exc.value
    # The search over sheets is internal: the error leaves the reader as the public type,
    # with the first sheet's location and the count of the others.
    assert type(e) is InputFormatError
    assert e.sheet == "Info" and "no table of numbers" in e.message
    assert e.message.endswith("(nor in any of the other 2 sheet(s))")


def test_xlsx_only_no_table_moves_on_to_the_next_sheet(tmp_path: Path) -> None:
    # A first sheet with a real table that is too short is an error in that sheet: the
    # reader must not skip it for the next sheet (only "no table at all" moves on).
    p = write_xlsx(tmp_path / "short_first.xlsx", {"Short": _slices(MIN_POINTS - 5),
                                                   "Slices": _slices(20)})
    with pytest.raises(InputFormatError) as exc:
        read_chromatogram(p)
    assert exc.value.sheet == "Short" and f"only {MIN_POINTS - 5} rows" in str(exc.value)
    # A later sheet's own error is reported as it is, not replaced by the first sheet's.
    bad = _slices(20)
    bad[5][1] = "overload"
    p = write_xlsx(tmp_path / "bad_second.xlsx", {"Info": [["Export"]], "Slices": bad})
    with pytest.raises(InputFormatError) as exc:
        read_chromatogram(p)
    assert exc.value.sheet == "Slices" and "'overload'" in str(exc.value)


# ============================================================================ bundled exports


def test_bundled_exports_read_with_the_demo_method(sample_runs_dir: Path, demo_method) -> None:
    # The demo batch mixes dialects (CSV, TXT, XLSX; volume and time axes): each export it
    # names reads with the demo method's reader options, and its record spans the whole
    # calibrated range (the standards' peak volumes) once converted to volume.
    sheet = read_sheet(sample_runs_dir / "batch.csv")
    files = sorted(set(sheet["file"]))
    assert {Path(f).suffix for f in files} >= {".csv", ".txt", ".xlsx"}
    kinds = set()
    cal = demo_method.calibration
    for name in files:
        c = read_chromatogram(sample_runs_dir / name, **demo_method.import_options.as_kwargs())
        V = c.to_volume(demo_method.flow_rate)
        assert c.x.size >= MIN_POINTS and np.all(np.diff(c.x) > 0), name
        assert np.isfinite(c.signal).all(), name
        assert V[0] <= cal.v_min and V[-1] >= cal.v_max, (name, V[0], V[-1])
        kinds.add((c.x_kind, c.x_unit))
    assert {("volume", "mL"), ("time", "min"), ("time", "s")} <= kinds
