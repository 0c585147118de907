"""Diagnosis outputs: the markdown report, the JSON summary and one table per part.

Files written by :func:`write_diagnosis` into the output folder (each atomically):
``diagnosis.md`` (:func:`gpctools.report.markdown.diagnosis_markdown`), ``diagnosis.json``
(``Diagnosis.summary()``), ``causes.csv``, ``observations.csv``, ``checks.csv``,
``impurities.csv``, ``budget.csv``, ``parameters.csv``, ``prediction.csv`` and, with
``xlsx=True``, ``diagnosis.xlsx`` with one sheet per table.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import TYPE_CHECKING, Any

from gpctools.report.files import atomic_path, write_csv, write_text
from gpctools.report.markdown import diagnosis_markdown

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from gpctools.kinetics import Diagnosis

__all__ = ["write_diagnosis", "diagnosis_tables"]


def diagnosis_tables(diagnosis: Diagnosis) -> dict[str, pd.DataFrame]:
    """The tables of a diagnosis by file stem, in the order they are written.

    Parameters
    ----------
    diagnosis : gpctools.kinetics.Diagnosis

    Returns
    -------
    dict of str to pandas.DataFrame
        causes, observations, checks, impurities, budget, parameters, prediction (unit
        in every column name or in a unit column).
    """
    return {
        "causes": diagnosis.table(),
        "observations": diagnosis.observations_table(),
        "checks": diagnosis.checks_table(),
        "impurities": diagnosis.impurities_table(),
        "budget": diagnosis.prediction.budget_table(),
        "parameters": diagnosis.prediction.parameters.table(),
        "prediction": diagnosis.prediction.table(),
    }


def _json_default(o: Any) -> Any:
    import numpy as np

    if isinstance(o, (np.floating, np.integer)):
        return o.item()
    return str(o)


def write_diagnosis(
    diagnosis: Diagnosis, outdir: str | os.PathLike[str], *, xlsx: bool = True
) -> dict[str, Path]:
    """Write the report and tables of a diagnosis atomically into ``outdir``.

    Parameters
    ----------
    diagnosis : gpctools.kinetics.Diagnosis
    outdir : str or os.PathLike
        Output folder (created); the files are listed in the module docstring.
    xlsx : bool
        Also write ``diagnosis.xlsx`` (one sheet per table).

    Returns
    -------
    dict of str to pathlib.Path
        ``"markdown"``, ``"json"``, one key per table and ``"xlsx"``.
    """
    import pandas as pd

    out = Path(outdir)
    out.mkdir(parents=True, exist_ok=True)
    frames = diagnosis_tables(diagnosis)
    paths: dict[str, Path] = {}
    paths["markdown"] = write_text(out / "diagnosis.md", diagnosis_markdown(diagnosis))
    paths["json"] = write_text(
        out / "diagnosis.json", json.dumps(diagnosis.summary(), indent=2, default=_json_default)
    )
    for name, frame in frames.items():
        paths[name] = write_csv(out / f"{name}.csv", frame)
    if xlsx:
        # pandas' writer, as before this module existed: keeping it keeps the workbook's
        # cells as they were (gpctools.report.xlsx would quote text starting with "-").
        with atomic_path(out / "diagnosis.xlsx") as tmp:
            with pd.ExcelWriter(tmp, engine="openpyxl") as xw:
                for name, frame in frames.items():
                    frame.to_excel(xw, sheet_name=name, index=False)
        paths["xlsx"] = out / "diagnosis.xlsx"
    return paths
