"""Layer analysis: warm and cold layers with their energies, freezing levels, cloud and dry layers.

Everything here is vectorised over columns: inputs are ``(n, L)`` arrays
ordered surface -> top and NaN-padded (see :mod:`ptype.engine.columns`); outputs are
``(n, K)`` arrays padded with ``kind == 0`` / NaN, layers listed bottom -> top.

Energy (area) of a layer
------------------------
``A = R_d * integral (T - T0) d ln p`` (J/kg), the area between the sounding
and the 0 degC isotherm on an equal-area thermodynamic diagram; this is the
"area" of Bourgouin (2000).  The integral uses the trapezoidal rule in ln p
and 0 degC crossings are interpolated linearly in ln p.  Check value: an
isothermal +3 degC layer from 850 to 800 hPa gives
``287.04 * 3 * ln(850/800) = 52.2 J/kg``.  (Writing ``c_p`` instead of
``R_d`` with ``d ln p`` overstates it by ``c_p/R_d ~ 3.5``.)

Warm layers above 250 hPa are stratospheric warmth, not melting layers: the
analysis stops at :data:`TOP_LIMIT_HPA` (levels above it are ignored; common practice
in operational post-processing of Bourgouin2000).
"""

from __future__ import annotations

import dataclasses

import numpy as np
from numpy.typing import ArrayLike

from ptype.engine.compiled import AVAILABLE as _COMPILED
from ptype.engine.compiled import compiled
from ptype.thermo import relative_humidity_pct, saturation_vapor_pressure_hpa
from ptype.thermo.constants import Rd

#: Levels above this pressure are not analysed for melting/refreezing layers.
TOP_LIMIT_HPA = 250.0

#: A level is "in cloud" when RH over water >= 90 %, or, at or below
#: :data:`ICE_CLOUD_MAX_C`, RH over ice >= 95 % (an ice cloud).  Ours (common practice for
#: observed and model soundings, which rarely reach exactly 100 %).  Air saturated over ice
#: but not over water counts as cloud only where it is cold enough for ice to form: warmer
#: than that it holds neither drops nor crystals.
CLOUD_RH_WATER_PCT = 90.0
CLOUD_RH_ICE_PCT = 95.0
#: Ice-saturated air counts as (ice) cloud at or below this temperature, degC: heterogeneous
#: ice nucleation becomes likely below about -10 degC (common practice; the cloud-top method's
#: ice-nucleation threshold).
ICE_CLOUD_MAX_C = -10.0
#: A level is "dry" (evaporation/sublimation cools falling precipitation) when RH over water < 80 %.
#: Ours (common practice).
DRY_RH_WATER_PCT = 80.0
#: A run of cloudy levels thinner than this is not a cloud layer (a single humid level, or two
#: levels a few tens of metres apart, holds no cloud that can precipitate), m.  Ours.
MIN_CLOUD_DEPTH_M = 100.0


@dataclasses.dataclass(frozen=True, eq=False)
class LayerSet:
    """Layers above (``kind == +1``) and below (``kind == -1``) 0 degC, ``(n, K)`` arrays.

    ``area_j_kg`` is a magnitude (positive for both kinds); ``extreme_c`` is the
    warmest temperature of a warm layer or the coldest of a cold layer.
    """

    kind: np.ndarray
    bottom_hpa: np.ndarray
    top_hpa: np.ndarray
    bottom_m: np.ndarray
    top_m: np.ndarray
    area_j_kg: np.ndarray
    extreme_c: np.ndarray
    count: np.ndarray

    @property
    def depth_m(self) -> np.ndarray:
        """Depth of every layer, m, ``(n, K)``."""
        return self.top_m - self.bottom_m

    def column(self, i: int) -> list[dict]:
        """The layers of column ``i`` as a list of dicts (bottom -> top)."""
        out = []
        for k in range(int(self.count[i])):
            out.append({
                "kind": "warm" if self.kind[i, k] > 0 else "cold",
                "bottom_hpa": round(float(self.bottom_hpa[i, k]), 1),
                "top_hpa": round(float(self.top_hpa[i, k]), 1),
                "bottom_m": round(float(self.bottom_m[i, k]), 0),
                "top_m": round(float(self.top_m[i, k]), 0),
                "depth_m": round(float(self.top_m[i, k] - self.bottom_m[i, k]), 0),
                "area_j_kg": round(float(self.area_j_kg[i, k]), 1),
                "extreme_c": round(float(self.extreme_c[i, k]), 1),
            })
        return out


