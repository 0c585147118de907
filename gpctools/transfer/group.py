"""One group of runs (series label, temperature): flags, fits, checks and comparison.

Steps of :func:`analyse_group`, each a named function:

1. :func:`_group`: the usable runs, the terms that vary (a ratio enters automatically
   only when it spans about 2-fold), the termination mode δ and the kinetic term
   (:mod:`gpctools.transfer.kinetic`), the estimators with a value for every run, the
   calibration covariance of the observations;
2. :func:`_impurity_test`: generalized-ESD flags on the primary estimator against the model
   the fits will use (drift, δ, kinetic term), flagged runs left out;
3. :func:`_final_fits`: per estimator the Mayo fit on initial ratios and, with
   conversions, the cumulative (drift) fit, each with its statistical and calibration
   uncertainty;
4. :func:`_intercept_check` on the 1/DPn scale; the consumption method;
5. the preferred constant, the estimators' spread and where they disagree, with causes.

References
----------
docs/science.md, sections 3 to 5 and 11.
"""

from __future__ import annotations

import math
import warnings as _warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools.chainlength import inv_dpn_from_dpw
from gpctools.display import Display
from gpctools.errors import DataError, DesignError, GpcError, GpcWarning
from gpctools.sheets.cells import finite_or_none
from gpctools.transfer.drift import (
    ConsumptionResult,
    DriftFit,
    consumption_constant,
    fit_cumulative,
)
from gpctools.transfer.estimators import ESTIMATORS
from gpctools.transfer.impurity import ImpurityCheck, InterceptCheck, check_intercept, flag_runs
from gpctools.transfer.kinetic import (
    RATIO_SPAN,
    KineticTerm,
    Termination,
    kinetic_term,
    termination_mode,
)
from gpctools.transfer.mayo import MayoFit, fit_mayo, term_label
from gpctools.transfer.model import SeriesModel
from gpctools.transfer.options import TransferOptions
from gpctools.transfer.runs import RunEstimate
from gpctools.transfer.series import Run, RunSeries

__all__ = ["GroupResult", "analyse_group", "MODEL_MAYO", "MODEL_DRIFT", "MODEL_CONSUMPTION",
           "PREFERENCE", "DISAGREE_Z"]

MODEL_MAYO = "Mayo (initial ratios)"
MODEL_DRIFT = "cumulative Mayo (conversion drift)"
MODEL_CONSUMPTION = "consumption"
#: Estimators of a group are said to disagree when two constants differ by more than this
#: many combined standard errors (two-sided 99 %, common practice).
DISAGREE_Z = 2.576
#: Order of preference of the estimators for the "preferred" row (Mw/2 is the least
#: sensitive to baseline and low-M limit: Heuts, Davis, Russell et al., Macromolecules 1999).
PREFERENCE = ("Mw/2", "Mn", "CLD")


@dataclass(frozen=True, repr=False)
class GroupResult(Display):
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
    termination : Termination or None
        δ used by the Mw/2 and CLD models, and where it came from.
    kinetic : KineticTerm or None
        How the kinetic term entered (regressor, reference, constant) and why.
    spread : dict
        Term -> {"values": estimator -> C, "min", "max", "disagree"} over the estimators
        of the preferred model: when they disagree beyond their uncertainties the spread
        is part of the answer.
    monomer_conc : float
        Mean [M]0 of the fitted runs [mol/L] (NaN when not given).
    plot_points : dict
        Estimator -> run id -> the run's observation moved onto the instantaneous 1/DPn
        scale with the recommended fit (flagged runs included) [-], for the Mayo plot.
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
    termination: Termination | None = None
    kinetic: KineticTerm | None = None
    spread: dict[str, dict[str, Any]] = field(default_factory=dict)
    monomer_conc: float = float("nan")
    plot_points: dict[str, dict[str, float]] = field(default_factory=dict)

    def preferred_fit(self, term: str | None = None) -> MayoFit | DriftFit:
        """The fit behind the recommended constant (of ``term``, default the first)."""
        e, m = self.preferred[term or self.terms[0]]
        return self.fit(e, m)

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
            "termination": self.termination.summary() if self.termination else None,
            "kinetic term": self.kinetic.summary() if self.kinetic else None,
            "estimator spread": {k: {"values": {e: finite_or_none(c) for e, c in v["values"].items()},
                                     "min": finite_or_none(v["min"]),
                                     "max": finite_or_none(v["max"]),
                                     "disagree": v["disagree"]}
                                 for k, v in self.spread.items()},
            "[M]0 mean [mol/L]": finite_or_none(self.monomer_conc),
            "warnings": list(self.warnings),
        }



