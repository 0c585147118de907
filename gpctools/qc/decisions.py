"""Release decisions: pass/fail per sample and per batch, each with its reasons.

Outcomes of a sample (injections of role ``sample`` or ``replicate`` grouped by ``batch``
and ``sample_id``; the sample's value is the arithmetic mean of its usable injections, and
by default every injection is judged as well, so an injection outside a limit fails the
sample even when the mean is inside: the averaging trap of docs/science.md, section 17):

``pass``
    every limit of its product is met (limits are inclusive).
``fail``
    at least one value is outside a limit; each such limit is named in the reasons.
``not reportable``
    a sequence it ran in failed system suitability: the numbers cannot be used to decide,
    whatever they are (the reasons name the failed checks).
``no result``
    no usable injection (every injection has status ``error``; the error text is given),
    or a limited quantity has no value.
``no spec``
    the sample has no product code, or its product has no row in the spec sheet.

A batch takes the most severe outcome of its samples, in the order
``not reportable`` > ``fail`` > ``no result`` > ``no spec`` > ``pass``. Every sample and
batch also carries its **verdict against spec**: what it would be if the sequence had
passed, so a batch that is not reportable still says "would fail: Mw 46 800 g/mol above
max 46 000 g/mol".

Every injection gets a verdict too (:class:`InjectionVerdict`): samples and replicates
against the spec (``not reportable`` with the would-be verdict when their sequence failed);
check standards against their assigned values; blanks against the blank-peak limit;
calibration-standard injections against the residual limit.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from gpctools import columns as C
from gpctools.display import Display
from gpctools.errors import DataError
from gpctools.qc import _table as T
from gpctools.qc.specs import SPEC_QUANTITIES, ProductSpec, SpecSheet, find_column
from gpctools.qc.suitability import SuitabilityLimits, SuitabilityResult
from gpctools.sheets.cells import finite_or_none

__all__ = [
    "PASS",
    "FAIL",
    "NOT_REPORTABLE",
    "NO_RESULT",
    "NO_SPEC",
    "SEVERITY",
    "NO_BATCH",
    "SampleDecision",
    "BatchDecision",
    "InjectionVerdict",
    "JUDGE_INJECTIONS",
    "JUDGE_MEAN",
    "Decisions",
    "decide",
]

PASS = "pass"
FAIL = "fail"
NOT_REPORTABLE = "not reportable"
NO_RESULT = "no result"
NO_SPEC = "no spec"
#: Outcomes from most to least severe; a batch takes the first one any sample has.
SEVERITY = (NOT_REPORTABLE, FAIL, NO_RESULT, NO_SPEC, PASS)
#: Batch label used for samples with an empty ``batch`` cell (or no ``batch`` column).
NO_BATCH = "(no batch)"
#: Sample judgement: every usable injection and the mean (default), or the mean only.
JUDGE_INJECTIONS = "injections and mean"
JUDGE_MEAN = "mean"


def worst(outcomes: Sequence[str]) -> str:
    """The most severe of some outcomes (:data:`SEVERITY`); ``pass`` for none."""
    return SEVERITY[min((SEVERITY.index(o) for o in outcomes), default=len(SEVERITY) - 1)]


def would_be(verdict: str, reasons: Sequence[str]) -> str:
    """``"would fail: <reasons>"``: the verdict against spec of a result that is not reportable."""
    if verdict == PASS:
        return "would pass against spec"
    return f"would {verdict}: " + "; ".join(reasons) if verdict == FAIL else \
        f"against spec: {verdict} ({'; '.join(reasons)})"


@dataclass(frozen=True, repr=False)
class SampleDecision(Display):
    """The decision on one sample.

    Attributes
    ----------
    sample_id, product, batch : str
    sequences : tuple of str
        Sequences its injections ran in.
    injections, usable : int
        Number of injections, and of those with status ``ok``.
    values : dict
        Mean over usable injections, per results column (``"Mw [g/mol]"`` ...).
    decision : str
        One of :data:`SEVERITY`.
    reasons : tuple of str
        Why (for every outcome, including pass).
    notes : tuple of str
        Things to know that do not change the decision (a failed replicate, warnings).
    spec_verdict : str
        The decision against the spec alone (equal to ``decision`` unless not reportable).
    spec_reasons : tuple of str
        Every criterion behind ``spec_verdict``, with its number and limit.
    """

    sample_id: str
    product: str
    batch: str
    sequences: tuple[str, ...]
    injections: int
    usable: int
    values: dict[str, float]
    decision: str
    reasons: tuple[str, ...]
    notes: tuple[str, ...] = field(default=())
    spec_verdict: str = ""
    spec_reasons: tuple[str, ...] = field(default=())

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            C.SPEC_VERDICT: self.spec_verdict,
            "reasons against spec": list(self.spec_reasons),
            C.SAMPLE_ID: self.sample_id,
            C.PRODUCT: self.product,
            C.BATCH: self.batch,
            "sequences": list(self.sequences),
            "injections": self.injections,
            "usable injections": self.usable,
            "values": {k: finite_or_none(v) for k, v in self.values.items()},
            C.DECISION: self.decision,
            C.REASONS: list(self.reasons),
            C.NOTES: list(self.notes),
        }


@dataclass(frozen=True, repr=False)
class BatchDecision(Display):
    """The decision on one batch (production lot).

    Attributes
    ----------
    batch : str
    products : tuple of str
    samples : tuple of str
    decision : str
        One of :data:`SEVERITY`.
    reasons : tuple of str
    spec_verdict : str
        The decision against the spec alone.
    """

    batch: str
    products: tuple[str, ...]
    samples: tuple[str, ...]
    decision: str
    reasons: tuple[str, ...]
    spec_verdict: str = ""

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            C.SPEC_VERDICT: self.spec_verdict,
            C.BATCH: self.batch,
            "products": list(self.products),
            "samples": list(self.samples),
            C.DECISION: self.decision,
            C.REASONS: list(self.reasons),
        }


@dataclass(frozen=True, repr=False)
class InjectionVerdict(Display):
    """The verdict on one injection.

    Attributes
    ----------
    position : int
        Row of the results table (0-based).
    sample_id, role, product, batch, sequence : str
    verdict : str
        One of :data:`SEVERITY` (check standards, blanks and calibration standards:
        ``pass`` or ``fail``; ``no result`` when the injection has no value).
    reasons : tuple of str
        Every criterion with its number and limit.
    spec_verdict : str
        Samples: the verdict against the spec alone; other roles: ``verdict``.
    """

    position: int
    sample_id: str
    role: str
    product: str
    batch: str
    sequence: str
    verdict: str
    reasons: tuple[str, ...]
    spec_verdict: str

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {"row": self.position + 1, C.SAMPLE_ID: self.sample_id, C.ROLE: self.role,
                C.PRODUCT: self.product, C.BATCH: self.batch, C.SEQUENCE: self.sequence,
                C.VERDICT: self.verdict, C.VERDICT_REASONS: list(self.reasons),
                C.SPEC_VERDICT: self.spec_verdict}


@dataclass(frozen=True, repr=False)
class Decisions(Display):
    """Sample, batch and injection verdicts of one QC run."""

    samples: tuple[SampleDecision, ...]
    batches: tuple[BatchDecision, ...]
    warnings: tuple[str, ...] = field(default=())
    injections: tuple[InjectionVerdict, ...] = field(default=())

    def injections_frame(self) -> pd.DataFrame:
        """One row per injection: labels, verdict, verdict against spec, reasons."""
        cols = [C.SAMPLE_ID, C.ROLE, C.PRODUCT, C.BATCH, C.SEQUENCE, C.VERDICT, C.SPEC_VERDICT,
                C.VERDICT_REASONS]
        rows = [{C.SAMPLE_ID: v.sample_id, C.ROLE: v.role, C.PRODUCT: v.product, C.BATCH: v.batch,
                 C.SEQUENCE: v.sequence, C.VERDICT: v.verdict, C.SPEC_VERDICT: v.spec_verdict,
                 C.VERDICT_REASONS: "; ".join(v.reasons)} for v in self.injections]
        return pd.DataFrame(rows, columns=cols)

    @property
    def all_pass(self) -> bool:
        """True when every batch passed (an empty set of batches is not a pass)."""
        return bool(self.batches) and all(b.decision == PASS for b in self.batches)

    def counts(self) -> dict[str, int]:
        """Number of batches per outcome."""
        return {k: sum(b.decision == k for b in self.batches) for k in SEVERITY}

    def samples_frame(self) -> pd.DataFrame:
        """One row per sample: labels, counts, mean values with units, decision, reasons."""
        value_cols: list[str] = []
        for s in self.samples:
            for c in s.values:
                if c not in value_cols:
                    value_cols.append(c)
        rows = []
        for s in self.samples:
            row: dict[str, Any] = {
                C.BATCH: s.batch,
                C.SAMPLE_ID: s.sample_id,
                C.PRODUCT: s.product,
                C.SEQUENCE: ", ".join(s.sequences),
                C.INJECTIONS: s.injections,
                C.USABLE_INJECTIONS: s.usable,
            }
            for c in value_cols:
                row[c] = s.values.get(c, math.nan)
            row[C.DECISION] = s.decision
            row[C.SPEC_VERDICT] = s.spec_verdict
            row[C.REASONS] = "; ".join(s.reasons)
            row[C.NOTES] = "; ".join(s.notes)
            rows.append(row)
        cols = [C.BATCH, C.SAMPLE_ID, C.PRODUCT, C.SEQUENCE, C.INJECTIONS, C.USABLE_INJECTIONS,
                *value_cols, C.DECISION, C.SPEC_VERDICT, C.REASONS, C.NOTES]
        return pd.DataFrame(rows, columns=cols)

    def batches_frame(self) -> pd.DataFrame:
        """One row per batch: products, samples, decision, reasons."""
        rows = [
            {
                C.BATCH: b.batch,
                "products": ", ".join(b.products),
                "samples": ", ".join(b.samples),
                C.DECISION: b.decision,
                C.SPEC_VERDICT: b.spec_verdict,
                C.REASONS: "; ".join(b.reasons),
            }
            for b in self.batches
        ]
        return pd.DataFrame(rows, columns=[C.BATCH, "products", "samples", C.DECISION, C.SPEC_VERDICT,
                                           C.REASONS])

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            "all_pass": self.all_pass,
            "counts": self.counts(),
            "batches": [b.summary() for b in self.batches],
            "samples": [s.summary() for s in self.samples],
            "injections": [v.summary() for v in self.injections],
            "warnings": list(self.warnings),
        }


@dataclass(frozen=True)
class _Table:
    """The labels and numbers of a results table that the decisions read (built once)."""

    table: pd.DataFrame
    role: np.ndarray
    ok: np.ndarray
    sid: np.ndarray
    batch: np.ndarray
    product: np.ndarray
    seq: np.ndarray
    warn: np.ndarray
    numbers: dict[str, np.ndarray] = field(default_factory=dict)

    @classmethod
    def of(cls, table: pd.DataFrame) -> _Table:
        return cls(table, T.roles(table), T.ok_mask(table), T.labels(table, C.SAMPLE_ID),
                   T.labels(table, C.BATCH, NO_BATCH), T.labels(table, C.PRODUCT),
                   T.labels(table, C.SEQUENCE, T.ALL_SEQUENCES), T.labels(table, C.WARNINGS))

    def column(self, name: str) -> np.ndarray | None:
        """Numbers of the results column holding ``name`` (None when the table has none)."""
        head = find_column(self.table.columns, name)
        if head is None:
            return None
        if head not in self.numbers:
            self.numbers[head] = T.numbers(self.table, head)
        return self.numbers[head]


def _judge(t: _Table, spec: ProductSpec, rows: Sequence[int]) -> tuple[str, list[str], dict[str, float]]:
    """The mean of ``rows`` against every limit of ``spec``: (verdict, reasons, values)."""
    outcomes: list[tuple[bool | None, str]] = []
    values: dict[str, float] = {}
    for lim in spec.limits:
        col = t.column(lim.column)
        if col is None:
            outcomes.append((None, f"{lim.quantity}: the results have no column {lim.column!r}"))
            continue
        v = col[list(rows)]
        v = v[np.isfinite(v)]
        values[lim.column] = float(np.mean(v)) if v.size else math.nan
        outcomes.append(lim.check(values[lim.column]))
    fails = [r for p, r in outcomes if p is False]
    missing = [r for p, r in outcomes if p is None]
    if fails:
        return FAIL, fails, values
    if missing:
        return NO_RESULT, missing, values
    return PASS, [r for _, r in outcomes], values


def _spec_for(prods: list[str], specs: SpecSheet) -> tuple[ProductSpec | None, str, list[str]]:
    """The spec of a sample's product code, or (None, no-spec outcome, reason)."""
    if len(prods) > 1:
        return None, NO_SPEC, [f"its injections give different product codes ({', '.join(prods)}); "
                               "correct the batch sheet"]
    if not prods:
        return None, NO_SPEC, ["no product code; fill the 'product' column of the batch sheet"]
    spec = specs.get(prods[0])
    if spec is None:
        return None, NO_SPEC, [f"product {prods[0]!r} has no row in the spec sheet"]
    if not spec.limits:
        return None, NO_SPEC, [f"product {prods[0]!r} has no limits in the spec sheet"]
    return spec, PASS, []


