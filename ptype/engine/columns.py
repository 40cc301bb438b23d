"""Columns: many profiles as padded 2-D arrays, the shape every kernel works on.

Arrays are ``(n_columns, n_levels)``; each row is ordered surface -> top
(decreasing pressure) and padded with NaN after its last valid level, so that
ragged soundings, model columns with levels below ground and Monte-Carlo
members all go through the same vectorised code.  Per-column surface values
are ``(n_columns,)`` arrays, NaN where unknown.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence

import numpy as np
from numpy.typing import ArrayLike

from ptype import thermo
from ptype.engine.compiled import AVAILABLE as _COMPILED
from ptype.engine.compiled import compiled


@dataclasses.dataclass(frozen=True, eq=False)
class Columns:
    """A batch of profiles as NaN-padded arrays, rows ordered surface -> top.

    Arrays are ``(n, L)`` unless noted.

    Attributes
    ----------
    pressure_hpa, height_m, temperature_c, dewpoint_c
    relative_humidity_pct : over water
    wetbulb_c : isobaric (psychrometric) wet-bulb
    wetbulb_adiabatic_c : pseudo-adiabatic wet-bulb (Normand's rule)
    n_levels : ``(n,)`` number of valid levels per row
    surface_temperature_c, surface_dewpoint_c, surface_wetbulb_c, surface_relative_humidity_pct,
    surface_pressure_hpa, surface_height_m : ``(n,)`` the screen-level values when given, else
        those of the lowest level
    road_surface_temperature_c, precipitation_rate_mm_h, wind_speed_m_s : ``(n,)``, NaN if unknown
    """

    pressure_hpa: np.ndarray
    height_m: np.ndarray
    temperature_c: np.ndarray
    dewpoint_c: np.ndarray
    relative_humidity_pct: np.ndarray
    wetbulb_c: np.ndarray
    wetbulb_adiabatic_c: np.ndarray
    n_levels: np.ndarray
    surface_temperature_c: np.ndarray
    surface_dewpoint_c: np.ndarray
    surface_wetbulb_c: np.ndarray
    surface_relative_humidity_pct: np.ndarray
    surface_pressure_hpa: np.ndarray
    surface_height_m: np.ndarray
    road_surface_temperature_c: np.ndarray
    precipitation_rate_mm_h: np.ndarray
    wind_speed_m_s: np.ndarray

    @property
    def n_columns(self) -> int:
        """Number of columns (rows)."""
        return int(self.pressure_hpa.shape[0])

    @property
    def valid(self) -> np.ndarray:
        """``(n, L)`` mask of valid levels."""
        return np.isfinite(self.pressure_hpa)

    # -- construction ------------------------------------------------------------------
    @classmethod
    def from_arrays(cls, pressure_hpa: ArrayLike, temperature_c: ArrayLike, dewpoint_c: ArrayLike,
                    height_m: ArrayLike | None = None, *, surface_height_m: ArrayLike | None = None,
                    surface_temperature_c: ArrayLike | None = None,
                    surface_dewpoint_c: ArrayLike | None = None,
                    road_surface_temperature_c: ArrayLike | None = None,
                    precipitation_rate_mm_h: ArrayLike | None = None,
                    wind_speed_m_s: ArrayLike | None = None, sort: bool = True) -> Columns:
        """Build from ``(n, L)`` arrays in any level order; NaN marks a missing level.

        A level is dropped (moved to the padding) when its pressure, temperature or
        dew point is not finite.  Heights, when not given (or NaN), are computed
        hypsometrically from ``surface_height_m`` (default 0 m) at the lowest valid level.
        """
        p = np.atleast_2d(np.asarray(pressure_hpa, dtype=np.float64))
        t = np.atleast_2d(np.asarray(temperature_c, dtype=np.float64))
        td = np.atleast_2d(np.asarray(dewpoint_c, dtype=np.float64))
        p, t, td = np.broadcast_arrays(p, t, td)
        z = (np.full(p.shape, np.nan) if height_m is None
             else np.broadcast_to(np.atleast_2d(np.asarray(height_m, dtype=np.float64)), p.shape))
        n = p.shape[0]
        if sort and _COMPILED:
            p, t, td, z, ok = _order_levels(p, t, td, z)
        else:
            p, t, td, z, ok = _order_levels_numpy(p, t, td, z, sort)
        base = _per_column(surface_height_m, n, 0.0)
        base = np.where(np.isfinite(base), base, 0.0)
        missing_z = ok & ~np.isfinite(z)
        if missing_z.any():
            zc = thermo.hypsometric_heights_m(p, t, td, base)
            # Where some heights are given, shift the computed ones onto the lowest given height.
            have = ok & np.isfinite(z)
            first = np.argmax(have, axis=1)
            rows = np.arange(n)
            shift = np.where(have.any(axis=1), z[rows, first] - zc[rows, first], 0.0)
            z = np.where(missing_z, zc + shift[:, None], z)
        return cls._complete(p, z, t, td, ok.sum(axis=1), surface_temperature_c, surface_dewpoint_c,
                             road_surface_temperature_c, precipitation_rate_mm_h, wind_speed_m_s)

    @classmethod
    def from_profiles(cls, profiles: Sequence) -> Columns:
        """Stack validated :class:`~ptype.profile.Profile` objects into padded columns."""
        n = len(profiles)
        width = max(pr.n_levels for pr in profiles)
        arrays = {k: np.full((n, width), np.nan) for k in ("p", "z", "t", "td")}
        sfc = {k: np.full(n, np.nan) for k in ("t", "td", "road", "rate", "wind")}
        for i, pr in enumerate(profiles):
            k = pr.n_levels
            arrays["p"][i, :k] = pr.pressure_hpa
            arrays["z"][i, :k] = pr.height_m
            arrays["t"][i, :k] = pr.temperature_c
            arrays["td"][i, :k] = pr.dewpoint_c
            s = pr.surface
            if s is not None:
                for key, attr in (("t", "temperature_2m_c"), ("td", "dewpoint_2m_c"),
                                  ("road", "road_surface_temperature_c"),
                                  ("rate", "precipitation_rate_mm_h"), ("wind", "wind_speed_m_s")):
                    value = getattr(s, attr)
                    if value is not None:
                        sfc[key][i] = value
        count = np.array([pr.n_levels for pr in profiles])
        return cls._complete(arrays["p"], arrays["z"], arrays["t"], arrays["td"], count,
                             sfc["t"], sfc["td"], sfc["road"], sfc["rate"], sfc["wind"])

    @classmethod
    def _complete(cls, p, z, t, td, count, sfc_t, sfc_td, road, rate, wind) -> Columns:
        n = p.shape[0]
        rh = thermo.relative_humidity_pct(t, td)
        tw, twa = thermo.wet_bulb_temperatures(p, t, td)
        sfc_t = _per_column(sfc_t, n)
        sfc_td = _per_column(sfc_td, n)
        st = np.where(np.isfinite(sfc_t), sfc_t, t[:, 0])
        # A screen dew point only makes sense with a screen temperature.
        std = np.where(np.isfinite(sfc_t) & np.isfinite(sfc_td), np.minimum(sfc_td, st),
                       np.minimum(td[:, 0], st))
        sp = p[:, 0]
        return cls(
            pressure_hpa=p, height_m=z, temperature_c=t, dewpoint_c=td,
            relative_humidity_pct=rh, wetbulb_c=tw, wetbulb_adiabatic_c=twa,
            n_levels=np.asarray(count, dtype=np.int64),
            surface_temperature_c=st, surface_dewpoint_c=std,
            surface_wetbulb_c=thermo.wet_bulb_temperature(sp, st, std),
            surface_relative_humidity_pct=thermo.relative_humidity_pct(st, std),
            surface_pressure_hpa=sp, surface_height_m=z[:, 0],
            road_surface_temperature_c=_per_column(road, n),
            precipitation_rate_mm_h=_per_column(rate, n),
            wind_speed_m_s=_per_column(wind, n),
        )

    def with_profile(self, temperature_c: np.ndarray, dewpoint_c: np.ndarray) -> Columns:
        """New columns with the same pressures, heights and surface extras but new T and Td
        (used by the Monte-Carlo members).  Surface T/Td shift with the lowest level."""
        t = np.where(self.valid, temperature_c, np.nan)
        td = np.where(self.valid, np.minimum(dewpoint_c, t), np.nan)
        dt0 = t[:, 0] - self.temperature_c[:, 0]
        dtd0 = td[:, 0] - self.dewpoint_c[:, 0]
        sfc_t = self.surface_temperature_c + dt0
        sfc_td = np.minimum(self.surface_dewpoint_c + dtd0, sfc_t)
        return Columns._complete(self.pressure_hpa, self.height_m, t, td, self.n_levels, sfc_t,
                                 sfc_td, self.road_surface_temperature_c,
                                 self.precipitation_rate_mm_h, self.wind_speed_m_s)

    @staticmethod
    def concat(parts: Sequence[Columns]) -> Columns:
        """Stack several batches of columns (NaN-padding the level axis to the widest)."""
        width = max(part.pressure_hpa.shape[1] for part in parts)
        fields = {}
        for f in dataclasses.fields(Columns):
            arrays = []
            for part in parts:
                a = getattr(part, f.name)
                if a.ndim == 2 and a.shape[1] < width:
                    pad = np.full((a.shape[0], width - a.shape[1]), np.nan)
                    a = np.concatenate([a, pad], axis=1)
                arrays.append(a)
            fields[f.name] = np.concatenate(arrays, axis=0)
        return Columns(**fields)

    def take(self, index: np.ndarray | slice | Sequence[int]) -> Columns:
        """Subset of columns (rows) by integer index or boolean mask."""
        return Columns(**{f.name: getattr(self, f.name)[index] for f in dataclasses.fields(self)})


def _order_levels_numpy(p, t, td, z, sort: bool):
    """Valid levels (finite p, T, Td; p > 0) first, by decreasing pressure (a stable sort, so
    equal pressures keep their order), NaN after; Td capped at T.  Returns p, t, td, z, ok."""
    ok = np.isfinite(p) & np.isfinite(t) & np.isfinite(td) & (p > 0)
    if sort:
        key = np.where(ok, -p, np.inf)
        order = np.argsort(key, axis=1, kind="stable")
        p, t, td, z, ok = (np.take_along_axis(a, order, axis=1) for a in (p, t, td, z, ok))
    else:
        p, t, td, z = p.copy(), t.copy(), td.copy(), z.copy()
    p = np.where(ok, p, np.nan)
    t = np.where(ok, t, np.nan)
    td = np.where(ok, np.minimum(td, t), np.nan)
    z = np.where(ok, z, np.nan)
    return p, t, td, z, ok


def _order_loop(p, t, td, z, out_p, out_t, out_td, out_z, count):
    """:func:`_order_levels_numpy` with ``sort=True`` in one pass per row (compiled with numba).

    Model and sounding levels nearly always come ordered already (surface -> top, or the
    reverse), so each row is first compacted in its own order and only sorted -- a stable
    insertion sort on decreasing pressure, the same order as the stable argsort -- when its
    valid pressures are not already non-increasing.
    """
    n, L = p.shape
    idx = np.empty(L, dtype=np.int64)
    for i in range(n):
        k = 0
        ordered = True
        for j in range(L):
            pj = p[i, j]
            if (math.isfinite(pj) and math.isfinite(t[i, j]) and math.isfinite(td[i, j])
                    and pj > 0.0):
                if k > 0 and pj > p[i, idx[k - 1]]:
                    ordered = False
                idx[k] = j
                k += 1
        if not ordered:
            for a in range(1, k):
                cur = idx[a]
                pc = p[i, cur]
                b = a - 1
                while b >= 0 and p[i, idx[b]] < pc:
                    idx[b + 1] = idx[b]
                    b -= 1
                idx[b + 1] = cur
        for m in range(k):
            j = idx[m]
            tj = t[i, j]
            dj = td[i, j]
            out_p[i, m] = p[i, j]
            out_t[i, m] = tj
            out_td[i, m] = dj if dj <= tj else tj  # noqa: FURB136 - np.minimum order, for numba
            out_z[i, m] = z[i, j]
        for m in range(k, L):
            out_p[i, m] = np.nan
            out_t[i, m] = np.nan
            out_td[i, m] = np.nan
            out_z[i, m] = np.nan
        count[i] = k


def _order_levels(p, t, td, z):
    n, L = p.shape
    # Broadcast views (read-only, zero strides) are materialised for the compiled loop.
    p, t, td, z = (np.ascontiguousarray(a) for a in (p, t, td, z))
    out = [np.empty((n, L)) for _ in range(4)]
    count = np.empty(n, dtype=np.int64)
    _order_compiled(p, t, td, z, *out, count)
    return (*out, np.arange(L)[None, :] < count[:, None])


_order_compiled = compiled(_order_loop)


def _per_column(value, n: int, default: float = np.nan) -> np.ndarray:
    if value is None:
        return np.full(n, default)
    return np.broadcast_to(np.asarray(value, dtype=np.float64), (n,)).copy()


def interpolate_at_pressure(columns_p: np.ndarray, values: np.ndarray,
                            target_hpa: ArrayLike) -> np.ndarray:
    """Linear-in-ln-p interpolation of ``values`` (n, L) at ``target_hpa``, (n,) or a scalar.

    NaN where the target lies outside a column's valid pressure range.
    """
    p = columns_p
    n, L = p.shape
    target = np.broadcast_to(np.asarray(target_hpa, dtype=np.float64), (n,))
    ln_p = np.log(p)
    ln_t = np.log(target)
    # Index of the first level whose pressure is <= target (levels go down in pressure).
    below = np.where(np.isfinite(p), p >= target[:, None], False)
    k = below.sum(axis=1)  # levels at or below the target (surface side)
    rows = np.arange(n)
    k_lo = np.clip(k - 1, 0, L - 1)
    k_hi = np.clip(k, 0, L - 1)
    x0, x1 = ln_p[rows, k_lo], ln_p[rows, k_hi]
    y0, y1 = values[rows, k_lo], values[rows, k_hi]
    with np.errstate(invalid="ignore", divide="ignore"):
        w = np.where(x1 != x0, (ln_t - x0) / (x1 - x0), 0.0)
    out = y0 + w * (y1 - y0)
    exact = np.isfinite(p[rows, k_lo]) & (p[rows, k_lo] == target)
    out = np.where(exact, y0, out)
    n_valid = np.sum(np.isfinite(p), axis=1)
    inside = (k >= 1) & (k < n_valid + (exact.astype(int))) & np.isfinite(out)
    inside |= exact
    return np.where(inside, out, np.nan)


def interpolate_at_pressures(columns_p: np.ndarray, values: np.ndarray,
                             targets_hpa: ArrayLike) -> np.ndarray:
    """:func:`interpolate_at_pressure` at several fixed pressures at once, ``(n, m)`` for ``m``
    targets (the same arithmetic per target; ln p and the level counts are shared)."""
    p = columns_p
    n, L = p.shape
    target = np.asarray(targets_hpa, dtype=np.float64)[None, :]          # (1, m)
    ln_p = np.log(p)
    ln_t = np.log(target)
    finite = np.isfinite(p)
    below = finite[:, None, :] & (p[:, None, :] >= target[:, :, None])  # (n, m, L)
    k = below.sum(axis=2)
    rows = np.arange(n)[:, None]
    k_lo = np.minimum(np.maximum(k - 1, 0), L - 1)
    k_hi = np.minimum(k, L - 1)
    x0, x1 = ln_p[rows, k_lo], ln_p[rows, k_hi]
    y0, y1 = values[rows, k_lo], values[rows, k_hi]
    with np.errstate(invalid="ignore", divide="ignore"):
        w = np.where(x1 != x0, (ln_t - x0) / (x1 - x0), 0.0)
    out = y0 + w * (y1 - y0)
    p_lo = p[rows, k_lo]
    exact = np.isfinite(p_lo) & (p_lo == target)
    out = np.where(exact, y0, out)
    inside = (k >= 1) & (k < finite.sum(axis=1)[:, None] + exact.astype(int)) & np.isfinite(out)
    inside = inside | exact
    return np.where(inside, out, np.nan)
