"""What a plain install holds and does: templates as package data, the demo's data from
its writers, and (slow, under CI) a wheel installed in a fresh virtual environment that
runs the whole demo from an empty folder.

The wheel test builds the wheel with pip (as ``pip install .`` would), installs it with
its dependencies into a new virtual environment (no access to this checkout or to the
test environment's packages), and runs ``gpctools demo`` in an empty folder. It takes a
minute or two, so it runs only when ``CI=true`` or ``GPCTOOLS_TEST_WHEEL=1`` (``.ci/run``
sets the latter).
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import zipfile
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest

from gpctools.demo import write_demo_folder
from gpctools.templates import available

ROOT = Path(__file__).resolve().parent.parent
TEMPLATES = ROOT / "gpctools" / "templates"


def _shipped_templates() -> list[str]:
    return sorted(p.name for p in TEMPLATES.iterdir()
                  if p.is_file() and not p.name.startswith(("_", ".")) and not p.name.endswith((".py", ".pyc")))


# ------------------------------------------------------------------ the committed demo data


def _xlsx_values(path: Path) -> dict[str, list[tuple[Any, ...]]]:
    from openpyxl import load_workbook

    wb = load_workbook(path, read_only=True, data_only=True)
    try:
        return {ws.title: list(ws.iter_rows(values_only=True)) for ws in wb.worksheets}
    finally:
        wb.close()


def test_sample_runs_are_exactly_what_the_demo_writers_write(tmp_path):
    # `gpctools demo` from a wheel writes its sample runs with these writers; the folder
    # committed in the repository must be the same data, file for file. XLSX files embed
    # their save time, so they are compared by cell values.
    write_demo_folder(tmp_path)
    committed = ROOT / "sample_runs"
    made = sorted(str(p.relative_to(tmp_path)) for p in tmp_path.rglob("*") if p.is_file())
    held = sorted(str(p.relative_to(committed)) for p in committed.rglob("*") if p.is_file())
    assert made == held, "regenerate: python -c \"import gpctools.demo as d; d.write_demo_folder('sample_runs')\""
    for name in made:
        a, b = tmp_path / name, committed / name
        if name.endswith(".xlsx"):
            assert _xlsx_values(a) == _xlsx_values(b), name
        else:
            assert a.read_bytes() == b.read_bytes(), name


def test_demo_replicates_share_a_sample_id_and_products_have_spec_rows():
    # Issue 15: replicate injections of one lot share its sample id (so QC evaluates the
    # replicate check), and every product of the batch sheet has a row in the spec sheet.
    import pandas as pd

    batch = pd.read_csv(ROOT / "sample_runs" / "batch.csv")
    counts = batch[batch["role"] == "sample"]["sample_id"].value_counts()
    assert (counts >= 2).sum() >= 3
    specs = pd.read_csv(ROOT / "sample_runs" / "spec_limits.csv")
    assert set(batch["product"]) <= set(specs["product"])
    assert batch["file"].is_unique


# ------------------------------------------------------------------ the templates


def _copy_with(tmp_path: Path, *names: str) -> Path:
    for n in names:
        shutil.copy(TEMPLATES / n, tmp_path / n)
    return tmp_path / names[0]


def _read_method(path: Path, tmp_path: Path) -> Any:
    from gpctools.method import load_method

    return load_method(_copy_with(tmp_path, "method.toml", "standards.csv"))


def _read_standards(path: Path, tmp_path: Path) -> Any:
    # the standards file is read by the method file that names it
    from gpctools.method import load_method

    shutil.copy(path, tmp_path / "standards.csv")
    shutil.copy(TEMPLATES / "method.toml", tmp_path / "method.toml")
    return load_method(tmp_path / "method.toml").calibration


def _read_batch(path: Path, tmp_path: Path) -> Any:
    from gpctools.batch import read_batch_sheet

    return read_batch_sheet(path)


def _read_run_series(path: Path, tmp_path: Path) -> Any:
    from gpctools.transfer import read_run_series

    return read_run_series(path)


def _read_specs(path: Path, tmp_path: Path) -> Any:
    from gpctools.qc import read_specs

    return read_specs(path)


def _read_recipe(path: Path, tmp_path: Path) -> Any:
    from gpctools.kinetics import load_recipe

    return load_recipe(path)


def _read_qc_settings(path: Path, tmp_path: Path) -> Any:
    from gpctools.qc import read_qc_settings

    return read_qc_settings(path)


def _read_standards_mix(path: Path, tmp_path: Path) -> Any:
    from gpctools.qc.standards_run import read_standard_mix

    return read_standard_mix(path, "CAL-C")


def _read_history(path: Path, tmp_path: Path) -> Any:
    import pandas as pd

    from gpctools.qc import trend_points

    return trend_points(pd.read_csv(path), "Mw [g/mol]", flag_column="baseline") or None


#: The reader of each template, by name without extension.
READERS: dict[str, Callable[[Path, Path], Any]] = {
    "method": _read_method, "standards": _read_standards, "batch": _read_batch,
    "run_series": _read_run_series, "spec_limits": _read_specs, "recipe": _read_recipe,
    "batch_sequence": _read_batch, "spec_limits_long": _read_specs, "qc_settings": _read_qc_settings,
    "standards_mix": _read_standards_mix, "history": _read_history,
}


@pytest.mark.parametrize("name", _shipped_templates())
def test_every_template_is_read_by_its_reader(name, tmp_path):
    stem = name.rsplit(".", 1)[0]
    assert stem in READERS, f"add the reader of the new template {name} to READERS in {__file__}"
    assert READERS[stem](TEMPLATES / name, tmp_path) is not None


def test_every_template_is_listed():
    assert [t.name for t in available()] == _shipped_templates()
    assert all(t.description for t in available())


# ------------------------------------------------------------------ the wheel

WHEEL_TEST = os.environ.get("CI", "").lower() == "true" or os.environ.get("GPCTOOLS_TEST_WHEEL") == "1"

#: Files and folders of a checkout that are not sources (build artefacts, outputs).
_NOT_SOURCES = shutil.ignore_patterns(".git", "build", "dist", "*.egg-info", "__pycache__", ".pytest_cache",
                                      ".hypothesis", ".mypy_cache", ".ruff_cache", "gpctools-*", "bench")


def _run(args: list[str], cwd: Path, env: dict[str, str], timeout: float = 900) -> subprocess.CompletedProcess[str]:
    proc = subprocess.run(args, cwd=cwd, env=env, capture_output=True, text=True, timeout=timeout)
    assert proc.returncode == 0, f"{' '.join(args)}\n{proc.stdout[-4000:]}\n{proc.stderr[-4000:]}"
    return proc


@pytest.mark.skipif(not WHEEL_TEST, reason="builds a wheel and a fresh virtual environment (a minute or "
                    "two); runs under CI=true or GPCTOOLS_TEST_WHEEL=1")
def test_wheel_in_a_fresh_venv_runs_the_whole_demo_from_an_empty_folder(tmp_path):
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "PYTHONHOME", "VIRTUAL_ENV")}
    src = tmp_path / "src"
    shutil.copytree(ROOT, src, ignore=_NOT_SOURCES)
    dist = tmp_path / "dist"
    _run([sys.executable, "-m", "pip", "wheel", "--quiet", "--no-deps", "--wheel-dir", str(dist), str(src)],
         tmp_path, env)
    (wheel,) = dist.glob("gpctools-*.whl")
    names = zipfile.ZipFile(wheel).namelist()
    for t in _shipped_templates():
        assert f"gpctools/templates/{t}" in names, t
    assert any(n.startswith("gpctools/report/templates/") for n in names)
    assert any(n.startswith("gpctools/data/") and n.endswith(".csv") for n in names)
    assert "gpctools/py.typed" in names  # PEP 561 marker: the package ships its types
    assert not any("sample_runs" in n for n in names)  # the demo writes them (DEVELOPERS.md, Packaging)

    venv = tmp_path / "venv"
    _run([sys.executable, "-m", "venv", str(venv)], tmp_path, env)
    bindir = venv / ("Scripts" if os.name == "nt" else "bin")
    python = bindir / ("python.exe" if os.name == "nt" else "python")
    _run([str(python), "-m", "pip", "install", "--quiet", "--disable-pip-version-check", str(wheel)],
         tmp_path, env)
    gpctools_exe = str(bindir / ("gpctools.exe" if os.name == "nt" else "gpctools"))

    empty = tmp_path / "empty"
    empty.mkdir()
    where = _run([str(python), "-c", "import gpctools; print(gpctools.__file__)"], empty, env).stdout.strip()
    assert Path(where).resolve().is_relative_to(venv.resolve()), where  # the installed copy, not the checkout
    version = _run([gpctools_exe, "--version"], empty, env).stdout.strip()
    assert version == f"gpctools {_source_version()}"

    demo = _run([gpctools_exe, "demo"], empty, env, timeout=600)
    out = empty / "gpctools-demo"
    summary = json.loads((out / "demo_summary.json").read_text(encoding="utf-8"))
    assert summary["parts"] == {p: {"status": "ran"} for p in ("batch", "QC", "transfer", "diagnosis",
                                                               "QC sequence", "detectors")}, demo.stdout
    assert summary["failed"] == 0
    assert summary["worst deviation [%]"] < 1.0  # the demo's stated acceptance (README)
    for part in ("sample_runs/batch.csv", "batch/results.csv", "batch/results.xlsx", "batch/review.html",
                 "qc/qc_report.html",
                 "qc/qc_report.xlsx", "transfer/constants.csv", "troubleshooting/diagnosis.md",
                 "troubleshooting/diagnosis.xlsx"):
        assert (out / part).is_file(), part
    assert "demo parts run: batch, QC, transfer, diagnosis, QC sequence, detectors" in demo.stdout
    assert "Traceback" not in demo.stdout + demo.stderr

    _run([gpctools_exe, "template", "--all", "--out", "starters"], empty, env)
    assert sorted(p.name for p in (empty / "starters").iterdir()) == _shipped_templates()


def _source_version() -> str:
    import gpctools

    return gpctools.__version__
