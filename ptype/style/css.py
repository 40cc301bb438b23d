"""The palette as a stylesheet: ``/style/palette.css`` is :func:`palette_css`.

Custom properties ``--<name>`` for the page colours, ``--ty-<CODE>`` for the type colours,
and classes ``.ty-<CODE>`` (colour, text colour and the type's pattern as a second cue)
and ``.hz-<key>`` (hazard badges), ``.sev-<severity>`` (alert edges).
"""

from __future__ import annotations

from ptype.style.palette import HAZARD_STYLES, SEVERITY_COLOURS, TYPE_STYLES, UI, TypeStyle


def _pattern(style: TypeStyle) -> str:
    """A CSS background image drawing the type's pattern in its text colour, faintly."""
    ink = style.ink + "55"  # the text colour at one third opacity
    if style.pattern == "diagonal":
        return (f"repeating-linear-gradient(135deg, {ink} 0 2px, transparent 2px 7px)")
    if style.pattern == "dots":
        return f"radial-gradient({ink} 1px, transparent 1.5px) 0 0 / 6px 6px"
    if style.pattern == "cross":
        return (f"repeating-linear-gradient(45deg, {ink} 0 1px, transparent 1px 7px), "
                f"repeating-linear-gradient(135deg, {ink} 0 1px, transparent 1px 7px)")
    return "none"


def palette_css() -> str:
    """The stylesheet text."""
    lines = ["/* Generated from ptype/style/palette.py: edit the palette there. */", ":root {"]
    lines += [f"  --{name}: {value};" for name, value in UI.items()]
    lines += [f"  --ty-{s.code}: {s.colour};" for s in TYPE_STYLES.values()]
    lines.append("}")
    for s in TYPE_STYLES.values():
        lines.append(f".ty-{s.code} {{ background: {_pattern(s)}, {s.colour}; "
                     f"background-color: {s.colour}; color: {s.ink}; }}"
                     if s.pattern != "plain" else
                     f".ty-{s.code} {{ background: {s.colour}; color: {s.ink}; }}")
    for h in HAZARD_STYLES.values():
        lines.append(f".hz-{h.key} {{ background: {h.colour}; color: {h.ink}; "
                     f"border: 1px solid {h.ink}; }}")
    for severity, colour in SEVERITY_COLOURS.items():
        lines.append(f".sev-{severity.lower()} {{ border-left-color: {colour}; }}")
    return "\n".join(lines) + "\n"
