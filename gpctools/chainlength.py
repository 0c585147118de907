"""Chain-length formulas shared by transfer, kinetics and the simulator.

One home for the relations between what ends growing chains and the chain-length
distribution they leave, so that the run-series fits, the recipe prediction, the diagnosis
and the synthetic data all use the same equations:

- **Mayo sum** (Mayo, J. Am. Chem. Soc. 1943), dead chains per monomer converted:
  1/DPn = (1 + δ) k_t R_p/(k_p² [M]²) + C_M + C_S [S]/[M] + C_I [I]/[M] + Σ C_A [A]/[M].
- **Most-probable distribution** (Flory, Principles of Polymer Chemistry, 1953): chains
  ended one at a time with probability λ = 1/DPn per monomer added, number fraction
  P(N) = λ (1 − λ)^(N − 1); continuous limit P(N) = λ e^(−λN) (Schulz–Zimm, b = 1).
- **Mixed termination** (Clay and Gilbert, Macromolecules 1995): with τ the events that end
  one chain (transfer, disproportionation) and β the radical stops by combination, both
  per propagation step, DPn = 1/(τ + β/2) and DPw = (2τ + 3β)/(τ + β)²; the discrete
  distribution has DPw one less, so for β = 0 DPn = (DPw + 1)/2.
- **Conversion drift**: an agent consumed only by transfer leaves [A]/[A]0 = (1 − x)^C and
  [A]/[M] = r0 (1 − x)^(C − 1); the cumulative polymer is the mass-weighted mixture over
  conversion of instantaneous most-probable distributions, so
  DPn,cum(x) = x/[x/DPn0 + r0 (1 − (1 − x)^C)], Mw,cum(x) = (1/x) ∫0^x M0 (2 − λ)/λ dx',
  and a naive Mayo fit on initial ratios returns C_app = (1 − (1 − x)^C)/x.
- **Impurity level** from an excess 1/DPn: [X]/[M] = excess/C_X instantaneously, and
  [X]0/[M]0 = excess·x/(1 − (1 − x)^C_X) for an excess measured on cumulative polymer at
  conversion x (the impurity is consumed like an agent).

The drift formulas take the Mayo terms by name, ``{term: (C, r0)}`` with r0 = [X]0/[M]0:
agents (``C_A``, ``C_A:<agent>``) and the solvent (``C_S``) are consumed by transfer; the
initiator (``C_I``) is taken at constant concentration while monomer is used up, so its
ratio grows as r0/(1 − x); ``C_M`` is constant. 1/DPn0 (the kinetic term) is held
constant over conversion.

Only numpy and the standard library are used here; every function is checked in
``tests/test_chainlength.py`` against closed forms, direct summation and scipy quadrature.

References
----------
Mayo, F. R., J. Am. Chem. Soc. 1943, 65, 2324 (the Mayo equation).
Flory, P. J., Principles of Polymer Chemistry, Cornell University Press, 1953
(most-probable distribution).
Clay, P. A.; Gilbert, R. G., Macromolecules 1995, 28, 552 (chain-length distributions with
transfer and mixed termination).
docs/science.md, sections 3, 4, 5 and 9 (derived relations and the check values used in tests).
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from gpctools.errors import DataError, DesignError

__all__ = [
    "DistributionModel",
    "MixedTermination",
    "N_NODES",
    "agent_ratio",
    "apparent_constant",
    "combination_stops",
    "conversion_nodes",
    "cumulative_averages",
    "cumulative_dpw",
    "cumulative_inv_dpn",
    "cumulative_ln_number",
    "cumulative_most_probable",
    "dispersity_instantaneous",
    "impurity_ratio",
    "impurity_ratio_cumulative",
    "instantaneous_inv_dpn",
    "inv_dpn_from_dpw",
    "kinetic_inv_dpn",
    "mayo_inv_dpn",
    "mixed_termination",
    "most_probable",
    "remaining_fraction",
    "term_kind",
    "Terms",
]

LN10 = math.log(10.0)

#: A float or an array of floats (the formulas broadcast).
FloatOrArray = float | NDArray[np.float64]
#: Mayo terms of the drift formulas: name (``C_A``, ``C_A:<agent>``, ``C_S``, ``C_I``,
#: ``C_M``) -> (C [-], r0 = [X]0/[M]0 [-]); r0 may be an array (one value per run).
Terms = Mapping[str, tuple[float, ArrayLike]]

#: Gauss–Legendre nodes for the conversion integrals (smooth integrands: 64 nodes give
#: machine precision for the drifts met in practice; checked against scipy.integrate.quad
#: in the tests).
N_NODES = 64


# ============================================================================ Mayo sum


def kinetic_inv_dpn(R_p: ArrayLike, conc_M: ArrayLike, k_p: float, k_t: float,
                    delta: float = 0.0) -> NDArray[np.float64]:
    """Kinetic (termination) term of the Mayo equation, (1 + δ) k_t R_p/(k_p² [M]²) [-].

    Parameters
    ----------
    R_p : array-like
        Rate of polymerization [mol/L/s].
    conc_M : array-like
        Monomer concentration [M] [mol/L].
    k_p : float
        Propagation rate coefficient [L/mol/s].
    k_t : float
        Termination rate coefficient, IUPAC convention −d[R•]/dt = 2 k_t [R•]² [L/mol/s].
    delta : float
        Fraction of termination by disproportionation, δ = k_td/k_t [-].

    Returns
    -------
    numpy.ndarray
        The termination part of 1/DPn [-]; without transfer it equals (1 + δ)/(2ν), ν the
        kinetic chain length, i.e. DPn = 2ν/(1 + δ).

    References
    ----------
    Mayo, J. Am. Chem. Soc. 1943; docs/science.md, section 3 (IUPAC k_t convention).
    """
    R = np.asarray(R_p, dtype=float)
    M = np.asarray(conc_M, dtype=float)
    return (1.0 + delta) * k_t * R / (k_p**2 * M**2)


def mayo_inv_dpn(kinetic: FloatOrArray = 0.0, *, C_M: FloatOrArray = 0.0,
                 transfer: Iterable[tuple[FloatOrArray, FloatOrArray]] = ()) -> FloatOrArray:
    """The Mayo sum, 1/DPn = kinetic + C_M + Σ C_X [X]/[M] [-].

    Parameters
    ----------
    kinetic : float or array
        Kinetic term (or any agent-free 1/DPn0 that already holds it) [-]; see
        :func:`kinetic_inv_dpn`.
    C_M : float or array
        Transfer-to-monomer constant [-].
    transfer : iterable of (C_X, ratio)
        Transfer constant [-] and ratio [X]/[M] [-] of each other species: solvent
        (C_S, [S]/[M]), initiator (C_I, [I]/[M]), agents (C_A, [A]/[M]).

    Returns
    -------
    float or numpy.ndarray
        1/DPn [-]; a float when every input is a float. The terms are added in the order
        given (kinetic, C_M, then ``transfer``).

    References
    ----------
    Mayo, J. Am. Chem. Soc. 1943; docs/science.md, section 3.

    Examples
    --------
    >>> mayo_inv_dpn(5e-4, transfer=[(14.8, 1e-4)])
    0.00198
    """
    total = kinetic + C_M
    for C, ratio in transfer:
        total = total + C * ratio
    return total


# ===================================================================== distributions


@dataclass(frozen=True)
class DistributionModel:
    """A callable dw/dlog10 M with its exact averages.

    Attributes
    ----------
    func : callable
        ``func(M) -> dw/dlog10 M`` for an array of M [g/mol].
    averages : dict
        Exact ``Mn``, ``Mw``, ``Mz``, ``Mz1`` [g/mol], ``dispersity`` [-] and the
        dw/dlogM peak ``Mp_dwdlogM`` [g/mol] (NaN where there is no closed form).
    label : str
    """

    func: Callable[[np.ndarray], np.ndarray]
    averages: dict[str, float]
    label: str

    def __call__(self, M: Any) -> np.ndarray:
        """dw/dlog10 M at molar masses ``M`` [g/mol]."""
        return self.func(np.asarray(M, dtype=float))


def most_probable(Mn: float, M0: float | None = None) -> DistributionModel:
    """Most-probable (Flory) distribution with number-average molar mass Mn [g/mol].

    Parameters
    ----------
    Mn : float
        Number-average molar mass [g/mol].
    M0 : float, optional
        Repeat-unit molar mass [g/mol]. Without it, the continuous limit (Schulz–Zimm with
        b = 1): dw/dlog10 M = ln10 (M/Mn)² e^(−M/Mn), Mw = 2 Mn, Mz = 3 Mn, Mz+1 = 4 Mn,
        dw/dlogM peak at Mw. With it, the discrete distribution on chain lengths
        N = M/M0 with λ = M0/Mn = 1/DPn: number fraction P(N) = λ (1 − λ)^(N − 1), and
        dw/dlog10 M = ln10 λ² N² (1 − λ)^(N − 1).

    Returns
    -------
    DistributionModel
        For the discrete form the averages are the exact sums over N = 1, 2, ...
        (q = 1 − λ): DPn = 1/λ, DPw = (1 + q)/λ, DPz = (1 + 4q + q²)/(λ (1 + q)),
        DPz+1 = (1 + 11q + 11q² + q³)/(λ (1 + 4q + q²)); the dw/dlogM peak at
        N = −2/ln q. The callable evaluates the same mass distribution at any M, so an
        integral of it over log M agrees with the sums only to O(λ).

    References
    ----------
    Flory, Principles of Polymer Chemistry, 1953; Schulz–Zimm moments: IUPAC Gold Book
    ("Schulz–Zimm distribution"); docs/science.md, sections 4 and 8.
    """
    if not (Mn > 0 and math.isfinite(Mn)):
        raise DataError(f"the most-probable distribution needs Mn > 0, got Mn={Mn!r}")
    if M0 is None:
        return _most_probable_continuous(Mn)
    if not (0 < M0 < Mn):
        raise DataError(f"the discrete most-probable distribution needs 0 < M0 < Mn, got "
                        f"M0={M0!r}, Mn={Mn!r}")
    lam = M0 / Mn
    log1m = math.log1p(-lam)
    q = 1.0 - lam

    def f(M: np.ndarray) -> np.ndarray:
        N = np.asarray(M, dtype=float) / M0
        return LN10 * lam * lam * N * N * np.exp((N - 1.0) * log1m)

    s2 = 1.0 + q
    s3 = 1.0 + 4.0 * q + q * q
    s4 = 1.0 + 11.0 * q + 11.0 * q * q + q**3
    avg = {
        "Mn": Mn,
        "Mw": M0 * s2 / lam,
        "Mz": M0 * s3 / (lam * s2),
        "Mz1": M0 * s4 / (lam * s3),
        "dispersity": s2,
        "Mp_dwdlogM": M0 * 2.0 / -log1m,
    }
    return DistributionModel(f, avg, f"most probable, discrete (Mn={Mn:g}, M0={M0:g})")


def _most_probable_continuous(Mn: float) -> DistributionModel:
    # Written as the Schulz–Zimm density with b = 1, ln Γ(2) = 0 (same operations as
    # gpctools.simulate.schulz_zimm, so the bundled sample runs do not change).
    a = 1.0 / Mn
    lognorm = 2.0 * math.log(a)

    def f(M: np.ndarray) -> np.ndarray:
        M = np.asarray(M, dtype=float)
        with np.errstate(divide="ignore"):
            out = LN10 * np.exp(lognorm + 2.0 * np.log(M) - a * M)
        return np.where(M > 0, out, 0.0)

    avg = {"Mn": 1.0 / a, "Mw": 2.0 / a, "Mz": 3.0 / a, "Mz1": 4.0 / a,
           "dispersity": 2.0, "Mp_dwdlogM": 2.0 / a}
    return DistributionModel(f, avg, f"most probable (Mn={Mn:g})")


def dispersity_instantaneous(u: float) -> float:
    """Instantaneous dispersity for a fraction ``u`` of radical stops by combination [-].

    Đ_inst = DPw/DPn = (2 + u)(1 − u/2) = 2 − u²/2 with u = β/(τ + β) (u = 0: most
    probable, 2; u = 1: pure combination, 1.5); see :class:`MixedTermination`.

    References
    ----------
    Clay and Gilbert, Macromolecules 1995 (DPn, DPw with mixed termination); the limits
    are Schulz–Zimm b = 1 and b = 2 (IUPAC Gold Book; docs/science.md, sections 4 and 8).
    """
    if not 0.0 <= u <= 1.0:
        raise DataError(f"fraction of stops by combination must be in [0, 1], got {u}")
    return 2.0 - 0.5 * u * u


@dataclass(frozen=True)
class MixedTermination:
    """Instantaneous chain-length distribution with transfer, disproportionation and combination.

    Per propagation step a growing radical stops alone (transfer, disproportionation)
    with probability τ and by combination with probability β; the dead chains are those
    stopped alone (number ∝ τσ e^(−σN), σ = τ + β) plus the combination products
    (number ∝ (β/2) σ² N e^(−σN)). In the continuous form:

    - DPn = 1/(τ + β/2), DPw = (2τ + 3β)/σ², DPz = (6τ + 12β)/(σ (2τ + 3β)),
      DPz+1 = (4τ + 10β)/(σ (τ + 2β));
    - with u = β/σ (fraction of radical stops that are combinations),
      Đ = (2 + u)(1 − u/2) = 2 − u²/2;
    - the fraction of dead chains made by combination is φ = (β/2)/(τ + β/2), and
      u = 2φ/(1 + φ).

    The discrete distribution (chain lengths 1, 2, ...) has the same DPn and
    DPw,discrete = DPw − 1, so with β = 0 DPn = (DPw,discrete + 1)/2 exactly.

    Attributes
    ----------
    tau : float
        Chain-ending events (transfer + disproportionation) per propagation step [-].
        A negative τ is accepted as long as τ + β/2 > 0: it arises when an empirical
        1/DPn offset (a model anchored to a measured lot) is booked into τ. The averages
        and u, φ are then bookkeeping values (u > 1); :attr:`dispersity` and
        :meth:`distribution` refuse it.
    beta : float
        Radical stops by combination per propagation step [-], >= 0.

    References
    ----------
    Clay and Gilbert, Macromolecules 1995; docs/science.md, section 4 [derived].
    """

    tau: float
    beta: float

    def __post_init__(self) -> None:
        if not (math.isfinite(self.tau) and math.isfinite(self.beta)):
            raise DataError(f"τ and β must be finite, got τ={self.tau!r}, β={self.beta!r}")
        if self.beta < 0 or not self.tau + 0.5 * self.beta > 0:
            raise DataError(f"mixed termination needs β >= 0 and τ + β/2 > 0, got "
                            f"τ={self.tau!r}, β={self.beta!r}")

    @property
    def sigma(self) -> float:
        """σ = τ + β, radical stops per propagation step [-] (the slope of ln P(N))."""
        return self.tau + self.beta

    @property
    def DPn(self) -> float:
        """Number-average degree of polymerization 1/(τ + β/2) [-]."""
        return 1.0 / (self.tau + 0.5 * self.beta)

    @property
    def DPw(self) -> float:
        """Weight-average degree of polymerization (2τ + 3β)/σ² (continuous form) [-]."""
        return (2.0 * self.tau + 3.0 * self.beta) / self.sigma**2

    @property
    def DPw_discrete(self) -> float:
        """Weight average of the discrete distribution, (2τ + 3β)/σ² − 1 [-]."""
        return self.DPw - 1.0

    @property
    def DPz(self) -> float:
        """z-average degree of polymerization (6τ + 12β)/(σ (2τ + 3β)) [-]."""
        return (6.0 * self.tau + 12.0 * self.beta) / (self.sigma * (2.0 * self.tau + 3.0 * self.beta))

    @property
    def DPz1(self) -> float:
        """(z+1)-average degree of polymerization (4τ + 10β)/(σ (τ + 2β)) [-]."""
        return (4.0 * self.tau + 10.0 * self.beta) / (self.sigma * (self.tau + 2.0 * self.beta))

    @property
    def u_combination(self) -> float:
        """u = β/(τ + β), fraction of radical stops that are combinations [-]."""
        return self.beta / self.sigma

    @property
    def fraction_chains_combination(self) -> float:
        """φ = (β/2)/(τ + β/2), fraction of dead chains made by combination [-]."""
        return 0.5 * self.beta / (self.tau + 0.5 * self.beta)

    @property
    def dispersity(self) -> float:
        """Instantaneous dispersity 2 − u²/2 [-] (needs τ >= 0)."""
        return dispersity_instantaneous(self.u_combination)

    def distribution(self, M0: float) -> DistributionModel:
        """dw/dlog10 M of the continuous distribution for repeat-unit molar mass M0 [g/mol].

        dw/dlog10 M = ln10 N² (τσ + (β/2) σ² N) e^(−σN), N = M/M0: a mass-weighted sum of
        a Schulz–Zimm b = 1 part (mass τ/σ) and a b = 2 part (mass β/σ).
        """
        if self.tau < 0:
            raise DataError(f"a distribution needs τ >= 0, got τ={self.tau!r}")
        if not M0 > 0:
            raise DataError(f"M0 must be > 0, got {M0!r}")
        tau, beta, s = self.tau, self.beta, self.sigma
        A, B = tau * s, 0.5 * beta * s * s

        def f(M: np.ndarray) -> np.ndarray:
            N = np.asarray(M, dtype=float) / M0
            return np.where(N > 0, LN10 * N * N * (A + B * N) * np.exp(-s * N), 0.0)

        # peak of N²(A + BN)e^(−σN): σB N² + (σA − 3B) N − 2A = 0 (derivative set to 0)
        c = s * A - 3.0 * B
        root = math.sqrt(c * c + 8.0 * s * A * B)
        N_peak = 4.0 * A / (c + root) if c > 0 else (root - c) / (2.0 * s * B)
        avg = {"Mn": M0 * self.DPn, "Mw": M0 * self.DPw, "Mz": M0 * self.DPz,
               "Mz1": M0 * self.DPz1, "dispersity": self.DPw / self.DPn,
               "Mp_dwdlogM": M0 * N_peak}
        return DistributionModel(f, avg, f"mixed termination (tau={tau:g}, beta={beta:g}, M0={M0:g})")


def mixed_termination(tau: float, beta: float) -> MixedTermination:
    """The instantaneous distribution for τ and β per propagation step (see :class:`MixedTermination`).

    Parameters
    ----------
    tau : float
        Transfer + disproportionation events per propagation step [-].
    beta : float
        Radical stops by combination per propagation step [-].

    References
    ----------
    Clay and Gilbert, Macromolecules 1995; docs/science.md, section 4.
    """
    return MixedTermination(float(tau), float(beta))


# ==================================================================== conversion drift


def remaining_fraction(C: ArrayLike, x: ArrayLike) -> NDArray[np.float64]:
    """Fraction of an agent left at conversion x, [A]/[A]0 = (1 − x)^C [-].

    Parameters
    ----------
    C : array-like
        Transfer constant of the agent [-].
    x : array-like
        Monomer conversion, 0 <= x < 1 [-].

    References
    ----------
    docs/science.md, section 5: d[A]/d[M] = C [A]/[M] when A is consumed only by transfer.
    """
    return np.exp(np.asarray(C, dtype=float) * np.log1p(-np.asarray(x, dtype=float)))


def agent_ratio(r0: ArrayLike, C: ArrayLike, x: ArrayLike) -> NDArray[np.float64]:
    """Instantaneous ratio of a consumed agent, [A]/[M] = r0 (1 − x)^(C − 1) [-].

    Parameters
    ----------
    r0 : array-like
        Initial ratio [A]0/[M]0 [-].
    C : array-like
        Transfer constant [-].
    x : array-like
        Monomer conversion [-].

    References
    ----------
    docs/science.md, section 5 [derived].
    """
    C = np.asarray(C, dtype=float)
    return np.asarray(r0, dtype=float) * np.exp((C - 1.0) * np.log1p(-np.asarray(x, dtype=float)))


def apparent_constant(C: ArrayLike, x: ArrayLike) -> NDArray[np.float64]:
    """Naive (initial-ratio) Mayo constant of a cumulative sample: C_app = (1 − (1 − x)^C)/x [-].

    Parameters
    ----------
    C : array-like
        True transfer constant [-].
    x : array-like
        Monomer conversion, 0 < x < 1 [-].

    Examples
    --------
    >>> round(float(apparent_constant(14.8, 0.05)), 2)
    10.64

    References
    ----------
    docs/science.md, section 5 [derived]: 10.64 at x = 0.05 and 7.90 at x = 0.10 for C = 14.8.
    """
    C = np.asarray(C, dtype=float)
    x = np.asarray(x, dtype=float)
    return -np.expm1(C * np.log1p(-x)) / x


def term_kind(term: str) -> str:
    """How a Mayo term's ratio drifts with conversion: ``"consumed"``, ``"unconsumed"`` or ``"monomer"``.

    ``C_A``, ``C_A:<agent>`` and ``C_S`` are consumed by transfer, (X/M)(x) = r0 (1 − x)^(C − 1);
    ``C_I`` is taken at constant concentration while monomer is used up,
    (I/M)(x) = r0/(1 − x); ``C_M`` is constant.

    Raises
    ------
    DesignError
        For any other name (key ``terms``).
    """
    if term.startswith("C_A") or term == "C_S":
        return "consumed"
    if term == "C_I":
        return "unconsumed"
    if term == "C_M":
        return "monomer"
    raise DesignError(f"unknown term {term!r}; use C_A, C_A:<agent>, C_S, C_I or C_M", key="terms")


def _shape(x: np.ndarray, terms: Terms) -> tuple[int, ...]:
    return np.broadcast_shapes(x.shape, *[np.shape(r) for _, r in terms.values()])


def instantaneous_inv_dpn(x: ArrayLike, inv_DPn0: ArrayLike, terms: Terms) -> NDArray[np.float64]:
    """Instantaneous dead chains per monomer converted at conversion x, λ(x) = 1/DPn [-].

    λ(x) = 1/DPn0 + Σ_consumed C r0 (1 − x)^(C − 1) + C_I r0/(1 − x) + C_M: the Mayo sum
    with each ratio drifted to conversion x (see :func:`term_kind`).

    Parameters
    ----------
    x : array-like
        Conversion(s) [-]; broadcast against the initial ratios.
    inv_DPn0 : float or array
        Agent-free 1/DPn0 (kinetic term), constant over conversion [-]; an array gives one
        value per run (broadcast against the ratios).
    terms : mapping
        Term (``C_A``, ``C_A:<agent>``, ``C_S``, ``C_I``, ``C_M``) -> (C [-], r0 [-]), r0 the
        initial ratio [X]0/[M]0 (array or float; for ``C_M`` it only sets the shape).

    References
    ----------
    Mayo, J. Am. Chem. Soc. 1943; docs/science.md, section 5 [derived].
    """
    xp = np.asarray(x, dtype=float)
    a = np.asarray(inv_DPn0, dtype=float)
    lam = np.array(np.broadcast_to(a, np.broadcast_shapes(_shape(xp, terms), a.shape)))
    for term, (C, r0) in terms.items():
        kind = term_kind(term)
        r = np.asarray(r0, dtype=float)
        if kind == "consumed":
            lam = lam + C * r * np.exp((C - 1.0) * np.log1p(-xp))
        elif kind == "unconsumed":
            lam = lam + C * r / (1.0 - xp)
        else:
            lam = lam + C * np.ones_like(r)
    return lam


def cumulative_inv_dpn(x: ArrayLike, inv_DPn0: ArrayLike, terms: Terms) -> NDArray[np.float64]:
    """Cumulative 1/DPn at conversion x, (1/x) ∫0^x λ dx' in closed form [-].

    Consumed terms give r0 (1 − (1 − x)^C)/x, the initiator term C r0 (−ln(1 − x))/x, C_M
    adds C_M; at x = 0 the instantaneous value.

    Parameters
    ----------
    x, inv_DPn0, terms
        As for :func:`instantaneous_inv_dpn`.

    References
    ----------
    docs/science.md, section 5 [derived]: DPn,cum(x) = x/[x/DPn0 + r0 (1 − (1 − x)^C_A)].
    """
    xv = np.asarray(x, dtype=float)
    a = np.asarray(inv_DPn0, dtype=float)
    out = np.array(np.broadcast_to(a, np.broadcast_shapes(_shape(xv, terms), a.shape)))
    zero = xv == 0
    with np.errstate(divide="ignore", invalid="ignore"):
        for term, (C, r0) in terms.items():
            kind = term_kind(term)
            r = np.asarray(r0, dtype=float)
            if kind == "consumed":
                out = out + np.where(zero, C * r, r * (-np.expm1(C * np.log1p(-xv))) / xv)
            elif kind == "unconsumed":
                out = out + np.where(zero, C * r, C * r * (-np.log1p(-xv)) / xv)
            else:
                out = out + C * np.ones_like(r)
    return out


@functools.lru_cache(maxsize=8)
def _unit_nodes(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss–Legendre nodes u on [0, 1] and weights w (Σ w = 1): (1/x)∫0^x f = Σ w f(x u)."""
    nodes, wts = np.polynomial.legendre.leggauss(n)
    u, w = 0.5 * (nodes + 1.0), 0.5 * wts
    u.setflags(write=False)
    w.setflags(write=False)
    return u, w


