"""Inputs of the diagnosis from files: a batch results table, distribution tables, and the
one-call entry the CLI uses (:func:`diagnose_recipe`).

A results table written by ``gpctools batch`` gives a sample's Mn and Mw (replicates
averaged), its molar-mass scale, and the checks the batch recorded: mass outside the
calibration, the Mn shift at the low-M limit, the observed flow marker with the
correction factor V_ref/V_obs (so the reference is V_obs·factor), and the check
standards' deviation from their assigned Mw. Its distribution tables
(``distributions/<sample>_row<n>.csv``) give the whole distribution; the caller finds
them (``gpctools.report.diagnosis.distribution_tables``), since their file names are the
report layer's.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path
from typing import Any

import pandas as pd

from gpctools import columns
from gpctools.errors import InputFormatError
from gpctools.kinetics.diagnose import Diagnosis, diagnose
from gpctools.kinetics.evidence import average_distributions, read_distributions
from gpctools.kinetics.recipe import Measured, load_recipe, normalize_scale

__all__ = ["measured_from_results", "results_sample", "diagnose_recipe"]


def _sample_rows(
    df: pd.DataFrame, path: Any, sample_id: str | None
) -> tuple[pd.DataFrame, pd.Series | None, pd.Series | None]:
    """The ok sample rows of ``sample_id`` (the only sample when None), role and status."""
    role = df["role"].astype(str).str.strip().str.lower() if "role" in df.columns else None
    status = df["status"].astype(str).str.strip().str.lower() if "status" in df.columns else None
    samples = df
    if role is not None:
        samples = df[role.isin(["sample", "", "nan", "replicate"])]
    if status is not None:
        samples = samples[status.loc[samples.index] == "ok"]
    ids = samples["sample_id"].astype(str).str.strip()
    if sample_id is None:
        uniq = list(dict.fromkeys(ids))
        if len(uniq) != 1:
            raise InputFormatError(
                f"the results table holds {len(uniq)} samples ({', '.join(uniq[:6])}"
                f"{', ...' if len(uniq) > 6 else ''}); choose one (CLI: --sample ID; "
                "Python: sample_id=...)", path=path, column="sample_id",
            )
        sample_id = uniq[0]
    rows = samples[ids == str(sample_id)]
    if rows.empty:
        raise InputFormatError(f"sample {sample_id!r} not found (or not ok)", path=path,
                               column="sample_id")
    return rows, role, status


def _mean(rows: pd.DataFrame, col: str | None) -> float | None:
    if col is None or col not in rows.columns:
        return None
    v = pd.to_numeric(rows[col], errors="coerce").dropna()
    return float(v.mean()) if len(v) else None


def _scale(rows: pd.DataFrame, path: Any) -> str:
    if "molar-mass scale" not in rows.columns:
        return "absolute"
    text = str(rows["molar-mass scale"].iloc[0])
    s = normalize_scale(text)
    if s is None:
        # never assume absolute: a standard-equivalent Mn taken as absolute is the
        # classic way to mis-diagnose a batch
        raise InputFormatError(
            f"molar-mass scale {text!r} is not recognised; write 'absolute ...' or "
            "'relative to <standard polymer>' (as gpctools batch does)",
            path=path, column="molar-mass scale")
    return s


def _flow_checks(rows: pd.DataFrame) -> dict[str, Any]:
    """Observed marker, and the reference V_obs·(V_ref/V_obs) when the factor is given."""
    fm = _mean(rows, columns.FLOW_MARKER)
    if fm is None:
        return {}
    out: dict[str, Any] = {"flow_marker_observed": fm, "flow_marker_corrected": True}
    if columns.FLOW_FACTOR in rows.columns:
        obs = pd.to_numeric(rows[columns.FLOW_MARKER], errors="coerce")
        fac = pd.to_numeric(rows[columns.FLOW_FACTOR], errors="coerce")
        ref = (obs * fac).dropna()
        if len(ref) and math.isfinite(float(ref.mean())):
            out["flow_marker_reference"] = float(ref.mean())
    return out


def _check_standard(df: pd.DataFrame, role: pd.Series | None,
                    status: pd.Series | None) -> float | None:
    if role is None or "assigned Mw [g/mol]" not in df.columns:
        return None
    cs = df[role == "check_standard"]
    if status is not None:
        cs = cs[status.loc[cs.index] == "ok"]
    a = pd.to_numeric(cs["assigned Mw [g/mol]"], errors="coerce")
    m = pd.to_numeric(cs["Mw [g/mol]"], errors="coerce")
    ok = a.notna() & m.notna() & (a > 0)
    return float((100.0 * (m[ok] / a[ok] - 1.0)).mean()) if ok.any() else None


def _results_table(path: str | Path) -> pd.DataFrame:
    from gpctools.io import read_sheet

    df = read_sheet(path)
    if "sample_id" not in df.columns or "Mn [g/mol]" not in df.columns:
        raise InputFormatError(
            "not a results table: needs 'sample_id' and 'Mn [g/mol]' columns", path=path,
            column="sample_id" if "sample_id" not in df.columns else "Mn [g/mol]",
        )
    return df


def results_sample(path: str | Path, sample_id: str | None = None) -> str:
    """The sample a results table gives for ``sample_id`` (the only sample when None).

    Raises the same errors as :func:`measured_from_results` (several samples and none
    chosen, an unknown sample).
    """
    rows, _, _ = _sample_rows(_results_table(path), path, sample_id)
    return str(rows["sample_id"].iloc[0]).strip()


def measured_from_results(
    path: str | Path, *, sample_id: str | None = None
) -> tuple[Measured, dict[str, Any]]:
    """Measured values and checks from a batch results table (results.csv/.xlsx).

    Parameters
    ----------
    path : path
        A table with the batch results columns (``sample_id``, ``Mn [g/mol]``,
        ``Mw [g/mol]``, ``molar-mass scale``, ``outside calibration [% mass]``,
        ``flow marker [mL]``, ``flow correction factor [-]``, ``Mn shift at low-M limit
        [%]``, ``role``, ``assigned Mw [g/mol]``...).
    sample_id : str, optional
        Which sample; required when the table holds more than one sample. Replicate
        rows are averaged.

    Returns
    -------
    (Measured, dict)
        The measured values, and check values to merge into the recipe's ``[checks]``
        (``check_standard_deviation`` from check-standard rows with an assigned Mw,
        ``outside_calibration``, ``Mn_shift_low_limit``, ``flow_marker_observed`` and,
        with the correction factor, ``flow_marker_reference``, with
        ``flow_marker_corrected = True`` since the batch applies the marker).
    """
    df = _results_table(path)
    rows, role, status = _sample_rows(df, path, sample_id)
    Mn_ls, Mw_ls = _mean(rows, columns.MN_LS), _mean(rows, columns.MW_LS)
    if Mn_ls is not None and Mw_ls is not None:
        # a batch with light scattering: its absolute averages are the molar-mass scale
        meas = Measured(Mn=Mn_ls, Mw=Mw_ls, scale=columns.LS_SCALE_LABEL)
    else:
        meas = Measured(Mn=_mean(rows, "Mn [g/mol]"), Mw=_mean(rows, "Mw [g/mol]"),
                        scale=_scale(rows, path))
    checks: dict[str, Any] = {}
    oc = _mean(rows, "outside calibration [% mass]")
    if oc is not None:
        checks["outside_calibration"] = oc
    sh = _mean(rows, columns.find(rows.columns, columns.MN_SHIFT_LOW_M))  # also the old header
    if sh is not None:
        checks["Mn_shift_low_limit"] = sh
    checks.update(_flow_checks(rows))
    cs = _check_standard(df, role, status)
    if cs is not None:
        checks["check_standard_deviation"] = cs
    return meas, checks


def diagnose_recipe(
    recipe_path: str | Path,
    *,
    measured_path: str | Path | None = None,
    sample_id: str | None = None,
    distribution_paths: Sequence[str | Path] = (),
) -> Diagnosis:
    """Load a recipe (and optionally a results table) and diagnose it (the CLI entry).

    Nothing is written; :func:`gpctools.report.write_diagnosis` writes the report and
    tables.

    Parameters
    ----------
    recipe_path : path
        Recipe TOML or recipe sheet (see ``templates/recipe.toml``, ``templates/recipe.csv``).
    measured_path : path, optional
        A batch results table; its Mn/Mw (and checks it records) replace the recipe's
        ``[measured]`` molar masses, recipe values filling what the table lacks; recipe
        checks win over the table's.
    sample_id : str, optional
        Sample to take from ``measured_path``.
    distribution_paths : sequence of path
        Distribution tables of this sample, per injection or the batch's long-form
        ``distributions.csv`` (whose rows of ``sample_id`` are taken); replicates are
        averaged on a common log M grid. They replace a distribution the recipe names.

    Returns
    -------
    Diagnosis
    """
    recipe = load_recipe(recipe_path)
    if measured_path is not None:
        meas_file, chk = measured_from_results(measured_path, sample_id=sample_id)
        m = recipe.measured
        measured = replace(
            m,
            Mn=meas_file.Mn if meas_file.Mn is not None else m.Mn,
            Mw=meas_file.Mw if meas_file.Mw is not None else m.Mw,
            scale=meas_file.scale if meas_file.has_molar_mass else m.scale,
        )
        old = recipe.checks
        new_checks = {k: v for k, v in chk.items() if getattr(old, k) in (None, False)}
        if old.flow_marker_observed is not None:  # the recipe's marker pair wins whole
            for k in ("flow_marker_observed", "flow_marker_reference", "flow_marker_corrected"):
                new_checks.pop(k, None)
        elif "flow_marker_reference" not in new_checks and old.flow_marker_reference is None:
            new_checks.pop("flow_marker_observed", None)
            new_checks.pop("flow_marker_corrected", None)
        recipe = replace(recipe, measured=measured, checks=replace(old, **new_checks))
    dist = None
    if distribution_paths:
        dist = average_distributions([d for p in distribution_paths for d in read_distributions(p, sample_id)])
    return diagnose(recipe, distribution=dist)
