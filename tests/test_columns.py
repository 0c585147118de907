"""The vocabulary of result columns: one name, unit and meaning per column, headers that
never change with a setting, old headers still found."""

from __future__ import annotations

import re
import shutil
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from gpctools import columns as C
from gpctools import simulate
from gpctools.batch import RESULT_COLUMNS, process_trace
from gpctools.kinetics import measured_from_results
from gpctools.method import load_method
from gpctools.qc.decisions import Decisions

ROOT = Path(__file__).resolve().parent.parent


def test_every_column_has_its_unit_in_its_name():
    for name, col in C.COLUMNS.items():
        assert col.name == name and col.meaning
        m = re.search(r"\[([^\[\]]+)\]$", name)
        if col.unit:
            assert m is not None and m.group(1) == col.unit, name
        else:
            assert m is None, name


def test_result_and_qc_tables_use_the_vocabulary():
    assert set(RESULT_COLUMNS) <= set(C.COLUMNS)
    frame = Decisions((), ()).samples_frame()
    assert set(frame.columns) <= set(C.COLUMNS)


@pytest.fixture(scope="module")
def method(tmp_path_factory):
    d = tmp_path_factory.mktemp("m")
    shutil.copy(ROOT / "gpctools" / "templates" / "method.toml", d / "method.toml")
    shutil.copy(ROOT / "gpctools" / "templates" / "standards.csv", d / "standards.csv")
    m = load_method(d / "method.toml")
    return replace(m, marker_search=None, marker_reference=None)


def test_headers_do_not_change_with_the_limit_shift(method):
    V, h = simulate.chromatogram(simulate.schulz_zimm(80_000, 2.0), simulate.default_calibration(),
                                 noise=0.02, seed=3)
    a = process_trace(V, h, method).row()
    b = process_trace(V, h, replace(method, limit_shift=0.5)).row()
    assert list(a) == list(b)
    # the setting is a value of its own column (derived: it is the method's setting)
    assert a[C.LIMIT_SHIFT] == 0.2 and b[C.LIMIT_SHIFT] == 0.5
    # a larger move cuts more of the low-M side: Mn rises more (derived: Mn is the
    # harmonic mean, most sensitive to the low-M slices that the move removes)
    assert b[C.MN_SHIFT_LOW_M] > a[C.MN_SHIFT_LOW_M] > 0
    assert np.isfinite(a[C.MW_SHIFT_LOW_M])


def test_old_shift_headers_are_still_found():
    old = "Mn shift, low-M limit -0.2 mL [%]"
    assert C.find(["sample_id", old], C.MN_SHIFT_LOW_M) == old
    assert C.find(["sample_id", C.MN_SHIFT_LOW_M, old], C.MN_SHIFT_LOW_M) == C.MN_SHIFT_LOW_M
    assert C.find(["sample_id"], C.MN_SHIFT_LOW_M) == C.MN_SHIFT_LOW_M
    assert C.describe("Mw shift, low-M limit -0.5 mL [%]").name == C.MW_SHIFT_LOW_M
    with pytest.raises(KeyError):
        C.describe("no such column")


def test_diagnosis_reads_the_new_shift_header(tmp_path):
    table = tmp_path / "results.csv"
    table.write_text(
        f"sample_id,status,Mn [g/mol],Mw [g/mol],{C.MN_SHIFT_LOW_M},{C.LIMIT_SHIFT},molar-mass scale\n"
        "A,ok,40000,80000,1.5,0.2,absolute polystyrene\nA,ok,42000,82000,2.5,0.2,absolute polystyrene\n",
        encoding="utf-8")
    _, checks = measured_from_results(table)
    assert checks["Mn_shift_low_limit"] == pytest.approx(2.0)  # derived: mean of 1.5 and 2.5


def test_mass_fraction_columns_are_named_by_their_cut_off():
    # one cut-off, one header, however it was typed (1e6, 1000000, 1000000.0)
    assert C.mass_fraction_column("below", 1e6) == C.mass_fraction_column("below", 1000000) \
        == "mass below 1000000 g/mol [%]"
    assert C.mass_fraction_column("above", 2500.5) == "mass above 2500.5 g/mol [%]"
    col = C.describe("mass above 2500.5 g/mol [%]")
    assert col.unit == "%" and "above 2500.5 g/mol" in col.meaning
    with pytest.raises(ValueError):
        C.mass_fraction_column("between", 1000)
    with pytest.raises(KeyError):
        C.describe("mass below 1e6 g/mol [%]")  # not the canonical spelling


def test_uncertainty_and_peak_columns_are_declared():
    assert C.uncertainty_column("Mn") == "u(Mn) [%]"
    assert C.uncertainty_column("Mw", "calibration") == "u(Mw) calibration [%]"
    assert set(C.UNCERTAINTY_COLUMNS) <= set(C.COLUMNS) and len(C.UNCERTAINTY_COLUMNS) == 12
    assert C.peak_column(3, "area") == "peak 3 area [%]" and C.describe("peak 3 area [%]").unit == "%"
    assert len(C.PEAK_COLUMNS) == 4 * C.MAX_PEAK_COLUMNS


def test_headers_do_not_change_with_peak_settings_or_data(method):
    V, h = simulate.chromatogram(simulate.schulz_zimm(80_000, 2.0), simulate.default_calibration(),
                                 noise=0.02, seed=3)
    a = process_trace(V, h, method).row()
    b = process_trace(V, h, replace(method, peaks=replace(method.peaks, split="valleys"))).row()
    c = process_trace(V, h, replace(method, peaks=replace(method.peaks, split=(50_000.0,)))).row()
    assert list(a) == list(b) == list(c)
    assert np.isnan(a[C.peak_column(1, "Mn")]) and b[C.peak_column(1, "area")] == pytest.approx(100.0)
    # split at 50 000 g/mol: two parts that make up the whole mass (derived)
    assert c[C.peak_column(1, "area")] + c[C.peak_column(2, "area")] == pytest.approx(100.0, rel=1e-12)
