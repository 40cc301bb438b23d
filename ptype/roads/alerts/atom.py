"""An Atom feed (RFC 4287) of alerts, one entry per alert pointing at its CAP message.

Text passes through :func:`ptype.store.text.xml_safe`: the feed is well-formed XML whatever
was stored."""

from __future__ import annotations

import uuid
from collections.abc import Mapping, Sequence
from datetime import UTC, datetime
from typing import Any
from xml.etree import ElementTree as ET

from ptype.constants import CAUTION
from ptype.store.text import xml_safe

ATOM = "http://www.w3.org/2005/Atom"


def atom_time(dt: datetime) -> str:
    """RFC 3339 date-time (RFC 4287 sec. 3.3), UTC with a ``Z``."""
    return dt.astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def _sub(parent, tag, text=None, **attrs):
    # As in CAP: no character XML 1.0 forbids reaches the feed, whatever was stored.
    el = ET.SubElement(parent, f"{{{ATOM}}}{tag}", {k: xml_safe(v) for k, v in attrs.items()})
    if text is not None:
        el.text = xml_safe(text)
    return el


def build_feed(alerts: Sequence[Mapping[str, Any]], *, base_url: str, sender: str,
               now: datetime) -> bytes:
    """The feed.  ``alerts``: dicts as served by ``GET /v1/alerts`` (times as ISO strings)."""
    from ptype.clock import parse_time
    ET.register_namespace("", ATOM)
    feed = ET.Element(f"{{{ATOM}}}feed")
    _sub(feed, "id", f"urn:uuid:{uuid.uuid5(uuid.NAMESPACE_URL, 'ptype-alerts:' + sender)}")
    _sub(feed, "title", "ptype road-weather alerts")
    _sub(feed, "subtitle", CAUTION)
    updated = max([parse_time(a["updated"]) for a in alerts] or [now])
    _sub(feed, "updated", atom_time(updated))
    author = _sub(feed, "author")
    _sub(author, "name", "ptype road-weather guidance")
    _sub(feed, "link", rel="self", type="application/atom+xml", href=f"{base_url}/v1/alerts.atom")
    _sub(feed, "generator", "ptype")
    for a in alerts:
        entry = _sub(feed, "entry")
        _sub(entry, "id", f"urn:uuid:{a['id']}")
        _sub(entry, "title", f"[{a['status']}] {a['headline']}")
        _sub(entry, "updated", atom_time(parse_time(a["updated"])))
        _sub(entry, "published", atom_time(parse_time(a["created"])))
        _sub(entry, "link", rel="alternate", type="application/cap+xml",
             href=f"{base_url}/v1/alerts/{a['id']}.cap")
        _sub(entry, "category", term=a["event"])
        _sub(entry, "summary",
             f"{a['severity']} / {a['certainty']} / {a['urgency']}; "
             f"{a['onset']} to {a['expires']}. {a['description']}")
    return ET.tostring(feed, encoding="utf-8", xml_declaration=True)
