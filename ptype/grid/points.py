"""Model columns at points (road sites): bilinear interpolation on the model grid.

:func:`point_weights` finds, for every point, the grid cell that holds it and the bilinear
weights of its four corners; :func:`extract` applies them to any array whose last two axes
are the grid's ``(ny, nx)``.

* Regular latitude/longitude grids (1-D ``latitude`` and ``longitude``): fractional indices
  by linear interpolation of the coordinates, then the usual bilinear weights
  ``(1-s)(1-t), s(1-t), (1-s)t, st`` (e.g. Press et al. 2007, sec. 3.6.1).
* Other grids (2-D latitude and longitude, e.g. Lambert conformal): the nearest grid point
  is found (a coarse search, then a local one), and the cell around it that contains the
  point is inverted for ``(s, t)`` with Newton's method on the bilinear map in a local
  plane (east and north distances), the standard inverse of a bilinear quadrilateral.

Edges and coasts (stated method): a point outside the grid, or more than half a cell
beyond its edge, gets no column (it is reported, not guessed).  Where some of the four
corners are missing (NaN: a level below the model ground, or a masked value) the weights
of the valid corners are renormalised to sum to one; a point with no valid corner is NaN.
No land-sea mask is used: near a coast the column is the bilinear mix of the land and sea
points around the site, and the elevation adjustment (:mod:`ptype.ingest.pipeline`) corrects
its height.
"""

from __future__ import annotations

import dataclasses

import numpy as np
from numpy.typing import ArrayLike

#: Newton iterations of the inverse bilinear map (quadratic convergence: 8 is ample).
NEWTON_STEPS = 8
#: Stride of the coarse nearest-point search on 2-D grids.
COARSE_STRIDE = 8


@dataclasses.dataclass(frozen=True)
class PointWeights:
    """Flat corner indices ``(n, 4)`` into the ``ny * nx`` grid, their weights ``(n, 4)``,
    and which points are on the grid ``(n,)``."""

    index: np.ndarray
    weight: np.ndarray
    inside: np.ndarray
    shape: tuple[int, int]


def _fractional(coord: np.ndarray, values: np.ndarray) -> np.ndarray:
    """Fractional index of ``values`` along a monotonic 1-D coordinate; NaN beyond half a
    cell outside it."""
    idx = np.arange(coord.size, dtype=np.float64)
    order = np.argsort(coord)
    c, i = coord[order], idx[order]
    f = np.interp(values, c, i)
    half = 0.5 * abs(float(c[-1] - c[0])) / max(coord.size - 1, 1)
    outside = (values < c[0] - half) | (values > c[-1] + half)
    return np.where(outside, np.nan, np.clip(f, 0.0, coord.size - 1.0))


def _weights_from_fraction(fy: np.ndarray, fx: np.ndarray, ny: int, nx: int) -> PointWeights:
    inside = np.isfinite(fy) & np.isfinite(fx)
    fy, fx = np.where(inside, fy, 0.0), np.where(inside, fx, 0.0)
    j0 = np.clip(np.floor(fy).astype(np.int64), 0, max(ny - 2, 0))
    i0 = np.clip(np.floor(fx).astype(np.int64), 0, max(nx - 2, 0))
    t, s = fy - j0, fx - i0
    j1, i1 = np.minimum(j0 + 1, ny - 1), np.minimum(i0 + 1, nx - 1)
    index = np.stack([j0 * nx + i0, j0 * nx + i1, j1 * nx + i0, j1 * nx + i1], axis=1)
    weight = np.stack([(1 - s) * (1 - t), s * (1 - t), (1 - s) * t, s * t], axis=1)
    return PointWeights(index, np.where(inside[:, None], weight, 0.0), inside, (ny, nx))


def _wrap(lon: np.ndarray) -> np.ndarray:
    return (np.asarray(lon, dtype=np.float64) + 180.0) % 360.0 - 180.0


def regular_weights(latitude: ArrayLike, longitude: ArrayLike, point_lat: ArrayLike,
                    point_lon: ArrayLike) -> PointWeights:
    """Bilinear weights on a regular latitude/longitude grid (1-D coordinates, degrees)."""
    lat = np.asarray(latitude, dtype=np.float64)
    lon = _wrap(longitude)
    plon = _wrap(point_lon)
    if lon.size > 1 and np.any(np.diff(lon) < 0) and np.all(np.diff(np.asarray(
            longitude, dtype=np.float64)) > 0):
        # The grid crosses the date line in -180..180: measure from its first longitude.
        lon = (np.asarray(longitude, dtype=np.float64) - lon[0]) % 360.0 + lon[0]
        plon = (plon - lon[0]) % 360.0 + lon[0]
    fy = _fractional(lat, np.asarray(point_lat, dtype=np.float64))
    fx = _fractional(lon, plon)
    return _weights_from_fraction(fy, fx, lat.size, lon.size)


def _local_xy(lat: np.ndarray, lon: np.ndarray, lat0: np.ndarray, lon0: np.ndarray):
    """East and north distances in degrees of latitude (an equirectangular local plane)."""
    return _wrap(lon - lon0) * np.cos(np.radians(lat0)), lat - lat0


