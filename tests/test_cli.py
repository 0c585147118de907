"""CLI through typer's CliRunner: exit codes and messages for each kind of error."""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

import gpctools
from gpctools.cli import EXIT_CLOSED_PIPE, app
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
    # default: one long-form distributions table, no per-injection tables (issue 14)
    assert not (tmp_path / "o" / "distributions").exists()
    curves = pd.read_csv(tmp_path / "o" / "distributions.csv")
    assert len(curves.groupby(["sample_id", "sheet row [-]"])) == 8
    r = runner.invoke(app, ["batch", str(demo_dir / "batch.csv"), "-m", str(demo_dir / "method.toml"),
                            "-o", str(tmp_path / "t"), "--injection-tables"])
    assert r.exit_code == 0, r.output
    assert len(list((tmp_path / "t" / "distributions").glob("*.csv"))) == 8


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


def test_calibrate_prints_residuals(demo_dir, tmp_path):
    r = runner.invoke(app, ["calibrate", str(demo_dir / "method.toml"), "-o", str(tmp_path)])
    assert r.exit_code == 0, r.output
    assert "residual [%]" in r.output and "PS 96k" in r.output
    # the curve in the user's units with standard errors, and R² never rounded to "1"
    assert "log10 M = " in r.output and "b3 = " in r.output and "standard error" in r.output
    assert "R^2 = 0.99999" in r.output
    assert (tmp_path / "calibration.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


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


def _readme_demo_excerpt() -> list[str]:
    """The lines of the README's printed demo output ("..." marks what it leaves out)."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    block = re.search(r"and prints \(abridged\):\n\n```\n(.*?)```", text, flags=re.S)
    assert block, "README lost its demo excerpt"
    return [line for line in block.group(1).splitlines() if line.strip() not in ("", "...")]


def test_demo_writes_its_sample_runs_and_runs_every_part(tmp_path, monkeypatch):
    # No --samples: the demo writes the invented scenario into OUT/sample_runs (so a wheel
    # needs no data files) and runs batch, QC, transfer and diagnosis on it. Run from an
    # empty folder with the default --out, as the README shows it.
    monkeypatch.chdir(tmp_path)
    r = runner.invoke(app, ["demo"])
    assert r.exit_code == 0, r.output
    out = tmp_path / "gpctools-demo"
    # Every line the README shows is printed (up to its "..." where it abridges).
    printed = r.output.splitlines()
    for line in _readme_demo_excerpt():
        head = line.split("...")[0]
        assert any(p.startswith(head) for p in printed), f"README line not printed: {line!r}"
    assert "largest deviation from the true averages" in r.output
    assert "demo parts run: batch, QC, transfer, diagnosis, QC sequence, detectors" in r.output
    assert "skipped" not in r.output
    for part in ("sample_runs/batch.csv", "batch/results.csv", "qc/qc_report.html", "transfer/constants.csv",
                 "troubleshooting/diagnosis.md"):
        assert (out / part).is_file(), part
    summary = json.loads((out / "demo_summary.json").read_text())
    assert summary["parts"] == {p: {"status": "ran"} for p in ("batch", "QC", "transfer", "diagnosis",
                                                               "QC sequence", "detectors")}
    # The replicates share a sample id, so the replicate check is evaluated (issue 15).
    qc = json.loads((out / "qc" / "qc_summary.json").read_text())
    results = {c["check"]: c["result"] for s in qc["suitability"] for c in s["checks"]}
    # (pooled over the sequence's samples since issue 12)
    assert results["replicate RSD of Mw, pooled [%]"] == "pass"
    assert results["replicate RSD of Mn, pooled [%]"] == "pass"
    assert "not evaluated" not in results.values()


def test_demo_on_a_hand_made_folder_reports_each_skipped_part(demo_dir, tmp_path):
    # A folder with a batch, a method and its standards only: the batch runs, the three
    # other parts are reported as skipped with the file they need, nothing is silent.
    d = tmp_path / "mine"
    (d / "exports").mkdir(parents=True)
    for name in ("batch.csv", "method.toml", "standards.csv"):
        shutil.copy(demo_dir / name, d / name)
    for f in (demo_dir / "exports").iterdir():
        shutil.copy(f, d / "exports" / f.name)
    r = runner.invoke(app, ["demo", "--samples", str(d), "--out", str(tmp_path / "o")])
    assert r.exit_code == 0, r.output
    assert "QC skipped: no spec_limits.csv in" in r.output
    assert "transfer skipped: no transfer_series/run_series.csv and no transfer_series/truth.json" in r.output
    assert "diagnosis skipped: no troubleshooting/recipe.toml and no troubleshooting/batch.csv" in r.output
    assert "demo parts run: batch; skipped: QC, transfer, diagnosis, QC sequence, detectors" in r.output
    # without truth.csv the averages are printed alone, and the note says why
    assert "no truth.csv in" in r.output and "largest deviation" not in r.output
    summary = json.loads((tmp_path / "o" / "demo_summary.json").read_text())
    assert summary["parts"]["batch"] == {"status": "ran"}
    for part in ("QC", "transfer", "diagnosis"):
        assert summary["parts"][part]["status"] == "skipped" and summary["parts"][part]["reason"]
    assert summary["worst deviation [%]"] is None


@pytest.mark.filterwarnings("ignore::gpctools.errors.GpcWarning")  # control limits from few points, expected
def test_run_demo_reports_its_stages_and_counts_the_injections(demo_dir, tmp_path):
    # The stage callback is how the CLI shows progress: one stage per part that runs,
    # and the batch stage counts its injections up to the number in the sheet.
    from contextlib import contextmanager

    from gpctools.demo import run_demo

    d = tmp_path / "mine"
    shutil.copytree(demo_dir, d, ignore=shutil.ignore_patterns("truth.csv", "history"))
    stages: list[str] = []
    counts: list[tuple[int, int]] = []

    @contextmanager
    def stage(label):
        stages.append(label)
        yield lambda done, total: counts.append((done, total))

    lines: list[str] = []
    report = run_demo(d, tmp_path / "o", echo=lines.append, stage=stage)
    assert stages[0] == "batch: injections" and stages[1].startswith("QC")
    assert len(stages) == 2  # transfer and diagnosis are skipped: their folders are missing
    assert counts[-1] == (8, 8) and [c[0] for c in counts] == sorted(c[0] for c in counts)
    assert report["parts"]["QC"] == {"status": "ran"}
    assert any(line.startswith("transfer skipped: no transfer_series/run_series.csv") for line in
               "\n".join(lines).splitlines())


def test_demo_on_a_folder_without_a_batch_exits_2(tmp_path):
    r = runner.invoke(app, ["demo", "--samples", str(tmp_path), "--out", str(tmp_path / "o")])
    assert r.exit_code == 2
    assert "no batch.csv in the sample-runs folder" in r.output
    _ok_no_traceback(r)


# ---------------------------------------------------------------- version and templates


def test_version_prints_the_package_version():
    r = runner.invoke(app, ["--version"])
    assert r.exit_code == 0
    assert r.output.strip() == f"gpctools {gpctools.__version__}"
    # pyproject reads the version from gpctools.__version__: one place to change it
    pyproject = (ROOT / "pyproject.toml").read_text()
    assert 'dynamic = ["version"]' in pyproject and 'attr = "gpctools.__version__"' in pyproject


def test_template_list_names_every_shipped_file_with_a_description(templates_dir):
    r = runner.invoke(app, ["template", "--list"])
    assert r.exit_code == 0, r.output
    shipped = sorted(p.name for p in templates_dir.iterdir() if p.is_file() and not p.name.endswith(".py"))
    assert len(shipped) >= 9  # method, standards, recipe, batch/run_series/spec_limits as CSV and XLSX
    listed = {line.split()[0]: line.split(None, 1)[1] for line in r.output.splitlines() if line.strip()}
    assert sorted(listed) == shipped
    assert all(len(text) > 10 for text in listed.values())


def test_template_writes_the_shipped_bytes_and_refuses_to_overwrite(templates_dir, tmp_path):
    out = tmp_path / "t"
    r = runner.invoke(app, ["template", "method.toml", "batch", "--out", str(out)])
    assert r.exit_code == 0, r.output
    for name in ("method.toml", "batch.csv", "batch.xlsx"):  # a stem gives every format
        assert (out / name).read_bytes() == (templates_dir / name).read_bytes(), name
    assert "method.toml reads standards.csv: write it too with gpctools template standards.csv" in r.output
    (out / "method.toml").write_text("# my edits\n")
    again = runner.invoke(app, ["template", "method", "--out", str(out)])
    assert again.exit_code == 2
    assert f"error: method.toml already exists in {out}; pass --force" in again.output
    _ok_no_traceback(again)
    assert (out / "method.toml").read_text() == "# my edits\n"  # untouched
    forced = runner.invoke(app, ["template", "method", "--out", str(out), "--force"])
    assert forced.exit_code == 0, forced.output
    assert (out / "method.toml").read_bytes() == (templates_dir / "method.toml").read_bytes()


def test_template_writes_into_the_current_folder_by_default(tmp_path, monkeypatch, templates_dir):
    monkeypatch.chdir(tmp_path)
    r = runner.invoke(app, ["template", "--all"])
    assert r.exit_code == 0, r.output
    shipped = sorted(p.name for p in templates_dir.iterdir() if p.is_file() and not p.name.endswith(".py"))
    assert sorted(p.name for p in tmp_path.iterdir()) == shipped
    assert "reads standards.csv" not in r.output  # written together, no hint needed


def test_template_unknown_name_exits_2_and_lists_the_templates():
    r = runner.invoke(app, ["template", "methd"])
    assert r.exit_code == 2
    assert "no template named 'methd'" in r.output and "method.toml" in r.output
    _ok_no_traceback(r)


# ---------------------------------------------------------------- progress and pipes
# Real processes: a terminal (pty) for the progress display, a closed pipe for the
# quiet end. GPCTOOLS_PROGRESS_DELAY=0 shows progress at once, so nothing depends on time.


def _env(**extra: str) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if k not in ("GPCTOOLS_DEBUG", "NO_COLOR")}
    env.update({"GPCTOOLS_PROGRESS_DELAY": "0", "COLUMNS": "100", "TERM": "xterm"}, **extra)
    return env


def _run_in_terminal(args: list[str], cwd: Path) -> tuple[int, str]:
    """Run the CLI with stdout and stderr on a pseudo-terminal; returns (exit code, output)."""
    pty = pytest.importorskip("pty")
    master, slave = pty.openpty()
    proc = subprocess.Popen([sys.executable, "-m", "gpctools.cli", *args], stdin=subprocess.DEVNULL,
                            stdout=slave, stderr=slave, cwd=cwd, env=_env(), close_fds=True)
    os.close(slave)
    chunks = []
    while True:
        try:
            data = os.read(master, 65536)
        except OSError:  # EIO: the child closed the terminal
            break
        if not data:
            break
        chunks.append(data)
    os.close(master)
    return proc.wait(timeout=300), b"".join(chunks).decode("utf-8", "replace")


BAR = "\u2501"  # the heavy horizontal line rich draws its bars with


@pytest.mark.skipif(sys.platform == "win32", reason="pseudo-terminals are POSIX")
def test_batch_shows_a_progress_bar_on_a_terminal_only(demo_dir, tmp_path):
    args = ["batch", str(demo_dir / "batch.csv"), "-m", str(demo_dir / "method.toml")]
    code, text = _run_in_terminal([*args, "-o", str(tmp_path / "a")], tmp_path)
    assert code == 0, text
    assert BAR in text and "injections" in text, text
    assert "LC110-A" in text  # the results table still prints
    code, quiet = _run_in_terminal(["--quiet", *args, "-o", str(tmp_path / "b")], tmp_path)
    assert code == 0, quiet
    assert BAR not in quiet and "LC110-A" in quiet
    piped = subprocess.run([sys.executable, "-m", "gpctools.cli", *args, "-o", str(tmp_path / "c")],
                           capture_output=True, text=True, env=_env(), timeout=300)
    assert piped.returncode == 0, piped.stderr
    assert BAR not in piped.stdout + piped.stderr and "\x1b" not in piped.stdout + piped.stderr


@pytest.mark.parametrize("args", [["template", "--list"], ["diagnose", "RECIPE", "-o", "OUT"]])
def test_closed_pipe_ends_quietly(args, tmp_path, templates_dir):
    # The reader is gone before the command writes its first line (as `| head` after it
    # has read enough): exit 141 (128 + SIGPIPE), nothing on stderr, no traceback.
    args = [a.replace("RECIPE", str(templates_dir / "recipe.toml")).replace("OUT", str(tmp_path / "d"))
            for a in args]
    read_end, write_end = os.pipe()
    os.close(read_end)
    try:
        proc = subprocess.run([sys.executable, "-m", "gpctools.cli", *args], stdout=write_end,
                              stderr=subprocess.PIPE, env=_env(), timeout=300)
    finally:
        os.close(write_end)
    stderr = proc.stderr.decode("utf-8", "replace")
    assert proc.returncode == EXIT_CLOSED_PIPE, stderr
    assert "Broken pipe" not in stderr and "BrokenPipeError" not in stderr and "Traceback" not in stderr
    assert "warning:" in stderr or stderr == ""  # only the command's own warnings, if any


@pytest.mark.skipif(shutil.which("head") is None, reason="needs the head command")
def test_diagnose_piped_into_head(tmp_path, templates_dir):
    # The shell's way: `gpctools diagnose ... | head -n 1`; whether or not the write
    # after head left hits the closed pipe, stderr stays free of pipe errors.
    cmd = (f'"{sys.executable}" -m gpctools.cli diagnose "{templates_dir / "recipe.toml"}" '
           f'-o "{tmp_path / "d"}" | head -n 1')
    proc = subprocess.run(["sh", "-c", cmd], capture_output=True, text=True, env=_env(), timeout=300)
    assert proc.returncode == 0, proc.stderr  # the pipeline's status is head's
    assert len(proc.stdout.splitlines()) == 1
    assert "Broken pipe" not in proc.stderr and "Traceback" not in proc.stderr


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


# Modules that only plotting, fitting or HTML need (issue 14): a command that does not
# plot must not pay for them at start-up. `batch` writes review.html (jinja2, inline SVG
# drawn without matplotlib), so jinja2 is allowed there; `calibrate` writes its plot by
# default, so it is checked with --no-plot.
_HEAVY = ("matplotlib", "scipy.optimize", "lmfit", "jinja2")
_MODULES_AFTER = """
import sys
from gpctools.cli import main
sys.argv = ["gpctools", *sys.argv[1:]]
try:
    main()
except SystemExit:
    pass
print("LOADED:" + ",".join(m for m in {heavy!r} if m in sys.modules), file=sys.stderr)
"""


@pytest.mark.parametrize(("args", "allowed"), [
    (["--help"], ()),
    (["batch", "{d}/batch.csv", "-m", "{d}/method.toml", "-o", "{o}"], ("jinja2",)),
    (["batch", "{d}/batch.csv", "-m", "{d}/method.toml", "-o", "{o}", "--no-review"], ()),
    (["calibrate", "{d}/method.toml", "--no-plot"], ()),
    (["inspect", "{d}/exports/LC110-A1.csv"], ()),
], ids=["help", "batch", "batch-no-review", "calibrate-no-plot", "inspect"])
def test_commands_that_do_not_plot_never_import_matplotlib(args, allowed, demo_dir, tmp_path):
    # behavioural, not timed: the modules loaded by a real process, read from sys.modules
    argv = [a.format(d=demo_dir, o=tmp_path / "o") for a in args]
    heavy = tuple(m for m in _HEAVY if m not in allowed)
    proc = subprocess.run([sys.executable, "-c", _MODULES_AFTER.format(heavy=heavy), *argv],
                          capture_output=True, text=True, timeout=300)
    line = [ln for ln in proc.stderr.splitlines() if ln.startswith("LOADED:")]
    assert line, proc.stderr
    assert line[-1] == "LOADED:", f"{' '.join(args)} imported {line[-1][7:]}"
