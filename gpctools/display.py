"""How results show themselves in a terminal and a notebook: one mixin for every result.

Every result class with a ``summary()`` (the JSON-safe description the reports use)
inherits :class:`Display`, which gives it

* ``repr(result)``: the class name and its first few headline values, one line of at
  most :data:`REPR_CHARS` characters (a transfer result's dataclass repr used to be
  139 kB);
* ``result._repr_html_()``: the same as a small HTML table, which Jupyter shows for the
  last expression of a cell (at most :data:`HTML_ROWS` rows: a summary, not a dump);
* ``result.to_frame()``: the result's table as a pandas DataFrame, the one way to get
  a table from any result. Results that have a table (``BatchResult.table``,
  ``Distribution.table()``, ``Diagnosis.table()``, ...) return it; the others return
  one row of their scalar summary values.

The headline values come from ``summary()``: its scalar entries (numbers, short text,
yes/no) in order, and scalars one level down as ``key: subkey``. Numbers are shown by
the policy of :mod:`gpctools.formatting` (digits per quantity from the key's unit). A
class may override ``_display_items()`` to choose them itself. Dataclasses using the
mixin are declared with ``repr=False`` so that the generated ``__repr__`` does not
replace this one.
"""

from __future__ import annotations

from html import escape
from typing import Any

__all__ = ["Display", "REPR_CHARS", "HTML_ROWS", "display_items"]

#: Longest ``repr`` [characters].
REPR_CHARS = 300
#: Rows of the notebook table.
HTML_ROWS = 14
_TEXT_CHARS = 60


def _scalar(value: Any) -> bool:
    if isinstance(value, (bool, int, float, str)) or value is None:
        return not (isinstance(value, str) and (len(value) > _TEXT_CHARS or not value))
    try:
        import numpy as np

        return isinstance(value, (np.integer, np.floating, np.bool_))
    except ImportError:  # pragma: no cover
        return False


def display_items(summary: Any, limit: int | None = HTML_ROWS) -> list[tuple[str, Any]]:
    """Headline (label, value) pairs of a ``summary()`` mapping (see the module docstring)."""
    items: list[tuple[str, Any]] = []
    if not isinstance(summary, dict):
        return items
    nested: list[tuple[str, Any]] = []
    for key, value in summary.items():
        if value is None:
            continue
        if _scalar(value):
            items.append((str(key), value))
        elif isinstance(value, dict):
            nested.extend((f"{key}: {k}", v) for k, v in value.items() if v is not None and _scalar(v))
        elif isinstance(value, (list, tuple)) and value and all(_scalar(v) for v in value) and len(value) <= 3:
            items.append((str(key), value))
    items.extend(nested)
    return items if limit is None else items[:limit]


def _text(value: Any, key: str) -> str:
    from gpctools.formatting import number

    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (list, tuple)):
        return " to ".join(_text(v, key) for v in value) if len(value) == 2 else ", ".join(_text(v, key) for v in value)
    if isinstance(value, str):
        return value
    return number(value, key)


class Display:
    """Mixin: concise ``repr``, a notebook table and ``to_frame()`` from ``summary()``."""

    __slots__ = ()

    def _display_items(self) -> list[tuple[str, Any]]:
        summary = getattr(self, "summary", None)
        return display_items(summary() if callable(summary) else None, limit=None)

    def _safe_items(self) -> list[tuple[str, Any]]:
        try:
            return self._display_items()
        except Exception:  # a repr must never raise
            return []

    def __repr__(self) -> str:
        name = type(self).__name__
        parts = []
        size = len(name) + 2
        for key, value in self._safe_items():
            text = _text(value, key)
            if len(text) > 40:
                text = text[:39] + "…"
            part = f"{key}={text}"
            if size + len(part) + 2 > REPR_CHARS - 5:
                parts.append("…")
                break
            parts.append(part)
            size += len(part) + 2
        return f"{name}({', '.join(parts)})"

    def _repr_html_(self) -> str:
        items = self._safe_items()
        rows = "".join(f"<tr><th style='text-align:left'>{escape(k)}</th>"
                       f"<td style='text-align:right'>{escape(_text(v, k))}</td></tr>"
                       for k, v in items[:HTML_ROWS])
        more = (f"<tr><td colspan='2'><i>{len(items) - HTML_ROWS} more in .summary() and "
                ".to_frame()</i></td></tr>") if len(items) > HTML_ROWS else ""
        return (f"<table><caption style='text-align:left'><b>{escape(type(self).__name__)}</b></caption>"
                f"{rows}{more}</table>")

    def to_frame(self) -> Any:
        """The result's table as a pandas DataFrame (see the module docstring)."""
        import pandas as pd

        table = getattr(self, "table", None)
        if callable(table):
            try:
                table = table()
            except TypeError:  # a table() that needs arguments is not the result's table
                table = None
        if table is not None:
            return table if isinstance(table, pd.DataFrame) else pd.DataFrame(table)
        return pd.DataFrame([dict(self._safe_items())])
