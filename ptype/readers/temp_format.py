"""WMO FM 35 TEMP (land-station radiosonde reports): decoder and encoder, Parts A and B.

Parts A (``TTAA``, standard isobaric surfaces) and B (``TTBB``, significant
levels) of one ascent are merged into a single pressure-sorted profile; Part B
carries the warm-nose detail that precipitation typing needs.  Parts C and D
(above 100 hPa) are recognised and skipped.

Code forms follow WMO-No. 306, Manual on Codes, Vol. I.1, FM 35, as summarised
in the US Navy Aerographer's Mate training manual (NAVEDTRA 14270, ch. 1).
Several rules below could not be checked against the WMO text and are marked
**from memory, unverified** where they are applied:

* ``YY`` + 50 means wind speeds in knots (the day itself is certain);
* the ``Id`` figure (Code table 1734) is the leading digit of the last standard
  surface carrying a wind group; ``1`` and ``2`` are ambiguous between 100/150
  and 200/250 hPa, so both readings are tried and the one whose groups line up
  is kept;
* ``TTTa``: the tenths digit is even for 0 degC or warmer and odd below
  (Code table 3931);
* ``DD`` (Code table 0777): 00-50 tenths of a degree, 51-55 unused, 56-99 whole
  degrees plus 50;
* a 1000 hPa height below mean sea level is coded 500 + |h|;
* the surface always carries a wind group (even with ``Id`` = ``/``);
* heights drop their leading digit(s); which ones are restored is a heuristic
  (a window of plausible heights per standard surface, see ``STANDARD_HEIGHT_WINDOWS``).

Nothing about winds reaches the profile document: wind groups are checked for
form and skipped.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from datetime import UTC, datetime

import numpy as np

from ptype.errors import ReaderError

# --- code tables --------------------------------------------------------------------------

#: Standard isobaric surfaces of Part A: code figure PP -> pressure, hPa (FM 35 section 2).
STANDARD_SURFACES = (("00", 1000), ("92", 925), ("85", 850), ("70", 700), ("50", 500),
                     ("40", 400), ("30", 300), ("25", 250), ("20", 200), ("15", 150),
                     ("10", 100))
_STANDARD_CODES = {code: p for code, p in STANDARD_SURFACES}
_STANDARD_ORDER = [code for code, _ in STANDARD_SURFACES]

#: Id figure (Code table 1734, from memory, unverified) -> candidate pressures of the last
#: standard surface with a wind group, most likely first.
_ID_PRESSURES = {"0": (1000,), "9": (925,), "8": (850,), "7": (700,), "5": (500,),
                 "4": (400,), "3": (300,), "2": (200, 250), "1": (100, 150)}

#: Section indicators that end the part of a message this reader uses.
_SECTION_MARKERS = {"21212", "31313", "41414", "51515", "52525", "53535", "54545", "55555",
                    "56565", "57575", "58585", "59595", "61616", "62626"}

_GROUP_RE = re.compile(r"^[0-9/]{5}$")
_PART_RE = re.compile(r"^(TT|UU|XX|II)(AA|BB|CC|DD)$")


def decode_temperature_c(ttt: str) -> float | None:
    """Air temperature from the three ``TTTa`` figures, degC (None when slashed).

    The figures give |T| in tenths of a degree; the parity of the tenths digit gives the
    sign: even = 0 degC or above, odd = below 0 degC (WMO-No. 306 Code table 3931;
    from memory, unverified).  ``157`` -> -15.7, ``104`` -> +10.4.
    """
    if "/" in ttt:
        return None
    tenths = int(ttt)
    value = tenths / 10.0
    return -value if tenths % 2 else value


def decode_depression_c(dd: str) -> float | None:
    """Dew-point depression from ``DD``, degC (WMO-No. 306 Code table 0777; from memory,
    unverified): 00-50 = 0.0-5.0 in tenths, 56-99 = DD - 50 whole degrees, 51-55 unused
    (ValueError), ``//`` = missing (None)."""
    if "/" in dd:
        return None
    code = int(dd)
    if code <= 50:
        return code / 10.0
    if code <= 55:
        raise ValueError(f"dew-point depression code {dd} is not used (51-55 are reserved)")
    return float(code - 50)


