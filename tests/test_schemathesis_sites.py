"""Property-based run of the site, timeline and alert operations against the service's own
OpenAPI document (schemathesis on the WSGI application, a temporary database): no generated
request may produce a server error, an undocumented status, a wrong content type or a body
that breaks its schema.  Half the cases carry a valid API key so that validation of the
write bodies is exercised, not only the 401 answer."""

from __future__ import annotations

import tempfile
import zlib
from datetime import UTC, datetime

import schemathesis
from hypothesis import HealthCheck, Phase, settings
from ptype.api import create_app
from ptype.api.plumbing import store_for
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_schema_conformance,
    status_code_conformance,
)

from ptype.store.keys import create_key

APP = create_app({"TESTING": True, "PTYPE_DATA_DIR": tempfile.mkdtemp(prefix="ptype-st-"),
                  "PTYPE_NOW": "2026-01-27T06:00:00Z"})
with APP.app_context(), store_for(APP).write() as session:
    KEY, _ = create_key(session, "schemathesis", datetime(2026, 1, 27, tzinfo=UTC))

schema = schemathesis.openapi.from_wsgi("/openapi.json", APP)
schema = schema.include(path_regex=r"^/v1/(sites|alerts)")

CHECKS = [not_a_server_error, status_code_conformance, content_type_conformance,
          response_schema_conformance]


@schema.parametrize()
@settings(max_examples=20, deadline=None, derandomize=True, database=None,
          phases=[Phase.explicit, Phase.generate], suppress_health_check=list(HealthCheck))
def test_sites_and_alerts_conform_to_openapi(case):
    if case.query and "members" in case.query:
        case.query["members"] = 2  # keep each timeline cheap
    if case.query and "hours" in case.query:
        case.query["hours"] = 2
    if zlib.crc32(repr((case.path, case.body, case.query)).encode()) % 2 == 0:
        case.headers = dict(case.headers or {}, Authorization=f"Bearer {KEY}")
    case.call_and_validate(checks=CHECKS)
