"""Every figure of gpctools, in one style (matplotlib, imported inside each function).

No pyplot and no global state: figures are :class:`matplotlib.figure.Figure` objects
rendered on their own Agg canvas by :func:`png_bytes`, so plots can be made from threads,
worker processes and servers without a display, and a notebook's backend is never
touched. PNG files carry no metadata, so the bytes are deterministic and re-runs compare
equal. Axis labels carry units in square brackets.

Each ``plot_*`` function draws on the ``ax=`` it is given (any Axes of a user's figure)
or, without one, on a new styled Figure of its usual size, and returns the Axes; the
report writers turn ``ax.figure`` into PNG bytes with :func:`png_bytes`.

QC figures: :func:`plot_distributions`, :func:`plot_calibration` with
:func:`plot_calibration_residuals` (both in :func:`calibration_figure`),
:func:`plot_control_chart`, :func:`plot_mayo`; review of one injection:
:func:`plot_trace_review` (raw trace, fitted baseline, baseline windows, limits, excluded
regions, flow marker) above :func:`plot_distribution_review` (dw/dlogM with Mn, Mw, Mp
and a reference distribution), both in :func:`review_figure`; :func:`plot_standard_peaks`
(a calibration-standard injection with its located peaks). Run-series figures: :func:`plot_mayo_panel`
(all panels of a group in :func:`mayo_group_figure`), :func:`plot_lnP`,
:func:`plot_arrhenius`.
"""

from __future__ import annotations

import io
import math
from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from gpctools.formatting import interval, significant

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

__all__ = [
    "PALETTE",
    "OVERLAY_COLOURS",
    "overlay_style",
    "DPI",
    "new_figure",
    "png_bytes",
    "plot_distributions",
    "plot_calibration",
    "plot_calibration_residuals",
    "calibration_figure",
    "plot_control_chart",
    "plot_mayo",
    "plot_trace_review",
    "plot_distribution_review",
    "review_figure",
    "plot_standard_peaks",
    "plot_mayo_panel",
    "plot_mayo_residuals",
    "mayo_group_figure",
    "plot_lnP",
    "plot_arrhenius",
]

#: Line colours of every figure (our own plain palette).
PALETTE = ("#1f3a5f", "#c26b1a", "#2e7d6b", "#8a2c4f", "#6b6b1f", "#4f5d8a", "#a34a28", "#3f7f3f")
#: Colours of overlays (many curves on one Axes): the Okabe-Ito palette, distinguishable
#: with the common colour-vision deficiencies (Okabe and Ito 2002, from memory), with the
#: dash pattern changing every eight curves (the same as the review page's SVG overlays).
OVERLAY_COLOURS = ("#0072B2", "#E69F00", "#009E73", "#D55E00", "#CC79A7", "#56B4E9", "#000000", "#F0E442")
_OVERLAY_DASHES = ("-", "--", ":", "-.")