def encode_temperature(temperature_c: float) -> str:
    """``TTTa`` figures for a temperature: the nearest tenth whose parity carries the sign.

    The parity rule costs up to 0.1 degC of precision.
    """
    x = abs(temperature_c) * 10.0
    n = math.floor(x + 0.5)
    if n == 0 and temperature_c > -0.05:
        return "000"
    want_odd = temperature_c < 0
    if (n % 2 == 1) != want_odd:
        down, up = n - 1, n + 1
        n = up if (down < 0 or (want_odd and down == 0) or abs(up - x) < abs(down - x)) else down
    if n > 999:
        raise ValueError(f"temperature {temperature_c} degC cannot be coded in TEMP")
    return f"{n:03d}"


def encode_depression(depression_c: float) -> str:
    """``DD`` for a dew-point depression (Code table 0777, from memory): tenths up to 5.0 degC,
    whole degrees + 50 from 6 to 49 degC; 5.05-5.5 is coded 50, larger values cap at 99."""
    d = max(0.0, depression_c)
    if d < 5.05:
        return f"{math.floor(d * 10 + 0.5):02d}"
    if d < 5.5:
        return "50"
    return f"{min(99, 50 + math.floor(d + 0.5)):02d}"


#: Standard surface -> (unit of hhh in metres, window of plausible heights in metres).  The
#: figures give the height modulo 1000 units; the value is placed in the window.  Windows
#: follow FM 35 ("leading digit(s) dropped", NAVEDTRA 14270 ch. 1) and are otherwise a
#: heuristic of ours covering observed extremes: 925 hPa 200-1199 m, 850 hPa 800-1799 m,
#: 700 hPa 2500-3499 m, 300 hPa 3000-12990 m (hhh < 300 -> +1000 dam), 250 hPa
#: 5000-14990 m (so that a cold 980 dam stays 9800 m).
STANDARD_HEIGHT_WINDOWS = {"92": (1.0, 200.0), "85": (1.0, 800.0), "70": (1.0, 2500.0),
                   "50": (10.0, 0.0), "40": (10.0, 0.0), "30": (10.0, 3000.0),
                   "25": (10.0, 5000.0), "20": (10.0, 10000.0), "15": (10.0, 10000.0),
                   "10": (10.0, 10000.0)}


def _decode_height_m(code: str, hhh: str) -> float | None:
    """Geopotential height of a standard surface from its ``hhh`` figures, m (see above)."""
    if "/" in hhh:
        return None
    h = int(hhh)
    if code == "00":
        return -(h - 500.0) if h >= 500 else float(h)  # below MSL: 500 + |h| (from memory)
    unit, low = STANDARD_HEIGHT_WINDOWS[code]
    value = unit * h
    while value < low:
        value += 1000.0 * unit
    return value


def _encode_height(code: str, height_m: float) -> str:
    """``hhh`` figures for a standard-surface height; ``///`` when outside the decodable window."""
    if not math.isfinite(height_m):
        return "///"
    if code == "00":
        h = round(height_m)
        if -499 <= h < 0:
            return f"{500 + abs(h):03d}"
        return f"{h:03d}" if 0 <= h < 500 else "///"
    unit, low = STANDARD_HEIGHT_WINDOWS[code]
    n = round(height_m / unit)
    if not low <= n * unit < low + 1000.0 * unit:
        return "///"
    return f"{n % 1000:03d}"


# --- decoding -----------------------------------------------------------------------------

@dataclass
class _Level:
    pressure_hpa: float
    temperature_c: float
    depression_c: float | None
    height_m: float | None = None
    kind: str = ""


@dataclass
class _Part:
    part: str            # "A", "B", "C" or "D"
    station: str
    day: int
    hour: int
    knots: bool
    levels: list[_Level] = field(default_factory=list)
    nil: bool = False
    launch: str | None = None


