"""Notebook-first API (issue 15, item 4): the lazy ``gpctools`` facade, the display mixin
on every result, ``to_frame()``, the tidy distributions table and the plotting helpers."""

from __future__ import annotations

import importlib
import inspect
import json
import pkgutil
import subprocess
import sys
import warnings

import numpy as np
import pandas as pd
import pytest

import gpctools
from gpctools.display import HTML_ROWS, REPR_CHARS, Display


@pytest.fixture(scope="module")
def batch(sample_runs_dir, demo_method):
    from gpctools.batch import run_batch

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return run_batch(sample_runs_dir / "batch.csv", demo_method)


def test_import_gpctools_is_cheap_and_entry_points_resolve():
    code = ("import sys, json, gpctools as gpc; before = sorted(m for m in ('numpy', 'pandas', 'matplotlib', "
            "'scipy', 'gpctools.batch', 'gpctools.report') if m in sys.modules); "
            "[getattr(gpc, n) for n in gpc.ENTRY_POINTS]; print(json.dumps(before))")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, check=True)
    assert json.loads(r.stdout) == []  # nothing heavy until an entry point is used (PEP 562)
    assert gpctools.run_batch is importlib.import_module("gpctools.batch").run_batch
    assert gpctools.plots is importlib.import_module("gpctools.report.plots")
    assert set(gpctools.ENTRY_POINTS) <= set(dir(gpctools))
    with pytest.raises(AttributeError, match="no attribute 'nope'"):
        gpctools.nope  # noqa: B018


def _result_classes():
    """Every class of the package that has a summary() (the result shape of DEVELOPERS.md)."""
    found = {}
    for info in pkgutil.walk_packages(gpctools.__path__, "gpctools."):
        if info.name in ("gpctools.cli", "gpctools.__main__"):
            continue
        mod = importlib.import_module(info.name)
        for name, cls in inspect.getmembers(mod, inspect.isclass):
            if cls.__module__ == mod.__name__ and callable(getattr(cls, "summary", None)):
                found[f"{mod.__name__}.{name}"] = cls
    return found


def test_every_result_class_uses_the_display_mixin():
    classes = _result_classes()
    assert len(classes) > 60
    missing = [n for n, c in classes.items() if not issubclass(c, Display)]
    generated = [n for n, c in classes.items() if issubclass(c, Display) and c.__repr__ is not Display.__repr__]
    assert missing == [] and generated == []  # a dataclass needs repr=False to keep the mixin's repr


def _check_display(obj):
    text = repr(obj)
    assert len(text) <= REPR_CHARS and text.startswith(type(obj).__name__ + "(")
    html = obj._repr_html_()
    assert html.startswith("<table>") and html.count("<tr>") <= HTML_ROWS + 1
    assert isinstance(obj.to_frame(), pd.DataFrame)


def test_results_show_a_summary_not_a_dump(batch, demo_method):
    for obj in (demo_method, demo_method.calibration, batch, batch.injections[0], batch.injections[0].distribution,
                batch.injections[0].corrected, batch.injections[0].uncertainty):
        _check_display(obj)
    inj = repr(batch.injections[0])
    assert "Mn [g/mol]=" in inj and "dispersity [-]=" in inj
    assert batch.to_frame() is batch.table  # the batch's table, the same object


def test_distributions_long_table(batch):
    long = batch.distributions()
    kept = [(e, r) for e, r in zip(batch.entries, batch.injections) if r is not None]
    assert len(long) == sum(r.distribution.M.size for _, r in kept)
    for e, r in kept:
        part = long[long["row"] == e.row]
        assert (part["sample_id"] == e.sample_id).all()
        np.testing.assert_array_equal(part["M [g/mol]"].to_numpy(), r.distribution.M)
        # derived: log10 M column is log10 of the M column (numpy as the reference)
        np.testing.assert_allclose(part["log10 M [-]"], np.log10(part["M [g/mol]"]), rtol=1e-12)
    assert {"product", "volume [mL]", "dw/dlogM [-]"} <= set(long.columns)


def test_distributions_without_kept_results_says_what_to_do(sample_runs_dir, demo_method):
    from gpctools.batch import run_batch
    from gpctools.errors import DataError

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        lean = run_batch(sample_runs_dir / "batch.csv", demo_method, keep_distributions=False)
    with pytest.raises(DataError, match="keep_distributions=True"):
        lean.distributions()


def test_plot_helpers_draw_on_the_given_axes(batch):
    from matplotlib.figure import Figure

    from gpctools.report import plots

    fig = Figure()
    a1, a2, a3 = fig.subplots(3, 1)
    assert plots.plot_injection(batch.injections[0], ax=a1) is a1
    assert plots.plot_injection_distribution(batch.injections[0], ax=a2) is a2
    assert plots.plot_batch_distributions(batch, product="LC-180", ax=a3) is a3
    assert len(a3.get_lines()) == 3  # LC-180 has three injections in the demo sheet
    # overlay colours: the Okabe-Ito palette (published: Okabe & Ito 2002, values from memory)
    assert [ln.get_color() for ln in a3.get_lines()] == list(plots.OVERLAY_COLOURS[:3])
    for ax in (a1, a2, a3):  # legends sit outside the data area (anchored right of the Axes)
        assert ax.get_legend()._loc == 2 and ax.get_legend().get_bbox_to_anchor().x0 >= ax.bbox.x1 - 1
