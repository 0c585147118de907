"""Report figures as PNG bytes (matplotlib's Agg canvas, imported inside each function).

No pyplot and no global state: each function builds a :class:`matplotlib.figure.Figure`,
draws it on an Agg canvas and returns the PNG bytes, so plots can be made from threads
and servers without a display. Axis labels carry units in square brackets.
"""

from __future__ import annotations

import io
import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

__all__ = [
    "PALETTE",
    "distribution_overlay",
    "calibration_plot",
    "control_chart_plot",
    "mayo_plot",
]

#: Line colours of the reports (our own plain palette).
PALETTE = ("#1f3a5f", "#c26b1a", "#2e7d6b", "#8a2c4f", "#6b6b1f", "#4f5d8a", "#a34a28", "#3f7f3f")
_FAIL = "#b3261e"
_GRID = "#d9d9d9"
_INK = "#222222"


def _figure(width: float, height: float, rows: int = 1, height_ratios=None):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=100, layout="constrained")
    if rows == 1:
        axes = [fig.add_subplot(1, 1, 1)]
    else:
        gs = fig.add_gridspec(rows, 1, height_ratios=height_ratios)
        axes = [fig.add_subplot(gs[i, 0]) for i in range(rows)]
    for ax in axes:
        ax.grid(True, color=_GRID, linewidth=0.6)
        ax.set_axisbelow(True)
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
        ax.tick_params(colors=_INK, labelsize=8)
    return fig, axes


def _png(fig) -> bytes:
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=100, metadata={"Software": None})
    return buf.getvalue()


def distribution_overlay(
    curves: Sequence[tuple[str, Any, Any]], *, title: str = "Molar-mass distributions"
) -> bytes:
    """Overlay of differential distributions dw/dlogM against M.

    Parameters
    ----------
    curves : sequence of (label, M, dwdlogM)
        M [g/mol] and dw/dlogM [-] per slice (any order).
    title : str

    Returns
    -------
    bytes
        PNG image.
    """
    fig, (ax,) = _figure(7.5, 4.2)
    for k, (label, M, y) in enumerate(curves):
        M = np.asarray(M, dtype=float)
        y = np.asarray(y, dtype=float)
        keep = np.isfinite(M) & np.isfinite(y) & (M > 0)
        order = np.argsort(M[keep])
        ax.plot(M[keep][order], y[keep][order], color=PALETTE[k % len(PALETTE)],
                linewidth=1.3, label=str(label))
    ax.set_xscale("log")
    ax.set_xlabel("M [g/mol]")
    ax.set_ylabel("dw/dlogM [-]")
    ax.set_title(title, fontsize=10, loc="left", color=_INK)
    if curves:
        ax.legend(fontsize=7, frameon=False, ncol=2 if len(curves) > 8 else 1,
                  loc="upper left", bbox_to_anchor=(1.0, 1.0))
    return _png(fig)


def _standards(calibration: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray, list[str]]:
    table = calibration.standards_table() if hasattr(calibration, "standards_table") else \
        calibration.get("standards_table", [])
    V = np.array([r["volume [mL]"] for r in table], dtype=float)
    Mp = np.array([r["Mp [g/mol]"] for r in table], dtype=float)
    res = np.array([r["residual [%]"] for r in table], dtype=float)
    names = [str(r.get("standard", "")) for r in table]
    return V, Mp, res, names