# --------------------------------------------------------------------------- steps


def _group_label(series: str, T: float) -> str:
    parts = [series or "series"]
    if math.isfinite(T) and not (series and f"{T:g}" in series):
        parts.append(f"{T:g} °C")
    return ", ".join(parts)


def _choose_terms(runs: Sequence[Run], all_terms: Sequence[str], terms: Sequence[str] | None,
                  label: str, notes: list[str] | None = None) -> list[str]:
    """The terms to fit: those asked for, or every species whose amount varies by design.

    Automatically a term enters when its concentration (where given, else its ratio)
    spans about 2-fold (:func:`_spans`); a species diluted together with the monomer at a
    constant charge is not a design for its constant. The initiator needs 3 or more
    levels: with 2 any dependence on [I] can be written with the kinetic term √[I]/[M],
    so C_I cannot be told from it (the refusal is noted).
    """
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
        conc = np.array([r.agent_conc.get(t, np.nan) for r in runs], dtype=float)
        vals = conc if np.all(np.isfinite(conc)) else np.array([r.ratios.get(t, 0.0) for r in runs])
        if not _spans(vals):
            continue
        if t == "C_I" and np.unique(np.round(vals, 12)).size < 3:
            if notes is not None:
                notes.append(f"{label}: C_I left out: [I] has only 2 levels, and with 2 levels "
                             "the initiator's transfer cannot be told from the kinetic term "
                             "sqrt([I])/[M]; use 3 or more levels, or ask for it (terms)")
            continue
        chosen.append(t)
    if not chosen:
        raise DesignError(
            f"{label}: no agent, solvent or initiator ratio varies across its runs, so there "
            "is no slope to fit; vary [A]/[M] over at least 2 (better 4 or more) levels")
    return chosen


def _spans(vals: np.ndarray) -> bool:
    """A ratio enters automatically when it spans at least RATIO_SPAN (about 2-fold), or
    runs without the species stand beside runs with it; a few % of weighing scatter does
    not (docs/science.md, section 3.3).
    """
    v = np.round(vals, 15)
    if np.unique(v).size < 2:
        return False
    if np.min(v) <= 0:
        return bool(np.max(v) > 0)
    return bool(np.max(v) / np.min(v) >= RATIO_SPAN)


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