def _nearest(lat2: np.ndarray, lon2: np.ndarray, plat: np.ndarray, plon: np.ndarray):
    """Index ``(j, i)`` of the nearest grid point to every point (coarse, then local)."""
    ny, nx = lat2.shape
    step = max(1, min(COARSE_STRIDE, ny // 4 or 1, nx // 4 or 1))
    cl, co = lat2[::step, ::step], lon2[::step, ::step]
    out_j, out_i = np.empty(plat.size, np.int64), np.empty(plat.size, np.int64)
    for k in range(plat.size):
        x, y = _local_xy(cl, co, plat[k], plon[k])
        jc, ic = np.unravel_index(np.argmin(x * x + y * y), cl.shape)
        j0, i0 = max(jc * step - 2 * step, 0), max(ic * step - 2 * step, 0)
        win_lat = lat2[j0:jc * step + 2 * step + 1, i0:ic * step + 2 * step + 1]
        win_lon = lon2[j0:jc * step + 2 * step + 1, i0:ic * step + 2 * step + 1]
        x, y = _local_xy(win_lat, win_lon, plat[k], plon[k])
        jw, iw = np.unravel_index(np.argmin(x * x + y * y), win_lat.shape)
        out_j[k], out_i[k] = j0 + jw, i0 + iw
    return out_j, out_i


def _invert_cell(lat2, lon2, j0, i0, plat, plon):
    """``(s, t)`` of the points in the cells with lower-left corners ``(j0, i0)``."""
    corners = [(j0, i0), (j0, i0 + 1), (j0 + 1, i0), (j0 + 1, i0 + 1)]
    xs, ys = zip(*[_local_xy(lat2[j, i], lon2[j, i], plat, plon) for j, i in corners])
    x00, x10, x01, x11 = xs
    y00, y10, y01, y11 = ys
    s = np.full(plat.shape, 0.5)
    t = np.full(plat.shape, 0.5)
    for _ in range(NEWTON_STEPS):
        fx = (1 - s) * (1 - t) * x00 + s * (1 - t) * x10 + (1 - s) * t * x01 + s * t * x11
        fy = (1 - s) * (1 - t) * y00 + s * (1 - t) * y10 + (1 - s) * t * y01 + s * t * y11
        dxs = (1 - t) * (x10 - x00) + t * (x11 - x01)
        dxt = (1 - s) * (x01 - x00) + s * (x11 - x10)
        dys = (1 - t) * (y10 - y00) + t * (y11 - y01)
        dyt = (1 - s) * (y01 - y00) + s * (y11 - y10)
        det = dxs * dyt - dxt * dys
        det = np.where(np.abs(det) < 1e-15, 1e-15, det)
        s = s - (fx * dyt - fy * dxt) / det
        t = t - (fy * dxs - fx * dys) / det
    return s, t


def curvilinear_weights(latitude: ArrayLike, longitude: ArrayLike, point_lat: ArrayLike,
                        point_lon: ArrayLike) -> PointWeights:
    """Bilinear weights on a grid with 2-D latitude and longitude (any projection)."""
    lat2 = np.asarray(latitude, dtype=np.float64)
    lon2 = _wrap(longitude)
    plat, plon = np.asarray(point_lat, np.float64), _wrap(point_lon)
    ny, nx = lat2.shape
    jn, in_ = _nearest(lat2, lon2, plat, plon)
    best_s = np.full(plat.shape, np.nan)
    best_t, best_j, best_i = best_s.copy(), np.zeros(plat.shape, np.int64), \
        np.zeros(plat.shape, np.int64)
    for dj in (-1, 0):
        for di in (-1, 0):
            j0 = np.clip(jn + dj, 0, ny - 2)
            i0 = np.clip(in_ + di, 0, nx - 2)
            s, t = _invert_cell(lat2, lon2, j0, i0, plat, plon)
            ok = (s >= -1e-9) & (s <= 1 + 1e-9) & (t >= -1e-9) & (t <= 1 + 1e-9) \
                & ~np.isfinite(best_s)
            best_s, best_t = np.where(ok, s, best_s), np.where(ok, t, best_t)
            best_j, best_i = np.where(ok, j0, best_j), np.where(ok, i0, best_i)
    fy, fx = best_j + best_t, best_i + best_s
    return _weights_from_fraction(fy, fx, ny, nx)


def point_weights(latitude: ArrayLike, longitude: ArrayLike, point_lat: ArrayLike,
                  point_lon: ArrayLike) -> PointWeights:
    """Bilinear weights of the points on a regular (1-D coordinates) or curvilinear (2-D)
    grid; see the module notes."""
    if np.ndim(latitude) == 1:
        return regular_weights(latitude, longitude, point_lat, point_lon)
    return curvilinear_weights(latitude, longitude, point_lat, point_lon)


def extract(values: ArrayLike, w: PointWeights) -> np.ndarray:
    """The points' values of an array whose last two axes are the grid: ``(..., n)``;
    missing corners are left out and the other weights renormalised."""
    a = np.asarray(values)
    flat = a.reshape(a.shape[:-2] + (w.shape[0] * w.shape[1],))
    corners = flat[..., w.index]                      # (..., n, 4)
    valid = np.isfinite(corners) & (w.weight > 0)
    weight = np.where(valid, w.weight, 0.0)
    total = weight.sum(axis=-1)
    summed = np.where(valid, corners, 0.0) * weight
    with np.errstate(invalid="ignore", divide="ignore"):
        out = summed.sum(axis=-1) / total
    # A corner with weight 0 exactly on the point still counts when it is the only one.
    return np.where((total > 0) & w.inside, out, np.nan)
