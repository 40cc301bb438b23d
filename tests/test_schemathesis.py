"""Property-based run of the service against its own OpenAPI document (schemathesis, driving
the WSGI application directly): no generated request, valid or not, may produce a server
error, an undocumented status, a wrong content type or a body that breaks its schema.

Bounded: a few dozen examples per operation, no shrinking, so the whole run stays well
under a minute."""

from __future__ import annotations

import schemathesis
from hypothesis import HealthCheck, Phase, settings
from ptype.api import create_app
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_schema_conformance,
    status_code_conformance,
)


@schemathesis.serializer("application/x-bufr")
def _bufr_body(ctx, value):
    """Generated BUFR bodies are arbitrary bytes (or text): the reader must refuse them with
    a 4xx, never a server error."""
    return value if isinstance(value, bytes) else str(value).encode("utf-8")


APP = create_app({"TESTING": True})
schema = schemathesis.openapi.from_wsgi("/openapi.json", APP)
# Operations of this module; other resources are exercised by their own tests.
schema = schema.include(path_regex=r"^/(v1/(diagnose|diagram|demo)|healthz)")

CHECKS = [not_a_server_error, status_code_conformance, content_type_conformance,
          response_schema_conformance]


@schema.parametrize()
@settings(max_examples=25, deadline=None, derandomize=True, database=None,
          phases=[Phase.explicit, Phase.generate],
          suppress_health_check=list(HealthCheck))
def test_api_conforms_to_openapi(case):
    # Keep each diagnosis cheap: members are drawn up to the server's limit.
    if case.query and "members" in case.query:
        case.query["members"] = min(int(case.query["members"]), 20) \
            if str(case.query["members"]).lstrip("-").isdigit() else case.query["members"]
    case.call_and_validate(checks=CHECKS)
