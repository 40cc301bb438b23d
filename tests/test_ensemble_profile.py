"""One sounding from an ensemble (ptype.engine.ensemble_diagnosis, ``ptype diagnose`` on a
NetCDF file with a CF ``realization`` dimension): probabilities are member fractions."""

from __future__ import annotations

import json

import numpy as np
import pytest

xr = pytest.importorskip("xarray")

from api_support import freezing_rain_document, snow_document

import ptype
from ptype.cli import main
from ptype.codes import Code
from ptype.engine.ensemble_diagnosis import ensemble_probabilities, most_likely


def _member_file(path, documents):
    """A CF NetCDF file (netCDF4) of one sounding per member on common pressure levels."""
    p = np.array([lv["pressure_hpa"] for lv in documents[0]["levels"]])
    t = np.array([[lv["temperature_c"] for lv in d["levels"]] for d in documents]) + 273.15
    td = np.array([[lv["dewpoint_c"] for lv in d["levels"]] for d in documents]) + 273.15
    ds = xr.Dataset(
        {"ta": (("realization", "plev"), t, {"standard_name": "air_temperature", "units": "K"}),
         "tda": (("realization", "plev"), td, {"standard_name": "dew_point_temperature",
                                               "units": "K"})},
        coords={"plev": ("plev", p, {"standard_name": "air_pressure", "units": "hPa"}),
                "realization": ("realization", np.arange(len(documents)),
                                {"standard_name": "realization"})})
    ds.to_netcdf(path, engine="netcdf4")


def test_ensemble_probabilities_are_fractions_and_ties_go_to_the_hazard():
    probs = ensemble_probabilities([Code.SN, Code.FZRA, Code.SN, Code.FZRA])
    assert probs == {"SN": 0.5, "FZRA": 0.5}
    # Ties: freezing rain before snow (ptype.codes.HAZARD_ORDER, common practice).
    assert most_likely(probs) == Code.FZRA


def test_cli_diagnose_multi_member_file(tmp_path, capsys):
    snow, fzra = snow_document(n_levels=40), freezing_rain_document(n_levels=40)
    levels = [lv["pressure_hpa"] for lv in snow["levels"]]
    assert levels == [lv["pressure_hpa"] for lv in fzra["levels"]]
    path = tmp_path / "members.nc"
    _member_file(path, [snow, snow, snow, fzra])
    assert main(["diagnose", str(path), "--format", "json", "--members", "0"]) == 0
    out = json.loads(capsys.readouterr().out)
    one = {d["ptype"] for d in (ptype.diagnose(snow, members=0).to_dict(),)}
    assert one == {"SN"}
    fz = ptype.diagnose(fzra, members=0).code.name
    assert out["ptype"] == "SN" and out["probabilities"]["SN"] == 0.75
    assert out["probabilities"][fz] == 0.25
    assert out["ensemble"]["members"] == 4
    assert out["ensemble"]["member_types"] == ["SN", "SN", "SN", fz]
