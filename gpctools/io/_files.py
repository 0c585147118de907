"""File-level checks shared by the readers: existence, what the bytes are, text decoding.

Nothing here interprets a table. The readers call :func:`read_bytes` once, then
:func:`detect_kind` to decide between the text path and the workbook path (the extension
is a claim that the content must confirm), and :func:`decode_text` for text files.
"""

from __future__ import annotations

import os
from pathlib import Path

from gpctools.errors import InputFormatError

__all__ = [
    "TEXT_EXTENSIONS",
    "XLSX_EXTENSIONS",
    "MAX_FILE_BYTES",
    "read_bytes",
    "detect_kind",
    "decode_text",
]

#: Extensions read as delimited text.
TEXT_EXTENSIONS = frozenset({".csv", ".txt", ".tsv", ".dat", ".asc", ".tab", ".prn"})
#: Extensions read as Office Open XML workbooks (data only; macros are never run).
XLSX_EXTENSIONS = frozenset({".xlsx", ".xlsm"})
#: Largest input file accepted [bytes]; a slice export is a few MB at most.
MAX_FILE_BYTES = 200 * 1024 * 1024

_OLE2_MAGIC = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_ZIP_MAGIC = (b"PK\x03\x04", b"PK\x05\x06", b"PK\x07\x08")
_BINARY_MAGIC = (
    (b"\x89PNG\r\n\x1a\n", "a PNG image"),
    (b"\xff\xd8\xff", "a JPEG image"),
    (b"GIF8", "a GIF image"),
    (b"%PDF", "a PDF document"),
    (b"\x1f\x8b", "a gzip archive"),
    (b"7z\xbc\xaf\x27\x1c", "a 7-zip archive"),
    (b"Rar!", "a RAR archive"),
    (b"II*\x00", "a TIFF image"),
    (b"MM\x00*", "a TIFF image"),
)
_CONTROL_BYTES = bytes(b for b in range(32) if b not in (9, 10, 12, 13))
_BOMS = (
    (b"\xef\xbb\xbf", "utf-8-sig"),
    (b"\xff\xfe", "utf-16-le"),
    (b"\xfe\xff", "utf-16-be"),
)


def read_bytes(path: str | os.PathLike[str], limit: int = MAX_FILE_BYTES) -> bytes:
    """Return the whole content of ``path``; clear errors for missing, empty or huge files.

    ``limit`` is the largest size accepted [bytes] (default :data:`MAX_FILE_BYTES`).
    """
    p = Path(path)
    if not p.exists():
        raise InputFormatError(
            "file not found; check the path and the file name (and its extension)", path=path
        )
    if p.is_dir():
        raise InputFormatError("this is a folder, not a file; give the path of a file", path=path)
    size = p.stat().st_size
    if size > limit:
        raise InputFormatError(
            f"file is {size / 1e6:.0f} MB, more than the {limit / 1e6:.0f} MB accepted; "
            "export a single chromatogram or sheet per file",
            path=path,
        )
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise InputFormatError(f"cannot read the file ({exc.strerror or exc})", path=path) from exc
    if not data.strip(b" \t\r\n\x00\xef\xbb\xbf\xff\xfe"):
        raise InputFormatError("file is empty; export the data again", path=path)
    return data


def _binary_description(data: bytes) -> str | None:
    """Name of a known non-text format the bytes start with, else None."""
    for magic, name in _BINARY_MAGIC:
        if data.startswith(magic):
            return name
    return None


def detect_kind(path: str | os.PathLike[str], data: bytes) -> str:
    """Decide how to read ``data``: ``"xlsx"`` or ``"text"``.

    The extension says what the file should be; the first bytes must agree. A CSV renamed
    ``.xlsx``, an image renamed ``.csv``, an old binary ``.xls`` workbook and other
    mismatches raise :class:`~gpctools.errors.InputFormatError` saying what to change.
    Unknown extensions are decided by content alone.
    """
    ext = Path(path).suffix.lower()
    is_zip = data.startswith(_ZIP_MAGIC)
    is_ole = data.startswith(_OLE2_MAGIC)
    if is_ole:
        raise InputFormatError(
            "this is an old binary workbook (.xls) or a password-protected workbook, "
            "which gpctools does not read; open it in a spreadsheet program and save it as "
            ".xlsx (without a password) or as CSV",
            path=path,
        )
    if ext == ".xls":
        raise InputFormatError(
            "files with the .xls extension are not read; save the workbook as .xlsx or CSV",
            path=path,
        )
    binary = _binary_description(data)
    if ext in XLSX_EXTENSIONS:
        if is_zip:
            return "xlsx"
        if binary:
            what = f"{binary}; export the data as .xlsx or CSV"
        elif _looks_like_text(data):
            what = "a text file (CSV or similar); rename it to .csv or .txt"
        else:
            what = "not a workbook; export the data again as .xlsx or CSV"
        raise InputFormatError(
            f"the extension says .xlsx workbook, but the file is not a zip archive: it is {what}",
            path=path,
        )
    if is_zip:
        if ext in TEXT_EXTENSIONS:
            raise InputFormatError(
                f"the extension says text ({ext}), but the file is a zip archive "
                "(perhaps an .xlsx workbook); rename it to .xlsx if it is a workbook",
                path=path,
            )
        return "xlsx"
    if binary:
        raise InputFormatError(
            f"this file is {binary}, not a data table; export the chromatogram or sheet "
            "as CSV/text or .xlsx",
            path=path,
        )
    if not _looks_like_text(data):
        if _looks_like_text(data[:8192].replace(b"\x00", b"")):
            return "text"  # text with stray NUL bytes: decode_text names their line
        raise InputFormatError(
            "this is a binary file, not a text table; export the data as CSV/text or .xlsx",
            path=path,
        )
    return "text"


