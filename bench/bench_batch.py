"""Throughput benchmark (not a test): the batch against the pandas floor, memory against N,
start-up, the 100-run series and the demo, in one invocation.

Usage::

    python bench/bench_batch.py                       # everything, N = 100, 300, 1000
    python bench/bench_batch.py --n 1000 --skip-demo  # the batch ratio only (and start-up)
    python bench/bench_batch.py --xlsx                # results workbook: writers compared
    python bench/bench_batch.py --per-injection       # one process: reading and measurement [ms]

What is measured, each in a fresh process started from here (so interpreter start and
imports count on both sides):

* **batch**: ``gpctools batch batch.csv -m method.toml -o OUT`` with its default options
  (every core, long-form ``distributions.csv``, ``results.csv`` and ``results.xlsx``);
* **pandas floor**: ``python -c "import pandas"`` then ``pandas.read_csv(path,
  skiprows=2)`` for every export of the sheet, told the layout in advance (the cheapest
  possible read);
* the two are run interleaved (batch, floor, batch, floor, ...) and the best of
  ``--repeat`` (3) of each is kept: the machine may be shared, and the minimum is the
  least disturbed figure. The ratio is batch / floor at each N.
* **CPU time**: user + system time of the batch and all its workers, and of the floor
  (``getrusage(RUSAGE_CHILDREN)`` of a wrapper process), best of the runs: less
  disturbed by other load on a shared machine than wall time;
* **peak memory**: the largest sum of the resident set sizes of the batch process and
  all its worker processes, sampled every 20 ms from /proc (Linux), and the largest
  single process (``getrusage(RUSAGE_CHILDREN).ru_maxrss`` of a wrapper process);
* **start-up**: ``gpctools --help`` against ``python -c "import typer"``, best of 5;
* **series**: ``python bench/bench_transfer.py timing`` (100-run series, best of three);
* **per injection** (``--per-injection`` alone): in this one process, the CPU time of
  reading each of the first 200 exports (``read_chromatogram``, against pandas'
  ``read_csv`` alone) and of the measurement on the trace read
  (``gpctools.batch.process_trace``: flow marker, baseline, limits, distribution,
  uncertainty, peaks), per injection, best of 7 passes;
* **demo**: ``gpctools demo`` in an empty folder, best of ``--demo-repeat`` (3), and the
  time of each of its figures (``png_bytes``, timed in whichever process draws it;
  ``--figures`` alone).

Each synthetic export has 6,000 slices (comma CSV with two metadata lines, as
instruments write them), simulated by gpctools.simulate, written once to ``--folder``.
Goals (issue 14): ratio <= 1.3 at N = 1,000; peak memory within 10 % from N = 100 to
N = 1,000; start-up ratio <= 1.3; demo <= 8 s on a 2-core machine.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent

_FLOOR = """
import sys, time
import pandas as pd
from pathlib import Path
sheet = Path(sys.argv[1])
lines = sheet.read_text().splitlines()[1:]
for line in lines:
    pd.read_csv(sheet.parent / line.split(",")[1], skiprows=2)