@dataclass(frozen=True)
class _Group:
    """One group's usable runs and what each step of its analysis reads.

    ``runs`` are the processed runs with role ``run`` (``ids`` their run ids, ``cols`` the
    term columns, ``conv`` conversions [-], ``mconc`` [M] [mol/L]); ``primary`` is the
    estimator of the impurity test and the intercept check; ``cal`` the calibration
    covariance of the coefficients and its degrees of freedom (None without one).
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
    termination: Termination
    kinetic: KineticTerm
    cal: tuple[np.ndarray | None, float] = (None, math.inf)

    def y(self, estimator: str, ids: Sequence[str]) -> np.ndarray:
        """The observation of ``estimator`` for the runs ``ids`` [-]."""
        return np.array([self.est[i].y(estimator) for i in ids])

    def windows(self, estimator: str, ids: Sequence[str]) -> list[tuple[float, float]] | None:
        """CLD windows of the runs ``ids`` [g/mol] (None for the other estimators)."""
        if estimator != "CLD":
            return None
        return [self.est[i].cld.window for i in ids]  # type: ignore[union-attr]  # CLD: cld set

    def index(self, ids: Sequence[str]) -> list[int]:
        return [self.ids.index(i) for i in ids]

    def model_kwargs(self, estimator: str, ids: Sequence[str]) -> dict[str, Any]:
        """Keyword arguments of the fits for the runs ``ids``: δ, kinetic term, CLD windows,
        calibration covariance of the observations.
        """
        k = self.index(ids)
        kin = self.kinetic
        out: dict[str, Any] = {
            "delta": self.termination.delta, "C_M_known": self.termination.C_M,
            "kinetic": None if kin.z is None else kin.z[k],
            "kinetic_known": None if kin.known is None else kin.known[k],
            "kinetic_label": kin.label or "kinetic term",
            "windows": self.windows(estimator, ids), "M0": self.runs[k[0]].M0,
        }
        out.update(self.calibration_part(estimator, ids))
        return out

    def calibration_part(self, estimator: str, ids: Sequence[str]) -> dict[str, Any]:
        """Cov_cal(y) = diag(y) G Σ_c Gᵀ diag(y) for the runs ``ids`` (G: d ln y/d c), or {}
        when no run carries a calibration gradient.
        """
        C, dof = self.cal
        if C is None:
            return {}
        y = self.y(estimator, ids)
        G = np.zeros((len(ids), C.shape[0]))
        for j, i in enumerate(ids):
            g = self.est[i].gradient.get(estimator)
            if g is not None and g.size == C.shape[0]:
                G[j] = g
        if not np.any(G):
            return {}
        Gy = G * y[:, None]
        return {"cal_cov_y": Gy @ C @ Gy.T, "dof_cal": dof}

    def noise(self, estimator: str) -> tuple[np.ndarray, np.ndarray, str]:
        """Measured relative uncertainty of each run's observation, its dof, and its source."""
        u = np.array([self.est[i].rel_u.get(estimator, np.nan) for i in self.ids])
        d = np.array([self.est[i].rel_u_dof.get(estimator, 0.0) for i in self.ids])
        src = sorted({self.est[i].rel_u_source for i in self.ids if self.est[i].rel_u_source})
        return u, d, "; ".join(src)


def _group(key: tuple[str, float], runs_all: list[Run], est: dict[str, RunEstimate],
           series: RunSeries, opts: TransferOptions, warns: list[str], reference: Any,
           cal: tuple[np.ndarray | None, float]) -> _Group:
    """The usable runs of a group, its terms, δ, kinetic term, estimators and drift setting."""
    series_label, T = key
    label = _group_label(series_label, T)
    runs = [r for r in runs_all if r.role == "run" and not est[r.run_id].error]
    controls = [r for r in runs_all if r.role == "control" and not est[r.run_id].error]
    failed = [r.run_id for r in runs_all if r.role != "skip" and est[r.run_id].error]
    if failed:
        warns.append(f"{label}: runs {', '.join(failed)} could not be processed and are left out")
    chosen = _choose_terms(runs, series.terms, opts.terms, label, warns)
    agents = _agent_names(runs, chosen, label)
    monomers = sorted({r.monomer or f"M0 = {r.M0:g} g/mol" for r in runs})
    if len(monomers) > 1:
        warns.append(f"{label}: runs of different monomers ({', '.join(monomers)}) are fitted "
                     "together; give them different series labels")
    available = _available_estimators(runs, est, opts.estimators, label, warns)
    primary = (opts.flag_estimator if opts.flag_estimator in available
               else next(e for e in PREFERENCE if e in available))
    conv, use_drift = _drift_use(runs, opts, label, warns)
    term = termination_mode(runs, opts.delta, opts.C_M, reference, label)
    kin = kinetic_term(runs, "none" if opts.fixed_intercept is not None else opts.kinetic,
                       delta=term.delta, T_C=T, reference=reference, label=label)
    return _Group(series=series_label, T=T, label=label, runs=runs, controls=controls, est=est,
                  terms=chosen, agents=agents, monomers=monomers, available=available,
                  primary=primary, use_drift=use_drift, conv=conv,
                  mconc=np.array([r.monomer_conc for r in runs]), ids=[r.run_id for r in runs],
                  cols=_columns(runs, chosen), termination=term, kinetic=kin, cal=cal)


def _model_for(g: _Group, estimator: str, opts: TransferOptions, drift: bool) -> SeriesModel:
    """The model of ``estimator`` over all runs of the group (drift, δ, kinetic term)."""
    kw = g.model_kwargs(estimator, g.ids)
    T = np.column_stack([g.cols[t] for t in g.terms])
    return SeriesModel(estimator, tuple(g.terms), T, g.conv if drift else None,
                       kw["kinetic"], kw["kinetic_known"], opts.fixed_intercept,
                       kw["delta"], kw["C_M_known"],
                       None if kw["windows"] is None else np.asarray(kw["windows"], dtype=float),
                       kw["M0"])


