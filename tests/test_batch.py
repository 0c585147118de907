"""Batch processing: one row per injection, failures isolated, outputs atomic, inputs untouched."""

from __future__ import annotations

import hashlib
import json
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from gpctools import simulate
from gpctools.batch import process_injection, process_trace, read_batch_sheet, run_batch
from gpctools.demo import write_chromatogram, write_sample_runs
from gpctools.errors import InputFormatError
from gpctools.method import load_method
from gpctools.report import DistributionWriter, write_batch

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory) -> Path:
    d = tmp_path_factory.mktemp("runs")
    write_sample_runs(d)
    return d


def _hashes(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def test_demo_batch_matches_truth_within_1_percent(demo_dir, tmp_path):
    # The truth is analytic (Schulz-Zimm and log-normal averages, IUPAC Gold Book /
    # SCIENCE.md section 8); 1 % is the acceptance stated for the demo.
    method = load_method(demo_dir / "method.toml")
    res = run_batch(demo_dir / "batch.csv", method, on_result=DistributionWriter(tmp_path / "out" / "distributions"))
    truth = pd.read_csv(demo_dir / "truth.csv").set_index("file")  # replicates share a sample_id
    assert res.failed == 0
    for _, r in res.table.iterrows():
        t = truth.loc[r["file"]]
        for col in ("Mn [g/mol]", "Mw [g/mol]", "Mz [g/mol]", "dispersity [-]"):
            assert r[col] == pytest.approx(t[col], rel=0.01), (r["sample_id"], col)
        # The flow marker undoes the simulated pump error (V_obs = V_true (1 + err)).
        assert r["flow correction factor [-]"] == pytest.approx(1 / (1 + t["flow error [-]"]), abs=3e-4)


def test_bundled_sample_runs_are_what_the_generator_writes(tmp_path):
    # Guards against a hand edit of sample_runs/ drifting from truth.csv.
    write_sample_runs(tmp_path)
    names = ["batch.csv", "truth.csv", "method.toml", "standards.csv", "spec_limits.csv"]
    names += [f"history/{p.name}" for p in sorted((tmp_path / "history").glob("*.csv"))]
    assert len(names) == 11
    for name in names:
        assert (tmp_path / name).read_text() == (ROOT / "sample_runs" / name).read_text(), name


def test_one_bad_injection_does_not_sink_the_batch(demo_dir, tmp_path):
    d = tmp_path / "b"
    shutil.copytree(demo_dir, d)
    (d / "exports" / "broken.csv").write_text("Volume (mL),RI (mV)\n1,2\n3,abc\n", encoding="utf-8")
    sheet = d / "batch.csv"
    text = sheet.read_text()
    text += "BROKEN,exports/broken.csv,sample,LC-110,,,,\nMISSING,exports/none.csv,sample,,,,,\n"
    text += "BADROLE,exports/LC110-A1.csv,referee,,,,,\n"
    sheet.write_text(text)
    before = _hashes(d)
    res = run_batch(sheet, load_method(d / "method.toml"))
    assert _hashes(d) == before  # inputs never modified
    t = res.table.set_index("sample_id")
    assert res.failed == 3
    assert t.loc["BROKEN", "status"] == "error" and "broken.csv" in t.loc["BROKEN", "error"]
    assert "none.csv" in t.loc["MISSING", "error"]
    assert "unknown role" in t.loc["BADROLE", "error"]
    assert (t.drop(index=["BROKEN", "MISSING", "BADROLE"])["status"] == "ok").all()
    assert np.isnan(t.loc["BROKEN", "Mn [g/mol]"])


def test_outputs_written_and_readable(demo_dir, tmp_path):
    res = run_batch(demo_dir / "batch.csv", load_method(demo_dir / "method.toml"))
    paths = write_batch(res, tmp_path / "o")
    out = tmp_path / "o"
    back = pd.read_csv(out / "results.csv")
    assert list(back["sample_id"]) == list(res.table["sample_id"])
    assert "Mz+1 [g/mol]" in back.columns and "dispersity [-]" in back.columns
    from openpyxl import load_workbook

    wb = load_workbook(out / "results.xlsx", read_only=True)
    ws = wb["results"]
    header = [c.value for c in next(ws.iter_rows(max_row=1))]
    assert header == [str(c) for c in res.table.columns]
    dist = pd.read_csv(next((out / "distributions").glob("LC110-A_row*.csv")))
    assert {"volume [mL]", "M [g/mol]", "dw/dlogM [-]", "cumulative mass fraction [-]"} <= set(dist.columns)
    # dw/dlogM integrates to 1 over log10 M (definition of the normalised distribution)
    logm = np.log10(dist["M [g/mol]"].to_numpy())
    assert abs(np.trapezoid(dist["dw/dlogM [-]"], logm)) == pytest.approx(1.0, rel=0.01)
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["injections"] == len(res.table)
    assert not list(out.rglob("*.part"))  # no temporary files left behind
    assert paths["results.csv"].exists()


def test_same_answer_twice(demo_dir):
    m = load_method(demo_dir / "method.toml")
    a = run_batch(demo_dir / "batch.csv", m).table
    b = run_batch(demo_dir / "batch.csv", m).table
    pd.testing.assert_frame_equal(a, b)


def test_parallel_workers_give_identical_table(demo_dir, tmp_path):
    m = load_method(demo_dir / "method.toml")
    a = run_batch(demo_dir / "batch.csv", m).table
    b = run_batch(demo_dir / "batch.csv", m, workers=2, on_result=DistributionWriter(tmp_path / "distributions")).table
    pd.testing.assert_frame_equal(a, b)


def test_batch_sheet_needs_sample_id_and_file(tmp_path):
    p = tmp_path / "s.csv"
    p.write_text("name,path2\na,b\n")
    with pytest.raises(InputFormatError, match="sample_id"):
        read_batch_sheet(p)


def test_batch_sheet_template_reads(tmp_path):
    for name in ("batch.csv", "batch.xlsx"):
        entries = read_batch_sheet(ROOT / "gpctools" / "templates" / name)
        assert [e.sample_id for e in entries] == ["GRADE-A-01", "GRADE-A-01", "CHECK-01"]
        assert entries[2].role == "check_standard"
        assert entries[2].metadata["assigned Mw [g/mol]"] in (180000, 180000.0, "180000")


def test_low_m_tail_raises_mn_sensitivity(tmp_path):
    # A low-M tail moves Mn when the late limit moves, Mw hardly (SCIENCE.md section 9).
    cal = simulate.default_calibration()
    main = simulate.schulz_zimm(80_000, 2.0)
    tail = simulate.lognormal(1_800, 1.3)
    mix = simulate.mixture([(0.97, main), (0.03, tail)])
    V, h = simulate.chromatogram(mix, cal, noise=0.02, seed=3)
    write_chromatogram(tmp_path / "t.csv", V, h)
    write_chromatogram(tmp_path / "c.csv", *simulate.chromatogram(main, cal, noise=0.02, seed=3))
    mtext = (ROOT / "gpctools" / "templates" / "method.toml").read_text()
    (tmp_path / "method.toml").write_text(mtext)
    shutil.copy(ROOT / "gpctools" / "templates" / "standards.csv", tmp_path / "standards.csv")
    m = load_method(tmp_path / "method.toml")
    m = type(m)(**{**m.__dict__, "marker_search": None, "marker_reference": None})
    r_tail = process_injection(tmp_path / "t.csv", m)
    r_clean = process_injection(tmp_path / "c.csv", m)
    assert abs(r_tail.Mn_shift_pct) > 5 * abs(r_clean.Mn_shift_pct)
    assert abs(r_tail.Mn_shift_pct) > 3 * abs(r_tail.Mw_shift_pct)


def test_regression_limit_shift_with_decreasing_volumes(tmp_path):
    # process_trace accepts slices in any order (as correct_signal and compute_distribution
    # do); the Mn/Mw limit sensitivity used to come out NaN for decreasing volumes because
    # the slice widths were taken on the unsorted axis. Same trace reversed, same answer
    # (derived: the sums do not depend on slice order); 1e-9 relative allows summation order.
    mtext = (ROOT / "gpctools" / "templates" / "method.toml").read_text()
    (tmp_path / "method.toml").write_text(mtext)
    shutil.copy(ROOT / "gpctools" / "templates" / "standards.csv", tmp_path / "standards.csv")
    m = load_method(tmp_path / "method.toml")
    m = type(m)(**{**m.__dict__, "marker_search": None, "marker_reference": None})
    V, h = simulate.chromatogram(simulate.schulz_zimm(80_000, 2.0), simulate.default_calibration(),
                                 noise=0.02, seed=3)
    up = process_trace(V, h, m)
    down = process_trace(V[::-1], h[::-1], m)
    assert np.isfinite(up.Mn_shift_pct) and np.isfinite(up.Mw_shift_pct)
    assert down.Mn_shift_pct == pytest.approx(up.Mn_shift_pct, rel=1e-9, abs=1e-12)
    assert down.Mw_shift_pct == pytest.approx(up.Mw_shift_pct, rel=1e-9, abs=1e-12)


def test_regression_replicate_distributions_each_in_written_paths(demo_dir, tmp_path):
    # Replicate injections share a sample_id; the returned path mapping used to be keyed
    # by sample_id, so all but the last replicate's distribution fell out of it.
    d = tmp_path / "b"
    shutil.copytree(demo_dir, d)
    sheet = d / "batch.csv"
    sheet.write_text(sheet.read_text() + "LC110-A,exports/LC110-A1.csv,sample,,,,,\n")
    res = run_batch(sheet, load_method(d / "method.toml"))
    ids = [e.sample_id for e, r in zip(res.entries, res.injections) if r is not None]
    assert len(ids) == len(set(ids)) + 4  # three replicate pairs in the demo, one injection added above
    paths = write_batch(res, tmp_path / "o")
    written = [p for k, p in paths.items() if k.startswith("distributions/")]
    assert len(written) == len(ids)
    assert sorted(written) == sorted((tmp_path / "o" / "distributions").glob("*.csv"))


def test_on_result_streams_each_processed_injection_also_from_workers(demo_dir, tmp_path):
    d = tmp_path / "b"
    shutil.copytree(demo_dir, d)
    sheet = d / "batch.csv"
    sheet.write_text(sheet.read_text() + "MISSING,exports/none.csv,sample,,,,,\n")
    m = load_method(d / "method.toml")
    seen = []
    res = run_batch(sheet, m, on_result=lambda entry, result: seen.append((entry.row, result.sample_id)))
    ok = res.table["status"] == "ok"
    assert [s for _, s in seen] == list(res.table.loc[ok, "sample_id"])  # failed rows are not passed on
    assert "MISSING" not in {s for _, s in seen}
    # Worker processes write the same tables write_batch writes afterwards, byte for byte.
    run_batch(sheet, m, workers=2, keep_distributions=False, on_result=DistributionWriter(tmp_path / "stream"))
    written = {p.name: p for k, p in write_batch(res, tmp_path / "o").items() if k.startswith("distributions/")}
    streamed = {p.name: p for p in (tmp_path / "stream").glob("*.csv")}
    assert streamed.keys() == written.keys() and len(written) == int(ok.sum())
    assert all(streamed[n].read_bytes() == written[n].read_bytes() for n in written)
