"""Tests of gpctools.sheets: the one cell parser, the schemas and the same messages for the
same faults in every sheet (standards table, batch sheet, run series, spec limits).

Check values are the numbers as written (the parser must give back what a person reads;
the reference for text -> float is Python's own ``float`` of the plain spelling), or the
rules documented in gpctools/sheets/cells.py ("derived").
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from gpctools.batch import read_batch_sheet
from gpctools.errors import DataError, GpcError, InputFormatError, MethodError
from gpctools.method import load_method
from gpctools.qc import read_specs
from gpctools.sheets import BATCH, RUN_SERIES, SPEC_LIMITS, STANDARDS, cells, read_file, read_table
from gpctools.sheets.schema import Field, SheetSchema, match_columns
from gpctools.transfer import read_run_series

ROOT = Path(__file__).resolve().parents[1]

# ============================================================================ cells


@pytest.mark.parametrize(
    "text, value",
    [
        # the numbers as written (derived: each spelling names this one number)
        ("150000", 150000.0),
        ("-0.5", -0.5),
        ("\u22120.5", -0.5),  # Unicode minus
        ("1.5e5", 150000.0),
        ("90000,5", 90000.5),
        ("0,25", 0.25),
        ("0,500", 0.5),  # a thousands group never starts with 0
        ("12,3456", 12.3456),
        ("1.234,5", 1234.5),
        ("1,234.5", 1234.5),
        ("1.234.567", 1234567.0),
        ("1,234,567", 1234567.0),
        ("150 000", 150000.0),
        ("150\u00a0000,5", 150000.5),
        ("1234.567", 1234.567),  # four leading digits: not a thousands group
        ("1.234", 1.234),  # rule 2: a lone point is a decimal point
    ],
)
def test_numbers_with_either_decimal_mark(text, value):
    assert cells.parse_number(text) == value


@pytest.mark.parametrize("blank", [None, float("nan"), "", "   ", "-", "\u2013", "n/a", "NA", "nan", "None"])
def test_blank_cells(blank):
    assert cells.is_blank(blank)
    assert cells.parse_number(blank) is None
    assert cells.text(blank) == ""


@pytest.mark.parametrize("cell", ["0", 0, "a", "NA-1"])
def test_values_are_not_blank(cell):
    assert not cells.is_blank(cell)


def test_ambiguous_comma_is_decided_by_the_column_or_refused():
    # rule 1: the column's other text cells decide (derived from the documented rule)
    assert cells.column_decimal(["12,5", "90,000"]) == ","
    assert cells.column_decimal(["1,234.5", "90,000"]) == "."
    assert cells.column_decimal(["12,5", "1.5"]) is None  # disagreeing cells decide nothing
    assert cells.parse_number("90,000", decimal=",") == 90.0
    assert cells.parse_number("90,000", decimal=".") == 90000.0
    assert cells.parse_number("1.234", decimal=",") == 1234.0
    # rule 3: a lone comma has no default
    with pytest.raises(cells.CellError) as e:
        cells.parse_number("90,000")
    assert "ambiguous" in str(e.value) and "write 90000 or 90.0" in str(e.value)


@pytest.mark.parametrize("cell", ["lots", "1.1 M", "5 %", "1,2,3", "12,34,567", True])
def test_text_that_is_not_a_number_is_refused(cell):
    with pytest.raises(cells.CellError, match="is not a number"):
        cells.parse_number(cell)


def test_infinite_values_are_refused():
    for cell in ("inf", float("inf"), "-Infinity"):
        with pytest.raises(cells.CellError, match="not a finite number"):
            cells.parse_number(cell)


@given(st.floats(min_value=-1e9, max_value=1e9, allow_nan=False).map(lambda x: round(x, 3)))
def test_decimal_comma_spelling_reads_the_same_number(x):
    # reference: Python's float of the point spelling; the comma spelling must agree
    point = f"{x:.3f}"
    comma = point.replace(".", ",")
    assert cells.parse_number(point, decimal=".") == float(point)
    assert cells.parse_number(comma, decimal=",") == float(point)


@given(st.integers(min_value=1000, max_value=10**12), st.integers(min_value=0, max_value=99))
def test_grouped_spellings_read_the_same_number(n, cents):
    # reference: Python's float of the plain spelling "n.cc"
    plain = f"{n}.{cents:02d}"
    assert cells.parse_number(f"{n:,}.{cents:02d}") == float(plain)
    assert cells.parse_number(f"{n:,}".replace(",", ".") + f",{cents:02d}") == float(plain)
    assert cells.parse_number(f"{n:,}".replace(",", " ") + f",{cents:02d}") == float(plain)


def test_finite_or_none():
    assert cells.finite_or_none(3) == 3.0 and isinstance(cells.finite_or_none(3), float)
    for v in (None, float("nan"), float("inf")):
        assert cells.finite_or_none(v) is None
    with pytest.raises(TypeError):
        cells.finite_or_none("3")


def test_bool_and_choice_cells():
    assert cells.parse_bool("Yes") is True and cells.parse_bool("off") is False
    assert cells.parse_bool(" ") is None
    with pytest.raises(cells.CellError):
        cells.parse_bool("maybe")
    assert cells.choice_key(" Check standard ") == "check_standard"


@pytest.mark.parametrize(
    "header, name, unit, style",
    [
        ("Mn [kg/mol]", "Mn", "kg/mol", "brackets"),
        ("Mp (g/mol)", "Mp", "g/mol", "parentheses"),
        ("Mn, kg/mol", "Mn", "kg/mol", "suffix"),
        ("time in s", "time", "s", "suffix"),
        ("Mp (dw/dlogM) [g/mol]", "Mp (dw/dlogM)", "g/mol", "brackets"),
        ("Mp (dw/dlogM)", "Mp (dw/dlogM)", None, None),
        ("ratio [A]/[M]", "ratio [A]/[M]", None, None),
        ("[M]", "[M]", None, None),
        ("u(residual [A]) [mol/L]", "u(residual [A])", "mol/L", "brackets"),
    ],
)
def test_header_units(header, name, unit, style):
    h = cells.split_header(header)
    assert (h.name, h.unit, h.style) == (name, unit, style)


def test_canonical_units():
    assert cells.canonical_unit("ML") == "mL"
    assert cells.canonical_unit("degC") == "°C" and cells.canonical_unit("°c") == "°C"
    assert cells.canonical_unit("furlongs") is None


# ============================================================================ schema

_DEMO = SheetSchema(
    kind="demo sheet",
    row_noun="item",
    fields=(
        Field("id", "id", kind="id", required=True, needed=True, unique=True),
        Field("M", "M [g/mol]", unit="g/mol", conversions={"kg/mol": (1000.0, 0.0)},
              minimum=0.0, min_open=True),
        Field("t", "time [min]", unit="min", conversions={"s": (1 / 60, 0.0)}),
        Field("x", "conversion [-]", unit="-", conversions={"%": (0.01, 0.0)}, minimum=0.0,
              maximum=1.0, max_open=True),
        Field("on", "enabled", kind="bool", default=False),
        Field("kind", "kind", kind="choice", choices={"a": "alpha", "b": "beta"}, default="alpha"),
    ),
)


def test_unit_conversions_and_kinds():
    rows = [{"id": "r1", "M (kg/mol)": "1,5", "time [s]": 90, "conversion [%]": 5,
             "enabled": "yes", "kind": "B", "note": "kept"}]
    table = read_table(rows, _DEMO)
    r = table.rows[0]
    # derived: 1.5 kg/mol = 1500 g/mol; 90 s = 1.5 min; 5 % = 0.05
    assert r["M"] == 1500.0 and r["t"] == pytest.approx(1.5) and r["x"] == pytest.approx(0.05)
    assert r["on"] is True and r["kind"] == "beta"
    assert r.metadata == {"note": "kept"} and r.row == 2
    assert table.columns.header("M") == "M (kg/mol)"


def test_bounds_are_shown_in_the_header_unit():
    with pytest.raises(DataError) as e:
        read_table([{"id": "r1", "conversion [%]": 150}], _DEMO)
    assert e.value.message == "150 % must be below 100 %"
    with pytest.raises(DataError) as e:
        read_table([{"id": "r1", "M [g/mol]": -5}], _DEMO)
    assert e.value.message == "-5 g/mol must be positive"


def test_refusing_extra_columns():
    strict = SheetSchema("strict sheet", "item", (Field("id", "id", kind="id", required=True),),
                         extras="refuse")
    with pytest.raises(InputFormatError, match="has no column 'x'; its columns are 'id'"):
        match_columns(["id", "x"], strict)


# ============================================================================ one message per fault, every sheet
#
# Each sheet is written as a small CSV file with one number column under test; the same
# fault is put in that column and the message is compared across sheets.

SHEETS = {
    "standards table": ("name,Mp [g/mol],volume [mL]\nPS 1,{cell},15.0\n", "Mp [g/mol]"),
    "batch sheet": ("sample_id,file,flow marker [mL]\nS1,a.csv,{cell}\n", "flow marker [mL]"),
    "run-series sheet": ("run,M0 [g/mol],ratio [A]/[M] [-],Mn [g/mol]\nR1,104.15,0.001,{cell}\n",
                         "Mn [g/mol]"),
    "spec sheet": ("product,Mw max [g/mol]\nSG-1,{cell}\n", "Mw max [g/mol]"),
}
SCHEMAS = {"standards table": STANDARDS, "batch sheet": BATCH, "run-series sheet": RUN_SERIES,
           "spec sheet": SPEC_LIMITS}
ERRORS = {"standards table": MethodError, "batch sheet": InputFormatError,
          "run-series sheet": DataError, "spec sheet": InputFormatError}


def _write(tmp_path: Path, kind: str, cell: str) -> Path:
    text, _ = SHEETS[kind]
    p = tmp_path / f"{kind.replace(' ', '_')}.csv"
    p.write_text(text.format(cell=cell), encoding="utf-8")
    return p


def _cell_message(tmp_path: Path, kind: str, cell: str) -> GpcError | str | float | None:
    """The parsed value, or the error of the sheet's reader (the batch sheet's problem text)."""
    p = _write(tmp_path, kind, cell)
    if kind == "batch sheet":
        (entry,) = read_batch_sheet(p)
        return entry.problem if entry.problem else entry.marker_observed
    try:
        table = read_file(p, SCHEMAS[kind])
    except GpcError as exc:
        assert isinstance(exc, ERRORS[kind])
        return exc
    row = table.rows[0]
    return row.get("Mp") if kind == "standards table" else (
        row.get("Mn") if kind == "run-series sheet" else row.family_values["limit"]["Mw|max"])


@pytest.mark.parametrize("kind", list(SHEETS))
def test_decimal_comma_parity_across_sheets(tmp_path, kind):
    # the same cell is the same number in every sheet (derived: 90000,5 = 90000.5)
    assert _cell_message(tmp_path, kind, '"90000,5"') == 90000.5
    assert _cell_message(tmp_path, kind, '"90.000,5"') == 90000.5
    assert _cell_message(tmp_path, kind, '"90,000.5"') == 90000.5


def test_decimal_comma_parity_through_the_public_readers(tmp_path):
    # derived: every reader returns 90000.5 for the cell "90000,5"
    p = _write(tmp_path, "spec sheet", '"90000,5"')
    assert read_specs(p).get("SG-1").limit("Mw").max == 90000.5
    p = _write(tmp_path, "run-series sheet", '"90000,5"')
    assert read_run_series(p).runs[0].Mn == 90000.5
    p = _write(tmp_path, "batch sheet", '"23,61"')
    assert read_batch_sheet(p)[0].marker_observed == 23.61
    # four standards, order 1: the Mp of the first one comes back as written
    (tmp_path / "std.csv").write_text(
        'name,Mp [g/mol],volume [mL]\nA,"90000,5",15\nB,"9000,5",16\nC,"900,5",17\nD,"90,5",18\n',
        encoding="utf-8")
    (tmp_path / "m.toml").write_text('[calibration]\norder = 1\nstandards = "std.csv"\n',
                                     encoding="utf-8")
    table = load_method(tmp_path / "m.toml").calibration.standards_table()
    # 1e-12: the calibration keeps Mp as 10**log10(Mp), one rounding step
    assert [r["Mp [g/mol]"] for r in table] == pytest.approx([90000.5, 9000.5, 900.5, 90.5],
                                                             rel=1e-12)


def _message(result: GpcError | str | float | None) -> str:
    assert isinstance(result, (GpcError, str)), result
    return result.message if isinstance(result, GpcError) else result.split(": ", 1)[1]


def _located(result: GpcError | str | float | None, path_part: str, column: str) -> None:
    text = str(result)
    assert path_part in text and "row 2" in text and f"column {column!r}" in text, text


@pytest.mark.parametrize("kind", list(SHEETS))
def test_not_a_number_has_one_message_shape(tmp_path, kind):
    res = _cell_message(tmp_path, kind, "lots")
    _located(res, kind.replace(" ", "_"), SHEETS[kind][1])
    assert re.fullmatch(r"'lots' is not a (positive )?number; write a plain number such as \S+ "
                        r"\(unit \[[^\]]+\] in the header\)(; .*)?", _message(res)), _message(res)


@pytest.mark.parametrize("kind", list(SHEETS))
def test_ambiguous_number_has_one_message(tmp_path, kind):
    res = _cell_message(tmp_path, kind, '"90,000"')
    _located(res, kind.replace(" ", "_"), SHEETS[kind][1])
    assert _message(res).startswith("'90,000' is ambiguous: ',' may separate thousands (90000) "
                                    "or be a decimal comma (90); write 90000 or 90.0")


@pytest.mark.parametrize("kind", [k for k in SHEETS if k != "spec sheet"])
def test_negative_value_has_one_message(tmp_path, kind):
    # every number column under test must be positive (the spec sheet checks molar-mass
    # limits after reading, see test_qc)
    res = _cell_message(tmp_path, kind, "-5")
    _located(res, kind.replace(" ", "_"), SHEETS[kind][1])
    assert re.fullmatch(r"-5 (g/mol|mL) must be positive(; .*)?", _message(res)), _message(res)


@pytest.mark.parametrize(
    "kind, required, text",
    [
        ("standards table", "Mp [g/mol]", "name,volume [mL]\nA,15\n"),
        ("batch sheet", "sample_id", "file,role\na.csv,sample\n"),
        ("run-series sheet", "run", "Mn [g/mol],ratio [A]/[M] [-]\n1000,0.1\n"),
        ("spec sheet", "product", "grade,Mw max [g/mol]\nSG,1000\n"),
    ],
)
def test_missing_required_column_lists_found_and_accepted(tmp_path, kind, required, text):
    p = tmp_path / "s.csv"
    p.write_text(text, encoding="utf-8")
    with pytest.raises(GpcError) as e:
        read_file(p, SCHEMAS[kind])
    found = ", ".join(repr(h) for h in text.splitlines()[0].split(","))
    assert re.fullmatch(
        rf"the {kind} needs a '{re.escape(required)}' column( \(also accepted: [^)]*\))?; "
        rf"found columns: {re.escape(found)}; see templates/\S+", e.value.message), e.value.message
    assert e.value.path == str(p)


@pytest.mark.parametrize(
    "kind, header, field",
    [
        ("standards table", "Mp [mL]", "Mp [g/mol]"),
        ("batch sheet", "flow marker [min]", "flow marker [mL]"),
        ("run-series sheet", "Mn [mL]", "Mn [g/mol]"),
        ("spec sheet", "check-standard tolerance [g/mol]", "check-standard tolerance [%]"),
    ],
)
def test_unit_not_accepted_has_one_message(tmp_path, kind, header, field):
    text, column = SHEETS[kind]
    p = tmp_path / "s.csv"
    extra = {"spec sheet": ",check-standard tolerance [%]"}.get(kind, "")
    p.write_text(text.replace(column, header).format(cell="1") if not extra else
                 text.replace("Mw max [g/mol]", header).format(cell="1"), encoding="utf-8")
    with pytest.raises(GpcError) as e:
        read_file(p, SCHEMAS[kind])
    unit = re.search(r"\[([^\]]+)\]$", header).group(1)
    assert e.value.message.startswith(f"unit [{unit}] is not accepted for {field!r}; write [")
    assert e.value.column == header and e.value.row == 1


@pytest.mark.parametrize("kind", list(SHEETS))
def test_no_rows_has_one_message(tmp_path, kind):
    text, _ = SHEETS[kind]
    p = tmp_path / "s.csv"
    p.write_text(text.splitlines()[0] + "\n", encoding="utf-8")
    with pytest.raises(GpcError) as e:
        read_file(p, SCHEMAS[kind])
    noun = SCHEMAS[kind].row_noun
    assert e.value.message.startswith(f"the {kind} has a header but no {noun} rows; add one row "
                                      f"per {noun}")


@pytest.mark.parametrize(
    "kind, text, column",
    [
        ("batch sheet", "sample_id,file\n,a.csv\n", "sample_id"),
        ("run-series sheet", "run,M0 [g/mol],ratio [A]/[M] [-],Mn [g/mol]\n,104,0.1,1000\n", "run"),
        ("spec sheet", "product,Mw max [g/mol]\n,1000\n", "product"),
        ("standards table", "name,Mp [g/mol],volume [mL]\nA,,15\n", "Mp [g/mol]"),
    ],
)
def test_empty_needed_cell_has_one_message(tmp_path, kind, text, column):
    p = tmp_path / "s.csv"
    p.write_text(text, encoding="utf-8")
    if kind == "batch sheet":
        res: object = read_batch_sheet(p)[0].problem
    else:
        with pytest.raises(GpcError) as e:
            read_file(p, SCHEMAS[kind])
        res = e.value
    _located(res, "s.csv", column)
    assert re.fullmatch(r"the cell is empty; .+", _message(res)), res


@pytest.mark.parametrize(
    "kind, text, column",
    [
        ("run-series sheet", "run,M0 [g/mol],ratio [A]/[M] [-],Mn [g/mol]\nR1,104,0,1000\n"
                             "r1,104,0.1,900\n", "run"),
        ("spec sheet", "product,Mw max [g/mol]\nSG,1000\nsg,900\n", "product"),
    ],
)
def test_repeated_id_has_one_message(tmp_path, kind, text, column):
    p = tmp_path / "s.csv"
    p.write_text(text, encoding="utf-8")
    with pytest.raises(GpcError) as e:
        read_file(p, SCHEMAS[kind])
    assert e.value.row == 3 and e.value.column == column
    noun = SCHEMAS[kind].row_noun
    assert e.value.message == (f"'{text.splitlines()[2].split(',')[0]}' is used again (first in "
                               f"row 2); {column!r} must be unique, one row per {noun}")


@pytest.mark.parametrize(
    "kind, text, column",
    [
        ("batch sheet", "sample_id,file,role\nS,a.csv,referee\n", "role"),
        ("run-series sheet", "run,M0 [g/mol],ratio [A]/[M] [-],Mn [g/mol],role\nR1,104,0,1000,referee\n",
         "role"),
    ],
)
def test_unknown_choice_has_one_message(tmp_path, kind, text, column):
    p = tmp_path / "s.csv"
    p.write_text(text, encoding="utf-8")
    if kind == "batch sheet":
        res: object = read_batch_sheet(p)[0].problem
    else:
        with pytest.raises(GpcError) as e:
            read_file(p, SCHEMAS[kind])
        res = e.value
    _located(res, "s.csv", column)
    assert re.fullmatch(r"unknown role 'referee'; write one of: [a-z_, ]+", _message(res)), res


@pytest.mark.parametrize("kind", list(SHEETS))
def test_two_columns_for_one_field_have_one_message(tmp_path, kind):
    text, column = SHEETS[kind]
    first, body = text.splitlines()
    alias = {"standards table": "Mp (kg/mol)", "batch sheet": "marker [mL]",
             "run-series sheet": "Mn [kg/mol]", "spec sheet": "MW  max [g/mol]"}[kind]
    p = tmp_path / "s.csv"
    p.write_text(f"{first},{alias}\n{body.format(cell='1')},1\n", encoding="utf-8")
    with pytest.raises(GpcError) as e:
        read_file(p, SCHEMAS[kind])
    assert e.value.message == f"columns {column!r} and {alias!r} both give {column!r}; keep one"
    assert e.value.column == alias and e.value.row == 1


def test_csv_and_workbook_blanks_read_alike(tmp_path):
    # a placeholder "n/a" is blank in a workbook as pandas makes it blank in a CSV
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["product", "Mw max [g/mol]", "Mw min [g/mol]"])
    ws.append(["SG-1", "n/a", 1000])
    wb.save(tmp_path / "s.xlsx")
    (tmp_path / "s.csv").write_text("product,Mw max [g/mol],Mw min [g/mol]\nSG-1,n/a,1000\n",
                                    encoding="utf-8")
    a = read_specs(tmp_path / "s.xlsx").get("SG-1").limit("Mw")
    b = read_specs(tmp_path / "s.csv").get("SG-1").limit("Mw")
    assert (a.min, a.max) == (b.min, b.max) == (1000.0, None)


def test_every_schema_has_documented_fields():
    for schema in SCHEMAS.values():
        for f in schema.fields:
            assert f.kind in ("number", "text", "id", "path", "choice", "bool")
            if f.kind == "number" and f.unit not in (None, "-"):
                assert f"[{f.unit}]" in f.header, f.header
    assert math.isclose(STANDARDS.field("time").convert("s")[0], 1 / 60)


# ============================================================================ results tables


def test_role_spellings_mean_the_same_in_the_batch_sheet_and_in_qc(tmp_path):
    from gpctools.qc import decide, specs_from_frame

    p = tmp_path / "b.csv"
    p.write_text("sample_id,file,role\nA,a.csv,Check standard\nB,b.csv,check\nC,c.csv,\n",
                 encoding="utf-8")
    assert [e.role for e in read_batch_sheet(p)] == ["check_standard", "check_standard", "sample"]
    import pandas as pd

    table = pd.DataFrame({"sample_id": ["A", "C"], "role": ["Check standard", ""],
                          "status": ["ok", "ok"], "Mw [g/mol]": [1.0, 1.0]})
    specs = specs_from_frame(pd.DataFrame({"product": ["X"], "Mw max [g/mol]": [2.0]}))
    # only C is a sample: the check standard is not decided (derived from the role rule)
    assert [s.sample_id for s in decide(table, specs).samples] == ["C"]


def test_results_table_text_numbers_use_the_same_parser():
    import pandas as pd

    from gpctools.qc import system_suitability

    table = pd.DataFrame({
        "sample_id": ["CHK"], "role": ["check_standard"], "status": ["ok"],
        "Mw [g/mol]": [99000.0], "assigned Mw [g/mol]": ["100000,0"],
    })
    (res,) = system_suitability(table, None)
    check = next(c for c in res.checks if c.name.startswith("check standard CHK: Mw"))
    # derived: 100·|99000/100000 - 1| = 1 %; 1e-9 allows the division's rounding
    assert check.value == pytest.approx(1.0, rel=1e-9)


def test_standards_in_seconds_are_converted_with_the_flow_rate(tmp_path):
    # derived: V = t·F with t = 900 s = 15 min and F = 0.8 mL/min -> 12 mL
    (tmp_path / "std.csv").write_text(
        "name,Mp (kg/mol),time [s]\nA,1000,900\nB,100,960\nC,10,1020\nD,1,1080\n", encoding="utf-8")
    (tmp_path / "m.toml").write_text('[flow]\nrate = 0.8\n[calibration]\norder = 1\n'
                                     'standards = "std.csv"\n', encoding="utf-8")
    table = load_method(tmp_path / "m.toml").calibration.standards_table()
    # 1e-12: one multiplication and one division in float64
    assert [r["volume [mL]"] for r in table] == pytest.approx([12.0, 12.8, 13.6, 14.4], rel=1e-12)
    assert [r["Mp [g/mol]"] for r in table] == pytest.approx([1e6, 1e5, 1e4, 1e3], rel=1e-12)


def test_the_layer_expresses_a_settings_sheet():
    # a QC-settings-like sheet (a later issue) needs only bool, choice and number fields
    settings = SheetSchema(
        kind="QC settings sheet", row_noun="setting set",
        fields=(
            Field("require", "require check standard", kind="bool", default=True),
            Field("limits_from", "trend limits from", kind="choice",
                  choices={"auto": "auto", "all": "all", "history": "history"}, default="auto"),
            Field("drift", "max flow-marker drift [%]", unit="%", minimum=0.0, min_open=True),
        ),
        extras="refuse",
    )
    (row,) = read_table([{"Require check standard": "no", "trend limits from": "History",
                          "max flow-marker drift (%)": "0,3"}], settings).rows
    assert (row["require"], row["limits_from"], row["drift"]) == (False, "history", 0.3)
    with pytest.raises(DataError, match="unknown trend limits from 'sometimes'"):
        read_table([{"trend limits from": "sometimes"}], settings)


@pytest.mark.parametrize(
    "header, name, unit",
    [
        ("Ve/mL", "Ve", "mL"), ("Mp/(g/mol)", "Mp", "g/mol"), ("Mp/(g mol-1)", "Mp", "g mol-1"),
        ("t/s", "t", "s"), ("T/K", "T", "K"), ("Mp [Da]", "Mp", "Da"), ("Mp (kDa)", "Mp", "kDa"),
        ("V (cm3)", "V", "cm3"), ("t, minutes", "t", "minutes"),
        # ratios and names with slashes keep their slash (no unit)
        ("[A]/M", "[A]/M", None), ("C/S", "C/S", None), ("dw/dlogM", "dw/dlogM", None),
        ("Mw/Mn", "Mw/Mn", None), ("ratio [A]/[M]", "ratio [A]/[M]", None),
    ],
)
def test_split_header_slash_units_and_ratios(header, name, unit):
    # Quantity-calculus headers (value = quantity / unit, common practice in tables).
    h = cells.split_header(header)
    assert (h.name, h.unit) == (name, unit)


@pytest.mark.parametrize("unit, canonical", [("Da", "g/mol"), ("kDa", "kg/mol"), ("g mol-1", "g/mol"),
                                             ("g·mol⁻¹", "g/mol"), ("cm³", "mL"), ("μL", "µL"),
                                             ("minutes", "min"), ("sec.", "s")])
def test_canonical_unit_spellings(unit, canonical):
    assert cells.canonical_unit(unit) == canonical