def layer_area_j_kg(pressure_bottom_hpa: ArrayLike, pressure_top_hpa: ArrayLike,
                    mean_excess_c: ArrayLike) -> np.ndarray:
    """Area of an isothermal layer, J/kg: ``R_d * (T - T0) * ln(p_bottom / p_top)``."""
    return Rd * np.asarray(mean_excess_c) * np.log(np.asarray(pressure_bottom_hpa)
                                                   / np.asarray(pressure_top_hpa))


def analyse_layers(pressure_hpa: np.ndarray, height_m: np.ndarray, value_c: np.ndarray,
                   top_limit_hpa: float = TOP_LIMIT_HPA) -> LayerSet:
    """Split each column into layers above and below 0 degC.

    Parameters
    ----------
    pressure_hpa, height_m, value_c : (n, L)
        Columns ordered surface -> top, NaN-padded; ``value_c`` is the air
        temperature or the wet-bulb temperature.
    top_limit_hpa : float
        Ignore levels at lower pressure than this.
    """
    p = np.asarray(pressure_hpa, dtype=np.float64)
    z = np.asarray(height_m, dtype=np.float64)
    v = np.asarray(value_c, dtype=np.float64)
    if _COMPILED and p.ndim == 2:
        return _analyse_layers_compiled(p, z, v, top_limit_hpa)
    return _analyse_layers_numpy(p, z, v, top_limit_hpa)


def _analyse_layers_numpy(p, z, v, top_limit_hpa) -> LayerSet:
    """numpy path of :func:`analyse_layers`."""
    n, L = p.shape
    valid = np.isfinite(p) & np.isfinite(v) & (p >= top_limit_hpa)
    # Keep only the contiguous valid run from the surface (trailing padding).
    valid = np.cumprod(valid, axis=1).astype(bool)
    nvalid = valid.sum(axis=1)
    warm = v > 0.0
    ln_p = np.log(np.where(valid, p, 1.0))

    # Layer id of each level: number of sign changes below it.
    change = np.zeros((n, L), dtype=bool)
    change[:, 1:] = (warm[:, 1:] != warm[:, :-1]) & valid[:, 1:]
    lid = np.cumsum(change, axis=1)
    count = np.where(nvalid > 0, lid[np.arange(n), np.maximum(nvalid - 1, 0)] + 1, 0)
    K = int(max(count.max(initial=1), 1))

    # Interval quantities (between level j and j+1, both valid).
    iv = valid[:, 1:]
    v1, v2 = v[:, :-1], v[:, 1:]
    dx = np.where(iv, ln_p[:, :-1] - ln_p[:, 1:], 0.0)
    crossing = iv & change[:, 1:]
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = np.where(crossing, v1 / (v1 - v2), 1.0)
    frac = np.clip(np.nan_to_num(frac, nan=1.0), 0.0, 1.0)
    part1 = np.where(crossing, 0.5 * v1 * frac * dx, 0.5 * (v1 + v2) * dx)
    part2 = np.where(crossing, 0.5 * v2 * (1.0 - frac) * dx, 0.0)
    part1 = np.where(iv, part1, 0.0)
    part2 = np.where(iv, part2, 0.0)

    rows = np.broadcast_to(np.arange(n)[:, None], (n, L - 1))
    flat1 = (rows * K + lid[:, :-1]).ravel()
    flat2 = (rows * K + lid[:, 1:]).ravel()
    area = (np.bincount(flat1, weights=part1.ravel(), minlength=n * K)
            + np.bincount(flat2, weights=part2.ravel(), minlength=n * K)).reshape(n, K)
    area = np.abs(Rd * area)

    # Extremes: max |v| per layer over its levels.
    flat_lvl = (np.arange(n)[:, None] * K + lid).ravel()
    mag = np.where(valid, np.abs(v), -1.0).ravel()
    extreme_mag = np.full(n * K, -1.0)
    np.maximum.at(extreme_mag, flat_lvl[valid.ravel()], mag[valid.ravel()])
    extreme_mag = extreme_mag.reshape(n, K)

    kind = np.zeros((n, K), dtype=np.int8)
    k_idx = np.arange(K)[None, :]
    present = k_idx < count[:, None]
    first_warm = warm[:, 0]
    # Kinds alternate from the surface layer's kind.
    parity = (k_idx % 2 == 0)
    kind = np.where(present, np.where(parity == first_warm[:, None], 1, -1), 0).astype(np.int8)
    extreme = np.where(present, np.where(kind > 0, extreme_mag, -extreme_mag), np.nan)
    area = np.where(present, area, np.nan)

    # Bounds: crossings.
    bottom_p = np.full((n, K), np.nan)
    top_p = np.full((n, K), np.nan)
    bottom_z = np.full((n, K), np.nan)
    top_z = np.full((n, K), np.nan)
    bottom_p[:, 0] = np.where(count > 0, p[:, 0], np.nan)
    bottom_z[:, 0] = np.where(count > 0, z[:, 0], np.nan)
    ci, cj = np.nonzero(crossing)
    if ci.size:
        f = frac[ci, cj]
        xc = ln_p[ci, cj] - f * dx[ci, cj]
        pc = np.exp(xc)
        zc = z[ci, cj] + f * (z[ci, cj + 1] - z[ci, cj])
        new_layer = lid[ci, cj + 1]
        bottom_p[ci, new_layer] = pc
        bottom_z[ci, new_layer] = zc
        top_p[ci, new_layer - 1] = pc
        top_z[ci, new_layer - 1] = zc
    last = np.maximum(nvalid - 1, 0)
    rr = np.arange(n)
    top_layer = np.maximum(count - 1, 0)
    top_p[rr, top_layer] = np.where(count > 0, p[rr, last], np.nan)
    top_z[rr, top_layer] = np.where(count > 0, z[rr, last], np.nan)
    return LayerSet(kind=kind, bottom_hpa=bottom_p, top_hpa=top_p, bottom_m=bottom_z, top_m=top_z,
                    area_j_kg=area, extreme_c=extreme, count=count)


