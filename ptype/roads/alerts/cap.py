"""OASIS Common Alerting Protocol 1.2 XML (OASIS Standard, 1 July 2010).

Element order follows the CAP 1.2 schema's sequences exactly::

    alert: identifier, sender, sent, status, msgType, source?, scope, restriction?, addresses?,
           code*, note?, references?, incidents?, info*
    info:  language?, category+, event, responseType*, urgency, severity, certainty, audience?,
           eventCode*, effective?, onset?, expires?, senderName?, headline?, description?,
           instruction?, web?, contact?, parameter*, resource*, area*
    area:  areaDesc, polygon*, circle*, geocode*, altitude?, ceiling?

Text passes through :func:`ptype.store.text.xml_safe`, so a message is well-formed XML
whatever was stored.  Times are ``YYYY-MM-DDThh:mm:ss+00:00`` (no fractional seconds, no
"Z", as the schema's pattern requires).  ``references`` lists the earlier messages of the
same alert as space-separated ``sender,identifier,sent`` triples.  The GRIB2 code table
4.201 value of the dominant precipitation type is carried in a ``parameter``.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from datetime import UTC, datetime
from typing import Any
from xml.etree import ElementTree as ET

from ptype.roads.alerts.rules import EVENTS
from ptype.store.text import xml_safe

NAMESPACE = "urn:oasis:names:tc:emergency:cap:1.2"
STATUS = ("Actual", "Exercise", "System", "Test", "Draft")
MSG_TYPES = ("Alert", "Update", "Cancel", "Ack", "Error")
SCOPES = ("Public", "Restricted", "Private")
CATEGORIES = ("Geo", "Met", "Safety", "Security", "Rescue", "Fire", "Health", "Env",
              "Transport", "Infra", "CBRNE", "Other")
RESPONSE_TYPES = ("Shelter", "Evacuate", "Prepare", "Execute", "Avoid", "Monitor", "Assess",
                  "AllClear", "None")
URGENCIES = ("Immediate", "Expected", "Future", "Past", "Unknown")
SEVERITIES = ("Extreme", "Severe", "Moderate", "Minor", "Unknown")
CERTAINTIES = ("Observed", "Likely", "Possible", "Unlikely", "Unknown")
#: Circle radius around a site, km (ours: a road-weather station represents a few km of road).
DEFAULT_RADIUS_KM = 10.0


def cap_time(dt: datetime) -> str:
    """``YYYY-MM-DDThh:mm:ss+00:00``."""
    return dt.astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%S+00:00")


def reference(sender: str, identifier: str, sent: datetime) -> str:
    """A CAP ``references`` entry: ``sender,identifier,sent`` (CAP12, section 3.2.1)."""
    return f"{sender},{identifier},{cap_time(sent)}"


def _sub(parent, tag, text=None):
    # Every text goes through xml_safe: ElementTree writes whatever it is given, and one
    # character XML 1.0 forbids (in a site name stored long ago, say) would make the whole
    # message unreadable to every consumer.
    el = ET.SubElement(parent, f"{{{NAMESPACE}}}{tag}")
    if text is not None:
        el.text = xml_safe(text)
    return el


#: The default ``scope``: these messages are automated guidance for the people who run roads
#: and infrastructure, not public warnings (those come from the official services), so they
#: are Restricted with a ``restriction`` saying so (ours; CAP 1.2 sec. 3.2.1 requires a
#: restriction with Restricted and addresses with Private).
DEFAULT_SCOPE = "Restricted"
DEFAULT_RESTRICTION = ("Automated road-weather guidance for road and infrastructure operators; "
                       "not a public warning. Official warnings take precedence.")


def check_scope(scope: str, restriction: str | None, addresses: str | None) -> None:
    """Refuse a scope CAP 1.2 does not know, or one without the element it requires."""
    if scope not in SCOPES:
        raise ValueError(f"scope {scope!r}: expected one of {', '.join(SCOPES)}")
    if scope == "Restricted" and not (restriction or "").strip():
        raise ValueError("scope Restricted needs a restriction text")
    if scope == "Private" and not (addresses or "").strip():
        raise ValueError("scope Private needs addresses")


def deployment_scope(config: Mapping[str, Any] | None = None) -> dict[str, str | None]:
    """The deployment's ``scope``, ``restriction`` and ``addresses``: ``PTYPE_CAP_SCOPE``,
    ``PTYPE_CAP_RESTRICTION`` and ``PTYPE_CAP_ADDRESSES`` from ``config`` (the service's
    settings), else the environment, else :data:`DEFAULT_SCOPE` with
    :data:`DEFAULT_RESTRICTION`; checked (:func:`check_scope`, ValueError)."""
    import os

    def setting(name):
        value = (config or {}).get(name) or os.environ.get(name)
        return str(value).strip() if value else None

    scope = setting("PTYPE_CAP_SCOPE") or DEFAULT_SCOPE
    restriction = setting("PTYPE_CAP_RESTRICTION") or (
        DEFAULT_RESTRICTION if scope == "Restricted" else None)
    addresses = setting("PTYPE_CAP_ADDRESSES")
    check_scope(scope, restriction, addresses)
    return {"scope": scope, "restriction": restriction, "addresses": addresses}


def build_cap(message: Mapping[str, Any], earlier: Sequence[Mapping[str, Any]], *, sender: str,
              status: str = "Actual", radius_km: float = DEFAULT_RADIUS_KM,
              scope: str = DEFAULT_SCOPE, restriction: str | None = DEFAULT_RESTRICTION,
              addresses: str | None = None) -> bytes:
    """CAP 1.2 XML for one stored message.

    ``message``: ``identifier``, ``msg_type``, ``sent`` (datetime) and ``snapshot`` (the alert
    fields: event, severity, certainty, urgency, onset, expires as datetimes or ISO strings,
    headline, description, instruction, parameters, site {name, latitude, longitude}).
    ``earlier``: the alert's earlier messages (identifier, sent), oldest first.
    """
    from ptype.clock import parse_time
    if status not in STATUS:
        raise ValueError(f"status {status!r}: expected one of {', '.join(STATUS)}")
    check_scope(scope, restriction, addresses)
    snap = message["snapshot"]
    msg_type = message["msg_type"]
    ET.register_namespace("", NAMESPACE)
    alert = ET.Element(f"{{{NAMESPACE}}}alert")
    _sub(alert, "identifier", message["identifier"])
    _sub(alert, "sender", sender)
    _sub(alert, "sent", cap_time(message["sent"]))
    _sub(alert, "status", status)
    _sub(alert, "msgType", msg_type)
    _sub(alert, "source", "ptype automated road-weather guidance")
    _sub(alert, "scope", scope)
    if scope == "Restricted":
        _sub(alert, "restriction", restriction)
    if scope == "Private":
        _sub(alert, "addresses", addresses)
    if msg_type == "Cancel":
        _sub(alert, "note", "The hazard is no longer in the forecast.")
    if earlier:
        _sub(alert, "references", " ".join(reference(sender, m["identifier"], m["sent"])
                                           for m in earlier))
    info = _sub(alert, "info")
    _sub(info, "language", "en-GB")
    _sub(info, "category", "Met")
    _sub(info, "category", "Transport")
    event_text, response, _ = EVENTS[snap["event"]]
    _sub(info, "event", event_text)
    _sub(info, "responseType", "AllClear" if msg_type == "Cancel" else response)
    _sub(info, "urgency", "Past" if msg_type == "Cancel" else snap["urgency"])
    _sub(info, "severity", snap["severity"])
    _sub(info, "certainty", snap["certainty"])
    _sub(info, "audience", "road and infrastructure operators")
    code = _sub(info, "eventCode")
    _sub(code, "valueName", "ptype-event")
    _sub(code, "value", snap["event"])
    _sub(info, "effective", cap_time(message["sent"]))
    _sub(info, "onset", cap_time(parse_time(snap["onset"])))
    _sub(info, "expires", cap_time(parse_time(snap["expires"])))
    _sub(info, "senderName", "ptype road-weather guidance")
    headline = snap["headline"]
    if msg_type == "Cancel":
        headline = "Cancelled: " + headline
    _sub(info, "headline", headline[:160])
    _sub(info, "description", snap["description"])
    _sub(info, "instruction", snap["instruction"])
    params = dict(snap.get("parameters") or {})
    grib = params.pop("grib2_code", None)
    if grib is not None:
        p = _sub(info, "parameter")
        _sub(p, "valueName", "GRIB2_4.201")
        _sub(p, "value", int(grib))
    for key, value in params.items():
        p = _sub(info, "parameter")
        _sub(p, "valueName", key)
        _sub(p, "value", value)
    site = snap["site"]
    area = _sub(info, "area")
    _sub(area, "areaDesc", site["name"])
    _sub(area, "circle", f"{float(site['latitude']):.4f},{float(site['longitude']):.4f} "
                         f"{float(radius_km):g}")
    return ET.tostring(alert, encoding="utf-8", xml_declaration=True)
