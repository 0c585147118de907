"""Control charts of results across batches: Shewhart individuals charts and run rules.

Individuals (X) chart with moving ranges of two [1]_ [2]_:

* centre line ``CL = mean(x)`` over the points that set the limits;
* ``MR_i = |x_i - x_(i-1)|`` over those points, ``sigma = mean(MR) / d2`` with
  ``d2 = 1.128`` for subgroups of two;
* control limits ``CL ± 3·sigma`` and zone edges at ±1 and ±2 sigma.

Run rules: the Western Electric rules [3]_, named ``WE1``-``WE4`` in the code, reports and
tests:

``WE1``  one point beyond 3 sigma;
``WE2``  2 of 3 successive points beyond 2 sigma on the same side;
``WE3``  4 of 5 successive points beyond 1 sigma on the same side;
``WE4``  8 successive points on the same side of the centre line.

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
"""

from __future__ import annotations

import warnings as _warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from gpctools.errors import DataError, GpcWarning
from gpctools.sheets.cells import finite_or_none

__all__ = [
    "D2_MOVING_RANGE",
    "RunRule",
    "WESTERN_ELECTRIC_RULES",
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
#: Name of the rule set, as shown in reports.
RULE_SET_NAME = "Western Electric rules (Statistical Quality Control Handbook, 1956)"
#: Fewer points than this give provisional limits (common practice asks 20-25 for trial
#: limits; fewer are flagged with a warning, not refused).
MIN_POINTS_FOR_LIMITS = 20


class TrendWarning(GpcWarning):
    """Control limits from few points, or no spread to set limits."""


@dataclass(frozen=True)
class RunRule:
    """A run rule: ``count`` of ``window`` successive points beyond ``zone`` sigma, same side.

    Attributes
    ----------
    code : str
        Short name (``"WE1"``).
    description : str
    count, window : int
    zone : float
        Zone edge in sigma; 0 means "on one side of the centre line".
    """

    code: str
    description: str
    count: int
    window: int
    zone: float


#: The four Western Electric run rules [published: Western Electric Statistical Quality
#: Control Handbook, 1956].
WESTERN_ELECTRIC_RULES: tuple[RunRule, ...] = (
    RunRule("WE1", "one point beyond 3 sigma", 1, 1, 3.0),
    RunRule("WE2", "2 of 3 successive points beyond 2 sigma on the same side", 2, 3, 2.0),
    RunRule("WE3", "4 of 5 successive points beyond 1 sigma on the same side", 4, 5, 1.0),
    RunRule("WE4", "8 successive points on the same side of the centre line", 8, 8, 0.0),
)


@dataclass(frozen=True)
class Violation:
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


def rule_violations(
    z: Sequence[float], rules: Sequence[RunRule] = WESTERN_ELECTRIC_RULES
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
        ``side`` is +1 above, -1 below the centre line; ordered by index then rule.

    Examples
    --------
    >>> [(i, r.code) for i, r, s in rule_violations([0.5, 3.2, -0.1])]
    [(1, 'WE1')]
    """
    zz = np.asarray(z, dtype=float)
    out: list[tuple[int, RunRule, int]] = []
    for i in range(zz.size):
        for rule in rules:
            lo = max(0, i - rule.window + 1)
            for side in (1, -1):
                beyond = side * zz[lo : i + 1] > rule.zone
                if beyond[-1] and int(beyond.sum()) >= rule.count:
                    out.append((i, rule, side))
    return out


@dataclass(frozen=True, eq=False)
class ControlChart:
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
    warnings : tuple of str
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
        return pd.DataFrame(
            {
                "group": [self.group] * self.values.size,
                "point": self.labels,
                f"{name}{sfx}": self.values,
                f"centre line{sfx}": np.full(self.values.size, self.centre),
                f"lower control limit{sfx}": np.full(self.values.size, self.lcl),
                f"upper control limit{sfx}": np.full(self.values.size, self.ucl),
                "z [sigma]": z,
                "sets limits": ["yes" if s else "no" for s in self.sets_limits],
                "rules broken": [", ".join(self.rules_at(i)) for i in range(self.values.size)],
            }
        )

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            "quantity": self.quantity,
            "group": self.group,
            "rule set": self.rule_set,
            "points": len(self.labels),
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
    sets_limits: Sequence[bool] | None = None,
    rules: Sequence[RunRule] = WESTERN_ELECTRIC_RULES,
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
                                        "above" if side > 0 else "below"))
    for msg in notes:
        _warnings.warn(msg, TrendWarning, stacklevel=2)
    return ControlChart(
        quantity=quantity, group=group, labels=lab, values=x, sets_limits=mask,
        centre=centre, sigma=sigma, mr_bar=mr_bar, violations=tuple(violations),
        warnings=tuple(notes),
    )
