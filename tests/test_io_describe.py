"""gpctools.io.describe: what ``inspect`` shows about an export (dialect, columns, use).

Check values are properties the test files were written with (derived from the writers
here), and the detector each header names (common practice: the abbreviations labs and
instrument exports use).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from gpctools import simulate
from gpctools.demo import write_chromatogram
from gpctools.errors import InputFormatError
from gpctools.io.describe import COLUMN_KINDS, column_kind, describe_export, response_note


@pytest.mark.parametrize(
    "header, kind",
    [
        ("Elution volume [mL]", "x (volume)"), ("Ve/mL", "x (volume)"), ("Time (min)", "x (time)"),
        ("RT", "x (time)"), ("RI (mV)", "RI"), ("dRI", "RI"), ("Refractive index", "RI"),
        ("UV254", "UV"), ("UV 280 nm (mAU)", "UV"), ("DAD", "UV"), ("Absorbance", "UV"),
        ("IR (mV)", "IR"), ("ELSD", "ELSD"), ("LS 90", "light scattering"), ("MALS", "light scattering"),
        ("LALS (mV)", "light scattering"), ("Light scattering 15°", "light scattering"),
        ("Visc DP (Pa)", "viscometer"), ("DP", "viscometer"), ("Viscometer", "viscometer"),
        ("Pressure (bar)", "pressure"), ("Pump pressure [psi]", "pressure"), ("Fluorescence", "fluorescence"),
        ("Signal", "signal"), ("mV", "signal"), ("Slice", "not a signal"), ("log M", "not a signal"),
        ("Mw", "not a signal"), ("Column temperature", "other"),
    ],
)
def test_column_kind(header, kind):
    assert column_kind(header) == kind
    assert kind in COLUMN_KINDS


def test_response_note_only_for_uv_and_elsd():
    assert "UV detector" in response_note("UV254 (mAU)")
    assert "evaporative" in response_note("ELSD")
    assert response_note("RI (mV)") is None and response_note("Signal") is None


def _trace() -> tuple[np.ndarray, np.ndarray]:
    return simulate.chromatogram(simulate.schulz_zimm(80_000, 2.0), simulate.default_calibration(),
                                 noise=0.02, seed=3)


@pytest.mark.parametrize(
    "encoding, separator, decimal, shown",
    [("utf-8", ",", ".", "utf-8"), ("utf-8-sig", ";", ",", "utf-8 (byte-order mark)"),
     ("utf-16", "\t", ".", "utf-16-le (byte-order mark)"), ("cp1252", "\t", ",", "cp1252")],
)
def test_describe_text_dialects(tmp_path, encoding, separator, decimal, shown):
    V, h = _trace()
    meta = {"Säule": "mixed bed"} if encoding == "cp1252" else {"Column": "mixed bed"}
    p = write_chromatogram(tmp_path / "x.csv", V, h, encoding=encoding, separator=separator,
                           decimal=decimal, metadata=meta, extra_column=True)
    d = describe_export(p)
    assert d.problem is None and d.file_kind == "text"
    assert d.encoding == shown
    assert d.separator == {"\t": "tab", ";": ";", ",": ","}[separator] and d.decimal == decimal
    assert d.points == V.size and d.x_first == pytest.approx(V.min()) and d.x_last == pytest.approx(V.max())
    assert [c.use for c in d.columns][:2] == ["x", "signal"] and d.columns[0].kind == "x (volume)"
    text = p.read_bytes().decode(encoding).lstrip("\ufeff")
    header_line = next(i for i, ln in enumerate(text.splitlines(), 1) if ln.startswith("Elution volume"))
    assert d.header_row == header_line
    assert list(meta.items())[0] in d.metadata.items()
    json.dumps(d.summary())  # JSON-safe


def test_describe_without_header_and_with_options(tmp_path):
    p = tmp_path / "bare.txt"
    p.write_text("".join(f"{10 + 0.01 * i:.2f}\t{i % 5}\n" for i in range(30)), encoding="utf-8")
    d = describe_export(p, x_unit="mL")
    assert d.problem is None and d.header_row == 0
    assert [(c.header, c.use) for c in d.columns] == [("column 0", "x"), ("column 1", "signal")]
    assert d.options == {"x_unit": "mL"}
    refused = describe_export(p)  # no header and no unit: the reader refuses, the dialect stays
    assert refused.problem is not None and "x_unit" in refused.problem
    assert refused.separator == "tab" and refused.decimal == "."


def test_describe_workbook_lists_sheets_and_columns(tmp_path):
    from openpyxl import Workbook

    wb = Workbook()
    wb.active.title = "Info"
    wb.active.append(["written by a test"])
    ws = wb.create_sheet("Slices")
    ws.append(["Sample", "W1"])
    ws.append(["Volume (mL)", "RI (mV)", "UV 254 (mAU)"])
    V, h = _trace()
    for v, y in zip(V[:200], h[:200]):
        ws.append([float(v), float(y), 1.0])
    wb.save(tmp_path / "x.xlsx")
    d = describe_export(tmp_path / "x.xlsx")
    assert d.file_kind == "workbook" and d.sheets == ("Info", "Slices") and d.sheet == "Slices"
    assert d.header_row == 2 and d.metadata == {"Sample": "W1"}
    assert [(c.header, c.kind, c.use) for c in d.columns] == [
        ("Volume (mL)", "x (volume)", "x"), ("RI (mV)", "RI", "signal"), ("UV 254 (mAU)", "UV", "")]
    uv = describe_export(tmp_path / "x.xlsx", signal_column="UV 254 (mAU)")
    assert any("UV detector" in w for w in uv.warnings)


def test_describe_refuses_what_no_reader_can_open(tmp_path):
    p = tmp_path / "x.csv"
    p.write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(range(256)))
    with pytest.raises(InputFormatError, match="PNG"):
        describe_export(p)
    with pytest.raises(InputFormatError):
        describe_export(Path(tmp_path / "missing.csv"))
