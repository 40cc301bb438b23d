"""Which characters text may hold, so that whatever is stored can be written as XML 1.0.

XML 1.0 (W3C Recommendation, fifth edition 2008, production [2] ``Char``) allows tab, line
feed, carriage return and every code point from U+0020 up, except the surrogates
U+D800-U+DFFF and U+FFFE/U+FFFF.  Ours, on top of that (docs/api.md, "Text"):

* every text the service accepts is refused when it holds a character outside ``Char`` or a
  Unicode non-character (U+FDD0-U+FDEF and the last two code points of every plane;
  Unicode Standard, sec. 23.7);
* single-line fields (site names, codes, sources, key names) also refuse tab, line breaks,
  DEL and the C1 controls U+0080-U+009F.

:func:`xml_safe` is the other side: text written into CAP and Atom passes through it, so a
value stored before these rules (or by another program) cannot make a document that is not
well-formed.
"""

from __future__ import annotations

import re

_NONCHARACTERS = "\ufdd0-\ufdef" + "".join(
    f"{chr(plane * 0x10000 + 0xFFFE)}{chr(plane * 0x10000 + 0xFFFF)}" for plane in range(17))
#: Characters refused in any text: outside XML 1.0 ``Char``, or Unicode non-characters.
_BAD = re.compile(f"[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff{_NONCHARACTERS}]")
#: Also refused in single-line fields: tab, line breaks, DEL and the C1 controls.
_BAD_LINE = re.compile(f"[\x00-\x1f\x7f-\x9f\u2028\u2029\ud800-\udfff{_NONCHARACTERS}]")
#: The same rules within ASCII, where a small class is searched ten times faster.
_BAD_ASCII = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f]")
_BAD_LINE_ASCII = re.compile("[\x00-\x1f\x7f]")
#: What XML 1.0 cannot carry at all (replaced on output).
_NOT_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")


def first_bad_character(text: str) -> str | None:
    """The first character of ``text`` that no accepted text may hold, or None."""
    match = (_BAD_ASCII if text.isascii() else _BAD).search(text)
    return match.group() if match else None


def first_bad_line_character(text: str) -> str | None:
    """The first character of ``text`` that a single-line field may not hold, or None."""
    match = (_BAD_LINE_ASCII if text.isascii() else _BAD_LINE).search(text)
    return match.group() if match else None


def single_line(text: str) -> str:
    """``text`` when it is acceptable in a single-line field; a ValueError naming the bad
    character otherwise (pydantic turns it into a 422 naming the field)."""
    bad = first_bad_line_character(text)
    if bad is not None:
        raise ValueError(f"holds the character U+{ord(bad):04X}; control characters, line "
                         "breaks, unpaired surrogates and non-characters are not allowed")
    return text


def xml_safe(value: object) -> str:
    """``str(value)`` with every character XML 1.0 cannot carry replaced by U+FFFD."""
    return _NOT_XML.sub("\ufffd", str(value))
