"""Output files: atomic writing and the one file-name sanitiser.

Every writer in gpctools goes through :func:`atomic_path`: the content is written to a
temporary file in the destination folder and moved into place with :func:`os.replace`,
which is atomic on the usual operating systems for paths on the same file system. A crash or an
exception part-way leaves the previous file (if any) untouched and no partial file.

File names made from user labels (sample ids, group labels, products, quantities) go
through :func:`safe_name`, and :func:`unique_name` keeps two labels that sanitise alike
from overwriting each other's file.

This module imports nothing from gpctools, so any layer that writes may use it.
"""

from __future__ import annotations

import contextlib
import os
import re
import tempfile
from collections.abc import Iterator, MutableSet
from pathlib import Path
from typing import Any

__all__ = ["atomic_path", "write_text", "write_bytes", "write_csv", "safe_name", "unique_name",
           "MAX_NAME_BYTES"]

#: Longest file-name stem :func:`safe_name` returns [bytes of UTF-8]: common file systems
#: allow 255 bytes per name, and a plot name holds up to two stems and a prefix (common
#: practice).
MAX_NAME_BYTES = 100
_UNSAFE_RUN = re.compile(r"[^\w.-]+")


@contextlib.contextmanager
def atomic_path(destination: str | os.PathLike[str]) -> Iterator[Path]:
    """Yield a temporary path; on success move it onto ``destination``.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with atomic_path(d / "x.txt") as tmp:
    ...     _ = tmp.write_text("ok")
    >>> (d / "x.txt").read_text()
    'ok'
    """
    dest = Path(destination)
    dest.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp_name = tempfile.mkstemp(prefix=f".{dest.name}.", suffix=".part", dir=dest.parent)
    os.close(fd)
    tmp = Path(tmp_name)
    # mkstemp creates the file owner-only (0600); give it the mode a plain open() would.
    with contextlib.suppress(OSError):
        os.chmod(tmp, 0o666 & ~_umask())
    try:
        yield tmp
        os.replace(tmp, dest)
    except BaseException:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def write_text(destination: str | os.PathLike[str], text: str, encoding: str = "utf-8") -> Path:
    """Write ``text`` atomically and return the destination path.

    Parameters
    ----------
    destination : str or os.PathLike
        File to write (its folder is created).
    text : str
        Content, written as given (no newline translation).
    encoding : str
        Text encoding (default UTF-8).

    Returns
    -------
    pathlib.Path
    """
    with atomic_path(destination) as tmp:
        tmp.write_text(text, encoding=encoding, newline="")
    return Path(destination)


def write_bytes(destination: str | os.PathLike[str], data: bytes) -> Path:
    """Write ``data`` atomically and return the destination path.

    Parameters
    ----------
    destination : str or os.PathLike
        File to write (its folder is created).
    data : bytes
        Content (e.g. PNG bytes from :func:`gpctools.report.plots.png_bytes`).

    Returns
    -------
    pathlib.Path
    """
    with atomic_path(destination) as tmp:
        tmp.write_bytes(data)
    return Path(destination)


def write_csv(destination: str | os.PathLike[str], frame: Any, **kwargs: Any) -> Path:
    """Write a pandas DataFrame as UTF-8 CSV atomically (index off unless asked).

    Floats are written to 12 significant digits (:func:`gpctools.formatting.clean_frame`):
    every digit a measurement carries, none of the float noise (``2520000``, not
    ``2519999.999999998``).

    Parameters
    ----------
    destination : str or os.PathLike
        File to write (its folder is created).
    frame : pandas.DataFrame
        The table; column names (with their units) become the header.
    **kwargs
        Passed to :meth:`pandas.DataFrame.to_csv`.

    Returns
    -------
    pathlib.Path
    """
    from gpctools.formatting import clean_frame

    kwargs.setdefault("index", False)
    frame = clean_frame(frame)  # full precision without float noise (12 significant digits)
    with atomic_path(destination) as tmp:
        frame.to_csv(tmp, **kwargs)
    return Path(destination)


def safe_name(text: str, default: str = "file") -> str:
    """A file-name stem made from a user label.

    Every run of characters other than letters, digits, ``_``, ``-`` and ``.`` becomes
    one ``_``; dots and underscores at either end are removed (no hidden files, no
    ``..``); the result is cut to :data:`MAX_NAME_BYTES` bytes of UTF-8 (whole
    characters). Letters and digits of any script are kept.

    Parameters
    ----------
    text : str
        The label (sample id, group label, product, quantity with its unit).
    default : str
        Returned when nothing is left (an empty or all-punctuation label).

    Returns
    -------
    str

    Examples
    --------
    >>> safe_name("agent T, 50 °C"), safe_name("Mw [g/mol]"), safe_name("../x")
    ('agent_T_50_C', 'Mw_g_mol', 'x')
    >>> safe_name("", default="sample")
    'sample'
    """
    stem = _UNSAFE_RUN.sub("_", str(text)).strip("._")
    cut = stem.encode("utf-8")[:MAX_NAME_BYTES].decode("utf-8", errors="ignore")
    return cut.rstrip("._") or default


def unique_name(name: str, seen: MutableSet[str]) -> str:
    """``name``, or ``name_2``, ``name_3``, ... when ``seen`` already holds it; records the result.

    Parameters
    ----------
    name : str
        A file-name stem (from :func:`safe_name`).
    seen : mutable set of str
        Stems already used for files of the same kind; updated in place.

    Returns
    -------
    str

    Examples
    --------
    >>> seen = set()
    >>> unique_name("DDM_St", seen), unique_name("DDM_St", seen)
    ('DDM_St', 'DDM_St_2')
    """
    out, k = name, 2
    while out in seen:
        out, k = f"{name}_{k}", k + 1
    seen.add(out)
    return out
