"""Baseline, integration limits and excluded regions of one concentration-detector trace.

The baseline is a straight line through the means of two signal-free windows, one before
the polymer elutes and one after it but before solvent, system or flow-marker peaks
(docs/science.md, section 1.4; a mean over each window rather than a single point, common
practice). When no windows are given they are chosen automatically and the choice is
reported. Integration limits are either given or found where the corrected signal returns
to the baseline. Negative heights after subtraction are noise and are kept (see
:mod:`gpctools.distribution` for how the sums treat them).

The main peak is searched for inside a given volume range (the calibrated range, passed
by :func:`gpctools.batch.process_trace`), so that a larger solvent or system peak outside
it is never taken for the polymer (docs/science.md, section 19.3); :func:`find_peaks`
counts the peaks of a trace by a valley criterion that noise cannot meet (section 19.5).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from gpctools.display import Display

from .errors import DataError, SignalWarning

__all__ = [
    "Baseline",
    "CorrectedSignal",
    "Peaks",
    "fit_baseline",
    "find_limits",
    "find_peaks",
    "correct_signal",
    "noise_level",
]

Window = tuple[float, float]


@dataclass(frozen=True, repr=False)
class Baseline(Display):
    """A straight baseline ``b(V) = intercept + slope * V``.

    Attributes
    ----------
    windows : tuple of two (start, end) pairs
        The signal-free windows used [mL].
    slope : float
        [signal units / mL].
    intercept : float
        [signal units].
    noise : float
        Standard deviation of the signal about the line inside the windows [signal units].
    automatic : bool
        True when the windows were chosen by :func:`fit_baseline` itself.
    centres : (float, float)
        Mean volume of the slices in each window [mL]: the line passes through the window
        means at these volumes.
    counts : (int, int)
        Number of slices in each window [-]. With white noise of SD σ each window mean has
        variance σ²/n, which is what the line's own error is made of
        (:func:`gpctools.uncertainty.noise_uncertainty`).
    """

    windows: tuple[Window, Window]
    slope: float
    intercept: float
    noise: float
    automatic: bool
    centres: tuple[float, float] = (math.nan, math.nan)
    counts: tuple[int, int] = (0, 0)

    def __call__(self, volume: Any) -> np.ndarray:
        """Baseline value at ``volume`` [mL] (signal units)."""
        return self.intercept + self.slope * np.asarray(volume, dtype=float)

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            "windows [mL]": [list(w) for w in self.windows],
            "slope [signal/mL]": self.slope,
            "intercept [signal]": self.intercept,
            "noise SD [signal]": self.noise,
            "automatic": self.automatic,
        }


@dataclass(frozen=True, repr=False)
class CorrectedSignal(Display):
    """Baseline-corrected trace with the integration window and exclusions.

    ``mask`` selects the slices that enter the averages: inside ``limits`` and outside
    every excluded region. ``search`` is the volume range in which the main peak was
    looked for [mL] (None: the whole record).
    """

    volume: np.ndarray
    signal: np.ndarray
    baseline: Baseline
    limits: Window
    exclusions: tuple[Window, ...]
    automatic_limits: bool
    mask: np.ndarray
    warnings: tuple[str, ...] = ()
    search: Window | None = None

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            "baseline": self.baseline.summary(),
            "peak search range [mL]": list(self.search) if self.search is not None else None,
            "limits [mL]": list(self.limits),
            "automatic limits": self.automatic_limits,
            "exclusions [mL]": [list(e) for e in self.exclusions],
            "warnings": list(self.warnings),
        }


def _as_trace(volume: Any, signal: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Validated float64 arrays of one trace and the permutation that sorts it by volume.

    Raises :class:`DataError` for unequal lengths or a non-finite value (naming the slice),
    so that numerics further down can assume clean, equally long arrays.
    """
    V = np.asarray(volume, dtype=float)
    h = np.asarray(signal, dtype=float)
    if V.ndim != 1 or h.ndim != 1 or V.shape != h.shape:
        raise DataError(
            f"{V.size} volumes but {h.size} signal values: give one signal value per slice "
            "(two one-dimensional columns of equal length)"
        )
    bad = ~(np.isfinite(V) & np.isfinite(h))
    if bad.any():
        i = int(np.nonzero(bad)[0][0])
        raise DataError(
            f"slice {i + 1} (volume {float(V[i]):g} mL, signal {float(h[i]):g}) is not a finite number; "
            f"{int(bad.sum())} such slice(s) in all: remove or fill them"
        )
    _refuse_huge(V, h)
    return V, h, np.argsort(V, kind="stable")


#: Largest magnitude of a volume or signal value accepted [mL] / [signal units]. The
#: sums behind the noise level, the baseline and the averages square the signal and
#: multiply it by M^3 (up to about 1e30 [g^3/mol^3]); float64 ends at 1.8e308, so values
#: up to 1e100 leave more than 1e70 of room for sums over any number of slices
#: (derived). No detector or column produces such numbers: larger ones are a fault.
HUGE_VALUE = 1e100


