"""Synthetic chromatograms from known molar-mass distributions (demo data and tests).

A distribution is a vectorised callable ``f(M) -> dw/dlog10 M`` normalised to unit area
over log10 M. Through a calibration log10 M(V) the concentration-detector trace is the
mass per unit volume,

    h(V) = dw/dlogM (M(V)) · |d log10 M / dV|,

to which a baseline offset, a linear drift, white noise and extra peaks (solvent, flow
marker) can be added. Analytic averages of each distribution are exposed as
``f.averages`` so a test or the demo can compare the analysis with the truth.

Distributions (all from their standard definitions):

- Schulz-Zimm weight distribution f_w(M) ∝ M^b e^(-aM) with a = b/Mn (IUPAC Gold Book,
  "Schulz-Zimm distribution"): Mn = b/a, Mw = (b+1)/a, Mz = (b+2)/a, Mz+1 = (b+3)/a.
- Most probable (Flory) distribution: Schulz-Zimm with b = 1.
- Log-normal in M: dw/dlnM Gaussian with mean μ and SD s: Mp(dw/dlogM) = e^μ,
  Mn = e^(μ - s²/2), Mw = e^(μ + s²/2), Mz = e^(μ + 3s²/2), Mz+1 = e^(μ + 5s²/2), Đ = e^(s²).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from scipy.special import gammaln

from .calibration import Calibration, fit_calibration
from .errors import DataError

__all__ = [
    "DistributionModel",
    "schulz_zimm",
    "most_probable",
    "lognormal",
    "mixture",
    "chromatogram",
    "default_calibration",
    "DEFAULT_STANDARDS",
    "write_chromatogram",
]

LN10 = math.log(10.0)


@dataclass(frozen=True)
class DistributionModel:
    """A callable dw/dlog10 M with its exact averages.

    Attributes
    ----------
    func : callable
        ``func(M) -> dw/dlog10 M`` for an array of M [g/mol].
    averages : dict
        Exact ``Mn``, ``Mw``, ``Mz``, ``Mz1`` [g/mol], ``dispersity`` [-] and the
        dw/dlogM peak ``Mp_dwdlogM`` [g/mol].
    label : str
    """

    func: Callable[[np.ndarray], np.ndarray]
    averages: dict[str, float]
    label: str

    def __call__(self, M: Any) -> np.ndarray:
        return self.func(np.asarray(M, dtype=float))


def schulz_zimm(Mn: float, b: float) -> DistributionModel:
    """Schulz-Zimm distribution with number average Mn [g/mol] and shape b [-].

    f_w(M) = a^(b+1) M^b e^(-aM) / Γ(b+1), a = b/Mn, and dw/dlog10 M = ln10 · M · f_w(M).
    The dw/dlogM maximum is at M = (b+1)/a = Mw.
    """
    if not (Mn > 0 and b > 0):
        raise DataError(f"Schulz-Zimm needs Mn > 0 and b > 0, got Mn={Mn!r}, b={b!r}")
    a = b / Mn
    lognorm = (b + 1) * math.log(a) - gammaln(b + 1)

    def f(M: np.ndarray) -> np.ndarray:
        M = np.asarray(M, dtype=float)
        with np.errstate(divide="ignore"):
            out = LN10 * np.exp(lognorm + (b + 1) * np.log(M) - a * M)
        return np.where(M > 0, out, 0.0)

    avg = {
        "Mn": b / a,
        "Mw": (b + 1) / a,
        "Mz": (b + 2) / a,
        "Mz1": (b + 3) / a,
        "dispersity": (b + 1) / b,
        "Mp_dwdlogM": (b + 1) / a,
    }
    return DistributionModel(f, avg, f"Schulz-Zimm (Mn={Mn:g}, b={b:g})")


def most_probable(Mn: float) -> DistributionModel:
    """Most probable (Flory) distribution, Schulz-Zimm with b = 1: Mw = 2Mn, Mz = 3Mn."""
    m = schulz_zimm(Mn, 1.0)
    return DistributionModel(m.func, m.averages, f"most probable (Mn={Mn:g})")


def lognormal(Mp: float, dispersity: float) -> DistributionModel:
    """Log-normal distribution with dw/dlogM peak Mp [g/mol] and dispersity Đ > 1 [-]."""
    if not (Mp > 0 and dispersity > 1):
        raise DataError(f"log-normal needs Mp > 0 and dispersity > 1, got {Mp!r}, {dispersity!r}")
    mu = math.log(Mp)
    s2 = math.log(dispersity)
    s = math.sqrt(s2)

    def f(M: np.ndarray) -> np.ndarray:
        M = np.asarray(M, dtype=float)
        with np.errstate(divide="ignore"):
            z = (np.log(M) - mu) / s
        return LN10 * np.exp(-0.5 * z * z) / (s * math.sqrt(2 * math.pi))

    avg = {
        "Mn": math.exp(mu - s2 / 2),
        "Mw": math.exp(mu + s2 / 2),
        "Mz": math.exp(mu + 3 * s2 / 2),
        "Mz1": math.exp(mu + 5 * s2 / 2),
        "dispersity": dispersity,
        "Mp_dwdlogM": Mp,
    }
    return DistributionModel(f, avg, f"log-normal (Mp={Mp:g}, D={dispersity:g})")


def mixture(parts: Sequence[tuple[float, DistributionModel]]) -> DistributionModel:
    """Mass-weighted mixture Σ m_k f_k of distributions (weights normalised to 1).

    Averages follow from the moments: 1/Mn = Σ m_k/Mn_k, Mw = Σ m_k Mw_k,
    Mz = Σ m_k Mw_k Mz_k / Mw, Mz+1 = Σ m_k Mw_k Mz_k Mz1_k / (Mw Mz). The mixture's
    dw/dlogM peak is not exposed (it has no closed form).
    """
    weights = np.array([float(m) for m, _ in parts])
    if weights.size == 0 or np.any(weights < 0) or weights.sum() <= 0:
        raise DataError("mixture weights must be non-negative and not all zero")
    weights = weights / weights.sum()
    models = [d for _, d in parts]

    def f(M: np.ndarray) -> np.ndarray:
        return sum(wk * d(M) for wk, d in zip(weights, models))

    Mn = 1.0 / sum(wk / d.averages["Mn"] for wk, d in zip(weights, models))
    s1 = sum(wk * d.averages["Mw"] for wk, d in zip(weights, models))
    s2 = sum(wk * d.averages["Mw"] * d.averages["Mz"] for wk, d in zip(weights, models))
    s3 = sum(wk * d.averages["Mw"] * d.averages["Mz"] * d.averages["Mz1"] for wk, d in zip(weights, models))
    avg = {"Mn": Mn, "Mw": s1, "Mz": s2 / s1, "Mz1": s3 / s2, "dispersity": s1 / Mn, "Mp_dwdlogM": float("nan")}
    return DistributionModel(f, avg, "mixture")


# Polystyrene narrow standards of an invented 3-column set, 10 standards, peak volumes in mL
# at 1.0 mL/min. Only used to build the demo and test calibration (SCIENCE.md section 2:
# 8-10 evenly spread standards).
DEFAULT_STANDARDS: tuple[tuple[str, float, float], ...] = (
    ("PS 2.5M", 2.52e6, 11.20),
    ("PS 1.1M", 1.11e6, 12.05),
    ("PS 480k", 4.80e5, 13.00),
    ("PS 200k", 2.00e5, 14.05),
    ("PS 96k", 9.60e4, 15.00),
    ("PS 42k", 4.20e4, 16.10),
    ("PS 19k", 1.90e4, 17.15),
    ("PS 8.4k", 8.40e3, 18.25),
    ("PS 3.2k", 3.20e3, 19.50),
    ("PS 1.3k", 1.30e3, 20.60),
)


def default_calibration(order: int = 3) -> Calibration:
    """A realistic polystyrene calibration from :data:`DEFAULT_STANDARDS`."""
    names, Mp, V = zip(*DEFAULT_STANDARDS)
    return fit_calibration(V, Mp, order=order, names=names, standard_polymer="polystyrene")


def chromatogram(
    distribution: Callable[[np.ndarray], np.ndarray],
    calibration: Calibration,
    *,
    volume: Any = None,
    height: float = 100.0,
    baseline_offset: float = 0.0,
    baseline_drift: float = 0.0,
    noise: float = 0.0,
    extra_peaks: Sequence[tuple[float, float, float]] = (),
    seed: int | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Detector trace of a distribution through a calibration.

    Parameters
    ----------
    distribution : callable
        dw/dlog10 M as a function of M [g/mol].
    calibration : Calibration
        The curve log10 M(V) used to place the mass on the volume axis.
    volume : array_like, optional
        Slice volumes [mL]; default 6,000 equal slices from 8 to 26 mL.
    height : float
        Peak height of the polymer signal after scaling [signal units].
    baseline_offset : float
        Constant added to the signal [signal units].
    baseline_drift : float
        Linear drift [signal units per mL], zero at the first slice.
    noise : float
        SD of added Gaussian white noise [signal units].
    extra_peaks : sequence of (centre [mL], SD [mL], height [signal units])
        Gaussian peaks added on top (solvent, system or flow-marker peaks).
    seed : int, optional
        Seed of the noise generator (reproducible data).

    Returns
    -------
    volume, signal : ndarray
    """
    V = np.linspace(8.0, 26.0, 6000) if volume is None else np.asarray(volume, dtype=float)
    M = calibration.M(V)
    h = np.asarray(distribution(M), dtype=float) * np.abs(calibration.dlogM_dV(V))
    peak = float(h.max())
    if peak <= 0:
        raise DataError("the distribution puts no mass inside the simulated volume range")
    h = h * (height / peak)
    h = h + baseline_offset + baseline_drift * (V - V[0])
    for centre, sd, hgt in extra_peaks:
        h = h + hgt * np.exp(-0.5 * ((V - centre) / sd) ** 2)
    if noise > 0:
        rng = np.random.default_rng(seed)
        h = h + rng.normal(0.0, noise, size=V.size)
    return V, h