def _lambda_nodes(x: ArrayLike, inv_DPn0: ArrayLike, terms: Terms,
                  nodes: int) -> tuple[np.ndarray, np.ndarray]:
    """λ at the conversion nodes, shape (..., nodes), and the weights of the mean over [0, x]."""
    u, w = _unit_nodes(nodes)
    xp = np.asarray(x, dtype=float)[..., None] * u
    columns = {k: (C, np.asarray(r, dtype=float)[..., None] if np.ndim(r) else r)
               for k, (C, r) in terms.items()}
    a = np.asarray(inv_DPn0, dtype=float)
    return instantaneous_inv_dpn(xp, a[..., None] if a.ndim else a, columns), w


def conversion_nodes(nodes: int = N_NODES) -> tuple[np.ndarray, np.ndarray]:
    """Gauss–Legendre nodes u on [0, 1] and weights w with Σ w = 1 (read-only arrays).

    The mean of f over conversion [0, x] is Σ w f(x u) (exact for polynomials of degree
    < 2 ``nodes``); the conversion integrals of this module use them.
    """
    return _unit_nodes(nodes)


def cumulative_dpw(x: ArrayLike, inv_DPn0: ArrayLike, terms: Terms, *,
                   nodes: int = N_NODES, beta: ArrayLike = 0.0) -> NDArray[np.float64]:
    """Cumulative weight-average degree of polymerization at conversion x [-].

    DPw,cum = (1/x) ∫0^x DPw,inst dx' (mass-weighted mixture of instantaneous
    distributions), by Gauss–Legendre quadrature; Mw,cum = M0 DPw,cum. Without
    combination (``beta = 0``) DPw,inst = (2 − λ)/λ, the discrete most-probable value;
    with combination DPw,inst = (2τ + 3β)/σ² − 1 = (2λ + 2β)/(λ + β/2)² − 1
    (:class:`MixedTermination`, discrete form), τ = λ − β/2, σ = λ + β/2.

    Parameters
    ----------
    x, inv_DPn0, terms
        As for :func:`instantaneous_inv_dpn`.
    nodes : int
        Quadrature nodes over conversion.
    beta : float or array
        Radical stops by combination per propagation step, constant over conversion [-]
        (:func:`combination_stops`); 0 for termination without combination. An array
        broadcasts against the runs.

    References
    ----------
    docs/science.md, sections 4.3 and 5 [derived]; Flory 1953 (DPw of the discrete
    distribution); Clay and Gilbert, Macromolecules 1995 (mixed termination).
    """
    lam, w = _lambda_nodes(x, inv_DPn0, terms, nodes)
    b = np.asarray(beta, dtype=float)
    if b.ndim:
        b = b[..., None]
    if not np.any(b):
        return np.sum(w * (2.0 - lam) / lam, axis=-1)
    return np.sum(w * ((2.0 * lam + 2.0 * b) / (lam + 0.5 * b) ** 2 - 1.0), axis=-1)