def _looks_like_text(data: bytes) -> bool:
    """True if ``data`` plausibly is text in some supported encoding."""
    head = data[:8192]
    for bom, _ in _BOMS:
        if head.startswith(bom):
            return True
    if _utf16_without_bom(head):
        return True
    if b"\x00" in head:
        return False
    # Control characters other than tab/CR/LF/FF are rare in text files.
    ctrl = len(head) - len(head.translate(None, _CONTROL_BYTES))
    return ctrl <= max(2, len(head) // 200)


def _utf16_without_bom(head: bytes) -> str | None:
    """``"utf-16-le"``/``"utf-16-be"`` when every other byte is NUL (ASCII in UTF-16)."""
    n = min(len(head), 4096) & ~1
    if n < 8:
        return None
    even = head[0:n:2]
    odd = head[1:n:2]
    if odd.count(0) > 0.9 * len(odd) and even.count(0) < 0.1 * len(even):
        return "utf-16-le"
    if even.count(0) > 0.9 * len(even) and odd.count(0) < 0.1 * len(odd):
        return "utf-16-be"
    return None


def decode_text(path: str | os.PathLike[str], data: bytes, encoding: str | None = None) -> str:
    r"""Decode ``data`` to text.

    Order: the explicit ``encoding``; a byte-order mark (UTF-8, UTF-16 LE/BE); UTF-16
    without a mark (recognised by its NUL bytes); strict UTF-8; cp1252; Latin-1
    (which accepts any bytes). Newlines are normalised to ``"\n"``.
    """
    text: str | None = None
    if encoding is not None:
        try:
            text = data.decode(encoding)
        except LookupError as exc:
            raise InputFormatError(
                f"unknown encoding {encoding!r}; use e.g. 'utf-8', 'utf-16' or 'cp1252'",
                path=path,
            ) from exc
        except UnicodeDecodeError as exc:
            raise InputFormatError(
                f"the file cannot be decoded as {encoding!r} (byte {exc.start}); "
                "leave the encoding unset to let gpctools detect it",
                path=path,
            ) from exc
        if text.startswith("\ufeff"):
            text = text[1:]
    else:
        for bom, codec in _BOMS:
            if data.startswith(bom):
                try:
                    text = data[len(bom) :].decode(codec.replace("-sig", ""))
                except UnicodeDecodeError as exc:
                    body = data[len(bom) :]
                    good = body[: exc.start].decode(codec.replace("-sig", ""), "replace")
                    line = good.count("\n") + 1
                    cut = " (the file is cut off)" if exc.end >= len(body) else ""
                    raise InputFormatError(
                        f"line {line}: the file starts with a {codec} byte-order mark but "
                        f"byte {exc.start + len(bom)} is not valid {codec}{cut}; the file "
                        "is damaged - export it again",
                        path=path,
                        row=line,
                    ) from exc
                break
        if text is None:
            codec16 = _utf16_without_bom(data[:4096])
            candidates = ([codec16] if codec16 else []) + ["utf-8", "cp1252", "latin-1"]
            for codec in candidates:
                try:
                    text = data.decode(codec)
                    break
                except UnicodeDecodeError:
                    continue
        assert text is not None  # latin-1 decodes any bytes
    if "\r" in text:
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    nul = text.find("\x00")
    if nul >= 0:
        line = text.count("\n", 0, nul) + 1
        count = text.count("\x00")
        raise InputFormatError(
            f"line {line} holds a NUL byte (character code 0; {count:,} in the file): "
            "the export is damaged (a disk or transfer fault, or a crash while it was "
            "written); export the chromatogram again, or delete those characters in a "
            "text editor",
            row=line,
            path=path,
        )
    return text


def file_kind(path: str | os.PathLike[str]) -> str:
    """Check that ``path`` is a readable data file and say how it would be read.

    The checks every reader makes before parsing: the file exists, is not a folder, is
    not empty nor over :data:`MAX_FILE_BYTES`, and its first bytes agree with its
    extension (no image, archive, old ``.xls`` or binary file).

    Parameters
    ----------
    path : str or os.PathLike
        The file.

    Returns
    -------
    str
        ``"xlsx"`` or ``"text"``.

    Raises
    ------
    gpctools.errors.InputFormatError
        Naming the file and what to change.
    """
    return detect_kind(path, read_bytes(path))