def _analyse_layers_compiled(p, z, v, top_limit_hpa) -> LayerSet:
    """:func:`analyse_layers` through the compiled :func:`_layers_loop` (same arithmetic in the
    same order as the numpy path; ``ln p`` and ``exp`` stay in numpy)."""
    n, L = p.shape
    p = np.ascontiguousarray(p)
    z = np.ascontiguousarray(z)
    v = np.ascontiguousarray(v)
    with np.errstate(invalid="ignore", divide="ignore"):
        ln_p = np.log(p)
    # A column has at most one layer more than it has sign changes, counted over all its
    # levels (the loop stops at the first invalid one, so it can only find fewer): sizing the
    # work tables by that bound instead of the level count keeps them small.
    above = v > 0.0
    changes = np.count_nonzero(above[:, 1:] != above[:, :-1], axis=1) if L > 1 else np.zeros(n)
    width = max(min(L, 1 + int(changes.max(initial=0))), 1)
    kind = np.zeros((n, width), dtype=np.int8)
    floats = np.full((8, n, width), np.nan)  # bottom p, top p, bottom z, top z, area, extreme,
    count = np.zeros(n, dtype=np.int64)      # ln p of crossings at bottoms / tops
    _layers_compiled(p, z, v, ln_p, float(top_limit_hpa), kind, floats, count)
    K = int(max(count.max(initial=1), 1))
    bottom_p, top_p, bottom_z, top_z, area, extreme, x_bottom, x_top = (a[:, :K] for a in floats)
    # Crossing pressures: exp of the interpolated ln p, in numpy as on the numpy path.
    bottom_p = np.where(np.isnan(x_bottom), bottom_p, np.exp(x_bottom))
    top_p = np.where(np.isnan(x_top), top_p, np.exp(x_top))
    return LayerSet(kind=kind[:, :K].copy(), bottom_hpa=bottom_p, top_hpa=top_p,
                    bottom_m=bottom_z.copy(), top_m=top_z.copy(), area_j_kg=area.copy(),
                    extreme_c=extreme.copy(), count=count)


