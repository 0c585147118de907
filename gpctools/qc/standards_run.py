"""A sequence's own calibration: locate each narrow standard in its injections, fit the curve.

An injection of role ``calibration_standard`` holds one or more narrow standards (a
"cocktail" of well separated ones). The batch sheet names them in a ``standards`` cell
(names from the method's standards table, or peak molar masses in g/mol, separated by
``;``) or points to a ``standards file`` (:data:`gpctools.sheets.STANDARD_MIX`: name and
Mp, optionally per injection).

Locating a standard (:func:`locate_peaks`):

1. the volume axis is put on the calibration day's scale with the flow marker
   (V·V_ref/V_obs, docs/science.md, section 2), as for every other injection;
2. a straight baseline through the method's baseline windows, or through the medians of
   the first and last 5 % of the record (outside excluded regions) is subtracted;
3. the peaks are the local maxima of the lightly smoothed trace with a prominence of at
   least 2 % of the tallest (scipy.signal.find_peaks), outside excluded regions; the
   ``n`` most prominent are the standards, assigned by elution order (highest Mp first);
4. each peak top is located by a least-squares parabola through every slice above 80 %
   of its height (at least 5 slices), not the three highest slices: the vertex
   V0 = V_k - b/(2c) and its standard error from the fit covariance by the delta method
   (∂V0/∂b = -1/(2c), ∂V0/∂c = b/(2c²)) [derived]. Over ±0.67 σ of a Gaussian peak the
   parabola's vertex is the peak's centre.

:func:`calibration_from_standards` fits log10 Mp against the located volumes with the
method's order, standard and sample polymer (and its Mark-Houwink conversion when the
method has one), through :func:`gpctools.calibration.fit_calibration`.
"""

from __future__ import annotations

import math
import os
import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from gpctools.calibration import Calibration, fit_calibration
from gpctools.display import Display
from gpctools.distribution import peak_position
from gpctools.errors import DataError, InputFormatError
from gpctools.sheets import cells
from gpctools.signal import fit_baseline, noise_level

__all__ = ["PeakTop", "LocatedStandard", "locate_peaks", "locate_marker", "read_standard_mix",
           "injection_standards", "calibration_from_standards", "raw_baseline", "TOP_FRACTION"]

#: Slices above this fraction of a peak's height enter its top fit [-].
TOP_FRACTION = 0.8
#: Smallest prominence of a peak, as a fraction of the tallest [-].
MIN_PROMINENCE = 0.02


@dataclass(frozen=True)
class PeakTop:
    """A peak top located by a local parabola.

    Attributes
    ----------
    volume : float
        Vertex of the parabola [mL].
    stderr : float
        Its standard error from the fit [mL].
    height : float
        Baseline-corrected height at the vertex [signal units].
    points : int
        Slices in the fit.
    window : (float, float)
        Volume range of the fitted slices [mL].
    """

    volume: float
    stderr: float
    height: float
    points: int
    window: tuple[float, float]


@dataclass(frozen=True, repr=False)
class LocatedStandard(Display):
    """A narrow standard located in a calibration-standard injection.

    Attributes
    ----------
    name : str
    Mp : float
        Peak molar mass [g/mol].
    peak : PeakTop
        Its located peak (volume on the flow-corrected axis) [mL].
    sample_id : str
        The injection.
    position : int
        The injection's row in the results table (0-based).
    sequence : str
    """

    name: str
    Mp: float
    peak: PeakTop
    sample_id: str
    position: int
    sequence: str

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {"standard": self.name, "Mp [g/mol]": self.Mp, "volume [mL]": self.peak.volume,
                "volume standard error [mL]": self.peak.stderr, "points in top fit": self.peak.points,
                "injection": self.sample_id, "sequence": self.sequence}


