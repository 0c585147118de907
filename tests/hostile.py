"""Malformed and hostile slice exports, for the reader tests and the fuzz bench.

Three things live here, shared by ``tests/test_io_hostile.py``, ``tests/test_fuzz.py``
and ``bench/bench_fuzz.py``:

- :func:`clean_text` / :func:`clean_workbook`: a clean export (a real demo export,
  thinned to every k-th slice so that it is quick to process), in several dialects;
- :data:`TEXT_MUTATIONS` / :data:`WORKBOOK_MUTATIONS`: seeded damage of the kinds a
  corrupted disk, a faulty program or a hostile sender produces (byte flips, truncation,
  duplication, huge numbers, long lines, mixed decimal marks, NUL bytes, encodings; for
  workbooks also damaged zip structures, entity declarations, out-of-range cell
  references and unsupported compression);
- :func:`hostile_corpus`: named, structured cases with the outcome each must have: the
  words a refusal must contain, or acceptance with the clean control's averages.

Nothing here imports the code under test except to build workbooks (openpyxl) and zip
archives (zipfile), so the corpus is independent of the reader's own logic.
"""

from __future__ import annotations

import io
import random
import re
import struct
import zipfile
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

REPO_ROOT = Path(__file__).resolve().parent.parent
SAMPLE_EXPORT = REPO_ROOT / "sample_runs" / "exports" / "LC110-A1.csv"
SAMPLE_METHOD = REPO_ROOT / "sample_runs" / "method.toml"


# ============================================================================ clean data


def clean_rows(step: int = 10) -> tuple[list[str], list[tuple[str, str]]]:
    """(metadata lines, (volume, signal) text pairs) of the demo export, every ``step``-th slice."""
    lines = SAMPLE_EXPORT.read_text(encoding="utf-8").splitlines()
    head = [ln for ln in lines if ln and not ln[0].isdigit()]
    meta = head[:-1]
    rows = [tuple(ln.split(",")) for ln in lines if ln and ln[0].isdigit()]
    return meta, [(a, b) for a, b in rows[::step]]  # type: ignore[misc]


def clean_text(dialect: str = "comma", step: int = 10) -> str:
    """A clean export as text. ``dialect``: comma, semicolon (decimal comma), tab, blank."""
    meta, rows = clean_rows(step)
    sep, comma = {
        "comma": (",", False),
        "semicolon": (";", True),
        "tab": ("\t", False),
        "tabcomma": ("\t", True),
        "blank": ("  ", False),
    }[dialect]
    header = "Elution volume [mL]" + sep + "RI signal [mV]"
    if dialect == "blank":
        header = "Volume(mL)  RI(mV)"

    def mark(v: str) -> str:
        return v.replace(".", ",") if comma else v

    body = "\n".join(mark(a) + sep + mark(b) for a, b in rows)
    return "\n".join(meta) + "\n" + header + "\n" + body + "\n"


def clean_workbook(step: int = 10) -> bytes:
    """A clean export as an .xlsx workbook (written by openpyxl)."""
    import openpyxl

    meta, rows = clean_rows(step)
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Slices"
    for ln in meta:
        key, _, value = ln.partition(":")
        ws.append([key + ":", value.strip()])
    ws.append(["Elution volume [mL]", "RI signal [mV]"])
    for a, b in rows:
        ws.append([float(a), float(b)])
    # Fixed times in the document properties and the archive: the same bytes in every
    # run, so that seeded damage hits the same places.
    import datetime

    fixed = datetime.datetime(2024, 1, 1, 12, 0, 0)
    wb.properties.created = fixed
    wb.properties.modified = fixed
    buf = io.BytesIO()
    wb.save(buf)
    data = buf.getvalue()
    core = zipfile.ZipFile(io.BytesIO(data)).read("docProps/core.xml")
    core = re.sub(rb"(<dcterms:modified[^>]*>)[^<]*", rb"\g<1>2024-01-01T12:00:00Z", core)
    return rezip(data, replace={"docProps/core.xml": core})


# ============================================================================ text damage

Mutation = Callable[[random.Random, bytes], bytes]
_NUMBER = re.compile(rb"\d+(?:[.,]\d+)?")


