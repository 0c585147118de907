"""Release decisions: pass/fail per sample and per batch, each with its reasons.

Outcomes of a sample (injections of role ``sample`` grouped by ``batch`` and ``sample_id``;
replicate injections are averaged, arithmetic mean of the usable ones):

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
``not reportable`` > ``fail`` > ``no result`` > ``no spec`` > ``pass``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from gpctools import columns as C
from gpctools.qc import _table as T
from gpctools.qc.specs import SPEC_QUANTITIES, SpecSheet
from gpctools.qc.suitability import SuitabilityResult
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


@dataclass(frozen=True)
class SampleDecision:
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

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
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


@dataclass(frozen=True)
class BatchDecision:
    """The decision on one batch (production lot).

    Attributes
    ----------
    batch : str
    products : tuple of str
    samples : tuple of str
    decision : str
        One of :data:`SEVERITY`.
    reasons : tuple of str
    """

    batch: str
    products: tuple[str, ...]
    samples: tuple[str, ...]
    decision: str
    reasons: tuple[str, ...]

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            C.BATCH: self.batch,
            "products": list(self.products),
            "samples": list(self.samples),
            C.DECISION: self.decision,
            C.REASONS: list(self.reasons),
        }


@dataclass(frozen=True)
class Decisions:
    """Sample and batch decisions of one QC run."""

    samples: tuple[SampleDecision, ...]
    batches: tuple[BatchDecision, ...]
    warnings: tuple[str, ...] = field(default=())

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
            row[C.REASONS] = "; ".join(s.reasons)
            row[C.NOTES] = "; ".join(s.notes)
            rows.append(row)
        cols = [C.BATCH, C.SAMPLE_ID, C.PRODUCT, C.SEQUENCE, C.INJECTIONS, C.USABLE_INJECTIONS,
                *value_cols, C.DECISION, C.REASONS, C.NOTES]
        return pd.DataFrame(rows, columns=cols)

    def batches_frame(self) -> pd.DataFrame:
        """One row per batch: products, samples, decision, reasons."""
        rows = [
            {
                C.BATCH: b.batch,
                "products": ", ".join(b.products),
                "samples": ", ".join(b.samples),
                C.DECISION: b.decision,
                C.REASONS: "; ".join(b.reasons),
            }
            for b in self.batches
        ]
        return pd.DataFrame(rows, columns=[C.BATCH, "products", "samples", C.DECISION, C.REASONS])

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            "all_pass": self.all_pass,
            "counts": self.counts(),
            "batches": [b.summary() for b in self.batches],
            "samples": [s.summary() for s in self.samples],
            "warnings": list(self.warnings),
        }


def decide(
    table: pd.DataFrame,
    specs: SpecSheet,
    suitability: Sequence[SuitabilityResult] = (),
) -> Decisions:
    """Pass/fail decisions per sample and per batch.

    Parameters
    ----------
    table : pandas.DataFrame
        The batch results table (not modified). Rows of role ``sample`` (or with no role)
        are decided; check standards and blanks are used by system suitability only.
    specs : SpecSheet
        Limits per product.
    suitability : sequence of SuitabilityResult
        Per-sequence suitability; samples run in a failed sequence are ``not reportable``.
        A sequence that is missing here is taken as not evaluated (not a failure).

    Returns
    -------
    Decisions
    """
    T.require_columns(table, (C.SAMPLE_ID,), "the release decisions")
    suit = {s.sequence: s for s in suitability}
    role = T.roles(table)
    ok = T.ok_mask(table)
    sid = T.labels(table, C.SAMPLE_ID)
    batch = T.labels(table, C.BATCH, NO_BATCH)
    product = T.labels(table, C.PRODUCT)
    seq = T.labels(table, C.SEQUENCE, T.ALL_SEQUENCES)
    warn_col = T.labels(table, C.WARNINGS)
    value_cols = [c for c in SPEC_QUANTITIES.values() if c in table.columns]
    numbers = {c: T.numbers(table, c) for c in value_cols}

    groups: dict[tuple[str, str], list[int]] = {}
    for i in np.flatnonzero(role == T.ROLE_SAMPLE):
        groups.setdefault((batch[i], sid[i]), []).append(int(i))

    sample_decisions: list[SampleDecision] = []
    for (b, s), rows in groups.items():
        usable = [i for i in rows if ok[i]]
        sequences = tuple(dict.fromkeys(seq[i] for i in rows))
        prods = list(dict.fromkeys(p for p in (product[i] for i in rows) if p))
        values = {}
        for c in value_cols:
            v = numbers[c][usable]
            v = v[np.isfinite(v)]
            values[c] = float(np.mean(v)) if v.size else math.nan
        notes: list[str] = []
        failed = [i for i in rows if not ok[i]]
        if failed and usable:
            errs = "; ".join(filter(None, (T.error_text(table, i) for i in failed)))
            notes.append(f"{len(failed)} of {len(rows)} injections unusable ({errs or 'no error text'})")
        for i in usable:
            if warn_col[i]:
                notes.append(f"warnings: {warn_col[i]}")
        label = s or "(no sample_id)"
        prod = prods[0] if len(prods) == 1 else ""
        bad_seq = [suit[q] for q in sequences if q in suit and not suit[q].passed]
        if bad_seq:
            reasons = []
            for r in bad_seq:
                reasons.extend(f"sequence {r.sequence} failed system suitability: {x}" for x in r.reasons())
            decision = NOT_REPORTABLE
        elif not usable:
            errs = [T.error_text(table, i) for i in rows]
            reasons = [f"no usable injection: {e}" if e else "no usable injection" for e in errs]
            reasons = list(dict.fromkeys(reasons))
            decision = NO_RESULT
        elif len(prods) > 1:
            decision = NO_SPEC
            reasons = [f"its injections give different product codes ({', '.join(prods)}); correct the batch sheet"]
        elif not prod:
            decision = NO_SPEC
            reasons = ["no product code; fill the 'product' column of the batch sheet"]
        elif specs.get(prod) is None:
            decision = NO_SPEC
            reasons = [f"product {prod!r} has no row in the spec sheet"]
        else:
            spec = specs.get(prod)
            assert spec is not None
            if not spec.limits:
                decision, reasons = NO_SPEC, [f"product {prod!r} has no limits in the spec sheet"]
            else:
                outcomes = []
                for lim in spec.limits:
                    value = values.get(lim.column, math.nan)
                    if lim.column not in table.columns:
                        outcomes.append((None, f"{lim.quantity}: the results have no column {lim.column!r}"))
                        continue
                    outcomes.append(lim.check(value))
                fails = [r for p, r in outcomes if p is False]
                missing = [r for p, r in outcomes if p is None]
                if fails:
                    decision, reasons = FAIL, fails
                elif missing:
                    decision, reasons = NO_RESULT, missing
                else:
                    decision, reasons = PASS, [r for _, r in outcomes]
        sample_decisions.append(SampleDecision(
            sample_id=label, product=prod if prod else ", ".join(prods), batch=b,
            sequences=sequences, injections=len(rows), usable=len(usable), values=values,
            decision=decision, reasons=tuple(reasons), notes=tuple(dict.fromkeys(notes)),
        ))

    batch_decisions: list[BatchDecision] = []
    by_batch: dict[str, list[SampleDecision]] = {}
    for d in sample_decisions:
        by_batch.setdefault(d.batch, []).append(d)
    for b, ds in by_batch.items():
        worst = min(SEVERITY.index(d.decision) for d in ds)
        decision = SEVERITY[worst]
        if decision == PASS:
            reasons = [f"all {len(ds)} sample(s) within limits"]
        elif decision == NOT_REPORTABLE:
            reasons = list(dict.fromkeys(r for d in ds if d.decision == NOT_REPORTABLE for r in d.reasons))
        else:
            reasons = [f"sample {d.sample_id} ({d.decision}): {r}"
                       for d in ds if d.decision != PASS for r in d.reasons]
        prods = tuple(dict.fromkeys(d.product for d in ds if d.product))
        batch_decisions.append(BatchDecision(b, prods, tuple(d.sample_id for d in ds), decision, tuple(reasons)))
    return Decisions(tuple(sample_decisions), tuple(batch_decisions))
