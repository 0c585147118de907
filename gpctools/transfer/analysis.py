"""Run-series analysis: everything for one sheet, from chromatograms to constants.

:func:`analyse_series` reads the run-series sheet, processes the chromatograms with a
method file (:func:`gpctools.batch.process_injection`), estimates the chain length of each
run three ways (Mn, Mw/2, CLD), and for every group of runs (series label and
temperature):

1. tests each run for impurity-driven transfer (robust line, externally studentized
   residuals, one-sided, level for the whole series) and leaves flagged runs out;
2. fits the Mayo model on initial ratios per estimator (weighted, lmfit), and when
   conversions are given the cumulative (drift) model too, with the naive bias;
3. checks the intercept against its expectation (control runs, C_M + kinetic term, or
   a given value);
4. compares the estimators and names likely causes where they disagree;
5. applies the consumption method where residual agent was measured.

Across temperatures it fits ln C against 1/T. Nothing is written here:
:func:`gpctools.report.write_transfer` writes the tables (CSV + XLSX), a JSON summary and
the PNG plots.

References
----------
See :mod:`gpctools.transfer.mayo`, :mod:`~gpctools.transfer.estimators`,
:mod:`~gpctools.transfer.drift`, :mod:`~gpctools.transfer.impurity`,
:mod:`~gpctools.transfer.arrhenius`; SCIENCE.md sections 3 to 6 and 9.
"""

from __future__ import annotations

import math
import warnings as _warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from gpctools.errors import (
    DataError,
    DesignError,
    EstimatorWarning,
    GpcError,
    GpcWarning,
    MethodError,
)
from gpctools.transfer._stats import finite_or_none
from gpctools.transfer.arrhenius import ArrheniusFit, fit_arrhenius
from gpctools.transfer.drift import (
    ConsumptionResult,
    DriftFit,
    consumption_constant,
    fit_cumulative,
)
from gpctools.transfer.estimators import ESTIMATORS, CLDSlope, cld_slope
from gpctools.transfer.impurity import (
    ImpurityCheck,
    InterceptCheck,
    check_intercept,
    flag_runs,
    flag_runs_cumulative,
)
from gpctools.transfer.mayo import FittedValue, MayoFit, fit_mayo, term_label
from gpctools.transfer.options import TransferOptions, check_names
from gpctools.transfer.series import Run, RunSeries, read_run_series

__all__ = [
    "RunEstimate",
    "GroupResult",
    "TransferResult",
    "analyse_series",
    "MODEL_MAYO",
    "MODEL_DRIFT",
    "MODEL_CONSUMPTION",
]

MODEL_MAYO = "Mayo (initial ratios)"
MODEL_DRIFT = "cumulative Mayo (conversion drift)"
MODEL_CONSUMPTION = "consumption"
#: Estimators of a group are said to disagree when two constants differ by more than this
#: many combined standard errors (two-sided 99 %, common practice).
DISAGREE_Z = 2.576
#: Order of preference of the estimators for the "preferred" row (Mw/2 is the least
#: sensitive to baseline and low-M limit: Heuts, Davis, Russell et al., Macromolecules 1999).
PREFERENCE = ("Mw/2", "Mn", "CLD")
_LABEL_Y = {"Mn": "1/DPn (Mn) [-]", "Mw/2": "1/DPn (Mw/2) [-]", "CLD": "Lambda (CLD) [-]"}


@dataclass(frozen=True)
class RunEstimate:
    """Chain-length estimates of one run.

    Attributes
    ----------
    run : Run
    Mn, Mw : float
        Averages used [g/mol] (from the chromatogram, else the sheet).
    scale : str
        Molar-mass scale description.
    cld : CLDSlope or None
    M, dwdlogM : numpy.ndarray or None
        The distribution (chromatogram runs) for plots [g/mol], [-].
    Mn_shift_pct : float
        Change of Mn when the low-M limit moves (chromatogram runs) [%].
    error : str
        Why the run could not be used ("" when fine).
    warnings : tuple of str
    """

    run: Run
    Mn: float
    Mw: float
    scale: str
    cld: CLDSlope | None
    M: np.ndarray | None
    dwdlogM: np.ndarray | None
    Mn_shift_pct: float
    error: str = ""
    warnings: tuple[str, ...] = ()

    def y(self, estimator: str) -> float:
        """1/DPn by ``estimator`` (Λ for CLD) [-], NaN when not available."""
        if self.error:
            return float("nan")
        if estimator == "Mn":
            return self.run.M0 / self.Mn if math.isfinite(self.Mn) else float("nan")
        if estimator == "Mw/2":
            return 2.0 * self.run.M0 / self.Mw if math.isfinite(self.Mw) else float("nan")
        if estimator == "CLD":
            return self.cld.Lambda if self.cld is not None else float("nan")
        raise DataError(f"unknown estimator {estimator!r}; use Mn, Mw/2 or CLD", key="estimators")


