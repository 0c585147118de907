"""CLI through typer's CliRunner: exit codes and messages for each kind of error."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from typer.testing import CliRunner

from gpctools.cli import app
from gpctools.demo import write_sample_runs

ROOT = Path(__file__).resolve().parent.parent
runner = CliRunner()


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory) -> Path:
    d = tmp_path_factory.mktemp("cli")
    write_sample_runs(d)
    return d


def _ok_no_traceback(result):
    assert "Traceback" not in result.output
    assert "Traceback" not in (result.stderr if result.stderr_bytes is not None else "")


def test_help_lists_commands():
    r = runner.invoke(app, ["--help"])
    assert r.exit_code == 0
    for cmd in ("batch", "calibrate", "inspect", "demo"):
        assert cmd in r.output


def test_batch_success(demo_dir, tmp_path):
    r = runner.invoke(app, ["batch", str(demo_dir / "batch.csv"), "-m", str(demo_dir / "method.toml"),
                            "-o", str(tmp_path / "o")])
    assert r.exit_code == 0, r.output
    assert "LC110-A" in r.output and "Mn [g/mol]" in r.output
    assert (tmp_path / "o" / "results.csv").exists()
    assert len(list((tmp_path / "o" / "distributions").glob("*.csv"))) == 8


def test_batch_with_failed_injection_exits_1(demo_dir, tmp_path):
    d = tmp_path / "d"
    shutil.copytree(demo_dir, d)
    with open(d / "batch.csv", "a") as fh:
        fh.write("GONE,exports/gone.csv,sample,,,,,\n")
    r = runner.invoke(app, ["batch", str(d / "batch.csv"), "-m", str(d / "method.toml"), "-o", str(tmp_path / "o")])
    assert r.exit_code == 1
    assert "gone.csv" in r.output
    assert "1 of 9 injections failed" in r.output
    _ok_no_traceback(r)
    assert (tmp_path / "o" / "results.csv").exists()  # everything else still written


@pytest.mark.parametrize(
    "case, expect",
    [
        ("missing_method", "method file not found"),
        ("bad_key", "unknown key"),
        ("missing_sheet", "not found"),
        ("sheet_without_columns", "sample_id"),
    ],
)
def test_user_errors_exit_2_with_message(demo_dir, tmp_path, case, expect):
    method = demo_dir / "method.toml"
    sheet = demo_dir / "batch.csv"
    if case == "missing_method":
        method = tmp_path / "nope.toml"
    elif case == "bad_key":
        method = tmp_path / "m.toml"
        method.write_text((demo_dir / "method.toml").read_text().replace("[baseline]", "[baseline]\nsmooth = 3"))
        shutil.copy(demo_dir / "standards.csv", tmp_path / "standards.csv")
    elif case == "missing_sheet":
        sheet = tmp_path / "none.csv"
    elif case == "sheet_without_columns":
        sheet = tmp_path / "s.csv"
        sheet.write_text("a,b\n1,2\n")
    r = runner.invoke(app, ["batch", str(sheet), "-m", str(method), "-o", str(tmp_path / "o")])
    assert r.exit_code == 2, r.output
    assert expect in r.output
    assert r.output.strip().startswith("error:") or "error:" in r.output
    _ok_no_traceback(r)


def test_calibrate_prints_residuals(demo_dir):
    r = runner.invoke(app, ["calibrate", str(demo_dir / "method.toml")])
    assert r.exit_code == 0, r.output
    assert "residual [%]" in r.output and "PS 96k" in r.output


def test_inspect_reports_columns(demo_dir):
    r = runner.invoke(app, ["inspect", str(demo_dir / "exports" / "LC260-C1.txt")])
    assert r.exit_code == 0, r.output
    assert "time" in r.output and "min" in r.output


def test_inspect_bad_file_exit_2(tmp_path):
    p = tmp_path / "x.csv"
    p.write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(range(256)))
    r = runner.invoke(app, ["inspect", str(p)])
    assert r.exit_code == 2
    assert "x.csv" in r.output
    _ok_no_traceback(r)


def test_demo_runs_on_bundled_sample_runs(tmp_path):
    r = runner.invoke(app, ["demo", "--out", str(tmp_path / "demo")])
    assert r.exit_code == 0, r.output
    assert "largest deviation from the true averages" in r.output
    assert (tmp_path / "demo" / "batch" / "results.csv").exists()