def _refuse_huge(V: np.ndarray, h: np.ndarray) -> None:
    """Refuse values so large that the sums over slices would overflow (become inf)."""
    for name, arr, unit in (("signal", h, ""), ("volume", V, " mL")):
        big = np.abs(arr) > HUGE_VALUE
        if big.any():
            i = int(np.flatnonzero(big)[0])
            raise DataError(
                f"slice {i + 1}: {name} {float(arr[i]):.3g}{unit} is too large to compute with "
                f"({int(big.sum())} slice(s) above {HUGE_VALUE:.0e}): the sums over slices would "
                "overflow; check the column chosen (import.x_column / import.signal_column in "
                "the method file) and the decimal mark, or export the data in smaller units"
            )


def _refuse_flat(h: np.ndarray) -> None:
    """Refuse a raw signal that is zero, or one value, in every slice.

    Such a trace has no peak at all (an empty or disconnected detector channel, or the
    wrong column); saying so is more useful than "no peak stands out of the noise".
    """
    if h.size == 0:
        return
    if not h.any():
        raise DataError(
            f"the signal is 0 in all {h.size} slices, so there is no positive peak: the "
            "detector channel is empty or disconnected, or the wrong column was read - check "
            "the export and the signal column (import.signal_column in the method file)"
        )
    if float(h.max()) == float(h.min()):
        raise DataError(
            f"the signal has the same value ({float(h[0]):g}) in all {h.size} slices, so "
            "there is no positive peak: the detector channel is flat or saturated, or the "
            "wrong column was read - check the export and the signal column "
            "(import.signal_column in the method file)"
        )


def _window_mask(volume: np.ndarray, windows: Sequence[Window]) -> np.ndarray:
    """Slices inside any of the windows (``volume`` sorted increasing)."""
    m = np.zeros(volume.shape, dtype=bool)
    for a, b in windows:
        m[_window_slice(volume, a, b)] = True
    return m


def _window_slice(volume: np.ndarray, a: float, b: float) -> slice:
    """Index range of a <= V <= b in increasing volumes (binary search)."""
    return slice(int(np.searchsorted(volume, a, "left")), int(np.searchsorted(volume, b, "right")))


def _median(values: np.ndarray) -> float:
    """The median of a 1-D float array, equal to ``numpy.median`` (same order statistics,
    the mean of the two middle values for an even count, NaN when any value is NaN) in
    about half the time: one partition, no generic reduction machinery (issue 14).
    """
    a = np.asarray(values, dtype=float)
    n = a.size
    if n == 0 or np.isnan(a).any():
        return float(np.median(a))
    k = n // 2
    if n % 2:
        return float(np.partition(a, k)[k])
    p = np.partition(a, (k - 1, k))
    return float((p[k - 1] + p[k]) / 2.0)


def _mean(x: np.ndarray) -> float:
    """Mean of a 1-D float array, bit for bit ``x.mean()`` (numpy's pairwise sum divided
    by the count) without the generic reduction wrapper (issue 14).
    """
    return float(np.add.reduce(x) / x.size)


def _std1(x: np.ndarray) -> float:
    """Sample SD (ddof = 1) of a 1-D float array of 2 or more values, bit for bit
    ``x.std(ddof=1)``: the same operations in the same order (mean by pairwise sum,
    squared deviations, pairwise sum, division by n - 1, square root).
    """
    d = x - np.add.reduce(x) / x.size
    return math.sqrt(np.add.reduce(d * d) / (x.size - 1))


def noise_level(signal: np.ndarray) -> float:
    """Robust white-noise SD from point-to-point differences [signal units].

    σ ≈ 1.4826·MAD(Δh)/√2: differencing removes the slowly varying peak and baseline,
    the median absolute deviation ignores the few large steps on peak flanks (common
    practice in signal processing).
    """
    d = np.diff(np.asarray(signal, dtype=float))
    if d.size == 0:
        return 0.0
    mad = _median(np.abs(d - _median(d)))
    return 1.4826 * mad / math.sqrt(2.0)


def _smooth(signal: np.ndarray, width: int) -> np.ndarray:
    width = max(1, int(width) | 1)  # odd
    if width == 1:
        return signal
    # Moving average by cumulative sums: O(n) whatever the width; ends padded with the
    # end values.
    half = width // 2
    padded = np.concatenate((np.full(half, signal[0]), signal, np.full(half, signal[-1])))
    c = np.empty(padded.size + 1)
    c[0] = 0.0
    np.cumsum(padded, out=c[1:])
    return (c[width:] - c[:-width]) / width


