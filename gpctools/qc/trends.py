"""Control charts of results across batches: Shewhart individuals charts and run rules.

Individuals (X) chart with moving ranges of two [1]_ [2]_:

* centre line ``CL = mean(x)`` over the points that set the limits;
* ``MR_i = |x_i - x_(i-1)|`` over those points, ``sigma = mean(MR) / d2`` with
  ``d2 = 1.128`` for subgroups of two;
* control limits ``CL ± 3·sigma`` and zone edges at ±1 and ±2 sigma.

Run rules, in named sets (:data:`RULE_SETS`, chosen with :func:`rule_set`): the Western
Electric rules [3]_ ``WE1``-``WE4`` (one point beyond 3 sigma; 2 of 3 beyond 2 sigma; 4 of 5
beyond 1 sigma, same side; 8 in a row on one side) and Nelson's eight tests [4]_
``N1``-``N8`` (N1 beyond 3 sigma, N2 nine in a row on one side, N3 six in a row rising or
falling, N4 fourteen alternating, N5 2 of 3 beyond 2 sigma, N6 4 of 5 beyond 1 sigma,
N7 fifteen within 1 sigma, N8 eight beyond 1 sigma either side). The default set is
``nelson-1-2`` (N1 and N2): a point beyond 3 sigma or a sustained shift, with few false
alarms. :func:`false_alarm_rate` estimates a chart's false-alarm rate by simulating
in-control charts of its layout (limits estimated from the same number of points).

"Beyond" is strict (a point exactly on a zone edge is not beyond it). A point is flagged
with a rule when it is itself beyond the rule's zone and completes the pattern with the
points before it; at the start of a series the window holds the points available
(two successive points beyond 2 sigma already break ``WE2``). Points that set no limits
(phase II, e.g. the current batch against limits from history) are tested the same way.

References
----------
.. [1] W. A. Shewhart, Economic Control of Quality of Manufactured Product, 1931.
.. [2] ISO 7870-2, Control charts - Part 2: Shewhart control charts (table of control
   chart constants, d2 = 1.128 for n = 2) [from memory]; d2 = 2/sqrt(pi) = 1.1284 is the
   mean range of two normal values in units of sigma [derived].
.. [3] Western Electric Company, Statistical Quality Control Handbook, 1956 [published].
.. [4] L. S. Nelson, "The Shewhart control chart - tests for special causes", J. Quality
   Technology 16 (1984) 237 [published]; the same tests in ISO 7870-2 [from memory].
"""

from __future__ import annotations

import functools
import warnings as _warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from gpctools.display import Display
from gpctools.errors import DataError, GpcWarning, MethodError
from gpctools.sheets.cells import finite_or_none

__all__ = [
    "D2_MOVING_RANGE",
    "RunRule",
    "WESTERN_ELECTRIC_RULES",
    "NELSON_RULES",
    "RULE_SETS",
    "DEFAULT_RULE_SET",
    "rule_set",
    "rule_flags",
    "FalseAlarmRate",
    "false_alarm_rate",
    "RULE_SET_NAME",
    "MIN_POINTS_FOR_LIMITS",
    "TrendWarning",
    "Violation",
    "ControlChart",
    "individuals_chart",
    "rule_violations",
]

#: d2 for moving ranges of two points [from memory: ISO 7870-2 table of constants;
#: 2/sqrt(pi) = 1.1284 derived for normal data].
D2_MOVING_RANGE = 1.128
#: Fewer points than this give provisional limits (common practice asks 20-25 for trial
#: limits; fewer are flagged with a warning, not refused).
MIN_POINTS_FOR_LIMITS = 20


class TrendWarning(GpcWarning):
    """Control limits from few points, or no spread to set limits."""


#: Kinds of run rule (see :class:`RunRule`).
RULE_KINDS = ("zone", "trend", "alternate", "within", "outside")


