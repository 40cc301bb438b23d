"""Invented soundings for the particle-model tests: columns built on a height grid with a stated
temperature shape, pressures from the hypsometric equation (Wallace & Hobbs 2006, eq. 3.29)."""

from __future__ import annotations

import numpy as np

from ptype import thermo
from ptype.engine.columns import Columns
from ptype.engine.layers import analyse_layers
from ptype.thermo.constants import T0, Rd, g

#: Height grid of the test columns, m (50 m levels up to 8 km).
HEIGHTS_M = np.arange(0.0, 8001.0, 50.0)


def pressures_hpa(height_m, temperature_c, surface_hpa=1000.0):
    """Hypsometric pressures for a temperature profile (trapezoidal layer-mean temperature)."""
    tk = np.asarray(temperature_c, dtype=float) + T0
    z = np.asarray(height_m, dtype=float)
    steps = g / (Rd * 0.5 * (tk[..., 1:] + tk[..., :-1])) * np.diff(z)
    zeros = np.zeros(tk.shape[:-1] + (1,))
    return surface_hpa * np.exp(-np.concatenate([zeros, np.cumsum(steps, axis=-1)], axis=-1))


def columns(temperatures_c, *, relative_humidity_pct=100.0, saturated_above_m=None,
            height_m=HEIGHTS_M, **extra) -> Columns:
    """Columns for ``(n, L)`` temperatures on ``height_m``; dew points from the relative humidity
    (over water), saturated above ``saturated_above_m`` (the cloud the snow falls from)."""
    t = np.atleast_2d(np.asarray(temperatures_c, dtype=float))
    z = np.broadcast_to(height_m, t.shape)
    rh = np.broadcast_to(np.asarray(relative_humidity_pct, dtype=float), t.shape)
    td = thermo.dewpoint_from_relative_humidity_c(t, rh)
    if saturated_above_m is not None:
        td = np.where(z > saturated_above_m, t, td)
    return Columns.from_arrays(pressures_hpa(z, t), t, td, np.array(z), **extra)


def surface_warm_layer(depth_m, lapse_k_m=6.5e-3, height_m=HEIGHTS_M):
    """A surface-based warm layer: 0 degC at ``depth_m``, the lapse rate throughout."""
    return (depth_m - height_m) * lapse_k_m


def warm_nose(cold_depth_m, surface_c, peak_c, warm_depth_m, height_m=HEIGHTS_M, top_m=8000.0):
    """A cold surface layer (``surface_c`` rising linearly to 0 degC at ``cold_depth_m``) under a
    triangular warm nose (``peak_c`` midway through ``warm_depth_m``), then 6.5 K/km above."""
    zt = cold_depth_m + warm_depth_m
    return np.interp(height_m, [0.0, cold_depth_m, cold_depth_m + warm_depth_m / 2, zt, top_m],
                     [surface_c, 0.0, peak_c, 0.0, -6.5e-3 * (top_m - zt)])


def air_areas_j_kg(cols: Columns):
    """Areas of the lowest and second air-temperature layers (ptype.engine.layers), J/kg."""
    lay = analyse_layers(cols.pressure_hpa, cols.height_m, cols.temperature_c)
    second = lay.area_j_kg[:, 1] if lay.area_j_kg.shape[1] > 1 else np.full(cols.n_columns, np.nan)
    return lay.area_j_kg[:, 0], second, lay.kind[:, 0]
