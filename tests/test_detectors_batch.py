"""What `gpctools batch` adds for injections processed with [detectors] (issue 16): the mass
recovery (the batch sheet gives the injected mass, the concentration detector the eluted
mass) and the review page's plot of the aligned detector traces.

Truth: the simulated concentration profile of an injection of mass m has area
∫c dV = m (gpctools.simulate.multi_detector_traces builds W(V) = m·dw/dlog M·|dlog M/dV|,
and dw/dlog M has unit area: a change of variable). Inside integration limits the area is
m times the log-normal weight fraction between the molar masses at the limits,
Φ((ln M_hi − μ)/s) − Φ((ln M_lo − μ)/s) with s² = ln Đ (log-normal definition; scipy's
normal cdf), so the expected recovery is that fraction times m over the sheet's mass.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import gpctools.simulate as S
from gpctools import columns as C
from gpctools.batch import read_batch_sheet
from gpctools.cli import app

MP, D = 80_000.0, 1.8  # log-normal sample: peak molar mass [g/mol], dispersity [-]
MASS_G = 2.0e-4  # simulated injected polymer mass [g] = 0.200 mg
RI_CONSTANT, LS_CONSTANT = 5.0e4, 1.0e-5



def _log_M(V):
    return S.default_calibration().log_M(V)


@pytest.fixture(scope="module")
def run(tmp_path_factory, ri_ls_method_text):
    d = tmp_path_factory.mktemp("recovery")
    V, ch = S.multi_detector_traces(S.lognormal(MP, D), _log_M, mass=MASS_G, ri_constant=RI_CONSTANT,
                                    ls_constant=LS_CONSTANT, offsets={"ls": 0.1},
                                    noise={"ri": 0.001, "ls": 0.003}, seed=5)
    (d / "x.csv").write_text(S.multi_detector_export(V, ch), encoding="utf-8")
    standards = "\n".join(f'[[calibration.standard]]\nname = "{n}"\nMp = {m}\nvolume = {v}'
                          for n, m, v in S.DEFAULT_STANDARDS)
    (d / "m.toml").write_text(ri_ls_method_text(standards, ri=RI_CONSTANT, ls=LS_CONSTANT), encoding="utf-8")
    # the same export four times: exact mass, 25 % more claimed (a loss), the concentration x volume
    # route (2.0 mg/mL x 100 uL = 0.200 mg), and no mass at all
    (d / "batch.csv").write_text(
        "sample_id,file,injected mass [mg],concentration [mg/mL],injection volume [µL]\n"
        "exact,x.csv,0.200,,\nloss,x.csv,0.250,,\npair,x.csv,,2.0,100\nplain,x.csv,,,\n", encoding="utf-8")
    return d


def _window_fraction(V_lo: float, V_hi: float) -> float:
    M_hi, M_lo = 10 ** _log_M(np.array([V_lo, V_hi]))
    mu, s = math.log(MP), math.sqrt(math.log(D))  # log-normal weight distribution: ln M ~ N(ln Mp... )
    # dw/dlnM of S.lognormal is Gaussian in ln M with mean ln Mp and variance ln Đ (its definition)
    return float(stats.norm.cdf((math.log(M_hi) - mu) / s) - stats.norm.cdf((math.log(M_lo) - mu) / s))


def test_mass_recovery_against_the_closed_form(run, cli_runner, tmp_path):
    out = tmp_path / "out"
    res = cli_runner.invoke(app, ["batch", str(run / "batch.csv"), "-m", str(run / "m.toml"), "-o", str(out)])
    assert res.exit_code == 0, res.output
    table = pd.read_csv(out / "results.csv").set_index(C.SAMPLE_ID)
    row = table.loc["exact"]
    frac = _window_fraction(row[C.INTEGRATION_START], row[C.INTEGRATION_END])
    assert 0.9 < frac <= 1.0
    # eluted mass = fraction of the simulated mass inside the limits; 0.5 % for noise and baseline
    assert row[C.MASS_ELUTED] == pytest.approx(1e3 * MASS_G * frac, rel=0.005)
    assert row[C.INJECTED_MASS] == pytest.approx(0.2)
    assert row[C.MASS_RECOVERY] == pytest.approx(100.0 * frac, rel=0.005)
    assert "mass recovery" not in str(row[C.WARNINGS])
    # 0.250 mg claimed: recovery 0.2/0.25 of the above, below 95 %, and said so
    loss = table.loc["loss"]
    assert loss[C.MASS_RECOVERY] == pytest.approx(100.0 * frac * 0.2 / 0.25, rel=0.005)
    assert "mass recovery" in loss[C.WARNINGS] and "below 95 %" in loss[C.WARNINGS]
    # concentration x injection volume gives the same mass
    assert table.loc["pair"][C.INJECTED_MASS] == pytest.approx(0.2)
    assert table.loc["pair"][C.MASS_RECOVERY] == pytest.approx(row[C.MASS_RECOVERY], rel=1e-9)
    # no mass in the sheet: no recovery, no warning about it
    assert math.isnan(table.loc["plain"][C.MASS_RECOVERY])


@pytest.mark.parametrize("cells, column", [
    ("0.2,2.0,", "injection volume [µL]"),  # half of the pair
    ("0.3,2.0,100", "injected mass [mg]"),  # two ways that disagree (0.3 against 0.2 mg)
])
def test_inconsistent_mass_cells_make_an_error_row_naming_the_cell(tmp_path, cells, column):
    sheet = tmp_path / "b.csv"
    sheet.write_text("sample_id,file,injected mass [mg],concentration [mg/mL],injection volume [µL]\n"
                     f"a,x.csv,{cells}\n", encoding="utf-8")
    (entry,) = read_batch_sheet(sheet)
    assert entry.problem is not None and column in entry.problem and "row 2" in entry.problem.lower()


def test_mass_in_micrograms_is_converted(tmp_path):
    sheet = tmp_path / "b.csv"
    sheet.write_text("sample_id,file,injected mass [µg]\na,x.csv,150\n", encoding="utf-8")
    (entry,) = read_batch_sheet(sheet)
    assert entry.problem is None and entry.injected_mass == pytest.approx(0.15)  # 150 µg = 0.15 mg


def test_review_page_shows_the_aligned_detector_traces(run, cli_runner, tmp_path):
    import re

    from gpctools.batch import process_injection
    from gpctools.method import load_method
    from gpctools.report.review import detectors_svg

    out = tmp_path / "out"
    res = cli_runner.invoke(app, ["batch", str(run / "batch.csv"), "-m", str(run / "m.toml"), "-o", str(out)])
    assert res.exit_code == 0, res.output
    page = (out / "review.html").read_text(encoding="utf-8")
    # one aligned-traces panel per injection drawn, each with the light-scattering offset in its legend
    assert len(re.findall(r"aria-label='[^']*: detector traces aligned'", page)) == 4
    assert page.count("LS 90°, +0.100 mL") == 4
    assert "ls (LS 90°) +0.1000 mL" in page  # the caption
    assert "<th>mass recovery [%]</th>" in page  # and the numbers beside the plots
    # what the panel draws: the LS trace read at V + 0.1 mL, i.e. its raw maximum moved 0.1 mL earlier
    # (the simulated plumbing offset; one slice of 0.005 mL tolerance)
    method = load_method(run / "m.toml")
    inj = process_injection(run / "x.csv", method)
    al = inj.detectors.alignment
    V = al.volume
    from gpctools.io import read_chromatogram
    raw = read_chromatogram(run / "x.csv", channels="all").channels["LS 90 [mV]"]
    shift = V[int(np.argmax(raw))] - V[int(np.argmax(al.traces["ls"]))]
    assert abs(shift - 0.1) <= 0.0051
    assert al.offsets == {"ri": 0.0, "ls": 0.1}
    # a method without [detectors] draws no such panel
    plain = load_method(run / "m.toml")
    import dataclasses
    plain = dataclasses.replace(plain, detectors=None)
    conv = process_injection(run / "x.csv", plain)
    assert conv.detectors is None and detectors_svg(conv, uid="x") == ("", "")