@dataclass(frozen=True)
class RunRule:
    """A run rule (a test for a special cause on an individuals chart).

    Attributes
    ----------
    code : str
        Short name (``"WE1"``, ``"N2"``).
    description : str
    count, window : int
        ``kind="zone"``: ``count`` of ``window`` successive points beyond ``zone`` sigma on
        the same side. Other kinds: ``count`` points in a row (``window`` = ``count``).
    zone : float
        Zone edge in sigma; 0 means "on one side of the centre line".
    kind : str
        ``"zone"`` (above), ``"trend"`` (``count`` points in a row steadily rising or
        falling), ``"alternate"`` (``count`` points in a row alternating up and down),
        ``"within"`` (``count`` points in a row within ±``zone`` sigma), ``"outside"``
        (``count`` points in a row beyond ±``zone`` sigma, either side).
    """

    code: str
    description: str
    count: int
    window: int
    zone: float
    kind: str = "zone"

    def __post_init__(self) -> None:
        if self.kind not in RULE_KINDS:
            raise DataError(f"run rule {self.code}: kind must be one of {', '.join(RULE_KINDS)}",
                            key=self.code)
        if not (1 <= self.count <= self.window):
            raise DataError(f"run rule {self.code}: need 1 <= count <= window", key=self.code)


#: The four Western Electric run rules [published: Western Electric Statistical Quality
#: Control Handbook, 1956].
WESTERN_ELECTRIC_RULES: tuple[RunRule, ...] = (
    RunRule("WE1", "one point beyond 3 sigma", 1, 1, 3.0),
    RunRule("WE2", "2 of 3 successive points beyond 2 sigma on the same side", 2, 3, 2.0),
    RunRule("WE3", "4 of 5 successive points beyond 1 sigma on the same side", 4, 5, 1.0),
    RunRule("WE4", "8 successive points on the same side of the centre line", 8, 8, 0.0),
)

#: The eight tests for special causes of L. S. Nelson (J. Quality Technology 16, 1984,
#: 237) [published], numbered as there; ISO 7870-2 lists the same eight tests [from memory].
NELSON_RULES: tuple[RunRule, ...] = (
    RunRule("N1", "one point beyond 3 sigma", 1, 1, 3.0),
    RunRule("N2", "9 points in a row on the same side of the centre line", 9, 9, 0.0),
    RunRule("N3", "6 points in a row steadily rising or falling", 6, 6, 0.0, "trend"),
    RunRule("N4", "14 points in a row alternating up and down", 14, 14, 0.0, "alternate"),
    RunRule("N5", "2 of 3 successive points beyond 2 sigma on the same side", 2, 3, 2.0),
    RunRule("N6", "4 of 5 successive points beyond 1 sigma on the same side", 4, 5, 1.0),
    RunRule("N7", "15 points in a row within 1 sigma of the centre line", 15, 15, 1.0, "within"),
    RunRule("N8", "8 points in a row beyond 1 sigma, either side", 8, 8, 1.0, "outside"),
)

#: Named rule sets: key -> (display name, rules). The key is what a QC settings file
#: writes (``rules = "nelson-1-2"``); a list of codes (``["N1", "N2", "WE2"]``) also works.
RULE_SETS: dict[str, tuple[str, tuple[RunRule, ...]]] = {
    "nelson-1-2": ("Nelson tests 1 and 2 (one point beyond 3 sigma; 9 points in a row on one "
                   "side of the centre line; J. Quality Technology 1984)", NELSON_RULES[:2]),
    "western-electric": ("Western Electric rules (Statistical Quality Control Handbook, 1956)",
                         WESTERN_ELECTRIC_RULES),
    "nelson": ("Nelson tests 1-8 (J. Quality Technology 1984; the tests of ISO 7870-2)",
               NELSON_RULES),
    "3-sigma": ("one point beyond 3 sigma only (Shewhart 1931)", NELSON_RULES[:1]),
}
#: The rule set used when none is chosen: a point beyond 3 sigma, or a run of 9 on one
#: side (a sustained shift), with a low false-alarm rate (docs/science.md, section 17).
DEFAULT_RULE_SET = "nelson-1-2"
#: Name of the Western Electric set, as shown in reports.
RULE_SET_NAME = RULE_SETS["western-electric"][0]
_ALL_RULES = {r.code.casefold(): r for r in (*WESTERN_ELECTRIC_RULES, *NELSON_RULES)}


