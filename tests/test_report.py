"""Tests of gpctools.report: workbook, HTML (headless Chromium), plots, audit, run_qc end to end.

The end-to-end batch is simulated with gpctools.simulate from Schulz-Zimm distributions,
whose averages are known exactly: Mn = b/a, Mw = (b+1)/a [published: IUPAC Gold Book,
Schulz-Zimm distribution; docs/science.md, section 8], so b = 1 gives Mw = 2 Mn. Its scenario
has one out-of-spec sample, one failed check standard and a trend point that breaks a
Western Electric run rule (Western Electric Statistical Quality Control Handbook, 1956).
"""

from __future__ import annotations

import csv
import os
import re
import shutil
import subprocess
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from gpctools.qc import FAIL, NOT_REPORTABLE, PASS, specs_from_frame
from gpctools.report import build_audit, inert_cell, run_qc, sha256_file, write_workbook

FORMULA_NAMES = ['=HYPERLINK("http://example.com","click")', "+1", "-2", "@SUM(A1:A3)", "\tTAB", "=1+2"]
HTML_NAME = '<script>alert("x")</script> & <b>bold</b>'


# ============================================================================ helpers


def hand_table(names=("A1",)) -> pd.DataFrame:
    rows = []
    for k, name in enumerate(names):
        rows.append({
            "sample_id": name, "file": f"f{k}.csv", "role": "sample", "product": "P-200", "batch": "B1",
            "sequence": "S1", "status": "ok", "Mn [g/mol]": 100000.0 + k, "Mw [g/mol]": 200000.0 + k,
            "Mp [g/mol]": 150000.0, "dispersity [-]": 2.0, "outside calibration [% mass]": 0.0,
            "warnings": "", "error": "",
        })
    rows.append({"sample_id": "CS", "file": "cs.csv", "role": "check_standard", "product": "CHK",
                 "batch": "", "sequence": "S1", "status": "ok", "Mn [g/mol]": 100000.0,
                 "Mw [g/mol]": 200000.0, "Mp [g/mol]": 150000.0, "dispersity [-]": 2.0,
                 "outside calibration [% mass]": 0.0, "assigned Mw [g/mol]": 200000.0,
                 "warnings": "", "error": ""})
    return pd.DataFrame(rows)


def hand_specs():
    return specs_from_frame(pd.DataFrame({
        "product": ["P-200", "CHK"],
        "Mw min [g/mol]": [180000.0, None], "Mw max [g/mol]": [220000.0, None],
        "check-standard tolerance [%]": [None, 5.0],
    }))


def cal_summary():
    return {"R^2 [-]": 0.99999, "worst residual [%]": 1.0,
            "standards_table": [{"standard": "PS 1", "Mp [g/mol]": 1e5, "volume [mL]": 15.0,
                                 "fitted M [g/mol]": 1.01e5, "residual [%]": 1.0},
                                {"standard": "PS 2", "Mp [g/mol]": 1e4, "volume [mL]": 18.0,
                                 "fitted M [g/mol]": 0.99e4, "residual [%]": -1.0}]}


def chromium() -> str | None:
    return shutil.which("chromium") or shutil.which("chromium-browser")


def run_chromium(args: list[str], tmp: Path) -> subprocess.CompletedProcess:
    exe = chromium()
    base = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
            "--disable-background-networking", "--disable-component-update", "--disable-sync",
            f"--user-data-dir={tmp / 'chromium-profile'}"]
    return subprocess.run(base + args, capture_output=True, text=True, timeout=120, check=False)


def need_chromium():
    if chromium() is None:
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail("CI=true but Debian's 'chromium' is not installed (apt-get install -y chromium)")
        pytest.skip("headless Chromium not installed (Debian: apt-get install -y chromium); "
                    "the HTML report is then not opened in a browser")


# ============================================================================ xlsx


def test_inert_cell_rules():
    # common practice (OWASP formula-injection guidance): text starting with = + - @ tab CR is
    # stored with a leading apostrophe; numbers stay numbers
    for name in FORMULA_NAMES + ["\rCR"]:
        assert inert_cell(name) == "'" + name
    assert inert_cell("plain") == "plain"
    assert inert_cell(np.float64(1.5)) == 1.5 and isinstance(inert_cell(np.int64(3)), int)
    assert inert_cell(-2.0) == -2.0  # a negative number is a number, not text
    assert inert_cell(float("nan")) is None and inert_cell(float("inf")) is None
    assert inert_cell("a\x00b\x1fc") == "abc"  # characters XML forbids are dropped