def _injection_label(t: _Table, n: int, i: int, total: int) -> str:
    return f"injection {n} of {total} ({t.sid[i] or f'row {i + 1}'})"


def _sample_spec(t: _Table, rows: list[int], usable: list[int], spec: ProductSpec, judge: str
                 ) -> tuple[str, list[str], dict[str, float], dict[int, tuple[str, list[str]]]]:
    """Spec verdict of one sample (mean, and each injection when ``judge`` says so)."""
    verdict, reasons, values = _judge(t, spec, usable)
    per: dict[int, tuple[str, list[str]]] = {}
    for i in usable:
        v, r, _ = _judge(t, spec, [i])
        per[i] = (v, r)
    if judge == JUDGE_INJECTIONS and len(usable) > 1:
        # injections failing a limit the mean already fails add nothing; list the others
        failed_by_mean = {r.split(" ")[0] for r in reasons} if verdict == FAIL else set()
        extra = [f"{_injection_label(t, n, i, len(rows))}: {r}" for n, i in enumerate(rows, start=1)
                 if i in per and per[i][0] == FAIL for r in per[i][1] if r.split(" ")[0] not in failed_by_mean]
        if extra:
            if verdict == PASS:
                reasons = ["the mean is within limits but an injection is not"]
            verdict = FAIL
            reasons = [*reasons, *extra] if verdict == FAIL else reasons
    return verdict, reasons, values, per


