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
    assert m.marker_reference == pytest.approx(22.60)
    assert m.exclusions == ((22.0, 23.2),)
    assert m.calibration.is_absolute
    assert len(m.sha256) == 64


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
    # two standards for an order-1 fit leave no degrees of freedom: warned (SCIENCE.md section 2)
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
    # PS-equivalent 1e5 -> PMMA 109 380 [derived from the IUPAC pairs, SCIENCE.md section 2]
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
