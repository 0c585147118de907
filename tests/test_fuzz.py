"""Property-based fuzzing of the export reader (hypothesis, deterministic and small).

Whatever the bytes, :func:`gpctools.io.read_chromatogram` either returns a chromatogram
or raises a :class:`gpctools.errors.GpcError` whose message names the file and says what
to change; no other exception escapes. Tables generated here are read back exactly.
The long run (>= 10,000 inputs through the reader and the injection pipeline) is
``bench/bench_fuzz.py``.
"""

from __future__ import annotations

import random
import tempfile
from pathlib import Path

import numpy as np
import pytest
from hostile import (
    DATA_PRESERVING,
    TEXT_MUTATIONS,
    WORKBOOK_MUTATIONS,
    clean_text,
    clean_workbook,
    refusal_problem,
)
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from gpctools.errors import GpcError
from gpctools.io import read_chromatogram

# Footers set aside are reported as ReaderWarnings; the tests look at them where they
# matter (test_footer_is_set_aside_with_a_warning_naming_the_lines).
pytestmark = pytest.mark.filterwarnings("ignore::gpctools.io.ReaderWarning")

# Deterministic (derandomize) and without deadlines: speed belongs to the bench.
FUZZ = settings(derandomize=True, deadline=None, database=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
CLEAN = {d: clean_text(d, step=20).encode() for d in ("comma", "semicolon", "tab")}
_REFERENCE: dict[str, tuple[np.ndarray, np.ndarray]] = {}


def _read(data: bytes, name: str):
    """(chromatogram or None, error or None), from a file in a fresh folder."""
    with tempfile.TemporaryDirectory() as tmp:
        p = Path(tmp) / name
        p.write_bytes(data)
        try:
            return read_chromatogram(p), None
        except GpcError as exc:
            problem = refusal_problem(exc, p)
            assert problem is None, (problem, str(exc))
            assert p.read_bytes() == data
            return None, exc


def _reference(dialect: str) -> tuple[np.ndarray, np.ndarray]:
    if dialect not in _REFERENCE:
        c, _ = _read(CLEAN[dialect], "clean.csv")
        _REFERENCE[dialect] = (c.x, c.signal)
    return _REFERENCE[dialect]


@settings(FUZZ, max_examples=200)
@given(
    dialect=st.sampled_from(sorted(CLEAN)),
    kinds=st.lists(st.sampled_from(sorted(TEXT_MUTATIONS)), min_size=1, max_size=3),
    seed=st.integers(0, 2**32 - 1),
)
def test_mutated_exports_are_read_or_refused_clearly(dialect: str, kinds: list[str], seed: int) -> None:
    rng = random.Random(seed)
    data = CLEAN[dialect]
    for kind in kinds:
        data = TEXT_MUTATIONS[kind](rng, data)
    c, _ = _read(data, "export.csv")
    if len(kinds) == 1 and kinds[0] in DATA_PRESERVING:
        # Alone, such a change keeps every slice (applied in sequence, the next one may
        # operate on re-encoded bytes and damage them).
        assert c is not None
        x, y = _reference(dialect)
        # Only the dress changed: the same slices, exactly.
        np.testing.assert_array_equal(c.x, x)
        np.testing.assert_array_equal(c.signal, y)


@settings(FUZZ, max_examples=100)
@given(data=st.binary(min_size=0, max_size=3000), ext=st.sampled_from([".csv", ".txt", ".xlsx", ".dat"]))
def test_arbitrary_bytes_are_read_or_refused_clearly(data: bytes, ext: str) -> None:
    _read(data, "blob" + ext)


_SEPS = {"comma": (",", "."), "semicolon": (";", ","), "tab": ("\t", "."), "tabcomma": ("\t", ","),
         "blank": (" ", ".")}


@settings(FUZZ, max_examples=100)
@given(
    dialect=st.sampled_from(sorted(_SEPS)),
    x0=st.floats(0.5, 50.0),
    dx=st.floats(1e-3, 1.0),
    signal=st.lists(st.floats(-1e6, 1e6, allow_nan=False, width=32), min_size=10, max_size=80),
    header=st.booleans(),
    metadata=st.lists(st.text(st.characters(blacklist_categories=("Cs", "Cc")), max_size=40), max_size=4),
)
def test_generated_tables_read_back_exactly(
    dialect: str, x0: float, dx: float, signal: list[float], header: bool, metadata: list[str]
) -> None:
    sep, mark = _SEPS[dialect]
    x = x0 + dx * np.arange(len(signal))
    y = np.asarray(signal, dtype=np.float64)

    def fmt(v: float) -> str:
        return repr(float(v)).replace(".", mark)

    lines = [("Note: " + m.replace("\n", " ")) for m in metadata]
    if header:
        lines.append(sep.join(["Volume(mL)", "RI(mV)"]))
    lines += [fmt(a) + sep + fmt(b) for a, b in zip(x, y, strict=True)]
    c, err = _read(("\n".join(lines) + "\n").encode(), "gen.txt")
    if c is None:
        # Only a file without a header may be refused (its x unit is unknown), or a
        # signal that looks like a time column; metadata lines may hide the header.
        assert err is not None and not header or metadata, str(err)
        return
    # repr() round-trips a float64 exactly (Python language reference), and both
    # parsers must give the very same floats.
    np.testing.assert_array_equal(c.x, x)
    np.testing.assert_array_equal(c.signal, y)


_WORKBOOK = clean_workbook(step=40)


@settings(FUZZ, max_examples=60)
@given(
    kinds=st.lists(st.sampled_from(sorted(WORKBOOK_MUTATIONS)), min_size=1, max_size=2),
    seed=st.integers(0, 2**32 - 1),
)
def test_damaged_workbooks_are_read_or_refused_clearly(kinds: list[str], seed: int) -> None:
    rng = random.Random(seed)
    data = _WORKBOOK
    for kind in kinds:
        try:
            data = WORKBOOK_MUTATIONS[kind](rng, data)
        except Exception:
            break  # the previous damage left no archive to operate on: read what we have
    _read(data, "export.xlsx")