"""

# Runs a command and prints the peak RSS of its largest (waited-for) process [KiB], the
# CPU time (user + system) of the command and all its waited-for descendants [s], and
# the exit code.
_WRAP = """
import resource, subprocess, sys
rc = subprocess.run(sys.argv[1:], stdout=subprocess.DEVNULL).returncode
u = resource.getrusage(resource.RUSAGE_CHILDREN)
print(u.ru_maxrss, u.ru_utime + u.ru_stime, rc)
"""


def make_files(folder: Path, n: int) -> Path:
    """Write ``n`` synthetic exports, the batch sheet, standards and method (once)."""
    from gpctools import simulate
    from gpctools.demo import _METHOD_TOML, write_chromatogram

    folder.mkdir(parents=True, exist_ok=True)
    cal = simulate.default_calibration()
    V = np.linspace(8.0, 26.0, 6000)
    rows = ["sample_id,file"]
    rng = np.random.default_rng(0)
    for i in range(n):
        f = folder / f"inj{i:05d}.csv"
        Mn, b = float(rng.uniform(3e4, 2e5)), float(rng.uniform(1.2, 3.0))
        if not f.exists():
            model = simulate.schulz_zimm(Mn, b)
            _, h = simulate.chromatogram(model, cal, volume=V, height=100, baseline_offset=2.0,
                                         noise=0.03, seed=i, extra_peaks=((22.6, 0.08, -20.0),))
            write_chromatogram(f, V, h, metadata={"Sample": f"inj{i}", "Operator": "bench"})
        rows.append(f"inj{i:05d},{f.name}")
    (folder / "batch.csv").write_text("\n".join(rows) + "\n")
    (folder / "standards.csv").write_text(
        "name,Mp [g/mol],volume [mL]\n" + "".join(f"{a},{b},{c}\n" for a, b, c in simulate.DEFAULT_STANDARDS))
    (folder / "method.toml").write_text(_METHOD_TOML)
    return folder / "batch.csv"


def subset(src: Path, folder: Path, n: int) -> Path:
    """A folder with the first ``n`` exports of ``src`` (symbolic links) and its sheet."""
    folder.mkdir(parents=True, exist_ok=True)
    for i in range(n):
        link = folder / f"inj{i:05d}.csv"
        if not link.exists():
            os.symlink(src / f"inj{i:05d}.csv", link)
    lines = (src / "batch.csv").read_text().splitlines()[: n + 1]
    (folder / "batch.csv").write_text("\n".join(lines) + "\n")
    for f in ("standards.csv", "method.toml"):
        (folder / f).write_text((src / f).read_text())
    return folder / "batch.csv"


def _tree_rss_kib(pid: int) -> int:
    """Resident set size of ``pid`` and all its descendants [KiB] (Linux /proc)."""
    total, todo = 0, [pid]
    while todo:
        p = todo.pop()
        try:
            with open(f"/proc/{p}/status") as fh:
                for line in fh:
                    if line.startswith("VmRSS:"):
                        total += int(line.split()[1])
                        break
            for task in os.listdir(f"/proc/{p}/task"):
                with open(f"/proc/{p}/task/{task}/children") as fh:
                    todo.extend(int(c) for c in fh.read().split())
        except (OSError, ValueError):
            continue
    return total


def run_measured(cmd: list[str], cwd: Path | None = None) -> dict[str, float]:
    """Wall time [s], peak summed RSS of the process tree [MB] and largest process [MB]."""
    wrapped = [sys.executable, "-c", _WRAP, *cmd]
    peak = [0]
    t0 = time.perf_counter()
    proc = subprocess.Popen(wrapped, stdout=subprocess.PIPE, text=True, cwd=cwd)
    done = threading.Event()

    def sample() -> None:
        while not done.is_set():
            peak[0] = max(peak[0], _tree_rss_kib(proc.pid))
            done.wait(0.02)

    th = threading.Thread(target=sample, daemon=True)
    th.start()
    out, _ = proc.communicate()
    wall = time.perf_counter() - t0
    done.set()
    th.join()
    maxrss, cpu, rc = out.split()
    if int(rc) not in (0, 1):  # 1: some injections failed (reported, not a crash)
        raise SystemExit(f"command failed ({rc}): {' '.join(cmd)}")
    # the wrapper (a bare interpreter) is part of the sampled tree: take it out
    return {"wall": wall, "cpu": float(cpu), "tree_mb": max(0, peak[0] - _BARE_KIB) / 1024.0,
            "largest_mb": int(maxrss) / 1024.0}


_BARE_KIB = 0


def _bare_interpreter_kib() -> int:
    """RSS of an idle interpreter running the wrapper (subtracted from the tree sum)."""
    proc = subprocess.Popen([sys.executable, "-c", "import resource, subprocess, sys, time; time.sleep(0.3)"])
    time.sleep(0.2)
    kib = _tree_rss_kib(proc.pid)
    proc.wait()
    return kib


def gpctools_exe() -> str:
    exe = Path(sys.executable).parent / "gpctools"
    return str(exe) if exe.exists() else (shutil.which("gpctools") or "gpctools")


def bench_batch(src: Path, root: Path, ns: list[int], repeat: int) -> list[dict]:
    rows = []
    for n in ns:
        sheet = subset(src, root / f"n{n}", n)
        batch_runs, floor_runs = [], []
        # warm the page cache so that neither side pays the first read
        subprocess.run([sys.executable, "-c", _FLOOR, str(sheet)], check=True)
        for _ in range(repeat):
            out = Path(tempfile.mkdtemp(prefix="gpcbench-out-"))
            batch_runs.append(run_measured([gpctools_exe(), "batch", str(sheet), "-m",
                                            str(sheet.parent / "method.toml"), "-o", str(out)]))
            shutil.rmtree(out, ignore_errors=True)
            floor_runs.append(run_measured([sys.executable, "-c", _FLOOR, str(sheet)]))
        b = min(r["wall"] for r in batch_runs)
        f = min(r["wall"] for r in floor_runs)
        row = {
            "N": n,
            "batch [s]": round(b, 2),
            "pandas floor [s]": round(f, 2),
            "ratio [-]": round(b / f, 2),
            "injections/s": round(n / b, 1),
            # CPU time (all processes) is less disturbed by other load than wall time
            "batch CPU [s]": round(min(r["cpu"] for r in batch_runs), 2),
            "floor CPU [s]": round(min(r["cpu"] for r in floor_runs), 2),
            "CPU ratio [-]": round(min(r["cpu"] for r in batch_runs) / min(r["cpu"] for r in floor_runs), 2),
            "CPU per injection [ms]": round(1e3 * min(r["cpu"] for r in batch_runs) / n, 2),
            "peak RSS main+workers [MB]": round(max(r["tree_mb"] for r in batch_runs), 1),
            "peak RSS largest process [MB]": round(max(r["largest_mb"] for r in batch_runs), 1),
            "floor peak RSS [MB]": round(max(r["tree_mb"] for r in floor_runs), 1),
        }
        rows.append(row)
        print(json.dumps(row), flush=True)
    if len(rows) > 1:
        lo, hi = rows[0], rows[-1]
        growth = 100.0 * (hi["peak RSS main+workers [MB]"] / lo["peak RSS main+workers [MB]"] - 1.0)
        print(json.dumps({f"memory growth N={lo['N']}->{hi['N']} [%]": round(growth, 1)}), flush=True)
    return rows


def bench_startup(repeat: int = 5) -> dict:
    helps, typers = [], []
    for _ in range(repeat):
        t0 = time.perf_counter()
        subprocess.run([gpctools_exe(), "--help"], stdout=subprocess.DEVNULL, check=True)
        helps.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-c", "import typer"], check=True)
        typers.append(time.perf_counter() - t0)
    row = {"gpctools --help [s]": round(min(helps), 3), "import typer [s]": round(min(typers), 3),
           "start-up ratio [-]": round(min(helps) / min(typers), 2)}
    print(json.dumps(row), flush=True)
    return row


def bench_series() -> None:
    out = subprocess.run([sys.executable, str(HERE / "bench_transfer.py"), "timing"],
                         capture_output=True, text=True, check=True)
    print(json.dumps({"series": out.stdout.strip()}), flush=True)


def bench_demo(repeat: int) -> dict:
    walls = []
    for _ in range(repeat):
        d = Path(tempfile.mkdtemp(prefix="gpcbench-demo-"))
        t0 = time.perf_counter()
        subprocess.run([gpctools_exe(), "demo"], cwd=d, stdout=subprocess.DEVNULL, check=True)
        walls.append(time.perf_counter() - t0)
        shutil.rmtree(d, ignore_errors=True)
    row = {"gpctools demo [s]": round(min(walls), 2), "runs [s]": [round(w, 2) for w in walls]}
    print(json.dumps(row), flush=True)
    return row


# Runs the demo with png_bytes timed: every call appends its seconds to a file (the demo
# draws in two processes, so the times go through the file system).
_FIGURES = """
import sys, time
import gpctools.report.plots as P
log = sys.argv[1]
inner = P.png_bytes
def timed(fig):
    t0 = time.perf_counter()
    out = inner(fig)
    with open(log, "a") as fh:
        fh.write(f"{time.perf_counter() - t0}\\n")
    return out