def test_workbook_formula_like_names_are_inert(tmp_path):
    import openpyxl

    table = hand_table(FORMULA_NAMES)
    path = write_workbook(tmp_path / "t.xlsx", {"samples": table, "=evil sheet": table.head(1)})
    wb = openpyxl.load_workbook(path)
    assert wb.sheetnames == ["samples", "=evil sheet"]
    ws = wb["samples"]
    headers = [c.value for c in ws[1]]
    assert headers[:2] == ["sample_id", "file"] and "Mw [g/mol]" in headers
    col = headers.index("sample_id") + 1
    mw = headers.index("Mw [g/mol]") + 1
    for r, name in enumerate(FORMULA_NAMES, start=2):
        cell = ws.cell(row=r, column=col)
        assert cell.data_type == "s" and cell.value == "'" + name
        assert ws.cell(row=r, column=mw).data_type == "n"
        assert ws.cell(row=r, column=mw).value == 200000.0 + (r - 2)
    # nothing in the file is stored as a formula
    for sheet in wb.worksheets:
        for row in sheet.iter_rows():
            for cell in row:
                assert cell.data_type != "f"
    assert not (tmp_path / "t.xlsx.part").exists()
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".part")]


# ============================================================================ audit


def test_audit_hashes_and_missing_files(tmp_path):
    p = tmp_path / "a.csv"
    p.write_bytes(b"abc")
    audit = build_audit(inputs=[("batch sheet", p), ("chromatogram", tmp_path / "gone.csv"), ("batch sheet", p)],
                        settings={"x": {"y": 1}}, timestamp="2024-01-01T00:00:00+00:00")
    # published: FIPS 180-2 test vector, SHA-256("abc")
    assert audit.inputs[0].sha256 == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    assert sha256_file(p) == audit.inputs[0].sha256
    assert audit.inputs[1].sha256 == "missing" and len(audit.inputs) == 2
    frame = audit.to_frame()
    assert ("setting", "x.y", 1) in set(map(tuple, frame.to_numpy().tolist()))
    s = audit.summary()
    assert s["tool version"] and s["versions"]["numpy"] == np.__version__
    assert s["versions"]["pandas"] == pd.__version__


# ============================================================================ end to end


SPEC_CSV = (
    "product,description,Mn min [g/mol],Mn max [g/mol],Mw min [g/mol],Mw max [g/mol],Mw target [g/mol],"
    "dispersity min [-],dispersity max [-],check-standard tolerance [%]\n"
    "P-200,test grade,85000,115000,180000,220000,200000,1.8,2.2,\n"
    "CHK,check standard,,,,,,,,5\n"
)