def rule_set(choice: str | Sequence[str] | Sequence[RunRule]) -> tuple[str, tuple[RunRule, ...]]:
    """The display name and rules of a named rule set or a list of rule codes.

    Parameters
    ----------
    choice : str or sequence
        A key of :data:`RULE_SETS` (case-insensitive), or rule codes (``["N1", "WE2"]``),
        or :class:`RunRule` objects.

    Raises
    ------
    gpctools.errors.MethodError
        An unknown set name or rule code, listing the known ones.
    """
    if isinstance(choice, str):
        key = choice.strip().casefold()
        if key in RULE_SETS:
            return RULE_SETS[key]
        if key in _ALL_RULES:
            choice = [choice]
        else:
            raise MethodError(f"unknown rule set {choice!r}; write one of: {', '.join(RULE_SETS)}, "
                              "or a list of rule codes such as [\"N1\", \"N2\"]", key="trends.rules")
    rules: list[RunRule] = []
    for c in choice:
        if isinstance(c, RunRule):
            rules.append(c)
            continue
        r = _ALL_RULES.get(str(c).strip().casefold())
        if r is None:
            raise MethodError(f"unknown run rule {c!r}; the rules are "
                              f"{', '.join(r.code for r in (*WESTERN_ELECTRIC_RULES, *NELSON_RULES))}",
                              key="trends.rules")
        rules.append(r)
    if not rules:
        raise MethodError("give at least one run rule", key="trends.rules")
    for title, rs in RULE_SETS.values():
        if tuple(rules) == rs:
            return title, rs
    return "rules " + ", ".join(r.code for r in rules), tuple(rules)


@dataclass(frozen=True, repr=False)
class Violation(Display):
    """A point that breaks a run rule."""

    index: int
    label: str
    value: float
    rule: str
    description: str
    side: str

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            "index": self.index,
            "label": self.label,
            "value": self.value,
            "rule": self.rule,
            "description": self.description,
            "side": self.side,
        }


def _runs(cond: np.ndarray, length: int) -> np.ndarray:
    """True where ``cond`` held for the last ``length`` entries (along the last axis)."""
    c = np.cumsum(np.concatenate([np.zeros(cond.shape[:-1] + (1,)), cond], axis=-1), axis=-1)
    n = cond.shape[-1]
    out = np.zeros(cond.shape, dtype=bool)
    if length <= n:
        out[..., length - 1:] = (c[..., length:] - c[..., : n - length + 1]) >= length
    return out


def _zone_flags(zz: np.ndarray, rule: RunRule, side: int) -> np.ndarray:
    beyond = side * zz > rule.zone
    c = np.cumsum(np.concatenate([np.zeros(zz.shape[:-1] + (1,)), beyond], axis=-1), axis=-1)
    n = zz.shape[-1]
    idx = np.arange(n)
    lo = np.maximum(0, idx - rule.window + 1)
    counts = c[..., idx + 1] - c[..., lo]
    return beyond & (counts >= rule.count)