def _line_through_windows(
    volume: np.ndarray, signal: np.ndarray, windows: Sequence[Window]
) -> tuple[float, float, float, tuple[float, float], tuple[int, int]]:
    """Slope, intercept and residual SD of the line through the two window means, with the
    windows' mean volumes [mL] and slice counts.
    """
    pts = []
    counts = []
    resid_parts = []
    for a, b in windows:
        sl = _window_slice(volume, a, b)
        count = sl.stop - sl.start
        if count < 2:
            raise DataError(
                f"baseline window {a:g}-{b:g} mL holds {max(count, 0)} slice(s); "
                "widen it or move it inside the recorded volume range "
                f"({volume[0]:g}-{volume[-1]:g} mL)"
            )
        pts.append((_mean(volume[sl]), _mean(signal[sl])))
        counts.append(int(count))
        resid_parts.append(sl)
    (v1, h1), (v2, h2) = pts
    slope = (h2 - h1) / (v2 - v1) if v2 != v1 else 0.0
    intercept = h1 - slope * v1
    vv = np.concatenate([volume[sl] for sl in resid_parts])
    r = np.concatenate([signal[sl] for sl in resid_parts]) - (intercept + slope * vv)
    noise = _std1(r) if r.size > 2 else 0.0
    return slope, intercept, noise, (v1, v2), (counts[0], counts[1])


def _search_mask(volume: np.ndarray, valid: np.ndarray, search: Window | None) -> np.ndarray:
    """Slices where the main peak may lie: not excluded and inside ``search`` [mL].

    Falls back to every non-excluded slice when the search range holds fewer than 5 of
    them (a calibrated range that misses the record is reported elsewhere).
    """
    if search is None:
        return valid
    sl = _window_slice(volume, float(search[0]), float(search[1]))
    m = np.zeros(volume.shape, dtype=bool)
    m[sl] = True
    m &= valid
    return m if int(m.sum()) >= 5 else valid