@dataclass(frozen=True)
class GroupResult:
    """The fits of one group of runs (series label, temperature).

    Attributes
    ----------
    series : str
    T_C : float
        Temperature [°C] (NaN when not given).
    label : str
    terms : tuple of str
    agents : dict
        Term -> agent name for labels.
    monomer : str
        Monomer of the runs (or ``"M0 = ... g/mol"``; several joined by commas).
    run_ids : tuple of str
        Runs of the group with role ``run``.
    excluded : tuple of str
        Runs left out of the final fits (flagged).
    mayo : dict
        Estimator -> MayoFit on initial ratios (flagged runs excluded).
    drift : dict
        Estimator -> DriftFit (when conversions are given).
    impurity : ImpurityCheck or None
    intercept_check : InterceptCheck or None
    consumption : dict
        Term -> ConsumptionResult.
    comparison : tuple of str
        Notes where estimators disagree, with likely causes.
    preferred : dict
        Term -> (estimator, model) of the recommended constant.
    literature : dict
        Term -> bundled reference value for the agent in this monomer (``C [-]`` at
        ``T [°C]``, ``source``, ``caution``), when the table has one.
    warnings : tuple of str
    """

    series: str
    T_C: float
    label: str
    terms: tuple[str, ...]
    agents: dict[str, str]
    monomer: str
    run_ids: tuple[str, ...]
    excluded: tuple[str, ...]
    mayo: dict[str, MayoFit]
    drift: dict[str, DriftFit]
    impurity: ImpurityCheck | None
    intercept_check: InterceptCheck | None
    consumption: dict[str, ConsumptionResult]
    comparison: tuple[str, ...]
    preferred: dict[str, tuple[str, str]]
    literature: dict[str, dict[str, Any]] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()

    def fit(self, estimator: str, model: str = MODEL_MAYO) -> MayoFit | DriftFit:
        """The fit of ``estimator`` with ``model`` (MODEL_MAYO or MODEL_DRIFT)."""
        table = self.drift if model == MODEL_DRIFT else self.mayo
        if estimator not in table:
            raise KeyError(f"no {model} fit with estimator {estimator!r} in {self.label}")
        return table[estimator]

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "series": self.series,
            "T [°C]": finite_or_none(self.T_C),
            "label": self.label,
            "terms": list(self.terms),
            "agents": dict(self.agents),
            "monomer": self.monomer,
            "runs": list(self.run_ids),
            "excluded runs": list(self.excluded),
            "Mayo fits": {k: v.summary() for k, v in self.mayo.items()},
            "drift fits": {k: v.summary() for k, v in self.drift.items()},
            "impurity": self.impurity.summary() if self.impurity else None,
            "intercept check": self.intercept_check.summary() if self.intercept_check else None,
            "consumption": {k: v.summary() for k, v in self.consumption.items()},
            "estimator comparison": list(self.comparison),
            "preferred": {k: {"estimator": e, "model": m} for k, (e, m) in self.preferred.items()},
            "literature": {k: dict(v) for k, v in self.literature.items()},
            "warnings": list(self.warnings),
        }


@dataclass(frozen=True)
class TransferResult:
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
        return g.fit(estimator, model).constant(term)  # type: ignore[union-attr]

    def constants_table(self):
        """One row per group, term, estimator and model (pandas DataFrame)."""
        import pandas as pd

        return pd.DataFrame(_constants_rows(self), columns=CONSTANT_COLUMNS)

    def runs_table(self):
        """One row per run (pandas DataFrame)."""
        import pandas as pd

        rows = _run_rows(self)
        cols = list(dict.fromkeys(k for r in rows for k in r))
        return pd.DataFrame(rows, columns=cols)

    def arrhenius_table(self):
        """One row per Arrhenius fit (pandas DataFrame)."""
        import pandas as pd

        return pd.DataFrame(_arrhenius_rows(self), columns=ARRHENIUS_COLUMNS)

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


#: Shown with every analysis (SCIENCE.md section 10).
SAFETY_NOTE = (
    "Transfer agents and solvents are often toxic, malodorous or sensitizing (thiols, "
    "halogenated methanes); polymerizations are exothermic and can run away when initiator "
    "or temperature is raised. Follow your site safety rules, local codes and licensed practice."
)

CONSTANT_COLUMNS = [
    "group", "series", "T [°C]", "monomer", "agent", "term", "estimator", "model", "drift corrected",
    "C [-]", "standard error [-]", "CI low [-]", "CI high [-]", "confidence [-]", "runs",
    "excluded runs", "1/DPn0 [-]", "1/DPn0 standard error [-]", "DPn0 [-]",
    "DPn0 standard error [-]", "naive bias [%]", "relative scatter [-]", "preferred",
    "literature C [-]", "literature source", "notes",
]
ARRHENIUS_COLUMNS = [
    "monomer", "agent", "term", "estimator", "model", "temperatures [°C]",
    "E_tr - E_p [kJ/mol]", "E_tr - E_p standard error [kJ/mol]", "E_tr - E_p CI low [kJ/mol]",
    "E_tr - E_p CI high [kJ/mol]", "A_tr/A_p [-]", "A_tr/A_p standard error [-]",
    "A_tr/A_p CI low [-]", "A_tr/A_p CI high [-]", "ln(A_tr/A_p) [-]",
    "ln(A_tr/A_p) standard error [-]", "correlation [-]", "weighted", "notes",
]


# --------------------------------------------------------------------------- estimates


