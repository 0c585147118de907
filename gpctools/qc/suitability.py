"""System suitability per sequence: was the SEC system fit for use when the samples ran?

Checks, each with its value, limit, pass/fail and a reason in words:

* calibration quality: R² of the log M(V) fit, and the worst standard residual
  ``100·(M_fit/Mp - 1)`` against ±5 % (common practice, see docs/science.md, section 2);
* check standards: the average Mw (and Mn) of each check standard's injections in the
  sequence against its assigned value, within the tolerance of its spec-sheet row
  (``check-standard tolerance [%]``) or the default;
* flow-marker drift: ``100·(V_marker,observed / V_marker,reference - 1)`` [%] for every
  injection with an observed marker, worst value against the limit. A 0.1 % flow error
  moves every average by about 1.4-3.5 % (docs/science.md, section 2, derived), so the default limit
  is tight (0.3 %, common practice);
* replicate agreement: relative standard deviation (ddof = 1) of Mw and Mn over the
  injections that share a ``sample_id``; worst group against the limit;
* fraction outside calibration: worst ``outside calibration [% mass]`` of any usable
  injection against 1 % (common practice, docs/science.md, section 1).

A check that cannot be evaluated (no replicates, no flow-marker values) is listed as
"not evaluated" and does not fail the sequence.
"""

from __future__ import annotations

import math
import warnings as _warnings
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from gpctools import columns as C
from gpctools.errors import DataError, MethodError
from gpctools.qc import _table as T
from gpctools.qc.specs import SpecSheet, within
from gpctools.sheets.cells import finite_or_none

__all__ = [
    "SuitabilityLimits",
    "SuitabilityCheck",
    "SuitabilityResult",
    "system_suitability",
    "sequence_suitability",
    "calibration_quality",
]

# Results-table columns used here (gpctools.columns).
MW = C.MW
MN = C.MN
OUTSIDE = C.OUTSIDE_CALIBRATION
ASSIGNED = {"Mw": C.ASSIGNED_MW, "Mn": C.ASSIGNED_MN}
AVERAGE = {"Mw": C.MW, "Mn": C.MN}
FLOW_MARKER_COLUMNS = (C.FLOW_MARKER, "flow_marker [mL]")


@dataclass(frozen=True)
class SuitabilityLimits:
    """Acceptance limits of the system-suitability checks.

    Attributes
    ----------
    min_r_squared : float
        Lowest acceptable R² of the calibration fit in log10 M [-] (0.999, common practice).
    max_calibration_residual_pct : float
        Largest acceptable |residual| of any standard [%] (5, common practice; docs/science.md, section 2).
    check_standard_tolerance_pct : float
        Default allowed |average/assigned - 1| of a check standard [%] when its spec row
        gives none (5, common practice; between-lab Mw spread is 6-10 % [published: Japan
        Society for Analytical Chemistry round-robin review], within a lab tighter).
    max_flow_marker_drift_pct : float
        Largest acceptable |flow-marker drift| [%] (0.3, common practice).
    max_replicate_rsd_Mw_pct : float
        Largest acceptable replicate RSD of Mw [%] (3; repeatability under 3 % [published:
        Japan Society for Analytical Chemistry polymer-analysis round-robin review]).
    max_replicate_rsd_Mn_pct : float
        Largest acceptable replicate RSD of Mn [%] (5, common practice: Mn is more sensitive
        to the low-M limit and baseline than Mw).
    max_outside_calibration_pct : float
        Largest acceptable mass outside the calibrated range [% mass] (1, common practice).
    require_check_standard : bool
        A sequence without a usable check-standard injection fails (default True).
    """

    min_r_squared: float = 0.999
    max_calibration_residual_pct: float = 5.0
    check_standard_tolerance_pct: float = 5.0
    max_flow_marker_drift_pct: float = 0.3
    max_replicate_rsd_Mw_pct: float = 3.0
    max_replicate_rsd_Mn_pct: float = 5.0
    max_outside_calibration_pct: float = 1.0
    require_check_standard: bool = True

    def __post_init__(self) -> None:
        for name, value in asdict(self).items():
            if isinstance(value, bool):
                continue
            if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
                raise MethodError(f"suitability limit {name} must be a positive number, got {value!r}", key=name)
        if self.min_r_squared > 1:
            raise MethodError("min_r_squared cannot exceed 1", key="min_r_squared")

    def summary(self) -> dict[str, Any]:
        """JSON-safe copy of the limits."""
        return asdict(self)


