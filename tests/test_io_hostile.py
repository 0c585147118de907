"""Malformed and hostile exports: every refusal names the file, the line or cell and the
real fault; nothing foreign escapes; nothing is dropped silently; accepted files give the
clean control's numbers.

The corpus and the damage it is made of live in ``tests/hostile.py`` (also used by
``tests/test_fuzz.py`` and ``bench/bench_fuzz.py``). Speed is measured in
``bench/bench_fuzz.py``, never asserted here.
"""

from __future__ import annotations

import io
import random
import re
import zipfile
from pathlib import Path

import numpy as np
import pytest
from hostile import (
    DATA_PRESERVING,
    SHEET,
    TEXT_MUTATIONS,
    clean_text,
    clean_workbook,
    hostile_corpus,
    refusal_problem,
    rezip,
)

from gpctools.batch import process_injection
from gpctools.distribution import compute_distribution
from gpctools.errors import DataError, GpcError, InputFormatError
from gpctools.io import _text, _xlsx, read_chromatogram
from gpctools.method import Method
from gpctools.signal import correct_signal

# Footers set aside are reported as ReaderWarnings; the tests look at them where they
# matter (test_footer_is_set_aside_with_a_warning_naming_the_lines).
pytestmark = pytest.mark.filterwarnings("ignore::gpctools.io.ReaderWarning")

CORPUS = hostile_corpus()


@pytest.fixture(scope="module")
def control(demo_method: Method, tmp_path_factory: pytest.TempPathFactory) -> dict[str, float]:
    """Averages of the clean export, the reference every accepted variant must give."""
    p = tmp_path_factory.mktemp("control") / "clean.csv"
    p.write_text(clean_text("comma"), encoding="utf-8")
    return _averages(process_injection(p, demo_method))


def _averages(result) -> dict[str, float]:
    d = result.distribution
    return {"Mn": d.Mn, "Mw": d.Mw, "Mz": d.Mz, "Mz1": d.Mz1}


@pytest.mark.parametrize("case", CORPUS, ids=[c.name for c in CORPUS])
def test_corpus_case(case, demo_method: Method, control: dict[str, float], tmp_path: Path) -> None:
    p = tmp_path / case.name
    p.write_bytes(case.data)
    try:
        if case.options:
            read_chromatogram(p, **dict(case.options))
            outcome = None
        else:
            outcome = _averages(process_injection(p, demo_method))
    except GpcError as exc:
        assert case.refusal is not None, f"refused a file that must be read: {exc}"
        assert re.search(case.refusal, str(exc), re.IGNORECASE | re.DOTALL), str(exc)
        assert refusal_problem(exc, p) is None, (refusal_problem(exc, p), str(exc))
        if case.stage == "process":
            assert isinstance(exc, DataError)
        else:
            assert isinstance(exc, InputFormatError)
    else:
        assert case.refusal is None, f"accepted a file that must be refused ({case.refusal})"
        if outcome is not None:
            # The same slices in another dress: the same numbers, bit for bit (derived:
            # the sums run over identical float64 arrays).
            assert outcome == control
    assert p.read_bytes() == case.data  # inputs are never modified


@pytest.mark.parametrize("dialect", ["semicolon", "tab", "tabcomma", "blank"])
def test_dialects_give_the_control_averages(
    dialect: str, demo_method: Method, control: dict[str, float], tmp_path: Path
) -> None:
    p = tmp_path / f"{dialect}.txt"
    p.write_text(clean_text(dialect), encoding="utf-8")
    assert _averages(process_injection(p, demo_method)) == control  # same floats (derived)


def test_workbook_gives_the_control_averages(
    demo_method: Method, control: dict[str, float], tmp_path: Path
) -> None:
    p = tmp_path / "clean.xlsx"
    p.write_bytes(clean_workbook())
    assert _averages(process_injection(p, demo_method)) == control  # same floats (derived)


@pytest.mark.parametrize("kind", sorted(DATA_PRESERVING))
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_data_preserving_damage_keeps_the_averages(
    kind: str, seed: int, demo_method: Method, control: dict[str, float], tmp_path: Path
) -> None:
    data = TEXT_MUTATIONS[kind](random.Random(seed), clean_text("comma").encode())
    p = tmp_path / f"{kind}.csv"
    p.write_bytes(data)
    assert _averages(process_injection(p, demo_method)) == control  # same floats (derived)