def _estimate_runs(series: RunSeries, method: Any, opts: TransferOptions) -> list[RunEstimate]:
    """Chain-length estimates of every run: the chromatogram when named, else the sheet."""
    want_cld = "CLD" in opts.estimators
    out = []
    for run in series.runs:
        if run.role == "skip" or run.file is None:
            # the sheet's own averages (none for a skipped run without them)
            out.append(RunEstimate(run, run.Mn, run.Mw, run.scale, None, None, None,
                                   float("nan"), "", ()))
            continue
        notes: list[str] = []
        from gpctools.batch import process_injection

        try:
            inj = process_injection(run.file, method, sample_id=run.run_id)
        except GpcError as exc:
            out.append(RunEstimate(run, float("nan"), float("nan"), "", None, None, None,
                                   float("nan"), str(exc), ()))
            continue
        d = inj.distribution
        notes.extend(inj.warnings)
        cld = None
        if want_cld:
            w = opts.cld_window
            window = w.get(run.run_id) if isinstance(w, Mapping) else w
            try:
                cld = cld_slope(d.M, d.dwdlogM, run.M0, window=window,
                                fraction=opts.cld_fraction, what=f"run {run.run_id}")
                notes.extend(cld.warnings)
            except DataError as exc:
                notes.append(f"CLD: {exc.message}")
        out.append(RunEstimate(run, float(d.Mn), float(d.Mw), inj.scale, cld,
                               np.asarray(d.M), np.asarray(d.dwdlogM), float(inj.Mn_shift_pct),
                               "", tuple(notes)))
    return out


def _scale_warnings(estimates: Sequence[RunEstimate], reference: Any) -> list[str]:
    msgs: list[str] = []
    relative = [e for e in estimates if "relative" in (e.scale or "")]
    if not relative:
        return msgs
    mono = {e.run.monomer for e in relative}
    ok_same = set()
    for m in mono:
        try:
            if reference is None:
                from gpctools import refdata

                poly = refdata.monomer(m).polymer if m else ""
            else:
                poly = reference.monomer(m).polymer if m else ""
        except GpcError:
            poly = ""
        for e in relative:
            if e.run.monomer == m and poly and e.scale.lower().startswith(poly.lower()):
                ok_same.add(e.run.run_id)
    bad = [e.run.run_id for e in relative if e.run.run_id not in ok_same]
    if bad:
        msgs.append(
            f"runs {', '.join(bad)}: molar masses on a relative (standard-equivalent) scale; "
            "DPn = Mn/M0 then carries the calibration's bias and so does C (the Λ method "
            "least). Use universal calibration ([mark_houwink] in the method) or absolute "
            "detection"
        )
    return msgs


# --------------------------------------------------------------------------- groups


def _group_label(series: str, T: float) -> str:
    parts = [series or "series"]
    if math.isfinite(T) and not (series and f"{T:g}" in series):
        parts.append(f"{T:g} °C")
    return ", ".join(parts)


def _choose_terms(runs: Sequence[Run], all_terms: Sequence[str], terms: Sequence[str] | None,
                  label: str) -> list[str]:
    if terms:
        chosen = []
        for t in terms:
            if t == "C_A" and "C_A" not in all_terms:
                named = [x for x in all_terms if x.startswith("C_A:")]
                if len(named) == 1:
                    chosen.append(named[0])
                    continue
            if t != "C_M" and t not in all_terms:
                raise DesignError(
                    f"{label}: term {t} was asked for but the sheet has no {term_label(t)} "
                    f"column (terms in the sheet: {', '.join(all_terms) or 'none'})",
                    key="terms")
            chosen.append(t)
        return chosen
    chosen = []
    for t in all_terms:
        vals = {round(r.ratios.get(t, 0.0), 15) for r in runs}
        if len(vals) >= 2:
            chosen.append(t)
    if not chosen:
        raise DesignError(
            f"{label}: no agent, solvent or initiator ratio varies across its runs, so there "
            "is no slope to fit; vary [A]/[M] over at least 2 (better 4 or more) levels")
    return chosen


def _agent_names(runs: Sequence[Run], terms: Sequence[str], label: str) -> dict[str, str]:
    names = {}
    for t in terms:
        if t.startswith("C_A:"):
            names[t] = t[4:]
        elif t == "C_A":
            agents = sorted({r.agent for r in runs if r.agent and r.ratios.get("C_A", 0) > 0})
            if len(agents) > 1:
                raise DesignError(
                    f"{label}: runs name different agents ({', '.join(agents)}) in column "
                    "'agent' for the same [A] column; give each agent its own series label, or "
                    "its own column '[A:<name>] [mol/L]'", column="agent")
            names[t] = agents[0] if agents else "agent"
        elif t == "C_S":
            names[t] = "solvent"
        elif t == "C_I":
            names[t] = "initiator"
        else:
            names[t] = "monomer"
    return names


def _columns(runs: Sequence[Run], terms: Sequence[str]) -> dict[str, np.ndarray]:
    return {t: (np.ones(len(runs)) if t == "C_M"
                else np.array([r.ratios.get(t, 0.0) for r in runs])) for t in terms}


def _collect(caught: list[_warnings.WarningMessage], sink: list[str]) -> None:
    for w in caught:
        if issubclass(w.category, GpcWarning):
            msg = str(w.message)
            if msg not in sink:
                sink.append(msg)


@dataclass(frozen=True)
class _Group:
    """One group's usable runs and what each step of its analysis reads.

    ``runs`` are the processed runs with role ``run`` (``ids`` their run ids, ``cols`` the
    term columns, ``conv`` conversions [-], ``mconc`` [M] [mol/L]); ``primary`` is the
    estimator of the impurity test and the intercept check.
    """

    series: str
    T: float
    label: str
    runs: list[Run]
    controls: list[Run]
    est: dict[str, RunEstimate]
    terms: list[str]
    agents: dict[str, str]
    monomers: list[str]
    available: list[str]
    primary: str
    use_drift: bool
    conv: np.ndarray
    mconc: np.ndarray
    ids: list[str]
    cols: dict[str, np.ndarray]

    def y(self, estimator: str, ids: Sequence[str]) -> np.ndarray:
        """1/DPn (Λ for CLD) of the runs ``ids`` [-]."""
        return np.array([self.est[i].y(estimator) for i in ids])

    def windows(self, estimator: str, ids: Sequence[str]) -> list[tuple[float, float]] | None:
        """CLD windows of the runs ``ids`` [g/mol] (None for the other estimators)."""
        if estimator != "CLD":
            return None
        return [self.est[i].cld.window for i in ids]  # type: ignore[union-attr]  # CLD: cld set


