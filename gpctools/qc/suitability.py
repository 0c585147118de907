"""System suitability per sequence: the SEC system fit for use when the samples ran, or not.

Checks, each with its value, limit, pass/fail and a reason in words:

* calibration quality: R² of the log M(V) fit, and the worst standard residual
  ``100·(M_fit/Mp - 1)`` against ±5 % (common practice, see docs/science.md, section 2);
* check standards: EACH injection's Mw and Mn against the assigned value, and their mean,
  within the tolerance of its spec-sheet row (``check-standard tolerance [%]``, or the
  ``... Mw [%]`` / ``... Mn [%]`` columns) or the settings. Judging only the mean would let
  +0.3 % and +7.8 % pass a ±5 % tolerance as +4 % (the averaging trap);
* flow-marker drift: ``100·(V_marker,observed / V_marker,reference - 1)`` [%] for every
  injection with an observed marker, worst value against the limit. A 0.1 % flow error
  moves every average by about 1.4-3.5 % (docs/science.md, section 2, derived), so the default limit
  is tight (0.3 %, common practice);
* replicate agreement: :mod:`gpctools.qc.replicates` (pooled RSD over all samples of the
  sequence by default), with the false-fail rate of the rule;
* blanks: the largest peak of each blank inside each product's integration window,
  relative to the product's peak (column ``blank peak [% of product peak]`` written by
  :func:`gpctools.qc.run_sequence`);
* calibration-standard injections: the worst residual of the standards each one holds;
* fraction outside calibration: worst ``outside calibration [% mass]`` of any usable
  injection against 1 % (common practice, docs/science.md, section 1).

A check that cannot be evaluated (no replicates, no flow-marker values) is listed as
"not evaluated" and does not fail the sequence.
"""

from __future__ import annotations

import math
import warnings as _warnings
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field, replace
from typing import Any

import numpy as np
import pandas as pd

from gpctools import columns as C
from gpctools.display import Display
from gpctools.errors import DataError, MethodError
from gpctools.qc import _table as T
from gpctools.qc.replicates import (
    REPLICATE_RULES,
    ReplicateGroup,
    ReplicatePrecision,
    replicate_precision,
)
from gpctools.qc.specs import SpecSheet, within
from gpctools.sheets.cells import finite_or_none

__all__ = [
    "SuitabilityLimits",
    "SuitabilityCheck",
    "SuitabilityResult",
    "system_suitability",
    "sequence_suitability",
    "calibration_quality",
    "CheckInjection",
]

# Results-table columns used here (gpctools.columns).
MW = C.MW
MN = C.MN
OUTSIDE = C.OUTSIDE_CALIBRATION
ASSIGNED = {"Mw": C.ASSIGNED_MW, "Mn": C.ASSIGNED_MN}
AVERAGE = {"Mw": C.MW, "Mn": C.MN}
FLOW_MARKER_COLUMNS = (C.FLOW_MARKER, "flow_marker [mL]")