def _sample_decision(t: _Table, b: str, s: str, rows: list[int], specs: SpecSheet,
                     suit: dict[str, SuitabilityResult], judge: str
                     ) -> tuple[SampleDecision, dict[int, tuple[str, list[str]]]]:
    """Decision on one sample and the spec verdict of each of its usable injections."""
    usable = [i for i in rows if t.ok[i]]
    sequences = tuple(dict.fromkeys(t.seq[i] for i in rows))
    prods = list(dict.fromkeys(p for p in (t.product[i] for i in rows) if p))
    notes: list[str] = []
    failed = [i for i in rows if not t.ok[i]]
    if failed and usable:
        errs = "; ".join(filter(None, (T.error_text(t.table, i) for i in failed)))
        notes.append(f"{len(failed)} of {len(rows)} injections unusable ({errs or 'no error text'})")
    notes.extend(f"warnings: {t.warn[i]}" for i in usable if t.warn[i])
    values = {c: float(np.mean(v[np.isfinite(v)])) if np.isfinite(v).any() else math.nan
              for c in SPEC_QUANTITIES.values() if (col := t.column(c)) is not None
              for v in [col[usable]]}
    per: dict[int, tuple[str, list[str]]] = {}
    reasons: list[str]
    spec, verdict, reasons = _spec_for(prods, specs)
    if not usable:
        texts = [T.error_text(t.table, i) for i in rows]
        verdict = NO_RESULT
        reasons = list(dict.fromkeys(f"no usable injection: {e}" if e else "no usable injection" for e in texts))
    elif spec is not None:
        verdict, reasons, limited, per = _sample_spec(t, rows, usable, spec, judge)
        values.update(limited)
    else:
        per = {i: (verdict, list(reasons)) for i in usable}
    decision, shown = verdict, reasons
    bad_seq = [suit[q] for q in sequences if q in suit and not suit[q].passed]
    if bad_seq:
        decision = NOT_REPORTABLE
        shown = [f"sequence {r.sequence} failed system suitability: {x}" for r in bad_seq for x in r.reasons()]
        shown.append(would_be(verdict, reasons))
    prod = prods[0] if len(prods) == 1 else ", ".join(prods)
    return SampleDecision(
        sample_id=s or "(no sample_id)", product=prod, batch=b, sequences=sequences,
        injections=len(rows), usable=len(usable), values=values, decision=decision,
        reasons=tuple(shown), notes=tuple(dict.fromkeys(notes)), spec_verdict=verdict,
        spec_reasons=tuple(reasons)), per