def _lines(data: bytes) -> list[bytes]:
    return data.split(b"\n")


def _data_line_indices(lines: list[bytes]) -> list[int]:
    return [i for i, ln in enumerate(lines) if ln[:1].isdigit()]


def _pick(rng: random.Random, lines: list[bytes]) -> int:
    idx = _data_line_indices(lines)
    return rng.choice(idx) if idx else rng.randrange(max(1, len(lines)))


def m_flip(rng: random.Random, data: bytes) -> bytes:
    b = bytearray(data)
    for _ in range(rng.randint(1, 8)):
        b[rng.randrange(len(b))] ^= 1 << rng.randrange(8)
    return bytes(b)


def m_byte_set(rng: random.Random, data: bytes) -> bytes:
    b = bytearray(data)
    for _ in range(rng.randint(1, 4)):
        b[rng.randrange(len(b))] = rng.choice(b"0123456789.,;\t -+eE\"\n\r\x00\xff#")
    return bytes(b)


def m_truncate(rng: random.Random, data: bytes) -> bytes:
    return data[: rng.randrange(len(data))]


def m_duplicate_line(rng: random.Random, data: bytes) -> bytes:
    lines = _lines(data)
    i = _pick(rng, lines)
    lines.insert(i, lines[i])
    return b"\n".join(lines)


def m_delete_line(rng: random.Random, data: bytes) -> bytes:
    lines = _lines(data)
    del lines[_pick(rng, lines)]
    return b"\n".join(lines)


def m_swap_lines(rng: random.Random, data: bytes) -> bytes:
    lines = _lines(data)
    i, j = _pick(rng, lines), _pick(rng, lines)
    lines[i], lines[j] = lines[j], lines[i]
    return b"\n".join(lines)


def m_huge_number(rng: random.Random, data: bytes) -> bytes:
    found = list(_NUMBER.finditer(data))
    if not found:
        return data
    m = rng.choice(found)
    kind = rng.randrange(4)
    if kind == 0:
        new = b"9" * rng.choice((20, 400, 5000, 20000))
    elif kind == 1:
        new = b"1e" + str(rng.choice((300, 308, 309, 999, 99999))).encode()
    elif kind == 2:
        new = b"1" * rng.randint(2, 60) + b"." + b"0" * rng.randint(1, 3000)
    else:
        new = str(rng.choice((1e200, -1e250, 1.7e308, 5e-324))).encode()
    return data[: m.start()] + new + data[m.end() :]


def m_long_line(rng: random.Random, data: bytes) -> bytes:
    lines = _lines(data)
    i = rng.randrange(len(lines))
    kind = rng.randrange(3)
    if kind == 0:
        lines.insert(i, b"x" * rng.choice((70_000, 300_000)))
    elif kind == 1:
        lines.insert(i, b",".join([b"1"] * rng.choice((50, 1200, 10_000))))
    else:
        lines.insert(i, b"12." + b"5" * rng.choice((1200, 5000, 60_000)) + b",1.0")
    return b"\n".join(lines)


def m_decimal_mix(rng: random.Random, data: bytes) -> bytes:
    lines = _lines(data)
    idx = _data_line_indices(lines)
    if not idx:
        return data
    start = rng.choice(idx)
    for i in idx:
        if i >= start:
            ln = lines[i]
            if b";" in ln or b"\t" in ln:
                lines[i] = ln.replace(b",", b"\x01").replace(b".", b",").replace(b"\x01", b".")
            else:
                lines[i] = ln.replace(b",", b";").replace(b".", b",")
    return b"\n".join(lines)


def m_nul(rng: random.Random, data: bytes) -> bytes:
    k = rng.randrange(len(data) + 1)
    return data[:k] + b"\x00" * rng.choice((1, 3, 100, 5000)) + data[k:]


