"""The one generator of synthetic data: exports, run series and diagnosis cases.

Everything here is the *truth side* of tests and of the demo (``gpctools.demo`` holds the
invented scenarios and writes their files), built from the chain-length formulas of
:mod:`gpctools.chainlength` and independently of the analysis code.

**Exports.** A distribution is a vectorised callable ``f(M) -> dw/dlog10 M`` normalised to
unit area over log10 M (a :class:`~gpctools.chainlength.DistributionModel`, whose exact
averages are in ``f.averages``). Through a calibration log10 M(V) the
concentration-detector trace is the mass per unit volume,

    h(V) = dw/dlogM (M(V)) · |d log10 M / dV|,

to which a baseline offset, a linear drift, white noise and extra peaks (solvent, flow
marker) can be added (:func:`chromatogram`), and which :func:`export_text` turns into the
text of a slice export in several dialects (:func:`gpctools.demo.write_chromatogram`
writes it: this module writes no file).

Distributions (all from their standard definitions):

- Schulz-Zimm weight distribution f_w(M) ∝ M^b e^(-aM) with a = b/Mn (IUPAC Gold Book,
  "Schulz-Zimm distribution"): Mn = b/a, Mw = (b+1)/a, Mz = (b+2)/a, Mz+1 = (b+3)/a.
- Most probable (Flory), instantaneous with mixed termination, and cumulative over
  conversion: :mod:`gpctools.chainlength`.
- Log-normal in M: dw/dlnM Gaussian with mean μ and SD s: Mp(dw/dlogM) = e^μ,
  Mn = e^(μ - s²/2), Mw = e^(μ + s²/2), Mz = e^(μ + 3s²/2), Mz+1 = e^(μ + 5s²/2), Đ = e^(s²).

**Run series.** :func:`simulate_series` gives the rows of a run-series sheet (Mn, Mw of the
cumulative most-probable polymer at each run's conversion); for chromatograms of a run,
pass :func:`gpctools.chainlength.cumulative_most_probable` to :func:`chromatogram`.

**Diagnosis cases.** The exports of a case's lots are Schulz-Zimm traces with the lots'
Mn and Mw (:func:`schulz_zimm_from_averages`); the lots' values come from the recipe
model (:mod:`gpctools.kinetics.predict`), which this module does not import, so that it
stays below every analysis layer.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np
from scipy.special import gammaln

from .calibration import Calibration, fit_calibration
from .chainlength import DistributionModel, cumulative_averages
from .errors import DataError

__all__ = [
    "schulz_zimm",
    "schulz_zimm_from_averages",
    "lognormal",
    "mixture",
    "chromatogram",
    "default_calibration",
    "DEFAULT_STANDARDS",
    "export_text",
    "averages_from_dwdlogM",
    "multi_detector_traces",
    "multi_detector_export",
    "simulate_series",
    "kinetic_series",
]

LN10 = math.log(10.0)


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


def schulz_zimm_from_averages(Mn: float, Mw: float) -> DistributionModel:
    """Schulz-Zimm distribution with given Mn and Mw [g/mol], Mw > Mn.

    Đ = (b+1)/b gives b = 1/(Mw/Mn − 1) (IUPAC Gold Book, "Schulz-Zimm distribution").
    """
    if not (Mn > 0 and Mw > Mn):
        raise DataError(f"Schulz-Zimm averages need Mw > Mn > 0, got Mn={Mn!r}, Mw={Mw!r}")
    return schulz_zimm(Mn, 1.0 / (Mw / Mn - 1.0))


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
# at 1.0 mL/min. Only used to build the demo and test calibration (docs/science.md, section 2:
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


def export_text(
    volume: Any,
    signal: Any,
    *,
    x: str = "volume",
    flow_rate: float = 1.0,
    separator: str = ",",
    decimal: str = ".",
    metadata: dict[str, str] | None = None,
    signal_header: str = "RI signal [mV]",
    extra_column: bool = False,
) -> str:
    """A synthetic trace as the text of a slice export (nothing is written).

    :func:`gpctools.demo.write_chromatogram` writes it to a file in a chosen encoding.

    Parameters
    ----------
    volume : array-like
        Elution volume of each slice [mL].
    signal : array-like
        Detector response of each slice [detector units].
    x : {"volume", "time_min", "time_s"}
        Whether the first column is elution volume [mL] or retention time [min] or [s]
        (converted with ``flow_rate`` [mL/min]).
    flow_rate : float
        Flow rate for the time columns [mL/min].
    separator, decimal : str
        Text dialect (e.g. ``";"`` and ``","`` for a decimal-comma export).
    metadata : dict, optional
        ``key: value`` lines written above the header row.
    signal_header : str
        Header of the signal column.
    extra_column : bool
        Add a second-detector column (ignored by the reader unless chosen).

    Returns
    -------
    str
        Lines ending in a newline (LF); numbers with 6 decimals (4 for the extra column).
    """
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
    return "\n".join(lines + body) + "\n"


# ============================================================================ more detectors

#: Avogadro constant [1/mol] (SI 2019 exact value).
_N_A = 6.02214076e23


def _spread(V: np.ndarray, y: np.ndarray, sigma: float) -> np.ndarray:
    """y convolved with a unit-area Gaussian of s.d. ``sigma`` [mL] on an equally spaced axis."""
    if sigma <= 0:
        return y
    step = float(np.median(np.diff(V)))
    half = int(math.ceil(6.0 * sigma / step))
    u = np.arange(-half, half + 1) * step
    g = np.exp(-0.5 * (u / sigma) ** 2)
    g /= g.sum()
    pad = np.concatenate([np.full(half, y[0]), y, np.full(half, y[-1])])
    return np.convolve(pad, g, mode="valid")


def _moved(V: np.ndarray, y: np.ndarray, offset: float) -> np.ndarray:
    """What a detector ``offset`` mL downstream shows at V: y at V − offset."""
    return np.interp(V - offset, V, y) if offset else y


def multi_detector_traces(
    distribution: Callable[[np.ndarray], np.ndarray],
    log_M: Callable[[np.ndarray], np.ndarray],
    *,
    mass: float,
    volume: Any = None,
    ri_constant: float = 5.0e4,
    dn_dc_ri: float = 0.185,
    dn_dc_ls: float = 0.185,
    wavelength: float = 658.0,
    solvent_refractive_index: float = 1.404,
    angles: Sequence[float] = (35.0, 50.0, 75.0, 90.0, 105.0, 130.0, 145.0),
    ls_constant: float = 1.0e-5,
    rg_Q: float = 0.014,
    rg_nu: float = 0.585,
    K: float = 1.14e-4,
    a: float = 0.716,
    huggins: float = 0.35,
    inlet_pressure: float = 100.0,
    offsets: Mapping[str, float] | None = None,
    sigmas: Mapping[str, float] | None = None,
    noise: Mapping[str, float] | None = None,
    seed: int | None = None,
) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """RI, multi-angle light-scattering and bridge-viscometer traces of one injection.

    The separated profile is W(V) = mass · dw/dlog10 M(M(V)) · |d log10 M/dV| [g/mL]
    (the same mapping as :func:`chromatogram`, with ``log_M`` the sample's own
    calibration). Each detector sees its own response density, spread by a Gaussian of
    its own σ and read ``offset`` mL downstream (shown at V what left the columns at
    V − Δ). Standard definitions, written out here independently of
    :mod:`gpctools.detectors`:

    - RI: S = k_RI · dn/dc · W;
    - light scattering at angle θ: R_θ = K*·W·M·P(θ), K* = 4π²n0²(dn/dc)²/(N_A λ⁴),
      P(θ) = 2(e^−x + x − 1)/x² for a random coil (Debye), x = q²Rg²,
      q = 4πn0 sin(θ/2)/λ, Rg = Q·M^ν [nm]; channel signal R_θ/``ls_constant``;
      the second virial term is left out;
    - bridge viscometer: u = G ⊗ (W·[η]), [η] = K·M^a (K in dL/g, ×100 for mL/g),
      η_sp = u + k_H·u², differential pressure ΔP = η_sp·IP/(4 + 2η_sp) and the inlet
      pressure IP.

    Parameters
    ----------
    distribution : callable
        dw/dlog10 M of the sample [-] (unit area over log10 M).
    log_M : callable
        V [mL] -> log10 M of the *sample* [g/mol] (its true calibration).
    mass : float
        Injected polymer mass [g].
    offsets : mapping
        ``"ls"``, ``"visc"`` -> Δ = V_detector − V_RI [mL].
    sigmas : mapping
        ``"ri"``, ``"ls"``, ``"visc"`` -> Gaussian spreading σ [mL].
    noise : mapping
        ``"ri"``, ``"ls"``, ``"visc"`` -> white-noise s.d. as a fraction of each channel's
        maximum [-].

    Returns
    -------
    volume : numpy.ndarray
        [mL]
    channels : dict
        ``"RI"`` [RIU·k_RI], ``"LS <θ>"`` per angle, ``"DP"``, ``"IP"`` [kPa].
    """
    V = np.linspace(8.0, 26.0, 3601) if volume is None else np.asarray(volume, dtype=float)
    off = {"ls": 0.0, "visc": 0.0, **(offsets or {})}
    sig = {"ri": 0.0, "ls": 0.0, "visc": 0.0, **(sigmas or {})}
    nz = {"ri": 0.0, "ls": 0.0, "visc": 0.0, **(noise or {})}
    rng = np.random.default_rng(seed)
    lg = np.asarray(log_M(V), dtype=float)
    M = 10.0**lg
    W = mass * np.asarray(distribution(M), dtype=float) * np.abs(np.gradient(lg, V))

    def noisy(y: np.ndarray, key: str) -> np.ndarray:
        sd = nz[key] * float(np.max(np.abs(y)))
        return y + rng.normal(0.0, sd, y.size) if sd > 0 else y

    out: dict[str, np.ndarray] = {"RI": noisy(_spread(V, ri_constant * dn_dc_ri * W, sig["ri"]), "ri")}
    lam_cm = wavelength * 1e-7
    K_star = 4.0 * math.pi**2 * solvent_refractive_index**2 * dn_dc_ls**2 / (_N_A * lam_cm**4)
    rg = rg_Q * M**rg_nu  # [nm]
    for theta in angles:
        q = 4.0 * math.pi * solvent_refractive_index * math.sin(math.radians(theta) / 2.0) / wavelength  # [1/nm]
        x = (q * rg) ** 2
        with np.errstate(invalid="ignore", divide="ignore"):
            P = np.where(x > 1e-8, 2.0 * (np.exp(-x) + x - 1.0) / np.where(x > 1e-8, x, 1.0) ** 2, 1.0 - x / 3.0)
        R = _moved(V, _spread(V, K_star * W * M * P, sig["ls"]), off["ls"])
        out[f"LS {theta:g}"] = noisy(R / ls_constant, "ls")
    u = _moved(V, _spread(V, W * 100.0 * K * M**a, sig["visc"]), off["visc"])
    eta_sp = u + huggins * u * u
    out["DP"] = noisy(eta_sp * inlet_pressure / (4.0 + 2.0 * eta_sp), "visc")
    out["IP"] = np.full(V.size, float(inlet_pressure))
    return V, out


def multi_detector_export(
    volume: Any,
    channels: Mapping[str, Any],
    *,
    units: Mapping[str, str] | None = None,
    metadata: Mapping[str, str] | None = None,
    separator: str = ",",
) -> str:
    """Several detector channels as the text of one slice export (nothing is written).

    Headers are ``<channel> [<unit>]`` (default unit ``mV``; ``DP``/``IP`` in ``kPa``),
    numbers with 8 significant digits.
    """
    V = np.asarray(volume, dtype=float)
    names = list(channels)
    u = {"DP": "kPa", "IP": "kPa", **(units or {})}
    head = ["Elution volume [mL]"] + [f"{n} [{u.get(n, 'mV')}]" for n in names]
    cols = np.column_stack([V] + [np.asarray(channels[n], dtype=float) for n in names])
    line = separator.join(["%.8g"] * cols.shape[1]) + "\n"
    lines = [f"{k}: {v}" for k, v in (metadata or {}).items()]
    return "\n".join(lines + [separator.join(head)]) + "\n" + (line * cols.shape[0]) % tuple(cols.ravel().tolist())


# ============================================================================ run series


def averages_from_dwdlogM(M: Any, dwdlogM: Any) -> tuple[float, float]:
    """Mn and Mw [g/mol] of a dw/dlogM curve on a log-uniform M grid (trapezoid in log M).

    References
    ----------
    docs/science.md, section 1: Mn = Σw/Σ(w/M), Mw = ΣwM/Σw with w ∝ dw/dlogM · Δlog M.
    """
    M = np.asarray(M, dtype=float)
    h = np.asarray(dwdlogM, dtype=float)
    dlg = np.diff(np.log10(M))

    def trap(y: np.ndarray) -> float:
        return float(np.sum(0.5 * (y[1:] + y[:-1]) * dlg))

    area = trap(h)
    return area / trap(h / M), trap(h * M) / area


def simulate_series(
    ratios: Sequence[float],
    *,
    C_A: float,
    inv_DPn0: float,
    M0: float,
    conversion: float | Sequence[float] | None = None,
    monomer_conc: float = 8.0,
    rel_noise: float = 0.0,
    impurity: Mapping[int, float] | None = None,
    C_M: float = 0.0,
    seed: int | None = None,
    run_prefix: str = "R",
) -> list[dict[str, Any]]:
    """Rows of a run-series sheet (measured Mn/Mw) for a single-agent Mayo series.

    Each run's Mn and Mw are those of the cumulative most-probable polymer at its
    conversion (:func:`gpctools.chainlength.cumulative_averages`).

    Parameters
    ----------
    ratios : sequence of float
        Initial [A]0/[M]0 per run [-].
    C_A : float
        True transfer constant [-].
    inv_DPn0 : float
        True 1/DPn0 [-].
    M0 : float
        Repeat-unit molar mass [g/mol].
    conversion : float or sequence, optional
        Conversion per run [-]; ``None`` -> instantaneous (no drift, no conversion column).
    monomer_conc : float
        [M]0 [mol/L].
    rel_noise : float
        Relative standard deviation of multiplicative Gaussian noise on Mn and Mw [-]
        (independent draws).
    impurity : mapping of int to float, optional
        Run index -> extra 1/DPn added by an impurity (constant over conversion) [-].
    C_M : float
        Transfer to monomer [-].
    seed : int, optional
    run_prefix : str

    Returns
    -------
    list of dict
        Sheet rows with columns ``run``, ``[M] [mol/L]``, ``[A] [mol/L]``,
        ``conversion [-]`` (when given), ``Mn [g/mol]``, ``Mw [g/mol]``, ``M0 [g/mol]``.
    """
    rng = np.random.default_rng(seed)
    n = len(ratios)
    if conversion is None:
        xs: list[float | None] = [None] * n
    elif isinstance(conversion, (int, float)):
        xs = [float(conversion)] * n
    else:
        xs = [float(v) for v in conversion]
    rows = []
    for i, r in enumerate(ratios):
        a = inv_DPn0 + (impurity or {}).get(i, 0.0)
        x = xs[i]
        terms: dict[str, tuple[float, float]] = {"C_M": (C_M, 1.0)} if C_M else {}
        terms["C_A"] = (C_A, float(r))
        Mn, Mw = cumulative_averages(x or 0.0, a, terms, M0)
        if rel_noise:
            Mn *= 1 + rel_noise * rng.standard_normal()
            Mw *= 1 + rel_noise * rng.standard_normal()
        row: dict[str, Any] = {
            "run": f"{run_prefix}{i + 1}",
            "[M] [mol/L]": monomer_conc,
            "[A] [mol/L]": float(r) * monomer_conc,
        }
        if x is not None:
            row["conversion [-]"] = x
        row.update({"Mn [g/mol]": Mn, "Mw [g/mol]": Mw, "M0 [g/mol]": M0})
        rows.append(row)
    return rows


def kinetic_series(
    runs: Sequence[Mapping[str, float]],
    *,
    monomer: str = "styrene",
    initiator: str = "AIBN",
    T_C: float = 60.0,
    C_A: float = 0.0,
    C_S: float = 0.0,
    C_I: float = 0.0,
    C_M: float | None = None,
    delta: float | None = None,
    rel_noise: float = 0.0,
    impurity: Mapping[int, float] | None = None,
    measured_rate: bool = False,
    seed: int | None = None,
    reference: Any = None,
    run_prefix: str = "K",
) -> list[dict[str, Any]]:
    """Rows of a run-series sheet built from the steady-state kinetic scheme.

    Each run's recipe ([M], [I], [S], [A], conversion) gives, with the bundled k_p(T),
    k_t (IUPAC), δ and the initiator's f·k_d(T): [R•] = (f k_d [I]/k_t)^½,
    R_p = k_p [M] [R•], the kinetic term K = (1 + δ) k_t [R•]/(k_p [M]), the combination
    stops β = 2(1 − δ)K/(1 + δ), and with C_M, C_S [S]/[M], C_I [I]/[M] and C_A [A]/[M]
    the cumulative Mn and Mw at the run's conversion
    (:func:`gpctools.chainlength.cumulative_averages`, agent and solvent consumed by
    transfer). The truth is the kinetic scheme, not a Mayo regression.

    Parameters
    ----------
    runs : sequence of mapping
        Per run ``"[M]"`` [mol/L] and optionally ``"[I]"``, ``"[S]"``, ``"[A]"`` [mol/L],
        ``"x"`` (conversion [-]; default 0.002, about instantaneous).
    monomer, initiator : str
        Names in the bundled tables.
    T_C : float
        Temperature [°C].
    C_A, C_S, C_I : float
        Transfer constants of agent, solvent, initiator [-].
    C_M : float, optional
        Transfer to monomer [-] (default: the bundled value).
    delta : float, optional
        δ = k_td/k_t [-] (default: the bundled value); written to the sheet only when given.
    rel_noise : float
        Relative SD of independent multiplicative noise on Mn and Mw [-].
    impurity : mapping of int to float, optional
        Run index -> extra 1/DPn from an impurity (constant over conversion) [-].
    measured_rate : bool
        Write ``R_p [mol/L/s]`` (the steady-state value).
    seed : int, optional
    reference : gpctools.refdata.ReferenceData, optional
    run_prefix : str

    Returns
    -------
    list of dict
        Sheet rows (``run``, ``monomer``, ``initiator``, ``T [°C]``, ``[M] [mol/L]``,
        ``[I] [mol/L]``, ``[S] [mol/L]``, ``[A] [mol/L]``, ``conversion [-]``,
        ``Mn [g/mol]``, ``Mw [g/mol]``, optionally ``R_p [mol/L/s]`` and ``delta [-]``)
        plus ``"_truth"``: a dict with K, β and 1/DPn of the run.

    References
    ----------
    docs/science.md, sections 3.2, 3.3, 4.3 and 5 [derived].
    """
    from . import refdata
    from .chainlength import combination_stops, kinetic_inv_dpn

    ref = reference or refdata.default_reference()
    T = T_C + 273.15
    mono = ref.monomer(monomer)
    term = ref.termination(monomer)
    ini = ref.initiator(initiator)
    kp, kt = mono.k_p(T), term.k_t_iupac
    d_val = term.delta if delta is None else delta
    cm_val = mono.C_M if C_M is None else C_M
    if d_val is None or cm_val is None:
        raise DataError(f"no bundled delta or C_M for {monomer!r}: give delta and C_M")
    d, cm = float(d_val), float(cm_val)
    rng = np.random.default_rng(seed)
    rows = []
    for i, spec in enumerate(runs):
        M, I0 = float(spec["[M]"]), float(spec.get("[I]", 0.01))
        S, A, x = float(spec.get("[S]", 0.0)), float(spec.get("[A]", 0.0)), float(spec.get("x", 0.002))
        radicals = math.sqrt(ini.f * ini.k_d(T) * I0 / kt)
        Rp = kp * M * radicals
        K = float(kinetic_inv_dpn(Rp, M, kp, kt, d))
        beta = float(combination_stops(K, d))
        inv0 = K + cm + (impurity or {}).get(i, 0.0)
        terms: dict[str, tuple[float, float]] = {"C_A": (C_A, A / M), "C_S": (C_S, S / M),
                                                  "C_I": (C_I, I0 / M)}
        Mn, Mw = cumulative_averages(x, inv0, terms, mono.M0, beta=beta)
        if rel_noise:
            Mn *= 1 + rel_noise * rng.standard_normal()
            Mw *= 1 + rel_noise * rng.standard_normal()
        row: dict[str, Any] = {"run": f"{run_prefix}{i + 1}", "monomer": mono.name,
                               "initiator": ini.name, "T [°C]": T_C, "[M] [mol/L]": M,
                               "[I] [mol/L]": I0, "[S] [mol/L]": S, "[A] [mol/L]": A,
                               "conversion [-]": x, "Mn [g/mol]": Mn, "Mw [g/mol]": Mw}
        if measured_rate:
            row["R_p [mol/L/s]"] = Rp
        if delta is not None:
            row["delta [-]"] = d
        row["_truth"] = {"K": K, "beta": beta, "inv_DPn": inv0 + C_A * A / M + C_S * S / M
                         + C_I * I0 / M, "R_p": Rp}
        rows.append(row)
    return rows