def cumulative_averages(x: float, inv_DPn0: float, terms: Terms, M0: float, *,
                        nodes: int = N_NODES, beta: float = 0.0) -> tuple[float, float]:
    """Cumulative Mn and Mw [g/mol] of the polymer formed up to conversion x.

    Mn = M0/(1/DPn,cum) (closed form, :func:`cumulative_inv_dpn`) and
    Mw = M0 DPw,cum (quadrature, :func:`cumulative_dpw`); x = 0 gives the instantaneous
    discrete most-probable values M0/λ and M0 (2 − λ)/λ.

    Parameters
    ----------
    x : float
        Monomer conversion, 0 <= x < 1 [-].
    inv_DPn0, terms
        As for :func:`instantaneous_inv_dpn` (scalar ratios).
    M0 : float
        Repeat-unit molar mass [g/mol].
    nodes : int
        Quadrature nodes over conversion.
    beta : float
        Radical stops by combination per propagation step [-] (:func:`cumulative_dpw`);
        Mn does not depend on it (1/DPn = τ + β/2 is the Mayo sum either way).

    References
    ----------
    docs/science.md, sections 4.3 and 5 [derived].
    """
    inv = cumulative_inv_dpn(x, inv_DPn0, terms)
    dpw = cumulative_dpw(x, inv_DPn0, terms, nodes=nodes, beta=beta)
    return float(M0 / inv), float(M0 * dpw)


