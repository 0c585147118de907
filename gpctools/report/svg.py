"""Small inline-SVG line plots for the batch review page (no matplotlib).

The review page of ``gpctools batch`` draws two plots per injection. Drawing them with
matplotlib costs about 100 ms each; these plots are plain SVG text built with numpy
from downsampled curves (:func:`downsample`: the minimum and maximum of each of a few
hundred buckets, so peaks and spikes stay visible), about a millisecond per plot, and
they stay sharp at any zoom.

One :class:`SvgPlot` is one plot area with axes, ticks, labels and a legend in the
right margin, outside the data (legends never cover a curve). Colours of overlays are
the Okabe-Ito palette (:data:`OKABE_ITO`), chosen to stay distinguishable for the
common colour-vision deficiencies (Okabe and Ito, "Color Universal Design", 2002,
from memory); beyond eight curves the dash pattern changes too (:func:`style_of`).

All text put into the SVG is XML-escaped here; the page embeds the returned markup as
is (jinja2 ``|safe``).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from html import escape
from typing import Any

import numpy as np

__all__ = ["OKABE_ITO", "DASHES", "style_of", "downsample", "nice_ticks", "SvgPlot", "padded", "finite_range"]

#: Okabe-Ito colours, ordered for white paper (the yellow last: weakest on white).
OKABE_ITO = ("#0072B2", "#E69F00", "#009E73", "#D55E00", "#CC79A7", "#56B4E9", "#000000", "#F0E442")
#: Dash patterns (SVG ``stroke-dasharray``) that extend the palette past eight curves.
DASHES = ("", "6 3", "2 2", "8 3 2 3")
_INK = "#222222"
_GRID = "#e3e3e3"
_MUTED = "#666666"


def style_of(k: int) -> tuple[str, str]:
    """(colour, dash pattern) of the k-th overlay curve: 8 colours × 4 patterns."""
    return OKABE_ITO[k % len(OKABE_ITO)], DASHES[(k // len(OKABE_ITO)) % len(DASHES)]


def downsample(x: Any, y: Any, buckets: int = 300) -> tuple[np.ndarray, np.ndarray]:
    """At most ``2 * buckets`` points of a curve that keep its extremes.

    The points (in x order) are split into ``buckets`` runs of equal length; each run
    gives its lowest and its highest point, in their own order. A curve with fewer than
    ``2 * buckets`` points comes back unchanged. Non-finite points are dropped.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    ok = np.isfinite(x) & np.isfinite(y)
    if not ok.all():
        x, y = x[ok], y[ok]
    n = x.size
    if n <= 2 * buckets:
        return x, y
    size = -(-n // buckets)
    pad = size * buckets - n
    idx = np.concatenate([np.arange(n), np.full(pad, n - 1)]).reshape(buckets, size)
    yy = y[idx]
    lo = idx[np.arange(buckets), yy.argmin(axis=1)]
    hi = idx[np.arange(buckets), yy.argmax(axis=1)]
    keep = np.unique(np.concatenate([lo, hi]))
    return x[keep], y[keep]


def nice_ticks(lo: float, hi: float, count: int = 5) -> list[float]:
    """About ``count`` round tick values (1, 2, 2.5 or 5 × 10^k steps) within [lo, hi]."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo] if math.isfinite(lo) else []
    raw = (hi - lo) / max(count, 1)
    mag = 10.0 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1.0, 2.0, 2.5, 5.0, 10.0) if m * mag >= raw)
    start = math.ceil(lo / step - 1e-9) * step
    ticks = []
    v = start
    while v <= hi + 1e-9 * step:
        ticks.append(round(v, 12))
        v += step
    return ticks


def _tick_text(v: float) -> str:
    if v == 0:
        return "0"
    a = abs(v)
    if a >= 1e5 or a < 1e-3:
        return f"{v:.2g}".replace("e+0", "e").replace("e-0", "e-").replace("e+", "e")
    return f"{v:.6g}"


def _pow10(e: int) -> str:
    return f"10<tspan dy='-5' font-size='8'>{e}</tspan>"


class SvgPlot:
    """One plot area in SVG: data lines, bands, markers, axes and an outside legend.

    Parameters
    ----------
    xlim, ylim : (float, float)
        Data ranges of the axes (log10 of x when ``xlog``).
    width, height : int
        Size of the whole SVG [px]; the legend column takes ``legend_width`` of it.
    xlog, ylog : bool
        x (y) values are given as log10 and labelled as powers of ten.
    title, xlabel, ylabel : str
    uid : str
        Prefix of the ids inside the SVG (hatch pattern, clip path): ids are global in
        an HTML page, so every plot of a page needs its own.
    """

    def __init__(self, xlim: tuple[float, float], ylim: tuple[float, float], *, width: int = 720,
                 height: int = 230, xlog: bool = False, ylog: bool = False, title: str = "", xlabel: str = "", ylabel: str = "",
                 legend_width: int = 190, uid: str = "p") -> None:
        self.uid = "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in uid)
        x0, x1 = (float(v) for v in xlim)
        y0, y1 = (float(v) for v in ylim)
        if not x1 > x0:
            x0, x1 = x0 - 0.5, x0 + 0.5
        if not y1 > y0:
            y0, y1 = y0 - 0.5, y0 + 0.5
        self.xlim, self.ylim, self.xlog, self.ylog = (x0, x1), (y0, y1), xlog, ylog
        self.width, self.height = width, height
        self.left, self.right = 62, width - legend_width
        self.top, self.bottom = 22 if title else 10, height - 38
        self.title, self.xlabel, self.ylabel = title, xlabel, ylabel
        self._back: list[str] = []
        self._front: list[str] = []
        self._legend: list[tuple[str, str, str, str]] = []  # (kind, colour, dash, label)

    # -- coordinates ------------------------------------------------------------------
    def px(self, x: Any) -> np.ndarray:
        """Pixel x coordinates of data values ``x``."""
        x0, x1 = self.xlim
        return self.left + (np.asarray(x, dtype=float) - x0) * (self.right - self.left) / (x1 - x0)

    def py(self, y: Any) -> np.ndarray:
        """Pixel y coordinates of data values ``y``."""
        y0, y1 = self.ylim
        return self.bottom - (np.asarray(y, dtype=float) - y0) * (self.bottom - self.top) / (y1 - y0)

    def _points(self, x: Any, y: Any) -> str:
        X = np.clip(self.px(x), self.left - 1, self.right + 1)
        Y = np.clip(self.py(y), self.top - 1, self.bottom + 1)
        flat = np.column_stack([X, Y]).ravel().tolist()
        return ("%.1f,%.1f " * len(X) % tuple(flat))[:-1]  # one %-format over a flat tuple: fast

    # -- marks ------------------------------------------------------------------------
    def line(self, x: Any, y: Any, *, colour: str = OKABE_ITO[0], width: float = 1.3, dash: str = "",
             label: str | None = None) -> None:
        """A polyline through (x, y) in data units."""
        if len(x) == 0:
            return
        d = f" stroke-dasharray='{dash}'" if dash else ""
        self._front.append(f"<polyline fill='none' stroke='{colour}' stroke-width='{width}'{d} "
                           f"stroke-linejoin='round' points='{self._points(x, y)}'/>")
        if label:
            self._legend.append(("line", colour, dash, label))

    def area(self, x: Any, y_low: Any, y_high: Any, *, colour: str = OKABE_ITO[0], opacity: float = 0.15) -> None:
        """A filled region between two curves over the same x."""
        if len(x) == 0:
            return
        pts = self._points(np.concatenate([x, x[::-1]]), np.concatenate([y_high, np.asarray(y_low)[::-1]]))
        self._back.append(f"<polygon fill='{colour}' fill-opacity='{opacity}' stroke='none' points='{pts}'/>")

    def band(self, a: float, b: float, *, colour: str, opacity: float = 1.0, hatch: bool = False,
             label: str | None = None) -> None:
        """A vertical band from x = a to b over the whole plot height (hatched: excluded)."""
        xa, xb = (float(v) for v in np.clip(self.px([a, b]), self.left, self.right))
        if xb <= xa:
            return
        fill = f"url(#{self.uid}-hatch)" if hatch else colour
        self._back.append(f"<rect x='{xa:.1f}' y='{self.top}' width='{xb - xa:.1f}' height='{self.bottom - self.top}' "
                          f"fill='{fill}' fill-opacity='{opacity}'/>")
        if label and not any(lab == label for *_, lab in self._legend):
            self._legend.append(("hatch" if hatch else "band", colour, "", label))

    def vline(self, x: float, *, colour: str, dash: str = "", width: float = 1.2, label: str | None = None) -> None:
        """A vertical line at x (skipped outside the x range)."""
        if x is None or not math.isfinite(x) or not self.xlim[0] <= x <= self.xlim[1]:
            return
        X = float(self.px(x))
        d = f" stroke-dasharray='{dash}'" if dash else ""
        self._front.append(f"<line x1='{X:.1f}' x2='{X:.1f}' y1='{self.top}' y2='{self.bottom}' stroke='{colour}' "
                           f"stroke-width='{width}'{d}/>")
        if label:
            self._legend.append(("line", colour, dash, label))

    def points(self, x: Any, y: Any, *, colour: str, label: str | None = None, radius: float = 3.0,
               cross: Any = None) -> None:
        """Markers at (x, y); where ``cross`` is true, a cross instead of a dot."""
        X, Y = self.px(x), self.py(y)
        cross = np.zeros(len(X), bool) if cross is None else np.asarray(cross, bool)
        for a, b, c in zip(X.tolist(), Y.tolist(), cross.tolist()):
            if c:
                r = radius + 1
                self._front.append(f"<path d='M{a - r:.1f},{b - r:.1f}L{a + r:.1f},{b + r:.1f}M{a - r:.1f},"
                                   f"{b + r:.1f}L{a + r:.1f},{b - r:.1f}' stroke='#b3261e' stroke-width='2'/>")
            else:
                self._front.append(f"<circle cx='{a:.1f}' cy='{b:.1f}' r='{radius}' fill='{colour}'/>")
        if label:
            self._legend.append(("dot", colour, "", label))

    def hline(self, y: float, *, colour: str = _INK, dash: str = "", width: float = 0.8) -> None:
        """Draw a horizontal line at data value ``y`` across the plot area."""
        Y = float(self.py(y))
        d = f" stroke-dasharray='{dash}'" if dash else ""
        self._back.append(f"<line x1='{self.left}' x2='{self.right}' y1='{Y:.1f}' y2='{Y:.1f}' stroke='{colour}' "
                          f"stroke-width='{width}'{d}/>")

    def hband(self, y0: float, y1: float, *, colour: str) -> None:
        """Shade the horizontal band between data values ``y0`` and ``y1``."""
        a, b = sorted(float(v) for v in self.py([y0, y1]))
        a, b = max(a, self.top), min(b, self.bottom)
        if b > a:
            self._back.append(f"<rect x='{self.left}' y='{a:.1f}' width='{self.right - self.left}' "
                              f"height='{b - a:.1f}' fill='{colour}'/>")

    # -- axes -------------------------------------------------------------------------
    def _axes(self) -> list[str]:
        out = []
        xt, labels = _ticks(*self.xlim, log=self.xlog, n=8)
        for v, lab in zip(xt, labels):
            X = float(self.px(v))
            out.append(f"<line x1='{X:.1f}' x2='{X:.1f}' y1='{self.top}' y2='{self.bottom}' stroke='{_GRID}'/>")
            out.append(f"<text x='{X:.1f}' y='{self.bottom + 14}' text-anchor='middle'>{lab}</text>")
        yt, ylabels = _ticks(*self.ylim, log=self.ylog, n=4)
        for v, lab in zip(yt, ylabels):
            Y = float(self.py(v))
            out.append(f"<line x1='{self.left}' x2='{self.right}' y1='{Y:.1f}' y2='{Y:.1f}' stroke='{_GRID}'/>")
            out.append(f"<text x='{self.left - 4}' y='{Y + 3:.1f}' text-anchor='end'>{lab}</text>")
        out.append(f"<rect x='{self.left}' y='{self.top}' width='{self.right - self.left}' "
                   f"height='{self.bottom - self.top}' fill='none' stroke='#9a9a9a'/>")
        mid = (self.left + self.right) / 2
        out.append(f"<text x='{mid:.0f}' y='{self.height - 6}' text-anchor='middle'>{escape(self.xlabel)}</text>")
        ym = (self.top + self.bottom) / 2
        out.append(f"<text transform='translate(12,{ym:.0f}) rotate(-90)' text-anchor='middle'>"
                   f"{escape(self.ylabel)}</text>")
        if self.title:
            out.append(f"<text x='{self.left}' y='14' font-size='12' font-weight='600'>{escape(self.title)}</text>")
        return out

    def _legend_marks(self) -> list[str]:
        out = []
        x = self.right + 12
        y = self.top + 6
        for kind, colour, dash, label in self._legend:
            if kind == "line":
                d = f" stroke-dasharray='{dash}'" if dash else ""
                out.append(f"<line x1='{x}' x2='{x + 22}' y1='{y}' y2='{y}' stroke='{colour}' stroke-width='2'{d}/>")
            elif kind == "dot":
                out.append(f"<circle cx='{x + 11}' cy='{y}' r='3' fill='{colour}'/>")
            else:
                fill = f"url(#{self.uid}-hatch)" if kind == "hatch" else colour
                out.append(f"<rect x='{x}' y='{y - 5}' width='22' height='10' fill='{fill}' stroke='#bbbbbb'/>")
            text = label if len(label) <= 30 else label[:29] + "…"
            out.append(f"<text x='{x + 28}' y='{y + 4}'>{escape(text)}</text>")
            y += 15
        return out

    def render(self, *, label: str = "") -> str:
        """The ``<svg>`` element (with ``role="img"`` and ``aria-label`` = ``label`` or the title)."""
        aria = escape(label or self.title or "plot", quote=True)
        h = max(self.height, self.top + 15 * len(self._legend) + 6)  # a long legend makes the SVG taller
        head = (f"<svg xmlns='http://www.w3.org/2000/svg' class='plot' viewBox='0 0 {self.width} {h}' "
                f"width='{self.width}' height='{h}' role='img' aria-label='{aria}' "
                "font-family='DejaVu Sans, Arial, sans-serif' font-size='10' fill='#222222'>")
        defs = (f"<defs><pattern id='{self.uid}-hatch' width='6' height='6' patternUnits='userSpaceOnUse' "
                "patternTransform='rotate(45)'><line x1='0' y1='0' x2='0' y2='6' stroke='#9a9a9a' "
                "stroke-width='1.5'/></pattern>"
                f"<clipPath id='{self.uid}-clip'><rect x='{self.left}' y='{self.top}' width='{self.right - self.left}' "
                f"height='{self.bottom - self.top}'/></clipPath></defs>")
        body = [head, defs, *self._axes(), f"<g clip-path='url(#{self.uid}-clip)'>", *self._back, *self._front, "</g>",
                *self._legend_marks(), "</svg>"]
        return "".join(body)


def padded(lo: float, hi: float, frac: float = 0.04) -> tuple[float, float]:
    """(lo, hi) widened by ``frac`` of the span on each side."""
    span = hi - lo if hi > lo else (abs(hi) or 1.0)
    return lo - frac * span, hi + frac * span


def _ticks(lo: float, hi: float, *, log: bool, n: int) -> tuple[list[float], list[str]]:
    """Tick positions and their labels: every decade on a log axis (values are log10),
    else about ``n`` round numbers.
    """
    if log:
        ticks = [float(e) for e in range(math.ceil(lo - 1e-9), math.floor(hi + 1e-9) + 1)]
        return ticks, [_pow10(int(e)) for e in ticks]
    ticks = nice_ticks(lo, hi, n)
    return ticks, [escape(_tick_text(v)) for v in ticks]


def finite_range(*arrays: Sequence[float] | np.ndarray) -> tuple[float, float]:
    """Smallest and largest finite value over the arrays ((0, 1) when there is none)."""
    vals = [np.asarray(a, dtype=float) for a in arrays if len(a)]
    vals = [v[np.isfinite(v)] for v in vals]
    vals = [v for v in vals if v.size]
    if not vals:
        return 0.0, 1.0
    return float(min(v.min() for v in vals)), float(max(v.max() for v in vals))
