"""PNG plots of a run-series analysis (matplotlib, Agg backend, imported lazily).

- Mayo plot per group: one panel per estimator (columns) and term (rows), 1/DPn (or Λ)
  against the term's ratio with the other terms' fitted contributions removed (a partial
  Mayo plot), the weighted fit with its 95 % confidence band, flagged runs marked, and
  the drift model's values when fitted.
- ln P(M) against M per group: every run's number distribution, shifted to 0 at the CLD
  window's centre, with the fitted straight line over its window.
- ln C against 1/T per Arrhenius fit.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["write_plots", "plot_mayo", "plot_lnP", "plot_arrhenius"]


def _safe(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9._-]+", "_", text).strip("_") or "group"


def _pyplot():
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    return plt


def _save(fig: Any, path: Path) -> Path:
    from gpctools._atomic import atomic_path

    path.parent.mkdir(parents=True, exist_ok=True)
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format="png", dpi=110)
    return path


def plot_mayo(result: Any, group: Any, path: str | Path) -> Path:
    """Mayo plot of one group (see module docstring); returns the PNG path."""
    from gpctools.transfer.analysis import ESTIMATORS
    from gpctools.transfer.mayo import term_label

    plt = _pyplot()
    est = {e.run.run_id: e for e in result.estimates}
    names = [e for e in ESTIMATORS if e in group.mayo]
    terms = list(group.terms)
    fig, axes = plt.subplots(len(terms), len(names), figsize=(4.2 * len(names), 3.4 * len(terms)),
                             squeeze=False)
    flagged = set(group.impurity.flagged_ids) if group.impurity else set()
    runs = {r.run_id: r for r in result.series.runs}
    for j, e in enumerate(names):
        fit = group.mayo[e]
        beta = {c.name: c.value for c in fit.constants}
        for i, t in enumerate(terms):
            ax = axes[i][j]
            ids = list(group.run_ids)
            x = np.array([runs[k].ratios.get(t, 0.0) if t != "C_M" else 1.0 for k in ids])
            y = np.array([est[k].y(e) for k in ids])
            others = np.zeros_like(y)
            for t2 in terms:
                if t2 != t:
                    others += beta[t2] * np.array([runs[k].ratios.get(t2, 0.0) if t2 != "C_M" else 1.0
                                                   for k in ids])
            yp = y - others
            mask = np.array([k in flagged for k in ids])
            ax.plot(x[~mask], yp[~mask], "o", color="C0", label="runs")
            if mask.any():
                ax.plot(x[mask], yp[mask], "s", color="C3", label="flagged (impurity?)")
            xs = np.linspace(0, max(float(x.max()), 1e-30) * 1.05, 100)
            cols = {t2: (xs if t2 == t else np.zeros_like(xs)) for t2 in terms}
            line = fit.predict(cols)
            lo, hi = fit.band(cols)
            ax.plot(xs, line, "-", color="C1",
                    label=f"Mayo, initial ratios: {t} = {beta[t]:.4g} ± {fit.constant(t).stderr:.2g}")
            ax.fill_between(xs, lo, hi, color="C1", alpha=0.25,
                            label=f"{100 * fit.confidence:g} % band")
            if e in group.drift:
                d = group.drift[e]
                dx = np.array([runs[k].ratios.get(t, 0.0) for k in d.run_ids])
                ax.plot(dx, d.fitted, "x", color="C2",
                        label=f"drift model: {t} = {d.constant(t).value:.4g}")
            ax.set_xlabel(term_label(t))
            ax.set_ylabel({"Mn": "1/DPn (Mn) [-]", "Mw/2": "1/DPn (Mw/2) [-]",
                           "CLD": "Λ (CLD) [-]"}[e] + (" (partial)" if len(terms) > 1 else ""))
            ax.set_title(f"{group.label}: {e}", fontsize=9)
            ax.legend(fontsize=7)
            ax.ticklabel_format(axis="both", style="sci", scilimits=(-3, 4))
    fig.tight_layout()
    try:
        return _save(fig, Path(path))
    finally:
        plt.close(fig)


def plot_lnP(result: Any, group: Any, path: str | Path) -> Path | None:
    """ln P(M) against M with the CLD windows of one group; None when no run has a CLD."""
    from gpctools.transfer.estimators import ln_number_distribution

    plt = _pyplot()
    est = {e.run.run_id: e for e in result.estimates}
    items = [est[k] for k in group.run_ids if est[k].cld is not None and est[k].M is not None]
    if not items:
        return None
    fig, ax = plt.subplots(figsize=(6.4, 4.4))
    xmax = 0.0
    for n, e in enumerate(items):
        lo, hi = e.cld.window
        M = e.M
        lnp = ln_number_distribution(M, e.dwdlogM)
        centre = 0.5 * (lo + hi)
        ref = np.interp(centre, M[np.argsort(M)], lnp[np.argsort(M)])
        sel = (M > 0) & (M < 3 * hi) & np.isfinite(lnp)
        color = f"C{n % 10}"
        ax.plot(M[sel], lnp[sel] - ref, "-", color=color, lw=0.8, alpha=0.7, label=e.run.run_id)
        xs = np.linspace(lo, hi, 20)
        ax.plot(xs, -(xs - centre) * e.cld.Lambda / e.run.M0, "-", color=color, lw=2.5)
        xmax = max(xmax, 3 * hi)
    ax.set_xlim(0, xmax)
    ax.set_xlabel("M [g/mol]")
    ax.set_ylabel("ln P(M) − ln P(window centre) [-]")
    ax.set_title(f"{group.label}: ln P(M) with fitted CLD windows (thick)", fontsize=9)
    ax.legend(fontsize=7, ncol=2)
    fig.tight_layout()
    try:
        return _save(fig, Path(path))
    finally:
        plt.close(fig)


def plot_arrhenius(label: dict[str, str], fit: Any, path: str | Path) -> Path:
    """ln C against 1/T with the fitted line."""
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(5.2, 4.0))
    x = 1.0 / fit.T
    y = np.log(fit.C)
    err = fit.C_stderr / fit.C
    ax.errorbar(x * 1e3, y, yerr=np.where(np.isfinite(err), err, 0), fmt="o")
    xs = np.linspace(x.min(), x.max(), 50)
    ax.plot(xs * 1e3, np.log(fit.predict(1 / xs)), "-",
            label=f"E_tr − E_p = {fit.delta_E.value:.1f} ± {fit.delta_E.stderr:.1f} kJ/mol")
    ax.set_xlabel("1000/T [1/K]")
    ax.set_ylabel(f"ln {label['term']} [-]")
    ax.set_title(f"{label['agent']} ({label['estimator']}, {label['model']})", fontsize=9)
    ax.legend(fontsize=8)
    fig.tight_layout()
    try:
        return _save(fig, Path(path))
    finally:
        plt.close(fig)


def _unique(name: str, seen: set[str]) -> str:
    """``name``, or ``name_2``, ``name_3``, ... when an earlier plot already has it."""
    out, k = name, 2
    while out in seen:
        out, k = f"{name}_{k}", k + 1
    seen.add(out)
    return out


def write_plots(result: Any, folder: str | Path) -> dict[str, Path]:
    """All plots of a TransferResult into ``folder``; returns name -> path.

    File names come from the group labels and the agents; labels that give the same file
    name (e.g. ``"DDM/St"`` and ``"DDM St"``) get ``_2``, ``_3``, ... so no plot is lost.
    """
    folder = Path(folder)
    out: dict[str, Path] = {}
    groups: set[str] = set()
    for g in result.groups:
        name = _unique(_safe(g.label), groups)
        out[f"plots/mayo_{name}.png"] = plot_mayo(result, g, folder / f"mayo_{name}.png")
        p = plot_lnP(result, g, folder / f"lnP_{name}.png")
        if p is not None:
            out[f"plots/lnP_{name}.png"] = p
    fits: set[str] = set()
    for lbl, fit in result.arrhenius:
        name = _unique(_safe(f"{lbl['agent']}_{lbl['term']}_{lbl['estimator']}"), fits)
        out[f"plots/arrhenius_{name}.png"] = plot_arrhenius(lbl, fit, folder / f"arrhenius_{name}.png")
    return out