def _available_estimators(runs: Sequence[Run], est: dict[str, RunEstimate],
                          estimators: Sequence[str], label: str, warns: list[str]) -> list[str]:
    """Estimators with a positive value for every run (others left out with a warning)."""
    available = []
    for e in estimators:
        ys = [est[r.run_id].y(e) for r in runs]
        if all(math.isfinite(v) and v > 0 for v in ys):
            available.append(e)
        elif e != "CLD" or any(r.file for r in runs):
            missing = [r.run_id for r, v in zip(runs, ys, strict=True) if not (math.isfinite(v) and v > 0)]
            warns.append(f"{label}: estimator {e} left out: no value for runs {', '.join(missing)}")
    if not available:
        raise DesignError(f"{label}: no estimator has a chain length for every run "
                          "(give Mn or Mw for each run, or a chromatogram)")
    return available


def _drift_use(runs: Sequence[Run], opts: TransferOptions, label: str,
               warns: list[str]) -> tuple[np.ndarray, bool]:
    """Conversions [-] and whether the cumulative (drift) model is fitted for the group."""
    conv = np.array([r.conversion for r in runs])
    have_conv = bool(np.all(np.isfinite(conv)) and np.all(conv > 0))
    if opts.drift is True and not have_conv:
        raise DesignError(f"{label}: the drift correction needs 'conversion [-]' (0 < x < 1) for "
                          "every run", column="conversion [-]")
    use_drift = bool(opts.drift) and have_conv and opts.fixed_intercept is None
    if opts.drift == "auto" and np.any(np.isfinite(conv)) and not have_conv:
        warns.append(f"{label}: conversion is given for some runs only (or is 0); no drift "
                     "correction")
    return conv, use_drift


def _group(key: tuple[str, float], runs_all: list[Run], est: dict[str, RunEstimate],
           series: RunSeries, opts: TransferOptions, warns: list[str]) -> _Group:
    """The usable runs of a group, its terms, estimators and drift setting."""
    series_label, T = key
    label = _group_label(series_label, T)
    runs = [r for r in runs_all if r.role == "run" and not est[r.run_id].error]
    controls = [r for r in runs_all if r.role == "control" and not est[r.run_id].error]
    failed = [r.run_id for r in runs_all if r.role != "skip" and est[r.run_id].error]
    if failed:
        warns.append(f"{label}: runs {', '.join(failed)} could not be processed and are left out")
    chosen = _choose_terms(runs, series.terms, opts.terms, label)
    agents = _agent_names(runs, chosen, label)
    monomers = sorted({r.monomer or f"M0 = {r.M0:g} g/mol" for r in runs})
    if len(monomers) > 1:
        warns.append(f"{label}: runs of different monomers ({', '.join(monomers)}) are fitted "
                     "together; give them different series labels")
    available = _available_estimators(runs, est, opts.estimators, label, warns)
    primary = (opts.flag_estimator if opts.flag_estimator in available
               else next(e for e in PREFERENCE if e in available))
    conv, use_drift = _drift_use(runs, opts, label, warns)
    return _Group(series=series_label, T=T, label=label, runs=runs, controls=controls, est=est,
                  terms=chosen, agents=agents, monomers=monomers, available=available,
                  primary=primary, use_drift=use_drift, conv=conv,
                  mconc=np.array([r.monomer_conc for r in runs]), ids=[r.run_id for r in runs],
                  cols=_columns(runs, chosen))


def _impurity_test(g: _Group, opts: TransferOptions, warns: list[str]) -> ImpurityCheck | None:
    """Flag runs above the Mayo line of the others on the primary estimator.

    With the drift model the test runs on the cumulative model, linearised at a first fit
    of all runs. A design the test cannot handle skips it, with a warning.
    """
    y = g.y(g.primary, g.ids)
    try:
        if g.use_drift:
            pre_naive = fit_mayo(y, g.cols, estimator=g.primary, what=g.label)
            pwin = g.windows(g.primary, g.ids)
            pre = fit_cumulative(y, g.conv, g.cols, estimator=g.primary, naive=pre_naive,
                                 run_ids=g.ids, what=g.label, windows=pwin, M0=g.runs[0].M0)
            start = [pre.intercept.value] + [c.value for c in pre.constants]
            imp = flag_runs_cumulative(
                y, g.conv, g.cols, start, estimator=g.primary, windows=pwin, M0=g.runs[0].M0,
                run_ids=g.ids, monomer_conc=g.mconc, C_X=opts.impurity_C,
                confidence=opts.impurity_confidence, adjust=opts.impurity_adjust,
                rel_error=opts.rel_error, what=g.label)
        else:
            imp = flag_runs(
                y, g.cols, intercept=opts.fixed_intercept, estimator=g.primary, run_ids=g.ids,
                monomer_conc=g.mconc, C_X=opts.impurity_C, confidence=opts.impurity_confidence,
                adjust=opts.impurity_adjust, rel_error=opts.rel_error, what=g.label)
    except DesignError as exc:
        warns.append(f"{g.label}: impurity test ({g.primary}) not run, no run is flagged: "
                     f"{exc.message}")
        return None
    warns.extend(imp.warnings)
    return imp


