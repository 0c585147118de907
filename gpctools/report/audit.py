"""Audit trail of a QC report: what went in, with what settings, made by what.

Every report records the gpctools version, the method file (path, SHA-256 and its full
text), the SHA-256 and size of every input file (batch sheet, each chromatogram export,
spec sheet, history tables), the settings, the versions of Python and the numerical
libraries, and a timestamp. The timestamp is the only entry allowed to differ when the
same inputs are run again.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import os
import platform
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from gpctools.display import Display

__all__ = ["InputFile", "AuditTrail", "sha256_file", "build_audit", "library_versions"]

_LIBRARIES = ("numpy", "pandas", "scipy", "matplotlib", "openpyxl", "jinja2")


def sha256_file(path: str | os.PathLike[str]) -> str:
    """SHA-256 of a file's bytes, as 64 hex digits (read in 1 MiB blocks)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def library_versions() -> dict[str, str]:
    """Versions of Python and of the libraries the numbers depend on."""
    from importlib import metadata

    out = {"python": platform.python_version()}
    for name in _LIBRARIES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out


@dataclass(frozen=True, repr=False)
class InputFile(Display):
    """One input file: what it is, where, its SHA-256 and size (``sha256`` is
    ``"missing"`` and ``size`` -1 for a file that could not be read).
    """

    role: str
    path: str
    sha256: str
    size: int

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {"role": self.role, "path": self.path, "sha256": self.sha256, "size [bytes]": self.size}


@dataclass(frozen=True, repr=False)
class AuditTrail(Display):
    """The audit record of one report.

    Attributes
    ----------
    tool_version : str
        ``gpctools.__version__``.
    timestamp : str
        UTC time of the run, ISO 8601.
    versions : dict
        Python and library versions.
    method_path, method_sha256, method_text : str or None
        The method file and its content.
    inputs : tuple of InputFile
    settings : dict
        Every setting that shaped the numbers (JSON-safe).
    """

    tool_version: str
    timestamp: str
    versions: dict[str, str]
    method_path: str | None
    method_sha256: str | None
    method_text: str | None
    inputs: tuple[InputFile, ...]
    settings: dict[str, Any] = field(default_factory=dict)

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            "tool": "gpctools",
            "tool version": self.tool_version,
            "timestamp (UTC)": self.timestamp,
            "versions": dict(self.versions),
            "method": {"path": self.method_path, "sha256": self.method_sha256, "text": self.method_text},
            "inputs": [f.summary() for f in self.inputs],
            "settings": self.settings,
        }

    def to_frame(self) -> pd.DataFrame:
        """Key/value rows for the workbook's audit sheet (method text last)."""
        rows: list[tuple[str, str, Any]] = [
            ("run", "tool", "gpctools"),
            ("run", "tool version", self.tool_version),
            ("run", "timestamp (UTC)", self.timestamp),
        ]
        rows += [("versions", k, v) for k, v in self.versions.items()]
        rows += [("method", "path", self.method_path), ("method", "sha256", self.method_sha256)]
        for f in self.inputs:
            rows.append((f"input: {f.role}", f.path, f.sha256))
        for k, v in _flatten(self.settings):
            rows.append(("setting", k, v))
        if self.method_text is not None:
            for n, line in enumerate(self.method_text.splitlines(), start=1):
                rows.append(("method text", f"line {n}", line))
        return pd.DataFrame(rows, columns=["section", "item", "value"])

    def to_json(self) -> str:
        """The summary as indented JSON text (keys in a fixed order)."""
        return json.dumps(self.summary(), indent=2, ensure_ascii=False, default=str) + "\n"


def _flatten(d: Mapping[str, Any], prefix: str = "") -> Iterable[tuple[str, Any]]:
    for k, v in d.items():
        key = f"{prefix}{k}"
        if isinstance(v, Mapping):
            yield from _flatten(v, key + ".")
        elif isinstance(v, (list, tuple)):
            yield key, json.dumps(list(v), default=str)
        else:
            yield key, v


def build_audit(
    *,
    inputs: Iterable[tuple[str, str | os.PathLike[str]]] = (),
    method: Any = None,
    settings: Mapping[str, Any] | None = None,
    timestamp: str | None = None,
) -> AuditTrail:
    """Collect the audit record.

    Parameters
    ----------
    inputs : iterable of (role, path)
        Input files; each is hashed (a file that cannot be read is recorded as missing).
        Duplicates (same role and path) are kept once, in first-seen order.
    method : gpctools.method.Method, optional
        Its ``source``, ``sha256`` and ``text`` are recorded; its file is re-read when the
        hash was not kept.
    settings : mapping, optional
    timestamp : str, optional
        Default: now, UTC, ISO 8601 to the second.

    Returns
    -------
    AuditTrail
    """
    from gpctools import __version__

    seen: dict[tuple[str, str], InputFile] = {}
    for role, p in inputs:
        key = (str(role), str(p))
        if key in seen:
            continue
        try:
            seen[key] = InputFile(str(role), str(p), sha256_file(p), Path(p).stat().st_size)
        except OSError:
            seen[key] = InputFile(str(role), str(p), "missing", -1)
    m_path = m_sha = m_text = None
    if method is not None:
        m_path = getattr(method, "source", None)
        m_sha = getattr(method, "sha256", None)
        m_text = getattr(method, "text", None)
        if m_path and (m_sha is None or m_text is None):
            try:
                raw = Path(m_path).read_bytes()
                m_sha = m_sha or hashlib.sha256(raw).hexdigest()
                m_text = m_text if m_text is not None else raw.decode("utf-8-sig", errors="replace")
            except OSError:
                pass
    if timestamp is None:
        timestamp = _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()
    return AuditTrail(
        tool_version=__version__,
        timestamp=timestamp,
        versions=library_versions(),
        method_path=None if m_path is None else str(m_path),
        method_sha256=m_sha,
        method_text=m_text,
        inputs=tuple(seen.values()),
        settings=dict(settings or {}),
    )
