"""The batch review page: what was integrated, injection by injection (``review.html``).

``gpctools batch`` writes ``review.html`` into its output folder unless ``--no-review``
is given. One self-contained page (inline SVG and styles, no script, nothing loaded
from outside):

* **summary**: batch sheet, counts, the molar-mass scale, what the page shows;
* **calibration**: the standards and the fitted curve, and below it each standard's
  residual 100·(M_fit/Mp − 1) [%] with the ±5 % band (docs/science.md, section 2);
* **overlays**: dw/dlogM of the injections shown, one plot per product (the batch
  sheet's ``product`` column; one plot for all without it), Okabe-Ito colours;
* **injections**: per injection the raw trace with the fitted baseline, the baseline
  windows, the integration limits (the integrated area shaded), excluded regions and
  the flow marker, and below it dw/dlogM with Mn, Mw and Mp marked, beside a small
  table of its numbers and warnings; with ``[detectors]`` a third plot of every detector
  trace, each normalised to its maximum, on the concentration detector's volume axis after
  the inter-detector offsets (the offsets in the legend and a caption), so that the
  alignment can be seen;
* **not shown** and **failed**: injections past the cap (listed with their averages)
  and rows that failed (with their message).

How it stays cheap: the plots of each injection are built in the process that
computed it, through the ``on_result`` hook of :func:`gpctools.batch.run_batch`
(:class:`ReviewSink`), from downsampled curves (:func:`gpctools.report.svg.downsample`,
a few hundred points per curve) drawn as SVG text, not with matplotlib; each writes
one small JSON fragment (``.review-parts/row<n>.json``), and :func:`write_review`
assembles the page at the end and removes the fragments. By default only the first
:data:`DEFAULT_LIMIT` injections of the sheet are drawn (``--review-all`` draws all);
``python bench/bench_review.py`` measures the cost per injection.
"""

from __future__ import annotations

import json
import math
import os
import shutil
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from gpctools import columns as C
from gpctools import formatting as F
from gpctools.report.files import write_text
from gpctools.report.svg import OKABE_ITO, SvgPlot, downsample, finite_range, padded, style_of

if TYPE_CHECKING:  # pragma: no cover
    from gpctools.batch import BatchEntry, BatchResult, InjectionResult

__all__ = ["DEFAULT_LIMIT", "PARTS", "REVIEW_PAGE", "ReviewSink", "injection_fragment", "review_rows",
           "write_review", "calibration_svg", "overlay_svg", "detectors_svg"]

#: Injections drawn on the page by default (the rest are listed in a table).
DEFAULT_LIMIT = 100
#: Folder of the per-injection fragments inside the output folder (removed at the end).
PARTS = ".review-parts"
#: File name of the page.
REVIEW_PAGE = "review.html"
#: Buckets of :func:`~gpctools.report.svg.downsample` per curve (at most twice as many points).
BUCKETS = 160
#: Residual band of the calibration plot [%] (common practice, docs/science.md, section 2).
RESIDUAL_BAND_PCT = 5.0

_WINDOW = "#cfe8d8"   # baseline windows
_BASE = "#D55E00"     # fitted baseline (vermillion)
_LIMIT = "#CC79A7"    # integration limits (reddish purple)
_MARKER = "#009E73"   # flow marker (bluish green)
_TRACE = "#0072B2"    # the trace (blue)
_MARKS = (("Mn", "#E69F00", "6 3"), ("Mw", "#D55E00", "2 2"), ("Mp", "#000000", "8 3 2 3"))


def _fragment_name(row: int) -> str:
    return f"row{int(row)}.json"


def _round(a: np.ndarray, decimals: int = 5) -> list[float]:
    return np.round(np.asarray(a, dtype=float), decimals).tolist()


