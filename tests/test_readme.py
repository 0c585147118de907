"""The README's Python example runs as written (STYLE.md: the quick start is exercised)."""

from __future__ import annotations

import os
import re
import shutil
import warnings
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def test_readme_python_example_runs(tmp_path, capsys):
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```python\n(.*?)```", text, flags=re.S)
    assert blocks, "README lost its Python example"
    shutil.copytree(ROOT / "sample_runs", tmp_path / "sample_runs")
    old = os.getcwd()
    os.chdir(tmp_path)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for code in blocks:
                exec(compile(code, "README.md", "exec"), {})
    finally:
        os.chdir(old)
    assert (tmp_path / "out" / "batch" / "results.csv").exists()
    assert (tmp_path / "out" / "qc" / "qc_report.html").exists()
    assert "C [-]" in capsys.readouterr().out


def test_readme_has_the_two_commands():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    assert "pip install -e . && gpctools demo" in text
    assert 'pip install -e ".[test]" && pytest' in text
    ci = (ROOT / ".ci" / "run").read_text()
    assert 'pip install' in ci and '-e ".[test]"' in ci and "pytest" in ci
    # CI also builds the wheel, installs it in a fresh venv and runs the demo from an
    # empty folder (tests/test_packaging.py, asked for by this variable)
    assert "GPCTOOLS_TEST_WHEEL=1 python -m pytest" in ci


def test_readme_install_section_shows_a_plain_install_and_the_templates():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text[text.index("## Install"):text.index("## Safety")]
    for command in ("pip install .", "gpctools --version", "gpctools demo", "gpctools template --list"):
        assert command in section, command
    # no user-facing pointer to a templates/ folder a wheel does not have
    assert "templates/" not in text.replace("gpctools/templates/", "")