def build_scenario(folder: Path) -> dict:
    """Simulated exports, method, batch sheet, spec sheet and history tables in ``folder``."""
    from gpctools.demo import write_chromatogram
    from gpctools.simulate import (
        DEFAULT_STANDARDS,
        chromatogram,
        default_calibration,
        schulz_zimm,
    )

    folder.mkdir(parents=True, exist_ok=True)
    with open(folder / "standards.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["name", "Mp [g/mol]", "volume [mL]"])
        for name, mp, v in DEFAULT_STANDARDS:
            w.writerow([name, mp, v])
    (folder / "method.toml").write_text(
        'name = "QC test method"\nsample_polymer = "polystyrene"\n\n[flow]\nrate = 1.0\n\n'
        "[flow_marker]\nreference = 22.60\n\n[integration]\nlimits = \"auto\"\n\n"
        '[calibration]\norder = 3\nstandard_polymer = "polystyrene"\nstandards = "standards.csv"\n',
        encoding="utf-8")
    cal = default_calibration()
    V = np.linspace(8.0, 26.0, 2500)
    # Schulz-Zimm b = 1: Mw = 2 Mn exactly (IUPAC Gold Book)
    runs = [
        # sample_id, role, product, batch, sequence, Mn of the simulated distribution, marker
        ("CS-A", "check_standard", "CHK", "", "S1", 100000.0, 22.60),
        ("P1", "sample", "P-200", "B1", "S1", 100000.0, 22.60),
        ("P1", "sample", "P-200", "B1", "S1", 100500.0, 22.61),
        (FORMULA_NAMES[0], "sample", "P-200", "B1", "S1", 100000.0, 22.60),
        ("P2", "sample", "P-200", "B2", "S1", 60000.0, 22.60),      # Mw 120000: out of spec
        ("CS-B", "check_standard", "CHK", "", "S2", 90000.0, 22.60),  # Mw 180000: -10 %, fails
        ("P3", "sample", "P-200", "B3", "S2", 100000.0, 22.60),     # in spec, but S2 failed
    ]
    (folder / "exports").mkdir(exist_ok=True)
    rows = []
    for k, (sid, role, product, batch, seq, Mn, marker) in enumerate(runs):
        v, h = chromatogram(schulz_zimm(Mn, 1.0), cal, volume=V, height=50.0, noise=0.0)
        fname = f"exports/run{k:02d}.csv"
        write_chromatogram(folder / fname, v, h)
        rows.append({"sample_id": sid, "file": fname, "role": role, "product": product, "batch": batch,
                     "sequence": seq, "flow marker [mL]": marker,
                     "assigned Mw [g/mol]": 200000 if role == "check_standard" else "",
                     "assigned Mn [g/mol]": 100000 if role == "check_standard" else ""})
    pd.DataFrame(rows).to_csv(folder / "batch.csv", index=False)
    (folder / "spec.csv").write_text(SPEC_CSV, encoding="utf-8")
    # history: ten earlier batches of P-200, Mw alternating 193500 / 194500 g/mol:
    # CL 194000, MR-bar 1000, sigma = 1000/1.128 = 886.5 g/mol (derived)
    hist_paths = []
    for part in range(2):
        hrows = []
        for i in range(5):
            n = part * 5 + i
            mw = 193500.0 if n % 2 == 0 else 194500.0
            hrows.append({"sample_id": f"H{n:02d}", "file": "x.csv", "role": "sample", "product": "P-200",
                          "batch": f"H{n:02d}", "sequence": f"HS{part}", "status": "ok",
                          "Mn [g/mol]": mw / 2.0, "Mw [g/mol]": mw, "dispersity [-]": 2.0 + 0.01 * (n % 2),
                          "warnings": "", "error": ""})
        p = folder / f"history_{part}.csv"
        pd.DataFrame(hrows).to_csv(p, index=False)
        hist_paths.append(p)
    return {"folder": folder, "history": hist_paths}


def run_pipeline(folder: Path, history, out: Path, **kwargs):
    from gpctools.batch import run_batch
    from gpctools.method import load_method

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        method = load_method(folder / "method.toml")
        batch = run_batch(folder / "batch.csv", method)
        return run_qc(batch, folder / "spec.csv", out, history=history, **kwargs)


@pytest.fixture(scope="module")
def scenario(tmp_path_factory):
    base = tmp_path_factory.mktemp("qc_e2e")
    sc = build_scenario(base / "inputs")
    mayo = {"x": [0.0, 1e-4, 2e-4, 3e-4], "y": [5.0e-4, 2.0e-3, 3.5e-3, 5.0e-3],
            "slope": 15.0, "intercept": 5.0e-4, "label": "runs"}
    report = run_pipeline(sc["folder"], sc["history"], base / "out1", transfer={"agent series": mayo},
                          timestamp="2024-01-01T00:00:00+00:00")
    sc.update(base=base, report=report, out=base / "out1")
    return sc


def test_e2e_every_finding_caught_with_its_reason(scenario):
    rep = scenario["report"]
    batches = {b.batch: b for b in rep.result.decisions.batches}
    assert batches["B1"].decision == PASS
    assert batches["B2"].decision == FAIL
    # derived: Schulz-Zimm b = 1 with Mn 60000 has Mw 120000, below the 180000 minimum
    assert any("P2" in r and "Mw" in r and "below min 180 000 g/mol" in r for r in batches["B2"].reasons)
    assert batches["B3"].decision == NOT_REPORTABLE
    assert any("S2" in r and "check standard CHK" in r for r in batches["B3"].reasons)
    suit = {s.sequence: s for s in rep.result.suitability}
    assert suit["S1"].passed and not suit["S2"].passed
    (fail,) = [c for c in suit["S2"].failures if "Mw" in c.name]
    # derived: 100*(180000/200000 - 1) = -10 %; tolerance 0.5 %-points for the SEC round trip
    # of a noise-free trace (slice discretisation and the cubic calibration fit)
    assert fail.value == pytest.approx(10.0, abs=0.5)
    # replicate P1 (Mn 100000 and 100500 simulated) gives an RSD well under 3 %
    rsd = next(c for c in suit["S1"].checks if c.name == "replicate RSD of Mw, pooled [%]")
    assert rsd.passed and 0 < rsd.value < 1.0
    # trend: history CL 194000, sigma 886.5 (derived); B1 near 200000 is > 6 sigma above
    # (N1, the default rule set's "one point beyond 3 sigma") while inside spec; B2 near
    # 120000 is far below (N1); B3 is not charted
    chart = next(c for c in rep.result.trends if c.group == "P-200" and c.quantity == "Mw [g/mol]")
    assert chart.centre == 194000.0 and chart.sigma == pytest.approx(1000.0 / 1.128, rel=1e-12)
    assert "B3" not in chart.labels
    found = {(v.label, v.rule, v.side) for v in chart.violations}
    assert ("B1", "N1", "above") in found and ("B2", "N1", "below") in found
    assert rep.exit_code() == 0 and rep.exit_code(strict=True) == 1
    # the summaries are plain JSON (no NaN, no numpy types)
    import json

    assert json.loads(json.dumps(rep.summary(), allow_nan=False))["qc"]["reportable"] is False


def test_e2e_files_and_workbook(scenario):
    import openpyxl

    out = scenario["out"]
    files = scenario["report"].files
    for name in ("qc_report.xlsx", "qc_report.html", "qc_summary.json", "audit.json", "plots/calibration.png"):
        assert (out / name).is_file() and files[name] == out / name
    pngs = sorted((out / "plots").glob("*.png"))
    assert any(p.name.startswith("control_") for p in pngs)
    assert any(p.name.startswith("distributions_") for p in pngs)
    assert any(p.name.startswith("mayo_") for p in pngs)
    for p in pngs:
        assert p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    wb = openpyxl.load_workbook(out / "qc_report.xlsx")
    assert wb.sheetnames == ["summary", "batches", "samples", "injections", "specs", "calibration",
                             "suitability", "replicates", "trends", "trend signals", "transfer",
                             "transfer points", "audit"]
    unit = re.compile(r"\[[^\]]+\]$")
    for ws in wb.worksheets:
        headers = [c.value for c in ws[1]]
        assert all(isinstance(h, str) and h for h in headers)
        for j, h in enumerate(headers, start=1):
            # every numeric column has a unit in its header (text-only columns may not)
            numeric = any(ws.cell(row=r, column=j).data_type == "n" and ws.cell(row=r, column=j).value is not None
                          for r in range(2, ws.max_row + 1))
            if numeric and ws.title not in ("summary", "audit", "calibration") and h not in ("value",):
                assert unit.search(h), (ws.title, h)
        for row in ws.iter_rows():
            for cell in row:
                assert cell.data_type != "f"
    samples = wb["samples"]
    headers = [c.value for c in samples[1]]
    ids = [samples.cell(row=r, column=headers.index("sample_id") + 1).value for r in range(2, samples.max_row + 1)]
    assert "'" + FORMULA_NAMES[0] in ids
    # the audit sheet names the method, its hash and every chromatogram
    audit = scenario["report"].audit
    roles = [f.role for f in audit.inputs]
    assert roles.count("chromatogram") == 7 and "spec sheet" in roles and "batch sheet" in roles
    assert roles.count("history results table") == 2
    assert audit.method_sha256 == sha256_file(scenario["folder"] / "method.toml")
    assert "QC test method" in audit.method_text


def test_e2e_html_self_contained_and_escaped(scenario):
    text = (scenario["out"] / "qc_report.html").read_text(encoding="utf-8")
    for sec in ("summary", "samples", "suitability", "calibration", "distributions", "trends",
                "transfer", "audit"):
        assert f'<section id="{sec}">' in text
    # nothing is loaded from outside: every src is a data URI, links only to anchors
    assert re.findall(r'src="(?!data:)', text) == []
    assert re.findall(r'href="(?!#)', text) == []
    assert "<script" not in text and "@import" not in text
    assert "&#34;http://example.com&#34;" in text or "&quot;http://example.com&quot;" in text
    assert "@media print" in text


def test_html_escapes_user_text(tmp_path):
    rep = run_qc(hand_table([HTML_NAME]), hand_specs(), tmp_path, calibration=cal_summary(), plots=False)
    text = (tmp_path / "qc_report.html").read_text(encoding="utf-8")
    assert "<script>alert" not in text and "<b>bold</b>" not in text
    assert "&lt;script&gt;alert" in text
    assert rep.result.decisions.batches[0].decision == PASS


def test_html_in_headless_chromium(scenario, tmp_path):
    need_chromium()
    html = scenario["out"] / "qc_report.html"
    shot = tmp_path / "report.png"
    res = run_chromium([f"--screenshot={shot}", "--window-size=1200,2000", html.as_uri()], tmp_path)
    assert shot.is_file() and shot.stat().st_size > 10_000, res.stderr[-2000:]
    dom = run_chromium(["--dump-dom", html.as_uri()], tmp_path).stdout
    for sec in ("summary", "samples", "suitability", "calibration", "distributions", "trends",
                "transfer", "audit"):
        assert f'id="{sec}"' in dom
    assert dom.count("<img") >= 5
    assert "not reportable" in dom and "N1" in dom
    # keep the screenshot next to the report for a person to look at
    shutil.copy(shot, scenario["out"] / "screenshot.png")


def test_rerun_gives_identical_numbers(scenario):
    import openpyxl

    second = run_pipeline(scenario["folder"], scenario["history"], scenario["base"] / "out2",
                          transfer={"agent series": {"x": [0.0, 1e-4, 2e-4, 3e-4],
                                                     "y": [5.0e-4, 2.0e-3, 3.5e-3, 5.0e-3],
                                                     "slope": 15.0, "intercept": 5.0e-4, "label": "runs"}})
    first = scenario["report"]
    assert first.sheets.keys() == second.sheets.keys()
    for name in first.sheets:
        a, b = first.sheets[name], second.sheets[name]
        if name in ("summary", "audit"):  # the timestamp is the one entry allowed to differ
            keep = ~a.astype(str).apply(lambda col: col.str.contains("timestamp|generated")).any(axis=1)
            a, b = a[keep].reset_index(drop=True), b[keep.to_numpy()].reset_index(drop=True)
        pd.testing.assert_frame_equal(a, b, check_exact=True, obj=name)
    assert first.audit.timestamp != second.audit.timestamp or first.audit.timestamp == "2024-01-01T00:00:00+00:00"
    wa = openpyxl.load_workbook(scenario["out"] / "qc_report.xlsx")
    wb = openpyxl.load_workbook(scenario["base"] / "out2" / "qc_report.xlsx")
    for sa, sb in zip(wa.worksheets, wb.worksheets, strict=True):
        va = [[c.value for c in r] for r in sa.iter_rows()]
        vb = [[c.value for c in r] for r in sb.iter_rows()]
        diff = [(i, x, y) for i, (x, y) in enumerate(zip(va, vb, strict=True)) if x != y]
        # only the timestamp rows differ (and the results path, which is the same here)
        assert all(any("timestamp" in str(v) or "generated" in str(v) for v in x) for _, x, _ in diff), diff[:3]
    ja = (scenario["out"] / "qc_summary.json").read_text(encoding="utf-8")
    jb = (scenario["base"] / "out2" / "qc_summary.json").read_text(encoding="utf-8")
    assert ja == jb


def test_run_qc_from_results_csv(tmp_path):
    table = hand_table(["A", "B"])
    table.to_csv(tmp_path / "results.csv", index=False)
    rep = run_qc(tmp_path / "results.csv", hand_specs(), None, calibration=cal_summary())
    assert rep.files == {}
    assert {s.sample_id for s in rep.result.decisions.samples} == {"A", "B"}
    assert rep.result.reportable and rep.all_pass
    # without any calibration the system cannot be shown suitable
    rep = run_qc(tmp_path / "results.csv", hand_specs(), None)
    assert not rep.reportable and rep.result.decisions.batches[0].decision == NOT_REPORTABLE


# ============================================================================ CLI


def test_cli_qc_exit_codes(scenario, tmp_path):
    from typer.testing import CliRunner

    from gpctools.cli import app

    runner = CliRunner()
    folder = scenario["folder"]
    args = ["qc", str(folder / "batch.csv"), "--method", str(folder / "method.toml"),
            "--specs", str(folder / "spec.csv"), "--out", str(tmp_path / "o")]
    for h in scenario["history"]:
        args += ["--history", str(h)]
    res = runner.invoke(app, args)
    # QC findings are results: exit 0 without --strict, the report is written
    assert res.exit_code == 0, res.output
    assert "B2" in res.output and "fail" in res.output and "N1" in res.output
    assert (tmp_path / "o" / "qc_report.html").is_file() and (tmp_path / "o" / "results.csv").is_file()
    # from the results.csv of that run, with --strict: 1 because a batch is not 'pass'
    res = runner.invoke(app, ["qc", str(tmp_path / "o" / "results.csv"), "--specs", str(folder / "spec.csv"),
                              "--out", str(tmp_path / "o2"), "--strict"])
    assert res.exit_code == 1, res.output
    assert (tmp_path / "o2" / "qc_report.xlsx").is_file()
    # a bad spec sheet is a user error: exit 2 with the file and row named, before any batch work
    bad = tmp_path / "bad_spec.csv"
    bad.write_text("product,Mw max [g/mol]\nP-200,lots\n", encoding="utf-8")
    res = runner.invoke(app, ["qc", str(folder / "batch.csv"), "--method", str(folder / "method.toml"),
                              "--specs", str(bad), "--out", str(tmp_path / "o3")])
    assert res.exit_code == 2
    assert "bad_spec.csv" in res.output and "row 2" in res.output and "not a number" in res.output
    assert not (tmp_path / "o3").exists()


def test_run_qc_with_a_real_mayo_fit(tmp_path):
    mayo = pytest.importorskip("gpctools.transfer.mayo")
    x = np.array([0.0, 1e-4, 2e-4, 3e-4, 4e-4])
    y = (5e-4 + 15.0 * x) * np.array([1.0, 1.02, 0.98, 1.01, 0.99])
    fit = mayo.fit_mayo(y, {"C_A": x}, run_ids=["r0", "r1", "r2", "r3", "r4"])
    rep = run_qc(hand_table(["A"]), hand_specs(), tmp_path, calibration=cal_summary(), transfer=fit)
    consts = rep.sheets["transfer"]
    row = consts[consts["constant"] == "C_A"].iloc[0]
    assert row["value [-]"] == fit.constants[0].value and row["standard error [-]"] == fit.constants[0].stderr
    pts = rep.sheets["transfer points"]
    assert pts["run"].tolist() == ["r0", "r1", "r2", "r3", "r4"]
    assert '<section id="transfer">' in (tmp_path / "qc_report.html").read_text(encoding="utf-8")
    assert any(k.startswith("plots/mayo_") for k in rep.files)


def test_cli_qc_from_results_csv_with_manifest(tmp_path):
    import json

    from typer.testing import CliRunner

    from gpctools.cli import app

    table = hand_table(["A"])
    table = table[table["role"] == "sample"]  # no check standard in this sequence
    table.to_csv(tmp_path / "results.csv", index=False)
    (tmp_path / "manifest.json").write_text(json.dumps({"calibration": cal_summary()}), encoding="utf-8")
    spec = tmp_path / "spec.csv"
    spec.write_text("product,Mw min [g/mol],Mw max [g/mol]\nP-200,180000,220000\n", encoding="utf-8")
    runner = CliRunner()
    res = runner.invoke(app, ["qc", str(tmp_path / "results.csv"), "--specs", str(spec),
                              "--out", str(tmp_path / "o"), "--strict"])
    assert res.exit_code == 1 and "not reportable" in res.output and "check standard" in res.output
    res = runner.invoke(app, ["qc", str(tmp_path / "results.csv"), "--specs", str(spec),
                              "--out", str(tmp_path / "o2"), "--strict", "--no-require-check-standard"])
    assert res.exit_code == 0, res.output
    summary = json.loads((tmp_path / "o2" / "qc_summary.json").read_text(encoding="utf-8"))
    assert summary["all_pass"] is True and summary["settings"]["suitability"]["require_check_standard"] is False


def test_regression_manifest_that_is_not_an_object_is_refused(tmp_path):
    # A manifest.json holding valid JSON that is not an object used to end in an
    # AttributeError traceback.
    hand_table(["A"]).to_csv(tmp_path / "results.csv", index=False)
    (tmp_path / "manifest.json").write_text("[1, 2]\n", encoding="utf-8")
    from gpctools.errors import InputFormatError

    with pytest.raises(InputFormatError, match="not a JSON object") as e:
        run_qc(tmp_path / "results.csv", hand_specs(), None, calibration=cal_summary())
    assert e.value.path.endswith("manifest.json")


# ============================================================================ plots and writers


def _transfer_result(temperatures=(60.0,)):
    """A run-series analysis from measured averages (Mayo with C = 14.8 at 60 °C)."""
    from gpctools.simulate import simulate_series
    from gpctools.transfer import analyse_series, run_series_from_rows

    rows = []
    for T in temperatures:
        # C rises 3 % per 10 K: our choice, enough for an ln C against 1/T line.
        C = 14.8 * 1.03 ** ((T - 60.0) / 10.0)
        for r in simulate_series([0.0, 0.5e-4, 1e-4, 2e-4, 3e-4, 4e-4], C_A=C, inv_DPn0=5e-4,
                                 M0=104.15, rel_noise=0.01, seed=int(T)):
            r.pop("M0 [g/mol]")
            r.update({"monomer": "styrene", "agent": "1-dodecanethiol", "T [°C]": T,
                      "series": "DDM in styrene", "run": f"{r['run']}-{T:g}"})
            rows.append(r)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return analyse_series(series=run_series_from_rows(rows))


def test_plots_draw_on_the_callers_axes_and_leave_the_backend_alone(tmp_path):
    import matplotlib
    from matplotlib.figure import Figure

    from gpctools.report import plots as P
    from gpctools.report import write_transfer_plots

    res = _transfer_result((50.0, 60.0, 70.0))
    old = matplotlib.get_backend()
    matplotlib.use("pdf")  # stands for a notebook user's own backend
    try:
        fig = Figure()
        ax1, ax2 = fig.subplots(1, 2)
        g = res.groups[0]
        assert P.plot_mayo_panel(res, g, "Mn", "C_A", ax=ax1) is ax1
        assert P.plot_arrhenius(*res.arrhenius[0], ax=ax2) is ax2
        assert ax1.lines and ax2.lines and len(fig.axes) == 2
        assert P.plot_lnP(res, g) is None  # measured averages: no distribution, no CLD
        paths = write_transfer_plots(res, tmp_path / "plots")
        assert matplotlib.get_backend() == "pdf"
    finally:
        matplotlib.use(old)
    assert sorted(k.split("_")[0] for k in paths) == ["plots/arrhenius"] * 2 + ["plots/mayo"] * 3


def test_png_bytes_deterministic_and_without_metadata(tmp_path):
    from gpctools.report import write_transfer_plots

    res = _transfer_result()
    a = write_transfer_plots(res, tmp_path / "a")
    b = write_transfer_plots(res, tmp_path / "b")
    assert a.keys() == b.keys() and a
    for k in a:
        data = a[k].read_bytes()
        assert data[:8] == b"\x89PNG\r\n\x1a\n"
        assert data == b[k].read_bytes()  # re-runs compare equal
        assert b"atplotlib" not in data  # no "Software" text chunk naming the library version


def _python_files(folder: Path):
    return sorted(p for p in folder.rglob("*.py") if "__pycache__" not in p.parts)


def test_no_module_uses_pyplot_or_the_global_backend():
    import ast

    pkg = Path(__file__).resolve().parent.parent / "gpctools"
    for path in _python_files(pkg):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Import):
                assert not any(a.name == "matplotlib.pyplot" for a in node.names), path
            elif isinstance(node, ast.ImportFrom):
                assert node.module != "matplotlib.pyplot", path
                assert not (node.module == "matplotlib" and any(a.name == "pyplot" for a in node.names)), path
            elif isinstance(node, ast.Attribute) and node.attr == "use":
                assert not (isinstance(node.value, ast.Name) and node.value.id == "matplotlib"), path

