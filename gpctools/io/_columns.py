"""Recognising the x column (time or volume, and its unit) and the detector column from headers.

A header is split into a name and a unit: the unit is taken from trailing brackets
(``"Time (min)"``, ``"Volume [ml]"``), from after a slash (``"RT/min"``, ``"Ve/mL"``), from
after ``" in "`` (``"time in s"``) or after a comma (``"Time, min"``), or the whole header
is a unit (``"min"``, ``"mL"``). A recognised unit decides the kind (mL is a volume, min
and s are times); without a unit the name's words decide it.
"""

from __future__ import annotations

import re

__all__ = [
    "normalise_unit",
    "split_header",
    "x_kind_of",
    "detector_rank",
    "is_unit_cell",
    "UNIT_KIND",
]

#: Canonical x units and their kind.
UNIT_KIND = {"mL": "volume", "min": "time", "s": "time"}

_UNIT_ALIASES = {
    "ml": "mL",
    "milliliter": "mL",
    "milliliters": "mL",
    "millilitre": "mL",
    "millilitres": "mL",
    "cm3": "mL",
    "cm^3": "mL",
    "cm³": "mL",
    "cc": "mL",
    "min": "min",
    "mins": "min",
    "min.": "min",
    "minute": "min",
    "minutes": "min",
    "minuten": "min",
    "s": "s",
    "sec": "s",
    "sec.": "s",
    "secs": "s",
    "second": "s",
    "seconds": "s",
    "sekunden": "s",
}

# Tokens of units that may appear in a units row under the header (any column).
_OTHER_UNITS = {
    "mv",
    "µv",
    "uv",
    "v",
    "nv",
    "riu",
    "nriu",
    "µriu",
    "au",
    "mau",
    "a.u.",
    "a.u",
    "au.",
    "counts",
    "cts",
    "%",
    "-",
    "",
    "hz",
    "g/mol",
    "da",
    "kpa",
    "psi",
    "bar",
}

_BRACKET = re.compile(r"^(?P<name>.*?)\s*[\(\[\{]\s*(?P<unit>[^\)\]\}]*?)\s*[\)\]\}]\s*$")
_SLASH = re.compile(r"^(?P<name>.*\S)\s*/\s*(?P<unit>[^/]+?)\s*$")
_IN = re.compile(r"^(?P<name>.*\S)\s+in\s+(?P<unit>\S+)\s*$", re.IGNORECASE)
_COMMA = re.compile(r"^(?P<name>.*\S)\s*,\s*(?P<unit>\S+)\s*$")
_TOKEN = re.compile(r"[a-zäöüéèàçµ0-9]+", re.IGNORECASE)

_VOLUME_WORDS = {
    "volume",
    "volumes",
    "vol",
    "ve",
    "vr",
    "vel",
    "v",
    "volumen",
    "elutionsvolumen",
    "retentionsvolumen",
    "ml",
}
_TIME_WORDS = {
    "time",
    "rt",
    "t",
    "tr",
    "tret",
    "zeit",
    "retentionszeit",
    "elutionszeit",
    "temps",
    "tiempo",
    "tempo",
    "minutes",
    "min",
}
# Detector words, by preference: concentration detectors first (RI, then UV/IR), then
# generic signal words, then detectors that are not concentration-proportional.
_RI_WORDS = {"ri", "dri", "rid", "refractive", "refractometer", "refraction", "brechungsindex"}
_UV_WORDS = {"uv", "uvvis", "vis", "dad", "pda", "absorbance", "abs", "ir", "elsd"}
_SIGNAL_WORDS = {
    "signal",
    "response",
    "intensity",
    "detector",
    "det",
    "mv",
    "µv",
    "uv",
    "height",
    "counts",
    "cts",
    "y",
    "value",
    "concentration",
    "conc",
    "amplitude",
    "intensität",
}
_OTHER_DETECTOR_WORDS = {
    "ls",
    "mals",
    "lals",
    "rals",
    "light",
    "scattering",
    "visc",
    "viscometer",
    "viscosity",
    "dp",
    "ip",
    "fluorescence",
    "fl",
}
# Columns that are never the detector signal: slice counters, molar mass, derived curves.
_NOT_SIGNAL_WORDS = {
    "slice",
    "index",
    "no",
    "nr",
    "point",
    "points",
    "n",
    "id",
    "logm",
    "log",
    "mw",
    "mn",
    "molar",
    "mass",
    "m",
    "baseline",
    "dwdlogm",
    "wlogm",
    "cumulative",
    "fraction",
    "flag",
    "flags",
    "peak",
}


