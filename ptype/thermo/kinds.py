"""The kinds of wet-bulb temperature, named once for the whole package.

``"isobaric"``: the thermodynamic (psychrometric) wet-bulb at constant pressure
(ASHRAE2017 ch. 1 eq. 35), which Ramer (1993) uses; ``"adiabatic"``: the pseudo-adiabatic
wet-bulb of Normand's rule (Knox2017), which Baldwin et al. (1994) use.
"""

from __future__ import annotations

from ptype.errors import OptionError

#: The wet-bulb kinds every ``kind=`` / ``wetbulb=`` option accepts, the default first.
WET_BULB_KINDS = ("isobaric", "adiabatic")


def check_wet_bulb_kind(kind: object, field: str = "kind") -> str:
    """``kind`` when it is one of :data:`WET_BULB_KINDS`.

    Raises
    ------
    ptype.errors.OptionError
        Naming ``field``, the value given and the kinds accepted.
    """
    if not isinstance(kind, str) or kind not in WET_BULB_KINDS:
        raise OptionError(f"{field} = {kind!r}: expected one of {', '.join(WET_BULB_KINDS)}",
                          field=field)
    return kind
