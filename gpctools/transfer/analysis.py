"""Run-series analysis: everything for one sheet, from chromatograms to constants.

:func:`analyse_series` reads the run-series sheet, processes the chromatograms with a
method file (:func:`gpctools.batch.process_injection`; replicate injections averaged, each
run's measurement uncertainty and calibration gradient kept, :mod:`gpctools.transfer.runs`),
and analyses every group of runs (series label and temperature) in
:func:`gpctools.transfer.group.analyse_group`:

1. the termination mode δ and the kinetic term (regressor when [M], [I] or R_p vary
   about 2-fold or more) (:mod:`gpctools.transfer.kinetic`);
2. impurity flags by the generalized ESD procedure against the group's model, flagged
   runs left out;
3. the Mayo model on initial ratios per estimator and, when conversions are given, the
   cumulative (drift) model, each with statistical and calibration uncertainty;
4. the intercept check on the 1/DPn scale; the consumption method;
5. the preferred constant and the estimators' spread.

Across temperatures it fits ln C against 1/T. Nothing is written here:
:func:`gpctools.report.write_transfer` writes the tables (CSV + XLSX), a JSON summary and
the PNG plots; :func:`gpctools.transfer.dosing.agent_charge` answers "how much agent for
this Mn?".

References
----------
See :mod:`gpctools.transfer.mayo`, :mod:`~gpctools.transfer.model`,
:mod:`~gpctools.transfer.estimators`, :mod:`~gpctools.transfer.drift`,
:mod:`~gpctools.transfer.impurity`, :mod:`~gpctools.transfer.arrhenius`;
docs/science.md, sections 3 to 6, 9 and 11.
"""

from __future__ import annotations

import math
import warnings as _warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import (
    DataError,
    DesignError,
    EstimatorWarning,
    GpcError,
    GpcWarning,
    MethodError,
)
from gpctools.transfer.arrhenius import ArrheniusFit, fit_arrhenius
from gpctools.transfer.group import (
    DISAGREE_Z,
    MODEL_CONSUMPTION,
    MODEL_DRIFT,
    MODEL_MAYO,
    PREFERENCE,
    GroupResult,
    _collect,
    analyse_group,
)
from gpctools.transfer.mayo import FittedValue
from gpctools.transfer.options import TransferOptions, check_names
from gpctools.transfer.runs import (
    RunEstimate,
    calibration_covariance,
    estimate_runs,
    scale_warnings,
)
from gpctools.transfer.series import RunSeries, read_run_series
from gpctools.transfer.tables import (
    ARRHENIUS_COLUMNS,
    CONSTANT_COLUMNS,
    arrhenius_rows,
    constants_rows,
    run_rows,
)

__all__ = [
    "RunEstimate",
    "GroupResult",
    "TransferResult",
    "analyse_series",
    "MODEL_MAYO",
    "MODEL_DRIFT",
    "MODEL_CONSUMPTION",
    "DISAGREE_Z",
    "PREFERENCE",
    "CONSTANT_COLUMNS",
    "ARRHENIUS_COLUMNS",
    "SAFETY_NOTE",
]