P.png_bytes = timed
from gpctools.demo import run_demo
run_demo(None, "out", echo=lambda line: None)
"""


def bench_figures() -> dict:
    """Seconds per figure of the demo (PNG rendering, each figure timed where it is drawn)."""
    d = Path(tempfile.mkdtemp(prefix="gpcbench-fig-"))
    log = d / "times.txt"
    subprocess.run([sys.executable, "-c", _FIGURES, str(log)], cwd=d, stdout=subprocess.DEVNULL,
                   stderr=subprocess.DEVNULL, check=True)
    t = np.sort(np.array([float(x) for x in log.read_text().split()]))
    row = {"figures": int(t.size), "per figure median [s]": round(float(np.median(t)), 3),
           "per figure 90th percentile [s]": round(float(np.quantile(t, 0.9)), 3),
           "per figure max [s]": round(float(t[-1]), 3), "all figures [s]": round(float(t.sum()), 2)}
    print(json.dumps(row), flush=True)
    shutil.rmtree(d, ignore_errors=True)
    return row


def bench_per_injection(src: Path, n: int = 200, repeat: int = 7) -> dict:
    """CPU time per injection in this process [ms]: reading, pandas' parser alone, measurement."""
    import warnings

    import pandas as pd

    from gpctools.batch import process_trace, read_batch_sheet
    from gpctools.io import read_chromatogram
    from gpctools.method import load_method

    entries = read_batch_sheet(src / "batch.csv")[:n]
    method = load_method(src / "method.toml")
    opts = method.import_options.as_kwargs()
    traces = []
    for e in entries:
        c = read_chromatogram(e.path, **opts)
        traces.append((c.to_volume(method.flow_rate), c.signal))

    def best(fn) -> float:
        times = []
        for _ in range(repeat):
            t0 = time.process_time()
            fn()
            times.append(time.process_time() - t0)
        return 1e3 * min(times) / len(entries)

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        row = {
            "injections": len(entries),
            "read_chromatogram [ms]": round(best(lambda: [read_chromatogram(e.path, **opts) for e in entries]), 3),
            "pandas read_csv alone [ms]": round(best(lambda: [pd.read_csv(e.path, skiprows=2) for e in entries]), 3),
            "process_trace [ms]": round(best(lambda: [process_trace(V, h, method) for V, h in traces]), 3),
        }
    print(json.dumps(row), flush=True)
    return row


