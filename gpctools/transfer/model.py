"""What each chain-length estimator measures, as a function of the Mayo parameters.

One :class:`SeriesModel` describes one estimator of one group of runs: the design (the
ratios [X]0/[M]0 of the fitted terms), the conversion of each run (or none: low
conversion), the kinetic term, and δ, the share of termination by disproportionation.
Its parameters are θ = (1/DPn0 if free, k if the kinetic term is a regressor, then the
constants in the order of ``terms``).

Per run i the instantaneous dead-chain rate per monomer converted is (docs/science.md,
sections 3.3 and 5.1)

    λ_i(x) = a + k z_i + K_ref,i + Σ_j C_j r_ij(x)

with a the constant part of 1/DPn0, z_i the kinetic regressor (R_p/[M]² or √[I]/[M]),
K_ref,i a kinetic term computed from reference data (when asked for) and r_ij(x) the
drifted ratios of :func:`gpctools.chainlength.instantaneous_inv_dpn`. The kinetic part
K_i (k z_i + K_ref,i, or a − C_M when the kinetic term is the constant intercept) ends
β_i = 2(1 − δ)K_i/(1 + δ) radicals per step by combination
(:func:`gpctools.chainlength.combination_stops`). The observables:

- ``"Mn"``: M0/Mn = cumulative 1/DPn (closed form; independent of δ);
- ``"Mw/2"``: 2 M0/Mw = 2/DPw,cum with DPw,inst = (2τ + 3β)/σ² − 1 (discrete form; for
  δ = 1 the exact discrete most-probable DPn = (DPw + 1)/2);
- ``"CLD"``: Λ, minus the least-squares slope of ln P_cum(N) over the run's CLD window
  (25 log-spaced chain lengths, as SEC slices are spaced), with the mixed-termination
  number distribution; near the peak this differs from τ + β when combination matters,
  which is why the window is modelled and not the high-N limit.

So every estimator is fitted on its own scale while the parameters stay on the 1/DPn
scale: the intercept check and the estimator comparison compare like with like.

References
----------
Mayo, J. Am. Chem. Soc. 1943; Clay and Gilbert, Macromolecules 1995; Moad and Moad,
Macromolecules 1996; docs/science.md, sections 3, 4 and 5 [derived].
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from gpctools.chainlength import (
    combination_stops,
    conversion_nodes,
    cumulative_dpw,
    cumulative_inv_dpn,
    instantaneous_inv_dpn,
    term_kind,
)
from gpctools.errors import DataError
from gpctools.transfer._stats import numeric_jacobian

__all__ = ["SeriesModel", "CLD_POINTS", "KINETIC_NAME"]

#: Chain lengths per CLD window in the Λ model (log-spaced, like SEC slices) [-].
CLD_POINTS = 25
#: Conversion nodes of the drift integrals in the Λ model (Gauss–Legendre) [-].
CLD_NODES = 32
#: Name of the kinetic-term coefficient in θ.
KINETIC_NAME = "k (kinetic term)"


@dataclass(frozen=True)
class SeriesModel:
    """The observation model of one estimator for one group of runs.

    Attributes
    ----------
    estimator : {"Mn", "Mw/2", "CLD"}
    terms : tuple of str
        Fitted constants (``C_A``, ``C_A:<agent>``, ``C_S``, ``C_I``, ``C_M``).
    ratios : numpy.ndarray
        Initial ratios [X]0/[M]0, shape (n, len(terms)) [-] (ones for ``C_M``).
    conversion : numpy.ndarray or None
        Monomer conversion per run [-]; None: instantaneous (low conversion).
    kinetic : numpy.ndarray or None
        Kinetic regressor z per run (R_p/[M]² [L s/mol... as given] or √[I]/[M]); None: the
        kinetic term is constant (part of the intercept).
    kinetic_known : numpy.ndarray or None
        Kinetic term per run computed from reference data [-], added to λ (not fitted).
    intercept : float or None
        Fixed 1/DPn0 [-]; None: fitted.
    delta : float
        δ = k_td/k_t [-]; 1 means no combination (most-probable distributions).
    C_M_known : float
        Non-kinetic part of the constant intercept [-] (a known C_M), subtracted from it to
        get the kinetic part when that is not given otherwise.
    windows : numpy.ndarray or None
        CLD windows (M_low, M_high) per run, shape (n, 2) [g/mol].
    M0 : float or None
        Repeat-unit molar mass [g/mol] (CLD only).
    """

    estimator: str
    terms: tuple[str, ...]
    ratios: np.ndarray
    conversion: np.ndarray | None = None
    kinetic: np.ndarray | None = None
    kinetic_known: np.ndarray | None = None
    intercept: float | None = None
    delta: float = 1.0
    C_M_known: float = 0.0
    windows: np.ndarray | None = None
    M0: float | None = None

    def __post_init__(self) -> None:
        if self.estimator not in ("Mn", "Mw/2", "CLD"):
            raise DataError(f"unknown estimator {self.estimator!r}; use Mn, Mw/2 or CLD",
                            key="estimators")
        for t in self.terms:
            term_kind(t)
        if self.estimator == "CLD" and self.conversion is not None and (
                self.windows is None or self.M0 is None):
            raise DataError("the CLD drift model needs each run's window and M0")

    # ------------------------------------------------------------------ parameters
    @property
    def n(self) -> int:
        """Number of runs."""
        return int(self.ratios.shape[0])

    @property
    def names(self) -> tuple[str, ...]:
        """Names of θ, in order."""
        head = () if self.intercept is not None else ("1/DPn0",)
        kin = (KINETIC_NAME,) if self.kinetic is not None else ()
        return head + kin + tuple(self.terms)

    @property
    def lower(self) -> np.ndarray:
        """Lower bounds of θ: consumed constants >= 0 (the drift law needs C >= 0)."""
        lo = [-np.inf] * (len(self.names) - len(self.terms))
        lo += [0.0 if (self.conversion is not None and term_kind(t) == "consumed") else -np.inf
               for t in self.terms]
        return np.array(lo)

    def subset(self, index: Sequence[int] | np.ndarray) -> SeriesModel:
        """The same model on the runs ``index`` only."""
        idx = np.asarray(index)

        def pick(a: np.ndarray | None) -> np.ndarray | None:
            return None if a is None else np.asarray(a)[idx]

        return SeriesModel(self.estimator, self.terms, self.ratios[idx], pick(self.conversion),
                           pick(self.kinetic), pick(self.kinetic_known), self.intercept,
                           self.delta, self.C_M_known, pick(self.windows), self.M0)

    def split(self, theta: np.ndarray) -> tuple[float, float, np.ndarray]:
        """(a, k, constants) from θ (a is the fixed intercept when it is not fitted)."""
        th = np.asarray(theta, dtype=float)
        i = 0
        if self.intercept is None:
            a = float(th[0])
            i = 1
        else:
            a = float(self.intercept)
        k = 0.0
        if self.kinetic is not None:
            k = float(th[i])
            i += 1
        return a, k, th[i:]

    # ------------------------------------------------------------------ 1/DPn scale
    def agent_free(self, theta: np.ndarray) -> np.ndarray:
        """The part of λ that does not drift: a + k z + K_ref per run [-]."""
        a, k, _ = self.split(theta)
        out = np.full(self.n, a)
        if self.kinetic is not None:
            out = out + k * self.kinetic
        if self.kinetic_known is not None:
            out = out + self.kinetic_known
        return out

    def kinetic_part(self, theta: np.ndarray) -> np.ndarray:
        """Kinetic (termination) term K per run [-], the source of combination."""
        a, k, _ = self.split(theta)
        if self.kinetic is None and self.kinetic_known is None:
            return np.full(self.n, max(a - self.C_M_known, 0.0))
        out = np.zeros(self.n)
        if self.kinetic is not None:
            out = out + k * self.kinetic
        if self.kinetic_known is not None:
            out = out + self.kinetic_known
        return np.maximum(out, 0.0)

    def beta(self, theta: np.ndarray) -> np.ndarray:
        """Radical stops by combination per propagation step per run [-]."""
        if self.delta >= 1.0:
            return np.zeros(self.n)
        return combination_stops(self.kinetic_part(theta), self.delta)

    def _terms(self, theta: np.ndarray, rows: np.ndarray | None = None) -> dict:
        _, _, c = self.split(theta)
        R = self.ratios if rows is None else rows
        return {t: (float(c[j]), R[:, j]) for j, t in enumerate(self.terms)}

    @property
    def is_linear(self) -> bool:
        """True when the observable is linear in θ (Mn at low conversion)."""
        return self.estimator == "Mn" and self.conversion is None

    def inv_dpn(self, theta: np.ndarray, *, instantaneous: bool = False) -> np.ndarray:
        """1/DPn per run [-]: cumulative at each run's conversion, or at x = 0."""
        a0 = self.agent_free(theta)
        if instantaneous or self.conversion is None:
            # the Mayo sum with initial ratios (every kind of term is linear at x = 0)
            return a0 + self.ratios @ self.split(theta)[2]
        terms = self._terms(theta)
        return cumulative_inv_dpn(self.conversion, a0, terms)

    # ------------------------------------------------------------------ observables
    def predict(self, theta: np.ndarray, *, instantaneous: bool = False) -> np.ndarray:
        """The estimator's observable per run [-]: M0/Mn, 2 M0/Mw or Λ."""
        if self.estimator == "Mn":
            return self.inv_dpn(theta, instantaneous=instantaneous)
        x = None if (instantaneous or self.conversion is None) else self.conversion
        if self.estimator == "Mw/2":
            return self._mw_half(theta, x)
        return self._cld(theta, x)

    def _mw_half(self, theta: np.ndarray, x: np.ndarray | None) -> np.ndarray:
        b = self.beta(theta)
        a0 = self.agent_free(theta)
        terms = self._terms(theta)
        if x is None:
            lam = self.inv_dpn(theta, instantaneous=True)
            dpw = (2.0 * lam + 2.0 * b) / (lam + 0.5 * b) ** 2 - 1.0
            return 2.0 / dpw
        return 2.0 / cumulative_dpw(x, a0, terms, beta=b)

    def _cld(self, theta: np.ndarray, x: np.ndarray | None) -> np.ndarray:
        """Λ: minus the least-squares slope of ln P_cum(N) over each run's window.

        Without windows (low conversion only) the high-N slope −ln(1 − σ), σ = λ + β/2
        (= τ + β), the limit the Λ method measures far out on the high-M side.
        """
        if self.windows is None or self.M0 is None:
            lam = self.inv_dpn(theta, instantaneous=True)
            return -np.log1p(-(lam + 0.5 * self.beta(theta)))
        b = self.beta(theta)[:, None, None]
        a0 = self.agent_free(theta)
        if x is None:
            u, w = np.zeros(1), np.ones(1)
        else:
            u, w = conversion_nodes(CLD_NODES)
        xs = np.zeros((self.n, u.size)) if x is None else x[:, None] * u[None, :]
        terms = {t: (C, r[:, None]) for t, (C, r) in self._terms(theta).items()}
        lam = instantaneous_inv_dpn(xs, a0[:, None], terms)[:, None, :]  # (n, 1, nodes)
        lo = np.log(self.windows[:, 0] / self.M0)
        hi = np.log(self.windows[:, 1] / self.M0)
        N = np.exp(lo[:, None] + (hi - lo)[:, None] * np.linspace(0.0, 1.0, CLD_POINTS)[None, :])
        sig = np.clip(lam + 0.5 * b, 1e-300, 1.0 - 1e-12)
        tau = lam - 0.5 * b
        Nn = N[:, :, None]
        front = np.log(np.maximum(tau * sig + 0.5 * b * sig * sig * Nn, 1e-300))
        logterm = front + (Nn - 1.0) * np.log1p(-sig)  # (n, P, nodes)
        mx = logterm.max(axis=2, keepdims=True)
        lnP = mx[:, :, 0] + np.log(np.sum(w[None, None, :] * np.exp(logterm - mx), axis=2))
        Nc = N - N.mean(axis=1, keepdims=True)
        slope = np.sum(Nc * (lnP - lnP.mean(axis=1, keepdims=True)), axis=1) / np.sum(Nc * Nc, axis=1)
        return -slope

    def jacobian(self, theta: np.ndarray) -> np.ndarray:
        """d observable/d θ, shape (n, p): analytic for Mn at low conversion, else forward
        differences (each parameter stepped by 1e-6 of its size).
        """
        th = np.asarray(theta, dtype=float)
        if self.is_linear:
            cols = [] if self.intercept is not None else [np.ones(self.n)]
            if self.kinetic is not None:
                cols.append(self.kinetic)
            return np.column_stack(cols + [self.ratios[:, j] for j in range(len(self.terms))])
        scale = np.array([1e-4] * (len(self.names) - len(self.terms)) + [1e-3] * len(self.terms))
        if self.kinetic is not None:
            j = self.names.index(KINETIC_NAME)
            zmax = float(np.max(np.abs(self.kinetic))) or 1.0
            scale[j] = 1e-4 / zmax
        return numeric_jacobian(lambda t: self.predict(t), th, scale=scale)

    def linear_design(self) -> np.ndarray:
        """The columns of the instantaneous Mayo line (1, z, ratios) in θ order [-]."""
        cols = [] if self.intercept is not None else [np.ones(self.n)]
        if self.kinetic is not None:
            cols.append(self.kinetic)
        return np.column_stack(cols + [self.ratios[:, j] for j in range(len(self.terms))])

    def to_inv_dpn(self, y: np.ndarray, theta: np.ndarray) -> np.ndarray:
        """Observations moved onto the instantaneous 1/DPn scale with the fitted model [-].

        y_i · λ_i(0)/ŷ_i: the model ratio converts Mw/2 and Λ to 1/DPn (mixed
        termination) and cumulative values to x = 0 (drift), so that the points can be
        plotted against the instantaneous Mayo line.
        """
        return np.asarray(y, dtype=float) * self.inv_dpn(theta, instantaneous=True) / self.predict(theta)
