"""Regression tests for the robustness review: every bad input ends with one clear line,
exit code 2 and no traceback; inputs are never modified and no partial files are left."""

from __future__ import annotations

import hashlib
import shutil
from pathlib import Path

import pytest
from typer.testing import CliRunner

from gpctools.cli import app

REPO = Path(__file__).resolve().parent.parent
runner = CliRunner()


@pytest.fixture(scope="module")
def runs(tmp_path_factory) -> Path:
    """A copy of sample_runs/ and templates/ with one batch already processed."""
    d = tmp_path_factory.mktemp("robust")
    shutil.copytree(REPO / "sample_runs", d / "s", ignore=shutil.ignore_patterns("transfer_series"))
    shutil.copytree(REPO / "templates", d / "t")
    r = runner.invoke(app, ["batch", str(d / "s" / "batch.csv"), "-m", str(d / "s" / "method.toml"),
                            "-o", str(d / "out")])
    assert r.exit_code == 0, r.output
    return d


def _user_error(r, *needles: str) -> str:
    """Exit 2, no traceback, the error on one line naming what was asked for."""
    assert r.exit_code == 2, r.output
    assert "Traceback" not in r.output and r.exception is None or isinstance(r.exception, SystemExit)
    lines = [ln for ln in r.output.splitlines() if ln.startswith("error:")]
    assert len(lines) == 1, r.output
    for n in needles:
        assert n in lines[0], lines[0]
    return lines[0]