def _test_model(g: _Group, opts: TransferOptions) -> SeriesModel:
    """The model the impurity test uses: the primary estimator with drift, δ, kinetic term."""
    return _model_for(g, g.primary, opts, g.use_drift)


def _plot_points(g: _Group, fits: dict[str, Any], opts: TransferOptions,
                 drift: bool) -> dict[str, dict[str, float]]:
    """Every run's observation on the instantaneous 1/DPn scale with each estimator's
    recommended fit (flagged runs included), for the Mayo plot: y·λ(0)/ŷ.
    """
    out: dict[str, dict[str, float]] = {}
    for e, f in fits.items():
        if f.theta is None:
            continue
        try:
            pts = _model_for(g, e, opts, drift).to_inv_dpn(g.y(e, g.ids), f.theta)
        except (DataError, ValueError):
            continue
        out[e] = {i: float(v) for i, v in zip(g.ids, pts, strict=True)}
    return out


def _impurity_test(g: _Group, opts: TransferOptions, warns: list[str]) -> ImpurityCheck | None:
    """Flag runs above the Mayo line of the others on the primary estimator (generalized
    ESD against the group's model, linearised at a robust fit; no run is refitted). A
    design the test cannot handle skips it, with a warning.
    """
    y = g.y(g.primary, g.ids)
    u, dof, src = g.noise(g.primary)
    try:
        imp = flag_runs(
            y, g.cols, intercept=opts.fixed_intercept, estimator=g.primary, run_ids=g.ids,
            monomer_conc=g.mconc, C_X=opts.impurity_C, confidence=opts.impurity_confidence,
            adjust=opts.impurity_adjust, rel_error=opts.rel_error, what=g.label,
            model=_test_model(g, opts), rel_u=u if np.any(np.isfinite(u)) else None,
            rel_u_dof=dof, noise_label=src)
    except DesignError as exc:
        warns.append(f"{g.label}: impurity test ({g.primary}) not run, no run is flagged: "
                     f"{exc.message}")
        return None
    warns.extend(imp.warnings)
    return imp


def _sigma(g: _Group, estimator: str, ids: Sequence[str], opts: TransferOptions) -> Any:
    """Known absolute uncertainties of y from a given relative error (rel_error), else None."""
    if opts.rel_error is None:
        return None
    return opts.rel_error * g.y(estimator, ids)


def _final_fits(g: _Group, keep: list[str],
                opts: TransferOptions) -> tuple[dict[str, MayoFit], dict[str, DriftFit]]:
    """Mayo fit on initial ratios per estimator, and the drift fit when it applies."""
    kidx = g.index(keep)
    cols = {t: v[kidx] for t, v in g.cols.items()}
    mayo: dict[str, MayoFit] = {}
    dfits: dict[str, DriftFit] = {}
    for e in g.available:
        y = g.y(e, keep)
        kw = g.model_kwargs(e, keep)
        sig = _sigma(g, e, keep, opts)
        mayo[e] = fit_mayo(y, cols, intercept=opts.fixed_intercept, estimator=e, run_ids=keep,
                           confidence=opts.confidence, what=g.label, sigma=sig,
                           **kw)
        if g.use_drift:
            dfits[e] = fit_cumulative(y, g.conv[kidx], cols, estimator=e, naive=mayo[e],
                                      run_ids=keep, confidence=opts.confidence, what=g.label,
                                      sigma=sig, **kw)
    return mayo, dfits