def m_encoding(rng: random.Random, data: bytes) -> bytes:
    text = data.decode("utf-8", "replace")
    kind = rng.randrange(6)
    if kind == 0:
        return text.encode("utf-16")
    if kind == 1:
        return text.encode("utf-16-le")
    if kind == 2:
        return text.encode("utf-16-be")
    if kind == 3:
        return text.encode("cp1252", "replace")
    if kind == 4:
        return b"\xef\xbb\xbf" + data
    cut = rng.randrange(len(data))  # a UTF-16 file cut at an odd byte
    return text.encode("utf-16")[: cut | 1]


def m_extra_fields(rng: random.Random, data: bytes) -> bytes:
    lines = _lines(data)
    i = _pick(rng, lines)
    sep = b";" if b";" in lines[i] else b"\t" if b"\t" in lines[i] else b","
    lines[i] = lines[i] + (sep + b"7") * rng.choice((1, 2, 50))
    return b"\n".join(lines)


def m_text_line(rng: random.Random, data: bytes) -> bytes:
    lines = _lines(data)
    lines.insert(_pick(rng, lines), rng.choice((b"Detector overload", b"=cmd|' /C calc'!A0", b"nan,nan", b"<script>")))
    return b"\n".join(lines)


def m_empty_cell(rng: random.Random, data: bytes) -> bytes:
    lines = _lines(data)
    i = _pick(rng, lines)
    for sep in (b",", b";", b"\t"):
        if sep in lines[i]:
            a, _, b = lines[i].partition(sep)
            lines[i] = rng.choice((a + sep, sep + b, a + sep + b"inf", b"-nan" + sep + b))
            break
    return b"\n".join(lines)


def m_flat_signal(rng: random.Random, data: bytes) -> bytes:
    value = rng.choice((b"0", b"0.0", b"5.25"))
    out = []
    for ln in _lines(data):
        for sep in (b",", b";", b"\t"):
            if ln[:1].isdigit() and sep in ln:
                ln = ln.split(sep)[0] + sep + value
                break
        out.append(ln)
    return b"\n".join(out)


def m_newlines(rng: random.Random, data: bytes) -> bytes:
    """Data-preserving: CRLF or CR line ends."""
    return data.replace(b"\n", rng.choice((b"\r\n", b"\r")))


def m_blank_lines(rng: random.Random, data: bytes) -> bytes:
    """Data-preserving: blank lines inside the table and at the end."""
    lines = _lines(data)
    for _ in range(rng.randint(1, 5)):
        lines.insert(_pick(rng, lines), b"")
    return b"\n".join(lines) + b"\n\n\n"


def m_footer(rng: random.Random, data: bytes) -> bytes:
    """Data-preserving: a text footer with a wider peak table under it."""
    return data.rstrip(b"\n") + b"\n\nEnd of data\nPeak table\nPeak,Start,End,Area\n1,12.5,18.0,99.1\n"


def m_reverse(rng: random.Random, data: bytes) -> bytes:
    """Data-preserving: slices in decreasing volume (read back in increasing order)."""
    lines = _lines(data)
    idx = _data_line_indices(lines)
    rows = [lines[i] for i in idx][::-1]
    for i, r in zip(idx, rows, strict=True):
        lines[i] = r
    return b"\n".join(lines)


def m_reencode(rng: random.Random, data: bytes) -> bytes:
    """Data-preserving: UTF-16 with a byte-order mark, or a UTF-8 byte-order mark."""
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        return data  # already re-encoded
    return text.encode("utf-16") if rng.random() < 0.5 else b"\xef\xbb\xbf" + data


TEXT_MUTATIONS: dict[str, Mutation] = {
    "flip": m_flip,
    "byte_set": m_byte_set,
    "truncate": m_truncate,
    "duplicate_line": m_duplicate_line,
    "delete_line": m_delete_line,
    "swap_lines": m_swap_lines,
    "huge_number": m_huge_number,
    "long_line": m_long_line,
    "decimal_mix": m_decimal_mix,
    "nul": m_nul,
    "encoding": m_encoding,
    "extra_fields": m_extra_fields,
    "text_line": m_text_line,
    "empty_cell": m_empty_cell,
    "flat_signal": m_flat_signal,
    "newlines": m_newlines,
    "blank_lines": m_blank_lines,
    "footer": m_footer,
    "reverse": m_reverse,
    "reencode": m_reencode,
}
#: Mutations that keep every (volume, signal) pair: an accepted result must equal the
#: clean control's averages exactly.
DATA_PRESERVING = frozenset({"newlines", "blank_lines", "footer", "reverse", "reencode"})


