"""The one way numbers are written in explanations.

Every method's ``explain``, the consensus steps and the narrative of
:mod:`ptype.engine.explain` format their numbers here, so a temperature, an energy or a
pressure reads the same whichever part of the engine wrote the sentence:

=================  ==================  ===========================================
quantity           example             rule
=================  ==================  ===========================================
temperature        ``+1.5 °C``         signed, one decimal (:func:`temperature`)
temperature step   ``2 K``             a difference or depression (:func:`kelvin`)
energy             ``46 J/kg``         up to one decimal (:func:`energy`)
height area        ``−3000 K·m``       whole numbers (:func:`area`)
pressure           ``850 hPa``         whole hectopascals (:func:`pressure`)
height, depth      ``1200 m``          whole metres (:func:`height`)
fraction           ``0.63``            two decimals (:func:`fraction`)
relative humidity  ``80 %``            whole percent (:func:`percent`)
=================  ==================  ===========================================

A space separates a number from its unit, also before ``%`` and ``°C`` (SI Brochure,
BIPM2019, section 5.4.3, section number from memory).  Negative numbers take the true minus
sign (U+2212, common typographic practice) and a value that rounds to zero is written
without a sign, so "−0.0 °C" never appears.  Non-finite values read ``n/a``.
"""

from __future__ import annotations

import math

from ptype.codes import Code

MINUS = "\u2212"
DEGREE_C = "\u00b0C"
GE = "\u2265"
LE = "\u2264"
DASH = "\u2013"  # en dash, for ranges
NOT_AVAILABLE = "n/a"

__all__ = ["DASH", "DEGREE_C", "GE", "LE", "MINUS", "NOT_AVAILABLE", "area", "code",
           "energy", "energy_range", "fraction", "height", "height_range", "kelvin",
           "micrometres", "number", "percent", "pressure", "pressure_range", "profile_time",
           "seconds", "speed", "temperature"]


def number(value: float, digits: int = 1, *, signed: bool = False, trim: bool = False) -> str:
    """``value`` with ``digits`` decimals, a true minus sign and no negative zero.

    Parameters
    ----------
    value : float
        The number (a numpy scalar is fine).
    digits : int
        Decimals kept.
    signed : bool
        Write ``+`` before a positive value (zero stays unsigned).
    trim : bool
        Drop trailing zeros of the decimals (``46.0`` -> ``46``, ``5.60`` -> ``5.6``).

    Returns
    -------
    str
        The text, or ``n/a`` for NaN and infinities.
    """
    x = float(value)
    if not math.isfinite(x):
        return NOT_AVAILABLE
    text = f"{x:.{digits}f}"
    if trim and "." in text:
        text = text.rstrip("0").rstrip(".")
    if text[0] == "-":
        # Rounded to zero: no sign at all, rather than "-0.0".
        return text[1:] if float(text) == 0.0 else MINUS + text[1:]
    if signed and float(text) != 0.0:
        return "+" + text
    return text


def temperature(value_c: float, digits: int = 1, *, trim: bool = False) -> str:
    """A temperature, signed: ``+1.5 °C``, ``−6.6 °C``, ``0.0 °C`` (``trim`` for limits:
    ``−10 °C``)."""
    return f"{number(value_c, digits, signed=True, trim=trim)} {DEGREE_C}"


def kelvin(value_k: float, digits: int = 0) -> str:
    """A temperature difference or dew-point depression: ``2 K``."""
    return f"{number(value_k, digits, trim=True)} K"


def energy(value_j_kg: float) -> str:
    """A Bourgouin-type area: ``46 J/kg``, ``5.6 J/kg`` (at most one decimal)."""
    return f"{number(value_j_kg, 1, trim=True)} J/kg"


def energy_range(low_j_kg: float, high_j_kg: float) -> str:
    """A band of areas, low first: ``5.6–13.2 J/kg``."""
    return f"{number(low_j_kg, 1, trim=True)}{DASH}{number(high_j_kg, 1, trim=True)} J/kg"


def area(value_k_m: float) -> str:
    """An integral of temperature over height: ``−3000 K·m``."""
    return f"{number(value_k_m, 0)} K\u00b7m"


def pressure(value_hpa: float) -> str:
    """A pressure: ``850 hPa``."""
    return f"{number(value_hpa, 0)} hPa"


def pressure_range(bottom_hpa: float, top_hpa: float) -> str:
    """A layer by its pressures, bottom first: ``850–700 hPa``."""
    return f"{number(bottom_hpa, 0)}{DASH}{number(top_hpa, 0)} hPa"


def height(value_m: float) -> str:
    """A height or a depth: ``1200 m``."""
    return f"{number(value_m, 0)} m"


def height_range(bottom_m: float, top_m: float) -> str:
    """A layer by its heights, bottom first: ``300–1200 m``."""
    return f"{number(bottom_m, 0)}{DASH}{number(top_m, 0)} m"


def fraction(value: float, digits: int = 2) -> str:
    """A fraction or a probability: ``0.63``."""
    return number(value, digits)


def percent(value_pct: float, digits: int = 0) -> str:
    """A relative humidity or another percentage: ``80 %``."""
    return f"{number(value_pct, digits)} %"


def seconds(value_s: float) -> str:
    """A duration: ``120 s``."""
    return f"{number(value_s, 0)} s"


def speed(value_m_s: float) -> str:
    """A fall speed: ``4.05 m/s``."""
    return f"{number(value_m_s, 2)} m/s"


def micrometres(value_m: float) -> str:
    """A particle size given in metres, written in micrometres: ``750 µm``."""
    return f"{number(value_m * 1e6, 0)} \u00b5m"


def code(value: Code | int) -> str:
    """A precipitation type in words with its abbreviation: ``freezing rain (FZRA)``."""
    c = Code(int(value))
    return f"{c.label} ({c.name})"


def profile_time(valid_time_iso: str | None, source: str | None = None) -> str | None:
    """When a profile is valid, for a verdict line: ``2026-01-27 16:00 UTC``; for a WMO TEMP
    message without month and year (its day and hour are kept in the profile's ``source``),
    ``day 27 of the month, 16:00 UTC (month and year not in the message)``; else None."""
    import re
    if valid_time_iso:
        return valid_time_iso.replace("T", " ").replace(":00Z", " UTC").replace("Z", " UTC")
    match = re.search(r"day (\d\d) (\d\d) UTC", source or "")
    if match:
        return (f"day {match.group(1)} of the month, {match.group(2)}:00 UTC (month and year "
                "not in the message)")
    return None