def raw_baseline(volume: np.ndarray, signal: np.ndarray, windows: Any = None,
                 exclusions: Sequence[tuple[float, float]] = ()) -> np.ndarray:
    """Baseline values of a trace whose peaks may fill the middle of the record.

    Through the method's baseline ``windows`` when given (:func:`gpctools.signal.fit_baseline`),
    else a line through the medians of the first and last 5 % of the slices outside the
    excluded regions (``volume`` increasing).
    """
    if windows is not None:
        return np.asarray(fit_baseline(volume, signal, windows, exclusions=exclusions)(volume))
    keep = np.ones(volume.size, dtype=bool)
    for a, b in exclusions:
        keep &= ~((volume >= a) & (volume <= b))
    V, h = volume[keep], signal[keep]
    k = max(3, V.size // 20)
    v0, v1 = float(np.median(V[:k])), float(np.median(V[-k:]))
    h0, h1 = float(np.median(h[:k])), float(np.median(h[-k:]))
    slope = (h1 - h0) / (v1 - v0) if v1 != v0 else 0.0
    return h0 + slope * (volume - v0)


def _top_fit(V: np.ndarray, h: np.ndarray, k: int) -> PeakTop:
    """Parabola through the slices above :data:`TOP_FRACTION` of the height around index k."""
    thr = TOP_FRACTION * h[k]
    lo = k
    while lo > 0 and h[lo - 1] >= thr:
        lo -= 1
    hi = k
    while hi < h.size - 1 and h[hi + 1] >= thr:
        hi += 1
    while hi - lo + 1 < 5:
        lo, hi = max(0, lo - 1), min(h.size - 1, hi + 1)
    x = V[lo : hi + 1] - V[k]
    y = h[lo : hi + 1]
    if x.size > 5:
        coef, cov = np.polyfit(x, y, 2, cov=True)
    else:
        coef, cov = np.polyfit(x, y, 2), np.full((3, 3), np.nan)
    c, b, a = (float(v) for v in coef)
    if not c < 0:
        raise DataError(f"the peak near {V[k]:.3f} mL has no rounded top to fit (too few slices or "
                        "a flat, saturated top); check the export")
    x0 = -b / (2 * c)
    grad = np.array([b / (2 * c * c), -1 / (2 * c), 0.0])  # d x0 / d (c, b, a)
    se = float(math.sqrt(max(grad @ cov @ grad, 0.0))) if np.all(np.isfinite(cov)) else math.nan
    if not (x[0] <= x0 <= x[-1]):
        x0 = float(np.clip(x0, x[0], x[-1]))
    return PeakTop(float(V[k] + x0), se, float(a + b * x0 + c * x0 * x0), int(x.size),
                   (float(V[lo]), float(V[hi])))


def locate_peaks(volume: Any, signal: Any, n: int, *, windows: Any = None,
                 exclusions: Sequence[tuple[float, float]] = (),
                 search: tuple[float, float] | None = None) -> list[PeakTop]:
    """The ``n`` most prominent peaks of a trace, each located by its top fit, by volume.

    Parameters
    ----------
    volume, signal : array_like
        The trace [mL], [signal units] (any order).
    n : int
        Peaks wanted.
    windows : pair of (start, end), optional
        Baseline windows [mL]; see :func:`raw_baseline`.
    exclusions : sequence of (start, end)
        Regions never searched (flow marker, system peaks) [mL].
    search : (start, end), optional
        Only peaks inside this range count [mL] (the standards' expected range: system and
        solvent peaks elute after it).

    Raises
    ------
    DataError
        Fewer than ``n`` peaks found.
    """
    from scipy.signal import find_peaks

    V = np.asarray(volume, dtype=float)
    h = np.asarray(signal, dtype=float)
    order = np.argsort(V, kind="stable")
    V, h = V[order], h[order]
    c = h - raw_baseline(V, h, windows, exclusions)
    w = max(3, V.size // 400)
    smooth = np.convolve(c, np.ones(w) / w, mode="same")
    for a, b in exclusions:
        smooth[(V >= a) & (V <= b)] = 0.0
    if search is not None:
        smooth[(V < search[0]) | (V > search[1])] = 0.0
    top = float(smooth.max())
    if not top > 0:
        raise DataError("no peak above the baseline; check the export and the baseline windows")
    idx, props = find_peaks(smooth, prominence=MIN_PROMINENCE * top)
    if idx.size < n:
        found = ", ".join(f"{V[i]:.2f}" for i in idx) or "none"
        raise DataError(f"found {idx.size} peak(s) ({found} mL) for {n} standard(s); check the standards "
                        "named for this injection, the excluded regions and the export")
    best = np.sort(idx[np.argsort(props["prominences"])[::-1][:n]])
    out = []
    for i in best:
        k = int(i - w // 2 + np.argmax(c[max(0, i - w // 2): i + w // 2 + 1])) if w > 1 else int(i)
        k = min(max(k, 0), V.size - 1)
        out.append(_top_fit(V, c, k))
    return out


def locate_marker(volume: Any, signal: Any, window: tuple[float, float]) -> float | None:
    """Flow-marker peak position inside ``window`` [mL] (positive or negative peak), or None
    when the window holds no peak.

    A straight line through the window's ends is removed and the largest deviation is
    refined with :func:`gpctools.distribution.peak_position` (the batch processing finds
    markers the same way). A deviation below 10 times the white-noise SD of the window
    (from point-to-point differences, :func:`gpctools.signal.noise_level`) is no marker:
    correcting volumes by a noise spike would shift them by up to the window's width.
    """
    V = np.asarray(volume, dtype=float)
    h = np.asarray(signal, dtype=float)
    m = (V >= window[0]) & (V <= window[1])
    if m.sum() < 5:
        raise DataError(f"flow-marker search window {window[0]:g}-{window[1]:g} mL holds too few slices; "
                        "set flow_marker.search around the marker peak")
    order = np.argsort(V[m])
    Vm, hm = V[m][order], h[m][order]
    k = max(1, Vm.size // 20)
    line = np.interp(Vm, [Vm[:k].mean(), Vm[-k:].mean()], [hm[:k].mean(), hm[-k:].mean()])
    dev = hm - line
    if abs(dev.min()) > abs(dev.max()):
        dev = -dev
    if not float(dev.max()) > 10.0 * noise_level(hm):
        return None
    return peak_position(Vm, dev)


def read_standard_mix(path: str | os.PathLike[str], sample_id: str = "") -> list[tuple[str, float]]:
    """(name, Mp [g/mol]) of the standards a standards-mix file lists for one injection.

    Rows whose ``injection`` cell is empty belong to every injection; others only to the
    injection with that ``sample_id``.

    Raises
    ------
    InputFormatError
        Naming the file, row and column; or no row for this injection.
    """
    from gpctools.sheets import STANDARD_MIX, read_file

    table = read_file(path, STANDARD_MIX)
    out = []
    for row in table.rows:
        inj = row.get("injection", "")
        if inj and inj.casefold() != sample_id.casefold():
            continue
        out.append((row.get("name") or f"Mp {row['Mp']:g}", float(row["Mp"])))
    if not out:
        raise InputFormatError(f"no standard listed for injection {sample_id!r}", path=path)
    return out


def _key(name: str) -> str:
    return " ".join(name.split()).casefold()


def injection_standards(metadata: dict[str, Any], sample_id: str, calibration: Calibration | None,
                        folder: Path) -> list[tuple[str, float]]:
    """The standards one calibration-standard injection holds, from its batch-sheet row.

    Parameters
    ----------
    metadata : dict
        The row's extra columns: ``standards`` (names or Mp values separated by ``;``),
        ``standards file`` (a standards-mix table, relative to the batch sheet), or for a
        single standard ``Mp [g/mol]`` (with an optional ``standard`` name).
    sample_id : str
    calibration : Calibration or None
        The method's calibration: its standards table gives the Mp of a name.
    folder : Path
        Folder of the batch sheet.

    Raises
    ------
    InputFormatError
        No standards given, or a name that is not in the method's standards table.
    """
    meta = {cells.normalise_name(str(k)): v for k, v in metadata.items()}
    f = cells.text(meta.get("standards file") or meta.get("standards mix"))
    if f:
        return read_standard_mix(folder / f, sample_id)
    text = cells.text(meta.get("standards"))
    single = _single_standard(metadata, sample_id)
    if not text and single is not None:
        return [single]
    if not text:
        raise InputFormatError(
            f"calibration-standard injection {sample_id!r} names no standards: fill its 'standards' cell "
            "(names from the method's standards table, or Mp in g/mol, separated by ';') or its "
            "'standards file' cell", column="standards")
    known = {_key(n): (n, mp) for n, mp in zip(calibration.names, calibration.Mp, strict=True)} \
        if calibration is not None else {}
    out: list[tuple[str, float]] = []
    for token in (t.strip() for t in re.split(r"[;|+]", text)):
        if token:
            out.extend(_standard_token(token, known, sample_id))
    return out


def _standard_token(token: str, known: dict[str, tuple[str, float]], sample_id: str) -> list[tuple[str, float]]:
    """One ``standards`` token: a name of the table, an Mp, or comma-separated names."""
    if _key(token) in known:
        return [known[_key(token)]]
    try:
        mp = cells.number_or_none(token)
    except cells.CellError:
        mp = None
    if mp is not None and mp > 0:
        return [(f"Mp {token}", float(mp))]
    if "," in token:
        return [s for t in token.split(",") if t.strip() for s in _standard_token(t.strip(), known, sample_id)]
    names = ", ".join(n for n, _ in known.values()) or "none"
    raise InputFormatError(
        f"standard {token!r} of injection {sample_id!r} is not in the method's standards table "
        f"({names}); write a name from it or the standard's Mp in g/mol", column="standards")


def _single_standard(metadata: dict[str, Any], sample_id: str) -> tuple[str, float] | None:
    """A one-standard injection given by an ``Mp [g/mol]`` (or ``[kg/mol]``) column."""
    for k, v in metadata.items():
        h = cells.split_header(str(k))
        unit = cells.canonical_unit(h.unit) if h.unit else None
        if h.key == "mp" and unit in (None, "g/mol", "kg/mol"):
            mp = cells.number_or_none(v)
            if mp is not None and mp > 0:
                name = cells.text(metadata.get("standard") or metadata.get("name")) or sample_id
                return name, float(mp) * (1000.0 if unit == "kg/mol" else 1.0)
    return None


def calibration_from_standards(located: Sequence[LocatedStandard], method: Any) -> Calibration:
    """Fit the sequence's calibration from its located standards, the method's way.

    The order, standard polymer, sample polymer, residual limit and Mark-Houwink
    conversion are the method's (``method.calibration``); the peak volumes are the
    located ones. A standard located in several injections enters once per injection.

    Raises
    ------
    gpctools.errors.CalibrationError
        Too few standards for the order, duplicate volumes.
    """
    base: Calibration = method.calibration
    names = [s.name for s in located]
    if len(set(names)) < len(names):
        names = [f"{s.name} ({s.sample_id})" for s in located]
    cal = fit_calibration([s.peak.volume for s in located], [s.Mp for s in located], order=base.order,
                          names=names, standard_polymer=base.standard_polymer,
                          sample_polymer=base.sample_polymer,
                          residual_limit_pct=float(getattr(method, "residual_limit_pct", 5.0)))
    mh = base.mark_houwink
    if mh:
        cal = cal.converted(mh["K_standard [dL/g]"], mh["a_standard [-]"], mh["K_sample [dL/g]"],
                            mh["a_sample [-]"], sample_polymer=str(base.sample_polymer), source=mh.get("source"))
    return cal
