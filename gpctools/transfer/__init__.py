"""Chain-transfer constants from a run series.

A chemist runs polymerizations at several ratios of transfer agent (or solvent) to
monomer; the slope of 1/DPn against [A]/[M] is the chain-transfer constant (the Mayo
equation). This package turns a run-series sheet (chromatograms or measured Mn/Mw) into
constants with uncertainties (statistical and calibration parts), three ways (Mn, Mw/2,
chain-length distribution, with the mixed-termination relations), with the kinetic term
as a regressor where [M] or [I] varies, the conversion-drift correction, impurity flags
(generalized ESD), ln C against 1/T, and the agent charge for a target molar mass.

Public API
----------
analyse_series(sheet_path, method=None, options=None, **overrides) -> TransferResult
TransferOptions(terms=None, estimators=..., drift="auto", ...): the analysis settings
read_run_series(path) -> RunSeries
fit_mayo(y, columns, ...) -> MayoFit;  check_design(columns) -> DesignCheck
cld_slope(M, dwdlogM, M0, ...) -> CLDSlope
fit_cumulative(y, conversion, columns, ...) -> DriftFit;  apparent_constant(C, x)
consumption_constant(A0, A, ...) -> ConsumptionResult
fit_arrhenius(T_K, C, C_stderr) -> ArrheniusFit
flag_runs(y, columns, ...) -> ImpurityCheck;  check_intercept(fit, expected, ...)
agent_charge(result, target_Mn=..., conversion=...) -> DosingAnswer
SeriesModel(estimator, terms, ratios, ...): what each estimator measures (drift, δ, kinetic)
kinetic_term(runs, mode, ...) -> KineticTerm;  termination_mode(runs, delta, C_M) -> Termination

Nothing here writes files: :func:`gpctools.report.write_transfer` writes the tables,
summary and plots of a :class:`TransferResult`. Heavy modules (scipy.special, pandas) are
imported inside the functions that need them.
"""

from __future__ import annotations

from gpctools.transfer.analysis import (
    GroupResult,
    RunEstimate,
    TransferResult,
    analyse_series,
)
from gpctools.transfer.arrhenius import ArrheniusFit, fit_arrhenius
from gpctools.transfer.dosing import DosingAnswer, agent_charge
from gpctools.transfer.drift import (
    ConsumptionResult,
    DriftFit,
    apparent_constant,
    consumption_constant,
    cumulative_inv_dpn,
    fit_cumulative,
)
from gpctools.transfer.estimators import CLDSlope, cld_slope, dpn_from_Mn, dpn_from_Mw
from gpctools.transfer.impurity import (
    ImpurityCheck,
    InterceptCheck,
    RunFlag,
    check_intercept,
    flag_runs,
    impurity_level,
)
from gpctools.transfer.kinetic import KineticTerm, Termination, kinetic_term, termination_mode
from gpctools.transfer.mayo import DesignCheck, FittedValue, MayoFit, check_design, fit_mayo
from gpctools.transfer.model import SeriesModel
from gpctools.transfer.options import TransferOptions
from gpctools.transfer.series import Run, RunSeries, read_run_series, run_series_from_rows

__all__ = [
    "analyse_series",
    "TransferOptions",
    "TransferResult",
    "GroupResult",
    "RunEstimate",
    "read_run_series",
    "run_series_from_rows",
    "Run",
    "RunSeries",
    "fit_mayo",
    "check_design",
    "MayoFit",
    "DesignCheck",
    "FittedValue",
    "cld_slope",
    "CLDSlope",
    "dpn_from_Mn",
    "dpn_from_Mw",
    "fit_cumulative",
    "DriftFit",
    "apparent_constant",
    "cumulative_inv_dpn",
    "consumption_constant",
    "ConsumptionResult",
    "fit_arrhenius",
    "ArrheniusFit",
    "flag_runs",
    "check_intercept",
    "impurity_level",
    "ImpurityCheck",
    "InterceptCheck",
    "RunFlag",
    "SeriesModel",
    "agent_charge",
    "DosingAnswer",
    "KineticTerm",
    "Termination",
    "kinetic_term",
    "termination_mode",
]