def trace_svg(res: InjectionResult, *, uid: str, title: str = "") -> str:
    """SVG of the raw trace, fitted baseline, windows, limits, exclusions and flow marker.

    The raw trace is the corrected signal plus its baseline, on the flow-corrected
    volume axis (where limits and windows apply).
    """
    cs = res.corrected
    V = np.asarray(cs.volume, dtype=float)
    order = np.argsort(V, kind="stable") if V.size > 1 and V[0] > V[-1] else slice(None)
    V = V[order]
    base_line = cs.baseline
    raw = np.asarray(cs.signal, dtype=float)[order] + base_line(V)
    x, y = downsample(V, raw, BUCKETS)
    lo, hi = finite_range(y, base_line(V[[0, -1]]))
    p = SvgPlot(padded(float(V[0]), float(V[-1]), 0.0), padded(lo, hi, 0.06), uid=uid, title=title,
                xlabel="elution volume (flow-corrected) [mL]", ylabel="signal [detector units]")
    for k, (a, b) in enumerate(cs.baseline.windows):
        p.band(a, b, colour=_WINDOW, label="baseline window" if k == 0 else None)
    for a, b in cs.exclusions:
        p.band(a, b, colour="#9a9a9a", hatch=True, label="excluded")
    l0, l1 = (float(v) for v in cs.limits)
    inside = (x >= l0) & (x <= l1)
    if inside.any():
        p.area(x[inside], base_line(x[inside]), y[inside], colour=_TRACE, opacity=0.14)
    p.line(x, y, colour=_TRACE, width=1.1, label="raw signal")
    p.line(V[[0, -1]], base_line(V[[0, -1]]), colour=_BASE, dash="5 3", width=1.2, label="fitted baseline")
    auto = " (automatic)" if cs.automatic_limits else ""
    p.vline(l0, colour=_LIMIT, width=1.4, label=f"integration limits{auto}")
    p.vline(l1, colour=_LIMIT, width=1.4)
    if res.marker_observed is not None and math.isfinite(res.marker_observed):
        mk = res.marker_observed * res.flow_factor
        p.vline(mk, colour=_MARKER, dash="2 2", width=1.4, label=f"flow marker (seen {res.marker_observed:.3f})")
    return p.render(label=f"{title}: chromatogram")


def distribution_svg(res: InjectionResult, *, uid: str, title: str = "") -> tuple[str, list[float], list[float]]:
    """SVG of dw/dlogM against M with Mn, Mw and Mp marked; also the downsampled curve
    (log10 M [-], dw/dlogM [-]) for the overlays.
    """
    d = res.distribution
    lm = np.log10(np.asarray(d.M, dtype=float))
    order = np.argsort(lm, kind="stable")
    x, y = downsample(lm[order], np.asarray(d.dwdlogM, dtype=float)[order], BUCKETS)
    marks = {"Mn": d.Mn, "Mw": d.Mw, "Mp": d.Mp}
    xs = [math.log10(v) for v in marks.values() if v is not None and math.isfinite(v) and v > 0]
    x0, x1 = finite_range(x, xs)
    _, top = finite_range(y)
    p = SvgPlot(padded(x0, x1, 0.03), (min(0.0, float(np.nanmin(y)) if y.size else 0.0), top * 1.08 or 1.0),
                xlog=True, uid=uid, title=title, xlabel="M [g/mol]", ylabel="dw/dlogM [-]")
    p.line(x, y, colour=_TRACE, width=1.4, label="dw/dlogM")
    for name, colour, dash in _MARKS:
        v = marks[name]
        if v is not None and math.isfinite(v) and v > 0:
            p.vline(math.log10(v), colour=colour, dash=dash, width=1.4, label=f"{name} {F.molar_mass(v)} g/mol")
    return p.render(label=f"{title}: molar-mass distribution"), _round(x), _round(y)