def rule_flags(z: np.ndarray, rule: RunRule) -> dict[int, np.ndarray]:
    """Points breaking one rule, for one series or many at once.

    Parameters
    ----------
    z : numpy.ndarray
        Standardized values ``(x - CL)/sigma``, time along the last axis (shape ``(n,)``
        or ``(series, n)``).
    rule : RunRule

    Returns
    -------
    dict of int to numpy.ndarray of bool
        Side (+1 above / rising, -1 below / falling, 0 for rules without a side) -> flags
        of the same shape as ``z``.
    """
    zz = np.asarray(z, dtype=float)
    if rule.kind == "zone":
        return {1: _zone_flags(zz, rule, 1), -1: _zone_flags(zz, rule, -1)}
    pad = np.zeros(zz.shape[:-1] + (1,), dtype=bool)
    if rule.kind == "trend":  # count points = count - 1 successive steps
        d = np.diff(zz, axis=-1)
        up = np.concatenate([pad, d > 0], axis=-1)
        down = np.concatenate([pad, d < 0], axis=-1)
        return {1: _runs(up, rule.count - 1), -1: _runs(down, rule.count - 1)}
    if rule.kind == "alternate":  # count points = count - 2 successive sign changes
        d = np.sign(np.diff(zz, axis=-1))
        alt = np.concatenate([pad, pad, (d[..., 1:] * d[..., :-1]) < 0], axis=-1)
        return {0: _runs(alt, rule.count - 2)}
    if rule.kind == "within":
        return {0: _runs(np.abs(zz) < rule.zone, rule.count)}
    return {0: _runs(np.abs(zz) > rule.zone, rule.count)}


_SIDE_TEXT = {("zone", 1): "above", ("zone", -1): "below", ("trend", 1): "rising",
              ("trend", -1): "falling", ("alternate", 0): "alternating",
              ("within", 0): "near the centre line", ("outside", 0): "either side"}


def rule_violations(
    z: Sequence[float] | np.ndarray, rules: Sequence[RunRule] = WESTERN_ELECTRIC_RULES
) -> list[tuple[int, RunRule, int]]:
    """Points breaking run rules, from standardized values ``z = (x - CL)/sigma``.

    Parameters
    ----------
    z : sequence of float
        Distance of each point from the centre line in sigma, in time order.
    rules : sequence of RunRule

    Returns
    -------
    list of (index, rule, side)
        ``side`` is +1 above (rising), -1 below (falling), 0 for rules without a side;
        ordered by index then rule.

    Examples
    --------
    >>> [(i, r.code) for i, r, s in rule_violations([0.5, 3.2, -0.1])]
    [(1, 'WE1')]
    """
    zz = np.asarray(z, dtype=float)
    out: list[tuple[int, RunRule, int]] = []
    flags = [(rule, rule_flags(zz, rule)) for rule in rules]
    for i in range(zz.size):
        for rule, by_side in flags:
            for side in (1, -1, 0):
                if side in by_side and by_side[side][i]:
                    out.append((i, rule, side))
    return out


@dataclass(frozen=True, repr=False)
class FalseAlarmRate(Display):
    """Expected false alarms of a chart whose process is in control.

    Attributes
    ----------
    per_point : float
        Probability that a point judged against the frozen limits is flagged [-].
    any_point : float
        Probability that at least one of the ``judged`` points is flagged [-].
    judged : int
        Points judged against limits they did not set.
    baseline : int
        Points that set the limits.
    simulations : int
        Simulated in-control charts (normal data, limits estimated as on the chart).
    seed : int
    closed_form_known_limits : float or None
        Per-point rate with known limits for "one point beyond 3 sigma" alone,
        2·(1 - Φ(3)) = 0.0027 [derived], when that is the only rule.
    method : str
        How the numbers were obtained.
    """

    per_point: float
    any_point: float
    judged: int
    baseline: int
    simulations: int
    seed: int
    closed_form_known_limits: float | None
    method: str

    def text(self) -> str:
        """One sentence for reports."""
        if self.judged == 0:
            return (f"no point is judged against frozen limits (all {self.baseline} set them); "
                    f"per-point false-alarm rate {100 * self.per_point:.2g} % "
                    f"({self.method})")
        return (f"expected false alarms with the process in control: {100 * self.per_point:.2g} % "
                f"per judged point, {100 * self.any_point:.2g} % chance of at least one among the "
                f"{self.judged} judged point(s) ({self.method})")

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            "per judged point [-]": self.per_point,
            "at least one among the judged points [-]": self.any_point,
            "judged points": self.judged,
            "baseline points": self.baseline,
            "simulations": self.simulations,
            "seed": self.seed,
            "closed form, known limits, one point beyond 3 sigma [-]": self.closed_form_known_limits,
            "method": self.method,
        }