def cumulative_ln_number(N: ArrayLike, x: float, inv_DPn0: float, terms: Terms, *,
                         nodes: int = N_NODES, beta: float = 0.0) -> NDArray[np.float64]:
    """ln P_cum(N) of the polymer formed up to conversion x, up to an additive constant.

    Dead chains of length N made per monomer converted at one instant are
    n(N) = [τσ + (β/2) σ² N] (1 − σ)^(N − 1) with τ = λ − β/2 and σ = λ + β/2 (chains
    stopped alone plus the products of combination; :class:`MixedTermination`); without
    combination n(N) = λ² (1 − λ)^(N − 1), λ times the discrete most-probable
    distribution. P_cum(N) ∝ ∫0^x n(N; x') dx', evaluated in log space (log-sum-exp over
    the quadrature nodes) so that long chains do not underflow.

    Parameters
    ----------
    N : array-like
        Chain lengths [-].
    x : float
        Monomer conversion [-].
    inv_DPn0, terms
        As for :func:`instantaneous_inv_dpn` (scalar ratios).
    nodes : int
        Quadrature nodes over conversion.
    beta : float
        Radical stops by combination per propagation step, constant over conversion [-].

    References
    ----------
    docs/science.md, sections 4 and 5 [derived]; Clay and Gilbert, Macromolecules 1995.
    """
    lam, w = _lambda_nodes(x, inv_DPn0, terms, nodes)
    Nv = np.asarray(N, dtype=float)
    if beta:
        sig = np.clip(lam + 0.5 * beta, 1e-300, 1.0 - 1e-12)
        tau = lam - 0.5 * beta
        front = np.log(np.maximum((tau * sig)[None, :] + (0.5 * beta) * (sig * sig)[None, :]
                                  * Nv[:, None], 1e-300))
        logterm = front + (Nv[:, None] - 1.0) * np.log1p(-sig)[None, :]
    else:
        lam = np.clip(lam, 1e-300, 1.0 - 1e-12)
        logterm = (2.0 * np.log(lam))[None, :] + (Nv[:, None] - 1.0) * np.log1p(-lam)[None, :]
    mx = logterm.max(axis=1, keepdims=True)
    return mx[:, 0] + np.log(np.sum(w[None, :] * np.exp(logterm - mx), axis=1))