@dataclass(frozen=True)
class SuitabilityCheck:
    """One suitability check.

    Attributes
    ----------
    name : str
        What is checked, with the unit of ``value`` and ``limit`` in square brackets.
    value : float
        Observed value (NaN when not evaluated).
    limit : float
        The limit (NaN when not evaluated).
    comparison : str
        ``"<="`` (value must not exceed the limit) or ``">="``.
    passed : bool or None
        ``None`` when the check could not be evaluated.
    reason : str
        The finding in words.
    source : str
        Where the limit comes from.
    """

    name: str
    value: float
    limit: float
    comparison: str
    passed: bool | None
    reason: str
    source: str = "common practice"

    @property
    def outcome(self) -> str:
        """``"pass"``, ``"fail"`` or ``"not evaluated"``."""
        return {True: "pass", False: "fail", None: "not evaluated"}[self.passed]

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            "check": self.name,
            "value": finite_or_none(self.value),
            "limit": finite_or_none(self.limit),
            "comparison": self.comparison,
            "result": self.outcome,
            "reason": self.reason,
            "source of limit": self.source,
        }


@dataclass(frozen=True)
class SuitabilityResult:
    """System suitability of one sequence.

    Attributes
    ----------
    sequence : str
        Sequence label (``"(all)"`` when the table has no ``sequence`` column).
    checks : tuple of SuitabilityCheck
    warnings : tuple of str
    """

    sequence: str
    checks: tuple[SuitabilityCheck, ...]
    warnings: tuple[str, ...] = field(default=())

    @property
    def passed(self) -> bool:
        """True when no check failed (not-evaluated checks do not fail)."""
        return all(c.passed is not False for c in self.checks)

    @property
    def failures(self) -> tuple[SuitabilityCheck, ...]:
        """The failed checks."""
        return tuple(c for c in self.checks if c.passed is False)

    def reasons(self) -> tuple[str, ...]:
        """Reasons of the failed checks."""
        return tuple(f"{c.name}: {c.reason}" for c in self.failures)

    def to_frame(self) -> pd.DataFrame:
        """One row per check (sequence, check, value, limit, result, reason, source)."""
        rows = [{"sequence": self.sequence, **c.summary()} for c in self.checks]
        cols = ["sequence", "check", "value", "comparison", "limit", "result", "reason", "source of limit"]
        return pd.DataFrame(rows, columns=cols)

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            "sequence": self.sequence,
            "passed": self.passed,
            "checks": [c.summary() for c in self.checks],
            "warnings": list(self.warnings),
        }


def _check(name: str, value: float, limit: float, comparison: str, reason: str, source: str) -> SuitabilityCheck:
    ok = within(value, limit, comparison)
    return SuitabilityCheck(name, float(value), float(limit), comparison, bool(ok), reason, source)


def _not_evaluated(name: str, limit: float, comparison: str, reason: str, source: str) -> SuitabilityCheck:
    return SuitabilityCheck(name, math.nan, float(limit), comparison, None, reason, source)