class _Groups:
    """The groups of one part with a cursor; every error names the source, part and group."""

    def __init__(self, groups: list[str], name: str, message_no: int, part: str):
        self.groups = groups
        self.name = name
        self.message_no = message_no
        self.part = part
        self.i = 0

    def error(self, problem: str, index: int | None = None) -> ReaderError:
        k = self.i if index is None else index
        # Groups are counted from the part indicator (TTAA = group 1).
        if k < len(self.groups):
            where = f"group {k + 2} '{self.groups[k]}'"
        else:
            where = f"after group {len(self.groups) + 1} (end of message)"
        return ReaderError(f"{self.name}: message {self.message_no} Part {self.part}: {where}: "
                           f"{problem}")

    def peek(self, ahead: int = 0) -> str | None:
        k = self.i + ahead
        return self.groups[k] if k < len(self.groups) else None

    def take(self, what: str) -> str:
        g = self.peek()
        if g is None:
            raise self.error(f"message ends where {what} was expected")
        if not _GROUP_RE.match(g):
            raise self.error(f"expected {what}: 5 characters, digits or '/'")
        self.i += 1
        return g

    def temperature_group(self, what: str) -> tuple[float | None, float | None]:
        g = self.take(f"the temperature/dew-point group TTTaDD of {what}")
        try:
            t = decode_temperature_c(g[:3])
            dep = decode_depression_c(g[3:])
        except ValueError as exc:
            raise self.error(f"{what}: {exc}", self.i - 1) from None
        return t, dep

    def wind_group(self, what: str) -> None:
        g = self.take(f"the wind group ddfff of {what}")
        if "/" in g:
            return
        if int(g[:2]) > 36:  # dd is tens of degrees, 00-36
            raise self.error(f"{what}: not a wind group (direction figures {g[:2]} above 36)",
                             self.i - 1)

    @property
    def done(self) -> bool:
        return self.i >= len(self.groups)


def _parse_identification(g: _Groups, part: str) -> tuple[int, int, bool, str, str]:
    date = g.take("the date/time group YYGGI")
    if "/" in date[:4]:
        raise g.error("day and hour must be given", g.i - 1)
    yy, gg = int(date[:2]), int(date[2:4])
    knots = yy > 50  # day + 50: wind speeds in knots (from memory, unverified)
    day = yy - 50 if knots else yy
    if not 1 <= day <= 31:
        raise g.error(f"day of month {day} (YY={yy:02d}); expected 01-31, or 51-81 with winds "
                      "in knots",
                      g.i - 1)
    if not 0 <= gg <= 23:
        raise g.error(f"hour {gg:02d}; expected 00-23 UTC", g.i - 1)
    station = g.take("the station number IIiii")
    if "/" in station:
        raise g.error("station number must be given", g.i - 1)
    return day, gg, knots, date[4], station


def _parse_part_a(g: _Groups, id_pressure: float | None) -> list[_Level]:
    """Sections 2-4 of Part A; ``id_pressure`` is the last standard surface with a wind group.

    The surface, the standard surfaces, the tropopauses and the maximum winds, in that order
    (WMO306, FM 35 Part A); the regional and national sections (51515, ...) are not used.
    """
    levels, surface_hpa = _parse_surface(g)
    levels += _parse_standard_surfaces(g, id_pressure, surface_hpa)
    levels += _parse_tropopauses(g)
    _skip_maximum_winds(g)
    if not g.done and g.peek() not in _SECTION_MARKERS:
        raise g.error("unexpected group after the tropopause and maximum-wind sections; "
                      "expected a section indicator such as 51515 or the end of the message")
    return levels


def _parse_surface(g: _Groups) -> tuple[list[_Level], float | None]:
    """Section 2, the surface group ``99PPP TTTaDD ddfff``: the surface level (when its
    pressure and temperature are given) and its pressure."""
    first = g.take("the surface group 99PPP")
    if not first.startswith("99"):
        raise g.error("expected the surface group 99PPP", g.i - 1)
    surface_hpa = None
    if "/" not in first[2:]:
        ppp = int(first[2:])
        surface_hpa = ppp + 1000.0 if ppp < 100 else float(ppp)
    t, dep = g.temperature_group("the surface")
    g.wind_group("the surface")  # always present (from memory, unverified)
    if surface_hpa is not None and t is not None:
        return [_Level(surface_hpa, t, dep, None, "surface")], surface_hpa
    return [], surface_hpa