def _control_inv_dpn(g: _Group, fit: Any) -> tuple[np.ndarray, float]:
    """The control runs' observations on the 1/DPn scale (Mw/2: the mixed-termination
    inversion with the fit's β; CLD: the model's ratio at zero agent), and the
    sensitivity d ln(1/DPn)/d ln(observation) that carries a relative error across
    (with combination 2 M0/Mw moves less than 1/DPn, so its error is amplified).
    """
    ys = np.array([g.est[r.run_id].y(g.primary) for r in g.controls])
    model = getattr(fit, "model", None)
    if model is None or g.primary == "Mn":
        return ys, 1.0
    theta = fit.theta
    beta = float(np.mean(model.beta(theta)))
    if g.primary == "Mw/2":
        lam = inv_dpn_from_dpw(2.0 / ys, beta)
        eps = 1e-6
        lam2 = inv_dpn_from_dpw(2.0 / (ys * (1 + eps)), beta)
        sens = float(np.mean(np.abs(np.log(lam2 / lam)) / eps)) if ys.size else 1.0
        return lam, sens
    ratio = float(np.mean(model.inv_dpn(theta, instantaneous=True) / model.predict(theta, instantaneous=True)))
    return ys * ratio, 1.0


def _intercept_check(fit: Any, g: _Group, opts: TransferOptions) -> InterceptCheck | None:
    """Check 1/DPn0 (on the 1/DPn scale for every estimator) against, in this order: a
    given value, control runs, C_M (+ kinetic term). With a kinetic regressor the intercept
    is only the constant part (C_M and any constant transfer): it is checked against a
    given C_M alone.
    """
    conf, C_X = opts.impurity_confidence, opts.impurity_C
    mconc = float(np.nanmean(g.mconc)) if np.any(np.isfinite(g.mconc)) else None
    expected, C_M, kinetic_term = opts.expected_intercept, opts.C_M, opts.kinetic_term
    if g.kinetic.how != "constant":
        if C_M is None:
            return None
        return check_intercept(fit, C_M, 0.0, source="C_M (given); the kinetic term is "
                               f"{g.kinetic.how}", confidence=conf, C_X=C_X, monomer_conc=mconc)
    if expected is not None:
        if isinstance(expected, (tuple, list)):
            e, se = float(expected[0]), float(expected[1])
        else:
            e, se = float(expected), 0.0
        return check_intercept(fit, e, se, source="given value", confidence=conf, C_X=C_X,
                               monomer_conc=mconc)
    if g.controls:
        ys, sens = _control_inv_dpn(g, fit)
        ys = ys[np.isfinite(ys)]
        if ys.size:
            if ys.size > 1:
                e, se = float(ys.mean()), float(ys.std(ddof=1) / math.sqrt(ys.size))
            else:
                rel = getattr(fit, "relative_scatter", float("nan"))
                if not math.isfinite(rel):
                    rel = math.sqrt(fit.redchi) if math.isfinite(fit.redchi) else 0.0
                e, se = float(ys[0]), float(ys[0] * rel * sens)
            src = (f"control run{'s' if ys.size > 1 else ''} "
                   f"{', '.join(r.run_id for r in g.controls)} (on the 1/DPn scale)")
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


#: Largest median |ln(Đ_observed/Đ_model)| before the termination mode is questioned [-]
#: (our choice: band broadening alone raises Đ by a few %, docs/science.md, section 12).
DISPERSITY_TOLERANCE = 0.08