@dataclass(frozen=True, repr=False)
class TransferResult(Display):
    """Everything :func:`analyse_series` found.

    Attributes
    ----------
    series : RunSeries
    estimates : tuple of RunEstimate
    groups : tuple of GroupResult
    arrhenius : tuple of (dict, ArrheniusFit)
        Labels (agent, term, estimator, model, monomer) and the fit.
    options : dict
        The settings used (JSON-safe).
    method_source : str or None
    warnings : tuple of str
    """

    series: RunSeries
    estimates: tuple[RunEstimate, ...]
    groups: tuple[GroupResult, ...]
    arrhenius: tuple[tuple[dict[str, str], ArrheniusFit], ...]
    options: dict[str, Any]
    method_source: str | None = None
    warnings: tuple[str, ...] = field(default=())

    @property
    def failed(self) -> int:
        """Runs whose chromatogram could not be processed."""
        return sum(1 for e in self.estimates if e.error)

    def group(self, label: str | None = None) -> GroupResult:
        """The group called ``label`` (the only group when None)."""
        if label is None:
            if len(self.groups) != 1:
                raise KeyError(f"{len(self.groups)} groups; name one of "
                               f"{', '.join(g.label for g in self.groups)}")
            return self.groups[0]
        for g in self.groups:
            if g.label == label or g.series == label:
                return g
        raise KeyError(f"no group {label!r}; groups: {', '.join(g.label for g in self.groups)}")

    def constant(self, term: str = "C_A", *, estimator: str | None = None,
                 model: str | None = None, group: str | None = None) -> FittedValue:
        """A fitted constant; by default the preferred estimator and model of the group."""
        g = self.group(group)
        if term not in g.terms:
            raise KeyError(f"no term {term!r} in {g.label}; fitted: {', '.join(g.terms)}")
        if estimator is None or model is None:
            pe, pm = g.preferred[term]
            estimator = estimator or pe
            model = model or pm
        return g.fit(estimator, model).constant(term)

    def constants_table(self):
        """One row per group, term, estimator and model (pandas DataFrame)."""
        import pandas as pd

        return pd.DataFrame(constants_rows(self), columns=CONSTANT_COLUMNS)

    def runs_table(self):
        """One row per run (pandas DataFrame)."""
        import pandas as pd

        rows = run_rows(self)
        cols = list(dict.fromkeys(k for r in rows for k in r))
        return pd.DataFrame(rows, columns=cols)

    def arrhenius_table(self):
        """One row per Arrhenius fit (pandas DataFrame)."""
        import pandas as pd

        return pd.DataFrame(arrhenius_rows(self), columns=ARRHENIUS_COLUMNS)

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict (what the report and the CLI consume)."""
        return {
            "sheet": self.series.path,
            "method": self.method_source,
            "runs": len(self.series.runs),
            "failed runs": self.failed,
            "groups": [g.summary() for g in self.groups],
            "arrhenius": [dict(lbl, **fit.summary()) for lbl, fit in self.arrhenius],
            "options": self.options,
            "safety": SAFETY_NOTE,
            "agent cautions": sorted({v["caution"] for g in self.groups
                                      for v in g.literature.values() if v.get("caution")}),
            "warnings": list(self.warnings),
        }


#: Shown with every analysis (docs/science.md, section 10).
SAFETY_NOTE = (
    "Transfer agents and solvents are often toxic, malodorous or sensitizing (thiols, "
    "halogenated methanes); polymerizations are exothermic and can run away when initiator "
    "or temperature is raised. Follow your site safety rules, local codes and licensed practice."
)


# --------------------------------------------------------------------------- the API


def _as_method(method: Any) -> Any:
    if method is None:
        return None
    if isinstance(method, (str, Path)):
        from gpctools.method import load_method

        return load_method(method)
    return method


def _options(options: TransferOptions | None, overrides: dict[str, Any]) -> TransferOptions:
    """``options`` (default: all defaults) with the keyword overrides, checked."""
    check_names(overrides)
    if options is None:
        return TransferOptions(**overrides)
    if not isinstance(options, TransferOptions):
        raise TypeError(f"options must be a TransferOptions, not {type(options).__name__}")
    return options.with_changes(**overrides) if overrides else options


def _read_series(sheet_path: str | Path | None, series: RunSeries | None,
                 sheet: str | int | None, M0: float | None, monomer: str | None,
                 reference: Any, warns: list[str]) -> RunSeries:
    """The given RunSeries, or the sheet read (its warnings collected into ``warns``)."""
    with _warnings.catch_warnings(record=True) as caught:
        _warnings.simplefilter("always", GpcWarning)
        if series is None:
            if sheet_path is None:
                raise DataError("give a run-series sheet (sheet_path) or a RunSeries (series)")
            series = read_run_series(sheet_path, sheet=sheet, M0=M0, monomer=monomer,
                                     reference=reference)
    _collect(caught, warns)
    return series


def _method_for(series: RunSeries, method: Any) -> Any:
    """The loaded method; refused when the sheet names chromatograms and none is given."""
    files = [r.run_id for r in series.runs if r.file and r.role != "skip"]
    m = _as_method(method)
    if files and m is None:
        raise MethodError(
            f"runs {', '.join(files[:5])}{' ...' if len(files) > 5 else ''} name chromatogram "
            "files: give a method file (--method METHOD.toml) to process them", key="method")
    return m


def _run_warnings(estimates: Sequence[RunEstimate]) -> list[str]:
    out = []
    for e in estimates:
        if e.error:
            out.append(f"run {e.run.run_id}: {e.error}")
        for w in e.warnings:
            out.append(f"run {e.run.run_id}: {w}")
    return out


def _group_warnings(groups: Sequence[GroupResult]) -> list[str]:
    """Each group's warnings, estimator comparison, intercept and impurity flags."""
    out: list[str] = []
    for g in groups:
        out.extend(g.warnings)
        out.extend(g.comparison)
        if g.intercept_check is not None and g.intercept_check.flagged:
            out.append(f"{g.label}: {g.intercept_check.message}")
        if g.impurity is not None:
            for f in g.impurity.flags:
                if f.flagged:
                    out.append(f"{g.label}: run {f.run_id} {f.reason}")
    return out


