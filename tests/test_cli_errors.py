"""Exit codes and messages of the CLI.

Bad input (the GpcError family) ends with one clear line, exit code 2 and no traceback;
inputs are never modified and no partial files are left. An internal error (any other
exception) ends with one line and exit code 3, and shows its traceback only with --debug.
"""

from __future__ import annotations

import hashlib
import re
import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest
from typer.testing import CliRunner

from gpctools.cli import EXIT_INTERNAL, EXIT_USER_ERROR, app

runner = CliRunner()


@pytest.fixture(scope="module")
def runs(tmp_path_factory, sample_runs_dir: Path, templates_dir: Path) -> Path:
    """A copy of sample_runs/ and templates/ with one batch already processed."""
    d = tmp_path_factory.mktemp("robust")
    shutil.copytree(sample_runs_dir, d / "s", ignore=shutil.ignore_patterns("transfer_series"))
    shutil.copytree(templates_dir, d / "t")
    r = runner.invoke(app, ["batch", str(d / "s" / "batch.csv"), "-m", str(d / "s" / "method.toml"),
                            "-o", str(d / "out")])
    assert r.exit_code == 0, r.output
    return d


def _user_error(r, *needles: str) -> str:
    """Exit 2, no traceback, the error on one line naming what was asked for."""
    assert r.exit_code == EXIT_USER_ERROR, r.output
    assert "Traceback" not in r.output, r.output
    # The guard ends the command with typer.Exit(2), which the runner records as
    # SystemExit(2); any other exception here escaped the guard.
    assert isinstance(r.exception, SystemExit) and r.exception.code == EXIT_USER_ERROR, repr(r.exception)
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
    text, n = re.subn(r'"Mw \[g/mol\]" = \d+', '"Mw [g/mol]" = 8262', (s / "recipe.toml").read_text(), count=1)
    assert n == 1  # the measured Mw, whatever the regenerated case holds
    bad.write_text(text)
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


def test_regression_spec_sheet_without_product_rows_is_refused(tmp_path, sample_runs_dir, cli_runner, out_dir):
    # A header-only spec sheet once gave "no spec" for every sample and exit 0.
    spec = tmp_path / "spec.csv"
    spec.write_text("product,Mn min [g/mol]\n", encoding="utf-8")
    r = cli_runner.invoke(app, ["qc", str(sample_runs_dir / "batch.csv"), "--method",
                                str(sample_runs_dir / "method.toml"), "--specs", str(spec),
                                "--out", str(out_dir)])
    _user_error(r, "no product rows")


# ----------------------------------------------------------------------------- exit code 3

FAULT = "simulated fault inside the library"


def _first_export(sample_runs_dir: Path) -> Path:
    return sorted((sample_runs_dir / "exports").iterdir())[0]


@pytest.fixture
def broken_reader(monkeypatch) -> list[tuple]:
    """Make the chromatogram reader fail with an exception outside the GpcError family."""
    import gpctools.io

    calls: list[tuple] = []

    def boom(*args, **kwargs):
        calls.append(args)
        raise RuntimeError(FAULT)

    monkeypatch.setattr(gpctools.io, "read_chromatogram", boom)
    return calls


def test_internal_error_exits_3_with_one_line(broken_reader, cli_runner, sample_runs_dir):
    r = cli_runner.invoke(app, ["inspect", str(_first_export(sample_runs_dir))])
    assert broken_reader, "the command did not reach the patched reader: patch the function it uses"
    assert r.exit_code == EXIT_INTERNAL, r.output
    assert isinstance(r.exception, SystemExit) and r.exception.code == EXIT_INTERNAL, repr(r.exception)
    assert "Traceback" not in r.output
    lines = [ln for ln in r.output.splitlines() if ln.strip()]
    assert lines == [f"internal error: RuntimeError: {FAULT} (run with --debug for details)"], r.output
    assert r.stderr.strip() == lines[0]  # on stderr, nothing on stdout
    assert r.stdout == ""


def test_internal_error_with_debug_raises_with_its_traceback(broken_reader, cli_runner, sample_runs_dir):
    r = cli_runner.invoke(app, ["--debug", "inspect", str(_first_export(sample_runs_dir))])
    assert broken_reader
    # --debug lets the original exception out of the guard (the runner catches it here;
    # a real process prints the traceback, see the next test).
    assert isinstance(r.exception, RuntimeError) and str(r.exception) == FAULT
    assert "internal error" not in r.output
    import traceback

    frames = [f.name for f in traceback.extract_tb(r.exc_info[2])]
    assert "boom" in frames and "inspect_cmd" in frames
    # The next command without --debug is back to the one-line message.
    r = cli_runner.invoke(app, ["inspect", str(_first_export(sample_runs_dir))])
    assert r.exit_code == EXIT_INTERNAL and "Traceback" not in r.output


def test_internal_error_traceback_in_a_real_process(sample_runs_dir):
    # The console entry point in a fresh interpreter: without --debug one line and exit
    # 3; with --debug Python's own traceback on stderr (and its exit code 1).
    script = textwrap.dedent(f"""
        import sys
        import gpctools.io
        def boom(*args, **kwargs):
            raise RuntimeError({FAULT!r})
        gpctools.io.read_chromatogram = boom
        from gpctools.cli import main
        sys.argv = ["gpctools", *sys.argv[1:]]
        main()
    """)
    export = str(_first_export(sample_runs_dir))
    quiet = subprocess.run([sys.executable, "-c", script, "inspect", export],
                           capture_output=True, text=True, timeout=120)
    assert quiet.returncode == EXIT_INTERNAL, quiet.stderr
    assert quiet.stderr.strip() == f"internal error: RuntimeError: {FAULT} (run with --debug for details)"
    loud = subprocess.run([sys.executable, "-c", script, "--debug", "inspect", export],
                          capture_output=True, text=True, timeout=120)
    assert loud.returncode == 1, loud.stderr
    assert loud.stderr.startswith("Traceback (most recent call last):"), loud.stderr
    assert loud.stderr.rstrip().endswith(f"RuntimeError: {FAULT}")
    assert "in boom" in loud.stderr