def calibration_quality(calibration: Any, limits: SuitabilityLimits) -> tuple[SuitabilityCheck, ...]:
    """R² and worst-standard-residual checks of a calibration.

    Parameters
    ----------
    calibration : gpctools.calibration.Calibration or Mapping or None
        A fitted calibration, or its ``summary()`` dict (keys ``"R^2 [-]"`` and
        ``"standards_table"``). ``None`` gives two failed checks (no calibration shown).
    limits : SuitabilityLimits

    Returns
    -------
    tuple of SuitabilityCheck
        ``calibration R² [-]`` and ``worst calibration residual [%]``.

    References
    ----------
    Residual definition 100·(M_fit/Mp - 1) and the ±5 % acceptance: docs/science.md, section 2
    (common practice).
    """
    r2_name = "calibration R² [-]"
    res_name = "worst calibration residual |M_fit/Mp - 1| [%]"
    if calibration is None:
        return (
            SuitabilityCheck(r2_name, math.nan, limits.min_r_squared, ">=", False,
                             "no calibration supplied; suitability cannot be shown", "common practice"),
            SuitabilityCheck(res_name, math.nan, limits.max_calibration_residual_pct, "<=", False,
                             "no calibration supplied; suitability cannot be shown", "common practice"),
        )
    if isinstance(calibration, Mapping):
        r2 = float(calibration.get("R^2 [-]", math.nan))
        table = calibration.get("standards_table") or []
        names = [str(r.get("standard", i + 1)) for i, r in enumerate(table)]
        residuals = [float(r.get("residual [%]", math.nan)) for r in table]
    else:
        r2 = float(calibration.r_squared)
        names = [str(n) for n in calibration.names]
        residuals = [float(r) for r in calibration.residuals_pct]
    checks = []
    if math.isfinite(r2):
        checks.append(_check(r2_name, r2, limits.min_r_squared, ">=",
                             f"R² = {r2:.6f} (limit >= {limits.min_r_squared:g})", "common practice"))
    else:
        checks.append(SuitabilityCheck(r2_name, math.nan, limits.min_r_squared, ">=", False,
                                       "the calibration has no R²", "common practice"))
    finite = [(abs(r), n, r) for n, r in zip(names, residuals, strict=False) if math.isfinite(r)]
    if finite:
        worst_abs, worst_name, worst = max(finite)
        checks.append(_check(res_name, worst_abs, limits.max_calibration_residual_pct, "<=",
                             f"standard {worst_name}: {worst:+.2f} % "
                             f"(limit ±{limits.max_calibration_residual_pct:g} %)",
                             "common practice (docs/science.md, section 2)"))
    else:
        checks.append(SuitabilityCheck(res_name, math.nan, limits.max_calibration_residual_pct, "<=", False,
                                       "the calibration lists no standard residuals", "common practice"))
    return tuple(checks)


def _flow_marker_column(table: pd.DataFrame) -> str | None:
    for c in FLOW_MARKER_COLUMNS:
        if c in table.columns and np.isfinite(T.numbers(table, c)).any():
            return c
    return None