def normalise_unit(unit: str | None) -> str | None:
    """Canonical x unit (``"mL"``, ``"min"``, ``"s"``) for a unit text, else None.

    Examples
    --------
    >>> normalise_unit(" ml "), normalise_unit("Minutes"), normalise_unit("sec"), normalise_unit("mV")
    ('mL', 'min', 's', None)
    """
    if unit is None:
        return None
    u = unit.strip().lower().replace(" ", "")
    return _UNIT_ALIASES.get(u)


def split_header(header: str) -> tuple[str, str | None]:
    """Split a header into ``(name, unit_text)``; unit_text is None when there is none.

    Examples
    --------
    >>> split_header("Retention time [min]"), split_header("Ve/mL"), split_header("Signal")
    (('Retention time', 'min'), ('Ve', 'mL'), ('Signal', None))
    """
    h = header.strip()
    m = _BRACKET.match(h)
    if m:
        return m.group("name").strip(), m.group("unit").strip()
    for pattern in (_SLASH, _IN, _COMMA):
        m = pattern.match(h)
        if m and normalise_unit(m.group("unit")) is not None:
            return m.group("name").strip(), m.group("unit").strip()
    if normalise_unit(h) is not None:
        return "", h
    return h, None


def _tokens(name: str) -> list[str]:
    return [t.lower() for t in _TOKEN.findall(name)]


def x_kind_of(header: str) -> tuple[str | None, str | None]:
    """``(x_kind, x_unit)`` read from a header; either may be None when not recognised.

    A recognised unit decides both. Otherwise a volume word gives ``("volume", "mL")``
    (mL is the only volume unit in use) and a time word gives ``("time", None)``:
    minutes and seconds are both common, so the unit must then come from elsewhere.

    Examples
    --------
    >>> x_kind_of("Elution volume (mL)"), x_kind_of("t [s]"), x_kind_of("Zeit")
    (('volume', 'mL'), ('time', 's'), ('time', None))
    """
    name, unit_text = split_header(header)
    unit = normalise_unit(unit_text)
    if unit is not None:
        return UNIT_KIND[unit], unit
    toks = _tokens(name)
    if unit_text:
        # An unknown unit ("T (°C)", "Volume (µL)"): single letters say nothing, and a
        # word gives the kind but no unit (no silent factor-of-1000 mistakes).
        toks = [t for t in toks if len(t) > 1]
    if not toks:
        return None, None
    if any(t in _VOLUME_WORDS for t in toks) or any(t.startswith("volum") for t in toks):
        return "volume", (None if unit_text else "mL")
    if any(t in _TIME_WORDS for t in toks) or any(t.startswith("time") for t in toks):
        return "time", None
    return None, None


def detector_rank(header: str) -> int:
    """Preference of a column as the detector signal (higher is better).

    4: refractive-index (concentration) detector; 3: UV/IR/ELSD; 2: generic signal words;
    1: unrecognised header; 0: light scattering / viscometer / other non-concentration
    detectors; -1: never the signal (slice numbers, molar mass, derived curves, x columns).
    """
    name, unit_text = split_header(header)
    if normalise_unit(unit_text) is not None:
        return -1
    toks = _tokens(name)
    if x_kind_of(header)[0] is not None:
        return -1
    joined = "".join(toks)
    if "refractive" in joined or any(t in _RI_WORDS for t in toks):
        return 4
    if any(t in _UV_WORDS or re.fullmatch(r"uv\d*", t) for t in toks):
        return 3
    if any(t in _SIGNAL_WORDS for t in toks):
        return 2
    if any(t in _OTHER_DETECTOR_WORDS for t in toks):
        return 0
    if joined in {"dwdlogm", "wlogm"} or any(t in _NOT_SIGNAL_WORDS for t in toks):
        return -1
    return 1


def is_unit_cell(text: str) -> bool:
    """True if a cell of a units row (under the header) holds only a unit."""
    t = text.strip().strip("()[]{}").strip().lower()
    return normalise_unit(t) is not None or t in _OTHER_UNITS
