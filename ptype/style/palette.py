"""The one palette and symbol set of ptype: a colour, a text colour, a short label and a
pattern for every precipitation-type code and every road hazard, and the colours of the
pages and figures.

The design is ours and follows one idea, readable without colour:

* **lightness tells the hazard**: the darker a type, the worse it is for a road.  Freezing
  types are the darkest (near-black espresso, petrol and olive inks, "ice you cannot see"),
  liquid types are warm ochres and sand, frozen types cool greys and a grey-teal, no
  precipitation is paper;
* **a pattern tells the phase** as a second cue: freezing types are hatched with diagonal
  lines, frozen types dotted, mixes cross-hatched, liquid and none plain; and every cell or
  legend entry also carries the type's letters.

The colours were chosen so that every pair stays apart by at least
:data:`MIN_CVD_DIFFERENCE` (CIEDE2000, Sharma et al. 2005) for normal vision and for
simulated protanopia, deuteranopia and tritanopia (Machado et al. 2009, severity 1.0);
``tests/test_style.py`` checks it.  See ``docs/palette.md``.
"""

from __future__ import annotations

from dataclasses import dataclass

from ptype.codes import LABELS, Code

#: The smallest CIEDE2000 difference we accept between two type colours, under normal and
#: each simulated dichromatic vision.  A difference of about 2 is just noticeable side by
#: side; we ask for well above that because cells are small and seen apart on a strip or
#: map (our choice; the palette reaches about 15).
MIN_CVD_DIFFERENCE = 12.0

#: Text colours on type colours: the darker of the two on light cells, white on dark cells.
INK_DARK = "#141414"
INK_LIGHT = "#ffffff"


@dataclass(frozen=True)
class TypeStyle:
    """How one type code looks everywhere."""

    code: str
    label: str
    colour: str
    ink: str
    #: Matplotlib hatch of the type's areas ("" for none).
    hatch: str
    #: Name of the pattern in words (legends, docs): "plain", "diagonal", "dots", "cross".
    pattern: str


@dataclass(frozen=True)
class HazardStyle:
    """How one road hazard (a badge on a strip cell) looks."""

    key: str
    badge: str
    label: str
    colour: str
    ink: str


_PATTERN_HATCH = {"plain": "", "diagonal": "////", "dots": "..", "cross": "xx"}


def _type(code: Code, colour: str, ink: str, pattern: str) -> TypeStyle:
    return TypeStyle(code.name, LABELS[code], colour, ink, _PATTERN_HATCH[pattern], pattern)


#: Every type code, in :class:`ptype.codes.Code` order.
TYPE_STYLES: dict[str, TypeStyle] = {s.code: s for s in (
    _type(Code.NONE, "#fbf4ec", INK_DARK, "plain"),        # paper
    _type(Code.RA, "#c5831a", INK_DARK, "plain"),          # ochre
    _type(Code.SN, "#b4cbd6", INK_DARK, "dots"),           # frost grey
    _type(Code.PL, "#349497", INK_DARK, "dots"),           # grey-teal
    _type(Code.FZRA, "#332321", INK_LIGHT, "diagonal"),    # espresso glaze
    _type(Code.FZDZ, "#1e5a62", INK_LIGHT, "diagonal"),    # petrol
    _type(Code.DZ, "#f0c274", INK_DARK, "plain"),          # sand
    _type(Code.RASN, "#af9e8c", INK_DARK, "cross"),        # taupe
    _type(Code.RAPL, "#807147", INK_LIGHT, "cross"),       # bronze
    _type(Code.FZRAPL, "#444a1c", INK_LIGHT, "diagonal"),  # olive ink
)}


def type_style(code: str | int) -> TypeStyle:
    """The style of a type code given as ``"FZRA"`` or as a :class:`Code` value."""
    return TYPE_STYLES[code if isinstance(code, str) else Code(int(code)).name]


#: WMO GRIB2 code table 4.201 values as drawn on maps: each takes the style of the ptype
#: code it stands for (4, "mixed ice", covers RAPL and FZRAPL: drawn as the more hazardous).
GRIB2_STYLE: dict[int, TypeStyle] = {
    0: TYPE_STYLES["NONE"], 1: TYPE_STYLES["RA"], 3: TYPE_STYLES["FZRA"],
    4: TYPE_STYLES["FZRAPL"], 5: TYPE_STYLES["SN"], 7: TYPE_STYLES["RASN"],
    8: TYPE_STYLES["PL"], 11: TYPE_STYLES["DZ"], 12: TYPE_STYLES["FZDZ"],
}

#: Road hazards shown as badges on strip cells (and in the time-height view).
HAZARD_STYLES: dict[str, HazardStyle] = {h.key: h for h in (
    HazardStyle("ice", "ice", "freezing precipitation on the road", "#141414", "#ffffff"),
    HazardStyle("frost", "frost", "hoar frost on the road", "#5b4b8a", "#ffffff"),
    HazardStyle("pellets", "PL", "ice pellets in the hour", "#ffffff", "#141414"),
)}

#: Alert severities (CAP 1.2 values): the edge colour of an alert in lists.
SEVERITY_COLOURS = {"Extreme": "#141414", "Severe": "#332321", "Moderate": "#c5831a",
                    "Minor": "#8a97a0", "Unknown": "#8a97a0"}

#: Page colours (CSS custom properties ``--<name>``), text pairs reach WCAG 2.2 AA (4.5:1).
UI = {
    "ink": "#1d2733", "ink-soft": "#4a5463", "paper": "#fbfaf7", "card": "#ffffff",
    "line": "#d9dee6", "field-line": "#8a94a3", "accent": "#7a4a0e", "focus": "#1e5a62",
    "alarm": "#7a1f12", "alarm-bg": "#fbece4", "caution-edge": "#c5831a",
    "caution-bg": "#fdf6ea", "code-bg": "#f1f3f6", "pre-bg": "#1d2733", "pre-ink": "#f3f1ea",
    "track": "#edf0f4", "verdict-bg": "#eef2f4", "melt": "#f4d7a6", "refreeze": "#c9d9e2",
    "white": "#ffffff",
}

#: Figure colours (diagram, time-height view, grid map, verification figures).
FIGURE = {
    "temperature": "#8c2d04",       # burnt umber, solid
    "dewpoint": "#1e5a62",          # petrol, solid
    "wetbulb": "#3b3486",           # ink violet, dashed
    "zero": "#1d2733",              # the 0 degC line
    "melt": "#e8a33d",              # warm-layer fill (liquid family)
    "refreeze": "#7fa3b8",          # refreezing fill (frozen family)
    "cloud": "#8a94a6",
    "grid": "#c9cfd8",
    "faint": "#d9dee6",
    "text": "#1d2733",
    "text-soft": "#4a5463",
    "background": "#fbfaf7",
    "axes": "#ffffff",
    "missing": "#9a9a9a",
    "edge": "#333333",
    "muted": "#8a97a0",
    # Series colours for figures that compare lines rather than types.
    "series-1": "#1e5a62", "series-2": "#c5831a", "series-3": "#332321", "series-4": "#8a97a0",
}
