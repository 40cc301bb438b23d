"""ptype's own look: the one palette and symbol set (:mod:`.palette`), its stylesheet
(:mod:`.css`) and the colour science that checks it (:mod:`.colourvision`).

Every page, figure and report takes its colours from :mod:`ptype.style.palette`; nothing
else in the code base writes a colour literal (a test holds us to it).
"""

from ptype.style.palette import (
    FIGURE,
    GRIB2_STYLE,
    HAZARD_STYLES,
    SEVERITY_COLOURS,
    TYPE_STYLES,
    UI,
    HazardStyle,
    TypeStyle,
    type_style,
)

__all__ = ["FIGURE", "GRIB2_STYLE", "HAZARD_STYLES", "SEVERITY_COLOURS", "TYPE_STYLES", "UI",
           "HazardStyle", "TypeStyle", "type_style"]