def _parse_standard_surfaces(g: _Groups, id_pressure: float | None,
                             surface_hpa: float | None) -> list[_Level]:
    """Section 2 continued, ``PPhhh TTTaDD [ddfff]`` per standard surface in order; a wind
    group only down to ``id_pressure``.  Surfaces below ground or without a temperature are
    skipped."""
    levels: list[_Level] = []
    next_index = 0
    while not g.done:
        head = g.peek()
        code = head[:2]
        if head in _SECTION_MARKERS or code in ("88", "77", "66"):
            break
        if code not in _STANDARD_CODES or _STANDARD_ORDER.index(code) < next_index:
            expected = ", ".join(_STANDARD_ORDER[next_index:]) or "none left"
            raise g.error(f"expected a standard surface PPhhh (PP one of {expected}), "
                          "a tropopause 88PPP, a maximum wind 77PPP/66PPP or a section indicator")
        g.take("a standard surface PPhhh")
        next_index = _STANDARD_ORDER.index(code) + 1
        pressure = float(_STANDARD_CODES[code])
        height = _decode_height_m(code, head[2:])
        what = f"the {pressure:g} hPa surface"
        t, dep = g.temperature_group(what)
        if id_pressure is not None and pressure >= id_pressure:
            g.wind_group(what)
        if t is None:
            continue  # temperature missing (or surface below ground): nothing to keep
        if surface_hpa is not None and pressure > surface_hpa:
            continue  # below ground: extrapolated values, not an observation
        levels.append(_Level(pressure, t, dep, height, "standard"))
    return levels


def _parse_tropopauses(g: _Groups) -> list[_Level]:
    """Section 3, ``88PPP TTTaDD ddfff`` per tropopause (``88999``: none)."""
    levels: list[_Level] = []
    while g.peek() is not None and g.peek()[:2] == "88":
        head = g.take("the tropopause group 88PPP")
        if head == "88999":
            continue
        if "/" in head[2:]:
            raise g.error("tropopause pressure must be given (88999 when there is none)",
                          g.i - 1)
        pressure = float(int(head[2:]))
        t, dep = g.temperature_group("the tropopause")
        g.wind_group("the tropopause")
        if t is not None and pressure > 0:
            levels.append(_Level(pressure, t, dep, None, "tropopause"))
    return levels


def _skip_maximum_winds(g: _Groups) -> None:
    """Section 4, ``77PPP``/``66PPP ddfff [4vbvbvava]`` per maximum wind (``77999``: none);
    read for the structure only, winds are not used."""
    while g.peek() is not None and g.peek()[:2] in ("77", "66"):
        head = g.take("the maximum-wind group 77PPP/66PPP")
        if head in ("77999", "66999"):
            continue
        g.wind_group("the maximum wind")
        nxt = g.peek()
        if nxt is not None and nxt.startswith("4") and nxt not in _SECTION_MARKERS:
            g.take("the wind-shear group 4vbvbvava")


def _parse_part_b(g: _Groups, part: _Part) -> list[_Level]:
    """Sections 5-8 of Part B: the significant temperature levels (kept), the significant
    winds, the sonde and launch time, the clouds (read for the structure; the launch time is
    kept)."""
    levels = _parse_significant_levels(g)
    while not g.done:
        marker = g.take("a section indicator")
        if marker == "21212":
            _skip_significant_winds(g)
        elif marker == "31313":
            _parse_launch(g, part)
        elif marker == "41414":
            g.take("the cloud group NhCLhCMCH")
        elif marker in _SECTION_MARKERS:
            break  # regional (51515...) and national (61616...) groups: stop
        else:
            raise g.error("expected a section indicator (21212, 31313, 41414, 51515 or 61616)",
                          g.i - 1)
    return levels


def _ends_section(group: str, last_nn: str | None) -> bool:
    """Whether ``group`` is a section indicator rather than the next level ``nnPPP``.

    ``55555`` is both the regional indicator and level number 55 at 555 hPa: it is the level
    when the level before it was number 44 (levels are numbered 00, 11, ... 99, 11, ...;
    WMO306 FM 35 section 5).
    """
    if group not in _SECTION_MARKERS:
        return False
    return not (group[:2] == _NEXT_LEVEL_NUMBER.get(last_nn) and group[2:] == group[:3])


