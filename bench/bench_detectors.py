"""Multi-detector error rates (not a test): offsets from the narrow standard, absolute Mn
and Mw against the truth, and the stated u(Mn LS), u(Mw LS) against the scatter.

Usage::

    python bench/bench_detectors.py --draws 30 --seed 1

Each draw is the demo's multi-detector line (gpctools.demo.write_detector_demo: RI,
7-angle light scattering, bridge viscometer, offsets 0.120 and 0.250 mL, Gaussian
spreading, white noise) with other noise seeds: a narrow polystyrene standard and two
Schulz-Zimm lots of the binder. The truth is the closed form of the Schulz-Zimm moments,
Mn and Mw = Mn (b + 1)/b (IUPAC Gold Book, "Schulz-Zimm distribution"), not a gpctools
output. The offsets come from the standard as ``gpctools detectors`` derives them
(polydispersity lead included); the lots are processed by ``run_batch`` with the line's
method file, as ``gpctools batch`` does. The ratio of the mean stated u to the standard
deviation of the draws is 1 for an honest noise part (u covers noise only: dn/dc, the
detector constants and the offsets are not in it).
"""

from __future__ import annotations

import argparse
import tempfile
import warnings
from pathlib import Path

import numpy as np


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--draws", type=int, default=30, help="noise draws of the line")
    ap.add_argument("--seed", type=int, default=1, help="first seed shift (0 is the bundled demo)")
    args = ap.parse_args()
    warnings.simplefilter("ignore")

    import pandas as pd

    from gpctools import columns as C
    from gpctools.batch import run_batch
    from gpctools.demo import DETECTOR_LINE, detector_line_calibration, write_detector_demo
    from gpctools.method import load_method

    offsets: dict[str, list[float]] = {k: [] for k in DETECTOR_LINE["offsets"]}
    rows: list[dict[str, float | str]] = []
    with tempfile.TemporaryDirectory() as tmp:
        for k in range(args.draws):
            folder = Path(tmp) / f"d{k}"
            write_detector_demo(folder, seed=args.seed + k)
            method = load_method(folder / "method.toml")
            for d in detector_line_calibration(folder, method).detectors:
                if d.name in offsets:
                    offsets[d.name].append(float(d.offset))
            table = run_batch(folder / "batch.csv", method, workers=1).table
            for lot, Mn, b, _ in DETECTOR_LINE["lots"]:
                r = table.set_index(C.SAMPLE_ID).loc[lot]
                rows.append({"lot": lot, "Mn": r[C.MN_LS], "Mw": r[C.MW_LS], "uMn": r[C.U_MN_LS],
                             "uMw": r[C.U_MW_LS], "Mn true": Mn, "Mw true": Mn * (b + 1) / b})
    cmd = f"python bench/bench_detectors.py --draws {args.draws} --seed {args.seed}"
    print(f"offsets from the narrow standard over {args.draws} draws [mL] [{cmd}]:")
    for name, vals in offsets.items():
        v = np.array(vals)
        true = DETECTOR_LINE["offsets"][name]
        print(f"  {name}: {v.min():.4f} to {v.max():.4f} (true {true:.3f}; "
              f"largest error {np.max(np.abs(v - true)):.4f} mL)")
    df = pd.DataFrame(rows)
    print("absolute averages by light scattering against the Schulz-Zimm closed form:")
    for lot, g in df.groupby("lot", sort=False):
        for q in ("Mn", "Mw"):
            dev = 100 * (g[q] / g[f"{q} true"] - 1)
            ratio = g[f"u{q}"].mean() / g[q].std(ddof=1)
            print(f"  {lot} {q} LS: deviation {dev.mean():+.2f} % on average, {dev.min():+.2f} to "
                  f"{dev.max():+.2f} %; stated u / observed SD {ratio:.2f}")


if __name__ == "__main__":
    main()
