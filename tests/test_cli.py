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
    assert "LC110-A1" in r.output and "Mn [g/mol]" in r.output
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


# ------------------------------------------------ batch: a method per row (issue 10)


def _mixed_sheet(d: Path, blank_row: int | None = None) -> Path:
    rows = (d / "batch.csv").read_text().splitlines()
    body = [r + ("," if i == blank_row else ",method.toml") for i, r in enumerate(rows[1:])]
    p = d / "mixed.csv"
    p.write_text("\n".join([rows[0] + ",method file", *body]) + "\n")
    return p


def test_batch_without_method_option_when_every_row_names_one(demo_dir, tmp_path):
    d = tmp_path / "d"
    shutil.copytree(demo_dir, d)
    r = runner.invoke(app, ["batch", str(_mixed_sheet(d)), "-o", str(tmp_path / "o")])
    assert r.exit_code == 0, r.output
    import pandas as pd

    t = pd.read_csv(tmp_path / "o" / "results.csv")
    assert set(t["method file"]) == {"method.toml"} and t["method SHA-256"].str.len().eq(64).all()
    assert {"integration start [mL]", "M at integration end [g/mol]", "overrides"} <= set(t.columns)


def test_batch_without_method_option_names_the_rows_without_one(demo_dir, tmp_path):
    d = tmp_path / "d"
    shutil.copytree(demo_dir, d)
    r = runner.invoke(app, ["batch", str(_mixed_sheet(d, blank_row=1)), "-o", str(tmp_path / "o")])
    assert r.exit_code == 2, r.output
    assert "mixed.csv" in r.output and "no method for row(s) 3" in r.output and "--method" in r.output
    _ok_no_traceback(r)


# ------------------------------------------------------------------ inspect (issue 10)


def _export(tmp_path: Path) -> Path:
    # A ';'-separated export with decimal commas, a metadata line and six detectors.
    lines = ["Instrument: bench SEC",
             "Time (min);RI (mV);UV 280 (mAU);LS 90 (mV);Visc DP (Pa);Pressure (bar);ELSD"]
    for i in range(40):
        lines.append(f"{10 + 0.1 * i:.1f};{(i % 7) + 0.25};1,5;2;3;40;1".replace(".", ","))
    p = tmp_path / "export.csv"
    p.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return p


def test_inspect_shows_dialect_columns_and_use(tmp_path):
    # Every check value is a property the file was written with (derived from the writer
    # above); the kinds are the detectors the headers name.
    r = runner.invoke(app, ["inspect", str(_export(tmp_path))])
    assert r.exit_code == 0, r.output
    out = r.output
    assert "encoding utf-8" in out
    assert "separator: semicolon (;); decimal mark: decimal comma (,)" in out
    assert "header: line 2" in out
    kinds = {"'Time (min)'": "x (time)", "'RI (mV)'": "RI", "'UV 280 (mAU)'": "UV",
             "'LS 90 (mV)'": "light scattering", "'Visc DP (Pa)'": "viscometer",
             "'Pressure (bar)'": "pressure", "'ELSD'": "ELSD"}
    for header, kind in kinds.items():
        line = next(ln for ln in out.splitlines() if header in ln and ln.startswith("  "))
        assert kind in line, line
    assert "<- x" in next(ln for ln in out.splitlines() if "'Time (min)'" in ln and ln.startswith("  "))
    assert "<- signal" in next(ln for ln in out.splitlines() if "'RI (mV)'" in ln and ln.startswith("  "))
    assert "10 to 13.9 min, 40 slices" in out  # 10.0 + 0.1 * 39 = 13.9
    assert "Instrument: bench SEC" in out


def test_inspect_with_method_uses_its_import_options_and_limits(tmp_path, demo_dir):
    p = _export(tmp_path)
    shutil.copy(demo_dir / "standards.csv", tmp_path / "standards.csv")
    (tmp_path / "m.toml").write_text(
        '[import]\nsignal_column = "UV 280 (mAU)"\n[flow]\nrate = 0.5\n'
        "[integration]\nlimits_molar_mass = [1000, 1000000]\n"
        '[calibration]\norder = 3\nstandards = "standards.csv"\n', encoding="utf-8")
    r = runner.invoke(app, ["inspect", str(p), "--method", str(tmp_path / "m.toml")])
    assert r.exit_code == 0, r.output
    assert "<- signal" in next(ln for ln in r.output.splitlines() if "'UV 280 (mAU)'" in ln and ln.startswith("  "))
    assert "import options: signal_column='UV 280 (mAU)'" in r.output
    assert "volume at 0.5 mL/min: 5 to 6.95 mL" in r.output  # V = t x F [definition]
    assert "(from 1,000 to 1,000,000 g/mol)" in r.output
    assert "is a UV detector" in r.output  # the response warning (stderr)


def test_inspect_still_describes_a_file_the_reader_refuses(tmp_path):
    # A forced decimal point on a decimal-comma file: the dialect found is shown, then the
    # reader's refusal, exit 2.
    p = _export(tmp_path)
    (tmp_path / "m.toml").write_text('[import]\ndecimal = "."\n[calibration]\norder = 1\n'
                                     '[[calibration.standard]]\nMp = 1e5\nvolume = 14\n'
                                     '[[calibration.standard]]\nMp = 1e3\nvolume = 18\n', encoding="utf-8")
    r = runner.invoke(app, ["inspect", str(p), "-m", str(tmp_path / "m.toml")])
    assert r.exit_code == 2, r.output
    # the file's own dialect is shown, then the refusal of the forced decimal point
    assert "separator: semicolon (;); decimal mark: decimal comma (,)" in r.output
    assert "import.decimal" in r.output
    assert "error: " in r.output and "export.csv" in r.output
    _ok_no_traceback(r)