#: Default number of simulated charts for :func:`false_alarm_rate` (standard error of a
#: 5 % rate about 0.35 %).
FALSE_ALARM_SIMULATIONS = 4000


def false_alarm_rate(
    sets_limits: Sequence[bool] | np.ndarray,
    rules: Sequence[RunRule],
    *,
    simulations: int = FALSE_ALARM_SIMULATIONS,
    seed: int = 7870,
) -> FalseAlarmRate:
    """False-alarm rate of an individuals chart by simulation of in-control data.

    Each simulated chart has independent standard normal points in the chart's layout:
    the points marked in ``sets_limits`` set CL and sigma = mean moving range / d2 (as
    :func:`individuals_chart` does), every point is standardized and the rules applied;
    the alarms among the points that set no limits are counted. The estimation of the
    limits from a short baseline is therefore included (it raises the rate above the
    known-limits value).

    Parameters
    ----------
    sets_limits : sequence of bool
        The chart's layout, in time order.
    rules : sequence of RunRule
    simulations : int
    seed : int

    Returns
    -------
    FalseAlarmRate

    References
    ----------
    Known-limits rate of one point beyond 3 sigma: 2·(1 - Φ(3)) = 0.0027 (normal
    distribution) [derived]; docs/science.md, section 17.
    """
    mask = np.asarray(sets_limits, dtype=bool)
    key = (tuple(mask.tolist()), tuple(rules), int(simulations), int(seed))
    return _false_alarm_cached(key)


@functools.lru_cache(maxsize=64)
def _false_alarm_cached(key: tuple[tuple[bool, ...], tuple[RunRule, ...], int, int]) -> FalseAlarmRate:
    from scipy.stats import norm

    mask_t, rules, sims, seed = key
    mask = np.asarray(mask_t, dtype=bool)
    rng = np.random.default_rng(seed)
    x = rng.standard_normal((sims, mask.size))
    base = x[:, mask]
    centre = base.mean(axis=1, keepdims=True)
    sigma = np.abs(np.diff(base, axis=1)).mean(axis=1, keepdims=True) / D2_MOVING_RANGE
    z = (x - centre) / sigma
    flagged = np.zeros(x.shape, dtype=bool)
    for rule in rules:
        for f in rule_flags(z, rule).values():
            flagged |= f
    judged = ~mask
    nj = int(judged.sum())
    if nj:
        per_point = float(flagged[:, judged].mean())
        any_point = float(flagged[:, judged].any(axis=1).mean())
    else:
        per_point = float(flagged.mean())
        any_point = float(flagged.any(axis=1).mean())
    closed = float(2 * norm.sf(3.0)) if [r.code for r in rules] in (["N1"], ["WE1"]) else None
    return FalseAlarmRate(per_point, any_point, nj, int(mask.sum()), sims, seed, closed,
                          f"simulation of {sims} in-control charts of this layout, seed {seed}")