# ============================================================================ zip surgery


def rezip(
    data: bytes,
    *,
    replace: dict[str, bytes] | None = None,
    drop: tuple[str, ...] = (),
    add: dict[str, bytes] | None = None,
    compression: int = zipfile.ZIP_DEFLATED,
) -> bytes:
    """A copy of the archive with members replaced, dropped or added."""
    replace = replace or {}
    src = zipfile.ZipFile(io.BytesIO(data))
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", compression) as out:
        for info in src.infolist():
            if info.filename in drop:
                continue
            body = replace.get(info.filename, src.read(info.filename))
            out.writestr(_fixed_info(info.filename, compression), body)
        for name, body in (add or {}).items():
            out.writestr(_fixed_info(name, compression), body)
    return buf.getvalue()


def _fixed_info(name: str, compression: int) -> zipfile.ZipInfo:
    """Member header with a fixed time stamp (deterministic archive bytes)."""
    info = zipfile.ZipInfo(name, date_time=(2024, 1, 1, 12, 0, 0))
    info.compress_type = compression
    return info


def _central_entries(data: bytes) -> list[tuple[int, str, int]]:
    """(central-directory offset, name, local-header offset) of every member."""
    eocd = data.rfind(b"PK\x05\x06")
    count, _, cd_offset = struct.unpack("<HII", data[eocd + 10 : eocd + 20])
    out = []
    pos = cd_offset
    for _ in range(count):
        n, m, k = struct.unpack("<HHH", data[pos + 28 : pos + 34])
        local = struct.unpack("<I", data[pos + 42 : pos + 46])[0]
        out.append((pos, data[pos + 46 : pos + 46 + n].decode("utf-8", "replace"), local))
        pos += 46 + n + m + k
    return out


def patch_member(data: bytes, name: str, *, method: int | None = None, flags: int | None = None) -> bytes:
    """Set the compression method or flag bits of one member in both zip headers."""
    b = bytearray(data)
    for cd, member, local in _central_entries(data):
        if member != name:
            continue
        if method is not None:
            b[cd + 10 : cd + 12] = struct.pack("<H", method)
            b[local + 8 : local + 10] = struct.pack("<H", method)
        if flags is not None:
            b[cd + 8 : cd + 10] = struct.pack("<H", flags)
            b[local + 6 : local + 8] = struct.pack("<H", flags)
    return bytes(b)


def corrupt_member_data(data: bytes, name: str) -> bytes:
    """Flip one byte inside a member's (stored) data, so its checksum no longer fits."""
    b = bytearray(data)
    for _, member, local in _central_entries(data):
        if member == name:
            n, m = struct.unpack("<HH", data[local + 26 : local + 30])
            start = local + 30 + n + m
            b[start + 40] ^= 0x20
    return bytes(b)


SHEET = "xl/worksheets/sheet1.xml"


def _sheet_xml(data: bytes) -> bytes:
    return zipfile.ZipFile(io.BytesIO(data)).read(SHEET)


def wb_flip(rng: random.Random, data: bytes) -> bytes:
    return m_flip(rng, data)


def wb_truncate(rng: random.Random, data: bytes) -> bytes:
    return data[: rng.randrange(len(data))]


def wb_xml_damage(rng: random.Random, data: bytes) -> bytes:
    xml = _sheet_xml(data)
    kind = rng.randrange(3)
    if kind == 0:
        xml = m_flip(rng, xml)
    elif kind == 1:
        xml = xml[: rng.randrange(len(xml))]
    else:
        xml = m_byte_set(rng, xml)
    return rezip(data, replace={SHEET: xml})