def detectors_svg(res: InjectionResult, *, uid: str, title: str = "") -> tuple[str, str]:
    """SVG of every detector's trace on the concentration detector's volume axis after
    the inter-detector offsets, each normalised to its own maximum inside the plotted
    range, and a one-line caption with the offsets; ``("", "")`` without ``[detectors]``.

    A trace read at V + Δ (docs/detectors.md, section "The detector set-up") lines up
    with the concentration trace when the offset Δ is right; a peak that still leads or
    trails shows a wrong offset (a light-scattering peak of a broad sample sits a little
    earlier than the RI peak even when Δ is right: it weights by M).
    """
    found = getattr(res, "detectors", None)
    al = getattr(found, "alignment", None)
    if al is None or not al.traces:
        return "", ""
    V = np.asarray(al.volume, dtype=float)
    l0, l1 = sorted(float(v) for v in res.corrected.limits)
    span = l1 - l0
    x0, x1 = max(float(V.min()), l0 - 0.4 * span), min(float(V.max()), l1 + 0.4 * span)
    sel = (V >= x0) & (V <= x1)
    p = SvgPlot(padded(x0, x1, 0.0), (-0.08, 1.08), uid=uid, title=title,
                xlabel="elution volume of the concentration detector (flow-corrected) [mL]",
                ylabel="signal / its maximum [-]")
    p.vline(l0, colour=_LIMIT, width=1.0, label="integration limits")
    p.vline(l1, colour=_LIMIT, width=1.0)
    parts = []
    names = [al.concentration] + [n for n in al.traces if n != al.concentration]
    for k, name in enumerate(names):
        y = np.asarray(al.traces[name], dtype=float)[sel]
        top = float(np.nanmax(y)) if y.size and np.isfinite(y).any() else 0.0
        if not top > 0:
            continue
        x, yy = downsample(V[sel], y / top, BUCKETS)
        colour, dash = style_of(k)
        off = al.offsets.get(name, 0.0)
        label = (f"{al.labels[name]}, reference" if name == al.concentration
                 else f"{al.labels[name]}, {off:+.3f} mL")
        p.line(x, yy, colour=colour, dash=dash, width=1.3, label=label)
        if name != al.concentration:
            parts.append(f"{name} ({al.labels[name]}) {off:+.4f} mL")
    caption = ("offsets applied (detector volume after the concentration detector " + al.concentration + "): "
               + ("; ".join(parts) if parts else "none")
               + ". Even with the right offsets a light-scattering peak of a broad sample comes earlier than "
                 "the concentration peak (it weights each slice by M), a viscometer peak too (by M^a).")
    return p.render(label=f"{title}: detector traces aligned"), caption


def injection_fragment(entry: BatchEntry, res: InjectionResult) -> dict[str, Any]:
    """Everything the page shows of one injection (JSON-safe): two SVGs (three with
    ``[detectors]``), the overlay curve and the numbers as text.
    """
    title = f"{entry.sample_id} (row {entry.row})"
    uid = f"r{entry.row}"
    d = res.distribution
    dist_svg, lx, ly = distribution_svg(res, uid=uid + "d", title=title)
    det_svg, det_caption = detectors_svg(res, uid=uid + "a", title=title)
    bw = res.corrected.baseline.windows
    lim = res.corrected.limits
    numbers = [
        (C.MN, F.molar_mass(d.Mn)), (C.MW, F.molar_mass(d.Mw)), (C.MZ, F.molar_mass(d.Mz)),
        (C.MP, F.molar_mass(d.Mp)), (C.DISPERSITY, F.dispersity(d.dispersity)),
        ("u(Mn) [%]", F.percent(100 * res.u_Mn, decimals=1)), ("u(Mw) [%]", F.percent(100 * res.u_Mw, decimals=1)),
        (C.OUTSIDE_CALIBRATION, F.percent(100 * d.outside_fraction)),
        ("integration limits [mL]", f"{lim[0]:.3f} to {lim[1]:.3f}" + (" (auto)" if res.corrected.automatic_limits else "")),
        ("baseline windows [mL]", f"{bw[0][0]:.3f} to {bw[0][1]:.3f}; {bw[1][0]:.3f} to {bw[1][1]:.3f}"
         + (" (auto)" if res.corrected.baseline.automatic else "")),
        (C.FLOW_MARKER, "-" if res.marker_observed is None else f"{res.marker_observed:.3f}"),
        (C.MN_SHIFT_LOW_M, F.percent(res.Mn_shift_pct, sign=True)),
    ]
    found = getattr(res, "detectors", None)
    if found is not None:  # [detectors]: the absolute averages and the mass balance, where computed
        for col in (C.MN_LS, C.MW_LS, C.MASS_RECOVERY):
            v = found.values.get(col, math.nan)
            if isinstance(v, float) and math.isfinite(v):
                numbers.append((col, F.percent(v, decimals=1) if col == C.MASS_RECOVERY else F.molar_mass(v)))
    meta = entry.metadata or {}
    product = meta.get("product")
    return {
        "row": entry.row,
        "sample_id": entry.sample_id,
        "file": entry.file,
        "role": entry.role,
        "product": "" if product is None else str(product),
        "title": title,
        "trace_svg": trace_svg(res, uid=uid + "t", title=title),
        "dist_svg": dist_svg,
        "detectors_svg": det_svg,
        "detectors_caption": det_caption,
        "logM": lx,
        "dwdlogM": ly,
        "numbers": numbers,
        "warnings": list(res.warnings),
    }


