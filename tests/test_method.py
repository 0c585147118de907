"""Method file: schema, defaults, clear errors naming the key, templates load."""

from __future__ import annotations

import shutil
import textwrap
from pathlib import Path

import pytest

from gpctools.errors import CalibrationWarning, MethodError
from gpctools.method import Method, load_method

ROOT = Path(__file__).resolve().parent.parent

STANDARDS = """
[[calibration.standard]]
name = "a"
Mp = 1000000
volume = 12.0
[[calibration.standard]]
name = "b"
Mp = 100000
volume = 15.0
[[calibration.standard]]
name = "c"
Mp = 10000
volume = 18.0
[[calibration.standard]]
name = "d"
Mp = 1000
volume = 21.0
"""


def write(tmp_path: Path, body: str) -> Path:
    p = tmp_path / "m.toml"
    p.write_text(textwrap.dedent(body), encoding="utf-8")
    return p


def test_template_method_loads_with_template_standards(tmp_path):
    # templates/ must stay in sync with the code (STYLE.md: every template exercised).
    shutil.copy(ROOT / "gpctools" / "templates" / "method.toml", tmp_path / "method.toml")
    shutil.copy(ROOT / "gpctools" / "templates" / "standards.csv", tmp_path / "standards.csv")
    m = load_method(tmp_path / "method.toml")
    assert isinstance(m, Method)
    assert m.calibration.order == 3
    assert len(m.calibration.Mp) == 10
    assert m.flow_rate == 1.0
    # issue 10: the template ships the flow-marker section and the marker's exclusion
    # commented out (a marker that is not in the data must not be searched for)
    assert m.marker_reference is None and m.marker_search is None
    assert m.exclusions == ()
    assert m.peaks.split == "none" and m.fractions.below == ()
    assert m.calibration.is_absolute
    assert len(m.sha256) == 64
    # ... and the commented sections load as written once uncommented
    text = (tmp_path / "method.toml").read_text(encoding="utf-8")
    for line in ("# [flow_marker]", "# reference = ", "# search = ", "# min_signal_to_noise = ", "# fwhm = ",
                 "# required = ", "# exclude = ", "# [fractions]", "# below = ", "# above = "):
        assert line in text, line
        text = text.replace(line, line[2:])
    (tmp_path / "method.toml").write_text(text, encoding="utf-8")
    full = load_method(tmp_path / "method.toml")
    assert full.marker_reference == pytest.approx(22.60) and full.marker_search == (22.2, 23.0)
    assert full.marker.min_signal_to_noise == 10 and full.marker.fwhm == (0.02, 0.4) and not full.marker.required
    assert full.exclusions == ((22.0, 23.2),)
    assert full.fractions.below == (500.0, 1000.0) and full.fractions.above == (1e6,)


def test_inline_standards_linear_order(tmp_path):
    p = write(tmp_path, "[calibration]\norder = 1\n" + STANDARDS)
    m = load_method(p)
    # exactly log-linear standards: log M = 6 - (V - 12)/3 (constructed, derived)
    assert m.calibration.M(16.5) == pytest.approx(10 ** (6 - 1.5), rel=1e-9)
    assert m.windows is None and m.limits is None
    assert not m.calibration.is_absolute  # no sample polymer stated: relative scale


def test_standards_given_as_time_need_flow(tmp_path):
    body = "[calibration]\norder = 1\n[[calibration.standard]]\nMp = 1e5\ntime = 15.0\n" \
           "[[calibration.standard]]\nMp = 1e4\ntime = 18.0\n"
    with pytest.raises(MethodError) as e:
        load_method(write(tmp_path, body))
    assert e.value.key == "flow.rate"
    # two standards for an order-1 fit leave no degrees of freedom: warned (docs/science.md, section 2)
    with pytest.warns(CalibrationWarning, match="only 2 standards"):
        m = load_method(write(tmp_path, "[flow]\nrate = 0.5\n" + body))
    assert m.calibration.volume == (7.5, 9.0)