def _peak_region(
    volume: np.ndarray,
    corrected: np.ndarray,
    valid: np.ndarray,
    noise: float,
    ref_scale: float | None = None,
    searchable: np.ndarray | None = None,
    stop_at_outside_peaks: bool = False,
    sm: np.ndarray | None = None,
) -> tuple[int, int, int]:
    """Indices (start, peak, end) of the main peak where the smoothed signal exceeds a threshold.

    The maximum is looked for among the ``searchable`` slices only (not excluded and, in
    :func:`correct_signal` with ``search``, inside the calibrated range); the feet are then
    found by walking outwards over every non-excluded slice. With
    ``stop_at_outside_peaks`` a foot that lies beyond a separate peak outside the search
    range is moved back to the valley before that peak (:func:`_valley_before_outside_peak`):
    a system peak touching the polymer's tail is then not integrated with it. ``sm`` is
    the moving average of ``corrected`` over max(3, n/200) slices when the caller has it.
    """
    n = corrected.size
    width = max(3, n // 200)
    if sm is None:
        sm = _smooth(corrected, width)
    where = valid if searchable is None else searchable
    candidates = np.where(where, sm, -np.inf)
    ipk = int(np.argmax(candidates))
    height = sm[ipk]
    scale = ref_scale if ref_scale is not None else (float(np.max(np.abs(corrected))) if n else 0.0)
    if not math.isfinite(height) or height <= 0 or height <= 1e-9 * scale or (
        noise > 0 and height < 5.0 * noise / math.sqrt(width)
    ):
        raise DataError(
            "no positive peak stands out of the noise (the smoothed signal never exceeds 5 "
            "times its noise level"
            + (f" between {volume[where][0]:.4g} and {volume[where][-1]:.4g} mL, where the main peak is "
               "searched for" if searchable is not None and not np.array_equal(searchable, valid) else "")
            + "); check the signal column, the baseline windows and the injection"
        )
    threshold = max(noise / math.sqrt(width), 1e-6 * height)
    # A foot is where the smoothed signal is at the threshold AND stays there: the mean of
    # the next (right side) or previous (left side) L slices is below it too. Without that,
    # noise dips a faint tail below the threshold long before the tail ends, which cuts the
    # low-M tail and biases Mn high.
    run = max(5, n // 50)
    c = np.empty(n + 1)
    c[0] = 0.0
    np.cumsum(sm, out=c[1:])
    cand = np.flatnonzero((sm <= threshold) | ~valid)  # only these can be feet
    # left side: the last candidate before the peak whose previous `run` slices average
    # below the threshold (or that is excluded)
    lc = cand[cand < ipk]
    lo = np.maximum(lc - run + 1, 0)
    ok = ((c[lc + 1] - c[lo]) / (lc + 1 - lo) <= threshold) | ~valid[lc]
    start = int(lc[ok][-1]) if ok.any() else 0
    rc = cand[cand >= ipk]
    hi = np.minimum(rc + run, n)
    ok = ((c[hi] - c[rc]) / (hi - rc) <= threshold) | ~valid[rc]
    end = int(rc[ok][0]) if ok.any() else n - 1
    if stop_at_outside_peaks and searchable is not None:
        sigma_s = noise / math.sqrt(width)
        outside = valid & ~searchable
        cut = _valley_before_outside_peak(sm, ipk, start, outside, sigma_s)
        if cut is not None:
            start = cut
        cut = _valley_before_outside_peak(sm, ipk, end, outside, sigma_s)
        if cut is not None:
            return start, ipk, cut
    # Past the low-M (high-volume) foot the tail is below the noise but not zero, and it
    # carries many chains: integrating zero-mean noise there costs nothing in bias
    # (negative heights are kept) and helps Mn, so go one run further out. Not on the
    # high-M side, where noise times M^2 or M^3 would only add scatter to Mz and Mz+1.
    end = min(end + run, n - 1)
    while end < n - 1 and not valid[end]:
        end -= 1
        if end <= ipk:
            break
    return start, ipk, end


def _valley_before_outside_peak(
    sm: np.ndarray, ipk: int, foot: int, outside: np.ndarray, sigma_s: float
) -> int | None:
    """The valley between the main peak and a separate peak beyond the search range, or None.

    Walking from the main peak ``ipk`` to its ``foot``, the highest smoothed point among
    the ``outside`` slices is a separate peak when the lowest point v between the two
    maxima dips below the lower of them by 10 % of it and by 5 noise SDs of the smoothed
    signal (the valley criterion of :func:`find_peaks`). A tail that only falls never
    rises again and is never cut.
    """
    if foot == ipk:
        return None
    step = 1 if foot > ipk else -1
    idx = np.arange(ipk, foot + step, step)
    seg = sm[idx]
    out = np.flatnonzero(outside[idx])
    if out.size == 0:
        return None
    k = int(out[np.argmax(seg[out])])
    v = int(np.argmin(seg[: k + 1]))
    low = min(float(seg[0]), float(seg[k]))
    if v in (0, k) or low - float(seg[v]) < max(0.10 * low, 5.0 * sigma_s):
        return None
    return int(idx[v])


def _busy(sm: np.ndarray, valid: np.ndarray, start: int, end: int, threshold: float, margin: int) -> np.ndarray:
    """Slices outside [start, end] where the smoothed signal stands more than ``threshold``
    above or below the first-guess line, widened by ``margin`` slices on each side: other
    peaks and dips (a negative refractive-index marker), where no baseline window goes.
    Excluded regions (not ``valid``) are the analyst's known peaks and are left to the
    exclusions.
    """
    busy = (np.abs(sm) > threshold) & valid
    busy[start:end + 1] = False
    if busy.any() and margin > 0:
        c = np.concatenate(([0], np.cumsum(busy.astype(np.int64))))
        n = busy.size
        i = np.arange(n)
        lo = np.maximum(i - margin, 0)
        hi = np.minimum(i + margin + 1, n)
        busy = (c[hi] - c[lo]) > 0
        busy[start:end + 1] = False
    return busy


def fit_baseline(
    volume: Any,
    signal: Any,
    windows: Sequence[Window] | None = None,
    *,
    exclusions: Sequence[Window] = (),
    noise: float | None = None,
    search: Window | None = None,
) -> Baseline:
    """Fit a straight baseline through two signal-free windows.

    Parameters
    ----------
    volume : array_like
        Elution volume of each slice, increasing [mL].
    signal : array_like
        Raw detector response [signal units].
    windows : pair of (start, end), optional
        Signal-free windows [mL], one before and one after the polymer peak. When
        omitted they are chosen automatically: the main peak is located on the smoothed
        signal, its foot found where the smoothed signal falls to its own noise level
        (σ/√w for a w-point moving average, at least 1e-6 of the peak), and a window
        of 5 % of the recorded range placed on each side with a gap of 10 % of the peak
        width, avoiding excluded regions; the line is refitted through them.
    exclusions : sequence of (start, end)
        Regions (system, solvent, flow-marker peaks) never used as baseline [mL].
    noise : float, optional
        White-noise SD of the signal if already known (:func:`noise_level`), to save
        computing it again [signal units].
    search : (low, high), optional
        Volume range in which the main peak's maximum is looked for [mL] (automatic
        windows only; :func:`correct_signal` passes the calibrated range). Its feet may lie
        outside it.

    Returns
    -------
    Baseline
    """
    V, h, order = _as_trace(volume, signal)
    return _fit_baseline_sorted(V[order], h[order], windows, exclusions, noise, search)


def _fit_baseline_sorted(
    V: np.ndarray,
    h: np.ndarray,
    windows: Sequence[Window] | None,
    exclusions: Sequence[Window],
    noise: float | None,
    search: Window | None,
) -> Baseline:
    """:func:`fit_baseline` on a trace already checked and sorted by volume."""
    if windows is not None:
        windows = tuple((float(a), float(b)) for a, b in windows)
        if len(windows) != 2:
            raise DataError(f"give exactly two baseline windows (before and after the peak), got {len(windows)}")
        for a, b in windows:
            if not a < b:
                raise DataError(f"baseline window {a:g}-{b:g} mL: start must be below end")
        slope, intercept, noise, centres, counts = _line_through_windows(V, h, windows)
        return Baseline(windows, slope, intercept, noise, automatic=False, centres=centres, counts=counts)

    valid = ~_window_mask(V, exclusions)
    span = V[-1] - V[0]
    width = 0.05 * span
    if int(valid.sum()) < 20:
        raise DataError("too few slices outside the excluded regions to place a baseline")
    # First guess: the two ends of the usable record.
    guess = (_place_window(V, valid, V[0], width, +1), _place_window(V, valid, V[-1], width, -1))
    if guess[0] is None or guess[1] is None:
        raise DataError("no room for baseline windows at the ends of the record; give baseline.windows")
    slope, intercept, noise, _, _ = _line_through_windows(V, h, guess)
    sigma = noise_level(h[valid]) if noise is None else float(noise)
    ref_scale = float(np.max(np.abs(h)))
    corrected = h - (intercept + slope * V)
    w_sm = max(3, V.size // 200)
    sm = _smooth(corrected, w_sm)
    start, ipk, end = _peak_region(V, corrected, valid, sigma, ref_scale, _search_mask(V, valid, search), sm=sm)
    gap = 0.1 * (V[end] - V[start])
    # Other peaks and dips (system, solvent, a marker) that are not excluded are no place
    # for a window: where the smoothed first-guess signal stands 5 noise SDs (and 0.1 % of
    # the peak) off the line, widened by a run of slices, windows are not placed when
    # there is room elsewhere.
    free = valid & ~_busy(sm, valid, start, end, max(5.0 * sigma / math.sqrt(w_sm), 1e-3 * float(sm[ipk])),
                          max(5, V.size // 50))
    # Preferred: just outside the feet with a gap; else touching the feet; else the
    # record ends (a foot found at 1e-6 of a noise-free peak can reach the record end).
    before = (_place_window(V, free, V[start] - gap, width, -1)
              or _place_window(V, valid, V[start] - gap, width, -1)
              or _place_window(V, valid, V[start], width, -1)
              or _place_window(V, valid, V[0], width, +1))
    after = (_place_window(V, free, V[end] + gap, width, +1)
             or _place_window(V, valid, V[end] + gap, width, +1)
             or _place_window(V, valid, V[end], width, +1)
             or _place_window(V, valid, V[-1], width, -1))
    if before is None:
        raise DataError(
            f"no signal-free room for a baseline window before the peak (it starts at "
            f"{V[start]:.3g} mL, the record at {V[0]:.3g} mL); give baseline.windows"
        )
    if after is None:
        raise DataError(
            f"no signal-free room for a baseline window after the peak (it ends at "
            f"{V[end]:.3g} mL, the record at {V[-1]:.3g} mL); give baseline.windows"
        )
    chosen = (before, after)
    slope, intercept, noise, centres, counts = _line_through_windows(V, h, chosen)
    return Baseline(chosen, slope, intercept, noise, automatic=True, centres=centres, counts=counts)


def _place_window(V: np.ndarray, valid: np.ndarray, anchor: float, width: float, direction: int):
    """A baseline window of about ``width`` mL inside one run of non-excluded slices.

    ``direction=+1``: the window starts at ``anchor`` (or at the next non-excluded slice)
    and extends to larger volumes; ``-1``: it ends at ``anchor`` and extends to smaller
    volumes. A run too short for a window (less than a quarter of ``width``, at least 10
    slices) is skipped and the next run in that direction is used, so that a window is
    never squeezed into a sliver before an excluded peak nor placed across one. Returns ``(start, end)`` [mL] or None when there is no room.
    """
    n = V.size
    spacing = (V[-1] - V[0]) / max(n - 1, 1)
    min_pts = max(10, int(0.25 * width / spacing)) if spacing > 0 else 10
    if direction > 0:
        i = int(np.searchsorted(V, anchor, "left"))
        while i < n:
            if not valid[i]:
                rest = np.nonzero(valid[i:])[0]
                if rest.size == 0:
                    return None
                i += int(rest[0])
                continue
            inv = np.nonzero(~valid[i:])[0]
            run_end = i + int(inv[0]) - 1 if inv.size else n - 1
            j = min(int(np.searchsorted(V, V[i] + width, "right")) - 1, run_end)
            if j - i + 1 >= min_pts:
                return float(V[i]), float(V[j])
            i = run_end + 1
        return None
    i = int(np.searchsorted(V, anchor, "right")) - 1
    while i >= 0:
        if not valid[i]:
            rest = np.nonzero(valid[: i + 1])[0]
            if rest.size == 0:
                return None
            i = int(rest[-1])
            continue
        inv = np.nonzero(~valid[: i + 1])[0]
        run_start = int(inv[-1]) + 1 if inv.size else 0
        j = max(int(np.searchsorted(V, V[i] - width, "left")), run_start)
        if i - j + 1 >= min_pts:
            return float(V[j]), float(V[i])
        i = run_start - 1
    return None


def find_limits(
    volume: Any,
    corrected: Any,
    *,
    noise: float,
    exclusions: Sequence[Window] = (),
    search: Window | None = None,
) -> Window:
    """Integration limits where the corrected signal returns to the baseline [mL].

    From the main peak outwards until the smoothed corrected signal falls to its own
    noise level, max(σ/√w, 1e-6 of the peak height), with σ the white-noise SD and w the
    width of the moving average (n/200 slices, at least 3). The low-M tail of a broad
    distribution carries many chains but little mass; stopping early (at, say, 1 % of
    the peak) raises Mn by several per cent, so the limits go as far as the signal can
    be told from zero, and the high-volume (low-M) limit one run of max(5, n/50) slices
    further still. Zero-mean noise integrated beyond that point does not bias the sums
    because negative heights are kept. With ``search`` [mL] the main peak's maximum is
    looked for inside that range only (the calibrated range, in :func:`correct_signal`),
    and a limit stops at the valley before a separate peak outside that range instead
    of running through it.
    """
    V, c, order = _as_trace(volume, corrected)
    return _find_limits_sorted(V[order], c[order], noise, exclusions, search)


def _find_limits_sorted(
    V: np.ndarray, c: np.ndarray, noise: float, exclusions: Sequence[Window], search: Window | None,
    sm: np.ndarray | None = None,
) -> Window:
    """:func:`find_limits` on a trace already checked and sorted by volume (``sm``: its
    moving average over max(3, n/200) slices, when already computed).
    """
    valid = ~_window_mask(V, exclusions)
    start, _, end = _peak_region(V, c, valid, noise, searchable=_search_mask(V, valid, search),
                                 stop_at_outside_peaks=search is not None, sm=sm)
    return float(V[start]), float(V[end])


def _larger_peak_outside(
    V: np.ndarray, corrected: np.ndarray, valid: np.ndarray, search: Window, sm: np.ndarray | None = None
) -> str | None:
    """A note when the smoothed signal peaks higher outside ``search`` than inside it.

    Excluded regions are the analyst's known peaks (flow marker, solvent) and are not
    reported. Heights are compared on the same moving average the peak search uses.
    """
    inside = _search_mask(V, valid, search)
    if inside is valid:  # the search range did not apply
        return None
    outside = valid & ~inside
    if not outside.any():
        return None
    if sm is None:
        sm = _smooth(corrected, max(3, V.size // 200))
    i_in = int(np.argmax(np.where(inside, sm, -np.inf)))
    i_out = int(np.argmax(np.where(outside, sm, -np.inf)))
    h_in, h_out = float(sm[i_in]), float(sm[i_out])
    if not (h_out > h_in > 0):
        return None
    return (
        f"a peak {h_out / h_in:.2g} times as high as the polymer peak ({V[i_in]:.3f} mL) stands at "
        f"{V[i_out]:.3f} mL, outside the calibrated range {search[0]:.3f}-{search[1]:.3f} mL; it was "
        "not taken as the polymer. If it is a system or solvent peak, exclude it "
        "(integration.exclude); if it is the polymer, extend the calibration"
    )


def correct_signal(
    volume: Any,
    signal: Any,
    *,
    windows: Sequence[Window] | None = None,
    limits: Window | None = None,
    exclusions: Sequence[Window] = (),
    search: Window | None = None,
) -> CorrectedSignal:
    """Subtract a linear baseline and set the integration window.

    Parameters
    ----------
    volume : array_like
        Elution volumes [mL] (any order; the work is done in order of increasing volume
        and the corrected signal and mask are returned in the order given).
    signal : array_like
        Raw detector response [signal units].
    windows : pair of (start, end), optional
        Baseline windows [mL]; automatic when omitted (see :func:`fit_baseline`).
    limits : (low, high), optional
        Integration limits [mL]; automatic when omitted (see :func:`find_limits`).
    exclusions : sequence of (start, end)
        Excluded regions [mL]: never part of the baseline or of the averages.
    search : (low, high), optional
        Where the polymer peak's maximum may lie [mL]; :func:`gpctools.batch.process_trace`
        passes the calibrated range (peak volumes of the first and last standard). A
        system or solvent peak outside it is then never taken for the polymer, however
        large (issue 10: a system peak three times the polymer's height gave Mn = 28 g/mol).
        When the automatic search runs (automatic windows or limits) and a larger peak
        stands outside the range and outside every excluded region, a
        :class:`~gpctools.errors.SignalWarning` says where. None searches the whole record.

    Returns
    -------
    CorrectedSignal
    """
    V_in, h_in, order = _as_trace(volume, signal)
    _refuse_flat(h_in)
    # Work in order of increasing volume; results are returned in the caller's slice order.
    V, h = V_in[order], h_in[order]
    exclusions = tuple((float(a), float(b)) for a, b in exclusions)
    for a, b in exclusions:
        if not a < b:
            raise DataError(f"excluded region {a:g}-{b:g} mL: start must be below end")
    sigma = noise_level(h[~_window_mask(V, exclusions)]) if (windows is None or limits is None) else None
    base = _fit_baseline_sorted(V, h, windows, exclusions, sigma, search)
    corrected = h - base(V)
    # the moving average of the limits' peak search, shared with the larger-peak check
    sm = _smooth(corrected, max(3, V.size // 200)) if sigma is not None and (search is not None or limits is None) else None
    notes: list[str] = []
    if search is not None and sigma is not None:
        note = _larger_peak_outside(V, corrected, ~_window_mask(V, exclusions), search, sm)
        if note:
            notes.append(note)
    if limits is None:
        assert sigma is not None  # computed above whenever the limits are automatic
        if float(np.abs(corrected).max()) <= HUGE_VALUE:  # finite and checked: no need to check again
            limits = _find_limits_sorted(V, corrected, sigma, exclusions, search, sm)
        else:  # the public function names the bad slice
            limits = find_limits(V, corrected, noise=sigma, exclusions=exclusions, search=search)
        # never integrate into the baseline windows themselves
        (_, before_end), (after_start, _) = base.windows
        lo = max(limits[0], before_end) if before_end < limits[1] else limits[0]
        hi = min(limits[1], after_start) if after_start > lo else limits[1]
        limits = (lo, hi)
        auto = True
    else:
        lo, hi = float(limits[0]), float(limits[1])
        if not lo < hi:
            raise DataError(f"integration limits {lo:g}-{hi:g} mL: low limit must be below high limit")
        if hi <= V[0] or lo >= V[-1]:
            raise DataError(
                f"integration limits {lo:g}-{hi:g} mL lie outside the recorded volumes "
                f"{V[0]:g}-{V[-1]:g} mL; set integration.limits inside them, or to \"auto\""
            )
        limits = (lo, hi)
        auto = False
    mask = (V >= limits[0]) & (V <= limits[1]) & ~_window_mask(V, exclusions)
    if mask.sum() < 5:
        raise DataError(
            f"only {int(mask.sum())} slices inside the integration limits {limits[0]:g}-{limits[1]:g} mL; "
            "widen the limits"
        )
    for a, b in base.windows:
        if a < limits[1] and b > limits[0]:
            notes.append(
                f"baseline window {a:.3g}-{b:.3g} mL overlaps the integration limits "
                f"{limits[0]:.4g}-{limits[1]:.4g} mL"
            )
    peak = float(np.max(corrected[mask]))
    if base.noise > 0 and peak / base.noise < 10:
        notes.append(f"low signal-to-noise ratio ({peak / base.noise:.1f}); averages are uncertain")
    for note in notes:
        warnings.warn(note, SignalWarning, stacklevel=2)
    back = np.empty_like(order)
    back[order] = np.arange(order.size)
    return CorrectedSignal(
        volume=V_in,
        signal=corrected[back],
        baseline=base,
        limits=(float(limits[0]), float(limits[1])),
        exclusions=exclusions,
        automatic_limits=auto,
        mask=mask[back],
        warnings=tuple(notes),
        search=None if search is None else (float(search[0]), float(search[1])),
    )


# -- several peaks ----------------------------------------------------------------------------
@dataclass(frozen=True, repr=False)
class Peaks(Display):
    """Maxima of a corrected trace and the valleys that separate them.

    Attributes
    ----------
    apex : tuple of float
        Volumes of the maxima, increasing (highest M first) [mL].
    height : tuple of float
        Smoothed heights at the maxima [signal units].
    valleys : tuple of float
        Volumes of the lowest smoothed point between consecutive maxima [mL]
        (``len(apex) - 1`` of them).
    valley_depth, min_height : float
        The criterion used (fractions, [-]).
    smoothing : int
        Width of the moving average, applied twice [slices].
    """

    apex: tuple[float, ...]
    height: tuple[float, ...]
    valleys: tuple[float, ...]
    valley_depth: float
    min_height: float
    smoothing: int

    @property
    def count(self) -> int:
        """Number of peaks [-]."""
        return len(self.apex)

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            "peaks": self.count,
            "apex [mL]": list(self.apex),
            "valleys [mL]": list(self.valleys),
            "valley depth [-]": self.valley_depth,
            "min height [-]": self.min_height,
            "smoothing [slices]": self.smoothing,
        }


def _maxima_with_dips(y: np.ndarray, delta: float) -> list[int]:
    """Indices of maxima of ``y`` separated from each other by dips of at least ``delta``.

    The classical peak-and-valley hysteresis ("a maximum counts once the curve has fallen
    ``delta`` below it, a minimum once it has risen ``delta`` above it"), run over the
    turning points of ``y`` only (between them ``y`` is monotonic, so the running extremes
    are reached at turning points): O(n) in numpy plus a loop over the turning points.
    """
    n = y.size
    if n < 3:
        return [int(np.argmax(y))] if n else []
    step = np.sign(np.diff(y))
    last = np.maximum.accumulate(np.where(step != 0, np.arange(step.size), 0))
    step = step[last]  # flat stretches take the direction before them
    turns = np.flatnonzero(step[1:] != step[:-1]) + 1
    points = np.concatenate(([0], turns, [n - 1]))
    maxima: list[int] = []
    hi, hi_i, lo = -math.inf, 0, math.inf
    looking_for_max = True
    for i, v in zip(points.tolist(), y[points].tolist()):
        if looking_for_max:
            if v > hi:
                hi, hi_i = v, i
            elif v < hi - delta:
                maxima.append(hi_i)
                lo, looking_for_max = v, False
        else:
            if v < lo:
                lo = v
            elif v > lo + delta:
                hi, hi_i, looking_for_max = v, i, True
    if looking_for_max and hi > -math.inf and (not maxima or maxima[-1] != hi_i):
        maxima.append(hi_i)
    return maxima


def find_peaks(
    volume: Any,
    signal: Any,
    *,
    mask: Any = None,
    noise: float | None = None,
    valley_depth: float = 0.10,
    min_height: float = 0.05,
) -> Peaks:
    """Maxima of a baseline-corrected trace separated by real valleys.

    The trace is smoothed by a moving average of w = max(3, n/200) slices applied twice
    (a triangular kernel; its noise SD is σ_s = σ·√(Σk²) for white noise σ). Two
    neighbouring maxima count as separate peaks when the lowest smoothed point between
    them, the valley v, satisfies both

        min(h1, h2) − v ≥ valley_depth · min(h1, h2)   and   min(h1, h2) − v ≥ 5·σ_s,

    and every peak stands at least ``min_height`` of the highest one. Otherwise the lower
    maximum is merged into its neighbour and the test is repeated. The relative depth
    keeps shoulders and ripples on the flanks from being called peaks; the 5·σ_s term
    keeps noise from making a valley on a flat top (a 5σ excursion of the smoothed
    trace has a one-sided probability below 3·10⁻⁷ per independent stretch;
    docs/science.md, section 19.5).

    Parameters
    ----------
    volume, signal : array_like
        The trace: volumes [mL] (any order) and baseline-corrected heights [signal units].
    mask : array_like of bool, optional
        Slices to search (the integration window); all by default.
    noise : float, optional
        White-noise SD of the signal [signal units]; :func:`noise_level` of the masked
        slices by default.
    valley_depth : float
        Required dip below the lower of two maxima, as a fraction of it [-] (default
        0.10: the valley at most 90 % of the lower peak).
    min_height : float
        Smallest peak, as a fraction of the highest [-] (default 0.05).

    Returns
    -------
    Peaks
    """
    V, h, order = _as_trace(volume, signal)
    V, h = V[order], h[order]
    sel = np.ones(V.shape, dtype=bool) if mask is None else np.asarray(mask, dtype=bool)[order]
    if not (0.0 < valley_depth < 1.0 and 0.0 <= min_height < 1.0):
        raise DataError("valley_depth must lie between 0 and 1 and min_height between 0 and 1")
    idx = np.flatnonzero(sel)
    width = max(3, V.size // 200) | 1
    empty = Peaks((), (), (), valley_depth, min_height, width)
    if idx.size < 3:
        return empty
    sigma = noise_level(h[idx]) if noise is None else float(noise)
    box = np.full(width, 1.0 / width)
    sigma_s = sigma * math.sqrt(float((np.convolve(box, box) ** 2).sum()))
    sm = _smooth(_smooth(h, width), width)[idx]
    top = float(sm.max())
    if not top > 0:
        return empty
    # Candidate maxima: those separated by dips of at least 5 σ_s (noise wiggles pruned);
    # the highest point is always a candidate.
    cand = _maxima_with_dips(sm, max(5.0 * sigma_s, 1e-12 * top))
    cand = sorted(set(cand) | {int(np.argmax(sm))})
    keep = [c for c in cand if sm[c] >= min_height * top]
    while len(keep) > 1:
        worst, worst_margin = None, math.inf
        for j in range(len(keep) - 1):
            a, b = keep[j], keep[j + 1]
            v = float(sm[a:b + 1].min())
            low = min(float(sm[a]), float(sm[b]))
            margin = min(low - v - valley_depth * low, low - v - 5.0 * sigma_s)
            if margin < 0 and margin < worst_margin:
                worst, worst_margin = j, margin
        if worst is None:
            break
        a, b = keep[worst], keep[worst + 1]
        keep.remove(a if sm[a] < sm[b] else b)
    valleys = []
    for a, b in zip(keep[:-1], keep[1:]):
        valleys.append(float(V[idx[a + int(np.argmin(sm[a:b + 1]))]]))
    return Peaks(
        apex=tuple(float(V[idx[k]]) for k in keep),
        height=tuple(float(sm[k]) for k in keep),
        valleys=tuple(valleys),
        valley_depth=float(valley_depth),
        min_height=float(min_height),
        smoothing=width,
    )
