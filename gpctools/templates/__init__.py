"""The starter files a user copies: method file, batch sheet, standards, spec limits, ...

The files sit beside this module as package data, so a plain wheel install holds them
and ``gpctools template NAME`` can write them into any folder. This module only finds
and reads them; writing is done by :mod:`gpctools.report.files` (called from the CLI).
Every file in this folder that is not Python is a template: a new one needs no code here
(its description then comes from its first comment line or its header row), though a
line in ``_DESCRIPTIONS`` reads better in ``gpctools template --list``.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from importlib import resources

from ..errors import InputFormatError

__all__ = ["Template", "available", "find"]

#: One line per template for ``gpctools template --list`` (file name -> description).
_DESCRIPTIONS: dict[str, str] = {
    "method.toml": "method file: import, flow, flow marker, baseline, limits, calibration, thresholds (commented)",
    "standards.csv": "narrow standards of the calibration: name, Mp [g/mol], volume [mL] (read by method.toml)",
    "batch.csv": "batch sheet for `gpctools batch` and `gpctools qc`: one row per injection",
    "batch.xlsx": "the batch sheet as a workbook",
    "run_series.csv": "run-series sheet for `gpctools transfer`: one row per polymerization run",
    "run_series.xlsx": "the run-series sheet as a workbook",
    "spec_limits.csv": "spec limits per product for `gpctools qc`",
    "spec_limits.xlsx": "the spec limits as a workbook, with a read-me sheet",
    "recipe.toml": "recipe for `gpctools diagnose`: what went into the reactor and what was measured",
    "batch_sequence.csv": "a QC sequence for `gpctools qc`: calibration standards, blank, check standards, samples, replicates",
    "standards_mix.csv": "the narrow standards of one calibration-standard injection: name, Mp [g/mol]",
    "spec_limits_long.csv": "spec limits in the long form: product, quantity, min, max, target",
    "qc_settings.toml": "QC settings for `gpctools qc --settings`: suitability limits, judgement, trends, products (commented)",
    "qc_settings.csv": "the QC settings as a setting/value sheet",
    "history.csv": "history of reported batch values for the control charts (date, baseline flag)",
}

#: Files a template names and needs beside it (``method.toml`` reads ``standards.csv``).
_COMPANIONS: dict[str, tuple[str, ...]] = {"method.toml": ("standards.csv",)}


@dataclass(frozen=True)
class Template:
    """One starter file shipped with the package.

    Attributes
    ----------
    name : str
        File name (``"method.toml"``); also the name it is written under.
    description : str
        One line for ``gpctools template --list``.
    companions : tuple of str
        Other templates this one names and needs beside it.
    """

    name: str
    description: str
    companions: tuple[str, ...] = ()

    @property
    def stem(self) -> str:
        """The name without its extension (``"batch"`` for ``batch.xlsx``)."""
        return self.name.rsplit(".", 1)[0]

    def read_bytes(self) -> bytes:
        """The file's content, exactly as shipped."""
        return resources.files(__name__).joinpath(self.name).read_bytes()


def _is_template(name: str) -> bool:
    return not name.startswith(("_", ".")) and not name.endswith((".py", ".pyc"))


def _derived_description(name: str, data: bytes, names: set[str]) -> str:
    """A description for a template without an entry in ``_DESCRIPTIONS``."""
    suffix = name.rsplit(".", 1)[-1].lower()
    if suffix in ("xlsx", "xlsm"):
        stem = name.rsplit(".", 1)[0]
        return f"the {stem}.csv sheet as a workbook" if f"{stem}.csv" in names else "workbook"
    text = data.decode("utf-8-sig", errors="replace")
    for line in text.splitlines():
        if line.startswith("#"):
            return line.lstrip("# ").strip() or name
        if line.strip():
            break
    if suffix in ("csv", "tsv", "txt"):
        first = next(csv.reader(io.StringIO(text)), [])
        cols = ", ".join(first[:5]) + (", ..." if len(first) > 5 else "")
        return f"sheet with columns {cols}" if first else "sheet"
    return name


def available() -> tuple[Template, ...]:
    """Every shipped template, sorted by file name.

    Returns
    -------
    tuple of Template
    """
    folder = resources.files(__name__)
    names = sorted(p.name for p in folder.iterdir() if p.is_file() and _is_template(p.name))
    found = []
    for name in names:
        description = _DESCRIPTIONS.get(name)
        if description is None:
            description = _derived_description(name, folder.joinpath(name).read_bytes(), set(names))
        found.append(Template(name, description, _COMPANIONS.get(name, ())))
    return tuple(found)


def find(names: list[str] | tuple[str, ...]) -> tuple[Template, ...]:
    """The templates asked for by file name (``batch.xlsx``) or by stem (``batch``).

    A stem gives every format of that template (``batch`` gives ``batch.csv`` and
    ``batch.xlsx``). Matching ignores case. Each template appears once, in the order asked.

    Parameters
    ----------
    names : sequence of str
        File names or stems.

    Returns
    -------
    tuple of Template

    Raises
    ------
    InputFormatError
        A name that matches no template (the message lists the templates).
    """
    every = available()
    chosen: dict[str, Template] = {}
    for asked in names:
        key = asked.strip().lower()
        hits = [t for t in every if t.name.lower() == key] or [t for t in every if t.stem.lower() == key]
        if not hits:
            listing = ", ".join(t.name for t in every)
            raise InputFormatError(f"no template named {asked!r}; the templates are: {listing} "
                                   "(gpctools template --list describes them)", key="NAME")
        for t in hits:
            chosen.setdefault(t.name, t)
    return tuple(chosen.values())
