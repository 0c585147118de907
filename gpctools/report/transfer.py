"""Run-series outputs: the constants and runs tables, the JSON summary and the plots.

Files written by :func:`write_transfer` into the output folder (each atomically):

``constants.csv``, ``constants.xlsx``
    one row per group, term, estimator and model (``TransferResult.constants_table``).
``runs.csv``
    one row per run (``TransferResult.runs_table``).
``arrhenius.csv``
    one row per ln C against 1/T fit (only when there is one).
``transfer.xlsx``
    sheets constants, runs and (when fitted) arrhenius.
``summary.json``
    ``TransferResult.summary()`` (plus the dosing answers when asked for).
``dosing.csv``
    the agent charge for a target Mn or Mw at a final conversion, when asked for.
``plots/mayo_<group>.png``, ``plots/lnP_<group>.png``, ``plots/arrhenius_<agent>_<term>_<estimator>.png``
    see :func:`write_transfer_plots`.
"""

from __future__ import annotations

import json
import os
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

from gpctools.formatting import clean_json
from gpctools.report.files import safe_name, unique_name, write_bytes, write_csv, write_text
from gpctools.report.xlsx import write_workbook

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from gpctools.transfer import TransferResult

__all__ = ["write_transfer", "write_transfer_plots"]


def write_transfer(
    result: TransferResult, outdir: str | os.PathLike[str], *, plots: bool = True,
    dosing: Sequence[Any] = (),
) -> dict[str, Path]:
    """Write the tables, the summary and the plots of a run-series analysis atomically.

    Parameters
    ----------
    result : gpctools.transfer.TransferResult
    outdir : str or os.PathLike
        Output folder (created); the files are listed in the module docstring.
    plots : bool
        Also draw the PNG plots into ``outdir/plots``.
    dosing : sequence of gpctools.transfer.dosing.DosingAnswer
        Agent charges for target averages (``dosing.csv`` and a ``dosing`` key in the
        summary) when asked for.

    Returns
    -------
    dict of str to pathlib.Path
        Written files by name relative to ``outdir`` (``"constants.csv"``,
        ``"plots/mayo_<group>.png"``, ...).
    """
    out = Path(outdir)
    out.mkdir(parents=True, exist_ok=True)
    paths: dict[str, Path] = {}
    ct = result.constants_table()
    rt = result.runs_table()
    at = result.arrhenius_table()
    paths["constants.csv"] = write_csv(out / "constants.csv", ct)
    paths["runs.csv"] = write_csv(out / "runs.csv", rt)
    sheets: dict[str, pd.DataFrame] = {"constants": ct, "runs": rt}
    if len(at):
        paths["arrhenius.csv"] = write_csv(out / "arrhenius.csv", at)
        sheets["arrhenius"] = at
    paths["constants.xlsx"] = write_workbook(out / "constants.xlsx", {"constants": ct})
    paths["transfer.xlsx"] = write_workbook(out / "transfer.xlsx", sheets)
    summary = result.summary()
    if dosing:
        import pandas as pd

        dt = pd.DataFrame([d.row() for d in dosing])
        paths["dosing.csv"] = write_csv(out / "dosing.csv", dt)
        summary["dosing"] = [d.summary() for d in dosing]
    paths["summary.json"] = write_text(
        out / "summary.json", json.dumps(clean_json(summary), indent=2, default=str) + "\n")
    if plots:
        paths.update(write_transfer_plots(result, out / "plots"))
    return paths


def write_transfer_plots(result: TransferResult, folder: str | os.PathLike[str]) -> dict[str, Path]:
    """All plots of a run-series analysis as PNG files in ``folder``.

    Per group a Mayo figure (:func:`gpctools.report.plots.mayo_group_figure`) and, when
    a run has a CLD slope, an ln P(M) figure; per Arrhenius fit an ln C against 1/T
    figure. File names come from the group labels and the agents
    (:func:`gpctools.report.files.safe_name`); labels that give the same name (e.g.
    ``"DDM/St"`` and ``"DDM St"``) get ``_2``, ``_3``, ... so no plot is lost.

    Parameters
    ----------
    result : gpctools.transfer.TransferResult
    folder : str or os.PathLike
        Folder of the PNG files (created).

    Returns
    -------
    dict of str to pathlib.Path
        ``"plots/<name>.png"`` to the written path.
    """
    from gpctools.report import plots as P

    folder = Path(folder)
    out: dict[str, Path] = {}
    groups: set[str] = set()
    for g in result.groups:
        name = unique_name(safe_name(g.label, default="group"), groups)
        png = P.png_bytes(P.mayo_group_figure(result, g))
        out[f"plots/mayo_{name}.png"] = write_bytes(folder / f"mayo_{name}.png", png)
        ax = P.plot_lnP(result, g)
        if ax is not None:
            out[f"plots/lnP_{name}.png"] = write_bytes(folder / f"lnP_{name}.png", P.png_bytes(ax.figure))
    fits: set[str] = set()
    for lbl, fit in result.arrhenius:
        name = unique_name(safe_name(f"{lbl['agent']}_{lbl['term']}_{lbl['estimator']}", default="group"), fits)
        png = P.png_bytes(P.plot_arrhenius(lbl, fit).figure)
        out[f"plots/arrhenius_{name}.png"] = write_bytes(folder / f"arrhenius_{name}.png", png)
    return out
