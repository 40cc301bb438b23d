"""``ptype show`` run as a user would, as a subprocess of the installed command."""

from __future__ import annotations

import json
import subprocess
from pathlib import Path

import pytest

from ptype import thermo
from ptype.constants import CAUTION

ROOT = Path(__file__).resolve().parents[1]
PTYPE = ROOT / ".venv" / "bin" / "ptype"
DATA = Path(__file__).parent / "data"


def _run(*args, stdin: str | None = None) -> subprocess.CompletedProcess:
    return subprocess.run([str(PTYPE), "show", *map(str, args)], check=False, capture_output=True,
                          text=True, input=stdin, timeout=120, cwd=ROOT)


def test_show_table():
    out = _run(DATA / "warm_nose_sounding.json")
    assert out.returncode == 0, out.stderr
    lines = out.stdout.splitlines()
    assert lines[0] == "Kestrel Ridge (invented test site) | 2026-01-15 12:00 UTC"
    assert lines[1].split() == ["p", "hPa", "z", "m", "T", "C", "Td", "C", "RH", "%", "Tw", "C"]
    rows = [line.split() for line in lines[2:14]]
    assert [float(r[0]) for r in rows][:3] == [978.0, 950.0, 925.0]
    assert float(rows[0][1]) == 310.0  # station elevation
    assert any(line.startswith("note: heights computed hypsometrically") for line in lines)
    assert lines[-1] == CAUTION


def test_show_json():
    out = _run(DATA / "warm_nose_sounding.csv", "--format", "json")
    assert out.returncode == 0, out.stderr
    doc = json.loads(out.stdout)
    assert doc["caution"] == CAUTION
    assert doc["site"]["id"] == "KESTREL" and len(doc["levels"]) == 12
    row = doc["derived"][3]  # 900 hPa, T 1.4, Td 0.8
    assert row["pressure_hpa"] == 900.0
    # Derived columns are those of ptype.thermo, rounded for display.
    assert row["relative_humidity_pct"] == round(float(thermo.relative_humidity_pct(1.4, 0.8)))
    assert row["wetbulb_c"] == round(float(thermo.wet_bulb_temperature(900.0, 1.4, 0.8)), 1)
    assert doc["warnings"]


def test_show_temp_from_stdin():
    text = (DATA / "warm_nose_sounding.temp").read_text()
    out = _run("-", "--input-format", "temp", stdin=text)
    assert out.returncode == 0, out.stderr
    assert "978.0" in out.stdout and out.stdout.rstrip().endswith(CAUTION)


def test_show_help():
    out = _run("--help")
    assert out.returncode == 0
    assert "--format {table,json}" in out.stdout and "--input-format" in out.stdout


@pytest.mark.parametrize("content, name, expected", [
    (None, "missing.json", "missing.json: no such file"),
    ("pressure_hpa,temperature_c\n1000,1\n900,x\n", "bad.csv", "line 3: column temperature_c"),
    ('{"levels": [{"pressure_hpa": 1000, "temperature_c": 99, "dewpoint_c": 0}]}', "hot.json",
     "temperature_c = 99: expected -100 to +60 degC"),
    ("TTAA 15127 07999 99990 0100 /////=", "cut.temp", "group 5 '0100'"),
])
def test_show_bad_input_one_line_exit_2(tmp_path, content, name, expected):
    path = tmp_path / name
    if content is not None:
        path.write_text(content)
    out = _run(path)
    assert out.returncode == 2
    assert out.stdout == ""
    assert "Traceback" not in out.stderr
    lines = out.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("ptype show: error: ") and expected in lines[0]


def test_show_bad_option_exit_2():
    out = _run(DATA / "warm_nose_sounding.json", "--format", "xml")
    assert out.returncode == 2 and "Traceback" not in out.stderr
    assert len(out.stderr.strip().splitlines()) == 1


def test_show_temp_heading_names_station_and_day():
    # TEMP carries no month or year: the heading shows the station and the message's day/hour.
    out = _run(DATA / "warm_nose_sounding.temp")
    assert out.returncode == 0, out.stderr
    first = out.stdout.splitlines()[0]
    assert first.startswith("99901 | WMO TEMP Part A+B, station 99901, day 15 12 UTC")


def test_show_netcdf_from_stdin(tmp_path):
    import numpy as np
    import xarray as xr
    p = np.array([1000.0, 900.0, 800.0, 700.0])
    ds = xr.Dataset(
        {"ta": ("z", [275.15, 272.15, 268.15, 263.15],
                {"standard_name": "air_temperature", "units": "K"}),
         "hur": ("z", [90.0, 85.0, 70.0, 60.0],
                 {"standard_name": "relative_humidity", "units": "%"})},
        coords={"z": ("z", p, {"standard_name": "air_pressure", "units": "hPa"})})
    path = tmp_path / "p.nc"
    ds.to_netcdf(path)
    out = subprocess.run([str(PTYPE), "show", "-", "--format", "json"], input=path.read_bytes(),
                         capture_output=True, timeout=120, check=False, cwd=ROOT)
    assert out.returncode == 0, out.stderr
    doc = json.loads(out.stdout)
    assert [lvl["pressure_hpa"] for lvl in doc["levels"]] == [1000.0, 900.0, 800.0, 700.0]
    assert doc["levels"][0]["temperature_c"] == pytest.approx(2.0)


def test_show_binary_garbage_on_stdin_exit_2():
    out = subprocess.run([str(PTYPE), "show", "-"], input=b"\xff\xfe\x00garbage",
                         capture_output=True, timeout=120, check=False, cwd=ROOT)
    assert out.returncode == 2 and b"Traceback" not in out.stderr
    assert out.stderr.decode().strip() == "ptype show: error: <text>: not UTF-8 text"