@pytest.mark.parametrize(
    "extra, key",
    [
        ("[baseline]\nwindowz = 'auto'\n", "baseline.windowz"),
        ("colour = 'red'\n", "colour"),
        ("[flow]\nrate = -1\n", "flow.rate"),
        ("[flow]\nrate = 'fast'\n", "flow.rate"),
        ("[integration]\nlimits = [20, 10]\n", "integration.limits"),
        ("[integration]\noutside = 'clip'\n", "integration.outside"),
        ("[baseline]\nwindows = [[1, 2]]\n", "baseline.windows"),
        ("[import]\nx_unit = 'hours'\n", "import.x_unit"),
        ("[thresholds]\nstandard_residual_pct = 0\n", "thresholds.standard_residual_pct"),
        ("[flow_marker]\nsearch = [22, 23]\n", "flow_marker.reference"),
        ("[flow_marker]\nreference = 22.6\nsearch = [22, 23]\nrequired = 'yes'\n", "flow_marker.required"),
        ("[flow_marker]\nreference = 22.6\nsearch = [22, 23]\nmin_signal_to_noise = 0\n",
         "flow_marker.min_signal_to_noise"),
        ("[flow_marker]\nreference = 22.6\nsearch = [22, 23]\nfwhm = [0.3, 0.1]\n", "flow_marker.fwhm"),
        ("[flow_marker]\nreference = 22.6\nrequired = true\n", "flow_marker.search"),
        ("[peaks]\nsplit = 'valley'\n", "peaks.split"),
        ("[peaks]\nsplit = [1000, -5]\n", "peaks.split"),
        ("[peaks]\nvalley_depth_pct = 100\n", "peaks.valley_depth_pct"),
        ("[peaks]\nmin_height = 5\n", "peaks.min_height"),
        ("[fractions]\nbelow = [500, 500]\n", "fractions.below"),
        ("[fractions]\nabove = ['1e6']\n", "fractions.above"),
    ],
)
def test_bad_keys_and_values_name_the_key(tmp_path, extra, key):
    # TOML tables must follow the top-level keys, so put top-level extras first.
    p = write(tmp_path, extra + "[calibration]\norder = 1\n" + STANDARDS if extra.startswith("colour")
              else "[calibration]\norder = 1\n" + STANDARDS + extra)
    with pytest.raises(MethodError) as e:
        load_method(p)
    assert e.value.key == key
    assert key in str(e.value)
    assert str(p) in str(e.value)


def test_bad_calibration_order_and_missing_section(tmp_path):
    with pytest.raises(MethodError, match="calibration.order"):
        load_method(write(tmp_path, "[calibration]\norder = 9\n" + STANDARDS))
    with pytest.raises(MethodError, match="calibration"):
        load_method(write(tmp_path, "name = 'x'\n"))
    # order 3 needs 4 standards: with 3 it is refused with a message naming the fix
    three = STANDARDS.rsplit("[[calibration.standard]]", 1)[0]
    with pytest.raises(MethodError, match="at least 4 standards"):
        load_method(write(tmp_path, "[calibration]\norder = 3\n" + three))


def test_toml_syntax_error_and_missing_file(tmp_path):
    with pytest.raises(MethodError, match="not valid TOML"):
        load_method(write(tmp_path, "[calibration\n"))
    with pytest.raises(MethodError, match="not found"):
        load_method(tmp_path / "nope.toml")


def test_mark_houwink_section_converts(tmp_path):
    body = "[calibration]\norder = 1\n" + STANDARDS + textwrap.dedent(
        """
        [mark_houwink]
        sample_polymer = "PMMA"
        K_standard = 1.14e-4
        a_standard = 0.716
        K_sample = 9.44e-5
        a_sample = 0.719
        """
    )
    m = load_method(write(tmp_path, body))
    # PS-equivalent 1e5 -> PMMA 109 380 [derived from the IUPAC pairs, docs/science.md, section 2]
    assert m.calibration.M(15.0) == pytest.approx(109_380, rel=1e-4)  # rounding of the check value
    assert m.calibration.is_absolute
    assert "universal" in m.calibration.scale_label()
    with pytest.raises(MethodError, match="mark_houwink.a_sample"):
        load_method(write(tmp_path, body.replace("a_sample = 0.719", "")))


def test_input_file_is_not_modified(tmp_path):
    p = write(tmp_path, "[calibration]\norder = 1\n" + STANDARDS)
    before = p.read_bytes()
    load_method(p)
    load_method(p)
    assert p.read_bytes() == before


@pytest.mark.parametrize("cell, says", [("", "the cell is empty"), ("1.1 M", "'1.1 M' is not a positive number")])
def test_regression_bad_standards_cell_names_file_row_and_column(tmp_path, cell, says):
    # An empty or unreadable Mp cell in a standards file used to be reported against the
    # method file's 'calibration' key as "got np.float64(nan)", without the file or row.
    rows = (ROOT / "gpctools" / "templates" / "standards.csv").read_text().splitlines()
    name, _, volume = rows[2].split(",")
    rows[2] = f"{name},{cell},{volume}"
    (tmp_path / "standards.csv").write_text("\n".join(rows) + "\n")
    body = '[calibration]\norder = 3\nstandards = "standards.csv"\n'
    with pytest.raises(MethodError, match=says) as e:
        load_method(write(tmp_path, body))
    assert e.value.path.endswith("standards.csv")
    assert e.value.row == 3 and e.value.column == "Mp [g/mol]"