def _digest(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def test_regression_out_folder_is_a_file(runs, tmp_path):
    f = tmp_path / "not_a_folder"
    f.write_text("x")
    s = runs / "s"
    for args in (["batch", str(s / "batch.csv"), "-m", str(s / "method.toml")],
                 ["transfer", str(runs / "t" / "run_series.csv"), "--no-plots"],
                 ["diagnose", str(s / "troubleshooting" / "recipe.toml")],
                 ["qc", str(runs / "out" / "results.csv"), "-s", str(s / "spec_limits.csv")]):
        _user_error(runner.invoke(app, [*args, "-o", str(f)]), "--out", "is a file")
        _user_error(runner.invoke(app, [*args, "-o", str(f / "sub")]), "--out", "which is a file")
    assert f.read_text() == "x"


def test_regression_intercept_check_with_drift_fit(runs, tmp_path):
    # the template series has conversions, so the drift model is fitted; the intercept
    # check used to crash on it (AttributeError, exit 3)
    r = runner.invoke(app, ["transfer", str(runs / "t" / "run_series.csv"), "--no-plots",
                            "--C-M", "6e-5", "-o", str(tmp_path / "o")])
    assert r.exit_code == 0, r.output
    assert "lower bound" in r.output


@pytest.mark.parametrize("option", [["--expected-intercept", "-1,-2"], ["--C-M", "-1"],
                                    ["--impurity-C", "-3"], ["--cld-window", "1e6,1e3"],
                                    ["--cld-window", "-5,1000"]])
def test_regression_impossible_transfer_options(runs, tmp_path, option):
    r = runner.invoke(app, ["transfer", str(runs / "t" / "run_series.csv"), "--no-plots", *option,
                            "-o", str(tmp_path / "o")])
    _user_error(r, option[0])


def test_regression_assigned_value_not_a_number(runs, tmp_path):
    s = runs / "s"
    bad = s / "batch_bad_assigned.csv"
    bad.write_text((s / "batch.csv").read_text().replace("110410", "lots"))
    before = _digest(s)
    out = tmp_path / "q"
    r = runner.invoke(app, ["qc", str(bad), "-m", str(s / "method.toml"), "-s", str(s / "spec_limits.csv"),
                            "-o", str(out)])
    _user_error(r, "assigned Mn [g/mol]", "CHK-BR1", "'lots'")
    assert _digest(s) == before  # inputs untouched
    assert not list(out.rglob("*.part"))  # no partial outputs


def test_regression_qc_refuses_a_batch_sheet_without_method(runs, tmp_path):
    s = runs / "s"
    r = runner.invoke(app, ["qc", str(s / "batch.csv"), "-s", str(s / "spec_limits.csv"), "-o", str(tmp_path)])
    _user_error(r, "batch.csv", "not a results table", "--method")
    r = runner.invoke(app, ["qc", str(runs / "out" / "results.csv"), "-s", str(s / "spec_limits.csv"),
                            "--history", str(s / "batch.csv"), "-o", str(tmp_path)])
    _user_error(r, "batch.csv", "not a results table")


def test_regression_qc_results_table_that_is_an_image(runs, tmp_path):
    png = tmp_path / "results.csv"
    png.write_bytes(b"\x89PNG\r\n\x1a\n" + b"\0" * 64)
    r = runner.invoke(app, ["qc", str(png), "-s", str(runs / "s" / "spec_limits.csv"), "-o", str(tmp_path / "o")])
    _user_error(r, "results.csv", "PNG image")


@pytest.mark.parametrize("header, hint", [("Mn min", "Mn min [g/mol]"), ("Mn min (g/mol)", "Mn min [g/mol]"),
                                          ("Dispersity Max", "dispersity max [-]")])
def test_regression_spec_limit_header_without_unit(runs, tmp_path, header, hint):
    s = runs / "s"
    old = "Mn min [g/mol]" if header.startswith("Mn") else "dispersity max [-]"
    spec = tmp_path / "specs.csv"
    spec.write_text((s / "spec_limits.csv").read_text().replace(old, header, 1))
    r = runner.invoke(app, ["qc", str(runs / "out" / "results.csv"), "-s", str(spec), "-o", str(tmp_path / "o")])
    _user_error(r, "specs.csv", repr(header), hint)


def test_regression_recipe_Mw_below_Mn(runs, tmp_path):
    s = runs / "s" / "troubleshooting"
    bad = s / "recipe_bad.toml"
    bad.write_text((s / "recipe.toml").read_text().replace('"Mw [g/mol]" = 82624', '"Mw [g/mol]" = 8262'))
    r = runner.invoke(app, ["diagnose", str(bad), "-o", str(tmp_path / "o"), "--no-xlsx"])
    _user_error(r, "recipe_bad.toml", "Mw [g/mol]", "below Mn")


def test_regression_sample_needs_measured(runs, tmp_path):
    r = runner.invoke(app, ["diagnose", str(runs / "s" / "troubleshooting" / "recipe.toml"), "--sample", "X",
                            "-o", str(tmp_path / "o"), "--no-xlsx"])
    _user_error(r, "--sample", "--measured")


def test_regression_batch_empty_cells_name_the_column(runs):
    from gpctools.batch import read_batch_sheet

    s = runs / "s"
    sheet = s / "batch_empty_cells.csv"
    lines = (s / "batch.csv").read_text().splitlines()
    lines[1] = "X1,," + lines[1].split(",", 2)[2]
    lines[2] = "," + lines[2].split(",", 1)[1]
    sheet.write_text("\n".join(lines) + "\n")
    entries = read_batch_sheet(sheet)
    assert "column 'file'" in entries[0].problem and "cell is empty" in entries[0].problem
    assert "column 'sample_id'" in entries[1].problem


def test_regression_messages_name_no_product(tmp_path):
    from gpctools.errors import InputFormatError
    from gpctools.io import read_sheet

    text_as_xlsx = tmp_path / "sheet.xlsx"
    text_as_xlsx.write_text("a,b\n1,2\n")
    with pytest.raises(InputFormatError) as e:
        read_sheet(text_as_xlsx)
    assert "rename it to .csv" in str(e.value) and "Excel" not in str(e.value)


def test_regression_spec_sheet_without_product_rows_is_refused(tmp_path):
    # A header-only spec sheet once gave "no spec" for every sample and exit 0.
    from typer.testing import CliRunner

    from gpctools.cli import app

    root = Path(__file__).resolve().parent.parent
    spec = tmp_path / "spec.csv"
    spec.write_text("product,Mn min [g/mol]\n", encoding="utf-8")
    r = CliRunner().invoke(app, ["qc", str(root / "sample_runs" / "batch.csv"), "--method",
                                 str(root / "sample_runs" / "method.toml"), "--specs", str(spec),
                                 "--out", str(tmp_path / "o")])
    assert r.exit_code == 2
    assert "no product rows" in r.output and "Traceback" not in r.output