def calibration_plot(calibration: Any, *, residual_limit_pct: float = 5.0) -> bytes:
    """Calibration curve (log Mp against V) with a residual panel.

    Parameters
    ----------
    calibration : gpctools.calibration.Calibration or its ``summary()`` dict
        Standards are plotted on the standard-polymer scale they were fitted on.
    residual_limit_pct : float
        Acceptance band drawn in the residual panel [%] (±5 %, common practice).

    Returns
    -------
    bytes
        PNG image.
    """
    V, Mp, res, names = _standards(calibration)
    fig, (ax, axr) = _figure(7.0, 5.4, rows=2, height_ratios=(3, 1.4))
    ax.semilogy(V, Mp, "o", color=PALETTE[0], markersize=5, label="narrow standards")
    if hasattr(calibration, "log_M") and V.size:
        grid = np.linspace(float(calibration.v_min), float(calibration.v_max), 200)
        logm = (calibration.log_M(grid) - calibration.log_offset) / calibration.log_factor
        ax.semilogy(grid, 10.0 ** logm, "-", color=PALETTE[1], linewidth=1.3,
                    label=f"fit, order {calibration.order}")
    elif V.size:
        table = calibration.get("standards_table", [])
        fitted = np.array([r.get("fitted M [g/mol]", math.nan) for r in table], dtype=float)
        order = np.argsort(V)
        ax.semilogy(V[order], fitted[order], "-", color=PALETTE[1], linewidth=1.3, label="fit")
    ax.set_ylabel("Mp [g/mol]")
    ax.set_title("Calibration curve", fontsize=10, loc="left", color=_INK)
    ax.legend(fontsize=8, frameon=False)
    ax.tick_params(labelbottom=False)
    ok = np.abs(res) <= residual_limit_pct
    axr.axhspan(-residual_limit_pct, residual_limit_pct, color="#eef3ee", zorder=0)
    axr.axhline(0.0, color=_INK, linewidth=0.8)
    axr.plot(V[ok], res[ok], "o", color=PALETTE[2], markersize=4)
    axr.plot(V[~ok], res[~ok], "X", color=_FAIL, markersize=6)
    for v, r, n in zip(V[~ok], res[~ok], np.asarray(names, dtype=object)[~ok], strict=False):
        axr.annotate(n, (v, r), fontsize=7, color=_FAIL, xytext=(3, 3), textcoords="offset points")
    lim = max(residual_limit_pct * 1.6, float(np.nanmax(np.abs(res))) * 1.2 if res.size else 1.0)
    axr.set_ylim(-lim, lim)
    axr.set_xlabel("elution volume [mL]")
    axr.set_ylabel("residual [%]")
    axr.sharex(ax)
    return _png(fig)


def control_chart_plot(chart: Any) -> bytes:
    """Individuals control chart with centre line, ±1/2/3 sigma and flagged points.

    Parameters
    ----------
    chart : gpctools.qc.ControlChart

    Returns
    -------
    bytes
        PNG image.
    """
    x = np.arange(len(chart.labels))
    y = np.asarray(chart.values, dtype=float)
    fig, (ax,) = _figure(7.5, 3.6)
    c, s = chart.centre, chart.sigma
    ax.axhline(c, color=_INK, linewidth=1.0)
    if s > 0:
        for k, style, alpha in ((3, "--", 1.0), (2, ":", 0.7), (1, ":", 0.45)):
            for sign in (1, -1):
                ax.axhline(c + sign * k * s, color=PALETTE[1] if k == 3 else "#777777",
                           linestyle=style, linewidth=1.0, alpha=alpha)
        ax.text(1.0, c + 3 * s, " UCL", transform=ax.get_yaxis_transform(), fontsize=7,
                va="center", color=PALETTE[1])
        ax.text(1.0, c - 3 * s, " LCL", transform=ax.get_yaxis_transform(), fontsize=7,
                va="center", color=PALETTE[1])
    ax.text(1.0, c, " CL", transform=ax.get_yaxis_transform(), fontsize=7, va="center")
    ax.plot(x, y, "-", color=PALETTE[0], linewidth=1.0)
    limits = np.asarray(chart.sets_limits, dtype=bool)
    ax.plot(x[limits], y[limits], "o", color=PALETTE[0], markersize=5, label="sets the limits")
    if (~limits).any():
        ax.plot(x[~limits], y[~limits], "D", markerfacecolor="white", markeredgecolor=PALETTE[0],
                markersize=6, label="tested against the limits")
    flagged = chart.flagged
    if flagged.any():
        ax.plot(x[flagged], y[flagged], "o", markersize=10, markerfacecolor="none",
                markeredgecolor=_FAIL, markeredgewidth=1.6, label="breaks a run rule")
        for i in np.flatnonzero(flagged):
            ax.annotate(", ".join(chart.rules_at(int(i))), (x[i], y[i]), fontsize=7, color=_FAIL,
                        xytext=(4, 6), textcoords="offset points")
    ax.set_xticks(x)
    ax.set_xticklabels(chart.labels, rotation=45 if len(x) > 6 else 0, ha="right" if len(x) > 6 else "center",
                       fontsize=7)
    ax.set_ylabel(chart.quantity)
    ax.set_title(f"{chart.group}: {chart.quantity}", fontsize=10, loc="left", color=_INK)
    ax.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(1.02, 1.0))
    return _png(fig)