def wb_entity(rng: random.Random, data: bytes) -> bytes:
    name = rng.choice((SHEET, "xl/workbook.xml", "[Content_Types].xml", "xl/_rels/workbook.xml.rels"))
    body = zipfile.ZipFile(io.BytesIO(data)).read(name)
    decl = rng.choice((
        b'<!DOCTYPE x [<!ENTITY a "aaaaaaaaaa"><!ENTITY b "&a;&a;&a;&a;&a;&a;&a;&a;">]>',
        b'<!DOCTYPE x [<!ENTITY e SYSTEM "file:///etc/passwd">]>',
        b"<!doctype x>",
    ))
    end = body.find(b"?>") + 2 if body.startswith(b"<?xml") else 0
    body = body[:end] + decl + body[end:]
    if rng.random() < 0.3:
        body = body.decode("utf-8").replace('encoding="UTF-8"', 'encoding="UTF-16"').encode("utf-16")
    return rezip(data, replace={name: body})


def wb_huge_reference(rng: random.Random, data: bytes) -> bytes:
    xml = _sheet_xml(data)
    target = rng.choice((b"99999999999999999999", b"1048577", b"2000000"))
    kind = rng.randrange(3)
    if kind == 0:
        xml = re.sub(rb'<row r="(\d+)"', lambda m: b'<row r="' + target + b'"' if m.group(1) == b"12" else m.group(), xml)
        xml = re.sub(rb'r="([A-Z]+)12"', rb'r="\g<1>' + target + b'"', xml)
    elif kind == 1:
        xml = xml.replace(b'r="B12"', b'r="XFE12"', 1)
    else:
        xml = re.sub(rb'<dimension ref="[^"]*"', b'<dimension ref="A1:ZZZZ' + target + b'"', xml)
    return rezip(data, replace={SHEET: xml})


def wb_big_integer(rng: random.Random, data: bytes) -> bytes:
    xml = _sheet_xml(data)
    digits = b"7" * rng.choice((400, 4000, 5000))
    xml = re.sub(rb"(<c r=\"B14\"[^>]*>)<v>[^<]*</v>", rb"\g<1><v>" + digits + b"</v>", xml, count=1)
    return rezip(data, replace={SHEET: xml})


def wb_method(rng: random.Random, data: bytes) -> bytes:
    kind = rng.randrange(3)
    if kind == 0:
        return rezip(data, compression=zipfile.ZIP_BZIP2)
    if kind == 1:
        return rezip(data, compression=zipfile.ZIP_LZMA)
    return patch_member(rezip(data, compression=zipfile.ZIP_STORED), SHEET, method=rng.choice((1, 6, 9, 99)))


def wb_checksum(rng: random.Random, data: bytes) -> bytes:
    return corrupt_member_data(rezip(data, compression=zipfile.ZIP_STORED), SHEET)


def wb_encrypted_flag(rng: random.Random, data: bytes) -> bytes:
    return patch_member(data, SHEET, flags=1)


def wb_drop_part(rng: random.Random, data: bytes) -> bytes:
    name = rng.choice((SHEET, "xl/_rels/workbook.xml.rels", "xl/styles.xml", "[Content_Types].xml"))
    return rezip(data, drop=(name,))


def wb_bad_relationship(rng: random.Random, data: bytes) -> bytes:
    xml = zipfile.ZipFile(io.BytesIO(data)).read("xl/workbook.xml")
    xml = re.sub(rb'r:id="rId\d+"', b'r:id="rId9"', xml)
    return rezip(data, replace={"xl/workbook.xml": xml})


WORKBOOK_MUTATIONS: dict[str, Mutation] = {
    "wb_flip": wb_flip,
    "wb_truncate": wb_truncate,
    "wb_xml_damage": wb_xml_damage,
    "wb_entity": wb_entity,
    "wb_huge_reference": wb_huge_reference,
    "wb_big_integer": wb_big_integer,
    "wb_method": wb_method,
    "wb_checksum": wb_checksum,
    "wb_encrypted_flag": wb_encrypted_flag,
    "wb_drop_part": wb_drop_part,
    "wb_bad_relationship": wb_bad_relationship,
}


# ============================================================================ corpus