def _batch_decisions(samples: Sequence[SampleDecision]) -> list[BatchDecision]:
    by_batch: dict[str, list[SampleDecision]] = {}
    for d in samples:
        by_batch.setdefault(d.batch, []).append(d)
    out = []
    for b, ds in by_batch.items():
        decision = worst([d.decision for d in ds])
        spec_verdict = worst([d.spec_verdict for d in ds])
        spec_reasons = [f"sample {d.sample_id} ({d.spec_verdict}): {r}" for d in ds
                        if d.spec_verdict != PASS for r in d.spec_reasons]
        if decision == PASS:
            reasons = [f"all {len(ds)} sample(s) within limits"]
        elif decision == NOT_REPORTABLE:
            reasons = list(dict.fromkeys(r for d in ds if d.decision == NOT_REPORTABLE
                                         for r in d.reasons if r.startswith("sequence ")))
            reasons.append(would_be(spec_verdict, spec_reasons or [f"all {len(ds)} sample(s) within limits"]))
        else:
            reasons = spec_reasons
        prods = tuple(dict.fromkeys(d.product for d in ds if d.product))
        out.append(BatchDecision(b, prods, tuple(d.sample_id for d in ds), decision, tuple(reasons),
                                 spec_verdict))
    return out


def _other_verdict(t: _Table, i: int, limits: SuitabilityLimits,
                   checks: dict[int, Any]) -> tuple[str, list[str]]:
    """Verdict of a check-standard, blank or calibration-standard injection."""
    role = t.role[i]
    if role == T.ROLE_CHECK:
        c = checks.get(i)
        if c is None:
            return NO_RESULT, ["not judged"]
        return (PASS if c.passed else FAIL), list(c.reasons)
    if not t.ok[i]:
        return FAIL, [f"not usable: {T.error_text(t.table, i) or 'no error text'}"]
    if role == T.ROLE_BLANK:
        col = t.column(C.BLANK_PEAK)
        v = math.nan if col is None else float(col[i])
        if not math.isfinite(v):
            return NO_RESULT, ["not checked for peaks (run 'gpctools qc' on the batch sheet with --method)"]
        detail = T.label_text(t.table[C.BLANK_DETAILS].iloc[i]) if C.BLANK_DETAILS in t.table.columns else ""
        ok = v <= limits.max_blank_peak_pct * (1 + 1e-12)
        return (PASS if ok else FAIL), [f"largest peak {v:.2f} % of the product peak "
                                        f"({'within' if ok else 'above'} {limits.max_blank_peak_pct:g} %)"
                                        + (f"; {detail}" if detail else "")]
    col = t.column(C.WORST_STANDARD_RESIDUAL)
    v = math.nan if col is None else float(col[i])
    if not math.isfinite(v):
        return NO_RESULT, ["no located standards"]
    ok = abs(v) <= limits.max_calibration_residual_pct * (1 + 1e-12)
    return (PASS if ok else FAIL), [f"worst standard residual {v:+.2f} % ({'within' if ok else 'outside'} "
                                    f"±{limits.max_calibration_residual_pct:g} %)"]


