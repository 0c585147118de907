"""Cost of the batch review page per injection (not a test).

Usage::

    python bench/bench_review.py --repeat 100 --n 1000

Processes one demo export (6,000 slices) once, then times, best of five runs of
``--repeat`` calls each:

* ``fragment``: :func:`gpctools.report.review.injection_fragment` (downsampling, two
  SVG plots, the overlay curve and the numbers as text) alone;
* ``sink``: a :class:`gpctools.report.review.ReviewSink` call, i.e. the fragment plus
  its JSON file written atomically (what a batch worker pays per injection drawn);
* ``process``: :func:`gpctools.batch.process_injection` of the same export, for scale;

and the time to assemble ``review.html`` for a batch of ``--n`` injections of which the
first 100 are drawn (once per batch: reading the fragments, the calibration plot, the
overlays, the list of the rest, the template). Prints
milliseconds per injection and the ratio sink / process.
"""

from __future__ import annotations

import argparse
import shutil
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent.parent


def best(fn, repeat: int, runs: int = 5) -> float:
    times = []
    for _ in range(runs):
        t0 = time.perf_counter()
        for _ in range(repeat):
            fn()
        times.append((time.perf_counter() - t0) / repeat)
    return min(times)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=100)
    ap.add_argument("--n", type=int, default=1000, help="injections of the batch whose page is assembled")
    args = ap.parse_args()

    from gpctools.batch import BatchEntry, process_injection, run_batch
    from gpctools.method import load_method
    from gpctools.report.review import ReviewSink, injection_fragment, write_review

    samples = HERE / "sample_runs"
    method = load_method(samples / "method.toml")
    export = samples / "exports" / "LC110-A1.csv"
    res = process_injection(export, method)
    entry = BatchEntry(2, "LC110-A", "exports/LC110-A1.csv", export, "sample", None, {"product": "LC-110"})
    tmp = Path(tempfile.mkdtemp())
    try:
        sink = ReviewSink(tmp / ".review-parts")
        t_frag = best(lambda: injection_fragment(entry, res), args.repeat)
        t_sink = best(lambda: sink(entry, res), args.repeat)
        t_proc = best(lambda: process_injection(export, method), max(5, args.repeat // 10))
        print(f"slices per export: {res.corrected.volume.size}")
        print(f"fragment (downsample + 2 SVG plots + numbers): {1e3 * t_frag:.2f} ms per injection")
        print(f"sink (fragment + JSON file written):            {1e3 * t_sink:.2f} ms per injection")
        print(f"process_injection of the same export:          {1e3 * t_proc:.2f} ms per injection")
        print(f"sink / process: {t_sink / t_proc:.3f}")
        # assembling the page: a batch of --n injections (the demo batch repeated), the
        # first 100 drawn by the sink as in `gpctools batch`, the rest listed
        import warnings
        from dataclasses import replace

        import pandas as pd

        from gpctools.report.review import DEFAULT_LIMIT

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            batch = run_batch(samples / "batch.csv", method)
        reps = max(1, -(-args.n // len(batch.entries)))
        entries, kept = [], []
        for k in range(reps):
            for e, r in zip(batch.entries, batch.injections):
                entries.append(replace(e, row=e.row + 1000 * k))
                kept.append(r)
        entries, kept = entries[:args.n], kept[:args.n]
        out = tmp / "out"
        sink = ReviewSink(out / ".review-parts")
        for e, r in zip(entries[:DEFAULT_LIMIT], kept[:DEFAULT_LIMIT]):
            sink(e, r)
        batch.entries = entries
        batch.table = pd.concat([batch.table] * reps, ignore_index=True).iloc[:args.n]
        batch.injections = [None] * len(entries)
        t0 = time.perf_counter()
        page = write_review(batch, out)
        t_page = time.perf_counter() - t0
        print(f"page of {len(entries)} injections ({min(len(entries), DEFAULT_LIMIT)} drawn): "
              f"{t_page:.3f} s to assemble, {page.stat().st_size / 1e6:.2f} MB")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
