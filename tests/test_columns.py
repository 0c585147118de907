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