@dataclass(frozen=True)
class ReviewSink:
    """``on_result`` sink that draws each injection of the review page as the batch runs.

    Picklable (worker processes of a parallel batch call it). Writes
    ``folder/row<n>.json`` (:func:`injection_fragment`) for the sheet rows in ``rows``
    (None: every row); :func:`write_review` assembles the page from these files.

    Parameters
    ----------
    folder : str or os.PathLike
        Usually ``<outdir>/.review-parts`` (:data:`PARTS`).
    rows : frozenset of int, optional
        Sheet rows to draw (:func:`review_rows` gives the first ``limit`` of a sheet).
    """

    folder: str | os.PathLike[str]
    rows: frozenset[int] | None = None

    def __call__(self, entry: BatchEntry, result: InjectionResult) -> None:
        """Draw one processed injection's fragment of the review page (a sink of :func:`gpctools.batch.run_batch`)."""
        if self.rows is not None and entry.row not in self.rows:
            return
        try:
            frag = injection_fragment(entry, result)
        except Exception as exc:  # a plot must never stop the batch: the page says what failed
            frag = {"row": entry.row, "sample_id": entry.sample_id, "file": entry.file, "role": entry.role,
                    "product": str((entry.metadata or {}).get("product") or ""),
                    "title": f"{entry.sample_id} (row {entry.row})", "trace_svg": "", "dist_svg": "",
                    "detectors_svg": "", "detectors_caption": "",
                    "logM": [], "dwdlogM": [], "numbers": [],
                    "warnings": [f"the review plots could not be drawn: {type(exc).__name__}: {exc}"]}
        write_text(Path(self.folder) / _fragment_name(entry.row), json.dumps(frag, separators=(",", ":")))


def review_rows(sheet: str | os.PathLike[str], limit: int | None = DEFAULT_LIMIT, *,
                sheet_name: str | int | None = None) -> frozenset[int] | None:
    """The sheet rows of the first ``limit`` injections that can run (None: all rows).

    Reads the batch sheet once more (milliseconds; its warnings are not repeated).
    """
    import warnings

    from gpctools.batch import read_batch_sheet

    if limit is None:
        return None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        entries = read_batch_sheet(Path(sheet), sheet=sheet_name)
    return frozenset([e.row for e in entries if not e.problem][:limit])


# ----------------------------------------------------------------------------- page-level plots