def _final_fits(g: _Group, keep: list[str],
                opts: TransferOptions) -> tuple[dict[str, MayoFit], dict[str, DriftFit]]:
    """Mayo fit on initial ratios per estimator, and the drift fit when it applies."""
    kidx = [g.ids.index(i) for i in keep]
    cols = {t: v[kidx] for t, v in g.cols.items()}
    mayo: dict[str, MayoFit] = {}
    dfits: dict[str, DriftFit] = {}
    for e in g.available:
        y = g.y(e, keep)
        mayo[e] = fit_mayo(y, cols, intercept=opts.fixed_intercept, estimator=e, run_ids=keep,
                           confidence=opts.confidence, what=g.label)
        if g.use_drift:
            dfits[e] = fit_cumulative(y, g.conv[kidx], cols, estimator=e, naive=mayo[e],
                                      run_ids=keep, confidence=opts.confidence, what=g.label,
                                      windows=g.windows(e, keep), M0=g.runs[kidx[0]].M0)
    return mayo, dfits


def _consumption(g: _Group, keep: list[str], opts: TransferOptions,
                 warns: list[str]) -> dict[str, ConsumptionResult]:
    """The consumption method for each term whose residual agent was measured."""
    kruns = [r for r in g.runs if r.run_id in keep]
    out: dict[str, ConsumptionResult] = {}
    for t in g.terms:
        rr = [r for r in kruns if t in r.residual_agent]
        if not rr:
            continue
        try:
            out[t] = consumption_constant(
                [r.agent_conc.get(t, float("nan")) for r in rr],
                [r.residual_agent[t] for r in rr],
                monomer_initial=([r.monomer_conc for r in rr]
                                 if all(math.isfinite(r.residual_monomer) for r in rr) else None),
                monomer_residual=([r.residual_monomer for r in rr]
                                  if all(math.isfinite(r.residual_monomer) for r in rr) else None),
                conversion=[r.conversion for r in rr],
                u_agent_residual=([r.u_residual_agent[t] for r in rr]
                                  if all(t in r.u_residual_agent for r in rr) else None),
                u_monomer_residual=([r.u_residual_monomer for r in rr]
                                    if all(math.isfinite(r.u_residual_monomer) for r in rr)
                                    else None),
                u_conversion=([r.u_conversion for r in rr]
                              if all(math.isfinite(r.u_conversion) for r in rr) else None),
                run_ids=[r.run_id for r in rr], name=t, confidence=opts.confidence,
                what=g.label)
        except DataError as exc:
            warns.append(f"{g.label}: consumption method for {t} not applied: {exc.message}")
    return out


def _naive_bias_notes(g: _Group, dfits: dict[str, DriftFit], pref_est: str) -> tuple[str, ...]:
    """Where the naive Mayo fit is more than 2 % off the drift-corrected constant."""
    notes: list[str] = []
    if not dfits:
        return ()
    d = dfits[pref_est]
    for t in g.terms:
        j = d.terms.index(t)
        if d.naive_bias and math.isfinite(d.naive_bias[j]) and abs(d.naive_bias[j]) > 0.02:
            notes.append(
                f"{g.label}: the naive Mayo fit on initial ratios gives {t} = "
                f"{d.naive[j].value:.4g}, {100 * d.naive_bias[j]:+.1f} % off the "
                f"drift-corrected {d.constants[j].value:.4g} ({pref_est}); the agent is "
                "consumed faster than the monomer, so the naive value is biased")
    return tuple(notes)


def _analyse_group(key: tuple[str, float], runs_all: list[Run], est: dict[str, RunEstimate],
                   series: RunSeries, opts: TransferOptions, reference: Any = None) -> GroupResult:
    """Analyse one group (series label, temperature) in the steps of the module docstring."""
    warns: list[str] = []
    g = _group(key, runs_all, est, series, opts, warns)
    with _warnings.catch_warnings(record=True) as caught:
        _warnings.simplefilter("always", GpcWarning)
        # 1. impurity flags on the primary estimator; flagged runs left out
        imp = _impurity_test(g, opts, warns)
        flagged = set(imp.flagged_ids) if imp else set()
        keep = [i for i in g.ids if not (opts.exclude_flagged and i in flagged)]
        # 2. Mayo and drift fits per estimator
        mayo, dfits = _final_fits(g, keep, opts)
        # 3. intercept check on the preferred model of the primary estimator
        ic = None
        pfit: Any = dfits.get(g.primary) or mayo.get(g.primary)
        if pfit is not None and opts.fixed_intercept is None:
            ic = _intercept_check(pfit, g, opts)
        # 4. consumption method
        consumption = _consumption(g, keep, opts, warns)
    _collect(caught, warns)
    # 5. preferred constant and comparison of the estimators
    model = MODEL_DRIFT if dfits else MODEL_MAYO
    fits: dict[str, Any] = dfits if dfits else mayo
    pref_est = next(e for e in PREFERENCE if e in fits)
    comparison = (_compare(fits, g.terms, g.runs, est, g.label, model)
                  + _naive_bias_notes(g, dfits, pref_est))
    return GroupResult(
        series=g.series,
        T_C=g.T,
        label=g.label,
        terms=tuple(g.terms),
        agents=g.agents,
        monomer=", ".join(g.monomers),
        run_ids=tuple(g.ids),
        excluded=tuple(i for i in g.ids if i not in keep),
        mayo=mayo,
        drift=dfits,
        impurity=imp,
        intercept_check=ic,
        consumption=consumption,
        comparison=comparison,
        preferred={t: (pref_est, model) for t in g.terms},
        literature=_literature(g.runs, g.terms, g.agents, g.T, reference),
        warnings=tuple(dict.fromkeys(warns)),
    )