def test_regression_implausible_flow_rate_is_refused(tmp_path):
    # flow.rate = 1e300 was accepted and later blamed on the flow-marker window;
    # analytical SEC runs at about 0.1-2 mL/min (common practice), 1000 is the refusal line.
    p = write(tmp_path, "[flow]\nrate = 1e300\n[calibration]\norder = 1\n" + STANDARDS)
    with pytest.raises(MethodError, match="plausible") as e:
        load_method(p)
    assert e.value.key == "flow.rate"


def test_peaks_and_fractions_sections(tmp_path):
    body = "[calibration]\norder = 1\n" + STANDARDS + textwrap.dedent(
        """
        [peaks]
        split = [800, 20000]
        valley_depth_pct = 25
        min_height_pct = 2

        [fractions]
        below = 1000
        above = [1e6, 2e5]
        """)
    m = load_method(write(tmp_path, body))
    # split masses sorted from high to low M (peaks are numbered from high M); % -> fraction
    assert m.peaks.split == (20000.0, 800.0)
    assert m.peaks.valley_depth == pytest.approx(0.25) and m.peaks.min_height == pytest.approx(0.02)
    # a single number is a list of one; the order given is the column order
    assert m.fractions.below == (1000.0,) and m.fractions.above == (1e6, 2e5)
    assert m.settings["peaks"]["split"] == [20000.0, 800.0]
    m = load_method(write(tmp_path, "[calibration]\norder = 1\n" + STANDARDS + "[peaks]\nsplit = 'Valleys'\n"))
    assert m.peaks.split == "valleys"


# ------------------------------------------------------- limits in molar mass (issue 10)


def test_limits_in_molar_mass_convert_through_the_calibration(tmp_path):
    # The inline standards lie exactly on log M = 6 - (V - 12)/3, so an order-1 fit is
    # that line and V(M) = 12 + 3 (6 - log10 M) [derived, closed form]: 1e6 g/mol at 12 mL,
    # 1e3 g/mol at 21 mL. Either order of the pair is accepted.
    for pair in ("[1000, 1000000]", "[1e6, 1e3]"):
        p = write(tmp_path, f"[integration]\nlimits_molar_mass = {pair}\n[calibration]\norder = 1\n" + STANDARDS)
        m = load_method(p)
        assert m.limits is None and m.limits_M == (1000.0, 1e6)
        lo, hi = m.volume_limits()
        assert lo == pytest.approx(12.0, abs=1e-9)  # root of a fitted line: float rounding only
        assert hi == pytest.approx(21.0, abs=1e-9)
        assert m.settings["integration limits [g/mol]"] == [1000.0, 1e6]
    # beyond the standards the tangent continues the line: 1e7 g/mol at 9 mL [derived]
    p = write(tmp_path, "[integration]\nlimits_molar_mass = [1e2, 1e7]\n[calibration]\norder = 1\n" + STANDARDS)
    lo, hi = load_method(p).volume_limits()
    assert (lo, hi) == (pytest.approx(9.0, abs=1e-9), pytest.approx(24.0, abs=1e-9))


@pytest.mark.parametrize(
    "integration, says",
    [
        ("limits = [14, 19]\nlimits_molar_mass = [1000, 1e6]", "not both"),
        ("limits_molar_mass = [1000]", "pair"),
        ("limits_molar_mass = [-1000, 1e6]", "positive"),
        ("limits_molar_mass = [1e4, 1e4]", "equal"),
        ("limits_molar_mass = '1000-1e6'", "pair"),
    ],
)
def test_limits_in_molar_mass_refusals_name_the_key(tmp_path, integration, says):
    p = write(tmp_path, f"[integration]\n{integration}\n[calibration]\norder = 1\n" + STANDARDS)
    with pytest.raises(MethodError, match=says) as e:
        load_method(p)
    assert e.value.key == "integration.limits_molar_mass"