def _layers_loop(p, z, v, ln_p, top_limit, kind, out, count):
    """One column at a time, the steps of :func:`_analyse_layers_numpy` (compiled with numba).

    ``out[0..7]`` receive bottom and top pressure, bottom and top height, area, extreme, and
    the ln p of each crossing at a layer bottom and top (the caller takes ``exp``).  Areas are
    accumulated in level order, as ``np.bincount`` does: first the lower parts of every
    interval, then the upper parts, then the two sums are added.
    """
    n, L = p.shape
    area1 = np.zeros(L)
    area2 = np.zeros(L)
    mag = np.empty(L)
    for i in range(n):
        nvalid = 0
        while (nvalid < L and np.isfinite(p[i, nvalid]) and np.isfinite(v[i, nvalid])
               and p[i, nvalid] >= top_limit):
            nvalid += 1
        if nvalid == 0:
            count[i] = 0
            continue
        area1[:] = 0.0
        area2[:] = 0.0
        mag[:] = -1.0
        lid = 0
        first_warm = v[i, 0] > 0.0
        out[0, i, 0] = p[i, 0]
        out[2, i, 0] = z[i, 0]
        a0 = abs(v[i, 0])
        if a0 > mag[0]:  # noqa: PLR1730 - plain branches compile simply in numba
            mag[0] = a0
        for j in range(nvalid - 1):
            v1, v2 = v[i, j], v[i, j + 1]
            dx = ln_p[i, j] - ln_p[i, j + 1]
            crossing = (v2 > 0.0) != (v1 > 0.0)
            new_lid = lid + 1 if crossing else lid
            if crossing:
                frac = v1 / (v1 - v2)
                # np.nan_to_num then np.clip: NaN -> 1, +inf -> 1, -inf -> 0.
                if np.isnan(frac) or frac == np.inf:
                    frac = 1.0
                elif frac == -np.inf:
                    frac = 0.0
                if frac < 0.0:  # noqa: PLR1730
                    frac = 0.0
                if frac > 1.0:  # noqa: PLR1730
                    frac = 1.0
                part1 = 0.5 * v1 * frac * dx
                part2 = 0.5 * v2 * (1.0 - frac) * dx
                xc = ln_p[i, j] - frac * dx
                zc = z[i, j] + frac * (z[i, j + 1] - z[i, j])
                out[6, i, new_lid] = xc
                out[2, i, new_lid] = zc
                out[7, i, lid] = xc
                out[3, i, lid] = zc
            else:
                part1 = 0.5 * (v1 + v2) * dx
                part2 = 0.0
            area1[lid] += part1
            area2[new_lid] += part2
            lid = new_lid
            a = abs(v2)
            if a > mag[lid]:  # noqa: PLR1730
                mag[lid] = a
        c = lid + 1
        count[i] = c
        for k in range(c):
            kk = 1 if ((k % 2 == 0) == first_warm) else -1
            kind[i, k] = kk
            out[4, i, k] = abs(Rd * (area1[k] + area2[k]))
            out[5, i, k] = mag[k] if kk > 0 else -mag[k]
        # The top of the top layer is the last valid level (not a crossing).
        out[1, i, c - 1] = p[i, nvalid - 1]
        out[3, i, c - 1] = z[i, nvalid - 1]
        out[7, i, c - 1] = np.nan


_layers_compiled = compiled(_layers_loop, numpy_errors=True)


def freezing_levels_m(layers: LayerSet) -> np.ndarray:
    """Heights of every 0-crossing, ``(n, K-1)`` (NaN padded): the bottoms of layers 1..K-1."""
    return layers.bottom_m[:, 1:]


def zero_height_m(layers: LayerSet) -> np.ndarray:
    """Height of the highest 0 degC crossing below the analysis top (the freezing level, or the
    wet-bulb-zero height when given wet-bulb layers); the surface height when the whole column
    is below 0; NaN when the whole analysed column is above 0."""
    n, _ = layers.kind.shape
    rows = np.arange(n)
    top = np.maximum(layers.count - 1, 0)
    top_kind = layers.kind[rows, top]
    # Highest cold layer starting above the surface: its bottom is the highest crossing.
    height = np.where(top_kind < 0, layers.bottom_m[rows, top], np.nan)
    # Whole column cold: freezing level at (or below) the surface.
    height = np.where((layers.count == 1) & (top_kind < 0), layers.bottom_m[:, 0], height)
    return height