@dataclass(frozen=True, eq=False, repr=False)
class ControlChart(Display):
    """An individuals control chart with its run-rule findings.

    Attributes
    ----------
    quantity : str
        Results column charted (``"Mw [g/mol]"``).
    group : str
        What the points belong to (product code, or check standard).
    labels : tuple of str
        Point labels (batch or sequence), in time order.
    values : numpy.ndarray
        Charted values, unit of ``quantity``.
    sets_limits : numpy.ndarray of bool
        Which points set the centre line and sigma.
    centre, sigma, mr_bar : float
        Centre line, estimated sigma and mean moving range, unit of ``quantity``.
    violations : tuple of Violation
    rule_set : str
        Name of the rules applied.
    warnings : tuple of str
    rules : tuple of RunRule
    false_alarm : FalseAlarmRate or None
        Expected false alarms of this chart's layout (None when not computed).
    dates : tuple of str
        ISO date of each point ("" where unknown; empty when no point has one).
    baseline : str
        How the limit-setting points were chosen, in words.
    """

    quantity: str
    group: str
    labels: tuple[str, ...]
    values: np.ndarray
    sets_limits: np.ndarray
    centre: float
    sigma: float
    mr_bar: float
    violations: tuple[Violation, ...]
    rule_set: str = RULE_SET_NAME
    warnings: tuple[str, ...] = field(default=())
    rules: tuple[RunRule, ...] = WESTERN_ELECTRIC_RULES
    false_alarm: FalseAlarmRate | None = None
    dates: tuple[str, ...] = ()
    baseline: str = ""

    @property
    def ucl(self) -> float:
        """Upper control limit CL + 3 sigma."""
        return self.centre + 3.0 * self.sigma

    @property
    def lcl(self) -> float:
        """Lower control limit CL - 3 sigma."""
        return self.centre - 3.0 * self.sigma

    @property
    def z(self) -> np.ndarray:
        """Standardized distance from the centre line [sigma] (NaN when sigma is 0)."""
        if not self.sigma > 0:
            return np.full(self.values.size, np.nan)
        return (self.values - self.centre) / self.sigma

    @property
    def flagged(self) -> np.ndarray:
        """Boolean mask of points breaking any rule."""
        mask = np.zeros(self.values.size, dtype=bool)
        for v in self.violations:
            mask[v.index] = True
        return mask

    def rules_at(self, index: int) -> tuple[str, ...]:
        """Codes of the rules broken at one point."""
        return tuple(dict.fromkeys(v.rule for v in self.violations if v.index == index))

    @property
    def unit(self) -> str:
        """Unit of the charted quantity (from ``quantity``'s square brackets)."""
        q = self.quantity
        return q[q.rfind("[") + 1 : -1] if q.endswith("]") and "[" in q else ""

    def to_frame(self) -> pd.DataFrame:
        """One row per point: label, value, centre and limits (unit in the headers), z, rules."""
        u = self.unit
        name = self.quantity[: self.quantity.rfind("[")].strip() if u else (self.quantity or "value")
        sfx = f" [{u}]" if u else ""
        z = self.z
        data: dict[str, Any] = {
                "group": [self.group] * self.values.size,
                "point": self.labels,
                "date": list(self.dates) if self.dates else [""] * self.values.size,
                f"{name}{sfx}": self.values,
                f"centre line{sfx}": np.full(self.values.size, self.centre),
                f"lower control limit{sfx}": np.full(self.values.size, self.lcl),
                f"upper control limit{sfx}": np.full(self.values.size, self.ucl),
                "z [sigma]": z,
                "sets limits": ["yes" if s else "no" for s in self.sets_limits],
                "rules broken": [", ".join(self.rules_at(i)) for i in range(self.values.size)],
        }
        return pd.DataFrame(data)

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            "quantity": self.quantity,
            "group": self.group,
            "rule set": self.rule_set,
            "rules": [r.code for r in self.rules],
            "baseline": self.baseline,
            "false alarms": self.false_alarm.summary() if self.false_alarm else None,
            "points": len(self.labels),
            "dates": list(self.dates),
            "points setting limits": int(self.sets_limits.sum()),
            "labels": list(self.labels),
            "values": [float(v) for v in self.values],
            "centre": finite_or_none(self.centre),
            "sigma": finite_or_none(self.sigma),
            "mean moving range": finite_or_none(self.mr_bar),
            "lower control limit": finite_or_none(self.lcl),
            "upper control limit": finite_or_none(self.ucl),
            "violations": [v.summary() for v in self.violations],
            "warnings": list(self.warnings),
        }


