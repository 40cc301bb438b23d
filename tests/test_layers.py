"""Layer analysis: energies, crossings, freezing levels, cloud layers."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ptype.engine.columns import Columns
from ptype.engine.layers import (
    analyse_layers,
    cloud_mask,
    layer_area_j_kg,
    level_runs,
    zero_height_m,
)
from ptype.thermo.constants import Rd


def dense_area(p, t):
    """Independent reference: positive and negative R_d * integral (T - T0) d ln p on a dense
    ln p grid (linear interpolation in ln p, the same convention as the crossings)."""
    x = np.log(np.asarray(p, dtype=float))
    grid = np.linspace(x[0], x[-1], 200001)
    tg = np.interp(-grid, -x, np.asarray(t, dtype=float))
    dx = -np.diff(grid)
    mid = 0.5 * (tg[1:] + tg[:-1])
    return Rd * np.sum(np.clip(mid, 0, None) * dx), Rd * np.sum(np.clip(-mid, 0, None) * dx)


def test_isothermal_plus3_850_800_is_52_j_kg():
    # Bourgouin (2000) area R_d * integral (T - T0) d ln p, evaluated by hand for an isothermal
    # +3 degC layer from 850 to 800 hPa: 287.04 * 3 * ln(850/800) = 52.2 J/kg.  (c_p with
    # d ln p would give ~183: a 3.5x error.)
    assert layer_area_j_kg(850.0, 800.0, 3.0) == pytest.approx(52.2, abs=0.05)
    p = np.array([[900.0, 850.001, 850.0, 800.0, 799.999, 700.0]])
    t = np.array([[-2.0, -2.0, 3.0, 3.0, -3.0, -8.0]])
    z = np.array([[1000.0, 1450.0, 1450.1, 1950.0, 1950.1, 3000.0]])
    lay = analyse_layers(p, z, t)
    warm = lay.kind[0] > 0
    assert warm.sum() == 1
    assert lay.area_j_kg[0][warm][0] == pytest.approx(52.2, abs=0.2)


def test_three_layer_profile_bounds_and_areas():
    p = np.array([[1000.0, 950.0, 900.0, 850.0, 800.0, 750.0, 700.0, 500.0]])
    t = np.array([[-3.0, -3.0, 0.0, 3.0, 3.0, 0.0, -5.0, -20.0]])
    z = np.array([[0.0, 430.0, 880.0, 1350.0, 1850.0, 2370.0, 2920.0, 5500.0]])
    lay = analyse_layers(p, z, t)
    assert lay.count[0] == 3
    assert list(lay.kind[0]) == [-1, 1, -1]
    warm_ref, cold_ref = dense_area(p[0][:6], t[0][:6])
    assert lay.area_j_kg[0, 1] == pytest.approx(warm_ref, rel=1e-4)
    assert lay.area_j_kg[0, 0] == pytest.approx(cold_ref, rel=1e-4)
    assert lay.bottom_hpa[0, 1] == pytest.approx(900.0)
    assert lay.top_hpa[0, 1] == pytest.approx(750.0)
    assert lay.extreme_c[0, 1] == 3.0 and lay.extreme_c[0, 0] == -3.0
    assert zero_height_m(lay)[0] == pytest.approx(2370.0)


def test_crossing_interpolated_linearly_in_ln_p():
    p = np.array([[1000.0, 800.0, 600.0]])
    t = np.array([[2.0, -2.0, -10.0]])
    z = np.array([[0.0, 2000.0, 4000.0]])
    lay = analyse_layers(p, z, t)
    # Half way in ln p between 1000 and 800 hPa: sqrt(1000 * 800).
    assert lay.top_hpa[0, 0] == pytest.approx(np.sqrt(1000.0 * 800.0))
    expected = Rd * 2.0 / 2.0 * np.log(1000.0 / np.sqrt(8e5))
    assert lay.area_j_kg[0, 0] == pytest.approx(expected, rel=1e-9)


def test_warm_layer_above_250_hpa_ignored():
    # Stratospheric warmth is not a melting layer (common practice in operational
    # post-processing).
    p = np.array([[1000.0, 700.0, 400.0, 260.0, 200.0, 150.0]])
    t = np.array([[-2.0, -10.0, -30.0, -50.0, 5.0, 5.0]])
    z = np.array([[0.0, 3000.0, 7000.0, 10000.0, 11500.0, 13500.0]])
    lay = analyse_layers(p, z, t)
    assert lay.count[0] == 1 and lay.kind[0, 0] == -1


def test_padded_columns_match_single():
    p = np.array([[1000.0, 900.0, 800.0, 700.0], [950.0, 850.0, 700.0, np.nan]])
    t = np.array([[1.0, -1.0, 2.0, -4.0], [-1.0, 3.0, -2.0, np.nan]])
    z = np.array([[0.0, 900.0, 1900.0, 3000.0], [500.0, 1400.0, 2900.0, np.nan]])
    both = analyse_layers(p, z, t)
    for i in range(2):
        one = analyse_layers(p[i:i + 1], z[i:i + 1], t[i:i + 1])
        assert both.count[i] == one.count[0]
        k = one.count[0]
        assert np.allclose(both.area_j_kg[i, :k], one.area_j_kg[0, :k])
        assert np.allclose(both.bottom_hpa[i, :k], one.bottom_hpa[0, :k])


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(-15.0, 10.0), min_size=4, max_size=25))
def test_areas_match_dense_integration(temps):
    # Property: the layer areas equal an independent dense integration, and the warm/cold
    # totals are the positive/negative parts of R_d * integral (T - T0) d ln p.
    n = len(temps)
    p = np.linspace(1000.0, 300.0, n)
    z = np.linspace(0.0, 9000.0, n)
    lay = analyse_layers(p[None], z[None], np.array(temps)[None])
    k = lay.count[0]
    warm = np.nansum(np.where(lay.kind[0, :k] > 0, lay.area_j_kg[0, :k], 0.0))
    cold = np.nansum(np.where(lay.kind[0, :k] < 0, lay.area_j_kg[0, :k], 0.0))
    ref_w, ref_c = dense_area(p, temps)
    assert warm == pytest.approx(ref_w, rel=1e-3, abs=1e-3)
    assert cold == pytest.approx(ref_c, rel=1e-3, abs=1e-3)


def test_cloud_mask_water_and_ice_criteria():
    t = np.array([[5.0, -20.0, -20.0, -20.0]])
    # Saturated over water; RH_w 90 % exactly-ish; at -20 degC a dew point of -21.5 is ~ 100 %
    # over ice.
    td = np.array([[5.0, -21.5, -30.0, -20.0]])
    m = cloud_mask(t, td)
    assert m[0, 0] and m[0, 1] and not m[0, 2] and m[0, 3]


def test_level_runs_describe_cloud_layers():
    p = np.array([[1000.0, 900.0, 800.0, 700.0, 600.0, 500.0]])
    t = np.array([[2.0, -1.0, -4.0, -8.0, -14.0, -20.0]])
    mask = np.array([[True, True, False, False, True, True]])
    z = np.array([[0.0, 900.0, 1900.0, 3000.0, 4200.0, 5500.0]])
    runs = level_runs(mask, p, z, t)
    assert runs.count[0] == 2
    assert runs.top_hpa[0, 0] == 900.0 and runs.bottom_hpa[0, 1] == 600.0
    assert runs.min_temperature_c[0, 1] == -20.0


def test_columns_from_arrays_any_order_and_heights():
    p = np.array([[700.0, 1000.0, 850.0]])
    t = np.array([[-5.0, 10.0, 2.0]])
    c = Columns.from_arrays(p, t, t - 2.0, surface_height_m=100.0)
    assert list(c.pressure_hpa[0]) == [1000.0, 850.0, 700.0]
    assert c.height_m[0, 0] == 100.0 and np.all(np.diff(c.height_m[0]) > 0)