def level_index_runs(mask: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Contiguous True runs per row: returns (start, end, count) with (n, R) int arrays of
    inclusive level indices, padded with -1."""
    n, L = mask.shape
    padded = np.zeros((n, L + 2), dtype=np.int8)
    padded[:, 1:-1] = mask
    d = np.diff(padded, axis=1)
    si, sj = np.nonzero(d == 1)
    ei, ej = np.nonzero(d == -1)
    count = np.bincount(si, minlength=n)
    R = int(max(count.max(initial=0), 1))
    start = np.full((n, R), -1)
    end = np.full((n, R), -1)
    offsets = np.concatenate([[0], np.cumsum(count)[:-1]])
    rank = np.arange(si.size) - offsets[si]
    start[si, rank] = sj
    end[ei, rank] = ej - 1
    return start, end, count


@dataclasses.dataclass(frozen=True, eq=False)
class CloudLayers:
    """Cloud (or dry) layers as level-index runs, ``(n, R)`` padded with -1 / NaN."""

    bottom_hpa: np.ndarray
    top_hpa: np.ndarray
    bottom_m: np.ndarray
    top_m: np.ndarray
    top_temperature_c: np.ndarray
    min_temperature_c: np.ndarray
    count: np.ndarray
    bottom_index: np.ndarray
    top_index: np.ndarray

    def column(self, i: int) -> list[dict]:
        """The cloud (or dry) layers of column ``i`` as a list of dicts (bottom -> top)."""
        out = []
        for k in range(int(self.count[i])):
            out.append({"bottom_hpa": round(float(self.bottom_hpa[i, k]), 1),
                        "top_hpa": round(float(self.top_hpa[i, k]), 1),
                        "bottom_m": round(float(self.bottom_m[i, k]), 0),
                        "top_m": round(float(self.top_m[i, k]), 0),
                        "top_temperature_c": round(float(self.top_temperature_c[i, k]), 1),
                        "min_temperature_c": round(float(self.min_temperature_c[i, k]), 1)})
        return out


def liquid_cloud_mask(relative_humidity_pct_: np.ndarray) -> np.ndarray:
    """``(n, L)`` True where a level is saturated enough over water to hold cloud drops
    (RH over water >= :data:`CLOUD_RH_WATER_PCT`)."""
    with np.errstate(invalid="ignore"):
        return np.isfinite(relative_humidity_pct_) & (relative_humidity_pct_ >= CLOUD_RH_WATER_PCT)


def cloud_mask(temperature_c: np.ndarray, dewpoint_c: np.ndarray,
               relative_humidity_pct_: np.ndarray | None = None) -> np.ndarray:
    """``(n, L)`` True where a level counts as cloud (see :data:`CLOUD_RH_WATER_PCT`).

    ``relative_humidity_pct_`` may pass the RH over water already computed from the same
    temperature and dew point (``Columns.relative_humidity_pct``)."""
    rh_w = (relative_humidity_pct(temperature_c, dewpoint_c) if relative_humidity_pct_ is None
            else relative_humidity_pct_)
    with np.errstate(invalid="ignore"):
        rh_i = 100.0 * saturation_vapor_pressure_hpa(dewpoint_c, "water") / \
            saturation_vapor_pressure_hpa(temperature_c, "ice")
        return np.isfinite(rh_w) & ((rh_w >= CLOUD_RH_WATER_PCT)
                                    | ((temperature_c <= ICE_CLOUD_MAX_C)
                                       & (rh_i >= CLOUD_RH_ICE_PCT)))


def dry_mask(temperature_c: np.ndarray, dewpoint_c: np.ndarray,
             relative_humidity_pct_: np.ndarray | None = None) -> np.ndarray:
    """``(n, L)`` True where a level is dry (RH over water below :data:`DRY_RH_WATER_PCT`);
    ``relative_humidity_pct_`` as in :func:`cloud_mask`."""
    rh_w = (relative_humidity_pct(temperature_c, dewpoint_c) if relative_humidity_pct_ is None
            else relative_humidity_pct_)
    with np.errstate(invalid="ignore"):
        return np.isfinite(rh_w) & (rh_w < DRY_RH_WATER_PCT)


def level_runs(mask: np.ndarray, pressure_hpa: np.ndarray, height_m: np.ndarray,
               temperature_c: np.ndarray) -> CloudLayers:
    """Describe the True runs of ``mask`` (cloud or dry layers) by their bounds and temperatures."""
    start, end, count = level_index_runs(mask)
    n, R = start.shape
    rows = np.arange(n)[:, None]
    s = np.maximum(start, 0)
    e = np.maximum(end, 0)
    present = start >= 0
    # Minimum temperature within each run: one reduceat over the flattened rows, with the
    # segments [start, end] of every run (an inf sentinel closes a run ending the last row).
    L = mask.shape[1]
    t = np.append(np.where(mask, temperature_c, np.inf).ravel(), np.inf)
    ri, rk = np.nonzero(present)
    tmin = np.full((n, R), np.inf)
    if ri.size:
        bounds = np.empty(2 * ri.size, dtype=np.intp)
        bounds[0::2] = ri * L + s[ri, rk]
        bounds[1::2] = ri * L + e[ri, rk] + 1
        tmin[ri, rk] = np.minimum.reduceat(t, bounds)[0::2]

    def pick(a, k):
        return np.where(present, a[rows, k], np.nan)

    return CloudLayers(bottom_hpa=pick(pressure_hpa, s), top_hpa=pick(pressure_hpa, e),
                       bottom_m=pick(height_m, s), top_m=pick(height_m, e),
                       top_temperature_c=pick(temperature_c, e),
                       min_temperature_c=np.where(present, tmin, np.nan), count=count,
                       bottom_index=start, top_index=end)


def cumulative_dry_depth_m(height_m: np.ndarray, dry: np.ndarray) -> np.ndarray:
    """``(n, L)`` depth of dry air between the lowest level and each level, m.

    An interval between two levels counts as dry when both of its ends are dry.
    """
    dz = np.nan_to_num(np.diff(height_m, axis=1), nan=0.0)
    both = dry[:, 1:] & dry[:, :-1]
    out = np.zeros(height_m.shape)
    out[:, 1:] = np.cumsum(np.where(both, dz, 0.0), axis=1)
    return out


def without_thin_runs(runs: CloudLayers, min_depth_m: float = MIN_CLOUD_DEPTH_M) -> CloudLayers:
    """``runs`` without the runs thinner than ``min_depth_m`` (top minus bottom height); the
    others keep their order, packed to the left."""
    present = np.arange(runs.top_m.shape[1])[None, :] < runs.count[:, None]
    with np.errstate(invalid="ignore"):
        keep = present & ((runs.top_m - runs.bottom_m) >= min_depth_m)
    if (keep == present).all():
        return runs
    n = keep.shape[0]
    count = keep.sum(axis=1)
    R_new = max(int(count.max(initial=0)), 1)
    ri, rk = np.nonzero(keep)
    slot = np.cumsum(keep, axis=1)[ri, rk] - 1

    def packed(a, fill):
        out = np.full((n, R_new), fill, dtype=a.dtype)
        out[ri, slot] = a[ri, rk]
        return out

    return CloudLayers(bottom_hpa=packed(runs.bottom_hpa, np.nan),
                       top_hpa=packed(runs.top_hpa, np.nan),
                       bottom_m=packed(runs.bottom_m, np.nan), top_m=packed(runs.top_m, np.nan),
                       top_temperature_c=packed(runs.top_temperature_c, np.nan),
                       min_temperature_c=packed(runs.min_temperature_c, np.nan), count=count,
                       bottom_index=packed(runs.bottom_index, -1),
                       top_index=packed(runs.top_index, -1))


def deepest_run_within_m(mask: np.ndarray, height_m: np.ndarray, bottom_m: np.ndarray,
                         top_m: np.ndarray) -> np.ndarray:
    """Depth of the deepest run of True levels of ``mask`` lying between ``bottom_m`` and
    ``top_m`` (``(n,)`` each), m; 0 where there is none."""
    inside = mask & (height_m >= bottom_m[:, None] - 1e-6) & (height_m <= top_m[:, None] + 1e-6)
    start, end, _ = level_index_runs(inside)
    rows = np.arange(height_m.shape[0])[:, None]
    present = start >= 0
    depth = np.where(present, height_m[rows, np.maximum(end, 0)]
                     - height_m[rows, np.maximum(start, 0)], 0.0)
    return np.nan_to_num(depth, nan=0.0).max(axis=1, initial=0.0)