def overlay_style(k: int) -> tuple[str, str]:
    """(colour, matplotlib line style) of the k-th overlay curve: 8 colours x 4 styles."""
    return OVERLAY_COLOURS[k % 8], _OVERLAY_DASHES[(k // 8) % 4]
#: Resolution of the PNG files [dots per inch].
DPI = 100
_FAIL = "#b3261e"
_GRID = "#d9d9d9"
_INK = "#222222"
_BAND = 0.22  # opacity of confidence bands


# ----------------------------------------------------------------------------- style


def _style(ax: Axes) -> Axes:
    ax.grid(True, color=_GRID, linewidth=0.6)
    ax.set_axisbelow(True)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.tick_params(colors=_INK, labelsize=8)
    return ax


def new_figure(
    width: float,
    height: float,
    *,
    rows: int = 1,
    cols: int = 1,
    height_ratios: Sequence[float] | None = None,
) -> tuple[Figure, list[Axes]]:
    """A Figure in the report style with a grid of styled Axes.

    Parameters
    ----------
    width, height : float
        Figure size [inch]; the PNG is ``DPI`` times that in pixels.
    rows, cols : int
        Grid of Axes.
    height_ratios : sequence of float, optional
        Relative heights of the rows.

    Returns
    -------
    (matplotlib.figure.Figure, list of matplotlib.axes.Axes)
        The Axes row by row.
    """
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=DPI, layout="constrained")
    if rows == 1 and cols == 1:
        axes = [fig.add_subplot(1, 1, 1)]
    else:
        gs = fig.add_gridspec(rows, cols, height_ratios=height_ratios)
        axes = [fig.add_subplot(gs[i, j]) for i in range(rows) for j in range(cols)]
    return fig, [_style(ax) for ax in axes]


def _axes(ax: Axes | None, width: float, height: float) -> Axes:
    """``ax`` itself, or the single Axes of a new styled figure of the given size [inch]."""
    if ax is not None:
        return ax
    return new_figure(width, height)[1][0]


def _title(ax: Axes, text: str, **kw: Any) -> None:
    ax.set_title(text, fontsize=10, loc="left", color=_INK, **kw)


def png_bytes(fig: Any) -> bytes:
    """Render a Figure to PNG bytes on its own Agg canvas (no metadata: deterministic).

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        E.g. ``ax.figure`` of an Axes returned by a ``plot_*`` function.

    Returns
    -------
    bytes
        PNG image at :data:`DPI`.
    """
    import matplotlib.image
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    # What savefig does for a PNG at the figure's own DPI (draw, then write the RGBA
    # buffer), less its extra pass: with a layout engine, savefig first draws the whole
    # figure with drawing disabled to place the Axes and then draws it again. A plain
    # draw runs the layout engine itself, once, so the bytes are the same for about
    # 20 % less time (issue 14).
    canvas = FigureCanvasAgg(fig)
    dpi = fig.dpi
    fig.dpi = DPI
    try:
        canvas.draw()
        buf = io.BytesIO()
        # zlib level 1: the same pixels, about 4 % larger files, encoded in about half the
        # time of the default level 6 (measured on the demo's 46 figures, issue 14)
        matplotlib.image.imsave(buf, canvas.buffer_rgba(), format="png", origin="upper", dpi=DPI,
                                metadata={"Software": None},  # type: ignore[dict-item]  # None drops the key
                                pil_kwargs={"compress_level": 1})
    finally:
        fig.dpi = dpi
    return buf.getvalue()


# ----------------------------------------------------------------------------- QC figures


def plot_distributions(
    curves: Sequence[tuple[str, Any, Any]],
    *,
    title: str = "Molar-mass distributions",
    ax: Axes | None = None,
) -> Axes:
    """Overlay of differential distributions dw/dlogM against M.

    Parameters
    ----------
    curves : sequence of (label, M, dwdlogM)
        M [g/mol] and dw/dlogM [-] per slice (any order).
    title : str
    ax : matplotlib.axes.Axes, optional
        Draw here; default a new 7.5 × 4.2 inch figure.

    Returns
    -------
    matplotlib.axes.Axes
    """
    ax = _axes(ax, 7.5, 4.2)
    for k, (label, M, y) in enumerate(curves):
        M = np.asarray(M, dtype=float)
        y = np.asarray(y, dtype=float)
        keep = np.isfinite(M) & np.isfinite(y) & (M > 0)
        order = np.argsort(M[keep])
        colour, dash = overlay_style(k)
        ax.plot(M[keep][order], y[keep][order], color=colour, linestyle=dash, linewidth=1.3, label=str(label))
    ax.set_xscale("log")
    ax.set_xlabel("M [g/mol]")
    ax.set_ylabel("dw/dlogM [-]")
    _title(ax, title)
    if curves:
        ax.legend(fontsize=7, frameon=False, ncol=2 if len(curves) > 8 else 1,
                  loc="upper left", bbox_to_anchor=(1.0, 1.0))
    return ax


def _standards(calibration: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray, list[str]]:
    table = calibration.standards_table() if hasattr(calibration, "standards_table") else \
        calibration.get("standards_table", [])
    V = np.array([r["volume [mL]"] for r in table], dtype=float)
    Mp = np.array([r["Mp [g/mol]"] for r in table], dtype=float)
    res = np.array([r["residual [%]"] for r in table], dtype=float)
    names = [str(r.get("standard", "")) for r in table]
    return V, Mp, res, names


def plot_calibration(calibration: Any, *, ax: Axes | None = None) -> Axes:
    """Calibration curve: Mp of the standards against elution volume, with the fit.

    Parameters
    ----------
    calibration : gpctools.calibration.Calibration or its ``summary()`` dict
        Standards are plotted on the standard-polymer scale they were fitted on.
    ax : matplotlib.axes.Axes, optional
        Draw here; default a new 7.0 × 3.8 inch figure.

    Returns
    -------
    matplotlib.axes.Axes
    """
    ax = _axes(ax, 7.0, 3.8)
    V, Mp, _res, _names = _standards(calibration)
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
    _title(ax, "Calibration curve")
    ax.legend(fontsize=8, frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)  # outside the data
    return ax


def plot_calibration_residuals(
    calibration: Any, *, residual_limit_pct: float = 5.0, ax: Axes | None = None
) -> Axes:
    """Residual of each standard, 100·(M_fit/Mp − 1) [%], with the acceptance band.

    Parameters
    ----------
    calibration : gpctools.calibration.Calibration or its ``summary()`` dict
    residual_limit_pct : float
        Acceptance band [%] (±5 %, common practice); standards outside it are marked
        and named.
    ax : matplotlib.axes.Axes, optional
        Draw here; default a new 7.0 × 1.8 inch figure.

    Returns
    -------
    matplotlib.axes.Axes
    """
    ax = _axes(ax, 7.0, 1.8)
    V, _Mp, res, names = _standards(calibration)
    ok = np.abs(res) <= residual_limit_pct
    ax.axhspan(-residual_limit_pct, residual_limit_pct, color="#eef3ee", zorder=0)
    ax.axhline(0.0, color=_INK, linewidth=0.8)
    ax.plot(V[ok], res[ok], "o", color=PALETTE[2], markersize=4)
    ax.plot(V[~ok], res[~ok], "X", color=_FAIL, markersize=6)
    for v, r, n in zip(V[~ok], res[~ok], np.asarray(names, dtype=object)[~ok], strict=False):
        ax.annotate(n, (v, r), fontsize=7, color=_FAIL, xytext=(3, 3), textcoords="offset points")
    lim = max(residual_limit_pct * 1.6, float(np.nanmax(np.abs(res))) * 1.2 if res.size else 1.0)
    ax.set_ylim(-lim, lim)
    ax.set_xlabel("elution volume [mL]")
    ax.set_ylabel("residual [%]")
    return ax


def calibration_figure(calibration: Any, *, residual_limit_pct: float = 5.0) -> Figure:
    """Calibration curve above its residual panel (shared volume axis).

    Parameters
    ----------
    calibration : gpctools.calibration.Calibration or its ``summary()`` dict
    residual_limit_pct : float
        Acceptance band of the residual panel [%].

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig, (ax, axr) = new_figure(7.0, 5.4, rows=2, height_ratios=(3, 1.4))
    plot_calibration(calibration, ax=ax)
    ax.tick_params(labelbottom=False)
    plot_calibration_residuals(calibration, residual_limit_pct=residual_limit_pct, ax=axr)
    axr.sharex(ax)
    return fig


def plot_control_chart(chart: Any, *, ax: Axes | None = None) -> Axes:
    """Individuals control chart with centre line, ±1/2/3 sigma and flagged points.

    Parameters
    ----------
    chart : gpctools.qc.ControlChart
        Values in the unit of ``chart.quantity``.
    ax : matplotlib.axes.Axes, optional
        Draw here; default a new 7.5 × 3.6 inch figure.

    Returns
    -------
    matplotlib.axes.Axes
    """
    ax = _axes(ax, 7.5, 3.6)
    x = np.arange(len(chart.labels))
    y = np.asarray(chart.values, dtype=float)
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
    _title(ax, f"{chart.group}: {chart.quantity}")
    ax.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(1.02, 1.0))
    return ax


# ----------------------------------------------------------------------------- review of one injection


def plot_trace_review(
    volume: Any,
    signal: Any,
    *,
    baseline: Any = None,
    baseline_windows: Sequence[tuple[float, float]] = (),
    limits: tuple[float, float] | None = None,
    exclusions: Sequence[tuple[float, float]] = (),
    marker: float | None = None,
    title: str = "",
    ax: Axes | None = None,
) -> Axes:
    """One injection's raw trace with what processing decided about it.

    Parameters
    ----------
    volume, signal : array_like
        The trace [mL], raw detector response [signal units] (any order).
    baseline : array_like, optional
        Fitted baseline at each slice [signal units] (drawn dashed).
    baseline_windows : sequence of (start, end)
        Baseline windows [mL] (shaded green).
    limits : (float, float), optional
        Integration limits [mL] (vertical lines, the integrated area shaded).
    exclusions : sequence of (start, end)
        Excluded regions [mL] (hatched grey).
    marker : float, optional
        Flow-marker position [mL] (dotted line).
    title : str
    ax : matplotlib.axes.Axes, optional
        Draw here; default a new 7.5 × 3.2 inch figure.

    Returns
    -------
    matplotlib.axes.Axes
    """
    ax = _axes(ax, 7.5, 3.2)
    V = np.asarray(volume, dtype=float)
    h = np.asarray(signal, dtype=float)
    order = np.argsort(V)
    V, h = V[order], h[order]
    for a, b in baseline_windows:
        ax.axvspan(a, b, color="#dcefe3", zorder=0, label="baseline window" if a == baseline_windows[0][0] else None)
    for k, (a, b) in enumerate(exclusions):
        ax.axvspan(a, b, facecolor="none", edgecolor="#9a9a9a", hatch="///", linewidth=0, zorder=0,
                   label="excluded" if k == 0 else None)
    ax.plot(V, h, "-", color=PALETTE[0], linewidth=0.9, label="raw signal")
    if baseline is not None:
        base = np.asarray(baseline, dtype=float)[order]
        ax.plot(V, base, "--", color=PALETTE[1], linewidth=1.0, label="fitted baseline")
        if limits is not None:
            inside = (V >= limits[0]) & (V <= limits[1])
            ax.fill_between(V[inside], base[inside], h[inside], color=PALETTE[0], alpha=0.12, linewidth=0)
    if limits is not None:
        for x in limits:
            ax.axvline(x, color=PALETTE[3], linewidth=1.0)
        ax.text(limits[0], 1.0, " limits", transform=ax.get_xaxis_transform(), fontsize=7, color=PALETTE[3],
                va="top")
    if marker is not None and math.isfinite(marker):
        ax.axvline(marker, color=PALETTE[2], linestyle=":", linewidth=1.2, label="flow marker")
    ax.set_xlabel("elution volume (flow-corrected) [mL]")
    ax.set_ylabel("detector signal [signal units]")
    _title(ax, title or "Chromatogram")
    ax.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)  # outside the data
    return ax


def plot_distribution_review(
    M: Any,
    dwdlogM: Any,
    *,
    marks: Mapping[str, float] | None = None,
    reference: tuple[Any, Any] | None = None,
    reference_label: str = "reference",
    title: str = "",
    ax: Axes | None = None,
) -> Axes:
    """dw/dlogM of one injection with its averages marked and a reference distribution.

    Parameters
    ----------
    M, dwdlogM : array_like
        Molar mass [g/mol] and dw/dlogM [-] per slice (any order).
    marks : mapping, optional
        Name -> molar mass [g/mol] marked with a vertical line (``{"Mn": ..., "Mw": ...,
        "Mp": ...}``).
    reference : (M, dwdlogM), optional
        A reference distribution of the product [g/mol], [-] (drawn grey).
    reference_label : str
    title : str
    ax : matplotlib.axes.Axes, optional
        Draw here; default a new 7.5 × 3.0 inch figure.

    Returns
    -------
    matplotlib.axes.Axes
    """
    ax = _axes(ax, 7.5, 3.0)
    if reference is not None:
        rM = np.asarray(reference[0], dtype=float)
        ry = np.asarray(reference[1], dtype=float)
        keep = np.isfinite(rM) & np.isfinite(ry) & (rM > 0)
        o = np.argsort(rM[keep])
        ax.plot(rM[keep][o], ry[keep][o], "-", color="#8c8c8c", linewidth=2.0, alpha=0.7, label=reference_label)
    m = np.asarray(M, dtype=float)
    y = np.asarray(dwdlogM, dtype=float)
    keep = np.isfinite(m) & np.isfinite(y) & (m > 0)
    o = np.argsort(m[keep])
    ax.plot(m[keep][o], y[keep][o], "-", color=PALETTE[0], linewidth=1.3, label="this injection")
    styles = ("--", "-.", ":", (0, (5, 1)))
    for k, (name, value) in enumerate((marks or {}).items()):
        if value is not None and math.isfinite(value) and value > 0:
            ax.axvline(value, color=PALETTE[(k + 1) % len(PALETTE)], linestyle=styles[k % len(styles)],
                       linewidth=1.1, label=f"{name} {value:,.0f} g/mol".replace(",", " "))
    ax.set_xscale("log")
    ax.set_xlabel("M [g/mol]")
    ax.set_ylabel("dw/dlogM [-]")
    _title(ax, title or "Molar-mass distribution")
    ax.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)  # outside the data
    return ax


def review_figure(trace: Mapping[str, Any], distribution: Mapping[str, Any] | None = None) -> Figure:
    """One injection's review: the trace above its distribution.

    Parameters
    ----------
    trace : mapping
        Keyword arguments of :func:`plot_trace_review` (``volume`` and ``signal`` required).
    distribution : mapping, optional
        Keyword arguments of :func:`plot_distribution_review` (``M`` and ``dwdlogM``);
        without it the figure holds the trace only.

    Returns
    -------
    matplotlib.figure.Figure
        7.5 inch wide; 3.2 inch per panel.
    """
    if distribution is None:
        fig, (ax,) = new_figure(7.5, 3.2)
        plot_trace_review(ax=ax, **trace)
        return fig
    fig, (ax1, ax2) = new_figure(7.5, 6.2, rows=2, height_ratios=(1.0, 1.0))
    plot_trace_review(ax=ax1, **trace)
    plot_distribution_review(ax=ax2, **distribution)
    return fig


def plot_standard_peaks(
    volume: Any,
    signal: Any,
    peaks: Sequence[tuple[str, float]],
    *,
    title: str = "",
    ax: Axes | None = None,
) -> Axes:
    """A calibration-standard injection with the located peak of each standard.

    Parameters
    ----------
    volume, signal : array_like
        The trace on the flow-corrected axis [mL], raw signal [signal units].
    peaks : sequence of (name, volume)
        Each standard and its located peak volume [mL].
    title : str
    ax : matplotlib.axes.Axes, optional
        Draw here; default a new 7.5 × 2.8 inch figure.

    Returns
    -------
    matplotlib.axes.Axes
    """
    ax = _axes(ax, 7.5, 2.8)
    V = np.asarray(volume, dtype=float)
    h = np.asarray(signal, dtype=float)
    o = np.argsort(V)
    ax.plot(V[o], h[o], "-", color=PALETTE[0], linewidth=0.9)
    for name, v in peaks:
        ax.axvline(v, color=PALETTE[1], linewidth=0.9, linestyle="--")
        ax.text(v, 1.0, f" {name}\n {v:.3f} mL", transform=ax.get_xaxis_transform(), fontsize=7,
                color=PALETTE[1], va="top")
    ax.set_xlabel("elution volume (flow-corrected) [mL]")
    ax.set_ylabel("detector signal [signal units]")
    _title(ax, title or "Calibration standards", pad=24)
    return ax


# ----------------------------------------------------------------------------- Mayo plots


def _mayo_line(ax: Axes, xs: np.ndarray, line: np.ndarray, label: str,
               band: tuple[np.ndarray, np.ndarray] | None = None, band_label: str = "") -> None:
    """The fitted Mayo line (and its confidence band) in the one Mayo style."""
    ax.plot(xs, line, "-", color=PALETTE[1], linewidth=1.2, label=label)
    if band is not None:
        ax.fill_between(xs, band[0], band[1], color=PALETTE[1], alpha=_BAND, linewidth=0,
                        label=band_label)


def _mayo_finish(ax: Axes, xlabel: str, ylabel: str, title: str, legend_size: float) -> None:
    """Labels, title, and the legend below the axes (it never covers a run)."""
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.ticklabel_format(axis="both", style="sci", scilimits=(-3, 3))
    _title(ax, title, pad=16)
    ax.legend(fontsize=legend_size, frameon=False, loc="upper left", bbox_to_anchor=(0.0, -0.16),
              ncol=1)


def plot_mayo(fit: Any, *, title: str | None = None, ax: Axes | None = None) -> Axes:
    """Mayo plot: 1/DPn against the first design term ([A]/[M]) with the fitted line.

    Parameters
    ----------
    fit : object
        A Mayo fit with ``design`` (n × terms), ``y`` (1/DPn [-]), ``terms``, ``constants``
        and ``predict(columns)`` (as :class:`gpctools.transfer.mayo.MayoFit`), or a mapping
        with ``"x"``, ``"y"`` and optionally ``"slope"``, ``"intercept"``, ``"label"``,
        ``"xlabel"``.
    title : str, optional
    ax : matplotlib.axes.Axes, optional
        Draw here; default a new 6.0 × 4.0 inch figure.

    Returns
    -------
    matplotlib.axes.Axes

    References
    ----------
    Mayo equation 1/DPn = 1/DPn0 + C_A·[A]/[M] (F. R. Mayo, J. Am. Chem. Soc. 65, 2324, 1943).
    """
    ax = _axes(ax, 6.0, 4.0)
    if isinstance(fit, Mapping):
        x = np.asarray(fit["x"], dtype=float)
        y = np.asarray(fit["y"], dtype=float)
        label = str(fit.get("label", "runs"))
        xs = np.linspace(0.0, float(np.nanmax(x)) * 1.05 if x.size else 1.0, 50)
        if "slope" in fit and "intercept" in fit:
            _mayo_line(ax, xs, fit["intercept"] + fit["slope"] * xs, "fit")
        xlabel = str(fit.get("xlabel", "[A]/[M] [-]"))
    else:
        from gpctools.transfer.mayo import term_label

        design = np.atleast_2d(np.asarray(fit.design, dtype=float))
        x = design[:, 0] if design.size else np.array([])
        y = np.asarray(fit.y, dtype=float)
        label = f"runs ({getattr(fit, 'estimator', '')})".replace(" ()", "")
        term = fit.terms[0] if fit.terms else "term"
        xs = np.linspace(0.0, float(np.nanmax(x)) * 1.05 if x.size else 1.0, 50)
        cols = {t: (xs if j == 0 else np.full(xs.size, float(np.mean(design[:, j]))))
                for j, t in enumerate(fit.terms)}
        c0 = fit.constants[0]
        _mayo_line(ax, xs, fit.predict(cols), f"fit: {c0.name} = {significant(c0.value, 4)} "
                   f"({interval(c0.ci_low, c0.ci_high, level=c0.confidence)})")
        xlabel = term_label(term)
    ax.plot(x, y, "o", color=PALETTE[0], markersize=5, label=label)
    _mayo_finish(ax, xlabel, "1/DPn [-]", title or "Mayo plot", 8)
    return ax


_Y_LABEL = {"Mn": "1/DPn (Mn) [-]", "Mw/2": "1/DPn (Mw/2) [-]", "CLD": "Λ (CLD) [-]"}


def _ratio(run: Any, term: str) -> float:
    """The design column of ``term`` for one run: its ratio [-] (1 for C_M)."""
    return 1.0 if term == "C_M" else float(run.ratios.get(term, 0.0))


def _recommended(group: Any, estimator: str) -> tuple[Any, str]:
    """The recommended fit of an estimator (drift-corrected when fitted) and its label."""
    if estimator in group.drift:
        return group.drift[estimator], "drift-corrected"
    return group.mayo[estimator], "initial ratios"


def plot_mayo_panel(result: Any, group: Any, estimator: str, term: str, *,
                    ax: Axes | None = None) -> Axes:
    """Partial Mayo plot of one group, estimator and term, led by the recommended fit.

    The recommended line (drift-corrected constants when conversions were given; the
    instantaneous Mayo line 1/DPn0 + C·[X]/[M]) and its confidence band are drawn first;
    each run is shown on that line's scale (its observation moved to x = 0 and, for Mw/2
    and CLD, onto the 1/DPn scale with the fitted model), minus the fitted contributions
    of the group's other terms. The naive fit on initial ratios follows as a thin dashed
    line with the raw observations as small open circles. Flagged runs are red squares
    labelled with their run id. The legend sits below the axes, so it never covers a run.

    Parameters
    ----------
    result : gpctools.transfer.TransferResult
    group : gpctools.transfer.GroupResult
        One of ``result.groups``.
    estimator : str
        ``"Mn"``, ``"Mw/2"`` or ``"CLD"`` (a key of ``group.mayo``).
    term : str
        One of ``group.terms`` (``C_A``, ``C_S``, ...).
    ax : matplotlib.axes.Axes, optional
        Draw here; default a new 4.6 × 4.2 inch figure.

    Returns
    -------
    matplotlib.axes.Axes

    References
    ----------
    Mayo equation (F. R. Mayo, J. Am. Chem. Soc. 65, 2324, 1943); the band is the
    pointwise confidence band of :meth:`gpctools.transfer.MayoFit.band` with the combined
    (statistical and calibration) covariance.
    """
    from gpctools.transfer.mayo import term_label

    ax = _axes(ax, 4.6, 4.2)
    est = {e.run.run_id: e for e in result.estimates}
    runs = {r.run_id: r for r in result.series.runs}
    terms = list(group.terms)
    fit, how = _recommended(group, estimator)
    naive = group.mayo[estimator]
    beta = {c.name: c.value for c in fit.constants}
    ids = list(group.run_ids)
    x = np.array([_ratio(runs[k], term) for k in ids])
    pts = group.plot_points.get(estimator, {})
    y_rec = np.array([pts.get(k, est[k].y(estimator)) for k in ids])
    others = np.zeros_like(y_rec)
    for t2 in terms:
        if t2 != term:
            others += beta[t2] * np.array([_ratio(runs[k], t2) for k in ids])
    flagged = set(group.impurity.flagged_ids) if group.impurity else set()
    mask = np.array([k in flagged for k in ids], dtype=bool)
    xs = np.linspace(0, max(float(x.max()), 1e-30) * 1.05, 100)
    cols = {t2: (xs if t2 == term else np.zeros_like(xs)) for t2 in terms}
    c = fit.constant(term)
    _mayo_line(ax, xs, fit.predict(cols),
               f"recommended ({how}): {term} = {significant(c.value, 4)} "
               f"({interval(c.ci_low, c.ci_high, level=c.confidence)})",
               band=fit.band(cols), band_label=f"{100 * fit.confidence:g} % band")
    ax.plot(x[~mask], (y_rec - others)[~mask], "o", color=PALETTE[0], markersize=5,
            label="runs (on the recommended scale)")
    if fit is not naive:
        nb = {cc.name: cc.value for cc in naive.constants}
        n_others = sum((nb[t2] * np.array([_ratio(runs[k], t2) for k in ids])
                        for t2 in terms if t2 != term), np.zeros_like(y_rec))
        ax.plot(xs, naive.predict(cols), "--", color="#8c8c8c", linewidth=0.9,
                label=f"naive (initial ratios): {term} = {nb[term]:.4g}")
        y_raw = np.array([est[k].y(estimator) for k in ids]) - n_others
        ax.plot(x, y_raw, "o", mfc="none", mec="#8c8c8c", markersize=4, label="runs as measured")
    if mask.any():
        ax.plot(x[mask], (y_rec - others)[mask], "s", color=_FAIL, markersize=6,
                label="flagged (impurity?)")
        for xi, yi, k in zip(x[mask], (y_rec - others)[mask], np.array(ids)[mask], strict=True):
            ax.annotate(k, (xi, yi), xytext=(4, 4), textcoords="offset points", fontsize=7,
                        color=_FAIL)
    ylabel = "1/DPn [-]" + (" (partial)" if len(terms) > 1 else "")
    _mayo_finish(ax, term_label(term), ylabel, f"{group.label}: {estimator}", 7)
    return ax


def plot_mayo_residuals(result: Any, group: Any, estimator: str, *,
                        ax: Axes | None = None) -> Axes:
    """Each run's excess over the line of the other runs, relative, with its uncertainty.

    For the estimator of the impurity test the excess and its standard error are those of
    the test (prediction error from the runs not flagged); for the others, the residual
    about the recommended fit with the fit's relative scatter. Flagged runs are red and
    labelled; the threshold of the test is drawn as a line where it applies.

    Parameters
    ----------
    result : gpctools.transfer.TransferResult
    group : gpctools.transfer.GroupResult
    estimator : str
    ax : matplotlib.axes.Axes, optional
        Draw here; default a new 4.6 × 2.4 inch figure.

    Returns
    -------
    matplotlib.axes.Axes
    """
    ax = _axes(ax, 4.6, 2.4)
    imp = group.impurity
    ids = list(group.run_ids)
    pos = np.arange(len(ids))
    if imp is not None and imp.estimator == estimator:
        fl = [imp.flag(k) for k in ids]
        pts = group.plot_points.get(estimator, {})
        est = {e.run.run_id: e for e in result.estimates}
        ref = np.array([pts.get(k, est[k].y(estimator)) - f.excess for k, f in zip(ids, fl, strict=True)])
        ex = 100 * np.array([f.excess for f in fl]) / ref
        err = 100 * np.array([f.excess_stderr for f in fl]) / ref
        flagged = np.array([f.flagged for f in fl])
        what = "excess over the line of the other runs [%]"
    else:
        fit, _ = _recommended(group, estimator)
        runs = {r.run_id: r for r in result.series.runs}
        pts = group.plot_points.get(estimator, {})
        res = dict(zip(fit.run_ids, fit.residuals, strict=True))
        ex = np.empty(len(ids))
        for j, k in enumerate(ids):
            if k in pts:  # every run, flagged ones too, against the recommended line
                line = float(fit.predict({t: np.array([_ratio(runs[k], t)]) for t in group.terms})[0])
                ex[j] = 100 * (pts[k] / line - 1)
            else:
                ex[j] = 100 * res.get(k, np.nan)
        scat = math.sqrt(fit.redchi) if math.isfinite(fit.redchi) else np.nan
        err = np.full(len(ids), 100 * scat)
        flagged = np.array([k in group.excluded for k in ids])
        what = "residual about the line [%]"
    ax.axhline(0.0, color=_INK, linewidth=0.8)
    ok = ~flagged
    ax.errorbar(pos[ok], ex[ok], yerr=np.where(np.isfinite(err[ok]), err[ok], 0), fmt="o",
                color=PALETTE[0], markersize=4, capsize=2, label="runs ± standard error")
    if flagged.any():
        ax.errorbar(pos[flagged], ex[flagged], yerr=np.nan_to_num(err[flagged]), fmt="s",
                    color=_FAIL, markersize=5, capsize=2, label="flagged")
    ax.set_xticks(pos)
    ax.set_xticklabels(ids, rotation=60, fontsize=6)
    for p_ in pos[flagged]:
        ax.get_xticklabels()[int(p_)].set_color(_FAIL)
    ax.set_ylabel(what, fontsize=7)
    _title(ax, f"{group.label}: {estimator}, each run against the line")
    ax.legend(fontsize=6, frameon=False, loc="upper left", bbox_to_anchor=(0.0, -0.32), ncol=2)
    return ax


def mayo_group_figure(result: Any, group: Any) -> Figure:
    """All Mayo plots of a group: one column per estimator, one row per term, and a row of
    residual panels (each run's excess with its uncertainty) at the bottom.

    Parameters
    ----------
    result : gpctools.transfer.TransferResult
    group : gpctools.transfer.GroupResult

    Returns
    -------
    matplotlib.figure.Figure
        4.6 inch wide per estimator, 4.2 inch high per term plus 2.6 for the residuals.
    """
    from gpctools.transfer.estimators import ESTIMATORS

    names = [e for e in ESTIMATORS if e in group.mayo]
    terms = list(group.terms)
    rows = len(terms) + 1
    fig, axes = new_figure(4.6 * len(names), 4.2 * len(terms) + 2.6, rows=rows, cols=len(names),
                           height_ratios=[4.2] * len(terms) + [2.6])
    for i, t in enumerate(terms):
        for j, e in enumerate(names):
            plot_mayo_panel(result, group, e, t, ax=axes[i * len(names) + j])
    for j, e in enumerate(names):
        plot_mayo_residuals(result, group, e, ax=axes[len(terms) * len(names) + j])
    return fig


def plot_lnP(result: Any, group: Any, *, ax: Axes | None = None) -> Axes | None:
    """ln P(M) against M for every run of a group with its fitted CLD window.

    Each run's number distribution ln P(M) = ln(dw/dlogM) − 2 ln M is shifted to 0 at the
    centre of its CLD window; the thick line over the window has the fitted slope
    −Λ/M0 [mol/g].

    Parameters
    ----------
    result : gpctools.transfer.TransferResult
    group : gpctools.transfer.GroupResult
    ax : matplotlib.axes.Axes, optional
        Draw here; default a new 6.4 × 4.4 inch figure.

    Returns
    -------
    matplotlib.axes.Axes or None
        None (nothing drawn) when no run of the group has a CLD slope.

    References
    ----------
    Chain-length-distribution method: P(M) ∝ exp(−Λ M/M0) for a most-probable
    distribution (Clay and Gilbert, Macromolecules 28, 552, 1995).
    """
    from gpctools.transfer.estimators import ln_number_distribution

    est = {e.run.run_id: e for e in result.estimates}
    items = [est[k] for k in group.run_ids if est[k].cld is not None and est[k].M is not None]
    if not items:
        return None
    ax = _axes(ax, 6.4, 4.4)
    xmax = 0.0
    for n, e in enumerate(items):
        lo, hi = e.cld.window
        M = e.M
        lnp = ln_number_distribution(M, e.dwdlogM)
        centre = 0.5 * (lo + hi)
        ref = np.interp(centre, M[np.argsort(M)], lnp[np.argsort(M)])
        sel = (M > 0) & (M < 3 * hi) & np.isfinite(lnp)
        color = PALETTE[n % len(PALETTE)]
        ax.plot(M[sel], lnp[sel] - ref, "-", color=color, linewidth=0.8, alpha=0.7, label=e.run.run_id)
        xs = np.linspace(lo, hi, 20)
        ax.plot(xs, -(xs - centre) * e.cld.Lambda / e.run.M0, "-", color=color, linewidth=2.5)
        xmax = max(xmax, 3 * hi)
    ax.set_xlim(0, xmax)
    ax.set_xlabel("M [g/mol]")
    ax.set_ylabel("ln P(M) − ln P(window centre) [-]")
    _title(ax, f"{group.label}: ln P(M) with fitted CLD windows (thick)")
    ax.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)  # outside the data
    return ax


def plot_arrhenius(label: Mapping[str, str], fit: Any, *, ax: Axes | None = None) -> Axes:
    """ln C against 1000/T with the fitted line and the standard error of each C.

    Parameters
    ----------
    label : mapping
        ``agent``, ``term``, ``estimator`` and ``model`` of the fit (as in
        ``TransferResult.arrhenius``).
    fit : gpctools.transfer.ArrheniusFit
        T [K], C [-] and its standard errors, E_tr − E_p [kJ/mol].
    ax : matplotlib.axes.Axes, optional
        Draw here; default a new 5.2 × 4.0 inch figure.

    Returns
    -------
    matplotlib.axes.Axes

    References
    ----------
    ln C = ln(A_tr/A_p) − (E_tr − E_p)/(R T) (Arrhenius law applied to k_tr/k_p).
    """
    ax = _axes(ax, 5.2, 4.0)
    x = 1.0 / fit.T
    y = np.log(fit.C)
    err = fit.C_stderr / fit.C
    xs = np.linspace(x.min(), x.max(), 50)
    ax.plot(xs * 1e3, np.log(fit.predict(1 / xs)), "-", color=PALETTE[1], linewidth=1.2,
            label=f"E_tr − E_p = {significant(fit.delta_E.value, 3)} kJ/mol\n"
                  f"({interval(fit.delta_E.ci_low, fit.delta_E.ci_high, unit='kJ/mol', level=fit.delta_E.confidence)})")
    ax.errorbar(x * 1e3, y, yerr=np.where(np.isfinite(err), err, 0), fmt="o", color=PALETTE[0],
                markersize=5, capsize=2, label="ln C ± its standard error")
    ax.set_xlabel("1000/T [1/K]")
    ax.set_ylabel(f"ln {label['term']} [-]")
    _title(ax, f"{label['agent']} ({label['estimator']}, {label['model']})")
    ax.legend(fontsize=8, frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)  # outside the data
    return ax


# ----------------------------------------------------------------------------- diagnosis


def plot_diagnosis_distributions(
    curves: Sequence[Any], *, title: str | None = None, ax: Axes | None = None
) -> Axes:
    """Measured dw/dlogM over the distributions predicted for the recipe and the causes.

    Parameters
    ----------
    curves : sequence of gpctools.kinetics.DistributionCurve
        ``label``, ``kind`` (``measured``, ``expected`` or ``cause``), ``M`` [g/mol] and
        ``dwdlogM`` [-] (as in ``Diagnosis.curves``).
    title : str, optional
    ax : matplotlib.axes.Axes, optional
        Draw here; default a new 6.4 × 4.0 inch figure.

    Returns
    -------
    matplotlib.axes.Axes

    Notes
    -----
    Predicted curves are the instantaneous (low-conversion) distributions of the model;
    real samples are broader (conversion drift, band broadening), so compare positions
    and tails rather than heights.
    """
    ax = _axes(ax, 6.4, 4.0)
    colours = iter(PALETTE[1:])
    for c in curves:
        M = np.asarray(c.M, dtype=float)
        w = np.asarray(c.dwdlogM, dtype=float)
        if c.kind == "measured":
            ax.plot(M, w, "-", color=_INK, linewidth=2.0, label=c.label, zorder=3)
        elif c.kind == "expected":
            ax.plot(M, w, "--", color=PALETTE[0], linewidth=1.4, label=c.label)
        else:
            ax.plot(M, w, "-", color=next(colours, PALETTE[-1]), linewidth=1.1, label=c.label)
    ax.set_xscale("log")
    ax.set_xlabel("M [g/mol]")
    ax.set_ylabel("dw/dlogM [-]")
    _title(ax, title or "measured and predicted distributions (instantaneous model)")
    ax.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)  # outside the data
    return ax


__all__ += ["plot_diagnosis_distributions"]


# ----------------------------------------------------------------------------- notebook helpers


def plot_injection(result: Any, *, ax: Axes | None = None, title: str | None = None) -> Axes:
    """One :class:`gpctools.batch.InjectionResult`'s raw trace with its baseline, windows,
    limits, exclusions and flow marker (:func:`plot_trace_review` on the flow-corrected
    volume axis, where limits and windows apply).

    Parameters
    ----------
    result : gpctools.batch.InjectionResult
    ax : matplotlib.axes.Axes, optional
        Draw here (e.g. one Axes of ``plt.subplots``); default a new figure.
    title : str, optional
        Default: the sample id.

    Returns
    -------
    matplotlib.axes.Axes
    """
    cs = result.corrected
    V = np.asarray(cs.volume, dtype=float)
    base = cs.baseline(V)
    marker = result.marker_observed * result.flow_factor if result.marker_observed is not None else None
    return plot_trace_review(V, np.asarray(cs.signal, dtype=float) + base, baseline=base,
                             baseline_windows=tuple(cs.baseline.windows), limits=tuple(cs.limits),
                             exclusions=tuple(cs.exclusions), marker=marker,
                             title=title if title is not None else f"{result.sample_id}: chromatogram", ax=ax)


def plot_injection_distribution(result: Any, *, ax: Axes | None = None, title: str | None = None) -> Axes:
    """dw/dlogM of one :class:`gpctools.batch.InjectionResult` with Mn, Mw and Mp marked
    (:func:`plot_distribution_review`); returns the Axes.
    """
    d = result.distribution
    return plot_distribution_review(d.M, d.dwdlogM, marks={"Mn": d.Mn, "Mw": d.Mw, "Mp": d.Mp},
                                    title=title if title is not None else f"{result.sample_id}: dw/dlogM", ax=ax)


def plot_batch_distributions(batch: Any, *, product: str | None = None, ax: Axes | None = None,
                             title: str | None = None) -> Axes:
    """Overlay of the dw/dlogM of a :class:`gpctools.batch.BatchResult`'s injections
    (those kept in memory), optionally of one ``product`` (the sheet's ``product``
    column), in the overlay palette (:func:`overlay_style`); legend outside the data.

    Returns
    -------
    matplotlib.axes.Axes
    """
    curves = []
    for entry, res in zip(batch.entries, batch.injections):
        if res is None:
            continue
        if product is not None and str(entry.metadata.get("product")) != str(product):
            continue
        curves.append((f"{entry.sample_id} (row {entry.row})", res.distribution.M, res.distribution.dwdlogM))
    name = title or (f"dw/dlogM, product {product}" if product is not None else "dw/dlogM")
    return plot_distributions(curves, title=name, ax=ax)


__all__ += ["plot_injection", "plot_injection_distribution", "plot_batch_distributions"]