def _dispersity_check(g: _Group, fits: dict[str, Any], opts: TransferOptions,
                      drift: bool) -> str | None:
    """Do the runs' Mw/Mn agree with δ? Mn does not depend on δ, so the Mn fit's θ predicts
    each run's dispersity 2 ŷ_n/ŷ_w through the Mw/2 model; a median mismatch beyond
    DISPERSITY_TOLERANCE over the third of the runs with the longest chains is reported
    with what to check.
    """
    if "Mn" not in fits or "Mw/2" not in fits or fits["Mn"].theta is None:
        return None
    try:
        th = fits["Mn"].theta
        yn = _model_for(g, "Mn", opts, drift).predict(th)
        yw = _model_for(g, "Mw/2", opts, drift).predict(th)
    except (DataError, ValueError):
        return None
    obs = 2.0 * g.y("Mn", g.ids) / g.y("Mw/2", g.ids)
    pred = 2.0 * yn / yw
    # the longest chains (lowest 1/DPn, a third of the runs) carry the termination mode;
    # at high agent levels transfer dominates and every δ predicts Đ near 2
    low = np.argsort(yn)[: max(1, len(yn) // 3)]
    obs, pred = obs[low], pred[low]
    dev = float(np.median(np.log(obs / pred)))
    if not math.isfinite(dev) or abs(dev) <= DISPERSITY_TOLERANCE:
        return None
    d = g.termination.delta
    return (f"{g.label}: the runs' dispersities (median Mw/Mn {float(np.median(obs)):.3g}) do not "
            f"match delta = {d:g} ({g.termination.source.split(':')[0]}), which predicts "
            f"{float(np.median(pred)):.3g}: Mw/2 and CLD rest on delta; check it (sheet column "
            "'delta [-]' or --delta), or band broadening; the Mn estimator does not depend on it")


def _spread(fits: dict[str, Any], terms: Sequence[str]) -> dict[str, dict[str, Any]]:
    """Per term: each estimator's constant, min, max, and whether two disagree beyond
    DISAGREE_Z of their statistical standard errors (the calibration is common to both).
    """
    out: dict[str, dict[str, Any]] = {}
    names = [e for e in ESTIMATORS if e in fits]
    for t in terms:
        vals = {e: fits[e].constant(t) for e in names}
        disagree = False
        for i in range(len(names)):
            for j in range(i + 1, len(names)):
                a, b = vals[names[i]], vals[names[j]]
                sa = a.stderr_statistical if math.isfinite(a.stderr_statistical) else a.stderr
                sb = b.stderr_statistical if math.isfinite(b.stderr_statistical) else b.stderr
                se = math.hypot(sa, sb)
                if se > 0 and abs(a.value - b.value) / se > DISAGREE_Z:
                    disagree = True
        v = [c.value for c in vals.values()]
        out[t] = {"values": {e: c.value for e, c in vals.items()}, "min": min(v), "max": max(v),
                  "disagree": disagree}
    return out


def analyse_group(key: tuple[str, float], runs_all: list[Run], est: dict[str, RunEstimate],
                  series: RunSeries, opts: TransferOptions, reference: Any = None,
                  cal: tuple[np.ndarray | None, float] = (None, math.inf)) -> GroupResult:
    """Analyse one group (series label, temperature) in the steps of the module docstring."""
    warns: list[str] = []
    g = _group(key, runs_all, est, series, opts, warns, reference, cal)
    if g.kinetic.how != "constant" or math.isfinite(g.kinetic.span):
        warns.append(f"{g.label}: {g.kinetic.note}")
    with _warnings.catch_warnings(record=True) as caught:
        _warnings.simplefilter("always", GpcWarning)
        imp = _impurity_test(g, opts, warns)
        flagged = set(imp.flagged_ids) if imp else set()
        keep = [i for i in g.ids if not (opts.exclude_flagged and i in flagged)]
        mayo, dfits = _final_fits(g, keep, opts)
        ic = None
        pfit: Any = dfits.get(g.primary) or mayo.get(g.primary)
        if pfit is not None and opts.fixed_intercept is None:
            ic = _intercept_check(pfit, g, opts)
        consumption = _consumption(g, keep, opts, warns)
    _collect(caught, warns)
    model = MODEL_DRIFT if dfits else MODEL_MAYO
    fits: dict[str, Any] = dfits if dfits else mayo
    pref_est = next(e for e in PREFERENCE if e in fits)
    disp = _dispersity_check(g, fits, opts, bool(dfits))
    if disp:
        warns.append(disp)
    comparison = (_compare(fits, g.terms, g.runs, est, g.label, model)
                  + _naive_bias_notes(g, dfits, pref_est))
    mc = g.mconc[np.isfinite(g.mconc)]
    return GroupResult(
        series=g.series, T_C=g.T, label=g.label, terms=tuple(g.terms), agents=g.agents,
        monomer=", ".join(g.monomers), run_ids=tuple(g.ids),
        excluded=tuple(i for i in g.ids if i not in keep), mayo=mayo, drift=dfits,
        impurity=imp, intercept_check=ic, consumption=consumption, comparison=comparison,
        preferred={t: (pref_est, model) for t in g.terms},
        literature=_literature(g.runs, g.terms, g.agents, g.T, reference),
        warnings=tuple(dict.fromkeys(warns)), termination=g.termination, kinetic=g.kinetic,
        spread=_spread(fits, g.terms), monomer_conc=float(mc.mean()) if mc.size else float("nan"),
        plot_points=_plot_points(g, fits, opts, bool(dfits)),
    )