#: The number of the significant level after each one (00, 11, ... 99, then 11 again).
_NEXT_LEVEL_NUMBER = {**{f"{k}{k}": f"{k + 1}{k + 1}" for k in range(9)}, "99": "11"}


def _skip_significant_winds(g: _Groups) -> None:
    """Section 6, ``nnPPP ddfff`` pairs: skipped whole, they are not used for the profile."""
    k = 0
    last_nn = None
    while not g.done:
        group = g.peek()
        # Every other group is a level number nnPPP, where 55555 may be level 55.
        if group in _SECTION_MARKERS and (k % 2 or _ends_section(group, last_nn)):
            break
        g.take("a significant-wind group")
        if k % 2 == 0:
            last_nn = group[:2]
        k += 1


def _parse_significant_levels(g: _Groups) -> list[_Level]:
    """Section 5, ``nnPPP TTTaDD`` per significant level; ``00`` is the surface."""
    levels: list[_Level] = []
    last_nn = None
    while not g.done and not _ends_section(g.peek(), last_nn):
        head = g.take("a significant level nnPPP")
        nn, ppp = head[:2], head[2:]
        if not (nn[0] == nn[1] and nn[0] != "/"):
            raise g.error("expected a significant level nnPPP with nn = 00, 11, 22, ... 99, "
                          "or a section indicator (21212, 31313, 41414, 51515)", g.i - 1)
        if "/" in ppp:
            raise g.error("pressure of a significant level must be given", g.i - 1)
        last_nn = nn
        pressure = float(int(ppp))
        if pressure < 100:
            pressure += 1000.0
        t, dep = g.temperature_group(f"the significant level at {pressure:g} hPa")
        if t is not None:
            kind = "surface" if nn == "00" else "significant"
            levels.append(_Level(pressure, t, dep, None, kind))
    return levels


def _parse_launch(g: _Groups, part: _Part) -> None:
    """Section 7, ``31313 srrarasasa 8GGgg [9snTwTwTw]``: the launch time into ``part``."""
    g.take("the sonde/system group srrarasasa")
    launch = g.take("the launch-time group 8GGgg")
    if not launch.startswith("8"):
        raise g.error("expected the launch-time group 8GGgg", g.i - 1)
    part.launch = launch[1:]
    nxt = g.peek()
    if nxt is not None and nxt.startswith("9") and nxt not in _SECTION_MARKERS:
        g.take("the sea-temperature group 9snTwTwTw")


def _split_messages(text: str) -> list[list[str]]:
    """Messages end with '='; line breaks are just blanks."""
    messages = []
    for chunk in text.upper().split("="):
        tokens = chunk.split()
        if tokens:
            messages.append(tokens)
    return messages


def _decode_message(tokens: list[str], name: str, number: int) -> _Part | None:
    start = next((k for k, tok in enumerate(tokens) if _PART_RE.match(tok)), None)
    if start is None:
        shown = " ".join(tokens[:3])
        raise ReaderError(f"{name}: message {number} ('{shown}...'): no part indicator "
                          "TTAA/TTBB/TTCC/TTDD found")
    indicator = tokens[start]
    letter = {"AA": "A", "BB": "B", "CC": "C", "DD": "D"}[indicator[2:]]
    groups = tokens[start + 1:]
    g = _Groups(groups, name, number, letter)
    if indicator[:2] != "TT":
        raise ReaderError(f"{name}: message {number} Part {letter}: '{indicator}' (ship, mobile or "
                          "dropsonde report) is not supported; expected a land-station TEMP "
                          f"(TT{indicator[2:]})")
    day, hour, knots, fifth, station = _parse_identification(g, letter)
    part = _Part(letter, station, day, hour, knots)
    if g.peek() == "NIL":
        part.nil = True
        if g.i + 1 < len(groups):
            raise g.error("nothing may follow NIL", g.i + 1)
        return part
    if letter in ("C", "D"):
        return part  # above 100 hPa: not needed to type precipitation
    if letter == "A":
        if fifth == "/":
            candidates: tuple = (None,)
        elif fifth in _ID_PRESSURES:
            candidates = _ID_PRESSURES[fifth]
        else:
            raise g.error(f"Id figure '{fifth}' is not a standard-surface figure "
                          "(expected 0, 9, 8, 7, 5, 4, 3, 2, 1 or /)", 0)
        first_error = None
        for id_pressure in candidates:
            trial = _Groups(groups, name, number, letter)
            trial.i = g.i
            try:
                part.levels = _parse_part_a(trial, id_pressure)
                return part
            except ReaderError as exc:
                first_error = first_error or exc
        raise first_error
    part.levels = _parse_part_b(g, part)
    return part


