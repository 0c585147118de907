"""Batch throughput benchmark (not a test): injections per second, peak memory, and the
ratio of total batch time to the time pandas alone needs to read the same files.

Usage::

    python bench/bench_batch.py --n 1000 --workers 1 2
    python bench/bench_batch.py --n 100 300 1000            # peak RSS against N

Each synthetic export has 6,000 slices (comma CSV with a few metadata lines, as
instruments write them), simulated by gpctools.simulate. The "pandas alone" reference
is ``pandas.read_csv(path, skiprows=<metadata lines>)`` per file, told the layout in
advance, i.e. the cheapest possible read. Goal (issue 2): ratio <= 1.5 at N = 1,000 on
a 2-core machine and peak memory that does not grow with N.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np


def make_files(folder: Path, n: int) -> Path:
    from gpctools import simulate
    from gpctools.demo import _METHOD_TOML, write_chromatogram

    folder.mkdir(parents=True, exist_ok=True)
    cal = simulate.default_calibration()
    V = np.linspace(8.0, 26.0, 6000)
    rows = ["sample_id,file"]
    rng = np.random.default_rng(0)
    for i in range(n):
        f = folder / f"inj{i:05d}.csv"
        if not f.exists():
            model = simulate.schulz_zimm(float(rng.uniform(3e4, 2e5)), float(rng.uniform(1.2, 3.0)))
            _, h = simulate.chromatogram(model, cal, volume=V, height=100, baseline_offset=2.0,
                                         noise=0.03, seed=i, extra_peaks=((22.6, 0.08, -20.0),))
            write_chromatogram(f, V, h, metadata={"Sample": f"inj{i}", "Operator": "bench"})
        rows.append(f"inj{i:05d},{f.name}")
    (folder / "batch.csv").write_text("\n".join(rows) + "\n")
    names, Mp, vols = zip(*simulate.DEFAULT_STANDARDS)
    (folder / "standards.csv").write_text(
        "name,Mp [g/mol],volume [mL]\n" + "".join(f"{a},{b},{c}\n" for a, b, c in simulate.DEFAULT_STANDARDS))
    (folder / "method.toml").write_text(_METHOD_TOML)
    return folder / "batch.csv"


def time_pandas(folder: Path, n: int) -> float:
    import pandas as pd

    t0 = time.perf_counter()
    for i in range(n):
        pd.read_csv(folder / f"inj{i:05d}.csv", skiprows=2)
    return time.perf_counter() - t0


def time_batch(folder: Path, workers: int, write: bool) -> tuple[float, int]:
    from gpctools.batch import run_batch
    from gpctools.method import load_method
    from gpctools.report import DistributionWriter, write_batch

    out = Path(tempfile.mkdtemp(prefix="gpcbench-out-"))
    t0 = time.perf_counter()
    m = load_method(folder / "method.toml")
    res = run_batch(folder / "batch.csv", m, workers=workers, keep_distributions=False,
                    on_result=DistributionWriter(out / "distributions") if write else None)
    if write:
        write_batch(res, out, distributions=False)
    dt = time.perf_counter() - t0
    return dt, res.failed


def peak_rss_mb() -> float:
    """Peak resident memory of this process [MB] (Linux reports ru_maxrss in KiB)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def peak_rss_children_mb() -> float:
    """Largest peak resident memory of any finished worker process [MB]."""
    return resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024.0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--n", type=int, nargs="+", default=[1000])
    ap.add_argument("--workers", type=int, nargs="+", default=[1, 2])
    ap.add_argument("--folder", type=Path, default=Path(tempfile.gettempdir()) / "gpctools-bench")
    ap.add_argument("--repeat", type=int, default=3, help="take the best of this many runs")
    ap.add_argument("--child", nargs=3, metavar=("N", "WORKERS", "WRITE"), help=argparse.SUPPRESS)
    args = ap.parse_args()

    if args.child:
        n, workers, write = int(args.child[0]), int(args.child[1]), args.child[2] == "1"
        folder = args.folder / f"n{n}"
        dt, failed = time_batch(folder, workers, write)
        print(json.dumps({"seconds": dt, "failed": failed, "peak_rss_mb": peak_rss_mb(),
                          "peak_rss_workers_mb": peak_rss_children_mb()}))
        return

    nmax = max(args.n)
    src = args.folder / "all"
    make_files(src, nmax)
    results = []
    for n in args.n:
        folder = args.folder / f"n{n}"
        folder.mkdir(parents=True, exist_ok=True)
        for i in range(n):
            link = folder / f"inj{i:05d}.csv"
            if not link.exists():
                os.symlink(src / f"inj{i:05d}.csv", link)
        lines = (src / "batch.csv").read_text().splitlines()[: n + 1]
        (folder / "batch.csv").write_text("\n".join(lines) + "\n")
        for f in ("standards.csv", "method.toml"):
            (folder / f).write_text((src / f).read_text())
        time_pandas(folder, min(n, 50))  # warm the page cache
        # best of three: the machine is shared, the minimum is the least disturbed figure
        t_pd = min(time_pandas(folder, n) for _ in range(args.repeat))
        for workers in args.workers:
            for write in (False, True):
                runs = []
                for _ in range(args.repeat):
                    out = subprocess.run(
                        [sys.executable, __file__, "--folder", str(args.folder), "--child", str(n),
                         str(workers), "1" if write else "0"], capture_output=True, text=True, check=True)
                    runs.append(json.loads(out.stdout.strip().splitlines()[-1]))
                r = min(runs, key=lambda x: x["seconds"])
                row = {
                    "N": n, "workers": workers, "write distributions": write,
                    "batch [s]": round(r["seconds"], 2), "pandas read [s]": round(t_pd, 2),
                    "ratio [-]": round(r["seconds"] / t_pd, 2),
                    "injections/s": round(n / r["seconds"], 1),
                    "peak RSS [MB]": round(r["peak_rss_mb"], 1),
                    "peak RSS worker [MB]": round(r["peak_rss_workers_mb"], 1), "failed": r["failed"],
                }
                results.append(row)
                print(json.dumps(row), flush=True)


if __name__ == "__main__":
    main()
