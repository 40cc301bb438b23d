"""Where the particles leave the cloud: the generating level.

Cloud layers are those of :func:`ptype.engine.layers.cloud_mask` (RH over water >= 90 %, or over
ice >= 95 % below 0 degC).  Starting from the lowest cloud layer, the layers above it belong to
the same *precipitating chain* while the gap between one layer and the next holds at most
:data:`ptype.engine.methods.cloud_top.SEEDING_GAP_M` of dry air (crystals falling through more
dry air than that are taken to sublimate before they reach the lower cloud: the seeding rule of
the cloud-top method, ours).  A layer makes ice when its coldest temperature is at or below
:data:`ptype.engine.methods.cloud_top.ICE_NUCLEATION_C` (-10 degC, NWS forecasting guidance).

* The particles start as **snow** at the top of the highest ice-making layer of the chain: that
  is where ice crystals grow and begin to fall (the snow size distribution is prescribed there;
  growth below it by deposition, riming and aggregation is not modelled).
* A chain without an ice-making layer produces **drizzle**: supercooled drops leave the top of
  its highest layer.
* A column without cloud has no generating level (NaN).
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ptype.engine.layers import CloudLayers, cumulative_dry_depth_m
from ptype.engine.methods.cloud_top import ICE_NUCLEATION_C, SEEDING_GAP_M


@dataclasses.dataclass(frozen=True, eq=False)
class GeneratingLevel:
    """Per column ``(n,)``: ``height_m`` and ``pressure_hpa`` of the start (NaN without cloud),
    ``liquid`` (True: drizzle from a cloud that makes no ice), ``cloud_min_c`` (coldest
    temperature of the layer the particles leave) and ``chain_layers`` (cloud layers in the
    precipitating chain, 0 without cloud)."""

    height_m: np.ndarray
    pressure_hpa: np.ndarray
    liquid: np.ndarray
    cloud_min_c: np.ndarray
    chain_layers: np.ndarray


def generating_level(clouds: CloudLayers, height_m, dry_mask) -> GeneratingLevel:
    """The generating level of every column (see the module docstring).

    Parameters
    ----------
    clouds : CloudLayers
        Cloud layers, bottom -> top (:func:`ptype.engine.layers.level_runs` of the cloud mask).
    height_m : (n, L) array_like
        Level heights, m.
    dry_mask : (n, L) array_like of bool
        Dry levels (:func:`ptype.engine.layers.dry_mask`).
    """
    n, R = clouds.top_m.shape
    cum_dry = cumulative_dry_depth_m(np.asarray(height_m, dtype=np.float64), dry_mask)
    rows = np.arange(n)
    count = clouds.count
    linked = count > 0
    chain = np.where(linked, 1, 0)
    ice_layer = np.full(n, -1)
    ice_layer = np.where(linked & (clouds.min_temperature_c[:, 0] <= ICE_NUCLEATION_C), 0,
                         ice_layer)
    for r in range(1, R):
        present = r < count
        gap = (cum_dry[rows, np.maximum(clouds.bottom_index[:, r], 0)]
               - cum_dry[rows, np.maximum(clouds.top_index[:, r - 1], 0)])
        linked = linked & present & (gap <= SEEDING_GAP_M)
        chain = np.where(linked, r + 1, chain)
        ice_layer = np.where(linked & (clouds.min_temperature_c[:, r] <= ICE_NUCLEATION_C), r,
                             ice_layer)
    has = count > 0
    liquid = has & (ice_layer < 0)
    layer = np.where(ice_layer >= 0, ice_layer, np.maximum(chain - 1, 0))
    return GeneratingLevel(
        height_m=np.where(has, clouds.top_m[rows, layer], np.nan),
        pressure_hpa=np.where(has, clouds.top_hpa[rows, layer], np.nan),
        liquid=liquid,
        cloud_min_c=np.where(has, clouds.min_temperature_c[rows, layer], np.nan),
        chain_layers=chain,
    )