@dataclass(frozen=True, repr=False)
class SuitabilityLimits(Display):
    """Acceptance limits of the system-suitability checks.

    Attributes
    ----------
    min_r_squared : float
        Lowest acceptable R² of the calibration fit in log10 M [-] (0.999, common practice).
    max_calibration_residual_pct : float
        Largest acceptable |residual| of any standard [%] (5, common practice; docs/science.md, section 2).
    check_standard_tolerance_pct : float
        Default allowed |value/assigned - 1| of a check standard [%], each injection and the
        mean, when its spec row gives none (5, common practice; between-lab Mw spread is
        6-10 % [published: Japan Society for Analytical Chemistry round-robin review],
        within a lab tighter).
    check_standard_tolerance_Mw_pct, check_standard_tolerance_Mn_pct : float or None
        The same for Mw or Mn alone (None: the common tolerance).
    max_flow_marker_drift_pct : float
        Largest acceptable |flow-marker drift| [%] (0.3, common practice).
    max_replicate_rsd_Mw_pct : float
        Largest acceptable replicate RSD of Mw [%] (3; repeatability under 3 % [published:
        Japan Society for Analytical Chemistry polymer-analysis round-robin review]).
    max_replicate_rsd_Mn_pct : float
        Largest acceptable replicate RSD of Mn [%] (5, common practice: Mn is more sensitive
        to the low-M limit and baseline than Mw).
    replicate_rule : str
        ``"pooled"`` (default), ``"pairs"`` or ``"worst"`` (:mod:`gpctools.qc.replicates`).
    repeatability_Mw_pct, repeatability_Mn_pct : float
        Repeatability SD of a sound system [%] (1.5 and 2.5: half the RSD limits, common
        practice): σ_r of the pairs rule and the basis of the stated false-fail rate.
    max_outside_calibration_pct : float
        Largest acceptable mass outside the calibrated range [% mass] (1, common practice).
    max_blank_peak_pct : float
        Largest acceptable peak of a blank inside a product's window, % of the product's
        peak height (1, common practice: a ghost peak of that size moves Mn by about as
        much as the replicate precision).
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
    check_standard_tolerance_Mw_pct: float | None = None
    check_standard_tolerance_Mn_pct: float | None = None
    replicate_rule: str = "pooled"
    repeatability_Mw_pct: float = 1.5
    repeatability_Mn_pct: float = 2.5
    max_blank_peak_pct: float = 1.0

    def __post_init__(self) -> None:
        if self.replicate_rule not in REPLICATE_RULES:
            raise MethodError(f"replicate_rule must be one of {', '.join(REPLICATE_RULES)}, got "
                              f"{self.replicate_rule!r}", key="replicate_rule")
        for name, value in asdict(self).items():
            if isinstance(value, (bool, str)) or value is None:
                continue
            if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
                raise MethodError(f"suitability limit {name} must be a positive number, got {value!r}", key=name)
        if self.min_r_squared > 1:
            raise MethodError("min_r_squared cannot exceed 1", key="min_r_squared")

    def tolerance(self, quantity: str) -> float:
        """Check-standard tolerance of ``"Mw"`` or ``"Mn"`` [%]."""
        own = {"Mw": self.check_standard_tolerance_Mw_pct,
               "Mn": self.check_standard_tolerance_Mn_pct}.get(quantity)
        return own if own is not None else self.check_standard_tolerance_pct

    def replicate_limit(self, quantity: str) -> tuple[float, float]:
        """(RSD limit, repeatability σ) of ``"Mw"`` or ``"Mn"`` [%]."""
        if quantity == "Mw":
            return self.max_replicate_rsd_Mw_pct, self.repeatability_Mw_pct
        return self.max_replicate_rsd_Mn_pct, self.repeatability_Mn_pct

    def summary(self) -> dict[str, Any]:
        """JSON-safe copy of the limits."""
        return asdict(self)


@dataclass(frozen=True, repr=False)
class SuitabilityCheck(Display):
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


@dataclass(frozen=True, repr=False)
class CheckInjection(Display):
    """One check-standard injection judged against its assigned values.

    Attributes
    ----------
    position : int
        Row of the results table (0-based).
    sample_id, group : str
        The injection's id and its check standard (product code or id).
    sequence : str
    passed : bool
    reasons : tuple of str
        Every criterion with its number and limit.
    deviations : dict
        ``{"Mw": %, "Mn": %}`` deviation from the assigned values [%].
    """

    position: int
    sample_id: str
    group: str
    sequence: str
    passed: bool
    reasons: tuple[str, ...]
    deviations: dict[str, float] = field(default_factory=dict)

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {"row": self.position + 1, "sample_id": self.sample_id, "check standard": self.group,
                "sequence": self.sequence, "result": "pass" if self.passed else "fail",
                "reasons": list(self.reasons),
                "deviations [%]": {k: finite_or_none(v) for k, v in self.deviations.items()}}


@dataclass(frozen=True, repr=False)
class SuitabilityResult(Display):
    """System suitability of one sequence.

    Attributes
    ----------
    sequence : str
        Sequence label (``"(all)"`` when the table has no ``sequence`` column).
    checks : tuple of SuitabilityCheck
    warnings : tuple of str
    replicates : tuple of ReplicatePrecision
        Replicate precision of Mw and Mn, with the rule's false-fail rate.
    check_standards : tuple of CheckInjection
        Each check-standard injection's verdict.
    """

    sequence: str
    checks: tuple[SuitabilityCheck, ...]
    warnings: tuple[str, ...] = field(default=())
    replicates: tuple[ReplicatePrecision, ...] = field(default=())
    check_standards: tuple[CheckInjection, ...] = field(default=())

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
            "replicates": [r.summary() for r in self.replicates],
            "check-standard injections": [c.summary() for c in self.check_standards],
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


@dataclass(frozen=True)
class _Rows:
    """The columns of one sequence's rows that every check step reads."""

    table: pd.DataFrame
    ok: np.ndarray
    role: np.ndarray
    sid: np.ndarray
    product: np.ndarray

    @classmethod
    def of(cls, table: pd.DataFrame) -> _Rows:
        return cls(table, T.ok_mask(table), T.roles(table), T.labels(table, C.SAMPLE_ID),
                   T.labels(table, C.PRODUCT))

    def name(self, i: int) -> str:
        return self.sid[i] or f"row {i + 1}"