def test_overrides_give_a_derived_method(tmp_path):
    from gpctools.method import MethodOverrides

    m = load_method(write(tmp_path, "[integration]\nlimits = [13, 20]\n[calibration]\norder = 1\n" + STANDARDS))
    same = m.with_overrides(MethodOverrides())
    assert same is m  # nothing to change: the method itself
    by_mass = m.with_overrides(MethodOverrides(limits_M=(1000.0, 1e6)))
    assert by_mass.limits is None and by_mass.volume_limits() == (pytest.approx(12.0), pytest.approx(21.0))
    by_volume = by_mass.with_overrides(MethodOverrides(limits=(14.0, 19.0)))
    assert by_volume.limits_M is None and by_volume.volume_limits() == (14.0, 19.0)
    w = m.with_overrides(MethodOverrides(windows=((10.0, 11.0), (22.0, 23.0))))
    assert w.windows == ((10.0, 11.0), (22.0, 23.0)) and w.limits == (13.0, 20.0)
    # the file it came from stays named, the change is recorded
    assert by_mass.sha256 == m.sha256 and by_mass.source == m.source
    assert by_mass.settings["overrides"] == {"integration limits [g/mol]": [1000.0, 1e6]}
    assert m.settings.get("overrides") is None  # the original is untouched (frozen)
    with pytest.raises(MethodError, match="not both"):
        MethodOverrides(limits=(14.0, 19.0), limits_M=(1e3, 1e6))
    with pytest.raises(MethodError, match="first must be below"):
        MethodOverrides(limits=(19.0, 14.0))


# ---------------------------------------------------------- standards file (issues 9, 10)


def _standards_method(tmp_path: Path, table: str, order: int | str = 1, flow: str = "") -> Path:
    (tmp_path / "std.csv").write_text(table, encoding="utf-8")
    o = f'"{order}"' if isinstance(order, str) else order
    return write(tmp_path, f'{flow}[calibration]\norder = {o}\nstandards = "std.csv"\n')


@pytest.mark.parametrize(
    "header, factor",
    [
        ("name,Mp [g/mol],volume [mL]", 1.0),
        ("name,Mp (kg/mol),Volume (mL)", 1000.0),
        ("Standard,Mp/(g mol-1),Ve/mL", 1.0),
        ('label,M_p [Da],"elution volume, mL"', 1.0),
        ("name,Mp [kDa],Vp", 1000.0),
        ("name,peak MW,retention volume (ml)", 1.0),
        ("name,Molar mass in g/mol,Peak volume [cm3]", 1.0),
    ],
)
def test_standards_headers_in_common_variants(tmp_path, header, factor):
    # One table of exactly log-linear standards, written with the header variants labs use
    # (brackets, parentheses, suffixes, quantity-calculus slashes; kg/mol = 1000 g/mol).
    rows = "\n".join(f"s{i},{m / factor:g},{v}" for i, (m, v) in
                     enumerate([(1e6, 12.0), (1e5, 15.0), (1e4, 18.0), (1e3, 21.0)]))
    m = load_method(_standards_method(tmp_path, f"{header}\n{rows}\n"))
    assert m.calibration.Mp == pytest.approx((1e6, 1e5, 1e4, 1e3), rel=1e-12)  # unit factor only
    assert m.calibration.volume == (12.0, 15.0, 18.0, 21.0)


@pytest.mark.parametrize(
    "header, unit",
    [("name,Mp,RT [s]", 60.0), ("name,Mp,retention time (min)", 1.0), ('name,Mp,"tR, min"', 1.0), ("name,Mp,t/s", 60.0)],
)
def test_standards_given_as_time_in_header_variants(tmp_path, header, unit):
    # V = t [min] x F [mL/min] with F = 0.5 (definition of the flow rate)
    rows = "\n".join(f"s{i},{m:g},{t * unit:g}" for i, (m, t) in
                     enumerate([(1e6, 24.0), (1e5, 30.0), (1e4, 36.0)]))
    m = load_method(_standards_method(tmp_path, f"{header}\n{rows}\n", flow="[flow]\nrate = 0.5\n"))
    assert m.calibration.volume == pytest.approx((12.0, 15.0, 18.0), rel=1e-12)


def test_standards_missing_column_lists_found_and_accepted_names(tmp_path):
    with pytest.raises(MethodError) as e:
        load_method(_standards_method(tmp_path, "name,Mw,Ve\na,1e5,14\nb,1e4,16\n"))
    msg = str(e.value)
    assert "std.csv" in msg and "found columns: 'name', 'Mw', 'Ve'" in msg
    assert "'Mp [g/mol]'" in msg and "'peak molar mass'" in msg  # the names accepted, as written
    with pytest.raises(MethodError) as e:
        load_method(_standards_method(tmp_path, "name,Mp,position\na,1e5,14\nb,1e4,16\n"))
    msg = str(e.value)
    assert "'volume [mL]'" in msg and "'time [min]'" in msg and "'retention time'" in msg
    assert "found columns: 'name', 'Mp', 'position'" in msg


