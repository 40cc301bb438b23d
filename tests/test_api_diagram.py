"""HTTP tests of ``POST /v1/diagram`` (api/diagram.py) and of the drawing itself
(ptype/plot/diagram.py): formats, content negotiation, what the picture carries, and errors."""

from __future__ import annotations

import io
import re
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from api_support import freezing_rain_document, snow_document

import ptype
from ptype.plot.diagram import draw_diagram

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (W3C / ISO/IEC 15948), section 5.2
SVG_NS = "{http://www.w3.org/2000/svg}"  # W3C SVG 1.1 namespace


def _svg_text(svg: bytes) -> str:
    root = ET.fromstring(svg)
    assert root.tag == f"{SVG_NS}svg"
    return " ".join("".join(el.itertext()) for el in root.iter(f"{SVG_NS}text"))


def test_diagram_png_by_default(client):
    response = client.post("/v1/diagram?seed=1", json=freezing_rain_document())
    assert response.status_code == 200
    assert response.mimetype == "image/png"
    assert response.data.startswith(PNG_SIGNATURE)
    from matplotlib.image import imread
    pixels = imread(io.BytesIO(response.data), format="png")
    assert pixels.shape[0] > 500 and pixels.shape[1] > 500


@pytest.mark.parametrize("query,accept,mime", [
    ("format=svg", None, "image/svg+xml"),
    ("format=png", "image/svg+xml", "image/png"),       # the query wins over Accept
    ("", "image/svg+xml", "image/svg+xml"),
    ("", "image/svg+xml;q=0.4, image/png;q=0.9", "image/png"),
    ("", "*/*", "image/png"),
])
def test_diagram_format_negotiation(client, query, accept, mime):
    headers = {"Accept": accept} if accept else {}
    response = client.post(f"/v1/diagram?{query}", json=snow_document(), headers=headers)
    assert response.status_code == 200
    assert response.mimetype == mime


def test_diagram_svg_carries_type_areas_and_caution(client):
    document = freezing_rain_document()
    response = client.post("/v1/diagram?format=svg&seed=2", json=document)
    text = _svg_text(response.data)
    diagnosis = ptype.diagnose(document, seed=2).to_dict()
    assert "FZRA" in text and "freezing rain" in text
    # Every melting layer and the refreezing layer beneath it are labelled with their J/kg.
    warm = [lyr for lyr in diagnosis["layers"] if lyr["kind"] == "warm"]
    assert warm
    for layer in warm:
        assert f"melting {layer['area_j_kg']:.0f} J/kg" in text
    surface_cold = diagnosis["layers"][0]
    assert f"refreezing {surface_cold['area_j_kg']:.0f} J/kg" in text
    for word in ("Temperature", "Dew point", "Wet-bulb", "0 \u00b0C isotherm", "cloud"):
        assert word in text
    assert ptype.CAUTION in text
    assert re.search(r"FZRA \d+%", text)


def test_draw_diagram_from_profile_has_no_type():
    profile = ptype.Profile.from_document(snow_document())
    text = _svg_text(draw_diagram(profile, "svg"))
    assert "Sounding" in text and not re.search(r"melting \d+ J/kg", text)
    assert ptype.CAUTION in text


def test_draw_diagram_rejects_unknown_format():
    with pytest.raises(ptype.OptionError, match="png or svg"):
        draw_diagram(ptype.Profile.from_document(snow_document()), "gif")


@pytest.mark.parametrize("query,body,content_type,status", [
    ("format=gif", None, None, 400),
    ("", "{broken", "application/json", 400),
    ("", "<svg/>", "image/svg+xml", 415),
    ("", '{"levels": []}', "application/json", 422),
])
def test_diagram_errors_are_json(client, query, body, content_type, status):
    if body is None:
        response = client.post(f"/v1/diagram?{query}", json=snow_document())
    else:
        response = client.post(f"/v1/diagram?{query}", data=body, content_type=content_type)
    assert response.status_code == status
    assert response.mimetype == "application/json"
    assert set(response.get_json()["error"]) >= {"code", "message"}