def analyse_series(
    sheet_path: str | Path | None = None,
    method: Any = None,
    options: TransferOptions | None = None,
    *,
    series: RunSeries | None = None,
    sheet: str | int | None = None,
    M0: float | None = None,
    monomer: str | None = None,
    reference: Any = None,
    **overrides: Any,
) -> TransferResult:
    """Chain-transfer constants from a run series.

    Parameters
    ----------
    sheet_path : str or Path, optional
        Run-series sheet (CSV or XLSX); see :mod:`gpctools.transfer.series` for columns.
    method : str, Path or Method, optional
        Method file for the chromatograms (required when the sheet names files).
    options : TransferOptions, optional
        The analysis settings (terms, estimators, drift, CLD window, confidence levels,
        impurity test, intercept check); default :class:`TransferOptions()`.
    series : RunSeries, optional
        Already-read runs (instead of ``sheet_path``).
    sheet : str or int, optional
        Workbook sheet.
    M0 : float, optional
        Default repeat-unit molar mass [g/mol] for rows without monomer/M0.
    monomer : str, optional
        Default monomer name.
    reference : gpctools.refdata.ReferenceData, optional
    **overrides
        Any :class:`TransferOptions` field, replacing the value in ``options``
        (e.g. ``analyse_series(path, impurity_C=15.0)``); an unknown name is a TypeError.

    Returns
    -------
    TransferResult

    Raises
    ------
    DesignError
        A group cannot separate the requested terms (too few ratios, collinear columns,
        no more runs than parameters).
    InputFormatError, DataError, MethodError
        Unreadable sheet or values, naming file, row and column; a bad option value
        (DataError whose key is the option).

    References
    ----------
    Mayo, J. Am. Chem. Soc. 1943; Heuts, Davis, Russell et al., Macromolecules 1999;
    Clay and Gilbert, Macromolecules 1995; van Berkel, Russell, Gilbert, Macromolecules
    2005; docs/science.md, sections 3 to 6.
    """
    opts = _options(options, overrides)
    warns: list[str] = []
    series = _read_series(sheet_path, series, sheet, M0, monomer, reference, warns)
    m = _method_for(series, method)
    estimates = estimate_runs(series, m, opts)
    est = {e.run.run_id: e for e in estimates}
    warns.extend(_run_warnings(estimates))
    warns.extend(scale_warnings(estimates, reference))
    cal = calibration_covariance(m)
    groups = [analyse_group(key, runs, est, series, opts, reference, cal)
              for key, runs in series.groups().items() if any(r.role == "run" for r in runs)]
    if not groups:
        raise DesignError("the sheet has no runs with role 'run' to fit")
    arr = _arrhenius(groups, warns)
    warns.extend(_group_warnings(groups))
    warns = list(dict.fromkeys(warns))
    for msg in warns:
        _warnings.warn(msg, EstimatorWarning, stacklevel=2)
    return TransferResult(
        series=series,
        estimates=tuple(estimates),
        groups=tuple(groups),
        arrhenius=tuple(arr),
        options=opts.summary(),
        method_source=(getattr(m, "source", None) if m is not None else None),
        warnings=tuple(warns),
    )


def _arrhenius(groups: Sequence[GroupResult], warns: list[str]):
    bins: dict[tuple[str, str, str, str, str], list[tuple[float, FittedValue]]] = {}
    for g in groups:
        if not math.isfinite(g.T_C):
            continue
        model = MODEL_DRIFT if g.drift else MODEL_MAYO
        fits = g.drift if g.drift else g.mayo
        for t in g.terms:
            if t == "C_M":
                continue
            for e, f in fits.items():
                k = (g.monomer, g.agents[t], t, e, model)
                bins.setdefault(k, []).append((g.T_C, f.constant(t)))
    out = []
    for (mono, agent, t, e, model), pts in bins.items():
        Ts = {round(T, 1) for T, _ in pts}
        if len(Ts) < 2:
            continue
        T = np.array([p[0] + 273.15 for p in pts])
        C = np.array([p[1].value for p in pts])
        # the statistical part only: one calibration serves every temperature, so its
        # error moves all ln C together (ln A_tr/A_p), not the slope ΔE
        se = np.array([p[1].stderr_statistical if math.isfinite(p[1].stderr_statistical)
                       else p[1].stderr for p in pts])
        if np.any(C <= 0):
            warns.append(f"{agent} ({e}): a non-positive constant; no ln C against 1/T fit")
            continue
        try:
            fit = fit_arrhenius(T, C, se, name=t)
        except GpcError as exc:
            warns.append(f"{agent} ({e}): ln C against 1/T not fitted: {exc.message}")
            continue
        warns.extend(fit.warnings)
        out.append(({"monomer": mono, "agent": agent, "term": t, "estimator": e, "model": model},
                    fit))
    return out