def _literature(runs: Sequence[Run], terms: Sequence[str], agents: dict[str, str], T: float,
                reference: Any) -> dict[str, dict[str, Any]]:
    """Bundled reference constants (and cautions) for the agents of a group, where known."""
    mono = next((r.monomer for r in runs if r.monomer), "")
    out: dict[str, dict[str, Any]] = {}
    if not mono:
        return out
    for t in terms:
        name = agents.get(t, "")
        if not name or name in ("agent", "solvent", "initiator", "monomer"):
            continue
        try:
            if reference is None:
                from gpctools import refdata

                ag = refdata.agent(name, mono)
            else:
                ag = reference.agent(name, mono)
        except GpcError:
            continue
        T_use = T if math.isfinite(T) else (ag.T_ref if ag.T_ref is not None else float("nan"))
        C_lit = ag.C(T_use + 273.15) if math.isfinite(T_use) else ag.C_ref
        out[t] = {"C [-]": C_lit, "T [°C]": finite_or_none(T_use), "source": ag.source,
                  "caution": ag.caution, "note": ag.temperature_note(T_use + 273.15)
                  if math.isfinite(T_use) else None}
    return out


def _intercept_check(fit: Any, g: _Group, opts: TransferOptions) -> InterceptCheck | None:
    """Check 1/DPn0 against, in this order: a given value, control runs, C_M (+ kinetic term)."""
    conf, C_X = opts.impurity_confidence, opts.impurity_C
    mconc = float(np.nanmean(g.mconc)) if np.any(np.isfinite(g.mconc)) else None
    expected, C_M, kinetic_term = opts.expected_intercept, opts.C_M, opts.kinetic_term
    if expected is not None:
        if isinstance(expected, (tuple, list)):
            e, se = float(expected[0]), float(expected[1])
        else:
            e, se = float(expected), 0.0
        return check_intercept(fit, e, se, source="given value", confidence=conf, C_X=C_X,
                               monomer_conc=mconc)
    if g.controls:
        ys = np.array([g.est[r.run_id].y(g.primary) for r in g.controls])
        ys = ys[np.isfinite(ys)]
        if ys.size:
            if ys.size > 1:
                e, se = float(ys.mean()), float(ys.std(ddof=1) / math.sqrt(ys.size))
            else:
                rel = getattr(fit, "relative_scatter", float("nan"))
                if not math.isfinite(rel):
                    rel = math.sqrt(fit.redchi) if math.isfinite(fit.redchi) else 0.0
                e, se = float(ys[0]), float(ys[0] * rel)
            src = (f"control run{'s' if ys.size > 1 else ''} "
                   f"{', '.join(r.run_id for r in g.controls)}")
            return check_intercept(fit, e, se, source=src, confidence=conf, C_X=C_X,
                                   monomer_conc=mconc)
    if C_M is not None:
        if kinetic_term is not None:
            return check_intercept(fit, C_M + kinetic_term, 0.0,
                                   source="C_M + kinetic term (given)", confidence=conf, C_X=C_X,
                                   monomer_conc=mconc)
        return check_intercept(fit, C_M, 0.0, source="C_M alone (kinetic term not given)",
                               lower_bound=True, confidence=conf, C_X=C_X, monomer_conc=mconc)
    if kinetic_term is not None:
        return check_intercept(fit, kinetic_term, 0.0, source="kinetic term (given)",
                               confidence=conf, C_X=C_X, monomer_conc=mconc)
    return None


def _compare(fits: dict[str, Any], terms: Sequence[str], runs: Sequence[Run],
             est: dict[str, RunEstimate], label: str, model: str) -> tuple[str, ...]:
    notes: list[str] = []
    names = [e for e in ESTIMATORS if e in fits]
    disp = np.array([est[r.run_id].Mw / est[r.run_id].Mn for r in runs
                     if math.isfinite(est[r.run_id].Mw) and math.isfinite(est[r.run_id].Mn)])
    shifts = np.array([est[r.run_id].Mn_shift_pct for r in runs
                       if math.isfinite(est[r.run_id].Mn_shift_pct)])
    clds = [c for c in (est[r.run_id].cld for r in runs) if c is not None]
    curv = np.array([c.curvature for c in clds if math.isfinite(c.curvature)])
    for t in terms:
        for i in range(len(names)):
            for j in range(i + 1, len(names)):
                a, b = fits[names[i]].constant(t), fits[names[j]].constant(t)
                se = math.hypot(a.stderr, b.stderr)
                if not (se > 0):
                    continue
                z = (a.value - b.value) / se
                if abs(z) <= DISAGREE_Z:
                    continue
                causes = _causes(names[i], names[j], a.value, b.value, disp, shifts, curv,
                                 bool(model == MODEL_DRIFT))
                notes.append(
                    f"{label}: {t} from {names[i]} ({a.value:.4g} ± {a.stderr:.2g}) and from "
                    f"{names[j]} ({b.value:.4g} ± {b.stderr:.2g}) differ by {abs(z):.1f} "
                    f"standard errors. Likely causes: {causes}")
    return tuple(notes)


