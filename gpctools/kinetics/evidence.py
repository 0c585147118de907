"""Evidence from the whole molar-mass distribution: its tails, and curves to overlay.

Two shape measures, each a mass fraction of the distribution relative to its own Mw, so
that a shift of every M by one factor (a flow error, a calibration drift, a chemistry
that lowers all chain lengths alike) leaves them unchanged:

- **low-M tail**: the mass with M < Mw/20. A low-M additive, oligomer or system peak
  inside the integration limits raises it; chemistry barely moves it.
- **high-M shoulder**: the mass with M > 5·Mw (gel effect, a second population, column
  overload). No single cause of the diagnosis predicts one; it is reported and counted.

For the instantaneous model distribution both follow in closed form [derived]: with τ
and β the chain stops per propagation step (:class:`gpctools.chainlength.MixedTermination`),
σ = τ + β, the mass distribution in chain length N is a mixture of gamma densities,
mass fraction τ/σ of shape 2 and β/σ of shape 3, both of rate σ, and DPw = (2τ + 3β)/σ²;
the fraction below n is (τ/σ)·P(2, σn) + (β/σ)·P(3, σn), P the regularised lower
incomplete gamma function. For a most-probable distribution (β = 0) the low-M tail is
1 − e^(−0.1)·1.1 = 0.47 % and the high-M shoulder e^(−10)·11 = 0.05 %; for pure
combination (τ = 0) 0.05 % and 0.00 % [derived].

Real samples are broader than the instantaneous distribution (conversion drift, band
broadening): a log-normal of Đ = 2.2 has a low-M tail of 0.17 % and a high-M shoulder of
1.2 % [derived: s² = ln 2.2]. The default σ of the measures covers that
(:data:`SIGMA_LOW_TAIL`, :data:`SIGMA_HIGH_SHOULDER`); with a normal batch's distribution
the expected measures are the normal batch's own.

A measured distribution comes from a distribution table (columns ``M [g/mol]`` and
``dw/dlogM [-]``, as gpctools batch writes it) or from a slice export processed with its
method (:func:`gpctools.batch.process_injection`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import InputFormatError

__all__ = [
    "LOW_TAIL_FACTOR",
    "HIGH_SHOULDER_FACTOR",
    "SIGMA_LOW_TAIL",
    "SIGMA_HIGH_SHOULDER",
    "MeasuredDistribution",
    "DistributionCurve",
    "Tails",
    "tails_of_curve",
    "model_tails",
    "read_distribution",
    "read_distributions",
    "distribution_from_chromatogram",
    "average_distributions",
]

#: The low-M tail is the mass below Mw × this factor.
LOW_TAIL_FACTOR = 1.0 / 20.0
#: The high-M shoulder is the mass above Mw × this factor.
HIGH_SHOULDER_FACTOR = 5.0
#: σ of the low-M tail [mass fraction]: 0.5 % (typical: baseline end and limit placement
#: move the low-M mass by a few tenths of a percent; broad real samples differ from the
#: model by less, module docstring).
SIGMA_LOW_TAIL = 0.005
#: σ of the high-M shoulder [mass fraction]: 1 % (typical: drift and band broadening put
#: about 1 % above 5·Mw that the instantaneous model lacks, module docstring).
SIGMA_HIGH_SHOULDER = 0.01


@dataclass(frozen=True)
class Tails:
    """Low-M tail and high-M shoulder mass fractions [-] and the Mw they refer to [g/mol]."""

    low: float
    high: float
    Mw: float


@dataclass(frozen=True)
class MeasuredDistribution:
    """A measured dw/dlog10 M [-] against M [g/mol], increasing M.

    ``Mn``, ``Mw`` [g/mol] are its averages; ``source`` the file(s) it came from.
    """

    M: np.ndarray
    dwdlogM: np.ndarray
    Mn: float
    Mw: float
    source: str
    flow_factor: float | None = None
    marker_observed: float | None = None
    Mn_shift_low_limit: float | None = None
    outside_calibration: float | None = None

    @property
    def tails(self) -> Tails:
        """Low-M tail and high-M shoulder of this distribution."""
        return tails_of_curve(self.M, self.dwdlogM)


@dataclass(frozen=True, repr=False)
class DistributionCurve(Display):
    """A curve for the overlay plot: dw/dlog10 M [-] against M [g/mol].

    ``kind`` is ``measured``, ``expected`` or ``cause``.
    """

    label: str
    kind: str
    M: np.ndarray = field(repr=False)
    dwdlogM: np.ndarray = field(repr=False)

    def summary(self) -> dict[str, Any]:
        """JSON-safe: label, kind and the peak [g/mol]."""
        i = int(np.argmax(self.dwdlogM))
        return {"label": self.label, "kind": self.kind, "peak M [g/mol]": float(self.M[i])}


def _trapz(y: np.ndarray, x: np.ndarray) -> float:
    """∫ y dx by trapezoids (numpy-version independent)."""
    return float(np.sum(0.5 * (y[1:] + y[:-1]) * np.diff(x)))


def _normalised(M: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    order = np.argsort(M)
    M, w = np.asarray(M, float)[order], np.asarray(w, float)[order]
    area = float(_trapz(w, np.log10(M)))
    if not area > 0:
        raise InputFormatError("the distribution holds no mass (dw/dlogM integrates to 0)")
    return M, w / area


def _averages(M: np.ndarray, w: np.ndarray) -> tuple[float, float]:
    x = np.log10(M)
    return (1.0 / float(_trapz(w / M, x)), float(_trapz(w * M, x)))


def tails_of_curve(M: Any, dwdlogM: Any) -> Tails:
    """Low-M tail and high-M shoulder of a dw/dlog10 M curve (trapezoids in log10 M).

    Parameters
    ----------
    M : array-like
        Molar masses [g/mol] (any order).
    dwdlogM : array-like
        dw/dlog10 M [-] (normalised here).
    """
    M, w = _normalised(np.asarray(M, float), np.asarray(dwdlogM, float))
    x = np.log10(M)
    Mw = float(_trapz(w * M, x))
    cum = np.concatenate([[0.0], np.cumsum(0.5 * (w[1:] + w[:-1]) * np.diff(x))])
    low = float(np.interp(math.log10(Mw * LOW_TAIL_FACTOR), x, cum, left=0.0, right=1.0))
    high = 1.0 - float(np.interp(math.log10(Mw * HIGH_SHOULDER_FACTOR), x, cum,
                                 left=0.0, right=1.0))
    return Tails(low=max(low, 0.0), high=max(high, 0.0), Mw=Mw)


def model_tails(tau: float, beta: float, M0: float = 1.0) -> Tails:
    """Tails of the instantaneous mixed-termination distribution (closed form, module doc)."""
    from scipy.special import gammainc, gammaincc

    sigma = tau + beta
    a2, a3 = tau / sigma, beta / sigma
    DPw = (2.0 * tau + 3.0 * beta) / sigma**2
    x_low = sigma * DPw * LOW_TAIL_FACTOR
    x_high = sigma * DPw * HIGH_SHOULDER_FACTOR
    low = a2 * float(gammainc(2, x_low)) + a3 * float(gammainc(3, x_low))
    high = a2 * float(gammaincc(2, x_high)) + a3 * float(gammaincc(3, x_high))
    return Tails(low=low, high=high, Mw=M0 * DPw)


def read_distribution(path: str | Path) -> MeasuredDistribution:
    """A distribution table (``M [g/mol]`` and ``dw/dlogM [-]`` columns; CSV or XLSX)."""
    from gpctools.io import read_sheet

    return _measured(read_sheet(path), path)


def _measured(df: Any, path: str | Path) -> MeasuredDistribution:
    """The distribution in the ``M [g/mol]`` and ``dw/dlogM [-]`` columns of a table."""
    from gpctools.sheets.cells import parse_number

    cols = {str(c).strip().lower(): c for c in df.columns}
    mcol, wcol = cols.get("m [g/mol]"), cols.get("dw/dlogm [-]") or cols.get("dw/dlogm")
    if mcol is None or wcol is None:
        raise InputFormatError(
            "a distribution table needs 'M [g/mol]' and 'dw/dlogM [-]' columns (as gpctools "
            f"batch writes them in distributions.csv and distributions/); found {', '.join(map(str, df.columns))}",
            path=path)
    M = np.array([parse_number(v) for v in df[mcol]], dtype=float)
    w = np.array([parse_number(v) for v in df[wcol]], dtype=float)
    ok = np.isfinite(M) & np.isfinite(w) & (M > 0)
    if ok.sum() < 10:
        raise InputFormatError("the distribution table has fewer than 10 usable rows", path=path)
    Ms, ws = _normalised(M[ok], w[ok])
    Mn, Mw = _averages(Ms, ws)
    return MeasuredDistribution(Ms, ws, Mn, Mw, str(path))


def read_distributions(path: str | Path, sample_id: str | None = None) -> list[MeasuredDistribution]:
    """The distributions of one sample in a table: one per injection.

    A per-injection table (``distributions/<sample>_row<n>.csv``) gives one. The
    long-form table of a batch (``distributions.csv``: ``sample_id``, ``file``, ``sheet
    row [-]``, ``M [g/mol]``, ``dw/dlogM [-]``, ...) gives one per injection (file and
    sheet row) of ``sample_id`` (the only sample when None).

    Raises
    ------
    InputFormatError
        Missing columns, too few rows, a sample the table does not hold, or several
        samples and none chosen.
    """
    from gpctools.io import read_sheet

    df = read_sheet(path)
    cols = {str(c).strip().lower(): c for c in df.columns}
    scol = cols.get("sample_id")
    if scol is None:
        return [_measured(df, path)]
    ids = df[scol].astype(str).str.strip()
    names = list(dict.fromkeys(ids))
    if sample_id is None:
        if len(names) != 1:
            raise InputFormatError(f"the distributions table holds {len(names)} samples; name one "
                                   "(--sample)", path=path, column="sample_id")
        sample_id = names[0]
    rows = df[ids == str(sample_id).strip()]
    if rows.empty:
        raise InputFormatError(f"the distributions table has no rows of sample {sample_id!r}",
                               path=path, column="sample_id")
    keys = [cols[k] for k in ("file", "sheet row [-]") if k in cols]
    if not keys:
        return [_measured(rows, path)]
    return [_measured(part, f"{path} ({', '.join(map(str, key))})")
            for key, part in rows.groupby(keys, sort=False)]


def average_distributions(parts: list[MeasuredDistribution]) -> MeasuredDistribution:
    """Replicate injections averaged on a common log M grid (400 points)."""
    if len(parts) == 1:
        return parts[0]
    lo = max(float(np.log10(p.M[0])) for p in parts)
    hi = min(float(np.log10(p.M[-1])) for p in parts)
    if not hi > lo:
        return parts[0]
    x = np.linspace(lo, hi, 400)
    w = np.mean([np.interp(x, np.log10(p.M), p.dwdlogM) for p in parts], axis=0)
    M, ws = _normalised(10**x, w)
    Mn, Mw = _averages(M, ws)
    return MeasuredDistribution(M, ws, Mn, Mw, "; ".join(p.source for p in parts))


def distribution_from_chromatogram(path: str | Path, method_path: str | Path) -> MeasuredDistribution:
    """Process a slice export with its method file and take its distribution and checks."""
    from gpctools.batch import process_injection
    from gpctools.method import load_method

    res = process_injection(path, load_method(method_path))
    d = res.distribution
    M, w = _normalised(np.asarray(d.M), np.asarray(d.dwdlogM))
    return MeasuredDistribution(
        M, w, float(d.Mn), float(d.Mw), str(path), flow_factor=res.flow_factor,
        marker_observed=res.marker_observed, Mn_shift_low_limit=res.Mn_shift_pct,
        outside_calibration=100.0 * float(d.outside_fraction))
