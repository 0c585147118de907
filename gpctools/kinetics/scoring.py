"""Scoring of the diagnosis: χ² of one hypothesis, its one-parameter fit, Akaike weights.

Each observation is y = ln(measured/expected) (or a raw check value) with a standard
uncertainty σ. A hypothesis predicts μ(θ) for every observation from one parameter θ
(observations it does not name are predicted as 0, i.e. "as expected"):

    χ²(θ) = Σ ((y − μ(θ))/σ_eff)²,   σ_eff = (σ² + σ_h(θ)²)^½,

where σ_h is an extra uncertainty a hypothesis may add to an observation (the flow
hypothesis: the uncertainty of B·V). Observations a hypothesis leaves *free* (e.g. the
induction period for a retarder) are not counted. θ is fitted on the hypothesis' grid,
then refined by a bounded scalar minimisation between the neighbours of the best grid
point.

Ranking: AIC = χ²_min + 2k (k fitted parameters: 1, or 0 for "no cause"); the likelihood
share of a cause is w = exp(−(AIC − AIC_min)/2), normalised over all causes [%]
(Akaike weights). The goodness of fit of the best cause is the χ² upper-tail
probability for (observations − free − k) degrees of freedom (at least 1).

References
----------
- Akaike, IEEE Trans. Autom. Control 19 (1974) 716; Burnham and Anderson, Model
  Selection and Multimodel Inference, 2nd ed., Springer 2002, §2.9 (Akaike weights)
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
    "chi_square",
    "fit_hypothesis",
    "akaike_shares",
    "fit_probability",
]


@dataclass(frozen=True)
class Observation:
    """One observation: y = ln(measured/expected) (or a raw check value) and σ.

    ``name`` is one of "R_p", "Mn", "Mw", "check standard", "flow marker",
    "low-M limit", "outside calibration", "induction period"; ``recorded`` is False for
    priors of checks that were not made.
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
        χ² at ``theta`` [-].
    residuals : tuple of (observation, residual in σ)
        (y − μ)/σ_eff of every counted observation, in observation order.
    """

    hypothesis: Hypothesis
    theta: float
    value: float
    chi2: float
    residuals: tuple[tuple[str, float], ...]


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
        The anchored kinetic model the hypothesis perturbs.
    observations : mapping of name to Observation

    Returns
    -------
    (float, dict)
        χ² [-] and {observation name: (y − μ)/σ_eff}.
    """
    mu = hypothesis.predict(theta, model)
    total = 0.0
    res: dict[str, float] = {}
    for name, o in observations.items():
        if name in hypothesis.free:
            continue
        s = o.sigma
        extra = hypothesis.extra_sigma(theta, name, model)
        if extra is not None:
            s = math.hypot(s, extra)
        r = (o.y - mu.get(name, 0.0)) / s
        res[name] = r
        total += r * r
    return total, res


def fit_hypothesis(
    hypothesis: Hypothesis,
    model: AnchoredModel,
    observations: Mapping[str, Observation],
) -> HypothesisFit:
    """Minimise χ² over the hypothesis' grid, then refine between the grid neighbours.

    The refinement is a bounded scalar minimisation (scipy ``minimize_scalar``,
    ``method="bounded"``, x tolerance 1e-10 of the bracket); it is kept only when it
    lowers χ² below the best grid point.
    """
    from scipy.optimize import minimize_scalar

    grid = hypothesis.grid()
    vals = [chi_square(hypothesis, t, model, observations)[0] for t in grid]
    i = int(np.argmin(vals))
    best_t, best = float(grid[i]), vals[i]
    if len(grid) > 2:
        lo = float(grid[max(i - 1, 0)])
        hi = float(grid[min(i + 1, len(grid) - 1)])
        if hi > lo:
            r = minimize_scalar(
                lambda t: chi_square(hypothesis, t, model, observations)[0],
                bounds=(lo, hi), method="bounded",
                options={"xatol": 1e-10 * max(1.0, abs(hi - lo))},
            )
            if r.success and r.fun < best:
                best_t, best = float(r.x), float(r.fun)
    chi2, res = chi_square(hypothesis, best_t, model, observations)
    return HypothesisFit(
        hypothesis=hypothesis,
        theta=best_t,
        value=float(hypothesis.value(best_t, model)),
        chi2=float(chi2),
        residuals=tuple((k, float(v)) for k, v in res.items()),
    )


def akaike_shares(chi2: Sequence[float], k: Sequence[int]) -> np.ndarray:
    """Likelihood shares (Akaike weights) [%] from χ²_min and parameter counts.

    AIC_i = χ²_i + 2k_i; w_i = exp(−(AIC_i − min AIC)/2); share_i = 100·w_i/Σw.
    """
    aic = np.array([c + 2 * n for c, n in zip(chi2, k, strict=True)])
    w = np.exp(-(aic - aic.min()) / 2.0)
    return 100.0 * w / w.sum()


def fit_probability(chi2: float, n_observations: int, k: int) -> tuple[float, int]:
    """Upper-tail χ² probability of a fit and its degrees of freedom max(n − k, 1)."""
    from scipy.stats import chi2 as _chi2

    dof = max(n_observations - k, 1)
    return float(_chi2.sf(chi2, dof)), dof
