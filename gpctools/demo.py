"""The bundled demo: an invented lab, its sample runs, and a check against the truth.

Scenario (our own invention): the analytical group of *Larchmere Coatings*, a fictional
maker of polystyrene binder resins, runs one SEC sequence on a three-column set in THF at
1.0 mL/min with ten narrow polystyrene standards. The sequence holds three production
grades (LC-110, LC-180 and LC-260) with replicate injections, one fast-cured lot, a broad
in-house check standard, and exports from three different instrument setups (comma CSV,
semicolon/decimal-comma CSV, UTF-16 tab text, an XLSX workbook, time instead of volume).
Every trace is simulated by :mod:`gpctools.simulate` from a known distribution through a
known calibration, with baseline offset, drift, noise, a flow-marker peak and a small
pump-flow error, and the exact averages are stored in ``truth.csv`` beside the data.

:func:`write_sample_runs` regenerates the folder; :func:`run_demo` runs the job on it.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np

from . import simulate
from .report.files import write_text

__all__ = ["write_sample_runs", "run_demo", "run_demo_series", "DEMO_SAMPLES"]

MARKER_REFERENCE = 22.60  # [mL] flow-marker (toluene-like) position on the calibration day

# sample_id, product, role, distribution, flow error (relative), export dialect, seed
DEMO_SAMPLES: tuple[tuple[str, str, str, Any, float, str, int], ...] = (
    ("LC110-A1", "LC-110", "sample", ("schulz_zimm", 62_000.0, 1.6), 0.0006, "csv_comma", 11),
    ("LC110-A2", "LC-110", "sample", ("schulz_zimm", 62_000.0, 1.6), -0.0004, "csv_comma", 12),
    ("LC180-B1", "LC-180", "sample", ("lognormal", 150_000.0, 2.05), 0.0010, "csv_semicolon_decimal_comma", 21),
    ("LC180-B2", "LC-180", "sample", ("lognormal", 150_000.0, 2.05), 0.0002, "csv_semicolon_decimal_comma", 22),
    ("LC260-C1", "LC-260", "sample", ("schulz_zimm", 140_000.0, 2.4), -0.0008, "utf16_tab_time_min", 31),
    ("LC260-C2", "LC-260", "sample", ("schulz_zimm", 140_000.0, 2.4), 0.0003, "xlsx", 32),
    ("LC180-FAST", "LC-180", "sample", ("most_probable", 52_000.0, None), 0.0005, "csv_comma_time_s", 41),
    ("CHK-BR1", "check", "check_standard", ("lognormal", 160_000.0, 2.1), 0.0001, "csv_comma", 51),
)


def _model(spec) -> simulate.DistributionModel:
    kind, a, b = spec
    if kind == "schulz_zimm":
        return simulate.schulz_zimm(a, b)
    if kind == "lognormal":
        return simulate.lognormal(a, b)
    return simulate.most_probable(a)


def _write_xlsx(path: Path, x: np.ndarray, h: np.ndarray, meta: dict[str, str]) -> None:
    from openpyxl import Workbook

    from .report.files import atomic_path

    wb = Workbook()
    ws = wb.active
    ws.title = "Slices"
    info = wb.create_sheet("Info")
    info.append(["Export of one injection"])
    for k, v in meta.items():
        ws.append([f"{k}:", v])
    ws.append([])
    ws.append(["Elution volume (mL)", "RI detector (mV)", "UV 254 (mAU)"])
    for xi, hi in zip(x.tolist(), h.tolist()):
        ws.append([round(xi, 6), round(hi, 6), round(0.3 * hi + 1.0, 4)])
    with atomic_path(path) as tmp:
        wb.save(tmp)


def write_sample_runs(folder: str | Path) -> dict[str, Any]:
    """(Re)generate the demo batch: exports, method, standards, batch sheet and truth.

    Returns the true averages by sample id.
    """
    folder = Path(folder)
    data = folder / "exports"
    data.mkdir(parents=True, exist_ok=True)
    cal = simulate.default_calibration()
    names, Mp, V = zip(*simulate.DEFAULT_STANDARDS)
    std_lines = ["name,Mp [g/mol],volume [mL]"] + [f"{n},{m:.0f},{v:.2f}" for n, m, v in simulate.DEFAULT_STANDARDS]
    write_text(folder / "standards.csv", "\n".join(std_lines) + "\n")
    rows = ["sample_id,file,role,product,batch,sequence,assigned Mn [g/mol],assigned Mw [g/mol]"]
    truth_rows = ["sample_id,Mn [g/mol],Mw [g/mol],Mz [g/mol],Mz+1 [g/mol],dispersity [-],distribution,flow error [-]"]
    truth: dict[str, Any] = {}
    volume_true = np.linspace(8.0, 26.0, 6000)
    for sid, product, role, spec, flow_err, dialect, seed in DEMO_SAMPLES:
        model = _model(spec)
        Vt, h = simulate.chromatogram(
            model, cal, volume=volume_true, height=120.0, baseline_offset=3.5,
            baseline_drift=-0.04, noise=0.04, seed=seed,
            extra_peaks=((MARKER_REFERENCE, 0.08, -25.0),),
        )
        # The pump ran (1 + flow_err) times too slow: everything elutes at V_true*(1+err)
        # on the nominal volume axis; the analysis must undo it with the flow marker.
        V_obs = Vt * (1.0 + flow_err)
        meta = {"Instrument": "SEC-2 (three mixed-bed columns, THF, 35 °C)", "Sample": sid,
                "Injection volume": "100 uL", "Operator": "demo"}
        if dialect == "xlsx":
            fname = f"{sid}.xlsx"
            _write_xlsx(data / fname, V_obs, h, meta)
        elif dialect == "csv_semicolon_decimal_comma":
            fname = f"{sid}.csv"
            simulate.write_chromatogram(data / fname, V_obs, h, separator=";", decimal=",", metadata=meta,
                                        encoding="utf-8-sig")
        elif dialect == "utf16_tab_time_min":
            fname = f"{sid}.txt"
            simulate.write_chromatogram(data / fname, V_obs, h, x="time_min", flow_rate=1.0, separator="\t",
                                        encoding="utf-16", metadata=meta, extra_column=True)
        elif dialect == "csv_comma_time_s":
            fname = f"{sid}.csv"
            simulate.write_chromatogram(data / fname, V_obs, h, x="time_s", flow_rate=1.0, metadata=meta)
        else:
            fname = f"{sid}.csv"
            simulate.write_chromatogram(data / fname, V_obs, h, metadata=meta)
        a = model.averages
        assigned = (f"{a['Mn']:.0f}", f"{a['Mw']:.0f}") if role == "check_standard" else ("", "")
        batch_label = {"LC-110": "B2611-07", "LC-180": "B2611-09", "LC-260": "B2611-12", "check": ""}[product]
        rows.append(f"{sid},exports/{fname},{role},{product},{batch_label},SEQ-2611-A,{assigned[0]},{assigned[1]}")
        truth_rows.append(
            f"{sid},{a['Mn']:.6g},{a['Mw']:.6g},{a['Mz']:.6g},{a['Mz1']:.6g},{a['dispersity']:.6g},"
            f"{model.label.replace(',', ';')},{flow_err:g}"
        )
        truth[sid] = dict(a)
    write_text(folder / "batch.csv", "\n".join(rows) + "\n")
    write_text(folder / "truth.csv", "\n".join(truth_rows) + "\n")
    write_text(folder / "method.toml", _METHOD_TOML)
    _write_history(folder / "history")
    return truth


# Earlier sequences of the demo lab (invented): product, Mw target [g/mol], dispersity target [-]
_HISTORY_PRODUCTS = (("LC-110", 100_500.0, 1.62), ("LC-180", 214_500.0, 2.05), ("LC-260", 198_300.0, 1.417))


def _write_history(folder: Path) -> list[Path]:
    """Results tables of six earlier sequences (invented, seeded) for the control charts.

    Each holds four production batches per grade with Mw scattered by 1.2 % and
    dispersity by 0.8 % around the grade's usual values, plus the check standard. They
    stand for what earlier ``gpctools batch`` runs wrote; only the columns QC reads are kept.
    """
    rng = np.random.default_rng(2603)  # a seed whose history breaks no run rule by itself
    head = "sample_id,file,role,product,batch,sequence,status,Mn [g/mol],Mw [g/mol],dispersity [-],warnings,error"
    paths = []
    lot = 1
    for k, seq in enumerate(("SEQ-2609-A", "SEQ-2609-B", "SEQ-2609-C", "SEQ-2610-A", "SEQ-2610-B", "SEQ-2610-C")):
        lines = [head]
        for _ in range(4):
            for product, mw0, d0 in _HISTORY_PRODUCTS:
                mw = mw0 * (1 + 0.012 * rng.standard_normal())
                d = d0 * (1 + 0.008 * rng.standard_normal())
                batch = f"B26{lot:02d}"
                lot += 1
                lines.append(f"{batch}-1,exports/{batch}-1.csv,sample,{product},{batch},{seq},ok,"
                             f"{mw / d:.0f},{mw:.0f},{d:.4f},,")
        mw = 231_862.0 * (1 + 0.006 * rng.standard_normal())
        d = 2.1 * (1 + 0.005 * rng.standard_normal())
        lines.append(f"CHK-BR1,exports/CHK-{k}.csv,check_standard,check,,{seq},ok,{mw / d:.0f},{mw:.0f},{d:.4f},,")
        paths.append(write_text(folder / f"results_{seq}.csv", "\n".join(lines) + "\n"))
    return paths


_METHOD_TOML = """# Method of the demo lab (invented): polystyrene in THF, 1.0 mL/min, 10 narrow PS standards.
name = "Larchmere SEC-2, PS in THF"
sample_polymer = "polystyrene"      # the grades are polystyrene: results are absolute