def _assigned(rows: _Rows, idx: list[int], q: str, key: str, spec: Any,
              warnings: list[str]) -> float | None:
    """Assigned value of ``q`` for one check standard: the batch-sheet column, else the
    spec sheet's target. A text cell that is not a molar mass raises :class:`DataError`.
    """
    table = rows.table
    acol = ASSIGNED[q]
    values = T.numbers(table, acol)[idx]
    for i, a in zip(idx, values, strict=True):  # a typo must not silently skip the check
        cell = table[acol].iloc[i] if acol in table.columns else None
        if T.label_text(cell) and not (np.isfinite(a) and a > 0):
            raise DataError(f"check standard {rows.sid[i]}: {T.label_text(cell)!r} is not a molar mass; "
                            "give the assigned value as a positive number in g/mol or leave "
                            "the cell empty", column=acol)
    finite = values[np.isfinite(values)]
    if finite.size == 0:
        lim = spec.limit(q) if spec is not None else None
        return lim.target if lim is not None and lim.target is not None else None
    assigned = float(finite[0])
    if np.any(finite != assigned):
        msg = (f"check standard {key}: different {acol} values in one sequence "
               f"({', '.join(f'{v:g}' for v in np.unique(finite))}); the first, {assigned:g}, is used")
        warnings.append(msg)
        _warnings.warn(msg, T.QCWarning, stacklevel=4)
    return assigned


def _g(v: float) -> str:
    return f"{v:,.0f}".replace(",", " ")


