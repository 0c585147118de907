"""Blank injections: a peak inside a product's integration window or not.

A blank (solvent only) run in the same sequence shows what the system adds to every
injection: carry-over from the previous sample, an impurity of the solvent, a late
system peak. For each product of the sequence the blank trace is

1. put on the flow-corrected volume axis (the blank's own flow marker);
2. given the straight baseline through the **same baseline windows** the product's
   injections used (:func:`gpctools.signal.fit_baseline`);
3. smoothed with a moving average of max(3, n/200) slices (white noise shrinks by the
   square root of that width, a peak several tenths of a mL wide hardly at all);

and its largest deviation |h| inside the product's integration limits (outside excluded
regions) is compared with the product's peak height in the same sequence (the mean over
its injections of the largest baseline-corrected height inside its limits):

    blank peak [% of product peak] = 100·max|h_blank| / h_product.

The blank passes when this is at most the limit (``max_blank_peak_pct``, 1 % by default,
common practice). Negative excursions count: a negative system peak inside the window
disturbs the sums as much as a positive one.

:func:`subtract_blank` removes a blank from an injection (optional, QC settings
``blank_subtraction``): the blank's signal, interpolated onto the injection's volumes
on the flow-corrected axis, is subtracted slice by slice; the injection's own baseline
then removes what offset remains.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.signal import fit_baseline

__all__ = ["ProductWindow", "BlankFinding", "check_blank", "subtract_blank", "smooth"]


@dataclass(frozen=True)
class ProductWindow:
    """What a blank is checked against for one product of a sequence.

    Attributes
    ----------
    product : str
    limits : (float, float)
        Integration limits of the product's injections [mL, flow-corrected].
    baseline_windows : pair of (float, float)
        Their baseline windows [mL].
    peak_height : float
        Mean largest baseline-corrected height of the product's injections [signal units].
    """

    product: str
    limits: tuple[float, float]
    baseline_windows: tuple[tuple[float, float], tuple[float, float]]
    peak_height: float


@dataclass(frozen=True, repr=False)
class BlankFinding(Display):
    """The largest blank peak in one product's window.

    Attributes
    ----------
    product : str
    peak_pct : float
        100·max|h_blank|/h_product [% of product peak].
    volume : float
        Where it is [mL].
    signed_height : float
        Its height with sign [signal units].
    window : (float, float)
        The product's limits [mL].
    """

    product: str
    peak_pct: float
    volume: float
    signed_height: float
    window: tuple[float, float]

    def text(self) -> str:
        """In words, for reports."""
        sign = "negative " if self.signed_height < 0 else ""
        return (f"{self.product} window {self.window[0]:.2f}-{self.window[1]:.2f} mL: largest {sign}peak "
                f"{self.peak_pct:.2f} % of the product peak at {self.volume:.2f} mL")

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {"product": self.product, "blank peak [% of product peak]": self.peak_pct,
                "at [mL]": self.volume, "window [mL]": list(self.window)}


def smooth(signal: np.ndarray) -> np.ndarray:
    """Moving average over max(3, n/200) slices (same length)."""
    w = max(3, signal.size // 200)
    return np.convolve(signal, np.ones(w) / w, mode="same")


def check_blank(volume: Any, signal: Any, windows: Sequence[ProductWindow], *,
                exclusions: Sequence[tuple[float, float]] = ()) -> list[BlankFinding]:
    """The largest peak of a blank inside each product's window (module documentation).

    Parameters
    ----------
    volume, signal : array_like
        The blank trace on the flow-corrected volume axis [mL], raw signal.
    windows : sequence of ProductWindow
    exclusions : sequence of (start, end)
        Excluded regions of the method [mL]: never searched.

    Returns
    -------
    list of BlankFinding
        One per product (products whose peak height is not positive are skipped).
    """
    V = np.asarray(volume, dtype=float)
    h = np.asarray(signal, dtype=float)
    order = np.argsort(V, kind="stable")
    V, h = V[order], h[order]
    out = []
    for pw in windows:
        if not (math.isfinite(pw.peak_height) and pw.peak_height > 0):
            continue
        base = fit_baseline(V, h, pw.baseline_windows, exclusions=exclusions)
        c = smooth(h - base(V))
        inside = (V >= pw.limits[0]) & (V <= pw.limits[1])
        for a, b in exclusions:
            inside &= ~((V >= a) & (V <= b))
        if not inside.any():
            continue
        idx = np.flatnonzero(inside)
        j = int(idx[np.argmax(np.abs(c[idx]))])
        out.append(BlankFinding(pw.product, float(100.0 * abs(c[j]) / pw.peak_height), float(V[j]),
                                float(c[j]), pw.limits))
    return out


def subtract_blank(volume: Any, signal: Any, blank_volume: Any, blank_signal: Any) -> np.ndarray:
    """An injection's signal minus a blank's, the blank interpolated onto its volumes.

    Both volume axes must already be flow-corrected [mL]; outside the blank's range the
    blank's end values are used (:func:`numpy.interp`).
    """
    V = np.asarray(volume, dtype=float)
    bv = np.asarray(blank_volume, dtype=float)
    bs = np.asarray(blank_signal, dtype=float)
    order = np.argsort(bv, kind="stable")
    return np.asarray(signal, dtype=float) - np.interp(V, bv[order], bs[order])
