"""Atomic writers: complete file or none, no temporary left behind, ordinary permissions."""

from __future__ import annotations

import os

import pytest

from gpctools.report.files import atomic_path, write_text


def test_write_replaces_whole_file(tmp_path):
    p = tmp_path / "a.txt"
    write_text(p, "first")
    write_text(p, "second")
    assert p.read_text() == "second"
    assert [q.name for q in tmp_path.iterdir()] == ["a.txt"]


def test_failure_leaves_previous_file_and_no_partial(tmp_path):
    p = tmp_path / "a.txt"
    write_text(p, "kept")
    with pytest.raises(RuntimeError):
        with atomic_path(p) as tmp:
            tmp.write_text("half")
            raise RuntimeError("crash while writing")
    assert p.read_text() == "kept"
    assert [q.name for q in tmp_path.iterdir()] == ["a.txt"]


def test_regression_outputs_not_owner_only(tmp_path):
    # mkstemp makes 0600 files; outputs should follow the umask like open() (common practice).
    p = write_text(tmp_path / "b.txt", "x")
    mask = os.umask(0)
    os.umask(mask)
    assert os.stat(p).st_mode & 0o777 == 0o666 & ~mask


# --- file names from user labels (one sanitiser for every output) ----------------------


def test_safe_name_keeps_words_and_collapses_the_rest():
    from gpctools.report.files import safe_name

    # Names the bundled demo writes (sample_runs): they must not change.
    assert safe_name("agent T, 50 °C") == "agent_T_50_C"
    assert safe_name("check standard check") == "check_standard_check"
    assert safe_name("Mw [g/mol]") == "Mw_g_mol"
    assert safe_name("dispersity [-]") == "dispersity_-"
    assert safe_name("LC110-A1") == "LC110-A1"
    assert safe_name("Müller 3") == "Müller_3"  # letters of any script are kept
    for hostile in ("../../etc/passwd", "..", ".hidden", "a/b\\c:d*e?f", "CON\x00"):
        name = safe_name(hostile)
        assert name and not name.startswith((".", "_")) and not set(name) & set("/\\:*?\x00")
    assert safe_name("", default="sample") == "sample" and safe_name("///", default="plot") == "plot"


def test_safe_name_fits_a_file_name_in_bytes():
    from gpctools.report.files import MAX_NAME_BYTES, safe_name

    for text in ("x" * 400, "é" * 400, "試料" * 200):
        name = safe_name(text)
        # 255 bytes per name on common file systems; two stems and a prefix must fit.
        assert 0 < len(name.encode("utf-8")) <= MAX_NAME_BYTES <= 120
        assert text.startswith(name)


def test_unique_name_never_reuses_a_name():
    from gpctools.report.files import safe_name, unique_name

    seen: set[str] = set()
    names = [unique_name(safe_name(label), seen) for label in ("DDM/St", "DDM St", "DDM_St", "other")]
    assert names == ["DDM_St", "DDM_St_2", "DDM_St_3", "other"]