def read_temp_documents(text: str, name: str = "<text>", *, year: int | None = None,
                        month: int | None = None) -> list[dict]:
    """Decode every ascent in a TEMP text (one profile document per station, day and hour).

    Parts A and B of the same ascent are merged; see :func:`read_temp_document`.
    """
    messages = _split_messages(text)
    if not messages:
        raise ReaderError(f"{name}: empty; expected WMO TEMP messages (TTAA/TTBB ... =)")
    ascents: dict[tuple, list[_Part]] = {}
    for number, tokens in enumerate(messages, start=1):
        part = _decode_message(tokens, name, number)
        ascents.setdefault((part.station, part.day, part.hour), []).append(part)
    documents = []
    for (station, day, hour), parts in ascents.items():
        usable = [p for p in parts if not p.nil and p.part in ("A", "B")]
        if not usable:
            continue
        documents.append(_merge(station, day, hour, usable, name, year, month))
    if not documents:
        raise ReaderError(f"{name}: no Part A or B with data (only NIL reports or Parts C/D)")
    return documents


def _merge(station, day, hour, parts, name, year, month) -> dict:
    by_pressure: dict[float, _Level] = {}
    for part in sorted(parts, key=lambda p: p.part):  # A before B
        for lvl in part.levels:
            old = by_pressure.get(lvl.pressure_hpa)
            if old is None or (old.height_m is None and lvl.height_m is not None):
                by_pressure[lvl.pressure_hpa] = lvl
    levels = []
    for p in sorted(by_pressure, reverse=True):
        lvl = by_pressure[p]
        out: dict = {"pressure_hpa": lvl.pressure_hpa}
        if lvl.height_m is not None:
            out["height_m"] = lvl.height_m
        out["temperature_c"] = lvl.temperature_c
        if lvl.depression_c is not None:
            out["dewpoint_c"] = round(lvl.temperature_c - lvl.depression_c, 1)
        levels.append(out)
    letters = "+".join(sorted({p.part for p in parts}))
    doc: dict = {"site": {"id": station}, "levels": levels}
    launch = next((p.launch for p in parts if p.launch), None)
    when = f"day {day:02d} {hour:02d} UTC"
    if launch and "/" not in launch:
        when += f", launch {launch[:2]}:{launch[2:]} UTC"
    if year is not None and month is not None:
        try:
            doc["valid_time"] = datetime(year, month, day, hour, tzinfo=UTC).isoformat()
        except ValueError as exc:
            raise ReaderError(f"{name}: station {station}: day {day} with year {year} and "
                              f"month {month}: {exc}") from None
        doc["source"] = f"WMO TEMP Part {letters}, station {station}, {when}"
    else:
        doc["source"] = (f"WMO TEMP Part {letters}, station {station}, {when} "
                         "(month and year not in the message)")
    return doc


def read_temp_document(text: str, name: str = "<text>", *, year: int | None = None,
                       month: int | None = None, station: str | None = None) -> dict:
    """Decode WMO FM 35 TEMP text into one profile document.

    Parameters
    ----------
    text : str
        One or more messages, each ending with ``=``; line breaks anywhere between
        groups; bulletin heading lines before the part indicator are ignored.
    name : str
        Names the source in error messages.
    year, month : int, optional
        TEMP carries only the day and hour; give both to get ``valid_time``.
        Without them the day and hour are written into ``source``.
    station : str, optional
        Pick one station when the text holds several ascents.

    Returns
    -------
    dict
        A profile document: ``site.id`` = IIiii, ``levels`` surface -> top with
        ``pressure_hpa``, ``height_m`` (standard surfaces only), ``temperature_c`` and
        ``dewpoint_c`` (absent where DD is slashed).

    Raises
    ------
    ptype.errors.ReaderError
        Naming the source, the message and part, the group (its position counted from the
        part indicator ``TTAA``/``TTBB`` as group 1, and its text) and the problem.
    """
    docs = read_temp_documents(text, name, year=year, month=month)
    if station is not None:
        docs = [d for d in docs if d["site"]["id"] == station]
        if not docs:
            raise ReaderError(f"{name}: no ascent from station {station}")
    if len(docs) > 1:
        listed = "; ".join(d["source"].split(", ", 1)[1].split(" (")[0] for d in docs)
        raise ReaderError(f"{name}: {len(docs)} ascents found ({listed}); expected one "
                          "(choose with station=)")
    return docs[0]


