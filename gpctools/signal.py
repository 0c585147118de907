"""Baseline, integration limits and excluded regions of one concentration-detector trace.

The baseline is a straight line through the means of two signal-free windows, one before
the polymer elutes and one after it but before solvent, system or flow-marker peaks
(SCIENCE.md section 1; a mean over each window rather than a single point, common
practice). When no windows are given they are chosen automatically and the choice is
reported. Integration limits are either given or found where the corrected signal returns
to the baseline. Negative heights after subtraction are noise and are kept (see
:mod:`gpctools.distribution` for how the sums treat them).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .errors import DataError, SignalWarning

__all__ = ["Baseline", "CorrectedSignal", "fit_baseline", "find_limits", "correct_signal", "noise_level"]

Window = tuple[float, float]


@dataclass(frozen=True)
class Baseline:
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
    """

    windows: tuple[Window, Window]
    slope: float
    intercept: float
    noise: float
    automatic: bool

    def __call__(self, volume: Any) -> np.ndarray:
        return self.intercept + self.slope * np.asarray(volume, dtype=float)

    def summary(self) -> dict[str, Any]:
        return {
            "windows [mL]": [list(w) for w in self.windows],
            "slope [signal/mL]": self.slope,
            "intercept [signal]": self.intercept,
            "noise SD [signal]": self.noise,
            "automatic": self.automatic,
        }


@dataclass(frozen=True)
class CorrectedSignal:
    """Baseline-corrected trace with the integration window and exclusions.

    ``mask`` selects the slices that enter the averages: inside ``limits`` and outside
    every excluded region.
    """

    volume: np.ndarray
    signal: np.ndarray
    baseline: Baseline
    limits: Window
    exclusions: tuple[Window, ...]
    automatic_limits: bool
    mask: np.ndarray
    warnings: tuple[str, ...] = ()

    def summary(self) -> dict[str, Any]:
        return {
            "baseline": self.baseline.summary(),
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


def noise_level(signal: np.ndarray) -> float:
    """Robust white-noise SD from point-to-point differences [signal units].

    σ ≈ 1.4826·MAD(Δh)/√2: differencing removes the slowly varying peak and baseline,
    the median absolute deviation ignores the few large steps on peak flanks (common
    practice in signal processing).
    """
    d = np.diff(np.asarray(signal, dtype=float))
    if d.size == 0:
        return 0.0
    mad = float(np.median(np.abs(d - np.median(d))))
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


def _line_through_windows(volume, signal, windows) -> tuple[float, float, float]:
    pts = []
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
        pts.append((float(volume[sl].mean()), float(signal[sl].mean())))
        resid_parts.append(sl)
    (v1, h1), (v2, h2) = pts
    slope = (h2 - h1) / (v2 - v1) if v2 != v1 else 0.0
    intercept = h1 - slope * v1
    vv = np.concatenate([volume[sl] for sl in resid_parts])
    r = np.concatenate([signal[sl] for sl in resid_parts]) - (intercept + slope * vv)
    noise = float(r.std(ddof=1)) if r.size > 2 else 0.0
    return slope, intercept, noise


def _peak_region(volume, corrected, valid, noise, ref_scale=None) -> tuple[int, int, int]:
    """Indices (start, peak, end) of the main peak where the smoothed signal exceeds a threshold."""
    n = corrected.size
    width = max(3, n // 200)
    sm = _smooth(corrected, width)
    candidates = np.where(valid, sm, -np.inf)
    ipk = int(np.argmax(candidates))
    height = sm[ipk]
    scale = ref_scale if ref_scale is not None else (float(np.max(np.abs(corrected))) if n else 0.0)
    if not math.isfinite(height) or height <= 0 or height <= 1e-9 * scale or (
        noise > 0 and height < 5.0 * noise / math.sqrt(width)
    ):
        raise DataError(
            "no positive peak stands out of the noise (the smoothed signal never exceeds 5 "
            "times its noise level); check the signal column, the baseline windows and the "
            "injection"
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


def fit_baseline(
    volume: Any,
    signal: Any,
    windows: Sequence[Window] | None = None,
    *,
    exclusions: Sequence[Window] = (),
    noise: float | None = None,
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

    Returns
    -------
    Baseline
    """
    V, h, order = _as_trace(volume, signal)
    V, h = V[order], h[order]
    if windows is not None:
        windows = tuple((float(a), float(b)) for a, b in windows)
        if len(windows) != 2:
            raise DataError(f"give exactly two baseline windows (before and after the peak), got {len(windows)}")
        for a, b in windows:
            if not a < b:
                raise DataError(f"baseline window {a:g}-{b:g} mL: start must be below end")
        slope, intercept, noise = _line_through_windows(V, h, windows)
        return Baseline(windows, slope, intercept, noise, automatic=False)

    valid = ~_window_mask(V, exclusions)
    span = V[-1] - V[0]
    width = 0.05 * span
    if int(valid.sum()) < 20:
        raise DataError("too few slices outside the excluded regions to place a baseline")
    # First guess: the two ends of the usable record.
    guess = (_place_window(V, valid, V[0], width, +1), _place_window(V, valid, V[-1], width, -1))
    if guess[0] is None or guess[1] is None:
        raise DataError("no room for baseline windows at the ends of the record; give baseline.windows")
    slope, intercept, noise = _line_through_windows(V, h, guess)
    sigma = noise_level(h[valid]) if noise is None else float(noise)
    ref_scale = float(np.max(np.abs(h)))
    corrected = h - (intercept + slope * V)
    start, _ipk, end = _peak_region(V, corrected, valid, sigma, ref_scale)
    gap = 0.1 * (V[end] - V[start])
    # Preferred: just outside the feet with a gap; else touching the feet; else the
    # record ends (a foot found at 1e-6 of a noise-free peak can reach the record end).
    before = (_place_window(V, valid, V[start] - gap, width, -1)
              or _place_window(V, valid, V[start], width, -1)
              or _place_window(V, valid, V[0], width, +1))
    after = (_place_window(V, valid, V[end] + gap, width, +1)
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
    slope, intercept, noise = _line_through_windows(V, h, chosen)
    return Baseline(chosen, slope, intercept, noise, automatic=True)


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
) -> Window:
    """Integration limits where the corrected signal returns to the baseline [mL].

    From the main peak outwards until the smoothed corrected signal falls to its own
    noise level, max(σ/√w, 1e-6 of the peak height), with σ the white-noise SD and w the
    width of the moving average (n/200 slices, at least 3). The low-M tail of a broad
    distribution carries many chains but little mass; stopping early (at, say, 1 % of
    the peak) raises Mn by several per cent, so the limits go as far as the signal can
    be told from zero, and the high-volume (low-M) limit one run of max(5, n/50) slices
    further still. Zero-mean noise integrated beyond that point does not bias the sums
    because negative heights are kept.
    """
    V, c, order = _as_trace(volume, corrected)
    V, c = V[order], c[order]
    valid = ~_window_mask(V, exclusions)
    start, _, end = _peak_region(V, c, valid, noise)
    return float(V[start]), float(V[end])


def correct_signal(
    volume: Any,
    signal: Any,
    *,
    windows: Sequence[Window] | None = None,
    limits: Window | None = None,
    exclusions: Sequence[Window] = (),
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
    base = fit_baseline(V, h, windows, exclusions=exclusions, noise=sigma)
    corrected = h - base(V)
    notes: list[str] = []
    if limits is None:
        limits = find_limits(V, corrected, noise=sigma, exclusions=exclusions)
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
    )
