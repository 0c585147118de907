"""Tests of gpctools.simulate against scipy (a reference library) and closed forms.

The distribution callables must integrate to 1 over log10 M and their stated averages
must equal the moments integrated numerically with scipy.integrate.quad. Closed forms:
Schulz-Zimm [published: IUPAC Gold Book], log-normal [derived, docs/science.md, section 8].
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import integrate
from scipy.integrate import trapezoid  # numpy < 2 has no np.trapezoid
from scipy.optimize import minimize_scalar

from gpctools.chainlength import most_probable
from gpctools.demo import write_chromatogram
from gpctools.errors import DataError
from gpctools.simulate import (
    DEFAULT_STANDARDS,
    averages_from_dwdlogM,
    chromatogram,
    default_calibration,
    lognormal,
    mixture,
    schulz_zimm,
    schulz_zimm_from_averages,
    simulate_series,
)


def moments_by_quad(
    model, centre_log: float, below: float = 20.0, above: float = 5.0
) -> dict[str, float]:
    """∫ f dlogM, Mn, Mw, Mz, Mz+1 of dw/dlog10M = f by adaptive quadrature (scipy).

    The range runs ``below`` decades under and ``above`` decades over the peak: the
    low-M tail of a Schulz-Zimm 1/M moment falls only as M^b per decade.
    """
    lo, hi = centre_log - below, centre_log + above

    def q(k: int) -> float:
        # substitute x = log10 M; the mass moment of order k is ∫ f(10^x) 10^(k x) dx
        val, _ = integrate.quad(
            lambda x: float(model(np.array([10.0**x]))[0]) * 10.0 ** (k * (x - centre_log)),
            lo,
            hi,
            points=[centre_log],
            limit=400,
            epsabs=0.0,
            epsrel=1e-12,
        )
        return val * 10.0 ** (k * centre_log)

    m_1, m0, m1, m2, m3 = q(-1), q(0), q(1), q(2), q(3)
    return {"area": m0, "Mn": m0 / m_1, "Mw": m1 / m0, "Mz": m2 / m1, "Mz1": m3 / m2}


MODELS = [
    ("schulz-zimm b=1", lambda: schulz_zimm(40_000.0, 1.0), math.log10(80_000.0)),
    ("schulz-zimm b=2", lambda: schulz_zimm(40_000.0, 2.0), math.log10(120_000.0)),
    ("schulz-zimm b=0.7", lambda: schulz_zimm(25_000.0, 0.7), math.log10(60_000.0)),
    ("schulz-zimm b=8", lambda: schulz_zimm(100_000.0, 8.0), math.log10(112_500.0)),
    ("most probable", lambda: most_probable(15_000.0), math.log10(30_000.0)),
    ("log-normal D=1.1", lambda: lognormal(2e5, 1.1), math.log10(2e5)),
    ("log-normal D=2.5", lambda: lognormal(5e4, 2.5), math.log10(5e4)),
]


@pytest.mark.parametrize("name, make, centre", MODELS, ids=[m[0] for m in MODELS])
def test_distributions_integrate_to_one_and_match_quad_moments(name, make, centre) -> None:
    model = make()
    got = moments_by_quad(model, centre)
    # scipy quad to 1e-12 relative from 20 decades below to 5 above the peak: the tails
    # beyond hold < 1e-13 (slowest: the 1/M moment of b = 0.7, ∝ M^0.7). Tolerance 1e-8.
    assert got["area"] == pytest.approx(1.0, rel=1e-8)
    for key in ("Mn", "Mw", "Mz", "Mz1"):
        assert got[key] == pytest.approx(model.averages[key], rel=1e-8), (name, key)
    assert model.averages["dispersity"] == pytest.approx(
        model.averages["Mw"] / model.averages["Mn"], rel=1e-12
    )


@pytest.mark.parametrize("Mn, b", [(40_000.0, 1.0), (40_000.0, 2.0), (7_000.0, 3.5)])
def test_schulz_zimm_closed_forms_and_peak(Mn: float, b: float) -> None:
    model = schulz_zimm(Mn, b)
    a = b / Mn
    # published: IUPAC Gold Book, Schulz-Zimm: Mn = b/a, Mw = (b+1)/a, Mz = (b+2)/a,
    # Đ = (b+1)/b; exact arithmetic, rounding only.
    assert model.averages["Mn"] == pytest.approx(b / a, rel=1e-12)
    assert model.averages["Mw"] == pytest.approx((b + 1) / a, rel=1e-12)
    assert model.averages["Mz"] == pytest.approx((b + 2) / a, rel=1e-12)
    assert model.averages["dispersity"] == pytest.approx((b + 1) / b, rel=1e-12)
    # maximum of dw/dlogM at M = (b+1)/a = Mw [derived]: scipy's bounded minimiser.
    res = minimize_scalar(
        lambda x: -float(model(np.array([10.0**x]))[0]),
        bounds=(math.log10(Mn) - 1, math.log10(Mn) + 2),
        method="bounded",
        options={"xatol": 1e-10},
    )
    # xatol 1e-10 decades on a smooth maximum: M to ~1e-6 relative (flat top); 1e-5.
    assert 10.0**res.x == pytest.approx((b + 1) / a, rel=1e-5)


def test_schulz_zimm_from_averages() -> None:
    # IUPAC Gold Book: Đ = (b+1)/b, so Mn and Mw fix b; rounding only
    model = schulz_zimm_from_averages(52_000.0, 96_000.0)
    assert model.averages["Mn"] == pytest.approx(52_000.0, rel=1e-12)
    assert model.averages["Mw"] == pytest.approx(96_000.0, rel=1e-12)
    with pytest.raises(DataError):
        schulz_zimm_from_averages(5e4, 4e4)


def test_averages_from_dwdlogM_on_a_lognormal_grid() -> None:
    # derived, docs/science.md, section 8: Mn = Mp e^(-s²/2), Mw = Mp e^(s²/2), s² = ln Đ;
    # trapezoid on 20,001 log-spaced points over ±8 SD: error O(h²) ~ 1e-8; 1e-6
    M = np.geomspace(1e2, 1e8, 20_001)
    Mn, Mw = averages_from_dwdlogM(M, lognormal(1e5, 1.8)(M))
    assert Mn == pytest.approx(1e5 * math.exp(-math.log(1.8) / 2), rel=1e-6)
    assert Mw == pytest.approx(1e5 * math.exp(math.log(1.8) / 2), rel=1e-6)


def test_simulate_series_rows() -> None:
    # instantaneous rows: discrete most probable, DPn = 1/λ and DPw = (2 − λ)/λ with
    # λ = 1/DPn0 + C_A r (Flory 1953; Mayo 1943); rounding only
    M0, C, a = 104.15, 14.8, 5e-4  # styrene M0 [derived]; C of 1-dodecanethiol [published: Carraher]
    rows = simulate_series([0.0, 1e-4], C_A=C, inv_DPn0=a, M0=M0, monomer_conc=8.0)
    for r, row in zip([0.0, 1e-4], rows):
        lam = a + C * r
        assert row["Mn [g/mol]"] == pytest.approx(M0 / lam, rel=1e-12)
        assert row["Mw [g/mol]"] == pytest.approx(M0 * (2 - lam) / lam, rel=1e-12)
        assert row["[A] [mol/L]"] == pytest.approx(8.0 * r, rel=1e-15)
        assert "conversion [-]" not in row
    # at conversion x: Mn = M0 x / ∫0^x λ dx' (scipy quad of λ(x') written here; 1e-10)
    x = 0.1
    row = simulate_series([2e-4], C_A=C, inv_DPn0=a, M0=M0, conversion=x)[0]
    inv = integrate.quad(lambda xp: a + C * 2e-4 * (1 - xp) ** (C - 1), 0, x, epsrel=1e-13)[0] / x
    assert row["Mn [g/mol]"] == pytest.approx(M0 / inv, rel=1e-10)
    assert row["conversion [-]"] == x
    # seeded noise is reproducible and moves the values
    noisy = simulate_series([1e-4], C_A=C, inv_DPn0=a, M0=M0, rel_noise=0.01, seed=3)
    again = simulate_series([1e-4], C_A=C, inv_DPn0=a, M0=M0, rel_noise=0.01, seed=3)
    assert noisy == again and noisy[0]["Mn [g/mol]"] != rows[1]["Mn [g/mol]"]


def test_lognormal_closed_forms() -> None:
    model = lognormal(1e5, 2.0)
    s2 = math.log(2.0)
    # derived, docs/science.md, section 8 (dw/dlnM Gaussian): rounding only
    assert model.averages["Mn"] == pytest.approx(1e5 * math.exp(-s2 / 2), rel=1e-12)
    assert model.averages["Mw"] == pytest.approx(1e5 * math.exp(s2 / 2), rel=1e-12)
    assert model.averages["Mz"] == pytest.approx(1e5 * math.exp(3 * s2 / 2), rel=1e-12)
    # symmetric in log M about Mp (definition of a log-normal)
    up, down = model(np.array([1e5 * 3.0]))[0], model(np.array([1e5 / 3.0]))[0]
    assert up == pytest.approx(down, rel=1e-12)


def test_mixture_moments_match_quad() -> None:
    parts = [(0.7, schulz_zimm(40_000.0, 2.0)), (0.3, lognormal(3e5, 1.5))]
    mix = mixture(parts)
    got = moments_by_quad(mix, math.log10(1e5))
    # scipy quad on a sum of two smooth peaks; same 1e-8 reasoning as above
    assert got["area"] == pytest.approx(1.0, rel=1e-8)
    for key in ("Mn", "Mw", "Mz", "Mz1"):
        assert got[key] == pytest.approx(mix.averages[key], rel=1e-8), key
    assert math.isnan(mix.averages["Mp_dwdlogM"])
    # weights are normalised: doubling both gives the same mixture (definition)
    twice = mixture([(1.4, parts[0][1]), (0.6, parts[1][1])])
    assert twice.averages["Mw"] == pytest.approx(mix.averages["Mw"], rel=1e-12)


@pytest.mark.parametrize(
    "call",
    [
        lambda: schulz_zimm(0.0, 2.0),
        lambda: schulz_zimm(1e4, -1.0),
        lambda: lognormal(1e4, 1.0),
        lambda: lognormal(-1.0, 1.5),
        lambda: mixture([]),
        lambda: mixture([(-1.0, most_probable(1e4))]),
    ],
)
def test_bad_distribution_parameters(call) -> None:
    with pytest.raises(DataError):
        call()


# ============================================================================ chromatogram


def test_chromatogram_places_mass_by_the_calibration() -> None:
    cal = default_calibration()
    model = schulz_zimm(50_000.0, 2.0)
    V, h = chromatogram(model, cal, height=80.0)
    assert V.size == 6000 and V[0] == 8.0 and V[-1] == 26.0
    assert h.max() == pytest.approx(80.0, rel=1e-12)  # scaled to the requested height
    # mass per volume: h ∝ dw/dlogM · |dlogM/dV| (change of variables, derived), so the
    # trapezoid area over V equals the area of dw/dlogM over log M up to the scale factor
    area_V = trapezoid(h, V)
    logM = cal.log_M(V)
    area_logM = trapezoid((h / np.abs(cal.dlogM_dV(V)))[::-1], logM[::-1])
    # both ≈ the same integral on 6000 slices; outside the 8-26 mL record < 1e-3 of mass
    assert area_V == pytest.approx(area_logM, rel=1e-6)


def test_chromatogram_baseline_noise_and_extra_peaks() -> None:
    cal = default_calibration()
    model = lognormal(1e5, 1.5)
    V, clean = chromatogram(model, cal)
    _, raw = chromatogram(
        model,
        cal,
        baseline_offset=2.0,
        baseline_drift=0.1,
        noise=0.5,
        seed=4,
        extra_peaks=[(24.0, 0.1, 30.0)],
    )
    _, again = chromatogram(
        model,
        cal,
        baseline_offset=2.0,
        baseline_drift=0.1,
        noise=0.5,
        seed=4,
        extra_peaks=[(24.0, 0.1, 30.0)],
    )
    assert np.array_equal(raw, again)  # seeded: reproducible
    resid = raw - clean - 2.0 - 0.1 * (V - 8.0) - 30.0 * np.exp(-0.5 * ((V - 24.0) / 0.1) ** 2)
    # 6000 normal draws: the SD is within 3 % of 0.5 (SE 0.9 %), the mean within 0.03 (4 SE)
    assert resid.std() == pytest.approx(0.5, rel=0.03)
    assert abs(resid.mean()) < 0.03
    with pytest.raises(DataError, match="no mass"):
        # Schulz-Zimm at M ≫ 1e8 g/mol: e^(-aM) underflows to 0, no mass on this axis
        chromatogram(schulz_zimm(5e4, 2.0), cal, volume=np.linspace(0.5, 1.0, 10))


def test_default_calibration_standards() -> None:
    cal = default_calibration()
    assert len(cal.Mp) == len(DEFAULT_STANDARDS) == 10
    assert cal.warnings == ()  # residuals within ±5 %, monotonic (common practice)
    assert cal.standard_polymer == "polystyrene" and not cal.is_absolute


@pytest.mark.parametrize(
    "x, col",
    [
        ("volume", "Elution volume [mL]"),
        ("time_min", "Retention time [min]"),
        ("time_s", "Retention time [s]"),
    ],
)
def test_write_chromatogram_readable_by_pandas(tmp_path, x: str, col: str) -> None:
    V = np.linspace(10.0, 12.0, 21)
    h = np.sin(V)
    p = write_chromatogram(
        tmp_path / f"t_{x}.csv",
        V,
        h,
        x=x,
        flow_rate=0.5,
        metadata={"sample": "demo"},
        separator=";",
        decimal=",",
    )
    df = pd.read_csv(p, sep=";", decimal=",", skiprows=1)  # pandas as the independent reader
    assert list(df.columns) == [col, "RI signal [mV]"]
    factor = {"volume": 1.0, "time_min": 1 / 0.5, "time_s": 60 / 0.5}[x]
    # written with 6 decimals: ±5e-7 absolute (plus relative for the seconds column)
    assert df[col].to_numpy() == pytest.approx(V * factor, abs=5e-7 * factor)
    assert df["RI signal [mV]"].to_numpy() == pytest.approx(h, abs=5e-7)
    with pytest.raises(DataError):
        write_chromatogram(tmp_path / "bad.csv", V, h, x="minutes")