def write_chromatogram(
    path: str | Path,
    volume: Any,
    signal: Any,
    *,
    x: str = "volume",
    flow_rate: float = 1.0,
    separator: str = ",",
    decimal: str = ".",
    encoding: str = "utf-8",
    metadata: dict[str, str] | None = None,
    signal_header: str = "RI signal [mV]",
    extra_column: bool = False,
) -> Path:
    """Write a synthetic trace as a slice-export text file (atomically).

    Parameters
    ----------
    x : {"volume", "time_min", "time_s"}
        Whether the first column is elution volume [mL] or retention time [min] or [s]
        (converted with ``flow_rate`` [mL/min]).
    separator, decimal, encoding : str
        Text dialect (e.g. ``";"``, ``","`` and ``"utf-16"`` for a decimal-comma export).
    metadata : dict, optional
        ``key: value`` lines written above the header row.
    extra_column : bool
        Add a second-detector column (ignored by the reader unless chosen).
    """
    from .report.files import write_text

    V = np.asarray(volume, dtype=float)
    h = np.asarray(signal, dtype=float)
    if x == "volume":
        xs, head = V, "Elution volume [mL]"
    elif x == "time_min":
        xs, head = V / flow_rate, "Retention time [min]"
    elif x == "time_s":
        xs, head = V / flow_rate * 60.0, "Retention time [s]"
    else:
        raise DataError(f"x must be 'volume', 'time_min' or 'time_s', got {x!r}")
    lines = []
    for k, v in (metadata or {}).items():
        lines.append(f"{k}: {v}")
    cols = [head, signal_header] + (["UV 254 nm [mAU]"] if extra_column else [])
    lines.append(separator.join(cols))
    fmt_x = np.char.mod("%.6f", xs)
    fmt_h = np.char.mod("%.6f", h)
    if decimal != ".":
        fmt_x = np.char.replace(fmt_x, ".", decimal)
        fmt_h = np.char.replace(fmt_h, ".", decimal)
    if extra_column:
        uv = np.char.mod("%.4f", 0.3 * h + 1.0)
        if decimal != ".":
            uv = np.char.replace(uv, ".", decimal)
        body = [separator.join(t) for t in zip(fmt_x, fmt_h, uv)]
    else:
        body = [separator.join(t) for t in zip(fmt_x, fmt_h)]
    text = "\n".join(lines + body) + "\n"
    if encoding.lower().replace("-", "") in ("utf16", "utf16le", "utf16be"):
        return write_text(path, text, encoding="utf-16")
    if encoding.lower() in ("utf-8-sig", "utf8-sig"):
        return write_text(path, text, encoding="utf-8-sig")
    return write_text(path, text, encoding=encoding)