def cumulative_most_probable(x: float, inv_DPn0: float, terms: Terms, M0: float, *,
                             nodes: int = 200, beta: float = 0.0) -> DistributionModel:
    """dw/dlog10 M of the cumulative polymer formed up to conversion x.

    dw/dlog10 M = (1/x) ∫0^x ln10 N n(N; x') dx' with N = M/M0 and n the dead chains per
    monomer converted (:func:`cumulative_ln_number`): without combination
    n = λ² (1 − λ)^(N − 1), the mass-weighted mixture over conversion of instantaneous
    discrete most-probable distributions (x → 0 gives the instantaneous one); with
    combination (``beta`` > 0) each instant contributes the mixed-termination
    distribution of :class:`MixedTermination`. Gauss–Legendre quadrature over x.

    Parameters
    ----------
    x : float
        Monomer conversion, 0 <= x < 1 [-].
    inv_DPn0, terms
        As for :func:`instantaneous_inv_dpn` (scalar ratios).
    M0 : float
        Repeat-unit molar mass [g/mol].
    nodes : int
        Quadrature nodes over conversion.
    beta : float
        Radical stops by combination per propagation step, constant over conversion [-]
        (:func:`combination_stops`).

    Returns
    -------
    DistributionModel
        Averages of the distributions mixed over conversion (mass-weighted means of the
        instantaneous moments, same quadrature): Mn, Mw, Mz, Mz+1 and the dispersity; the
        dw/dlogM peak is NaN (no closed form). With combination Mw uses the discrete
        DPw,inst = (2τ + 3β)/σ² − 1 and Mz, Mz+1 the continuous moments.

    References
    ----------
    docs/science.md, sections 4.3 and 5 [derived]; Flory 1953; Clay and Gilbert 1995.
    """
    lam, w = _lambda_nodes(x, inv_DPn0, terms, nodes)
    b = float(beta)
    sig = lam + 0.5 * b
    tau = lam - 0.5 * b
    log1m = np.log1p(-sig)
    front_a = tau * sig
    front_b = 0.5 * b * sig * sig

    def f(M: np.ndarray) -> np.ndarray:
        N = np.atleast_1d(np.asarray(M, dtype=float)) / M0
        dens = LN10 * (N**2)[:, None] * (front_a[None, :] + front_b[None, :] * N[:, None]) \
            * np.exp((N[:, None] - 1.0) * log1m[None, :])
        out = dens @ w
        return out.reshape(np.shape(M)) if np.ndim(M) else out[0]

    if b == 0.0:
        # instantaneous moments of λ(1 − λ)^(N−1), q = 1 − λ: Σ N² P / Σ N P = (1 + q)/λ,
        # Σ N³ P / Σ N P = (1 + 4q + q²)/λ², Σ N⁴ P / Σ N P = (1 + 11q + 11q² + q³)/λ³
        q = 1.0 - lam
        m2 = float(np.sum(w * (1.0 + q) / lam))
        m3 = float(np.sum(w * (1.0 + 4.0 * q + q * q) / lam**2))
        m4 = float(np.sum(w * (1.0 + 11.0 * q + 11.0 * q * q + q**3) / lam**3))
    else:
        # mass moments of the mixed distribution (per unit mass): (2τ + 3β)/σ² (discrete:
        # minus 1), (6τ + 12β)/σ³, (24τ + 60β)/σ⁴ [derived from MixedTermination]
        m2 = float(np.sum(w * ((2.0 * tau + 3.0 * b) / sig**2 - 1.0)))
        m3 = float(np.sum(w * (6.0 * tau + 12.0 * b) / sig**3))
        m4 = float(np.sum(w * (24.0 * tau + 60.0 * b) / sig**4))
    Mn = float(M0 / cumulative_inv_dpn(x, inv_DPn0, terms))
    avg = {"Mn": Mn, "Mw": M0 * m2, "Mz": M0 * m3 / m2, "Mz1": M0 * m4 / m3,
           "dispersity": M0 * m2 / Mn, "Mp_dwdlogM": float("nan")}
    label = "cumulative most probable" if b == 0.0 else f"cumulative mixed termination (beta={b:g})"
    return DistributionModel(f, avg, f"{label} (x={x:g}, M0={M0:g})")