def _injection_verdicts(t: _Table, suit: dict[str, SuitabilityResult], limits: SuitabilityLimits,
                        per_sample: dict[int, tuple[str, list[str]]]) -> list[InjectionVerdict]:
    checks = {c.position: c for r in suit.values() for c in r.check_standards}
    out = []
    for i in range(len(t.table)):
        role = t.role[i]
        if role in T.SAMPLE_ROLES:
            if not t.ok[i]:
                verdict, reasons = NO_RESULT, [f"no usable result: {T.error_text(t.table, i) or 'no error text'}"]
            else:
                verdict, reasons = per_sample.get(i, (NO_SPEC, ["no spec for its product"]))
            spec_verdict, shown = verdict, list(reasons)
            r = suit.get(t.seq[i])
            if r is not None and not r.passed:
                verdict = NOT_REPORTABLE
                shown = [f"sequence {r.sequence} failed system suitability", would_be(spec_verdict, reasons)]
        else:
            verdict, shown = _other_verdict(t, i, limits, checks)
            spec_verdict = verdict
        out.append(InjectionVerdict(i, t.sid[i], role, t.product[i], t.batch[i] if role in T.SAMPLE_ROLES else "",
                                    t.seq[i], verdict, tuple(shown), spec_verdict))
    return out


def decide(
    table: pd.DataFrame,
    specs: SpecSheet,
    suitability: Sequence[SuitabilityResult] = (),
    *,
    judge: str = JUDGE_INJECTIONS,
    limits: SuitabilityLimits | None = None,
) -> Decisions:
    """Verdicts per injection, per sample and per batch.

    Parameters
    ----------
    table : pandas.DataFrame
        The batch results table (not modified). Rows of role ``sample`` or ``replicate``
        (or with no role) are decided against the spec; check standards, blanks and
        calibration standards get their own verdicts.
    specs : SpecSheet
        Limits per product.
    suitability : sequence of SuitabilityResult
        Per-sequence suitability; samples run in a failed sequence are ``not reportable``
        (with their verdict against spec). A sequence missing here is taken as not
        evaluated (not a failure).
    judge : str
        :data:`JUDGE_INJECTIONS` (each usable injection and the mean must meet every
        limit) or :data:`JUDGE_MEAN` (the mean only).
    limits : SuitabilityLimits, optional
        Blank-peak and residual limits of the blank and calibration-standard verdicts.

    Returns
    -------
    Decisions
    """
    T.require_columns(table, (C.SAMPLE_ID,), "the release decisions")
    T.check_roles(table)
    if judge not in (JUDGE_INJECTIONS, JUDGE_MEAN):
        raise DataError(f"judge must be {JUDGE_INJECTIONS!r} or {JUDGE_MEAN!r}, got {judge!r}", key="judge")
    t = _Table.of(table)
    suit = {s.sequence: s for s in suitability}
    groups: dict[tuple[str, str], list[int]] = {}
    keys = T.sample_keys(table)
    for i in np.flatnonzero(np.isin(t.role, T.SAMPLE_ROLES)):
        groups.setdefault((t.batch[i], keys[i]), []).append(int(i))
    samples: list[SampleDecision] = []
    per_injection: dict[int, tuple[str, list[str]]] = {}
    for (b, s), rows in groups.items():
        d, per = _sample_decision(t, b, s, rows, specs, suit, judge)
        samples.append(d)
        per_injection.update(per)
    verdicts = _injection_verdicts(t, suit, limits or SuitabilityLimits(), per_injection)
    return Decisions(tuple(samples), tuple(_batch_decisions(samples)), (), tuple(verdicts))