@dataclass(frozen=True)
class Case:
    """One corpus file: its name, bytes, and what the reader must do with it.

    ``refusal`` is a regular expression the refusal message must match (searched,
    case-insensitive); None means the file must be read and give the clean averages.
    ``stage`` is where the refusal may come from: "read" (the reader) or "process"
    (the signal and distribution layers). ``options`` are reader arguments (the
    method's ``[import]`` keys); a case with options is only read, not processed.
    """

    name: str
    data: bytes
    refusal: str | None
    stage: str = "read"
    options: tuple[tuple[str, str], ...] = ()


def hostile_corpus(big: bool = False) -> list[Case]:
    """The named malformed and hostile files, each with its expected outcome.

    ``big=True`` adds the multi-megabyte cases (a 50 MB single line), for the bench.
    """
    text = clean_text("comma")
    semi = clean_text("semicolon")
    raw = text.encode()
    lines = text.split("\n")
    first_data = next(i for i, ln in enumerate(lines) if ln[:1].isdigit())
    n1 = first_data + 1  # 1-based line number of the first data line
    mid = first_data + 30

    def with_line(k: int, new: str, replace: bool = True) -> bytes:
        out = list(lines)
        if replace:
            out[k] = new
        else:
            out.insert(k, new)
        return "\n".join(out).encode()

    half = (len(lines) + first_data) // 2
    mixed = "\n".join(lines[:half] + [ln.replace(",", ";").replace(".", ",") for ln in lines[half:]])
    mixed_semi = semi.split("\n")
    mixed_semi = "\n".join(mixed_semi[:half] + [ln.replace(",", ".") for ln in mixed_semi[half:]])
    only_x = "\n".join(ln.split(",")[0] for ln in lines)
    zero = "\n".join(ln.split(",")[0] + ",0" if ln[:1].isdigit() else ln for ln in lines)
    const = "\n".join(ln.split(",")[0] + ",3.5" if ln[:1].isdigit() else ln for ln in lines)
    overflow = "\n".join(ln.split(",")[0] + ",1e250" if ln[:1].isdigit() else ln for ln in lines)
    wide = with_line(mid, ",".join(["1.5"] * 10_000))
    wb = clean_workbook()
    cases = [
        # --- text: encoding and bytes
        Case("empty.csv", b"", "empty"),
        Case("blank.csv", b" \n\n\t\n", "empty"),
        Case("nul3.csv", raw[:300] + b"\x00\x00\x00" + raw[300:], r"line \d+ holds a NUL byte.*3 in the file"),
        Case("nul_tail.csv", raw + b"\x00" * 20_000, r"line \d+ holds a NUL byte"),
        Case("binary.dat", bytes(range(256)) * 40, "binary file"),
        Case("png.csv", b"\x89PNG\r\n\x1a\n" + raw, "PNG image"),
        Case("zip.csv", wb, "zip archive"),
        Case("utf16_nobom.csv", text.encode("utf-16-le"), None),
        Case("utf16_odd.csv", text.encode("utf-16")[:-1], r"line \d+: .* not valid utf-16-le \(the file is cut off\)"),
        Case("html.csv", b"<html><body><table><tr><td>1</td></tr></table></body></html>", "no table of numbers"),
        # --- text: long lines and cells
        Case("long_cell_5k.csv", with_line(mid, "12." + "5" * 5000 + ",1.0"), rf"line {mid + 1} holds a value 5,00\d characters long"),
        Case("digits_100k.csv", with_line(mid, "9" * 100_000 + ",1"), rf"line {mid + 1} is 100,002 characters long"),
        Case("one_line_5mb.csv", b"1," * 2_500_000, r"line 1 is 5,000,000 characters long"),
        Case("fields_10k.csv", wide, rf"line {mid + 1} has more than 1,000 fields"),
        Case("fields_3.csv", with_line(mid, lines[mid] + ",7"), rf"line {mid + 1} has 3 fields but the data table has 2"),
        Case("fields_first_row.csv", with_line(first_data, lines[first_data] + ",7,8,9"), rf"line {n1} has 5 fields"),
        # --- text: truncation and footers
        Case("decimal_changes.csv", mixed.encode(), rf"line {half + 1} has 3 fields but the data table has 2.*decimal comma"),
        Case("decimal_changes_semi.csv", mixed_semi.encode(), rf"line {half + 1}: .* decimal point, but the file is read with a decimal comma"),
        Case("cut_last_row.csv", raw[: raw.rstrip(b"\n").rfind(b",") + 1], r"line \d+: the value in column 'RI signal \[mV\]' is missing"),
        Case("footer_ok.csv", raw + b"\nEnd of data\nPeak table\nPeak,Start,End,Area\n1,12.5,18.0,99.1\n", None),
        Case("x_repeats.csv", with_line(mid, lines[mid - 1]), rf"line {mid + 1}: x value .* repeats"),
        Case("text_first_row.csv", with_line(first_data, "n/a,3.2"), rf"line {n1}: 'n/a' in column 'Elution volume \[mL\]' is not a number"),
        Case("text_inside.csv", with_line(mid, "Detector overload", replace=False), rf"line {mid + 1} holds text"),
        Case("inf_cell.csv", with_line(mid, lines[mid].split(",")[0] + ",inf"), rf"line {mid + 1}: 'inf' .* not a finite number"),
        Case("huge_cell.csv", with_line(mid, lines[mid].split(",")[0] + ",1e999"), rf"line {mid + 1}: '1e999' .* too large a number"),
        Case("one_column.csv", only_x.encode(), r"only one column of numbers"),
        Case("forced_decimal.csv", semi.encode(), r"separator/decimal mark given \(import.decimal = '\.'\).*decimal comma", options=(("decimal", "."),)),
        Case("forced_separator.csv", raw, r"separator/decimal mark given \(import.separator = ';'\).*comma-separated", options=(("separator", ";"),)),
        # --- signal faults (found after reading)
        Case("signal_zero.csv", zero.encode(), r"signal is 0 in all \d+ slices", "process"),
        Case("signal_constant.csv", const.encode(), r"same value \(3.5\) in all \d+ slices", "process"),
        Case("signal_overflow.csv", overflow.encode(), r"too large to compute with.*overflow", "process"),
        # --- workbooks
        Case("wb_ok.xlsx", wb, None),
        Case("wb_row_1e20.xlsx", wb_huge_reference(_FixedKind(0, b"99999999999999999999"), wb), r"refers to cell or row .*99999999999999999999.*beyond the last row"),
        Case("wb_column_xfe.xlsx", wb_huge_reference(_FixedKind(1), wb), r"refers to cell or row 'XFE12'"),
        Case("wb_dimension.xlsx", wb_huge_reference(_FixedKind(2, b"1048577"), wb), r"refers to cell or row 'ZZZZ1048577'"),
        Case("wb_int_400.xlsx", wb_big_integer(_FixedKind(0, 400), wb), r"cell B14 .* number too large"),
        Case("wb_int_5000.xlsx", wb_big_integer(_FixedKind(0, 5000), wb), r"workbook holds a value .*detail from the reading library"),
        Case("wb_entity_bomb.xlsx", _entity(wb, SHEET, b'<!DOCTYPE x [<!ENTITY a "aaaa"><!ENTITY b "&a;&a;&a;">]>'), r"'xl/worksheets/sheet1.xml' declares a document type or entities"),
        Case("wb_external_entity.xlsx", _entity(wb, "xl/sharedStrings.xml" if "xl/sharedStrings.xml" in zipfile.ZipFile(io.BytesIO(wb)).namelist() else "xl/workbook.xml", b'<!DOCTYPE x [<!ENTITY e SYSTEM "file:///etc/passwd">]>'), r"declares a document type or entities"),
        Case("wb_entity_utf16.xlsx", _entity(wb, SHEET, b"<!DOCTYPE x>", utf16=True), r"declares a document type or entities"),
        Case("wb_ebcdic.xlsx", rezip(wb, replace={SHEET: b'<?xml version="1.0" encoding="cp037"?>' + _sheet_xml(wb)}), r"declares the XML encoding 'cp037'"),
        Case("wb_bzip2.xlsx", rezip(wb, compression=zipfile.ZIP_BZIP2), r"compressed with zip method 12"),
        Case("wb_method_99.xlsx", patch_member(rezip(wb, compression=zipfile.ZIP_STORED), SHEET, method=99), r"compressed with zip method 99"),
        Case("wb_bad_crc.xlsx", corrupt_member_data(rezip(wb, compression=zipfile.ZIP_STORED), SHEET), r"archive part 'xl/worksheets/sheet1.xml': the zip archive .* damaged"),
        Case("wb_encrypted_flag.xlsx", patch_member(wb, SHEET, flags=1), r"encrypted"),
        Case("wb_truncated.xlsx", wb[: len(wb) // 2], r"not a valid .xlsx workbook|damaged"),
        Case("wb_no_sheet_part.xlsx", rezip(wb, drop=(SHEET,)), r"missing from the archive|cannot be read"),
        Case("wb_rid9.xlsx", wb_bad_relationship(random.Random(0), wb), r"relationship that is missing"),
        Case("wb_bad_xml.xlsx", rezip(wb, replace={SHEET: _sheet_xml(wb)[:-40]}), r"not well-formed XML"),
        Case("wb_not_workbook.xlsx", rezip(wb, drop=tuple(n for n in zipfile.ZipFile(io.BytesIO(wb)).namelist() if n.startswith("xl/workbook"))), r"not an .xlsx workbook"),
        Case("wb_text.xlsx", raw, r"rename it to .csv"),
        Case("wb_row_order.xlsx", rezip(wb, replace={SHEET: _sheet_xml(wb).replace(b'<row r="355"', b'<row r="351"')}), r"row 351 comes after row 354"),
    ]
    if big:
        cases.append(Case("one_line_50mb.csv", b"1," * 25_000_000, r"line 1 is 50,000,000 characters long"))
        cases.append(Case("digits_2mb_cell.csv", with_line(mid, "1" * 2_000_000 + ",1"), r"characters long"))
    return cases


class _FixedKind(random.Random):
    """A Random whose first ``randrange`` and ``choice`` give fixed answers (corpus cases)."""

    def __init__(self, kind: int, choice: object = None) -> None:
        super().__init__(0)
        self._kind = kind
        self._choice = choice

    def randrange(self, *args: object, **kwargs: object) -> int:  # type: ignore[override]
        return self._kind

    def choice(self, seq):  # type: ignore[no-untyped-def]
        return self._choice if self._choice is not None else seq[0]


def _entity(data: bytes, name: str, decl: bytes, utf16: bool = False) -> bytes:
    body = zipfile.ZipFile(io.BytesIO(data)).read(name)
    end = body.find(b"?>") + 2 if body.startswith(b"<?xml") else 0
    body = body[:end] + decl + body[end:]
    if utf16:
        body = body.decode("utf-8").replace('encoding="UTF-8"', 'encoding="UTF-16"').encode("utf-16")
    return rezip(data, replace={name: body})


# ============================================================================ message check

_DETAIL = re.compile(r"\s*\(detail from the reading library: .*\)\s*$", re.DOTALL)
_LIBRARY_MARKS = re.compile(
    r"Traceback|<class '|\bErrno\b|There is no item named|codec can't|\brId\d+\b"
    r"|^\s*[A-Z][A-Za-z]*(?:Error|Exception|Warning)\b|\bC error\b|Error tokenizing",
)
_FIX_WORDS = re.compile(
    r"\b(?:export|save|set|delete|correct|remove|fill|rename|give|check|choose|split|make|"
    r"write|use|replace|name|keep|widen|move|open|paste)\b",
    re.IGNORECASE,
)


def refusal_problem(err: BaseException, path: Path) -> str | None:
    """Why a refusal message fails the project's standard, or None when it passes.

    The standard (DEVELOPERS.md, Errors): the message names the file, says in plain words
    what is wrong and what to change; a library's own text may only follow, as a detail
    in parentheses, a plain explanation.
    """
    text = str(err)
    if path.name not in text:
        return "the file is not named"
    message = getattr(err, "message", text)
    plain = _DETAIL.sub("", message)
    if _LIBRARY_MARKS.search(plain):
        return "a library's own text outside the detail"
    if len(plain.split()) < 6:
        return "too short to explain anything"
    if not _FIX_WORDS.search(plain):
        return "does not say what to change"
    return None