def mayo_plot(fit: Any, *, title: str | None = None) -> bytes:
    """Mayo plot: 1/DPn against the first design term ([A]/[M]) with the fitted line.

    Parameters
    ----------
    fit : object
        A Mayo fit with ``design`` (n × terms), ``y`` (1/DPn [-]), ``terms``, ``constants``
        and ``predict(columns)`` (as :class:`gpctools.transfer.mayo.MayoFit`), or a mapping
        with ``"x"``, ``"y"`` and optionally ``"slope"``, ``"intercept"``, ``"label"``.
    title : str, optional

    Returns
    -------
    bytes
        PNG image.

    References
    ----------
    Mayo equation 1/DPn = 1/DPn0 + C_A·[A]/[M] (Mayo, J. Am. Chem. Soc. 1943; SCIENCE.md §3).
    """
    fig, (ax,) = _figure(6.0, 4.0)
    if isinstance(fit, Mapping):
        x = np.asarray(fit["x"], dtype=float)
        y = np.asarray(fit["y"], dtype=float)
        label = str(fit.get("label", "runs"))
        xs = np.linspace(0.0, float(np.nanmax(x)) * 1.05 if x.size else 1.0, 50)
        if "slope" in fit and "intercept" in fit:
            ax.plot(xs, fit["intercept"] + fit["slope"] * xs, "-", color=PALETTE[1], linewidth=1.2,
                    label="fit")
        xlabel = str(fit.get("xlabel", "[A]/[M] [-]"))
    else:
        design = np.atleast_2d(np.asarray(fit.design, dtype=float))
        x = design[:, 0] if design.size else np.array([])
        y = np.asarray(fit.y, dtype=float)
        label = f"runs ({getattr(fit, 'estimator', '')})".replace(" ()", "")
        term = fit.terms[0] if fit.terms else "term"
        xs = np.linspace(0.0, float(np.nanmax(x)) * 1.05 if x.size else 1.0, 50)
        cols = {t: (xs if j == 0 else np.full(xs.size, float(np.mean(design[:, j]))))
                for j, t in enumerate(fit.terms)}
        line = fit.predict(cols)
        c0 = fit.constants[0]
        ax.plot(xs, line, "-", color=PALETTE[1], linewidth=1.2,
                label=f"fit: {c0.name} = {c0.value:.4g} ± {c0.stderr:.2g}")
        try:
            from gpctools.transfer.mayo import term_label

            xlabel = term_label(term)
        except ImportError:  # pragma: no cover - the transfer package ships with gpctools
            xlabel = f"{term} column [-]"
    ax.plot(x, y, "o", color=PALETTE[0], markersize=5, label=label)
    ax.set_xlabel(xlabel)
    ax.set_ylabel("1/DPn [-]")
    ax.set_xlim(left=0.0)
    ax.ticklabel_format(axis="both", style="sci", scilimits=(-3, 3))
    ax.set_title(title or "Mayo plot", fontsize=10, loc="left", color=_INK, pad=16)
    ax.legend(fontsize=8, frameon=False)
    return _png(fig)