def test_standards_whose_mp_does_not_fall_with_volume_are_refused_with_rows(tmp_path):
    # SEC elutes large molecules first, so Mp must fall as V rises (docs/science.md,
    # section 2.1); rows 3 and 4 of this file are swapped in Mp.
    table = "name,Mp [g/mol],volume [mL]\nA,1000000,12\nB,10000,15\nC,100000,18\nD,1000,21\n"
    with pytest.raises(MethodError) as e:
        load_method(_standards_method(tmp_path, table))
    msg = str(e.value)
    assert e.value.path.endswith("std.csv") and e.value.row == 4
    assert "'B' (row 3: 15 mL, 10000 g/mol) elutes before 'C' (row 4: 18 mL, 100000 g/mol)" in msg
    assert "np.float64" not in msg
    # inline standards: named by their method key
    body = "[calibration]\norder = 1\n" + STANDARDS.replace("Mp = 10000\n", "Mp = 200000\n")
    with pytest.raises(MethodError, match=r"calibration\.standard\[3\]") as e:
        load_method(write(tmp_path, body))


def test_duplicate_positions_are_named_by_file_and_line(tmp_path):
    table = "name,Mp [g/mol],volume [mL]\nA,1000000,12\nB,100000,15.0\nC,50000,15\nD,1000,21\n"
    with pytest.raises(MethodError) as e:
        load_method(_standards_method(tmp_path, table))
    assert e.value.path.endswith("std.csv") and e.value.row == 4
    assert "'B' (row 3) and 'C' (row 4) have the same peak volume 15 mL" in str(e.value)


@pytest.mark.parametrize(
    "order, n, says",
    [(3, 3, "holds 3 standards; an order-3 calibration needs at least 4 standards"),
     ("auto", 4, "needs at least 5 standards"),
     (1, 1, "holds 1 standard; a calibration needs at least 2 standards")],
)
def test_too_few_standards_names_the_standards_file(tmp_path, order, n, says):
    rows = "".join(f"s{i},{10 ** (6 - i)},{12 + 3 * i}\n" for i in range(n))
    with pytest.raises(MethodError, match=says) as e:
        load_method(_standards_method(tmp_path, "name,Mp [g/mol],volume [mL]\n" + rows, order=order))
    assert e.value.path.endswith("std.csv")  # the standards table, not the method file


def test_negative_mp_is_shown_as_a_plain_number(tmp_path):
    table = "name,Mp [g/mol],volume [mL]\nA,1000000,12\nB,-1080000,15\nC,1000,21\n"
    with pytest.raises(MethodError) as e:
        load_method(_standards_method(tmp_path, table))
    assert "-1080000 g/mol must be positive" in str(e.value) and "np." not in str(e.value)
    assert e.value.row == 3


# ----------------------------------------------------------- Mark-Houwink K unit (issue 10)


def test_mark_houwink_K_in_mL_per_g_warns(tmp_path):
    # K_sample typed in mL/g (9.44e-3) next to K_standard in dL/g: a factor 100 in K. The
    # universal calibration log M_x = [log(K_s/K_x) + (1 + a_s) log M_s] / (1 + a_x)
    # (Benoit, Grubisic, Rempp 1967) then turns PS 1e5 into 7 507 g/mol [derived, below].
    body = "[calibration]\norder = 1\n" + STANDARDS + textwrap.dedent(
        """
        [mark_houwink]
        K_standard = 1.14e-4
        a_standard = 0.716
        K_sample = 9.44e-3
        a_sample = 0.719
        """
    )
    with pytest.warns(CalibrationWarning, match="mL/g") as caught:
        m = load_method(write(tmp_path, body))
    texts = [str(w.message) for w in caught if issubclass(w.category, CalibrationWarning)]
    assert any("K_sample = 0.00944 dL/g lies outside the plausible range" in t for t in texts)
    assert any("differ by a factor 82.8" in t for t in texts)  # 9.44e-3 / 1.14e-4 = 82.8
    assert any("mL/g" in w for w in m.calibration.warnings)  # also in the calibration summary
    import math

    expected = 10 ** ((math.log10(1.14e-4 / 9.44e-3) + 1.716 * 5.0) / 1.719)
    assert expected == pytest.approx(7507, abs=0.5)  # the figure, from the formula
    assert float(m.calibration.M(15.0)) == pytest.approx(expected, rel=1e-9)  # exact line
    # the same pairs in dL/g: no warning (bundled THF pairs, gpctools/data/mark_houwink.csv)
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error", CalibrationWarning)
        load_method(write(tmp_path, body.replace("9.44e-3", "9.44e-5")))
