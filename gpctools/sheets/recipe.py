"""The recipe sheet: a recipe as one row per key (read by
:func:`gpctools.kinetics.load_recipe` for any file that is not ``.toml``).

=============  ==============================================================================
column         meaning
=============  ==============================================================================
``section``    the recipe section: ``recipe`` (top level: label, T, volume; also blank),
               ``monomer``, ``initiator``, ``termination``, ``solvent``, ``agent``,
               ``inhibitor``, ``candidate``, ``measured``, ``checks``, ``normal batch``,
               ``uncertainty``, ``data files``
``item``       for sections that may hold several entries (solvent, agent, inhibitor,
               candidate): which entry the row belongs to; rows with the same item form
               one entry, and the item is the entry's ``name`` unless a ``name`` row gives
               it. Blank elsewhere.
``key``        the key exactly as in the TOML recipe, unit in brackets
               (``concentration [mol/L]``, ``T [°C]``, ``charge [g per 100 g monomer]``)
``value``      the value: a number (decimal point or comma, as in every sheet), a text,
               yes/no, or for ``time [min]`` and ``conversion`` a list separated by ``;``
               (quote the cell in a ``;``-separated file)
=============  ==============================================================================

Other columns (``note``, ``source``) are kept and ignored. The rows become the same
nested mapping a TOML file gives (:func:`nested_recipe`), so every key is checked by the
same code and a bad value is reported at its row. Template: ``templates/recipe.csv``.
"""

from __future__ import annotations

from collections.abc import Callable, Collection
from typing import Any

from gpctools.errors import MethodError
from gpctools.sheets import cells
from gpctools.sheets.schema import CheckedSheet, Field, SheetSchema

__all__ = ["RECIPE", "SECTIONS", "REPEATED", "nested_recipe"]

#: Accepted spellings of a section (as :func:`~gpctools.sheets.cells.choice_key` gives
#: them) -> the TOML table name ("recipe" for the top level).
SECTIONS = {
    "recipe": "recipe", "top": "recipe", "general": "recipe",
    "monomer": "monomer", "initiator": "initiator", "termination": "termination",
    "solvent": "solvent", "agent": "agent", "inhibitor": "inhibitor", "retarder": "inhibitor",
    "candidate": "candidate", "measured": "measured", "checks": "checks", "check": "checks",
    "normal_batch": "normal_batch", "uncertainty": "uncertainty", "data_files": "data_files",
}
#: Sections that hold a list of entries ([[solvent]] in TOML).
REPEATED = frozenset({"solvent", "agent", "inhibitor", "candidate"})

#: Schema of the recipe sheet.
RECIPE = SheetSchema(
    kind="recipe sheet",
    row_noun="key",
    fields=(
        Field("section", "section", kind="choice", choices=SECTIONS, default="recipe",
              meaning="recipe section (blank: top level)"),
        Field("item", "item", kind="text", aliases=("entry", "component"),
              meaning="entry of a repeated section (solvent, agent, inhibitor, candidate)"),
        Field("key", "key", kind="text", aliases=("parameter", "quantity"), required=True,
              needed=True, hint="write the key as in the TOML recipe (gpctools template recipe.toml), unit in brackets",
              meaning="the key, as in the TOML recipe"),
        Field("value", "value", kind="text", required=True, needed=True,
              hint="give the value, or delete the row", meaning="the value"),
    ),
    template="recipe.csv",
    column_error=MethodError,
    cell_error=MethodError,
)


def _typed(key: str, text: str, *, text_keys: Collection[str], bool_keys: Collection[str],
           list_keys: Collection[str], section: str) -> Any:
    """A value cell as the TOML parser would give it (raises CellError)."""
    if section == "data_files" or key in text_keys:
        return text
    if key in bool_keys:
        b = cells.parse_bool(text)
        return b
    if key in list_keys:
        parts = [p for p in text.split(";") if p.strip()]
        out = []
        for part in parts:
            v = cells.parse_number(part)
            if v is None:
                raise cells.CellError(part, f"{part!r} is not a number", "write numbers "
                                      "separated by ';'")
            out.append(v)
        return out
    try:
        v = cells.parse_number(text)
    except cells.CellError:
        return text  # the recipe parser names the key and says what it must be
    return text if v is None else v


def nested_recipe(
    checked: CheckedSheet, *, text_keys: Collection[str], bool_keys: Collection[str],
    list_keys: Collection[str], dotted: Callable[[str, str], str],
) -> tuple[dict[str, Any], dict[str, int]]:
    """The recipe sheet's rows as the nested mapping of a TOML recipe.

    Parameters
    ----------
    checked : CheckedSheet
        The sheet read with :data:`RECIPE`.
    text_keys, bool_keys, list_keys : collections of str
        Keys whose values are text, yes/no, or ``;``-separated lists of numbers; all
        other values are numbers.
    dotted : callable
        ``dotted(section, key)`` -> the dotted key the recipe parser names in its errors
        (``monomer."concentration [mol/L]"``, ``solvent[1].name``).

    Returns
    -------
    (dict, dict)
        The mapping, and dotted key -> sheet row, to place the parser's errors.

    Raises
    ------
    MethodError
        A value that is not a number, yes/no or list where one is needed, a key given
        twice for one entry (both rows named).
    """
    data: dict[str, Any] = {}
    rows: dict[str, int] = {}
    items: dict[str, dict[str, dict[str, Any]]] = {s: {} for s in REPEATED}
    for r in checked.rows:
        section, key = ("" if r["section"] == "recipe" else r["section"]), r["key"]
        item = r.get("item", "")
        try:
            value = _typed(key, r["value"], text_keys=text_keys, bool_keys=bool_keys,
                           list_keys=list_keys, section=section)
        except cells.CellError as exc:
            raise r.error(f"{exc.problem}; {exc.advice}" if exc.advice else exc.problem,
                          column="value") from None
        if section in REPEATED:
            entry = items[section].setdefault(item.casefold(), {"name": item} if item else {})
            index = list(items[section]).index(item.casefold()) + 1
            where = dotted(f"{section}[{index}]", key)
        else:
            entry = data.setdefault(section, {}) if section else data
            where = dotted(section, key)
        if key in entry and not (section in REPEATED and key == "name" and where not in rows):
            raise r.error(f"{key!r} is given twice for this entry (first in row {rows[where]}); "
                          "keep one row", column="key")
        entry[key] = value
        rows[where] = r.row
    for section, entries in items.items():
        if entries:
            data[section] = list(entries.values())
    return data, rows
