"""Units of length and time: OME-XML abbreviations and NGFF (UDUNITS-2) names.

One table for every reader: a step is converted to micrometres (lengths) or
seconds (times). Unknown units return ``None``; the reader then logs a warning
and falls back.
"""

from __future__ import annotations

__all__ = ["length_in_um", "time_in_s", "LENGTH_UM", "TIME_S"]

#: SI prefixes as powers of ten, as in UDUNITS-2 (the unit names NGFF lists).
_PREFIX = {"yocto": -24, "zepto": -21, "atto": -18, "femto": -15, "pico": -12, "nano": -9,
           "micro": -6, "milli": -3, "centi": -2, "deci": -1, "": 0, "deca": 1, "hecto": 2,
           "kilo": 3, "mega": 6, "giga": 9, "tera": 12, "peta": 15, "exa": 18, "zetta": 21,
           "yotta": 24}


def _power(exponent: int) -> float:
    """10**exponent as the nearest float (1e-3, not 0.0010000000000000002)."""
    return float(f"1e{exponent}")


#: Micrometres per unit: OME abbreviations, NGFF names (metre with SI prefixes) and the
#: non-SI lengths NGFF lists (inch, foot, yard, mile, parsec, angstrom).
LENGTH_UM: dict[str, float] = {
    "µm": 1.0, "um": 1.0, "\u03bcm": 1.0, "micron": 1.0, "nm": 1e-3, "mm": 1e3, "cm": 1e4,
    "m": 1e6, "pm": 1e-6, "Å": 1e-4, "angstrom": 1e-4, "inch": 25400.0, "foot": 304800.0,
    "yard": 914400.0, "mile": 1.609344e9, "parsec": 3.0856775814913673e22,
    **{f"{prefix}meter": _power(power + 6) for prefix, power in _PREFIX.items()},
}

#: Seconds per unit: OME abbreviations and NGFF names.
TIME_S: dict[str, float] = {
    "s": 1.0, "ms": 1e-3, "µs": 1e-6, "us": 1e-6, "ns": 1e-9, "min": 60.0, "h": 3600.0,
    "minute": 60.0, "hour": 3600.0, "day": 86400.0,
    **{f"{prefix}second": _power(power) for prefix, power in _PREFIX.items()},
}


def length_in_um(unit: str) -> float | None:
    """Micrometres per *unit* (an OME abbreviation or an NGFF name), or None when unknown.

    Examples
    --------
    >>> length_in_um("nanometer"), length_in_um("mm"), length_in_um("furlong")
    (0.001, 1000.0, None)
    """
    return LENGTH_UM.get(str(unit).strip()) or LENGTH_UM.get(str(unit).strip().lower())


def time_in_s(unit: str) -> float | None:
    """Seconds per *unit* (an OME abbreviation or an NGFF name), or None when unknown.

    Examples
    --------
    >>> time_in_s("millisecond"), time_in_s("min")
    (0.001, 60.0)
    """
    return TIME_S.get(str(unit).strip()) or TIME_S.get(str(unit).strip().lower())