@pytest.mark.parametrize("pressures", [(350, 300, 250, 200), (1050, 1040, 1030), (900, 500, 20)])
def test_draw_diagram_unusual_pressure_ranges(pressures):
    # Profiles that start high up, span only a few hPa, or reach the stratosphere still draw.
    levels = [{"pressure_hpa": p, "temperature_c": -5.0 - i, "dewpoint_c": -7.0 - i}
              for i, p in enumerate(pressures)]
    profile = ptype.Profile.from_document({"levels": levels})
    assert draw_diagram(profile, "png", dpi=40).startswith(PNG_SIGNATURE)
    assert draw_diagram(ptype.diagnose(profile, members=4, seed=0), "svg").startswith(b"<?xml")


def test_diagram_surface_values_and_labels_stay_off_the_chart():
    """The surface T, Tw and Td are written out in a box beside the chart, the energy labels
    sit in the same column with leader lines, and the lowest 3 km get a panel of their own."""
    from api_support import freezing_rain_document

    import ptype
    from ptype.plot.diagram import _as_dict, _figure
    result = ptype.diagnose(ptype.Profile.from_document(freezing_rain_document()), members=0)
    data = _as_dict(result)
    fig = _figure(data, 7.0)
    fig.canvas.draw()
    skew_ax = fig.axes[0]
    chart = skew_ax.get_window_extent()
    texts = {t.get_gid(): [] for t in skew_ax.texts}
    for t in skew_ax.texts:
        texts[t.get_gid()].append(t)
    from matplotlib.text import Text
    from matplotlib.transforms import Bbox

    def box_of(text):  # the label itself, without its leader line
        x, y = skew_ax.transAxes.transform(text.xyann)  # labels are placed in axes fractions
        size = Text.get_window_extent(text)
        y0 = y if text.get_va() == "bottom" else y - size.height / 2
        return Bbox.from_bounds(x, y0, size.width, size.height)
    surface = texts["surface-values"][0]
    prof = data["profile"]
    # The values are those of the lowest level of the profile (its surface).
    for name, key in (("T", "temperature_c"), ("Tw", "wetbulb_c"), ("Td", "dewpoint_c")):
        assert f"{name} {prof[key][0]:.1f} \u00b0C" in surface.get_text()
    assert box_of(surface).x0 >= chart.x1  # not over the curves
    energy = texts["energy"]
    assert energy, "a freezing-rain profile has melting and refreezing layers"
    boxes = [box_of(t) for t in energy + [surface]]
    for box in boxes:
        assert box.x0 >= chart.x1
    for i, a in enumerate(boxes):  # no two labels overlap
        for b in boxes[i + 1:]:
            assert not a.overlaps(b)
    assert any(ax.get_title(loc="left") == "Lowest 3 km" for ax in fig.axes)


def test_diagram_shows_the_particle_fractions_beside_the_lowest_3_km():
    # The particle model's melted and refrozen mass fractions by height, drawn on the heights
    # of the lowest-3-km panel: the plotted lines are the profile's own arrays.
    from api_support import freezing_rain_document

    from ptype.plot.diagram import _as_dict, _figure
    data = _as_dict(ptype.diagnose(ptype.Profile.from_document(freezing_rain_document()),
                                   members=0))
    fig = _figure(data, 7.0)
    panel = [ax for ax in fig.axes if ax.get_title(loc="left") == "Particles"]
    assert len(panel) == 1
    low = next(ax for ax in fig.axes if ax.get_title(loc="left") == "Lowest 3 km")
    assert panel[0].get_shared_y_axes().joined(panel[0], low)
    lines = {line.get_label(): line for line in panel[0].get_lines()}
    prof = data["profile"]
    z = np.asarray(prof["height_m"], dtype=float)
    agl_km = (z - z[0]) / 1000.0
    low_levels = agl_km <= 3.05
    np.testing.assert_allclose(lines["melted"].get_xdata(),
                               np.asarray(prof["melted_fraction"], dtype=float)[low_levels])
    assert {"melted", "refrozen"} <= set(lines)