def sequence_suitability(
    table: pd.DataFrame,
    calibration: Any,
    *,
    sequence: str = T.ALL_SEQUENCES,
    specs: SpecSheet | None = None,
    limits: SuitabilityLimits | None = None,
    reference_flow_marker: float | None = None,
) -> SuitabilityResult:
    """System suitability of the injections of one sequence.

    Parameters
    ----------
    table : pandas.DataFrame
        Results-table rows of this sequence (not modified).
    calibration : Calibration or Mapping or None
        See :func:`calibration_quality`.
    sequence : str
        Label recorded in the result.
    specs : SpecSheet, optional
        Source of per-check-standard tolerances (row whose ``product`` is the check
        standard's ``product``, else its ``sample_id``).
    limits : SuitabilityLimits, optional
    reference_flow_marker : float, optional
        Reference flow-marker position of the method [mL]. Without it, drift is measured
        against the first injection of the sequence with a marker value.

    Returns
    -------
    SuitabilityResult

    Warns
    -----
    QCWarning
        One check standard with different assigned values in one sequence (also listed
        in the result's ``warnings``).

    References
    ----------
    Relative standard deviation ``100·s/mean`` with the sample standard deviation (ddof = 1)
    [common practice]. Flow-marker correction factor V_ref/V_obs: docs/science.md, section 2.
    """
    limits = limits or SuitabilityLimits()
    checks: list[SuitabilityCheck] = list(calibration_quality(calibration, limits))
    warnings: list[str] = []
    ok = T.ok_mask(table)
    role = T.roles(table)
    sid = T.labels(table, C.SAMPLE_ID)
    product = T.labels(table, C.PRODUCT)

    # -- check standards --------------------------------------------------------------------
    is_check = role == T.ROLE_CHECK
    if not is_check.any():
        if limits.require_check_standard:
            checks.append(SuitabilityCheck(
                "check standard present", math.nan, math.nan, "", False,
                "no check-standard injection in this sequence (role 'check_standard'); run one, "
                "or switch the requirement off (SuitabilityLimits(require_check_standard=False), "
                "CLI --no-require-check-standard)", "common practice"))
        else:
            checks.append(SuitabilityCheck(
                "check standard present", math.nan, math.nan, "", None,
                "no check-standard injection in this sequence", "common practice"))
    groups: dict[str, list[int]] = {}
    for i in np.flatnonzero(is_check):
        key = product[i] or sid[i]
        groups.setdefault(key, []).append(int(i))
    for key, rows in groups.items():
        rows_ok = [i for i in rows if ok[i]]
        spec = specs.get(key) if specs is not None else None
        if spec is None and specs is not None:
            spec = specs.get(sid[rows[0]])
        if spec is not None and spec.check_standard_tolerance_pct is not None:
            tol = spec.check_standard_tolerance_pct
            source = f"spec sheet, product {spec.product} (row {spec.row})"
        else:
            tol = limits.check_standard_tolerance_pct
            source = "default tolerance (common practice)"
        evaluated = False
        for q in ("Mw", "Mn"):
            acol = ASSIGNED[q]
            assigned_all = T.numbers(table, acol)[rows]
            for i, a in zip(rows, assigned_all):  # a typo must not silently skip the check
                cell = table[acol].iloc[i] if acol in table.columns else None
                if T.label_text(cell) and not (np.isfinite(a) and a > 0):
                    raise DataError(f"check standard {sid[i]}: {T.label_text(cell)!r} is not a molar mass; "
                                    "give the assigned value as a positive number in g/mol or leave "
                                    "the cell empty", column=acol)
            finite = assigned_all[np.isfinite(assigned_all)]
            if finite.size == 0:
                continue
            evaluated = True
            assigned = float(finite[0])
            if np.any(finite != assigned):
                msg = (f"check standard {key}: different {acol} values in one sequence "
                       f"({', '.join(f'{v:g}' for v in np.unique(finite))}); the first, {assigned:g}, is used")
                warnings.append(msg)
                _warnings.warn(msg, T.QCWarning, stacklevel=3)
            name = f"check standard {key}: {q} deviation from assigned [%]"
            if not rows_ok:
                errs = "; ".join(filter(None, (T.error_text(table, i) for i in rows)))
                checks.append(SuitabilityCheck(name, math.nan, tol, "<=", False,
                                               f"no usable injection ({len(rows)} failed: {errs or 'no error text'})",
                                               source))
                continue
            vals = T.numbers(table, AVERAGE[q])[rows_ok]
            vals = vals[np.isfinite(vals)]
            if vals.size == 0:
                checks.append(SuitabilityCheck(name, math.nan, tol, "<=", False,
                                               f"no {q} value in its injections", source))
                continue
            mean = float(np.mean(vals))
            dev = 100.0 * (mean / assigned - 1.0)
            checks.append(SuitabilityCheck(
                name, abs(dev), tol, "<=", within(abs(dev), tol, "<="),
                f"average {q} {mean:,.0f} g/mol over {vals.size} injection(s) vs assigned "
                f"{assigned:,.0f} g/mol: {dev:+.2f} % (tolerance ±{tol:g} %)".replace(",", " "),
                source))
        if not evaluated:
            checks.append(SuitabilityCheck(
                f"check standard {key}: deviation from assigned [%]", math.nan, tol, "<=", False,
                f"no assigned value; fill '{ASSIGNED['Mw']}' (and/or '{ASSIGNED['Mn']}') in the "
                "batch sheet for its rows", source))

    # -- flow marker ----------------------------------------------------------------------------
    fm_name = "flow-marker drift |V_obs/V_ref - 1| [%]"
    fm_col = _flow_marker_column(table)
    if fm_col is None:
        checks.append(_not_evaluated(fm_name, limits.max_flow_marker_drift_pct, "<=",
                                     "no observed flow-marker positions in this sequence", "common practice"))
    else:
        obs = T.numbers(table, fm_col)
        have = np.flatnonzero(np.isfinite(obs))
        if reference_flow_marker is not None and math.isfinite(reference_flow_marker) and reference_flow_marker > 0:
            ref = float(reference_flow_marker)
            ref_text = f"method reference {ref:g} mL"
        else:
            ref = float(obs[have[0]])
            ref_text = f"first marker of the sequence, {ref:g} mL (the method gives no reference)"
        drift = 100.0 * (obs[have] / ref - 1.0)
        j = int(np.argmax(np.abs(drift)))
        i = int(have[j])
        checks.append(_check(fm_name, float(abs(drift[j])), limits.max_flow_marker_drift_pct, "<=",
                             f"worst {sid[i] or 'row ' + str(i + 1)}: {obs[i]:g} mL vs {ref_text}, "
                             f"{drift[j]:+.3f} % (limit ±{limits.max_flow_marker_drift_pct:g} %)",
                             "common practice (0.1 % flow error moves averages 1.4-3.5 %, docs/science.md, section 2)"))

    # -- replicates -------------------------------------------------------------------------------
    usable = ok & np.isin(role, [T.ROLE_SAMPLE, T.ROLE_CHECK])
    rep: dict[str, list[int]] = {}
    for i in np.flatnonzero(usable):
        if sid[i]:
            rep.setdefault(sid[i], []).append(int(i))
    for q, lim, source in (
        ("Mw", limits.max_replicate_rsd_Mw_pct,
         "published: Japan Society for Analytical Chemistry round-robin review (repeatability under 3 %)"),
        ("Mn", limits.max_replicate_rsd_Mn_pct, "common practice"),
    ):
        name = f"replicate RSD of {q} [%]"
        vals_all = T.numbers(table, AVERAGE[q])
        worst: tuple[float, str, int] | None = None
        for key, rows in rep.items():
            v = vals_all[rows]
            v = v[np.isfinite(v)]
            if v.size < 2:
                continue
            rsd = float(100.0 * np.std(v, ddof=1) / np.mean(v))
            if worst is None or rsd > worst[0]:
                worst = (rsd, key, int(v.size))
        if worst is None:
            checks.append(_not_evaluated(name, lim, "<=", "no sample with two or more usable injections", source))
        else:
            checks.append(_check(name, worst[0], lim, "<=",
                                 f"worst {worst[1]} ({worst[2]} injections): {worst[0]:.2f} % (limit {lim:g} %)",
                                 source))

    # -- outside calibration -----------------------------------------------------------------------
    oc_name = "mass outside calibration [% mass]"
    out = T.numbers(table, OUTSIDE)
    idx = np.flatnonzero(usable & np.isfinite(out))
    if idx.size == 0:
        checks.append(_not_evaluated(oc_name, limits.max_outside_calibration_pct, "<=",
                                     f"no '{OUTSIDE}' values", "common practice (docs/science.md, section 1)"))
    else:
        i = int(idx[np.argmax(out[idx])])
        checks.append(_check(oc_name, float(out[i]), limits.max_outside_calibration_pct, "<=",
                             f"worst {sid[i] or 'row ' + str(i + 1)}: {out[i]:.2f} % (limit "
                             f"{limits.max_outside_calibration_pct:g} %)", "common practice (docs/science.md, section 1)"))
    return SuitabilityResult(str(sequence), tuple(checks), tuple(warnings))


def system_suitability(
    table: pd.DataFrame,
    calibration: Any,
    *,
    specs: SpecSheet | None = None,
    limits: SuitabilityLimits | None = None,
    reference_flow_marker: float | None = None,
) -> tuple[SuitabilityResult, ...]:
    """System suitability for every sequence of a results table.

    Parameters
    ----------
    table : pandas.DataFrame
        The batch results table (one row per injection). Rows are grouped by the
        ``sequence`` column (in order of first appearance); without it, the whole table is
        one sequence labelled ``"(all)"``.
    calibration, specs, limits, reference_flow_marker
        See :func:`sequence_suitability`.

    Returns
    -------
    tuple of SuitabilityResult
        One per sequence.
    """
    T.require_columns(table, (C.SAMPLE_ID,), "system suitability")
    seq = T.labels(table, C.SEQUENCE, T.ALL_SEQUENCES)
    order = list(dict.fromkeys(seq.tolist()))
    out = []
    for s in order:
        rows = np.flatnonzero(seq == s)
        sub = table.iloc[rows]
        out.append(sequence_suitability(sub, calibration, sequence=s, specs=specs, limits=limits,
                                        reference_flow_marker=reference_flow_marker))
    return tuple(out)
