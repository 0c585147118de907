"""The whole distribution as evidence: tails in closed form against integration, measured
tails of known curves, and the distribution tables gpctools batch writes."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from gpctools.chainlength import mixed_termination
from gpctools.kinetics.evidence import (
    HIGH_SHOULDER_FACTOR,
    LOW_TAIL_FACTOR,
    average_distributions,
    model_tails,
    read_distribution,
    tails_of_curve,
)


@pytest.mark.parametrize(("tau", "beta"), [(1e-3, 0.0), (0.0, 1e-3), (3e-4, 9e-4)])
def test_model_tails_against_numerical_integration(tau, beta):
    # the closed form (gamma mixture) against scipy quadrature of the mixed-termination
    # distribution's dw/dlog10 M over log10 M. rtol 1e-6: quadrature tolerance.
    M0 = 100.0
    dist = mixed_termination(tau, beta).distribution(M0)
    Mw = dist.averages["Mw"]
    f = lambda x: float(dist(np.array([10.0**x]))[0])  # noqa: E731
    lo = integrate.quad(f, -3.0, math.log10(Mw * LOW_TAIL_FACTOR), limit=200)[0]
    hi = integrate.quad(f, math.log10(Mw * HIGH_SHOULDER_FACTOR), 9.0, limit=200)[0]
    t = model_tails(tau, beta, M0)
    assert t.low == pytest.approx(lo, rel=1e-6)
    assert t.high == pytest.approx(hi, rel=1e-6, abs=1e-12)
    assert t.Mw == pytest.approx(Mw, rel=1e-12)


def test_most_probable_tail_values_from_the_notes():
    # derived (module docstring): most probable 1 − e^(−0.1)·1.1 and e^(−10)·11
    t = model_tails(1e-3, 0.0)
    assert t.low == pytest.approx(1 - math.exp(-0.1) * 1.1, rel=1e-12)
    assert t.high == pytest.approx(math.exp(-10.0) * 11.0, rel=1e-12)


def test_tails_of_a_log_normal_curve():
    # mass log-normal in ln M with μ, s: Mw = e^(μ + s²/2), so the mass below Mw/20 is
    # Φ((s²/2 − ln 20)/s) and above 5·Mw is 1 − Φ((s²/2 + ln 5)/s) [derived]; Đ = 2.2
    # gives s² = ln 2.2 (docs/science.md, section 8). rtol 1e-3: trapezoids on 4 000
    # points over ±8 s.
    s = math.sqrt(math.log(2.2))
    mu = math.log(5e4)
    lnM = np.linspace(mu - 8 * s, mu + 8 * s, 4000)
    w = stats.norm.pdf(lnM, mu, s) * math.log(10.0)  # dw/dlog10 M
    t = tails_of_curve(np.exp(lnM), w)
    assert t.Mw == pytest.approx(math.exp(mu + s * s / 2), rel=1e-4)
    assert t.low == pytest.approx(stats.norm.cdf((s * s / 2 - math.log(20)) / s), rel=1e-3)
    assert t.high == pytest.approx(stats.norm.sf((s * s / 2 + math.log(5)) / s), rel=1e-3)
    # a shift of every M by one factor leaves both unchanged (the measures use their own Mw)
    t2 = tails_of_curve(np.exp(lnM) * 0.7, w)
    assert (t2.low, t2.high) == pytest.approx((t.low, t.high), rel=1e-9)


def test_distribution_table_as_batch_writes_it(tmp_path):
    from gpctools.distribution import TABLE_COLUMNS

    s = math.sqrt(math.log(2.0))
    lnM = np.linspace(math.log(5e4) - 6 * s, math.log(5e4) + 6 * s, 500)
    w = stats.norm.pdf(lnM, math.log(5e4), s) * math.log(10.0)
    cols = [np.zeros_like(lnM), np.exp(lnM)[::-1], lnM[::-1] / math.log(10), w[::-1] / w.sum(),
            w[::-1], np.zeros_like(lnM)]
    path = tmp_path / "S_row2.csv"
    path.write_text(",".join(TABLE_COLUMNS) + "\n" + "".join(
        ",".join(f"{c[i]:.10g}" for c in cols) + "\n" for i in range(len(lnM))), encoding="utf-8")
    d = read_distribution(path)
    # log-normal Mn = e^(μ − s²/2), Mw = e^(μ + s²/2) (docs/science.md, section 8); rtol 1e-3
    assert d.Mn == pytest.approx(5e4 * math.exp(-s * s / 2), rel=1e-3)
    assert d.Mw == pytest.approx(5e4 * math.exp(s * s / 2), rel=1e-3)
    assert np.all(np.diff(d.M) > 0)  # increasing M whatever the file's order
    avg = average_distributions([d, d])
    assert avg.Mw == pytest.approx(d.Mw, rel=1e-3)
    bad = tmp_path / "bad.csv"
    bad.write_text("M,w\n1,2\n", encoding="utf-8")
    from gpctools.errors import InputFormatError

    with pytest.raises(InputFormatError, match="M \\[g/mol\\]"):
        read_distribution(bad)
