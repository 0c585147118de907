"""Diagnosis outputs: the markdown report, the JSON summary, one table per part, the
distribution overlay.

Files written by :func:`write_diagnosis` into the output folder (each atomically):
``diagnosis.md`` (:func:`gpctools.report.markdown.diagnosis_markdown`), ``diagnosis.json``
(``Diagnosis.summary()``), ``causes.csv``, ``observations.csv``, ``checks.csv`` (with the
instrument findings), ``impurities.csv``, ``model.csv`` (parameter uncertainties and
their update by the normal batch), ``budget.csv``, ``parameters.csv``,
``prediction.csv``, ``distributions.csv`` (the overlay's curves, long format) and
``distributions.png`` (:func:`gpctools.report.plots.plot_diagnosis_distributions`), and
with ``xlsx=True`` ``diagnosis.xlsx`` with one sheet per table.

:func:`distribution_tables` finds the distribution tables ``gpctools batch`` wrote for a
sample beside its results table (their names are made by
:func:`gpctools.report.batch.distribution_name`).
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import TYPE_CHECKING, Any

from gpctools.report.files import atomic_path, safe_name, write_bytes, write_csv, write_text
from gpctools.report.markdown import diagnosis_markdown

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from gpctools.kinetics import Diagnosis

__all__ = ["write_diagnosis", "diagnosis_tables", "distribution_tables"]


def distribution_tables(results: str | os.PathLike[str], sample_id: str) -> list[Path]:
    """The distribution tables of ``sample_id`` in ``distributions/`` beside a results table.

    Parameters
    ----------
    results : path
        ``results.csv`` (or ``.xlsx``) of a batch.
    sample_id : str

    Returns
    -------
    list of Path
        ``<sample>_row<n>.csv`` files, one per injection (replicates), sorted; when there
        are none, the batch's long-form ``distributions.csv`` if it is there (the reader
        takes the sample's rows); empty otherwise.
    """
    folder = Path(results).parent / "distributions"
    found: list[Path] = []
    if folder.is_dir():
        stem = safe_name(str(sample_id), default="sample")
        found = sorted(p for p in folder.glob(f"{stem}_row*.csv")
                       if p.stem[len(stem):].startswith("_row") and p.stem[len(stem) + 4:].isdigit())
    long_form = Path(results).parent / "distributions.csv"
    if not found and long_form.is_file():
        found = [long_form]
    return found


def _curves_table(diagnosis: Diagnosis) -> pd.DataFrame:
    import pandas as pd

    frames = [pd.DataFrame({"curve": c.label, "kind": c.kind, "M [g/mol]": c.M,
                            "dw/dlogM [-]": c.dwdlogM}) for c in diagnosis.curves]
    if not frames:
        return pd.DataFrame(columns=["curve", "kind", "M [g/mol]", "dw/dlogM [-]"])
    return pd.concat(frames, ignore_index=True)


def diagnosis_tables(diagnosis: Diagnosis) -> dict[str, pd.DataFrame]:
    """The tables of a diagnosis by file stem, in the order they are written.

    Parameters
    ----------
    diagnosis : gpctools.kinetics.Diagnosis

    Returns
    -------
    dict of str to pandas.DataFrame
        causes, observations, checks, impurities, model, budget, parameters, prediction,
        distributions (unit in every column name or in a unit column).
    """
    return {
        "causes": diagnosis.table(),
        "observations": diagnosis.observations_table(),
        "checks": diagnosis.checks_table(),
        "impurities": diagnosis.impurities_table(),
        "model": diagnosis.model_table(),
        "budget": diagnosis.prediction.budget_table(),
        "parameters": diagnosis.prediction.parameters.table(),
        "prediction": diagnosis.prediction.table(),
        "distributions": _curves_table(diagnosis),
    }


def _json_default(o: Any) -> Any:
    import numpy as np

    if isinstance(o, (np.floating, np.integer)):
        return o.item()
    return str(o)


def write_diagnosis(
    diagnosis: Diagnosis, outdir: str | os.PathLike[str], *, xlsx: bool = True,
    plots: bool = True,
) -> dict[str, Path]:
    """Write the report, tables and overlay plot of a diagnosis atomically into ``outdir``.

    Parameters
    ----------
    diagnosis : gpctools.kinetics.Diagnosis
    outdir : str or os.PathLike
        Output folder (created); the files are listed in the module docstring.
    xlsx : bool
        Also write ``diagnosis.xlsx`` (one sheet per table).
    plots : bool
        Also write ``distributions.png`` (when the diagnosis has curves).

    Returns
    -------
    dict of str to pathlib.Path
        ``"markdown"``, ``"json"``, one key per table, ``"plot"`` and ``"xlsx"``.
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
    if plots and diagnosis.curves:
        from gpctools.report.plots import plot_diagnosis_distributions, png_bytes

        ax = plot_diagnosis_distributions(diagnosis.curves,
                                          title=f"{diagnosis.label}: distributions")
        paths["plot"] = write_bytes(out / "distributions.png", png_bytes(ax.figure))
    if xlsx:
        # pandas' writer, as before this module existed: keeping it keeps the workbook's
        # cells as they were (gpctools.report.xlsx would quote text starting with "-").
        with atomic_path(out / "diagnosis.xlsx") as tmp:
            with pd.ExcelWriter(tmp, engine="openpyxl") as xw:
                for name, frame in frames.items():
                    frame.to_excel(xw, sheet_name=name, index=False)
        paths["xlsx"] = out / "diagnosis.xlsx"
    return paths