[flow]
rate = 1.0                          # [mL/min]

[flow_marker]
reference = 22.60                   # marker position on the calibration day [mL]
search = [22.2, 23.0]               # look for the marker peak here in every injection [mL]

[baseline]
windows = "auto"

[integration]
limits = "auto"
exclude = [[22.0, 23.2]]            # flow-marker peak

[calibration]
order = 3
standard_polymer = "polystyrene"
standards = "standards.csv"

[thresholds]
outside_calibration_pct = 1.0
standard_residual_pct = 5.0
limit_shift = 0.2
"""


def run_demo(folder: str | Path, out: str | Path, *, echo: Callable[[str], None] = print) -> dict[str, Any]:
    """Run the batch on the demo folder, compare with ``truth.csv``, print a summary.

    Returns a dict with the largest deviation [%] and the number of failed injections.
    """
    import pandas as pd

    from .batch import run_batch
    from .method import load_method
    from .report import DistributionWriter, write_batch

    folder = Path(folder)
    out = Path(out)
    if not (folder / "batch.csv").exists():
        from .errors import InputFormatError

        raise InputFormatError("no batch.csv in the sample-runs folder; pass --samples DIR", path=folder)
    method = load_method(folder / "method.toml")
    result = run_batch(folder / "batch.csv", method,
                       on_result=DistributionWriter(out / "batch" / "distributions"))
    write_batch(result, out / "batch", distributions=False)
    truth = pd.read_csv(folder / "truth.csv").set_index("sample_id")
    echo(f"gpctools demo: {len(result.table)} injections from {folder}")
    echo(f"molar-mass scale: {method.calibration.scale_label()}\n")
    head = f"{'sample':<12}{'Mn [g/mol]':>12}{'true Mn':>10}{'dev':>8}{'Mw [g/mol]':>12}{'true Mw':>10}{'dev':>8}{'D [-]':>7}"
    echo(head)
    worst = 0.0
    for _, r in result.table.iterrows():
        sid = r["sample_id"]
        if r["status"] != "ok":
            echo(f"{sid:<12} failed: {r['error']}")
            continue
        t = truth.loc[sid]
        dn = 100 * (r["Mn [g/mol]"] / t["Mn [g/mol]"] - 1)
        dw = 100 * (r["Mw [g/mol]"] / t["Mw [g/mol]"] - 1)
        worst = max(worst, abs(dn), abs(dw))
        echo(
            f"{sid:<12}{r['Mn [g/mol]']:>12,.0f}{t['Mn [g/mol]']:>10,.0f}{dn:>+7.2f}%"
            f"{r['Mw [g/mol]']:>12,.0f}{t['Mw [g/mol]']:>10,.0f}{dw:>+7.2f}%{r['dispersity [-]']:>7.3f}"
        )
    echo(f"\nlargest deviation from the true averages: {worst:.2f} %")
    echo(f"batch results written to {out / 'batch'} (results.csv, results.xlsx, distributions/)")
    report: dict[str, Any] = {"worst deviation [%]": worst, "failed": result.failed, "out": str(out)}
    if (folder / "spec_limits.csv").exists():
        report["qc"] = _demo_qc(folder, out, result, echo)
    if (folder / "transfer_series" / "run_series.csv").exists():
        echo("\nChain-transfer constants from the run series (sample_runs/transfer_series):")
        report["transfer"] = run_demo_series(folder / "transfer_series", out / "transfer", echo=echo)
        if not report["transfer"].get("ok", False):
            report["failed"] += 1
    if (folder / "troubleshooting" / "recipe.toml").exists():
        report["diagnosis"] = _demo_diagnosis(folder, out, method, echo)
    write_text(out / "demo_summary.json", json.dumps(report, indent=2, default=str) + "\n")
    return report


def run_demo_series(
    folder: str | Path,
    out: str | Path,
    *,
    echo: Callable[[str], None] | None = None,
) -> dict[str, Any]:
    """Analyse the demo run series in ``folder`` and compare with its ``truth.json``.

    Parameters
    ----------
    folder : str or Path
        A folder written by :func:`gpctools.transfer.synthetic.write_demo_series`.
    out : str or Path
        Output folder for the transfer tables and plots.
    echo : callable, optional
        Receives one line of text at a time (the CLI passes its printer); nothing is
        printed when omitted.

    Returns
    -------
    dict
        JSON-safe: recovered and true C per temperature, the worst deviation [%],
        flagged and contaminated runs, E_tr − E_p recovered and true [kJ/mol], and
        ``"ok"`` (every C within 5 %, only the contaminated run flagged).
    """
    import json
    import warnings

    from .errors import GpcWarning
    from .report import write_transfer
    from .transfer import analyse_series

    say = echo or (lambda _line: None)
    folder = Path(folder)
    truth = json.loads((folder / "truth.json").read_text(encoding="utf-8"))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", GpcWarning)
        res = analyse_series(folder / truth.get("sheet", "run_series.csv"),
                             method=folder / truth.get("method", "method.toml"), impurity_C=15.0)
    write_transfer(res, out)
    say(f"transfer demo: {len(res.series.runs)} runs in {len(res.groups)} groups from {folder}")
    recovered: dict[str, float] = {}
    worst = 0.0
    for g in res.groups:
        key = f"{g.T_C:g}"
        c = res.constant("C_A", group=g.label)
        est, model = g.preferred["C_A"]
        true = float(truth["C_A [-]"][key])
        dev = 100.0 * (c.value / true - 1.0)
        worst = max(worst, abs(dev))
        recovered[key] = c.value
        naive = g.mayo[est].constant("C_A").value
        say(f"  {g.label}: C_A = {c.value:.3f} ± {c.stderr:.2g} ({est}, {model}); true "
            f"{true:.3f} ({dev:+.1f} %); naive fit {naive:.3f}")
    flagged = sorted(f.run_id for g in res.groups if g.impurity for f in g.impurity.flags if f.flagged)
    say(f"  flagged runs: {', '.join(flagged) or 'none'} (contaminated: {truth['contaminated run']})")
    dE = None
    for lbl, fit in res.arrhenius:
        if lbl["estimator"] == next(iter(res.groups)).preferred["C_A"][0]:
            dE = fit.delta_E.value
            say(f"  E_tr - E_p = {fit.delta_E.value:.2f} ± {fit.delta_E.stderr:.2f} kJ/mol "
                f"(true {truth['E_tr - E_p [kJ/mol]']:g})")
    ok = worst <= 5.0 and flagged == [truth["contaminated run"]]
    say(f"  transfer tables and plots written to {out}")
    return {
        "C_A recovered [-]": recovered,
        "C_A true [-]": truth["C_A [-]"],
        "worst C deviation [%]": worst,
        "flagged runs": flagged,
        "contaminated run": truth["contaminated run"],
        "E_tr - E_p recovered [kJ/mol]": dE,
        "E_tr - E_p true [kJ/mol]": truth["E_tr - E_p [kJ/mol]"],
        "ok": ok,
    }


def _demo_qc(folder: Path, out: Path, result, echo: Callable[[str], None]) -> dict[str, Any]:
    """QC report of the demo batch against the demo lab's spec limits."""
    from .report import run_qc

    history = sorted((folder / "history").glob("results_*.csv"))
    rep = run_qc(result, folder / "spec_limits.csv", out / "qc", method=result.method, history=history)
    echo("\nQC against sample_runs/spec_limits.csv:")
    for b in rep.result.decisions.batches:
        echo(f"  batch {b.batch}: {b.decision}" + (f" ({'; '.join(b.reasons)})" if b.decision != "pass" else ""))
    for s in rep.result.suitability:
        echo(f"  sequence {s.sequence}: system suitability {'pass' if s.passed else 'FAIL'}")
    for chart in rep.result.trends:
        for v in chart.violations:
            echo(f"  trend {chart.group} {chart.quantity}: {v.label} breaks {v.rule} ({v.description})")
    echo(f"QC report written to {out / 'qc'} (qc_report.html, qc_report.xlsx, plots/)")
    return {"batches": {b.batch: b.decision for b in rep.result.decisions.batches}}