def _check_standard_group(rows: _Rows, key: str, idx: list[int], sequence: str, specs: SpecSheet | None,
                          limits: SuitabilityLimits, warnings: list[str]
                          ) -> tuple[list[SuitabilityCheck], list[CheckInjection]]:
    """Every injection of one check standard, and their mean, against the assigned values.

    References
    ----------
    Deviation 100·(value/assigned - 1) [%], judged per injection and for the mean: the
    mean of +0.3 % and +7.8 % is +4 % and would hide the second (docs/science.md, section 17).
    """
    spec = specs.get(key) if specs is not None else None
    if spec is None and specs is not None:
        spec = specs.get(rows.sid[idx[0]])
    checks: list[SuitabilityCheck] = []
    per: dict[int, list[str]] = {i: [] for i in idx}
    fails: dict[int, bool] = {i: False for i in idx}
    devs: dict[int, dict[str, float]] = {i: {} for i in idx}
    evaluated = False
    for q in ("Mw", "Mn"):
        own = spec.tolerance(q) if spec is not None else None
        tol: float = own if own is not None else limits.tolerance(q)
        source = (f"spec sheet, product {spec.product} (row {spec.row})"
                  if spec is not None and own is not None else "QC settings (common practice: 5 %)")
        assigned = _assigned(rows, idx, q, key, spec, warnings)
        if assigned is None:
            continue
        evaluated = True
        vals = T.numbers(rows.table, AVERAGE[q])
        usable = [i for i in idx if rows.ok[i] and math.isfinite(vals[i])]
        for n, i in enumerate(idx, start=1):
            name = f"check standard {key}, injection {n} ({rows.name(i)}): {q} deviation from assigned [%]"
            if i not in usable:
                err = T.error_text(rows.table, i) or f"no {q} value"
                text = f"injection {n}: no usable result ({err})"
                checks.append(SuitabilityCheck(name, math.nan, tol, "<=", False, text, source))
                per[i].append(text)
                fails[i] = True
                continue
            dev = 100.0 * (vals[i] / assigned - 1.0)
            ok = within(abs(dev), tol, "<=")
            text = (f"{q} {_g(vals[i])} g/mol vs assigned {_g(assigned)} g/mol: {dev:+.2f} % "
                    f"({'within' if ok else 'outside'} ±{tol:g} %)")
            if len(idx) > 1:  # one injection: the mean's check below is the injection's
                checks.append(SuitabilityCheck(name, abs(dev), tol, "<=", ok, f"injection {n}: {text}", source))
            per[i].append(text)
            devs[i][q] = dev
            fails[i] |= not ok
        name = f"check standard {key}: {q} deviation from assigned [%]"
        if not usable:
            errs = "; ".join(dict.fromkeys(filter(None, (T.error_text(rows.table, i) for i in idx))))
            checks.append(SuitabilityCheck(name, math.nan, tol, "<=", False,
                                           f"no usable injection ({len(idx)} failed: {errs or 'no error text'})",
                                           source))
            continue
        mean = float(np.mean(vals[usable]))
        dev = 100.0 * (mean / assigned - 1.0)
        checks.append(SuitabilityCheck(
            name, abs(dev), tol, "<=", within(abs(dev), tol, "<="),
            f"mean {q} {_g(mean)} g/mol over {len(usable)} injection(s) vs assigned {_g(assigned)} g/mol: "
            f"{dev:+.2f} % (tolerance ±{tol:g} %)", source))
    if not evaluated:
        checks.append(SuitabilityCheck(
            f"check standard {key}: deviation from assigned [%]", math.nan, limits.tolerance("Mw"), "<=",
            False, f"no assigned value; fill '{ASSIGNED['Mw']}' (and/or '{ASSIGNED['Mn']}') in the "
            "batch sheet for its rows, or a target in the spec sheet", "common practice"))
        injections = [CheckInjection(i, rows.sid[i], key, sequence, False, ("no assigned value",)) for i in idx]
    else:
        injections = [CheckInjection(i, rows.sid[i], key, sequence, not fails[i], tuple(per[i]), devs[i])
                      for i in idx]
    return checks, injections


def _check_standard_checks(rows: _Rows, sequence: str, specs: SpecSheet | None, limits: SuitabilityLimits,
                           warnings: list[str]) -> tuple[list[SuitabilityCheck], list[CheckInjection]]:
    """Check-standard presence, and each check standard's injections and mean."""
    is_check = rows.role == T.ROLE_CHECK
    checks: list[SuitabilityCheck] = []
    if not is_check.any():
        if limits.require_check_standard:
            checks.append(SuitabilityCheck(
                "check standard present", math.nan, math.nan, "", False,
                "no check-standard injection in this sequence (role 'check_standard'); run one, "
                "or switch the requirement off (QC settings require_check_standard = false, "
                "CLI --no-require-check-standard)", "common practice"))
        else:
            checks.append(SuitabilityCheck("check standard present", math.nan, math.nan, "", None,
                                           "no check-standard injection in this sequence", "common practice"))
    groups: dict[str, list[int]] = {}
    for i in np.flatnonzero(is_check):
        groups.setdefault(rows.product[i] or rows.sid[i], []).append(int(i))
    injections: list[CheckInjection] = []
    for key, idx in groups.items():
        c, inj = _check_standard_group(rows, key, idx, sequence, specs, limits, warnings)
        checks.extend(c)
        injections.extend(inj)
    return checks, injections


