"""Scoring of the diagnosis: χ² of one hypothesis, its one-parameter fit with a
plausibility prior, the profile interval of the fitted value, and Akaike weights.

Each observation is y = ln(measured/expected) (or a raw check value) with a standard
uncertainty σ. A hypothesis predicts μ(θ) for every observation from one parameter θ
(observations it does not name are predicted as 0, i.e. "as expected"). With r = y − μ(θ)
over the observations the hypothesis does not leave *free*,

    χ²(θ) = rᵀ C⁻¹ r,   C = diag(σ² + σ_h(θ)²) + C_model,

where σ_h is an extra uncertainty a hypothesis may add (the flow hypothesis: the
uncertainty of B·V) and C_model the covariance of the expected R_p, Mn and Mw from the
parameter uncertainties (:mod:`gpctools.kinetics.uncertainty`); without it C is
diagonal. The residual reported per observation is r_i/√C_ii.

Plausibility: each hypothesis may carry a prior range of its fitted value
(``Hypothesis.prior_range``); outside it a penalty P(θ) = (d/s)² is added, d the distance
outside the range (in ln for factors) and s the range's tail scale, i.e. a flat prior
with half-normal tails, −2 ln prior up to a constant. θ minimises χ² + P (grid, then a
bounded scalar refinement between the neighbours of the best grid point).

Ranking: AIC = χ²_min + P + 2k (k fitted parameters: 1, or 0 for "no cause"); the
likelihood share of a cause is w = exp(−(AIC − AIC_min)/2), normalised over all causes
[%] (Akaike weights). The interval of the fitted value is where χ² + P stays within
3.84 of its minimum (profile likelihood, 95 % for one parameter) [published: the χ²
quantile with one degree of freedom, 3.841]. The goodness of fit of the best cause is
the χ² upper-tail probability for (observations − free − k) degrees of freedom (at
least 1).

References
----------
- Akaike, IEEE Trans. Autom. Control 19 (1974) 716; Burnham and Anderson, Model
  Selection and Multimodel Inference, 2nd ed., Springer 2002, §2.9 (Akaike weights)
  [from memory].
- Profile-likelihood intervals: Venzon and Moolgavkar, Appl. Stat. 37 (1988) 87
  [from memory].
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # pragma: no cover
    from gpctools.kinetics.hypotheses import AnchoredModel, Hypothesis

__all__ = [
    "Observation",
    "HypothesisFit",
    "PROFILE_DELTA",
    "chi_square",
    "fit_hypothesis",
    "akaike_shares",
    "fit_probability",
]

#: Δ(χ² + P) of a 95 % profile interval for one parameter [published: χ² quantile, 1 dof].
PROFILE_DELTA = 3.841


@dataclass(frozen=True)
class Observation:
    """One observation: y = ln(measured/expected) (or a raw check value) and σ.

    ``name`` is one of "R_p", "Mn", "Mw", "check standard", "flow marker",
    "low-M limit", "outside calibration", "induction period", "low-M tail",
    "high-M shoulder"; ``recorded`` is False for priors of checks that were not made.
    """

    name: str
    y: float
    sigma: float
    recorded: bool
    measured: float | None
    expected: float | None
    unit: str


@dataclass(frozen=True)
class HypothesisFit:
    """Best fit of one hypothesis.

    Attributes
    ----------
    hypothesis : Hypothesis
    theta : float
        Best parameter on the hypothesis' own scale (see ``Hypothesis.grid``).
    value : float
        The fitted parameter in the reported unit (``Hypothesis.value(theta)``).
    chi2 : float
        χ² at ``theta`` [-] (data only).
    residuals : tuple of (observation, residual in σ)
        r_i/√C_ii of every counted observation, in observation order.
    penalty : float
        Plausibility penalty P at ``theta`` [-] (0 inside the prior range).
    interval : (float, float)
        95 % profile interval of ``value`` (the grid's end where the profile does not
        rise by 3.84 before it).
    """

    hypothesis: Hypothesis
    theta: float
    value: float
    chi2: float
    residuals: tuple[tuple[str, float], ...]
    penalty: float = 0.0
    interval: tuple[float, float] = (math.nan, math.nan)

    @property
    def score(self) -> float:
        """χ² + P [-]."""
        return self.chi2 + self.penalty


def _covariance(
    names: Sequence[str], sigmas: Sequence[float], model: AnchoredModel
) -> np.ndarray:
    C = np.diag(np.asarray(sigmas, dtype=float) ** 2)
    cov = getattr(model, "covariance", None)
    if cov is not None and len(names):
        idx = {n: i for i, n in enumerate(model.covariance_names)}
        pos = [(a, idx[n]) for a, n in enumerate(names) if n in idx]
        for a, i in pos:
            for b, j in pos:
                C[a, b] += cov[i, j]
    return C


def chi_square(
    hypothesis: Hypothesis,
    theta: float,
    model: AnchoredModel,
    observations: Mapping[str, Observation],
) -> tuple[float, dict[str, float]]:
    """χ² of ``hypothesis`` at ``theta`` and the residual of each counted observation [σ].

    Parameters
    ----------
    hypothesis : Hypothesis
    theta : float
        Parameter on the hypothesis' grid scale.
    model : AnchoredModel
        The anchored kinetic model the hypothesis perturbs (with the model covariance).
    observations : mapping of name to Observation

    Returns
    -------
    (float, dict)
        χ² [-] and {observation name: r_i/√C_ii}.
    """
    mu = hypothesis.predict(theta, model)
    names: list[str] = []
    r: list[float] = []
    s: list[float] = []
    for name, o in observations.items():
        if name in hypothesis.free:
            continue
        sig = o.sigma
        extra = hypothesis.extra_sigma(theta, name, model)
        if extra is not None:
            sig = math.hypot(sig, extra)
        names.append(name)
        r.append(o.y - mu.get(name, 0.0))
        s.append(sig)
    if not names:
        return 0.0, {}
    C = _covariance(names, s, model)
    rv = np.asarray(r)
    chi2 = float(rv @ np.linalg.solve(C, rv))
    res = {n: float(ri / math.sqrt(C[i, i])) for i, (n, ri) in enumerate(zip(names, r))}
    return chi2, res


def _objective(hypothesis: Hypothesis, theta: float, model: AnchoredModel,
               observations: Mapping[str, Observation]) -> float:
    return chi_square(hypothesis, theta, model, observations)[0] + hypothesis.penalty(theta, model)


def _crossing(grid: np.ndarray, vals: np.ndarray, i: int, level: float, step: int) -> float:
    """θ where the profile first rises to ``level`` from index i going by ``step`` (±1);
    the grid's end when it never does (linear interpolation between grid points).
    """
    j = i
    while 0 <= j + step < len(grid):
        if vals[j + step] >= level:
            a, b = vals[j], vals[j + step]
            t = (level - a) / (b - a) if b != a else 0.0
            return float(grid[j] + t * (grid[j + step] - grid[j]))
        j += step
    return float(grid[j])


def fit_hypothesis(
    hypothesis: Hypothesis,
    model: AnchoredModel,
    observations: Mapping[str, Observation],
) -> HypothesisFit:
    """Minimise χ² + P over the hypothesis' grid, then refine between the grid neighbours.

    The refinement is a bounded scalar minimisation (scipy ``minimize_scalar``,
    ``method="bounded"``, x tolerance 1e-10 of the bracket); it is kept only when it
    lowers the objective below the best grid point. The 95 % interval follows the grid
    profile (module docstring).
    """
    from scipy.optimize import minimize_scalar

    grid = np.asarray(hypothesis.grid(), dtype=float)
    vals = np.array([_objective(hypothesis, t, model, observations) for t in grid])
    i = int(np.argmin(vals))
    best_t, best = float(grid[i]), float(vals[i])
    if len(grid) > 2:
        lo = float(grid[max(i - 1, 0)])
        hi = float(grid[min(i + 1, len(grid) - 1)])
        lo, hi = min(lo, hi), max(lo, hi)
        if hi > lo:
            r = minimize_scalar(
                lambda t: _objective(hypothesis, t, model, observations),
                bounds=(lo, hi), method="bounded",
                options={"xatol": 1e-10 * max(1.0, abs(hi - lo))},
            )
            if r.success and r.fun < best:
                best_t, best = float(r.x), float(r.fun)
    chi2, res = chi_square(hypothesis, best_t, model, observations)
    level = best + PROFILE_DELTA
    ends = [_crossing(grid, vals, i, level, -1), _crossing(grid, vals, i, level, +1)]
    bounds = sorted(float(hypothesis.value(t, model)) for t in ends)
    return HypothesisFit(
        hypothesis=hypothesis,
        theta=best_t,
        value=float(hypothesis.value(best_t, model)),
        chi2=float(chi2),
        residuals=tuple((k, float(v)) for k, v in res.items()),
        penalty=float(hypothesis.penalty(best_t, model)),
        interval=(bounds[0], bounds[1]),
    )


def akaike_shares(score: Sequence[float], k: Sequence[int]) -> np.ndarray:
    """Likelihood shares (Akaike weights) [%] from χ²_min + P and parameter counts.

    AIC_i = score_i + 2k_i; w_i = exp(−(AIC_i − min AIC)/2); share_i = 100·w_i/Σw.
    """
    aic = np.array([c + 2 * n for c, n in zip(score, k, strict=True)])
    w = np.exp(-(aic - aic.min()) / 2.0)
    return 100.0 * w / w.sum()


def fit_probability(chi2: float, n_observations: int, k: int) -> tuple[float, int]:
    """Upper-tail χ² probability of a fit and its degrees of freedom max(n − k, 1)."""
    from scipy.stats import chi2 as _chi2

    dof = max(n_observations - k, 1)
    return float(_chi2.sf(chi2, dof)), dof
