"""Simulated run series: instantaneous and cumulative most-probable distributions.

Everything here is the *truth side* of tests and demos, written independently of the
fitting code: distributions are built chain length by chain length and integrated over
conversion numerically, and averages are computed from them.

- Instantaneous: the Flory (most-probable) distribution with λ = 1/DPn from the Mayo
  equation; number fraction P(N) = λ(1 − λ)^(N−1), mass fraction w(N) = N λ² (1 − λ)^(N−1),
  dw/dlogM = ln10 · N · w(N) with N = M/M0.
- Cumulative: the mass-weighted mixture over conversion 0..x of instantaneous
  distributions, the agent ratio drifting as r0 (1 − x')^(C − 1).

References
----------
Flory, P. J., Principles of Polymer Chemistry (Cornell, 1953): most-probable distribution.
Mayo, F. R., J. Am. Chem. Soc. 1943. SCIENCE.md sections 1, 4 and 5 [derived].
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from gpctools.refdata import R_GAS

__all__ = [
    "mayo_lambda",
    "most_probable",
    "cumulative_most_probable",
    "cumulative_averages",
    "averages_from_dwdlogM",
    "simulate_series",
    "write_demo_series",
]

LN10 = math.log(10.0)


def mayo_lambda(inv_DPn0: float, ratios: Mapping[float, float] | None = None) -> float:
    """λ = 1/DPn0 + Σ C·r for ``ratios`` given as {C: r} [-] (instantaneous Mayo equation)."""
    lam = float(inv_DPn0)
    for C, r in (ratios or {}).items():
        lam += float(C) * float(r)
    return lam


def most_probable(lam: float, M0: float) -> Callable[[Any], np.ndarray]:
    """dw/dlogM of the Flory distribution with dead-chain probability λ, as a callable of M.

    Parameters
    ----------
    lam : float
        λ = 1/DPn, 0 < λ < 1 [-].
    M0 : float
        Repeat-unit molar mass [g/mol].

    Returns
    -------
    callable
        f(M [g/mol]) -> dw/dlogM [-] (integrates to about 1 over log10 M).

    References
    ----------
    Flory, Principles of Polymer Chemistry, 1953; SCIENCE.md section 4.
    """
    lam = float(lam)
    log1m = math.log1p(-lam)

    def f(M: Any) -> np.ndarray:
        N = np.asarray(M, dtype=float) / M0
        return LN10 * lam * lam * N * N * np.exp((N - 1.0) * log1m)

    return f


def _lambda_path(xp: np.ndarray, inv_DPn0: float, agents: Sequence[tuple[float, float]],
                 C_M: float = 0.0) -> np.ndarray:
    lam = np.full_like(xp, float(inv_DPn0) + float(C_M))
    for C, r0 in agents:
        lam += C * r0 * (1.0 - xp) ** (C - 1.0)
    return lam


@functools.lru_cache(maxsize=8)
def _legendre(n: int) -> tuple[np.ndarray, np.ndarray]:
    u, w = np.polynomial.legendre.leggauss(n)
    u.setflags(write=False)
    w.setflags(write=False)
    return u, w


def _nodes(x: float, n: int) -> tuple[np.ndarray, np.ndarray]:
    u, w = _legendre(n)
    return 0.5 * x * (u + 1.0), 0.5 * x * w


def cumulative_most_probable(
    x: float,
    agents: Sequence[tuple[float, float]],
    inv_DPn0: float,
    M0: float,
    *,
    C_M: float = 0.0,
    nodes: int = 200,
) -> Callable[[Any], np.ndarray]:
    """dw/dlogM of the cumulative polymer formed up to conversion x, as a callable of M.

    Parameters
    ----------
    x : float
        Monomer conversion, 0 < x < 1 [-]; x → 0 gives the instantaneous distribution.
    agents : sequence of (C, r0)
        Each consumed transfer agent: its constant C [-] and initial ratio [A]0/[M]0 [-].
    inv_DPn0 : float
        1/DPn0, the agent-free part of 1/DPn, held constant [-].
    M0 : float
        Repeat-unit molar mass [g/mol].
    C_M : float
        Transfer to monomer (constant) [-].
    nodes : int
        Gauss–Legendre nodes over conversion.

    References
    ----------
    SCIENCE.md section 5 [derived]: mass-weighted mixture over conversion of instantaneous
    most-probable distributions, (A/M)(x') = r0 (1 − x')^(C − 1).
    """
    xp, wx = _nodes(x, nodes)
    lam = _lambda_path(xp, inv_DPn0, agents, C_M)
    log1m = np.log1p(-lam)
    weights = wx / x

    def f(M: Any) -> np.ndarray:
        N = np.atleast_1d(np.asarray(M, dtype=float)) / M0
        terms = LN10 * (lam**2)[None, :] * (N**2)[:, None] * np.exp(
            (N[:, None] - 1.0) * log1m[None, :])
        out = terms @ weights
        return out.reshape(np.shape(M)) if np.ndim(M) else out[0]

    return f


def cumulative_averages(
    x: float,
    agents: Sequence[tuple[float, float]],
    inv_DPn0: float,
    M0: float,
    *,
    C_M: float = 0.0,
    nodes: int = 200,
) -> tuple[float, float]:
    """Exact (Flory) cumulative Mn and Mw [g/mol] by numerical integration over conversion.

    Mn = M0 x / ∫0^x λ dx' (number of chains per monomer converted) and
    Mw = (M0/x) ∫0^x (2 − λ)/λ dx' (mass-weighted instantaneous Flory Mw).

    References
    ----------
    SCIENCE.md section 5 [derived]; Flory 1953 (DPw = (2 − λ)/λ of the discrete
    most-probable distribution).
    """
    if x <= 0:
        lam = _lambda_path(np.array([0.0]), inv_DPn0, agents, C_M)[0]
        return M0 / lam, M0 * (2 - lam) / lam
    xp, wx = _nodes(x, nodes)
    lam = _lambda_path(xp, inv_DPn0, agents, C_M)
    Mn = M0 * x / float(np.sum(wx * lam))
    Mw = M0 / x * float(np.sum(wx * (2.0 - lam) / lam))
    return Mn, Mw


def averages_from_dwdlogM(M: Any, dwdlogM: Any) -> tuple[float, float]:
    """Mn and Mw [g/mol] of a dw/dlogM curve on a log-uniform M grid (trapezoid in log M).

    References
    ----------
    SCIENCE.md section 1: Mn = Σw/Σ(w/M), Mw = ΣwM/Σw with w ∝ dw/dlogM · Δlog M.
    """
    M = np.asarray(M, dtype=float)
    h = np.asarray(dwdlogM, dtype=float)
    lg = np.log10(M)
    trap = np.trapezoid if hasattr(np, "trapezoid") else np.trapz  # noqa: NPY201 (numpy < 2)
    area = trap(h, lg)
    Mn = area / trap(h / M, lg)
    Mw = trap(h * M, lg) / area
    return float(Mn), float(Mw)


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
    elif np.ndim(conversion) == 0:
        xs = [float(conversion)] * n  # type: ignore[arg-type]
    else:
        xs = [float(v) for v in conversion]  # type: ignore[union-attr]
    rows = []
    for i, r in enumerate(ratios):
        a = inv_DPn0 + (impurity or {}).get(i, 0.0)
        x = xs[i]
        Mn, Mw = cumulative_averages(x or 0.0, [(C_A, float(r))], a, M0, C_M=C_M)
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


# --- demo run series -------------------------------------------------------------------

#: The invented demo scenario (our own): styrene with an invented thiol-like agent
#: "agent T" at three temperatures; constants are chosen values, not literature ones.
DEMO_TRUTH: dict[str, Any] = {
    "monomer": "styrene",
    "M0 [g/mol]": 104.15,
    "agent": "agent T",
    "[M] [mol/L]": 8.0,
    # C(T) = A exp(-dE/RT) with dE = 8 kJ/mol, C(60 °C) = 12.0 (chosen values)
    "dE [kJ/mol]": 8.0,
    "C_A at 60 °C [-]": 12.0,
    "temperatures [°C]": (50.0, 60.0, 70.0),
    "1/DPn0": {50.0: 4.0e-4, 60.0: 5.0e-4, 70.0: 6.5e-4},
    "ratios [-]": (0.0, 0.5e-4, 1.0e-4, 2.0e-4, 3.0e-4, 4.0e-4),
    "conversion [-]": 0.04,
    "contaminated run": "T60-4",
    "impurity extra 1/DPn [-]": 1.0e-3,
    # run-to-run scatter: relative SD of the actual agent charge (weighing) and of the
    # agent-free 1/DPn0 (initiator charge, temperature) [-]
    "agent charge scatter [-]": 0.01,
    "1/DPn0 scatter [-]": 0.015,
}


_DEMO_METHOD = """# Method of the transfer demo (invented): polystyrene standards in THF, 1.0 mL/min.
name = "transfer demo, PS in THF"
sample_polymer = "polystyrene"      # styrene series: the PS scale is absolute here