def _flow_marker_check(rows: _Rows, limits: SuitabilityLimits,
                       reference_flow_marker: float | None) -> SuitabilityCheck:
    fm_name = "flow-marker drift |V_obs/V_ref - 1| [%]"
    source = "common practice (0.1 % flow error moves averages 1.4-3.5 %, docs/science.md, section 2)"
    fm_col = _flow_marker_column(rows.table)
    if fm_col is None:
        return _not_evaluated(fm_name, limits.max_flow_marker_drift_pct, "<=",
                              "no observed flow-marker positions in this sequence", "common practice")
    obs = T.numbers(rows.table, fm_col)
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
    return _check(fm_name, float(abs(drift[j])), limits.max_flow_marker_drift_pct, "<=",
                  f"worst {rows.name(i)}: {obs[i]:g} mL vs {ref_text}, {drift[j]:+.3f} % "
                  f"(limit ±{limits.max_flow_marker_drift_pct:g} %)", source)


def replicate_groups(table: pd.DataFrame, column: str) -> list[ReplicateGroup]:
    """Usable injections of samples (roles sample and replicate) grouped by sample
    (``sample_id``; a replicate with an id of its own joins the only sample of its batch).
    """
    rows = _Rows.of(table)
    vals = T.numbers(table, column)
    keys = T.sample_keys(table)
    groups: dict[str, list[float]] = {}
    for i in np.flatnonzero(rows.ok & np.isin(rows.role, T.SAMPLE_ROLES)):
        if keys[i] and math.isfinite(vals[i]):
            groups.setdefault(keys[i], []).append(float(vals[i]))
    return [ReplicateGroup(k, tuple(v)) for k, v in groups.items()]


_REPLICATE_SOURCE = {
    "Mw": "published: Japan Society for Analytical Chemistry round-robin review (repeatability under 3 %)",
    "Mn": "common practice",
}


def _replicate_checks(rows: _Rows, limits: SuitabilityLimits
                      ) -> tuple[list[SuitabilityCheck], list[ReplicatePrecision]]:
    checks, results = [], []
    for q in ("Mw", "Mn"):
        lim, sigma = limits.replicate_limit(q)
        res = replicate_precision(replicate_groups(rows.table, AVERAGE[q]), q, rule=limits.replicate_rule,
                                  limit_pct=lim, sigma_pct=sigma)
        results.append(res)
        name = {"pooled": f"replicate RSD of {q}, pooled [%]", "worst": f"replicate RSD of {q} [%]",
                "pairs": f"replicate range of {q} / repeatability limit [-]"}[res.rule]
        source = _REPLICATE_SOURCE[q] + ("; r = 2.8·σ_r (ISO 5725-6, from memory)" if res.rule == "pairs" else "")
        reason = res.reason + (f"; {res.false_fail_text()}" if res.groups else "")
        checks.append(SuitabilityCheck(name, res.value, res.limit, "<=", res.passed, reason, source))
    return checks, results


def _outside_check(rows: _Rows, limits: SuitabilityLimits) -> SuitabilityCheck:
    oc_name = "mass outside calibration [% mass]"
    source = "common practice (docs/science.md, section 1)"
    out = T.numbers(rows.table, OUTSIDE)
    usable = rows.ok & np.isin(rows.role, (*T.SAMPLE_ROLES, T.ROLE_CHECK))
    idx = np.flatnonzero(usable & np.isfinite(out))
    if idx.size == 0:
        return _not_evaluated(oc_name, limits.max_outside_calibration_pct, "<=", f"no '{OUTSIDE}' values", source)
    i = int(idx[np.argmax(out[idx])])
    return _check(oc_name, float(out[i]), limits.max_outside_calibration_pct, "<=",
                  f"worst {rows.name(i)}: {out[i]:.2f} % (limit {limits.max_outside_calibration_pct:g} %)", source)


def _blank_checks(rows: _Rows, limits: SuitabilityLimits) -> list[SuitabilityCheck]:
    """One check per blank injection: its largest peak in any product window."""
    lim = limits.max_blank_peak_pct
    source = "QC settings (common practice: 1 % of the product peak)"
    peak = T.numbers(rows.table, C.BLANK_PEAK)
    details = T.labels(rows.table, C.BLANK_DETAILS)
    checks = []
    for i in (int(k) for k in np.flatnonzero(rows.role == T.ROLE_BLANK)):
        name = f"blank {rows.name(i)}: largest peak in a product window [% of product peak]"
        if not rows.ok[i]:
            checks.append(SuitabilityCheck(name, math.nan, lim, "<=", False,
                                           f"the blank could not be checked: {T.error_text(rows.table, i)}",
                                           source))
        elif not math.isfinite(peak[i]):
            checks.append(_not_evaluated(name, lim, "<=", "the blank was not checked for peaks (run "
                                         "'gpctools qc' on the batch sheet with --method)", source))
        else:
            checks.append(_check(name, float(peak[i]), lim, "<=",
                                 f"{details[i] or f'{peak[i]:.2f} %'} (limit {lim:g} % of the product peak)",
                                 source))
    return checks


