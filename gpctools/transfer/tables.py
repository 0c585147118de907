"""The result tables of a run-series analysis: constants, runs, Arrhenius fits.

Every column name carries its unit. Built from a :class:`~gpctools.transfer.TransferResult`;
pandas only at this edge (the callers make the DataFrames).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

from gpctools.chainlength import inv_dpn_from_dpw
from gpctools.transfer.estimators import ESTIMATORS
from gpctools.transfer.group import MODEL_CONSUMPTION, MODEL_DRIFT, MODEL_MAYO, GroupResult
from gpctools.transfer.impurity import GENERIC_C_X
from gpctools.transfer.mayo import term_label

if TYPE_CHECKING:  # pragma: no cover
    from gpctools.transfer.analysis import TransferResult

__all__ = ["CONSTANT_COLUMNS", "ARRHENIUS_COLUMNS", "constants_rows", "run_rows", "arrhenius_rows"]


CONSTANT_COLUMNS = [
    "group", "series", "T [°C]", "monomer", "agent", "term", "estimator", "model", "drift corrected",
    "C [-]", "standard error [-]", "statistical part [-]", "calibration part [-]",
    "CI low [-]", "CI high [-]", "confidence [-]", "degrees of freedom", "runs",
    "excluded runs", "1/DPn0 [-]", "1/DPn0 standard error [-]", "DPn0 [-]",
    "DPn0 standard error [-]", "kinetic term", "delta [-]", "naive bias [%]",
    "relative scatter [-]", "estimator spread low [-]", "estimator spread high [-]",
    "estimators disagree", "preferred", "literature C [-]", "literature source", "notes",
]
ARRHENIUS_COLUMNS = [
    "monomer", "agent", "term", "estimator", "model", "temperatures [°C]",
    "E_tr - E_p [kJ/mol]", "E_tr - E_p standard error [kJ/mol]", "E_tr - E_p CI low [kJ/mol]",
    "E_tr - E_p CI high [kJ/mol]", "A_tr/A_p [-]", "A_tr/A_p standard error [-]",
    "A_tr/A_p CI low [-]", "A_tr/A_p CI high [-]", "ln(A_tr/A_p) [-]",
    "ln(A_tr/A_p) standard error [-]", "correlation [-]", "weighted", "notes",
]


def _yes(v: bool) -> str:
    return "yes" if v else "no"


def constants_rows(res: TransferResult) -> list[dict[str, Any]]:
    """One row per constant, estimator and model of every group (the constants table).

    Columns: series, group, temperature, term and agent, estimator and model (Mayo fit,
    drift-corrected, consumption), C with its standard error split into statistical and
    calibration parts, the interval and its confidence, the degrees of freedom, 1/DPn0
    and DPn0, the runs used and excluded, the kinetic term, and notes. The body is one flat list of row builders, one per
    model family, kept together so that the table's column order reads in one place.
    """
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
                    sp = g.spread.get(t, {}) if model == g.preferred.get(t, ("", ""))[1] else {}
                    if sp.get("disagree") and g.preferred.get(t) == (e, model):
                        notes.append("the estimators disagree beyond their uncertainties "
                                     f"({', '.join(f'{k} {v:.4g}' for k, v in sp['values'].items())}); "
                                     "report the spread with this value")
                    rows.append({
                        "group": g.label, "series": g.series, "T [°C]": g.T_C, "monomer": g.monomer,
                        "agent": g.agents[t], "term": t, "estimator": e, "model": model,
                        "drift corrected": _yes(model == MODEL_DRIFT),
                        "C [-]": c.value, "standard error [-]": c.stderr,
                        "statistical part [-]": c.stderr_statistical,
                        "calibration part [-]": c.stderr_calibration,
                        "CI low [-]": c.ci_low, "CI high [-]": c.ci_high,
                        "confidence [-]": c.confidence, "degrees of freedom": c.dof,
                        "runs": len(f.run_ids),
                        "excluded runs": "; ".join(g.excluded),
                        "1/DPn0 [-]": f.intercept.value,
                        "1/DPn0 standard error [-]": f.intercept.stderr,
                        "DPn0 [-]": f.DPn0.value, "DPn0 standard error [-]": f.DPn0.stderr,
                        "kinetic term": g.kinetic.how + (f" ({g.kinetic.label})" if g.kinetic
                                                          and g.kinetic.label and g.kinetic.how == "regressor" else "")
                        if g.kinetic else "",
                        "delta [-]": g.termination.delta if g.termination else float("nan"),
                        "naive bias [%]": bias,
                        "relative scatter [-]": rel if rel is not None else float("nan"),
                        "estimator spread low [-]": sp.get("min", float("nan")),
                        "estimator spread high [-]": sp.get("max", float("nan")),
                        "estimators disagree": _yes(bool(sp.get("disagree"))) if sp else "",
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
                    "C [-]": c.value, "standard error [-]": c.stderr,
                    "statistical part [-]": c.stderr, "calibration part [-]": 0.0,
                    "CI low [-]": c.ci_low,
                    "CI high [-]": c.ci_high, "confidence [-]": c.confidence,
                    "degrees of freedom": float(len(cr.run_ids) - 1),
                    "runs": len(cr.run_ids), "excluded runs": "",
                    "1/DPn0 [-]": float("nan"), "1/DPn0 standard error [-]": float("nan"),
                    "DPn0 [-]": float("nan"), "DPn0 standard error [-]": float("nan"),
                    "kinetic term": "", "delta [-]": float("nan"),
                    "naive bias [%]": float("nan"), "relative scatter [-]": float("nan"),
                    "estimator spread low [-]": float("nan"),
                    "estimator spread high [-]": float("nan"), "estimators disagree": "",
                    "preferred": "no",
                    "literature C [-]": g.literature.get(t, {}).get("C [-]", float("nan")),
                    "literature source": g.literature.get(t, {}).get("source", ""),
                    "notes": "C = ln([A]/[A]0)/ln([M]/[M]0)",
                })
    return rows


def run_rows(res: TransferResult) -> list[dict[str, Any]]:
    """One row per run: its ratios, averages, 1/DPn per estimator, flag and reason.

    Kept as one function for the same reason as :func:`constants_rows`: the runs table's
    columns, in order, are read off this body.
    """
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
            "DPn (Mw/2) [-]": _dpn_from_mw(e, g),
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
        stud = thr = float("nan")
        excess = excess_se = ppm = conc = float("nan")
        generic: dict[float, float] = {}
        if e.error:
            flag, reason = "error", e.error
        elif r.role == "control":
            reason = "control run (intercept check), not fitted"
        elif r.role == "skip":
            reason = "skipped (role skip)"
        elif g is not None and g.impurity is not None:
            fl = g.impurity.flag(r.run_id)
            stud, excess, ppm, conc = fl.t, fl.excess, fl.impurity_ppm, fl.impurity_conc
            thr, excess_se, generic = fl.threshold, fl.excess_stderr, fl.generic_ppm
            if fl.flagged:
                flag = "impurity?"
                reason = fl.reason + ("; left out of the fits" if r.run_id in g.excluded else "")
            else:
                reason = fl.reason
        primary = g.impurity.estimator if (g is not None and g.impurity is not None) else "Mw/2"
        row.update({
            "injections": e.injections,
            "relative measurement u [-]": e.rel_u.get(primary, float("nan")),
            "studentized residual [-]": stud, "threshold [-]": thr, "excess 1/DPn [-]": excess,
            "excess standard error [-]": excess_se,
            "impurity [ppm mol]": ppm, "impurity [mol/L]": conc,
        })
        for cx in GENERIC_C_X:
            row[f"impurity at C_X = {cx:g} [ppm mol]"] = generic.get(cx, float("nan"))
        row.update({"flag": flag, "reason": reason, "file": "; ".join(r.files) or (r.file or ""),
                    "warnings": "; ".join(e.warnings)})
        rows.append(row)
    return rows


def _dpn_from_mw(e: Any, g: GroupResult | None) -> float:
    """DPn from Mw with the mixed-termination relation and the run's fitted β; without a
    fit, the exact discrete most-probable DPn = (DPw + 1)/2 [-].
    """
    y = e.y("Mw/2")
    if not math.isfinite(y):
        return float("nan")
    beta = 0.0
    if g is not None:
        f = g.drift.get("Mw/2") or g.mayo.get("Mw/2")
        if f is not None and f.model is not None and f.theta is not None and e.run.run_id in f.run_ids:
            beta = float(f.model.beta(f.theta)[f.run_ids.index(e.run.run_id)])
    return float(1.0 / inv_dpn_from_dpw(2.0 / y, beta))


def arrhenius_rows(res: TransferResult) -> list[dict[str, Any]]:
    """One row per Arrhenius fit: E_tr − E_p and A_tr/A_p with their intervals."""
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