# ==================================================================== combination


def combination_stops(kinetic: ArrayLike, delta: float) -> NDArray[np.float64]:
    """Radical stops by combination per propagation step, β = 2(1 − δ)/(1 + δ)·K [-].

    K = (1 + δ) k_t [R•]/(k_p [M]) is the kinetic (termination) term of the Mayo sum;
    termination stops radicals at 2 k_t [R•] per radical (IUPAC convention), a fraction
    1 − δ of them by combination, so β = 2 (1 − δ) k_t [R•]/(k_p [M]) = 2(1 − δ)K/(1 + δ),
    and the part of K from disproportionation, 2δK/(1 + δ), joins τ.

    Parameters
    ----------
    kinetic : array-like
        Kinetic term K of 1/DPn [-] (>= 0).
    delta : float
        δ = k_td/k_t, fraction of termination by disproportionation, 0 <= δ <= 1 [-].

    Examples
    --------
    >>> float(combination_stops(5e-4, 1.0)), round(float(combination_stops(5e-4, 0.0)), 12)
    (0.0, 0.001)

    References
    ----------
    docs/science.md, sections 3.3 and 4.3 [derived]; Clay and Gilbert, Macromolecules 1995.
    """
    if not (math.isfinite(delta) and 0.0 <= delta <= 1.0):
        raise DataError(f"δ (fraction of termination by disproportionation) must be in "
                        f"[0, 1], got {delta!r}", key="delta")
    return 2.0 * (1.0 - delta) / (1.0 + delta) * np.maximum(np.asarray(kinetic, dtype=float), 0.0)


