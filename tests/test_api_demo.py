"""HTTP tests of ``GET /v1/demo`` and ``GET /v1/demo/<name>`` (api/demo.py)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from api_support import document_to_csv, freezing_rain_document, snow_document
from ptype.api import create_app
from ptype.api.models import DemoList

from ptype.readers.temp_format import write_temp

REPO_DEMO = Path(__file__).resolve().parent.parent / "soundings_demo"


@pytest.fixture()
def demo_dir(tmp_path):
    (tmp_path / "json").mkdir()
    (tmp_path / "csv").mkdir()
    (tmp_path / "temp").mkdir()
    (tmp_path / "json" / "gullmere_0600.json").write_text(json.dumps(freezing_rain_document()))
    (tmp_path / "csv" / "hobbs_0000.csv").write_text(document_to_csv(snow_document()))
    (tmp_path / "temp" / "gullmere_0600.txt").write_text(write_temp(freezing_rain_document()))
    (tmp_path / "json" / "notes.md").write_text("not a sounding")
    return tmp_path


@pytest.fixture()
def client(make_app, demo_dir):
    return make_app(PTYPE_DEMO_DIR=str(demo_dir)).test_client()


def test_demo_list_names_every_sounding(client):
    body = client.get("/v1/demo").get_json()
    DemoList.model_validate(body)
    names = {entry["name"]: entry for entry in body["soundings"]}
    assert set(names) == {"gullmere_0600.json", "hobbs_0000.csv", "gullmere_0600.txt"}
    assert names["gullmere_0600.json"]["site"] == "Gullmere Flats (invented)"
    assert names["hobbs_0000.csv"]["format"] == "csv"
    assert names["gullmere_0600.txt"]["format"] == "temp"


@pytest.mark.parametrize("name,mime", [("gullmere_0600.json", "application/json"),
                                       ("hobbs_0000.csv", "text/csv"),
                                       ("gullmere_0600.txt", "text/plain")])
def test_demo_document_posts_back_to_diagnose(client, name, mime):
    response = client.get(f"/v1/demo/{name}")
    assert response.status_code == 200 and response.mimetype == mime
    diagnosed = client.post("/v1/diagnose", data=response.data, content_type=mime)
    assert diagnosed.status_code == 200, diagnosed.get_data(as_text=True)
    # Demo design: Gullmere is the freezing-rain case, Hobb's Saddle the snow case.
    assert diagnosed.get_json()["ptype"] == ("SN" if name.startswith("hobbs") else "FZRA")


@pytest.mark.parametrize("name", ["nowhere.json", "notes.md", "..%2Fjson%2Fgullmere_0600.json",
                                  ".hidden"])
def test_demo_document_unknown_is_404(client, name):
    response = client.get(f"/v1/demo/{name}")
    assert response.status_code == 404
    assert response.get_json()["error"]["code"] in ("not_found",)


def test_demo_missing_directory_lists_nothing(tmp_path):
    client = create_app({"TESTING": True, "PTYPE_DEMO_DIR": str(tmp_path / "none")}).test_client()
    assert client.get("/v1/demo").get_json()["soundings"] == []


def test_demo_shipped_soundings_all_diagnose():
    """Every sounding shipped in soundings_demo/ is readable and diagnosable over HTTP."""
    client = create_app({"TESTING": True, "PTYPE_DEMO_DIR": str(REPO_DEMO)}).test_client()
    entries = client.get("/v1/demo").get_json()["soundings"]
    if not entries:
        pytest.skip("no demo soundings generated in soundings_demo/")
    for entry in entries:
        document = client.get(entry["url"])
        response = client.post("/v1/diagnose?members=10", data=document.data,
                               content_type=document.mimetype)
        assert response.status_code == 200, (entry["name"], response.get_data(as_text=True))
