"""Replicate precision: pooled RSD over all replicate groups, the repeatability limit per
group, or the worst group, each with the false-fail rate of a sound system.

A replicate group is the usable injections of one sample (same ``sample_id``) in one
sequence. With ``x_ij`` the value of injection j of group i (n_i injections, mean m_i):

* group RSD ``s_i = 100·sd(x_i)/m_i`` [%] (sample SD, ddof = 1);
* **pooled** (default): ``s_p = sqrt(Σ(n_i - 1)·s_i² / Σ(n_i - 1))`` against the RSD limit
  L. With a true repeatability σ, ``ν·s_p²/σ² ~ χ²_ν`` (ν = Σ(n_i - 1)), so a sound system
  fails with probability ``P(χ²_ν > ν·(L/σ)²)`` [derived];
* **pairs** (repeatability limit): each group's range ``100·(max - min)/m_i`` against
  ``f(n_i)·σ_r`` with ``f(2) = 2.8`` (r = 2.8·σ_r, ISO 5725-6 [from memory]) and, for
  n > 2, the 95 % point of the range of n normal values (studentized range with infinite
  degrees of freedom, scipy); a sound system fails with probability
  ``1 - Π_i P(W_n ≤ f(n_i))`` [derived];
* **worst**: the largest group RSD against L (earlier builds); false-fail probability
  ``1 - Π_i P(χ²_(n_i-1) ≤ (n_i - 1)·(L/σ)²)`` [derived]. With σ = 1.5 % and L = 3 % it
  fails 17 % of sound sequences with 4 duplicate pairs and 31 % with 8.

Each rule's false-fail rate is also measured by simulating sound sequences of the same
group sizes (seeded), so the stated number does not rest on the closed form alone.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import MethodError
from gpctools.sheets.cells import finite_or_none

__all__ = ["REPLICATE_RULES", "ReplicateGroup", "ReplicatePrecision", "replicate_precision",
           "false_fail_closed_form", "false_fail_simulated", "range_factor"]

#: The replicate rules (see the module documentation).
REPLICATE_RULES = ("pooled", "pairs", "worst")
#: Simulated sound sequences behind each stated false-fail rate (standard error of a 5 %
#: rate about 0.15 %).
SIMULATIONS = 20000


def range_factor(n: int) -> float:
    """Critical range factor f(n): the range of n repeat results exceeds f(n)·σ_r with 5 %
    probability. f(2) = 2.8 (ISO 5725-6, r = 2.8·σ_r [from memory]); n > 2 the 0.95
    quantile of the range of n standard normal values (scipy's studentized range with
    infinite degrees of freedom; 3.31, 3.63, 3.86 for n = 3, 4, 5).
    """
    if n < 2:
        return math.nan
    if n == 2:
        return 2.8
    return _range_quantile(int(n))


@functools.lru_cache(maxsize=32)
def _range_quantile(n: int) -> float:
    from scipy.stats import studentized_range

    return float(studentized_range.ppf(0.95, n, np.inf))


@functools.lru_cache(maxsize=256)
def _range_cdf(w: float, n: int) -> float:
    if n == 2:  # range of two normals = sqrt(2)|Z| [derived]
        from scipy.stats import norm

        return float(2 * norm.cdf(w / math.sqrt(2)) - 1)
    from scipy.stats import studentized_range

    return float(studentized_range.cdf(w, n, np.inf))


def false_fail_closed_form(rule: str, sizes: Sequence[int], limit_pct: float, sigma_pct: float) -> float:
    """Probability that a sound system (true RSD ``sigma_pct``) fails the rule [-].

    Parameters
    ----------
    rule : str
        ``"pooled"``, ``"pairs"`` or ``"worst"``.
    sizes : sequence of int
        Injections per group (groups of one are ignored).
    limit_pct : float
        RSD limit L [%] (pooled, worst).
    sigma_pct : float
        True repeatability σ [%]; also σ_r of the pairs rule.
    """
    from scipy.stats import chi2

    ns = [int(n) for n in sizes if n >= 2]
    if not ns:
        return math.nan
    ratio = (limit_pct / sigma_pct) ** 2
    if rule == "pooled":
        nu = sum(n - 1 for n in ns)
        return float(chi2.sf(nu * ratio, nu))
    if rule == "worst":
        return float(1 - np.prod([chi2.cdf((n - 1) * ratio, n - 1) for n in ns]))
    return float(1 - np.prod([_range_cdf(range_factor(n), n) for n in ns]))


def false_fail_simulated(rule: str, sizes: Sequence[int], limit_pct: float, sigma_pct: float,
                         *, simulations: int = SIMULATIONS, seed: int = 5725) -> float:
    """The same probability measured on ``simulations`` simulated sound sequences [-]:
    values ``100·(1 + σ·z)`` per injection, judged exactly as :func:`replicate_precision`
    judges them.
    """
    ns = tuple(int(n) for n in sizes if n >= 2)
    if not ns:
        return math.nan
    return _simulate(rule, ns, float(limit_pct), float(sigma_pct), int(simulations), int(seed))


@functools.lru_cache(maxsize=64)
def _simulate(rule: str, ns: tuple[int, ...], limit: float, sigma: float, sims: int, seed: int) -> float:
    rng = np.random.default_rng(seed)
    fails = np.zeros(sims, dtype=bool)
    num = np.zeros(sims)
    den = 0
    for n in ns:
        x = 100.0 * (1.0 + sigma / 100.0 * rng.standard_normal((sims, n)))
        m = x.mean(axis=1)
        rsd = 100.0 * x.std(axis=1, ddof=1) / m
        if rule == "pooled":
            num += (n - 1) * rsd**2
            den += n - 1
        elif rule == "worst":
            fails |= rsd > limit
        else:
            fails |= 100.0 * (x.max(axis=1) - x.min(axis=1)) / m > range_factor(n) * sigma
    if rule == "pooled":
        fails = np.sqrt(num / den) > limit
    return float(fails.mean())


@dataclass(frozen=True)
class ReplicateGroup:
    """One sample's usable injections in one sequence.

    Attributes
    ----------
    key : str
        The ``sample_id``.
    values : tuple of float
        The injections' values (unit of the quantity).
    """

    key: str
    values: tuple[float, ...]

    @property
    def n(self) -> int:
        """Number of injections."""
        return len(self.values)

    @property
    def mean(self) -> float:
        """Mean of the injections."""
        return float(np.mean(self.values))

    @property
    def rsd_pct(self) -> float:
        """RSD 100·sd/mean [%] (ddof = 1)."""
        return float(100.0 * np.std(self.values, ddof=1) / self.mean) if self.n > 1 else math.nan

    @property
    def range_pct(self) -> float:
        """Relative range 100·(max - min)/mean [%]."""
        return float(100.0 * (max(self.values) - min(self.values)) / self.mean) if self.n > 1 else math.nan


@dataclass(frozen=True, repr=False)
class ReplicatePrecision(Display):
    """Replicate precision of one quantity in one sequence, judged by one rule.

    Attributes
    ----------
    quantity : str
        ``"Mw"`` or ``"Mn"``.
    rule : str
    groups : tuple of ReplicateGroup
        Groups with two or more injections.
    value : float
        The statistic judged [%]: pooled RSD, worst RSD, or the worst range as a
        multiple of its limit (pairs: ``range_pct/(f(n)·σ_r)``, limit 1).
    limit : float
    passed : bool or None
        None when there is no group with two injections.
    dof : int
        Σ(n_i - 1).
    sigma_pct : float
        Repeatability σ assumed for a sound system (and σ_r of the pairs rule) [%].
    false_fail_simulated, false_fail_closed : float
        Probability that a sound system fails [-].
    reason : str
    """

    quantity: str
    rule: str
    groups: tuple[ReplicateGroup, ...]
    value: float
    limit: float
    passed: bool | None
    dof: int
    sigma_pct: float
    false_fail_simulated: float
    false_fail_closed: float
    reason: str

    def false_fail_text(self) -> str:
        """The false-fail rate in words, for reports."""
        if not self.groups:
            return "not evaluated"
        return (f"a sound system (true RSD {self.sigma_pct:g} %) fails this {self.rule} rule with "
                f"{100 * self.false_fail_simulated:.2g} % probability for these group sizes "
                f"(simulation of {SIMULATIONS} sequences; closed form {100 * self.false_fail_closed:.2g} %)")

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            "quantity": self.quantity,
            "rule": self.rule,
            "groups": [{"sample_id": g.key, "injections": g.n, "mean": g.mean,
                        "RSD [%]": finite_or_none(g.rsd_pct), "range [%]": finite_or_none(g.range_pct)}
                       for g in self.groups],
            "value": finite_or_none(self.value),
            "limit": self.limit,
            "passed": self.passed,
            "degrees of freedom": self.dof,
            "assumed repeatability [%]": self.sigma_pct,
            "false-fail rate, simulated [-]": finite_or_none(self.false_fail_simulated),
            "false-fail rate, closed form [-]": finite_or_none(self.false_fail_closed),
            "reason": self.reason,
        }


def replicate_precision(groups: Sequence[ReplicateGroup], quantity: str, *, rule: str = "pooled",
                        limit_pct: float = 3.0, sigma_pct: float = 1.5) -> ReplicatePrecision:
    """Judge the replicate precision of one quantity (see the module documentation).

    Parameters
    ----------
    groups : sequence of ReplicateGroup
        Groups of fewer than two values are ignored.
    quantity : str
    rule : {"pooled", "pairs", "worst"}
    limit_pct : float
        RSD limit [%] (pooled, worst).
    sigma_pct : float
        Repeatability σ_r [%]: the pairs rule's σ_r and the sound system of the stated
        false-fail rate.

    Returns
    -------
    ReplicatePrecision
    """
    if rule not in REPLICATE_RULES:
        raise MethodError(f"replicate rule must be one of {', '.join(REPLICATE_RULES)}, got {rule!r}",
                          key="suitability.replicate_rule")
    gs = tuple(g for g in groups if g.n >= 2)
    if not gs:
        return ReplicatePrecision(quantity, rule, (), math.nan, limit_pct, None, 0, sigma_pct,
                                  math.nan, math.nan, "no sample with two or more usable injections")
    sizes = [g.n for g in gs]
    dof = sum(n - 1 for n in sizes)
    sim = false_fail_simulated(rule, sizes, limit_pct, sigma_pct)
    closed = false_fail_closed_form(rule, sizes, limit_pct, sigma_pct)
    if rule == "pooled":
        value = math.sqrt(sum((g.n - 1) * g.rsd_pct**2 for g in gs) / dof)
        passed = value <= limit_pct * (1 + 1e-12)
        reason = (f"pooled RSD {value:.2f} % over {len(gs)} sample(s), {dof} degree(s) of freedom "
                  f"(limit {limit_pct:g} %)")
        return ReplicatePrecision(quantity, rule, gs, value, limit_pct, passed, dof, sigma_pct, sim,
                                  closed, reason)
    if rule == "worst":
        worst = max(gs, key=lambda g: g.rsd_pct)
        value = worst.rsd_pct
        passed = value <= limit_pct * (1 + 1e-12)
        reason = f"worst {worst.key} ({worst.n} injections): {value:.2f} % (limit {limit_pct:g} %)"
        return ReplicatePrecision(quantity, rule, gs, value, limit_pct, passed, dof, sigma_pct, sim,
                                  closed, reason)
    ratios = [(g.range_pct / (range_factor(g.n) * sigma_pct), g) for g in gs]
    value, worst = max(ratios, key=lambda t: t[0])
    passed = value <= 1 + 1e-12
    lim = range_factor(worst.n) * sigma_pct
    bad = [f"{g.key} range {g.range_pct:.2f} % > r = {range_factor(g.n) * sigma_pct:.2f} %"
           for r, g in ratios if r > 1 + 1e-12]
    reason = ("; ".join(bad) if bad else
              f"every range within its limit; widest {worst.key}: {worst.range_pct:.2f} % "
              f"(r = {lim:.2f} % for {worst.n} injections)")
    return ReplicatePrecision(quantity, rule, gs, value, 1.0, passed, dof, sigma_pct, sim, closed, reason)