def inv_dpn_from_dpw(DPw: ArrayLike, beta: ArrayLike = 0.0) -> NDArray[np.float64]:
    """1/DPn of an instantaneous distribution from its (discrete) DPw and β [-].

    Inverts DPw = (2λ + 2β)/(λ + β/2)² − 1 (:class:`MixedTermination`, discrete form,
    λ = 1/DPn = τ + β/2): with D = DPw + 1,

        λ = [2 − Dβ + 2 √(1 + Dβ)] / (2D),

    which for β = 0 is the exact discrete most-probable relation DPn = (DPw + 1)/2.

    Parameters
    ----------
    DPw : array-like
        Weight-average degree of polymerization Mw/M0 [-].
    beta : array-like
        Radical stops by combination per propagation step [-].

    Examples
    --------
    >>> float(inv_dpn_from_dpw(1999.0))
    0.001

    References
    ----------
    docs/science.md, sections 4.2 and 4.3 [derived].
    """
    D = np.asarray(DPw, dtype=float) + 1.0
    b = np.asarray(beta, dtype=float)
    return (2.0 - D * b + 2.0 * np.sqrt(1.0 + D * b)) / (2.0 * D)


# ==================================================================== impurity level


def impurity_ratio(excess: ArrayLike, C_X: float) -> NDArray[np.float64]:
    """Impurity ratio [X]/[M] [mol/mol] that explains an excess 1/DPn, instantaneously.

    [X]/[M] = Δ(1/DPn)/C_X (the impurity's term of the Mayo sum); multiply by 1e6 for
    ppm (mol of X per mol of monomer) and by [M] for [X] [mol/L].

    Parameters
    ----------
    excess : array-like
        Excess 1/DPn, measured − expected [-].
    C_X : float
        Transfer constant of the impurity [-], > 0.

    Examples
    --------
    >>> round(float(impurity_ratio(1.5e-4, 15.0)) * 1e6, 6)
    10.0

    References
    ----------
    docs/science.md, section 9 [derived]: 10 ppm (mol) of a thiol with C = 15 adds 1.5e-4 to 1/DPn.
    """
    if not C_X > 0:
        raise DataError(f"the impurity's transfer constant must be > 0, got {C_X!r}")
    return np.asarray(excess, dtype=float) / C_X


