"""The number policy (gpctools.formatting) and where it shows (issue 15, item 5)."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from gpctools import formatting as F


def test_clean_removes_float_noise_only():
    # derived: 10**log10(2.52e6) is 2519999.999999998 in float64 (numpy as the reference)
    noisy = float(10.0 ** np.log10(2.52e6))
    assert noisy != 2.52e6 and F.clean(noisy) == 2.52e6
    assert F.clean(0.1 + 0.2) == 0.3
    # 12 significant digits keep what a measurement carries
    assert F.clean(62169.67454651234) == 62169.6745465
    assert math.isnan(F.clean(float("nan"))) and F.clean("text") == "text" and F.clean(7) == 7
    assert F.clean(np.float64(95999.9999999999)) == 96000.0


def test_clean_frame_rounds_float_and_object_columns():
    df = pd.DataFrame({"a": [2519999.999999998, np.nan], "b": ["x", 0.30000000000000004], "n": [1, 2]})
    out = F.clean_frame(df)
    assert out["a"].iloc[0] == 2520000.0 and math.isnan(out["a"].iloc[1])
    assert out["b"].tolist() == ["x", 0.3] and out["n"].tolist() == [1, 2]
    assert df["a"].iloc[0] == 2519999.999999998  # the input is not modified


@pytest.mark.parametrize(("r2", "text"), [
    (0.99987234, "0.99987"),   # the example: two digits past the nines
    (0.9999965, "0.9999965"),
    (0.987, "0.987"),
    (0.95, "0.950"),
])
def test_r_squared_never_shows_1(r2, text):
    assert F.r_squared(r2) == text


def test_screen_digits_per_quantity():
    assert F.dispersity(1.6206) == "1.62" and F.dispersity(2.0) == "2.00"  # 3 significant digits
    assert F.molar_mass(2519999.999999998) == "2,520,000" and F.molar_mass(162.21) == "162.2"
    # residuals to the same number of decimals (issue: -0.341 / 0.4637 / -0.05534)
    assert [F.percent(v) for v in (-0.341, 0.4637, -0.05534)] == ["-0.34", "0.46", "-0.06"]
    assert F.ratio(1.0) == "1.00" and F.ratio(0.8123) == "0.812"  # never "1x expected"
    assert F.number(2519999.999999998, "Mp [g/mol]") == "2,520,000"
    assert F.number(12.04999, "volume [mL]") == "12.050"
    assert F.number(0.9999965, "R^2 [-]") == "0.9999965"
    assert F.number(float("nan"), "Mn [g/mol]") == "-"


def test_intervals_are_printed_as_intervals():
    # the example: an asymmetric t-based interval, not "± se"
    assert F.interval(4.12, 20.3, unit="kJ/mol") == "95 % CI 4.1 to 20.3 kJ/mol"
    assert F.interval(-4.03, 20.33, unit="kJ/mol") == "95 % CI -4.0 to 20.3 kJ/mol"
    assert F.interval(0.00112, 0.00141, level=0.9) == "90 % CI 0.00112 to 0.00141"
    assert F.value_with_se(15.234, 1.27, unit="kJ/mol") == "15.2 ± 1.3 kJ/mol"


def test_results_files_carry_no_float_noise(tmp_path, sample_runs_dir, cli_runner):
    from gpctools.cli import app

    out = tmp_path / "o"
    r = cli_runner.invoke(app, ["batch", str(sample_runs_dir / "batch.csv"), "-m", str(sample_runs_dir / "method.toml"),
                                "-o", str(out), "--no-review"])
    assert r.exit_code == 0, r.output
    cal = pd.read_csv(out / "calibration.csv")
    standards = pd.read_csv(sample_runs_dir / "standards.csv")
    # the nominal Mp of each standard comes back exactly as the standards file gives it
    assert sorted(cal["Mp [g/mol]"]) == sorted(standards["Mp [g/mol]"].astype(float))
    text = (out / "results.csv").read_text() + (out / "manifest.json").read_text()
    assert "99999999" not in text and "00000000" not in text
    results = pd.read_csv(out / "results.csv")
    # ranges are numeric columns, not text cells
    for c in ("integration start [mL]", "baseline window 1 start [mL]", "baseline window 2 end [mL]"):
        assert results[c].dtype.kind == "f", c
    assert "baseline windows [mL]" not in results.columns and "limits [mL]" not in results.columns
    assert set(results["integration limits chosen"]) <= {"automatic", "set"}
    # the workbook stores the same cleaned numbers (numeric cells, 12 significant digits)
    import openpyxl

    ws = openpyxl.load_workbook(out / "results.xlsx", read_only=True)["results"]
    rows = list(ws.iter_rows(values_only=True))
    col = rows[0].index("Mw [g/mol]")
    assert [r[col] for r in rows[1:]] == pytest.approx(results["Mw [g/mol]"].tolist(), rel=1e-15)
    assert all(F.clean(r[col]) == r[col] for r in rows[1:])