def _standard_injection_checks(rows: _Rows, limits: SuitabilityLimits) -> list[SuitabilityCheck]:
    """One check per calibration-standard injection: its worst standard residual."""
    lim = limits.max_calibration_residual_pct
    res = T.numbers(rows.table, C.WORST_STANDARD_RESIDUAL)
    located = T.labels(rows.table, C.STANDARDS_LOCATED)
    checks = []
    for i in (int(k) for k in np.flatnonzero(rows.role == T.ROLE_CALIBRATION)):
        name = f"calibration standard {rows.name(i)}: worst residual [%]"
        if not rows.ok[i]:
            checks.append(SuitabilityCheck(name, math.nan, lim, "<=", False,
                                           f"its peaks could not be located: {T.error_text(rows.table, i)}",
                                           "common practice (docs/science.md, section 2)"))
        elif math.isfinite(res[i]):
            checks.append(_check(name, abs(float(res[i])), lim, "<=",
                                 f"{res[i]:+.2f} % (limit ±{lim:g} %); {located[i]}",
                                 "common practice (docs/science.md, section 2)"))
    return checks


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

    Steps: calibration quality, calibration-standard injections, check standards (each
    injection and the mean), blanks, flow-marker drift, replicate precision, mass outside
    calibration.

    Parameters
    ----------
    table : pandas.DataFrame
        Results-table rows of this sequence (not modified).
    calibration : Calibration or Mapping or None
        The calibration the sequence used; see :func:`calibration_quality`.
    sequence : str
        Label recorded in the result.
    specs : SpecSheet, optional
        Source of per-check-standard tolerances and targets (row whose ``product`` is
        the check standard's ``product``, else its ``sample_id``).
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
    rows = _Rows.of(table)
    warnings: list[str] = []
    checks: list[SuitabilityCheck] = list(calibration_quality(calibration, limits))
    checks.extend(_standard_injection_checks(rows, limits))
    cs_checks, injections = _check_standard_checks(rows, str(sequence), specs, limits, warnings)
    checks.extend(cs_checks)
    checks.extend(_blank_checks(rows, limits))
    checks.append(_flow_marker_check(rows, limits, reference_flow_marker))
    rep_checks, replicates = _replicate_checks(rows, limits)
    checks.extend(rep_checks)
    checks.append(_outside_check(rows, limits))
    return SuitabilityResult(str(sequence), tuple(checks), tuple(warnings), tuple(replicates), tuple(injections))


def system_suitability(
    table: pd.DataFrame,
    calibration: Any,
    *,
    specs: SpecSheet | None = None,
    limits: SuitabilityLimits | None = None,
    reference_flow_marker: float | None = None,
    calibrations: Mapping[str, Any] | None = None,
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
    calibrations : mapping, optional
        Sequence label -> the calibration that sequence used (built from its own
        calibration-standard injections); sequences not in it use ``calibration``.

    Returns
    -------
    tuple of SuitabilityResult
        One per sequence.
    """
    T.require_columns(table, (C.SAMPLE_ID,), "system suitability")
    T.check_roles(table)
    seq = T.labels(table, C.SEQUENCE, T.ALL_SEQUENCES)
    order = list(dict.fromkeys(seq.tolist()))
    out = []
    for s in order:
        rows = np.flatnonzero(seq == s)
        sub = table.iloc[rows]
        cal = (calibrations or {}).get(s, calibration)
        res = sequence_suitability(sub, cal, sequence=s, specs=specs, limits=limits,
                                   reference_flow_marker=reference_flow_marker)
        # positions of check-standard injections back in the whole table
        inj = tuple(replace(c, position=int(rows[c.position])) for c in res.check_standards)
        out.append(replace(res, check_standards=inj))
    return tuple(out)
