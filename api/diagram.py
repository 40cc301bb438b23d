"""``POST /v1/diagram``: the skew-T log-p diagram of a profile as PNG or SVG.

The body is the same as for ``POST /v1/diagnose`` (JSON document, CSV or WMO TEMP); the
image format comes from ``?format=png|svg`` or else the ``Accept`` header (PNG by
default).  Errors are JSON for API clients, as everywhere else.
"""

from __future__ import annotations

from flask import Blueprint, Response, request
from ptype.api import budget
from ptype.api.examples import PROFILE_BODIES
from ptype.api.models import DiagramOptions
from ptype.api.openapi import Operation
from ptype.api.plumbing import check_work, diagnose_kwargs, parse_options, profile_from_request

import ptype
from ptype.plot.diagram import FORMATS, draw_diagram

bp = Blueprint("diagram", __name__, url_prefix="/v1")


def image_format(options: DiagramOptions) -> str:
    """``png`` or ``svg``: the ``format`` option, else the best match of ``Accept``."""
    if options.image_format:
        return options.image_format
    best = request.accept_mimetypes.best_match(["image/png", "image/svg+xml"], default="image/png")
    return "svg" if best == "image/svg+xml" else "png"


@bp.post("/diagram")
@Operation(
    id="diagram", tag="Diagram", summary="Skew-T log-p diagram of a profile (PNG or SVG)",
    description="Temperature, dew point and wet-bulb against log pressure with the 0 degC "
                "isotherm, melting and refreezing areas labelled in J/kg, cloud layers, the "
                "consensus type and probabilities in the title and the caution. Choose the "
                "image with `?format=` or the `Accept` header (PNG by default).",
    query=DiagramOptions, body=PROFILE_BODIES,
    ok={"description": "The diagram.",
        "content": {"image/png": {"schema": {"type": "string", "format": "binary"}},
                    "image/svg+xml": {"schema": {"type": "string"}}}},
    errors=(400, 413, 415, 422, 503),
    curl="curl -s -X POST '{url}?format=svg' -H 'Content-Type: application/json' "
         "--data @profile.json -o diagram.svg")
def diagram() -> Response:
    """Diagnose the profile of the request body and draw its diagram."""
    options = parse_options(DiagramOptions)
    kwargs = diagnose_kwargs(options)
    fmt = image_format(options)
    profile = profile_from_request(options)
    check_work(profile.n_levels, kwargs)
    with budget.computing():
        result = ptype.diagnose(profile, **kwargs)
        image = draw_diagram(result, fmt)
    response = Response(image, mimetype=FORMATS[fmt])
    response.headers["Cache-Control"] = "no-store"
    return response
