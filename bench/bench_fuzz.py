"""Long fuzz run of the export reader and the injection pipeline (not a test).

Usage::

    python bench/bench_fuzz.py --n 10000 --seed 20240 --budget 10

Inputs: the hostile corpus of ``tests/hostile.py`` (with the multi-megabyte cases: a
50 MB single line, a 2 MB cell) and then mutated exports up to ``--n`` inputs in all.
Each mutated input starts from a clean export (the demo export LC110-A1 thinned to 600
slices, in comma, semicolon/decimal-comma, tab, tab/decimal-comma or blank dialect, or
as an .xlsx workbook) and receives one to three seeded mutations: byte flips and byte
sets, truncation, duplicated/deleted/swapped lines, huge numbers, long lines and cells,
decimal marks changing, NUL bytes, other encodings, extra fields, text lines, empty
cells, flat signals, and data-preserving changes (line ends, blank lines, footers,
reversed order, re-encoding); workbooks receive damaged zip structures and XML, entity
declarations, out-of-range references, huge integers, other compression methods, wrong
checksums, missing parts and relationships.

Every input is run as ``gpctools inspect`` and ``gpctools batch`` would run it: read with
:func:`gpctools.io.read_chromatogram`, then :func:`gpctools.batch.process_injection`
with the demo method (``sample_runs/method.toml``). Outcomes:

- accepted: read and processed; "same" when the averages equal the clean control's
  exactly, "changed" otherwise (expected when a mutation changed a digit);
- refused: a :class:`gpctools.errors.GpcError`; "plain" when its message passes the
  check of ``tests/hostile.refusal_problem`` (names the file, says what to change, no
  bare library text), else "bare";
- foreign: any other exception (a bug);
- over budget: took longer than ``--budget`` seconds (a hang is stopped by an alarm at
  three times the budget and counted here).

Goal (issue 9): zero foreign, zero bare, zero over budget; every accepted input of a
data-preserving mutation (applied alone) read, and "same". Prints a JSON summary with the counts, the slowest
inputs and examples of every outcome other than accepted/refused-plain.
"""

from __future__ import annotations

import argparse
import json
import random
import signal
import sys
import tempfile
import time
import warnings
from collections import Counter
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(REPO / "tests"))

from hostile import (  # noqa: E402
    DATA_PRESERVING,
    SAMPLE_METHOD,
    TEXT_MUTATIONS,
    WORKBOOK_MUTATIONS,
    clean_text,
    clean_workbook,
    hostile_corpus,
    refusal_problem,
)


class _Alarm(Exception):
    pass


def _on_alarm(signum, frame):  # noqa: ANN001
    raise _Alarm()