# --- encoding -----------------------------------------------------------------------------

def _wrap(groups: list[str], width: int = 66) -> str:
    lines, line = [], ""
    for grp in groups:
        if line and len(line) + 1 + len(grp) > width:
            lines.append(line)
            line = grp
        else:
            line = f"{line} {grp}" if line else grp
    lines.append(line)
    return "\n".join(lines)


def _interp_ln_p(p_target: float, p: np.ndarray, values: np.ndarray) -> float:
    """Linear interpolation in ln p (p decreasing); linear extrapolation beyond the ends."""
    x = -np.log(p)
    xt = -math.log(p_target)
    if xt < x[0]:
        k = 0
    elif xt > x[-1]:
        k = len(x) - 2
    else:
        return float(np.interp(xt, x, values))
    return float(values[k] + (values[k + 1] - values[k]) * (xt - x[k]) / (x[k + 1] - x[k]))


def write_temp(document: dict, *, station: str = "99901", day: int = 15, hour: int = 12) -> str:
    """Encode a profile document as WMO FM 35 TEMP Parts A and B (no winds).

    Part A holds the surface (lowest level) and the standard surfaces 1000-100 hPa,
    interpolated linearly in ln p from the profile (below-ground surfaces get an
    extrapolated height and slashed temperature; surfaces above the top are left out);
    ``Id`` is ``/`` (no winds), tropopause and maximum wind are coded absent
    (``88999``, ``77999``).  Part B holds every profile level down to 100 hPa as a
    significant level, pressures rounded to whole hPa.

    Precision of the code: temperature 0.1 degC (the sign rides on the parity of the
    tenths), dew-point depression 0.1 degC up to 5 degC then whole degrees.
    """
    from ptype.profile import Profile

    if not (isinstance(station, str) and len(station) == 5 and station.isdigit()):
        raise ValueError(f"station {station!r}: expected five digits IIiii")
    if not 1 <= day <= 31 or not 0 <= hour <= 23:
        raise ValueError(f"day {day} / hour {hour}: expected 1-31 and 0-23")
    prof = Profile.from_document(document)
    p, z, t, td = prof.pressure_hpa, prof.height_m, prof.temperature_c, prof.dewpoint_c
    surface_hpa = float(p[0])
    date = f"{day:02d}{hour:02d}"

    def tttdd(temp: float, dew: float) -> str:
        return encode_temperature(temp) + encode_depression(temp - dew)

    a = ["TTAA", date + "/", station,
         f"99{round(surface_hpa) % 1000:03d}", tttdd(t[0], td[0]), "/////"]
    for code, ps in STANDARD_SURFACES:
        if ps < p[-1] - 1e-9:
            break  # above the top of the profile: not reported
        height = _interp_ln_p(ps, p, z)
        if ps > surface_hpa:
            a += [code + _encode_height(code, height), "/////"]
            continue
        ts = _interp_ln_p(ps, p, t)
        tds = min(_interp_ln_p(ps, p, td), ts)
        a += [code + _encode_height(code, height), tttdd(ts, tds)]
    a += ["88999", "77999"]

    b = ["TTBB", date + "/", station]
    seen: set[int] = set()
    number = 0
    for k in range(p.size):
        whole = round(float(p[k]))
        if whole < 100 or whole in seen:
            continue
        seen.add(whole)
        if k == 0:
            nn = "00"
        else:
            number = number % 9 + 1
            nn = str(number) * 2
        b += [f"{nn}{whole % 1000:03d}", tttdd(t[k], td[k])]
    return _wrap(a) + "=\n" + _wrap(b) + "=\n"