def _causes(e1: str, e2: str, c1: float, c2: float, disp: np.ndarray, shifts: np.ndarray,
            curv: np.ndarray, drift_fitted: bool) -> str:
    out = []
    pair = {e1, e2}
    if pair == {"Mn", "Mw/2"} or pair == {"Mn", "CLD"}:
        c_mn = c1 if e1 == "Mn" else c2
        c_other = c2 if e1 == "Mn" else c1
        if c_mn > c_other:
            out.append("Mn too low at high agent levels: a low-M tail, system peak or baseline "
                       "error inside the integration limits, or band broadening (Mn low, Mw high)")
        else:
            out.append("Mn too high: low-M chains lost under the noise or cut off by the low-M "
                       "limit")
    if disp.size:
        med = float(np.median(disp))
        if med > 2.1:
            out.append(f"the dispersities (median {med:.2f}) exceed the most-probable 2: band "
                       "broadening" + ("" if drift_fitted else " or conversion drift") +
                       " broadens the distribution")
        elif med < 1.9:
            out.append(f"the dispersities (median {med:.2f}) are below the most-probable 2: "
                       "termination by combination (instantaneous Đ = 1.5 without transfer; Mw/2 "
                       "then underestimates DPn at low agent levels) or a lost low-M tail")
    if shifts.size and float(np.max(np.abs(shifts))) > 2.0:
        out.append(f"Mn moves up to {float(np.max(np.abs(shifts))):.1f} % when the low-M limit "
                   "moves: the low-M limit or baseline matters for these runs")
    if "CLD" in pair and curv.size and float(np.median(np.abs(curv))) > 0.1:
        out.append("ln P(M) is curved in the CLD windows (drift, broadening or combination), so Λ "
                   "depends on the window")
    if not out:
        out.append("baseline or low-M limit (Mn), band broadening (Mn low, Mw high), "
                   "combination termination (Mw/2 biased), conversion drift (broadens)")
    return "; ".join(out)


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
    2005; SCIENCE.md sections 3 to 6.
    """
    opts = _options(options, overrides)
    warns: list[str] = []
    series = _read_series(sheet_path, series, sheet, M0, monomer, reference, warns)
    m = _method_for(series, method)
    estimates = _estimate_runs(series, m, opts)
    est = {e.run.run_id: e for e in estimates}
    warns.extend(_run_warnings(estimates))
    warns.extend(_scale_warnings(estimates, reference))
    groups = [_analyse_group(key, runs, est, series, opts, reference)
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
        se = np.array([p[1].stderr for p in pts])
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


# --------------------------------------------------------------------------- tables


def _yes(v: bool) -> str:
    return "yes" if v else "no"


def _constants_rows(res: TransferResult) -> list[dict[str, Any]]:
    rows = []
    for g in res.groups:
        for t in g.terms:
            model_fits: tuple[tuple[str, dict[str, Any]], ...] = (
                (MODEL_MAYO, g.mayo), (MODEL_DRIFT, g.drift))
            for model, fits in model_fits:
                for e in ESTIMATORS:
                    if e not in fits:
                        continue
                    f = fits[e]
                    c = f.constant(t)
                    bias = float("nan")
                    if model == MODEL_MAYO and e in g.drift:
                        d = g.drift[e]
                        dc = d.constant(t).value
                        bias = 100 * (c.value / dc - 1) if dc else float("nan")
                    notes = []
                    if model == MODEL_DRIFT:
                        j = f.terms.index(t)
                        if t in f.identifiable and not f.identifiable[t]:
                            notes.append("not identifiable: agent used up in every run")
                        if f.naive_bias:
                            notes.append(f"naive fit {100 * f.naive_bias[j]:+.1f} % off")
                    elif e in g.drift:
                        notes.append("biased by conversion drift (see the drift-corrected row)")
                    rel = getattr(f, "relative_scatter", float("nan"))
                    rows.append({
                        "group": g.label, "series": g.series, "T [°C]": g.T_C, "monomer": g.monomer,
                        "agent": g.agents[t], "term": t, "estimator": e, "model": model,
                        "drift corrected": _yes(model == MODEL_DRIFT),
                        "C [-]": c.value, "standard error [-]": c.stderr,
                        "CI low [-]": c.ci_low, "CI high [-]": c.ci_high,
                        "confidence [-]": c.confidence, "runs": len(f.run_ids),
                        "excluded runs": "; ".join(g.excluded),
                        "1/DPn0 [-]": f.intercept.value,
                        "1/DPn0 standard error [-]": f.intercept.stderr,
                        "DPn0 [-]": f.DPn0.value, "DPn0 standard error [-]": f.DPn0.stderr,
                        "naive bias [%]": bias,
                        "relative scatter [-]": rel if rel is not None else float("nan"),
                        "preferred": _yes(g.preferred.get(t) == (e, model)),
                        "literature C [-]": g.literature.get(t, {}).get("C [-]", float("nan")),
                        "literature source": g.literature.get(t, {}).get("source", ""),
                        "notes": "; ".join(notes),
                    })
            if t in g.consumption:
                cr = g.consumption[t]
                c = cr.constant
                rows.append({
                    "group": g.label, "series": g.series, "T [°C]": g.T_C, "monomer": g.monomer,
                    "agent": g.agents[t], "term": t, "estimator": "consumption",
                    "model": MODEL_CONSUMPTION, "drift corrected": "yes",
                    "C [-]": c.value, "standard error [-]": c.stderr, "CI low [-]": c.ci_low,
                    "CI high [-]": c.ci_high, "confidence [-]": c.confidence,
                    "runs": len(cr.run_ids), "excluded runs": "",
                    "1/DPn0 [-]": float("nan"), "1/DPn0 standard error [-]": float("nan"),
                    "DPn0 [-]": float("nan"), "DPn0 standard error [-]": float("nan"),
                    "naive bias [%]": float("nan"), "relative scatter [-]": float("nan"),
                    "preferred": "no",
                    "literature C [-]": g.literature.get(t, {}).get("C [-]", float("nan")),
                    "literature source": g.literature.get(t, {}).get("source", ""),
                    "notes": "C = ln([A]/[A]0)/ln([M]/[M]0)",
                })
    return rows


def _run_rows(res: TransferResult) -> list[dict[str, Any]]:
    est = {e.run.run_id: e for e in res.estimates}
    group_of: dict[str, GroupResult] = {i: gr for gr in res.groups for i in gr.run_ids}
    terms = list(res.series.terms)
    rows = []
    for r in res.series.runs:
        e = est[r.run_id]
        g = group_of.get(r.run_id)
        row: dict[str, Any] = {
            "series": r.series, "run": r.run_id, "role": r.role, "T [°C]": r.T_C,
            "monomer": r.monomer, "M0 [g/mol]": r.M0, "[M] [mol/L]": r.monomer_conc,
        }
        for t in terms:
            row[term_label(t)] = r.ratios.get(t, 0.0)
        row.update({
            "conversion [-]": r.conversion,
            "Mn [g/mol]": e.Mn, "Mw [g/mol]": e.Mw,
            "dispersity [-]": e.Mw / e.Mn if (math.isfinite(e.Mw) and math.isfinite(e.Mn)) else float("nan"),
            "molar-mass scale": e.scale,
            "DPn (Mn) [-]": 1 / e.y("Mn") if math.isfinite(e.y("Mn")) else float("nan"),
            "DPn (Mw/2) [-]": 1 / e.y("Mw/2") if math.isfinite(e.y("Mw/2")) else float("nan"),
            "Lambda (CLD) [-]": e.y("CLD"),
            "CLD window low [g/mol]": e.cld.window[0] if e.cld else float("nan"),
            "CLD window high [g/mol]": e.cld.window[1] if e.cld else float("nan"),
            "CLD curvature [-]": e.cld.curvature if e.cld else float("nan"),
            "Mn shift, low-M limit [%]": e.Mn_shift_pct,
        })
        for est_name in ESTIMATORS:
            col = f"residual ({est_name}) [-]"
            row[col] = float("nan")
            if g is not None:
                f = g.drift.get(est_name) or g.mayo.get(est_name)
                if f is not None and r.run_id in f.run_ids:
                    k = f.run_ids.index(r.run_id)
                    row[col] = float(f.residuals[k])
                elif f is not None and est_name in g.mayo and r.run_id in g.excluded:
                    # excluded run: residual against the final line
                    y = e.y(est_name)
                    if math.isfinite(y):
                        if est_name in g.drift:
                            row[col] = float("nan")
                        else:
                            pred = g.mayo[est_name].predict({t: r.ratios.get(t, 0.0) for t in g.terms})[0]
                            row[col] = (y - pred) / pred
        flag = ""
        reason = ""
        stud = float("nan")
        excess = ppm = conc = float("nan")
        if e.error:
            flag, reason = "error", e.error
        elif r.role == "control":
            reason = "control run (intercept check), not fitted"
        elif r.role == "skip":
            reason = "skipped (role skip)"
        elif g is not None and g.impurity is not None:
            fl = g.impurity.flag(r.run_id)
            stud, excess, ppm, conc = fl.t, fl.excess, fl.impurity_ppm, fl.impurity_conc
            if fl.flagged:
                flag = "impurity?"
                reason = fl.reason + ("; left out of the fits" if r.run_id in g.excluded else "")
            else:
                reason = fl.reason
        row.update({
            "studentized residual [-]": stud, "excess 1/DPn [-]": excess,
            "impurity [ppm mol]": ppm, "impurity [mol/L]": conc,
            "flag": flag, "reason": reason, "file": r.file or "",
            "warnings": "; ".join(e.warnings),
        })
        rows.append(row)
    return rows


def _arrhenius_rows(res: TransferResult) -> list[dict[str, Any]]:
    rows = []
    for lbl, f in res.arrhenius:
        rows.append({
            "monomer": lbl["monomer"], "agent": lbl["agent"], "term": lbl["term"],
            "estimator": lbl["estimator"], "model": lbl["model"],
            "temperatures [°C]": "; ".join(f"{T - 273.15:g}" for T in f.T),
            "E_tr - E_p [kJ/mol]": f.delta_E.value,
            "E_tr - E_p standard error [kJ/mol]": f.delta_E.stderr,
            "E_tr - E_p CI low [kJ/mol]": f.delta_E.ci_low,
            "E_tr - E_p CI high [kJ/mol]": f.delta_E.ci_high,
            "A_tr/A_p [-]": f.A_ratio.value, "A_tr/A_p standard error [-]": f.A_ratio.stderr,
            "A_tr/A_p CI low [-]": f.A_ratio.ci_low, "A_tr/A_p CI high [-]": f.A_ratio.ci_high,
            "ln(A_tr/A_p) [-]": f.ln_A_ratio.value,
            "ln(A_tr/A_p) standard error [-]": f.ln_A_ratio.stderr,
            "correlation [-]": f.correlation, "weighted": _yes(f.weighted),
            "notes": "; ".join(f.warnings),
        })
    return rows