def calibration_svg(calibration: Any, *, uid: str = "cal") -> tuple[str, str]:
    """SVGs of the calibration curve (standards and fit, M on a log axis) and of the
    standards' residuals [%] with the ±5 % band; a standard outside the band is a cross.
    """
    table = calibration.standards_table()
    V = np.array([r["volume [mL]"] for r in table], dtype=float)
    Mp = np.array([r["Mp [g/mol]"] for r in table], dtype=float)
    res = np.array([r["residual [%]"] for r in table], dtype=float)
    lo, hi = float(calibration.v_min), float(calibration.v_max)
    grid = np.linspace(lo, hi, 120)
    fit = (np.asarray(calibration.log_M(grid)) - calibration.log_offset) / calibration.log_factor
    xr = padded(*finite_range(V, grid), 0.05)
    yr = padded(*finite_range(np.log10(Mp), fit), 0.06)
    p = SvgPlot(xr, yr, ylog=True, uid=uid, title="Calibration curve", xlabel="elution volume [mL]",
                ylabel=f"Mp [g/mol] ({calibration.standard_polymer})")
    p.line(grid, fit, colour=OKABE_ITO[1], width=1.5, label=f"fit, order {calibration.order}")
    p.points(V, np.log10(Mp), colour=OKABE_ITO[0], label="narrow standards")
    lim = max(RESIDUAL_BAND_PCT * 1.6, float(np.nanmax(np.abs(res))) * 1.2 if res.size else 1.0)
    r = SvgPlot(xr, (-lim, lim), height=150, uid=uid + "r", title="Residuals, 100·(M_fit/Mp − 1)",
                xlabel="elution volume [mL]", ylabel="residual [%]")
    r.hband(-RESIDUAL_BAND_PCT, RESIDUAL_BAND_PCT, colour="#eef3ee")
    r.hline(0.0)
    bad = np.abs(res) > RESIDUAL_BAND_PCT
    r.points(V, res, colour=OKABE_ITO[2], cross=bad, label=f"within ±{RESIDUAL_BAND_PCT:g} %")
    return p.render(), r.render()


def overlay_svg(curves: list[tuple[str, list[float], list[float]]], *, title: str, uid: str) -> str:
    """Overlay of dw/dlogM curves (label, log10 M, dw/dlogM) with the Okabe-Ito palette
    and dash patterns past eight curves; legend to the right of the plot.
    """
    xs = [c[1] for c in curves]
    ys = [c[2] for c in curves]
    x0, x1 = finite_range(*xs)
    _, top = finite_range(*ys)
    p = SvgPlot(padded(x0, x1, 0.03), (0.0, top * 1.08 or 1.0), xlog=True, uid=uid, title=title,
                xlabel="M [g/mol]", ylabel="dw/dlogM [-]", legend_width=200)
    shown = 30  # legend entries; curves past that are drawn and counted
    for k, (label, x, y) in enumerate(curves):
        colour, dash = style_of(k)
        p.line(np.asarray(x), np.asarray(y), colour=colour, dash=dash, width=1.3,
               label=label if k < shown else None)
    if len(curves) > shown:
        p._legend.append(("band", "#ffffff", "", f"+{len(curves) - shown} more curves"))
    return p.render(label=title)


# ----------------------------------------------------------------------------- the page


def _summary_rows(result: BatchResult, drawn: int, limit: int | None) -> list[tuple[str, str]]:
    n = len(result.entries)
    cal = result.calibration
    return [
        ("batch sheet", str(result.sheet)),
        ("injections", f"{n} ({n - result.failed} processed, {result.failed} failed)"),
        ("drawn on this page", f"{drawn}" + ("" if limit is None else f" (first {limit} of the sheet; "
                                                                     "gpctools batch --review-all draws all)")),
        ("molar-mass scale", cal.scale_label()),
        ("calibration", f"order {cal.order}, {len(cal.Mp)} standards, R² = {F.r_squared(cal.r_squared)}, "
                        f"calibrated {cal.v_min:.3f} to {cal.v_max:.3f} mL"),
    ]