def _demo_diagnosis(folder: Path, out: Path, method, echo: Callable[[str], None]) -> dict[str, Any]:
    """The troubleshooting case: process its exports, then rank the causes of low Mn."""
    from .batch import run_batch
    from .kinetics import diagnose_recipe
    from .report import write_batch, write_diagnosis

    case = folder / "troubleshooting"
    res = run_batch(case / "batch.csv", method)
    write_batch(res, out / "troubleshooting" / "batch")
    low = res.table.iloc[-1]["sample_id"]
    diag = diagnose_recipe(case / "recipe.toml",
                           measured_path=out / "troubleshooting" / "batch" / "results.csv", sample_id=low)
    write_diagnosis(diag, out / "troubleshooting")
    echo(f"\nWhy is the molar mass of {low} low? (sample_runs/troubleshooting)")
    for i, c in enumerate(diag.causes[:3], start=1):
        echo(f"  {i}. {c.title}: {c.share:.1f} % likelihood share")
    echo(f"  verdict: {diag.verdict}")
    echo("  Safety: recipe changes that add initiator or raise the temperature can run away; "
         "follow site safety rules, local codes and licensed practice.")
    echo(f"diagnosis written to {out / 'troubleshooting'} (diagnosis.md, diagnosis.xlsx)")
    return {"sample": low, "top cause": diag.causes[0].title if diag.causes else None, "verdict": diag.verdict}