def impurity_ratio_cumulative(excess: ArrayLike, C_X: float, x: ArrayLike) -> NDArray[np.float64]:
    """Initial impurity ratio [X]0/[M]0 [mol/mol] from an excess 1/DPn of cumulative polymer.

    An impurity consumed by transfer adds r0 (1 − (1 − x)^C_X)/x to the cumulative 1/DPn
    (:func:`cumulative_inv_dpn`), so [X]0/[M]0 = excess·x/(1 − (1 − x)^C_X); x → 0 gives
    the instantaneous excess/C_X. Dividing a cumulative excess by C_X underestimates the
    level at finite conversion (by the factor C_app/C_X of :func:`apparent_constant`).

    Parameters
    ----------
    excess : array-like
        Excess cumulative 1/DPn, measured − expected [-].
    C_X : float
        Transfer constant of the impurity [-], > 0.
    x : array-like
        Monomer conversion of the sample, 0 <= x < 1 [-].

    References
    ----------
    docs/science.md, section 5 [derived].
    """
    if not C_X > 0:
        raise DataError(f"the impurity's transfer constant must be > 0, got {C_X!r}")
    ex = np.asarray(excess, dtype=float)
    xv = np.asarray(x, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        cum = ex * xv / -np.expm1(C_X * np.log1p(-xv))
    return np.where(xv == 0, ex / C_X, cum)
