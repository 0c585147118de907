"""Shared fixtures for the test suite.

Paths to the bundled folders are session-wide and read-only: a test that writes must copy
first (``shutil.copytree(sample_runs_dir, tmp_path / "s")``) or write under ``out_dir``.
Objects shared across tests (``demo_method``) are frozen dataclasses, so no test can
change what another sees.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import pytest

if TYPE_CHECKING:
    from typer.testing import CliRunner

    from gpctools.method import Method

REPO_ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(scope="session")
def repo_root() -> Path:
    """The repository checkout (the folder holding pyproject.toml)."""
    return REPO_ROOT


@pytest.fixture(scope="session")
def package_dir() -> Path:
    """The source folder of the gpctools package."""
    return REPO_ROOT / "gpctools"


@pytest.fixture(scope="session")
def sample_runs_dir() -> Path:
    """The bundled demo scenario (``sample_runs/``); read-only, copy before writing."""
    return REPO_ROOT / "sample_runs"


@pytest.fixture(scope="session")
def templates_dir() -> Path:
    """The starting files a user copies (``gpctools/templates/``, package data written by
    ``gpctools template``); read-only, copy before writing."""
    return REPO_ROOT / "gpctools" / "templates"


@pytest.fixture(scope="session")
def demo_method(sample_runs_dir: Path) -> Method:
    """The demo method file (``sample_runs/method.toml``), loaded once; frozen."""
    from gpctools.method import load_method

    return load_method(sample_runs_dir / "method.toml")


@pytest.fixture
def out_dir(tmp_path: Path) -> Path:
    """A fresh output folder path for one test (not created: commands create it)."""
    return tmp_path / "out"


@pytest.fixture
def cli_runner() -> CliRunner:
    """typer's test runner for ``gpctools.cli.app``."""
    from typer.testing import CliRunner

    return CliRunner()


#: An RI + seven-angle light-scattering method (658 nm, PS-like dn/dc in THF, 0.1 mL LS
#: offset); ``{standards}`` is the calibration's standards line.
_RI_LS_METHOD = """
name = "RI + LS"
[flow]
rate = 1.0
[calibration]
{standards}
[detectors.ri]
kind = "RI"
constant = {ri}
dn_dc = 0.185
columns = "RI"
[detectors.ls]
kind = "light scattering"
wavelength = 658
dn_dc = 0.185
solvent_refractive_index = 1.404
angles = [35, 50, 75, 90, 105, 130, 145]
constant = {ls}
offset = 0.1
"""


@pytest.fixture(scope="session")
def ri_ls_method_text():
    """Text of an RI + light-scattering method file: ``ri_ls_method_text(standards,
    ri=5.0e4, ls=1.0e-5)`` (detector constants as given)."""

    def make(standards: str, ri: float = 5.0e4, ls: float = 1.0e-5) -> str:
        return _RI_LS_METHOD.format(standards=standards, ri=ri, ls=ls)

    return make