def individuals_chart(
    values: Sequence[float],
    labels: Sequence[str] | None = None,
    *,
    quantity: str = "",
    group: str = "",
    sets_limits: Sequence[bool] | np.ndarray | None = None,
    rules: Sequence[RunRule] = WESTERN_ELECTRIC_RULES,
    rule_set_name: str | None = None,
    false_alarm_simulations: int = 0,
    dates: Sequence[str] = (),
    baseline: str = "",
) -> ControlChart:
    """Shewhart individuals chart with moving-range sigma and run-rule flags.

    Parameters
    ----------
    values : sequence of float
        One value per point in time order (finite; a unit given by ``quantity``).
    labels : sequence of str, optional
        Point labels (default ``"1"``, ``"2"``, ...).
    quantity, group : str
        Recorded in the chart (``quantity`` with its unit, e.g. ``"Mw [g/mol]"``).
    sets_limits : sequence of bool, optional
        Which points set the centre line and sigma (default all). The moving ranges are
        taken between successive limit-setting points.
    rules : sequence of RunRule
        Default :data:`WESTERN_ELECTRIC_RULES`.
    rule_set_name : str, optional
        Name shown in reports (default: the set's name from :func:`rule_set`).
    false_alarm_simulations : int
        When positive, the chart's expected false-alarm rate is estimated with
        :func:`false_alarm_rate` from that many simulated in-control charts.
    dates : sequence of str
        ISO date of each point, recorded (the caller orders the points).
    baseline : str
        How the limit-setting points were chosen, recorded.

    Returns
    -------
    ControlChart

    Raises
    ------
    gpctools.errors.DataError
        Fewer than two limit-setting points, a non-finite value, or mismatched lengths.

    Warns
    -----
    TrendWarning
        Fewer than :data:`MIN_POINTS_FOR_LIMITS` limit-setting points (provisional limits),
        or no spread (sigma = 0: rules are not evaluated).

    References
    ----------
    Centre line, moving range and sigma = MR̄/d2, d2 = 1.128 [2]_ (module references);
    run rules [3]_.
    """
    x = np.asarray(values, dtype=float)
    n = x.size
    lab = tuple(str(v) for v in labels) if labels is not None else tuple(str(i + 1) for i in range(n))
    if len(lab) != n:
        raise DataError(f"{len(lab)} labels for {n} values; give one label per point", key=quantity or None)
    bad = np.flatnonzero(~np.isfinite(x))
    if bad.size:
        raise DataError(f"point {lab[bad[0]]!r} has no finite value; leave it out of the chart",
                        key=quantity or None)
    mask = np.ones(n, dtype=bool) if sets_limits is None else np.asarray(sets_limits, dtype=bool)
    if mask.size != n:
        raise DataError("sets_limits needs one entry per value", key=quantity or None)
    base = x[mask]
    if base.size < 2:
        raise DataError(
            f"a control chart needs at least 2 points to set its limits, got {base.size}",
            key=quantity or None,
        )
    centre = float(np.mean(base))
    mr_bar = float(np.mean(np.abs(np.diff(base))))
    sigma = mr_bar / D2_MOVING_RANGE
    notes: list[str] = []
    what = f"{group} {quantity}".strip()
    if base.size < MIN_POINTS_FOR_LIMITS:
        notes.append(
            f"{what}: control limits from {base.size} points; {MIN_POINTS_FOR_LIMITS}-25 are usual "
            "for trial limits (common practice), so treat them as provisional"
        )
    violations: list[Violation] = []
    if not sigma > 0:
        notes.append(f"{what}: the points have no spread (all equal); run rules not evaluated")
    else:
        z = (x - centre) / sigma
        for i, rule, side in rule_violations(z, rules):
            violations.append(Violation(i, lab[i], float(x[i]), rule.code, rule.description,
                                        _SIDE_TEXT[(rule.kind, side)]))
    for msg in notes:
        _warnings.warn(msg, TrendWarning, stacklevel=2)
    rules = tuple(rules)
    fa = false_alarm_rate(mask, rules, simulations=false_alarm_simulations) \
        if false_alarm_simulations > 0 else None
    return ControlChart(
        quantity=quantity, group=group, labels=lab, values=x, sets_limits=mask,
        centre=centre, sigma=sigma, mr_bar=mr_bar, violations=tuple(violations),
        rule_set=rule_set_name or rule_set(rules)[0], warnings=tuple(notes), rules=rules,
        false_alarm=fa, dates=tuple(dates), baseline=baseline,
    )
