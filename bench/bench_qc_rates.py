"""Error rates of the QC statistics: replicate false-fail rates and control-chart false alarms.

Prints the tables of docs/science.md, section 17 (17.3 and 17.5):

* the probability that a sound system (true repeatability σ) fails each replicate rule
  (pooled RSD, repeatability limit per pair, worst group) for k duplicate pairs, closed
  form and simulation (gpctools.qc.replicates);
* the share of judged points flagged, and the chance of at least one flag, for each named
  rule set and several chart layouts (baseline points, judged points), by simulation of
  in-control charts (gpctools.qc.trends.false_alarm_rate).

Run: ``python bench/bench_qc_rates.py [--sigma 1.5] [--limit 3] [--sims 20000]``.
"""

from __future__ import annotations

import argparse

from gpctools.qc.replicates import false_fail_closed_form, false_fail_simulated
from gpctools.qc.trends import RULE_SETS, false_alarm_rate


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sigma", type=float, default=1.5, help="true repeatability [%%]")
    ap.add_argument("--limit", type=float, default=3.0, help="RSD limit [%%]")
    ap.add_argument("--sims", type=int, default=20000, help="simulated sequences")
    ap.add_argument("--charts", type=int, default=4000, help="simulated charts per layout")
    args = ap.parse_args()
    print(f"replicate rules, sigma {args.sigma} %, limit {args.limit} % (closed form / simulated):")
    for rule in ("pooled", "pairs", "worst"):
        cells = []
        for k in (1, 2, 4, 8, 12):
            c = false_fail_closed_form(rule, [2] * k, args.limit, args.sigma)
            s = false_fail_simulated(rule, [2] * k, args.limit, args.sigma, simulations=args.sims)
            cells.append(f"k={k}: {100 * c:5.2f} / {100 * s:5.2f} %")
        print(f"  {rule:<7} " + "; ".join(cells))
    print("\ncontrol charts: flagged share of judged points, chance of at least one flag:")
    for key, (_title, rules) in RULE_SETS.items():
        cells = []
        for nb, nj in ((20, 10), (20, 13), (30, 20), (500, 200)):
            fa = false_alarm_rate([True] * nb + [False] * nj, rules, simulations=args.charts)
            cells.append(f"{nb}/{nj}: {100 * fa.per_point:.2f} %, {100 * fa.any_point:.1f} %")
        print(f"  {key:<17} " + "; ".join(cells))


if __name__ == "__main__":
    main()