[flow]
rate = 1.0                          # [mL/min]

[baseline]
windows = "auto"

[integration]
limits = "auto"

[calibration]
order = 3
standard_polymer = "polystyrene"
standards = "standards.csv"
"""


def _demo_C(T_C: float) -> float:
    T = T_C + 273.15
    T60 = 333.15
    dE = DEMO_TRUTH["dE [kJ/mol]"] * 1e3
    return DEMO_TRUTH["C_A at 60 °C [-]"] * math.exp(-dE / R_GAS * (1 / T - 1 / T60))


#: Slices per simulated chromatogram of the demo (8 to 26 mL).
DEMO_SLICES = 2000


def write_demo_series(folder: str | Path, *, seed: int = 20240611) -> dict[str, Any]:
    """Write the demo run series (chromatograms, method file, run-series sheet) into ``folder``.

    The scenario is our own invention: styrene at 50, 60 and 70 °C with an invented agent
    (``agent T``) whose constant follows C = A exp(−ΔE/RT) (ΔE = 8 kJ/mol, C(60 °C) = 12),
    six agent levels per temperature at 4 % conversion, run-to-run scatter (1 % on the agent
    charge, 1.5 % on the agent-free 1/DPn0), detector noise and a small baseline drift. One
    run (``T60-4``) is contaminated: an impurity adds 1e-3 to its 1/DPn. Chromatograms come from :func:`gpctools.simulate.chromatogram` through
    :func:`gpctools.simulate.default_calibration` (polystyrene, so the PS scale is absolute
    for this styrene series).

    Parameters
    ----------
    folder : str or Path
        Destination folder (created).
    seed : int
        Random seed for the detector noise.

    Returns
    -------
    dict
        The true values (JSON-safe): constants per temperature, ΔE, 1/DPn0, the
        contaminated run and the files written.
    """
    import pandas as pd

    from gpctools import simulate
    from gpctools.report.files import write_csv, write_text

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "chromatograms").mkdir(exist_ok=True)
    cal = simulate.default_calibration()
    M0 = DEMO_TRUTH["M0 [g/mol]"]
    Mconc = DEMO_TRUTH["[M] [mol/L]"]
    x = DEMO_TRUTH["conversion [-]"]
    rng = np.random.default_rng(seed)
    rows = []
    truth_C = {}
    for T in DEMO_TRUTH["temperatures [°C]"]:
        C = _demo_C(T)
        truth_C[f"{T:g}"] = C
        for j, r in enumerate(DEMO_TRUTH["ratios [-]"]):
            run = f"T{T:g}-{j + 1}"
            a = DEMO_TRUTH["1/DPn0"][T] * (1 + DEMO_TRUTH["1/DPn0 scatter [-]"] * rng.standard_normal())
            r_actual = r * (1 + DEMO_TRUTH["agent charge scatter [-]"] * rng.standard_normal())
            if run == DEMO_TRUTH["contaminated run"]:
                a += DEMO_TRUTH["impurity extra 1/DPn [-]"]
            f = cumulative_most_probable(x, [(C, r_actual)], a, M0)
            volume, signal = simulate.chromatogram(
                f, cal, volume=np.linspace(8.0, 26.0, DEMO_SLICES), height=100.0,
                baseline_offset=0.5, baseline_drift=0.02, noise=0.05,
                seed=int(rng.integers(0, 2**31 - 1)),
            )
            rel = f"chromatograms/{run}.csv"
            simulate.write_chromatogram(folder / rel, volume, signal)
            rows.append({
                "run": run,
                "file": rel,
                "series": f"agent T, {T:g} °C",
                "agent": DEMO_TRUTH["agent"],
                "monomer": DEMO_TRUTH["monomer"],
                "T [°C]": T,
                "[M] [mol/L]": Mconc,
                "[A] [mol/L]": r * Mconc,
                "conversion [-]": x,
            })
    write_csv(folder / "run_series.csv", pd.DataFrame(rows))
    names, Mp, V = zip(*simulate.DEFAULT_STANDARDS, strict=True)
    write_csv(folder / "standards.csv",
              pd.DataFrame({"name": names, "Mp [g/mol]": Mp, "volume [mL]": V}))
    write_text(folder / "method.toml", _DEMO_METHOD)
    truth = {
        "scenario": "invented demo: styrene + agent T at 50/60/70 °C (our own values)",
        "C_A [-]": truth_C,
        "E_tr - E_p [kJ/mol]": DEMO_TRUTH["dE [kJ/mol]"],
        "1/DPn0 [-]": {f"{k:g}": v for k, v in DEMO_TRUTH["1/DPn0"].items()},
        "conversion [-]": x,
        "contaminated run": DEMO_TRUTH["contaminated run"],
        "impurity extra 1/DPn [-]": DEMO_TRUTH["impurity extra 1/DPn [-]"],
        "run-to-run scatter [-]": {"agent charge": DEMO_TRUTH["agent charge scatter [-]"],
                                   "1/DPn0": DEMO_TRUTH["1/DPn0 scatter [-]"]},
        "method": "method.toml",
        "sheet": "run_series.csv",
    }
    import json

    write_text(folder / "truth.json", json.dumps(truth, indent=2) + "\n")
    return truth
