"""Atomic output writing: a file appears complete or not at all.

Every writer in gpctools goes through :func:`atomic_path`: the content is written to a
temporary file in the destination folder and moved into place with :func:`os.replace`,
which is atomic on the usual operating systems for paths on the same file system. A crash or an
exception part-way leaves the previous file (if any) untouched and no partial file.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path

__all__ = ["atomic_path", "write_text", "write_bytes", "write_csv"]


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
    """Write ``text`` atomically and return the destination path."""
    with atomic_path(destination) as tmp:
        tmp.write_text(text, encoding=encoding, newline="")
    return Path(destination)


def write_bytes(destination: str | os.PathLike[str], data: bytes) -> Path:
    """Write ``data`` atomically and return the destination path."""
    with atomic_path(destination) as tmp:
        tmp.write_bytes(data)
    return Path(destination)


def write_csv(destination: str | os.PathLike[str], frame, **kwargs) -> Path:
    """Write a pandas DataFrame as UTF-8 CSV atomically (index off unless asked)."""
    kwargs.setdefault("index", False)
    with atomic_path(destination) as tmp:
        frame.to_csv(tmp, **kwargs)
    return Path(destination)