def _inputs(n: int, seed: int):
    """(name, bytes, mutation kinds) for the corpus, then seeded mutations up to n."""
    for case in hostile_corpus(big=True):
        if not case.options:
            yield case.name, case.data, ("corpus",)
    bases = {f"{d}.csv": clean_text(d).encode() for d in ("comma", "semicolon", "tab", "tabcomma", "blank")}
    bases["export.xlsx"] = clean_workbook()
    rng = random.Random(seed)
    text_kinds = sorted(TEXT_MUTATIONS)
    wb_kinds = sorted(WORKBOOK_MUTATIONS)
    names = sorted(bases)
    produced = sum(1 for c in hostile_corpus(big=True) if not c.options)
    k = 0
    while produced < n:
        name = names[k % len(names)]
        k += 1
        data = bases[name]
        pool = wb_kinds + ["wb_flip"] if name.endswith(".xlsx") else text_kinds
        kinds = tuple(rng.choice(pool) for _ in range(rng.choice((1, 1, 2, 3))))
        try:
            for kind in kinds:
                fn = WORKBOOK_MUTATIONS.get(kind) or TEXT_MUTATIONS[kind]
                data = fn(rng, data)
        except Exception:
            continue  # a workbook mutation found no archive left to operate on
        produced += 1
        yield f"{produced:05d}-{name}", data, kinds


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--n", type=int, default=10_000, help="inputs in all (corpus included)")
    ap.add_argument("--seed", type=int, default=20240)
    ap.add_argument("--budget", type=float, default=10.0, help="seconds per input")
    args = ap.parse_args()

    from gpctools.batch import process_injection
    from gpctools.errors import GpcError
    from gpctools.io import read_chromatogram
    from gpctools.method import load_method

    warnings.simplefilter("ignore")
    method = load_method(SAMPLE_METHOD)
    signal.signal(signal.SIGALRM, _on_alarm)
    counts: Counter[str] = Counter()
    by_kind: dict[str, Counter[str]] = {}
    examples: dict[str, list[str]] = {}
    slowest: list[tuple[float, str, str]] = []
    control = None
    start = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        ref = Path(tmp) / "control.csv"
        ref.write_bytes(clean_text("comma").encode())
        d = process_injection(ref, method).distribution
        control = (d.Mn, d.Mw, d.Mz, d.Mz1)
        for name, data, kinds in _inputs(args.n, args.seed):
            suffix = Path(name).suffix or ".csv"
            p = Path(tmp) / f"input{suffix}"
            p.write_bytes(data)
            t0 = time.perf_counter()
            signal.setitimer(signal.ITIMER_REAL, 3 * args.budget)
            try:
                read_chromatogram(p, **method.import_options.as_kwargs())
                r = process_injection(p, method).distribution
                same = (r.Mn, r.Mw, r.Mz, r.Mz1) == control
                outcome = "accepted, same" if same else "accepted, changed"
                if not same and len(kinds) == 1 and kinds[0] in DATA_PRESERVING:
                    outcome = "accepted, changed by a data-preserving mutation"
                detail = ""
            except GpcError as exc:
                problem = refusal_problem(exc, p)
                outcome = "refused, plain" if problem is None else "refused, bare"
                detail = f"{problem}: {exc}" if problem else str(exc)
                if len(kinds) == 1 and kinds[0] in DATA_PRESERVING:
                    outcome = "refused after a data-preserving mutation"
            except _Alarm:
                outcome = "over budget"
                detail = "stopped by the alarm"
            except Exception as exc:  # noqa: BLE001 - counting them is the point
                outcome = "foreign"
                detail = f"{type(exc).__name__}: {exc}"
            finally:
                signal.setitimer(signal.ITIMER_REAL, 0)
            dt = time.perf_counter() - t0
            if dt > args.budget and outcome != "over budget":
                outcome = "over budget"
                detail = f"{dt:.1f} s"
            counts[outcome] += 1
            for kind in kinds:
                by_kind.setdefault(kind, Counter())[outcome] += 1
            if outcome not in ("accepted, same", "accepted, changed", "refused, plain"):
                examples.setdefault(outcome, [])
                if len(examples[outcome]) < 5:
                    examples[outcome].append(f"{name} {kinds}: {detail[:300]}")
            slowest.append((dt, name, outcome))
            slowest = sorted(slowest, reverse=True)[:5]
    total = sum(counts.values())
    summary = {
        "inputs": total,
        "seed": args.seed,
        "budget [s]": args.budget,
        "outcomes": dict(sorted(counts.items())),
        "foreign": counts["foreign"],
        "refused with a bare library message": counts["refused, bare"],
        "over budget": counts["over budget"],
        "slowest [s]": [[round(t, 3), n, o] for t, n, o in slowest],
        "wall time [s]": round(time.perf_counter() - start, 1),
        "by mutation": {k: dict(v) for k, v in sorted(by_kind.items())},
        "examples": examples,
    }
    print(json.dumps(summary, indent=1))
    bad = counts["foreign"] + counts["refused, bare"] + counts["over budget"]
    bad += counts["accepted, changed by a data-preserving mutation"]
    bad += counts["refused after a data-preserving mutation"]
    return 1 if bad else 0


if __name__ == "__main__":
    raise SystemExit(main())