# ----------------------------------------------------------------------- text caps


def test_find_long_line_counts_characters_not_bytes() -> None:
    assert _text.find_long_line("a\n" + "x" * 11 + "\nb", limit=10) == (2, 11)
    assert _text.find_long_line("a\n" + "x" * 10 + "\nb", limit=10) is None
    # 8 two-byte characters are 16 bytes but only 8 characters: not too long.
    assert _text.find_long_line("é" * 8, limit=10) is None
    assert _text.find_long_line("é" * 11, limit=10) == (1, 11)


def test_find_long_run_across_chunk_boundary() -> None:
    # The scan works in 8 MB chunks; a run that starts in one chunk and ends in the
    # next must be measured whole.
    short = "1,2\n" * ((1 << 23) // 4 - 1)
    text = short + "1," + "9" * 1500 + "\n3,4\n"
    assert _text.find_long_cell(text, ",") == (short.count("\n") + 1, 1500)
    assert _text.find_long_line(text, limit=1400) == (short.count("\n") + 1, 1502)


def test_find_long_cell_stops_at_separator_and_blanks() -> None:
    assert _text.find_long_cell("ab;cd\n" + "1" * 6 + ";2", ";", limit=5) == (2, 6)
    assert _text.find_long_cell("12345;12345 12345\t12345", ";", limit=5) is None
    # With a decimal comma, the comma is part of the cell.
    assert _text.find_long_cell("123,45;1", ";", limit=5) == (1, 6)


def _old_point(cell: str) -> bool:
    # The former (backtracking) pattern, as the reference for what a number is.
    return re.fullmatch(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?", cell) is not None


def _old_comma(cell: str) -> bool:
    return re.fullmatch(r"[+-]?(?:\d+,?\d*|,\d+)(?:[eE][+-]?\d+)?", cell) is not None


@pytest.mark.parametrize(
    "cell",
    ["1", "1.", ".5", "1.5", "-1.5e-3", "+2E10", "1.5.5", "1e", "e5", ".", "-", "1,5", ",5",
     "1,", "12a", "1.5e+", " 1", "1e5.5", "--1", "0x10", "1_000", "١٢"],
)
def test_number_patterns_accept_what_they_accepted_before(cell: str) -> None:
    assert (_text.number_pattern(".").fullmatch(cell) is not None) == _old_point(cell)
    assert (_text.number_pattern(",").fullmatch(cell) is not None) == _old_comma(cell)


def _old_metadata(line: str) -> tuple[str, str] | None:
    # The former separator search, as the reference for metadata lines.
    s = line.strip()
    if s.startswith(("#", "!")):
        s = s[1:].strip()
    m = re.search(r"\s*(?::|=|\t|;|,)\s*", s)
    key, value = (s[: m.start()], s[m.end():]) if m else (s, "")
    key = key.strip().strip('"').strip()
    if m and key.isdigit() and m.group().strip() == ":":
        key, value = s, ""
    value = value.strip().rstrip(";,\t").strip()
    if len(value) >= 2 and value[0] == value[-1] == '"':
        value = value[1:-1]
    value = value.replace('";"', "; ").replace('","', ", ").replace('"\t"', " ")
    if not key:
        return None if not value else ("", value)
    return key, value


@pytest.mark.parametrize(
    "line",
    ["Flow rate: 1.0 mL/min", '"Sample";"PS 12";;', "[Raw data]", "12:30", "a = b",
     "Key \t value", "# Operator: demo", "x  ;  y", ";", "", "k:v:w", '"a","b","c"'],
)
def test_metadata_lines_split_as_before(line: str) -> None:
    assert _text.parse_metadata_line(line) == _old_metadata(line)


# ----------------------------------------------------------------------- text messages


def test_short_rows_in_unused_columns_are_kept(tmp_path: Path) -> None:
    # An empty UV cell does not touch the x and RI values: the row is read.
    lines = clean_text("semicolon").split("\n")
    out = []
    for ln in lines:
        if ln[:1].isdigit():
            ln = ln + ";0,5"
        elif ln.startswith("Elution"):
            ln = ln + ";UV [mAU]"
        out.append(ln)
    k = next(i for i, ln in enumerate(out) if ln[:1].isdigit()) + 20
    out[k] = out[k].rsplit(";", 1)[0] + ";"
    c = read_chromatogram(_put(tmp_path, "uv.csv", "\n".join(out)))
    assert c.signal_column == "RI signal [mV]" and len(c) == 600


def _put(folder: Path, name: str, text: str) -> Path:
    p = folder / name
    p.write_text(text, encoding="utf-8")
    return p


def test_wider_numeric_row_below_the_data_is_refused_not_a_footer(tmp_path: Path) -> None:
    text = clean_text("comma").rstrip("\n") + "\n1.5,2.5,3.5\n"
    line = text.count("\n")  # the appended row is the file's last line
    with pytest.raises(InputFormatError, match=rf"line {line} has 3 fields"):
        read_chromatogram(_put(tmp_path, "tail.csv", text))


def test_messages_name_the_method_keys(tmp_path: Path) -> None:
    body = "\n".join(ln for ln in clean_text("comma").split("\n") if ln[:1].isdigit())
    with pytest.raises(InputFormatError) as exc:
        read_chromatogram(_put(tmp_path, "raw.csv", body))
    assert 'import.x_unit' in str(exc.value) and "method file" in str(exc.value)
    text = "Time,RI\n" + "\n".join(f"{20 + k},{k % 7}" for k in range(150))
    with pytest.raises(InputFormatError) as exc2:
        read_chromatogram(_put(tmp_path, "t.csv", text))
    assert 'import.x_unit = "min" or "s"' in str(exc2.value)


# ----------------------------------------------------------------------- signal layer


def test_flat_signals_are_named() -> None:
    V = np.linspace(10.0, 20.0, 200)
    with pytest.raises(DataError, match="signal is 0 in all 200 slices"):
        correct_signal(V, np.zeros_like(V))
    with pytest.raises(DataError, match=r"same value \(-2\) in all 200 slices"):
        correct_signal(V, np.full_like(V, -2.0))


@pytest.mark.parametrize("scale", [1e101, 1e200, 1e300])
def test_numbers_too_large_to_sum_are_named(scale: float, demo_method: Method) -> None:
    V = np.linspace(10.0, 20.0, 200)
    h = scale * np.exp(-0.5 * ((V - 15.0) / 0.5) ** 2) + scale * 1e-3
    with pytest.raises(DataError, match="too large to compute with"):
        correct_signal(V, h)
    with pytest.raises(DataError, match="too large to compute with"):
        compute_distribution(V, h, demo_method.calibration)
    # Just below the limit the numbers are summed without overflow (1e100 squared is
    # 1e200, far from the float64 end at 1.8e308 - derived).
    correct_signal(V, h / scale * 1e99)


# ----------------------------------------------------------------------- workbooks


def test_row_count_capped_at_the_format_limit(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    # The cap is the format's 1,048,576 rows; lowered here so that the test stays small.
    # Rows and cells without "r" references escape the archive scan and meet the guard
    # while the rows are iterated.
    monkeypatch.setattr(_xlsx, "MAX_ROWS", 50)
    wb = clean_workbook()
    sheet = zipfile.ZipFile(io.BytesIO(wb)).read(SHEET)
    sheet = re.sub(rb' r="[A-Z]*\d+"', b"", re.sub(rb'<dimension ref="[^"]*" ?/>', b"", sheet))
    p = tmp_path / "rows.xlsx"
    p.write_bytes(rezip(wb, replace={SHEET: sheet}))
    with pytest.raises(InputFormatError, match=r"rows beyond row 50\b"):
        read_chromatogram(p)


def test_entity_declaration_across_a_chunk_boundary(tmp_path: Path) -> None:
    # A declaration cut in two by the scanner's 1 MB chunks is still found: the member is
    # random text (so it does not compress like a zip bomb) with "<!ENTITY" across the
    # boundary at 1,048,576 bytes.
    rng = random.Random(5)
    filler = "".join(rng.choice("abcdefghij0123456789") for _ in range((1 << 20) - 4))
    member = ("<x><!--" + filler[7:] + "<!ENTITY e 'x'>-->" + "</x>").encode()
    assert member.find(b"<!ENTITY") < (1 << 20) < member.find(b"<!ENTITY") + 8
    p = tmp_path / "cut.xlsx"
    p.write_bytes(rezip(clean_workbook(), add={"xl/extra.xml": member}))
    with pytest.raises(InputFormatError, match="'xl/extra.xml' declares a document type or entities"):
        read_chromatogram(p)


def test_library_errors_are_explained() -> None:
    text = _xlsx.explain(KeyError("rId9"))
    assert text.startswith("the workbook refers to a part or relationship that is missing")
    assert text.endswith("(detail from the reading library: KeyError: 'rId9')")
    assert "damaged" in _xlsx.explain(zipfile.BadZipFile("Bad CRC-32"))
    assert "compression" in _xlsx.explain(NotImplementedError("That compression method is not supported"))
    assert "too large" in _xlsx.explain(OverflowError("int too large to convert to float"))


def test_workbook_read_once_for_all_sheets(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    # The archive is checked and opened once, however many sheets are tried.
    import openpyxl

    wb = openpyxl.Workbook()
    wb.active.title = "Info"
    wb.active.append(["Operator", "demo"])
    for k in range(5):
        wb.create_sheet(f"Notes {k}").append(["nothing", "here"])
    data_ws = wb.create_sheet("Slices")
    data_ws.append(["Volume (mL)", "RI"])
    for k in range(20):
        data_ws.append([10.0 + k, float(k % 5)])
    buf = io.BytesIO()
    wb.save(buf)
    p = tmp_path / "many.xlsx"
    p.write_bytes(buf.getvalue())
    calls = []
    original = _xlsx.check_archive
    monkeypatch.setattr(_xlsx, "check_archive", lambda *a: calls.append(1) or original(*a))
    assert read_chromatogram(p).sheet == "Slices" and calls == [1]


def test_sheet_part_missing_is_explained(tmp_path: Path) -> None:
    p = tmp_path / "nosheet.xlsx"
    p.write_bytes(rezip(clean_workbook(), drop=(SHEET,)))
    with pytest.raises(InputFormatError, match="no readable sheets .* missing from the archive"):
        read_chromatogram(p)


def test_footer_is_set_aside_with_a_warning_naming_the_lines(tmp_path: Path) -> None:
    from gpctools.io import ReaderWarning

    data = clean_text("comma").rstrip("\n")
    first = data.count("\n") + 3  # after the last data line and one blank line
    text = data + "\n\nEnd of data\nPeak,Start,End\n1,12.5,18.0\n"
    with pytest.warns(ReaderWarning, match=rf"lines {first} to {first + 2} after the data table \(starting 'End of data'\)"):
        c = read_chromatogram(_put(tmp_path, "foot.csv", text))
    assert len(c) == 600 and "footer" in c.warnings[0]


def test_large_sheet_scanned_across_chunks_without_false_alarms(tmp_path: Path) -> None:
    # A sheet part of several MB crosses the scanner's 1 MB chunks many times: row order
    # and references must be judged once per row, not twice at a boundary.
    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["Volume (mL)", "RI (mV)"])
    for k in range(40_000):
        ws.append([10.0 + k * 1e-4, float(np.sin(k / 500.0)) + 2.0])
    p = tmp_path / "big.xlsx"
    wb.save(p)
    sheet = zipfile.ZipFile(p).getinfo("xl/worksheets/sheet1.xml")
    assert sheet.file_size > 3 * (1 << 20)
    assert len(read_chromatogram(p)) == 40_000


# -- sheets (batch sheet, standards, run series, specs) share the text-sheet reader ------
def test_sheet_with_an_open_quote_is_refused_at_its_line(tmp_path):
    """An unmatched quote must not merge the following rows into one cell (common practice:
    RFC 4180 quoting; a sheet cell never spans lines)."""
    from gpctools.errors import InputFormatError
    from gpctools.io import read_sheet

    p = tmp_path / "batch.csv"
    p.write_text('sample_id,file\nA,"a.csv\nB,b.csv\nC,c.csv\n', encoding="utf-8")
    with pytest.raises(InputFormatError) as info:
        read_sheet(p)
    msg = str(info.value)
    assert "batch.csv" in msg and "line 2" in msg and "quote" in msg


def test_sheet_with_a_huge_line_is_refused_before_splitting(tmp_path):
    """A line far past the cap is named, not reported as a quoting problem."""
    from gpctools.errors import InputFormatError
    from gpctools.io import read_sheet
    from gpctools.io._text import MAX_LINE_CHARS

    p = tmp_path / "specs.csv"
    p.write_text("product,Mn min [g/mol]\n" + "x" * (MAX_LINE_CHARS + 10) + ",1\n", encoding="utf-8")
    with pytest.raises(InputFormatError) as info:
        read_sheet(p)
    assert "line 2" in str(info.value) and "characters long" in str(info.value)