def bench_xlsx(table_csv: Path, repeat: int = 3) -> None:
    """Write a results table to XLSX with openpyxl (write-only) and with write_workbook."""
    import pandas as pd

    from gpctools.report.xlsx import inert_cell, write_workbook

    df = pd.read_csv(table_csv)

    def openpyxl_write_only(path: Path) -> None:
        from openpyxl import Workbook

        wb = Workbook(write_only=True)
        ws = wb.create_sheet("results")
        ws.append(list(df.columns))
        for rec in df.itertuples(index=False, name=None):
            ws.append([inert_cell(v) for v in rec])
        wb.save(path)

    d = Path(tempfile.mkdtemp(prefix="gpcbench-xlsx-"))
    for name, fn in (("openpyxl write-only", openpyxl_write_only),
                     ("write_workbook (xlsxwriter, constant memory)",
                      lambda p: write_workbook(p, {"results": df}))):
        best = min(_timed(fn, d / "t.xlsx") for _ in range(repeat))
        print(json.dumps({"writer": name, "rows": len(df), "columns": df.shape[1], "seconds": round(best, 3)}))


def _timed(fn, *args) -> float:
    t0 = time.perf_counter()
    fn(*args)
    return time.perf_counter() - t0


def main() -> None:
    global _BARE_KIB
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--n", type=int, nargs="+", default=[100, 300, 1000])
    ap.add_argument("--folder", type=Path, default=Path(tempfile.gettempdir()) / "gpctools-bench")
    ap.add_argument("--repeat", type=int, default=3, help="best of this many runs (batch and floor)")
    ap.add_argument("--demo-repeat", type=int, default=3)
    ap.add_argument("--skip-demo", action="store_true")
    ap.add_argument("--skip-series", action="store_true")
    ap.add_argument("--xlsx", action="store_true", help="only compare the XLSX writers on a 1,000-row table")
    ap.add_argument("--figures", action="store_true", help="only time the demo's figures")
    ap.add_argument("--per-injection", action="store_true",
                    help="only time reading and measurement per injection in one process")
    args = ap.parse_args()

    if args.figures:
        bench_figures()
        return
    src = args.folder / "all"
    make_files(src, max(args.n))
    if args.per_injection:
        bench_per_injection(src)
        return
    if args.xlsx:
        sheet = subset(src, args.folder / "n1000", 1000)
        out = Path(tempfile.mkdtemp(prefix="gpcbench-out-"))
        subprocess.run([gpctools_exe(), "batch", str(sheet), "-m", str(sheet.parent / "method.toml"),
                        "-o", str(out)], stdout=subprocess.DEVNULL, check=True)
        bench_xlsx(out / "results.csv")
        return
    _BARE_KIB = _bare_interpreter_kib()
    print(json.dumps({"cores": os.cpu_count(), "python": sys.version.split()[0]}), flush=True)
    bench_batch(src, args.folder, sorted(args.n), args.repeat)
    bench_startup()
    if not args.skip_series:
        bench_series()
    if not args.skip_demo:
        bench_demo(args.demo_repeat)
        bench_figures()


if __name__ == "__main__":
    main()