def _listed(table: Any, rows: Iterable[int]) -> dict[str, Any]:
    cols = [c for c in (C.SAMPLE_ID, C.ROLE, "product", C.STATUS, C.MN, C.MW, C.MP, C.DISPERSITY) if c in table.columns]
    part = table.iloc[list(rows)][cols]  # one selection, not a row look-up per injection
    out = [[v if isinstance(v, str) else F.number(v, c) for c, v in zip(cols, rec)]
           for rec in part.itertuples(index=False, name=None)]
    return {"columns": cols, "rows": out}


def write_review(result: BatchResult, outdir: str | os.PathLike[str], *, limit: int | None = DEFAULT_LIMIT,
                 parts: str | os.PathLike[str] | None = None, title: str | None = None) -> Path:
    """Assemble ``review.html`` in ``outdir`` and remove the fragment folder.

    Parameters
    ----------
    result : gpctools.batch.BatchResult
    outdir : str or os.PathLike
    limit : int or None
        The cap the fragments were drawn with (only for the page's wording), None: all.
    parts : str or os.PathLike, optional
        Fragment folder written by :class:`ReviewSink` (default ``outdir/.review-parts``).
        An injection kept in ``result.injections`` without a fragment (a batch run
        without the sink) is drawn here, within the same cap.
    title : str, optional

    Returns
    -------
    pathlib.Path
        The page.
    """
    from gpctools import __version__
    from gpctools.report.html import _environment

    out = Path(outdir)
    folder = Path(parts) if parts is not None else out / PARTS
    table = result.table
    frags: list[dict[str, Any]] = []
    not_shown: list[int] = []
    failed: list[int] = []
    statuses = table[C.STATUS].tolist() if C.STATUS in table.columns else ["ok"] * len(result.entries)
    for i, entry in enumerate(result.entries):
        if statuses[i] == "error":
            failed.append(i)
            continue
        path = folder / _fragment_name(entry.row)
        frag = None
        if path.is_file():
            frag = json.loads(path.read_text(encoding="utf-8"))
        elif (limit is None or len(frags) < limit) and i < len(result.injections):
            injection = result.injections[i]
            if injection is not None:
                frag = injection_fragment(entry, injection)
        if frag is None or (limit is not None and len(frags) >= limit):
            not_shown.append(i)
        else:
            frags.append(frag)
    groups: dict[str, list[dict[str, Any]]] = {}
    for f in frags:
        groups.setdefault(f["product"] or "all injections", []).append(f)
    overlays = [{"title": f"product {name}" if name != "all injections" else name,
                 "svg": overlay_svg([(f["title"], f["logM"], f["dwdlogM"]) for f in fs if f["logM"]],
                                    title=f"dw/dlogM, {name}" if name != "all injections" else "dw/dlogM, all",
                                    uid=f"ov{k}")}
                for k, (name, fs) in enumerate(groups.items())]
    cal_svg, res_svg = calibration_svg(result.calibration)
    errors = table[C.ERROR].tolist() if C.ERROR in table.columns else [""] * len(result.entries)
    failed_rows = [[result.entries[i].sample_id, str(result.entries[i].row), str(errors[i])] for i in failed]
    context = {
        "title": title or f"Batch review: {Path(str(result.sheet)).name}",
        "tool_version": __version__,
        "summary": _summary_rows(result, len(frags), limit),
        "calibration_svg": cal_svg,
        "residual_svg": res_svg,
        "standards": [[str(r["standard"]), F.molar_mass(r["Mp [g/mol]"]), f"{r['volume [mL]']:.3f}",
                       F.molar_mass(r["fitted M [g/mol]"]), F.percent(r["residual [%]"], sign=True)]
                      for r in result.calibration.standards_table()],
        "overlays": overlays,
        "injections": frags,
        "not_shown": _listed(table, not_shown),
        "not_shown_count": len(not_shown),
        "failed": failed_rows,
    }
    html = _environment().get_template("review.html.j2").render(**context)
    page = write_text(out / REVIEW_PAGE, html)
    if folder.is_dir() and folder.name == PARTS:
        shutil.rmtree(folder, ignore_errors=True)
    return page

