"""The batch review page (``review.html``) and its SVG plots (issue 15, item 1)."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import numpy as np
import pytest
from test_report import need_chromium, run_chromium  # the helpers of the QC report's browser test

from gpctools.cli import app
from gpctools.report.review import PARTS, REVIEW_PAGE, ReviewSink, review_rows, write_review
from gpctools.report.svg import OKABE_ITO, SvgPlot, downsample, nice_ticks, style_of


@pytest.fixture(scope="module")
def batch_out(tmp_path_factory, sample_runs_dir):
    """The demo batch run through the CLI with the review page (default options)."""
    from typer.testing import CliRunner

    out = tmp_path_factory.mktemp("review") / "out"
    r = CliRunner().invoke(app, ["batch", str(sample_runs_dir / "batch.csv"), "-m",
                                 str(sample_runs_dir / "method.toml"), "-o", str(out)])
    assert r.exit_code == 0, r.output
    return out


def _injection_count(sample_runs_dir: Path) -> int:
    return len((sample_runs_dir / "batch.csv").read_text().strip().splitlines()) - 1


# ============================================================================ SVG pieces


def test_downsample_keeps_every_extreme():
    # numpy as the reference: the max and min of the curve and of every bucket survive
    rng = np.random.default_rng(1)
    x = np.linspace(10, 25, 6000)
    y = np.exp(-((x - 15) ** 2)) + rng.normal(0, 0.01, x.size)
    y[4321] = 5.0  # a spike must stay visible
    xs, ys = downsample(x, y, 150)
    assert xs.size <= 300 and np.all(np.diff(xs) > 0)
    assert ys.max() == y.max() == 5.0 and ys.min() == y.min()
    assert xs[np.argmax(ys)] == x[4321]
    small_x, small_y = downsample(x[:100], y[:100], 150)  # short curves come back whole
    assert np.array_equal(small_x, x[:100]) and np.array_equal(small_y, y[:100])


def test_nice_ticks_are_round_and_inside():
    # common practice: steps of 1, 2, 2.5 or 5 times a power of ten
    assert nice_ticks(10.0, 25.0, 8) == [10.0, 12.0, 14.0, 16.0, 18.0, 20.0, 22.0, 24.0]
    assert nice_ticks(-0.3, 1.4, 4) == [0.0, 0.5, 1.0]
    ticks = nice_ticks(11.73, 20.61, 5)
    assert all(11.73 <= t <= 20.61 for t in ticks) and len(ticks) >= 4


def test_palette_is_okabe_ito_and_styles_stay_distinct():
    # published: Okabe & Ito (2002), "Color Universal Design" palette (hex values from memory)
    assert set(OKABE_ITO) == {"#000000", "#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00",
                              "#CC79A7"}
    styles = [style_of(k) for k in range(32)]
    assert len(set(styles)) == 32  # 8 colours x 4 dash patterns before any repeat


def test_legend_is_outside_the_plot_area():
    p = SvgPlot((0, 10), (0, 1), uid="t", title="x")
    for k in range(12):
        p.line([0, 5, 10], [0.1, 0.9, 0.2], colour=style_of(k)[0], label=f"curve {k}")
    svg = p.render()
    legend = svg.split("</g>", 1)[1]  # everything after the clipped data group
    xs = [float(v) for v in re.findall(r" x1?='([\d.]+)'", legend)]
    assert xs and min(xs) >= p.right  # no legend mark inside the data area
    # a legend longer than the plot makes the SVG taller instead of overlapping
    assert int(re.search(r"height='(\d+)'", svg).group(1)) >= p.top + 15 * 12


def test_svg_text_is_escaped():
    p = SvgPlot((0, 1), (0, 1), uid="e", title="<script>alert(1)</script>", xlabel="a & b")
    svg = p.render()
    assert "<script>" not in svg and "&lt;script&gt;" in svg and "a &amp; b" in svg


# ============================================================================ the page


def test_batch_writes_review_page_by_default(batch_out, sample_runs_dir):
    page = batch_out / REVIEW_PAGE
    assert page.is_file() and not (batch_out / PARTS).exists()  # fragments removed
    html = page.read_text(encoding="utf-8")
    n = _injection_count(sample_runs_dir)
    for sec in ("summary", "calibration", "overlays", "injections"):
        assert f'id="{sec}"' in html
    assert html.count("class='plot'") == 2 * n + 2 + 4  # 2 per injection, curve + residuals, 4 products
    assert html.count('class="injection"') == n
    # self-contained: no script, nothing loaded from outside (the SVG namespace is a name, not a load)
    assert "<script" not in html.lower()
    assert not re.search(r"(src|href)=['\"]https?:", html)
    for what in ("baseline window", "fitted baseline", "integration limits", "flow marker", "Mn ", "Mw ", "Mp "):
        assert what in html
    assert "product LC-110" in html and "R² = 0.99999" in html


def test_review_can_be_switched_off(tmp_path, sample_runs_dir, cli_runner):
    r = cli_runner.invoke(app, ["batch", str(sample_runs_dir / "batch.csv"), "-m",
                                str(sample_runs_dir / "method.toml"), "-o", str(tmp_path / "o"), "--no-review"])
    assert r.exit_code == 0, r.output
    assert not (tmp_path / "o" / REVIEW_PAGE).exists() and not (tmp_path / "o" / PARTS).exists()


def test_cap_lists_the_rest(tmp_path, sample_runs_dir, demo_method):
    from gpctools.batch import run_batch

    sheet = sample_runs_dir / "batch.csv"
    rows = review_rows(sheet, 3)
    assert len(rows) == 3
    out = tmp_path / "o"
    with pytest.warns(Warning):
        res = run_batch(sheet, demo_method, keep_distributions=False, on_result=ReviewSink(out / PARTS, rows))
    assert len(list((out / PARTS).iterdir())) == 3  # only the capped rows were drawn in the workers
    page = write_review(res, out, limit=3)
    html = page.read_text(encoding="utf-8")
    n = _injection_count(sample_runs_dir)
    assert html.count('class="injection"') == 3
    assert 'id="not-shown"' in html and f"Not drawn ({n - 3})" in html
    assert "--review-all" in html


def test_review_from_kept_results_without_sink(tmp_path, sample_runs_dir, demo_method):
    # a notebook user: run_batch keeps the results, write_review draws them itself
    from gpctools.batch import run_batch

    with pytest.warns(Warning):
        res = run_batch(sample_runs_dir / "batch.csv", demo_method)
    html = write_review(res, tmp_path, limit=None).read_text(encoding="utf-8")
    assert html.count('class="injection"') == _injection_count(sample_runs_dir)


def test_failed_rows_are_listed(tmp_path, sample_runs_dir, demo_method):
    from gpctools.batch import run_batch

    folder = tmp_path / "s"
    shutil.copytree(sample_runs_dir, folder)
    text = (folder / "batch.csv").read_text().splitlines()
    text.append("GONE<b>,exports/missing.csv,sample,LC-110,,,,")
    (folder / "batch.csv").write_text("\n".join(text) + "\n")
    with pytest.warns(Warning):
        res = run_batch(folder / "batch.csv", demo_method)
    html = write_review(res, tmp_path / "o").read_text(encoding="utf-8")
    assert 'id="failed"' in html and "GONE&lt;b&gt;" in html and "GONE<b>" not in html


def test_review_page_in_headless_chromium(batch_out, tmp_path):
    need_chromium()
    page = batch_out / REVIEW_PAGE
    shot = tmp_path / "review.png"
    res = run_chromium([f"--screenshot={shot}", "--window-size=1200,2400", page.as_uri()], tmp_path)
    assert shot.is_file() and shot.stat().st_size > 20_000, res.stderr[-2000:]
    dom = run_chromium(["--dump-dom", page.as_uri()], tmp_path).stdout
    for sec in ("summary", "calibration", "overlays", "injections"):
        assert f'id="{sec}"' in dom
    assert dom.count("<svg") >= 10 and "Calibration curve" in dom
    # the screenshot is not blank: it holds many colours (plots), not one background
    from PIL import Image  # matplotlib depends on pillow

    with Image.open(shot) as img:
        colours = img.convert("RGB").getcolors(maxcolors=1 << 20)
    assert colours is not None and len(colours) > 50
    shutil.copy(shot, batch_out / "review-screenshot.png")


def test_a_plot_that_fails_never_stops_the_batch(tmp_path, sample_runs_dir, demo_method):
    # a result whose distribution cannot be drawn (no slices): the sink notes it on the page
    from dataclasses import replace

    from gpctools.batch import BatchEntry, process_injection

    res = process_injection(sample_runs_dir / "exports" / "LC110-A1.csv", demo_method)
    broken = replace(res, distribution=None)
    entry = BatchEntry(2, "BROKEN", "x.csv", tmp_path / "x.csv", "sample", None, {})
    ReviewSink(tmp_path / PARTS)(entry, broken)  # does not raise
    text = (tmp_path / PARTS / "row2.json").read_text()
    assert "could not be drawn" in text and "AttributeError" in text
