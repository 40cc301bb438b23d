"""Model columns at road sites, moved to the site's elevation, as profile documents.

Pure array computation: :func:`columns_at_sites` takes a model run (a CF dataset as
:func:`ptype.grid.find_fields` reads it, one reference time) and the sites' positions and
elevations and returns one profile document per site and valid time (and ensemble member).

Horizontal: bilinear on the model grid (:mod:`ptype.grid.points`, which states the method
at edges and coasts).

Vertical, to the site's elevation ``z_site`` (our documented method, docs/operations.md):

1. The model ground at the site is the bilinear model orography ``z_model`` (CF
   ``surface_altitude``; without it, the geopotential height at the model surface pressure,
   interpolated in ln p); its pressure is the model surface pressure ``p_model`` (without
   it, the highest pressure level with data).
2. The site's surface pressure follows the barometric relation of a constant lapse rate
   through the height difference (the relation used to reduce station pressure, ICAO
   standard atmosphere 1993, lapse rate 6.5 K/km):
   ``p_site = p_model ((T_s - G dz) / T_s) ** (g / (Rd G))``, ``dz = z_site - z_model``,
   ``T_s`` the model screen temperature (K).
3. The screen-level air moves along the same lapse rate: ``T2_site = T2_model - G dz``; its
   dew-point depression is kept.
4. Model levels at or below the new ground (pressure at or above ``p_site`` or
   ``p_model``, height at or below ``z_site``) are dropped; the screen-level air at
   ``p_site`` and ``z_site`` becomes the lowest level.

A site without a known elevation takes the model ground (no adjustment).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from datetime import datetime
from typing import TYPE_CHECKING, Any

import numpy as np

from ptype.grid import points
from ptype.grid.fields import GridFields, unit_conversions
from ptype.grid.kernel import dewpoint_from_humidity_c
from ptype.thermo.constants import Rd, g

if TYPE_CHECKING:
    import xarray as xr

#: Lapse rate of the elevation adjustment, K/m (ICAO standard atmosphere, 1993).
STANDARD_LAPSE_K_M = 0.0065
KELVIN = 273.15
#: Decimal places kept in the stored documents (finer than any model field's precision).
DECIMALS = 2
#: Model levels closer than this to the site's ground pressure are left out, hPa (our
#: choice: the screen-level air stands for them).
SURFACE_GAP_HPA = 0.5


@dataclasses.dataclass(frozen=True)
class SitePoint:
    """A site as the extraction needs it."""

    site_id: int
    code: str | None
    name: str
    latitude: float
    longitude: float
    elevation_m: float | None


@dataclasses.dataclass
class Columns:
    """Model columns at the sites, ``(N, L)`` on the model's pressure levels (hPa, degC, m),
    and their surface values ``(N,)``; N = sites x times x members, in that order."""

    pressure_hpa: np.ndarray
    temperature_c: np.ndarray
    dewpoint_c: np.ndarray
    height_m: np.ndarray | None
    surface_pressure_hpa: np.ndarray | None
    model_ground_m: np.ndarray | None
    temperature_2m_c: np.ndarray | None
    dewpoint_2m_c: np.ndarray | None
    precipitation_rate_mm_h: np.ndarray | None = None


def _horizontal(ds, fields: GridFields) -> tuple[str, str]:
    dims = fields.horizontal_dims
    from ptype.grid.ensemble import member_dim
    member = member_dim(ds, dims)
    h = tuple(d for d in dims if d != member)
    if len(h) != 2:
        from ptype.errors import ReaderError
        raise ReaderError(f"model run: expected two horizontal dimensions, found {h}",
                          field="input")
    return h  # type: ignore[return-value]


def site_weights(ds, fields: GridFields, sites: Sequence[SitePoint]) -> points.PointWeights:
    """Bilinear weights of the sites on the run's grid (``latitude``/``longitude``)."""
    from ptype.errors import ReaderError
    lat = next((ds[n] for n in ds.coords if ds[n].attrs.get("standard_name") == "latitude"),
               None)
    lon = next((ds[n] for n in ds.coords if ds[n].attrs.get("standard_name") == "longitude"),
               None)
    if lat is None or lon is None:
        raise ReaderError("model run: no latitude/longitude coordinates (CF standard names "
                          "latitude, longitude); they are needed to find the sites",
                          field="latitude")
    ydim, xdim = _horizontal(ds, fields)
    if lat.ndim == 2:
        lat, lon = lat.transpose(ydim, xdim), lon.transpose(ydim, xdim)
    return points.point_weights(lat.values, lon.values, [s.latitude for s in sites],
                                [s.longitude for s in sites])


def _at_sites(var, lead: tuple[str, ...], level: str | None, hdims, w) -> np.ndarray:
    """``var`` at the sites: ``(n_sites, *lead, [L])``, size 1 along absent lead dims."""
    present = tuple(d for d in lead if d in var.dims)
    order = present + ((level,) if level and level in var.dims else ()) + tuple(hdims)
    a = points.extract(var.transpose(*order).values.astype(np.float64), w)  # (..., n)
    a = np.moveaxis(a, -1, 0)
    shape_lead = [var.sizes[d] if d in var.dims else 1 for d in lead]
    return a.reshape((a.shape[0], *shape_lead) + (a.shape[1 + len(present):]))


def extract_columns(ds, fields: GridFields, w: points.PointWeights,
                    lead: tuple[str, ...]) -> Columns:
    """Every model field at the sites in ptype units, flattened to ``(N, L)`` / ``(N,)``."""
    consts = unit_conversions(ds, fields)
    hdims = _horizontal(ds, fields)
    sizes = [ds.sizes[d] for d in lead]
    n = w.index.shape[0] * int(np.prod(sizes) if sizes else 1)

    def col(name, level=True):
        if not name:
            return None
        a = _at_sites(ds[name], lead, fields.level_dim if level else None, hdims, w)
        full = np.broadcast_to(a, (a.shape[0], *sizes) + a.shape[1 + len(lead):])
        return full.reshape((n,) + a.shape[1 + len(lead):])

    p = ds[fields.level_dim].values.astype(np.float64) * fields.level_to_hpa
    t = col(fields.temperature) - consts["_t_offset"]
    hum = col(fields.humidity)
    if fields.humidity_kind == "dew_point_temperature":
        hum = hum - consts["_h_scale"]
    else:
        hum = hum * consts["_h_scale"]
    with np.errstate(invalid="ignore"):
        td = dewpoint_from_humidity_c(fields.humidity_kind, hum, p[None, :], t)
    z = col(fields.height)
    ps = col(fields.surface_pressure, False)
    zs = col(fields.surface_altitude, False)
    t2, td2 = col(fields.temperature_2m, False), col(fields.dewpoint_2m, False)
    flux, to_si = _precipitation_flux(ds, fields)
    rate = col(flux, False)
    return Columns(
        pressure_hpa=p, temperature_c=t, dewpoint_c=np.minimum(td, t),
        height_m=None if z is None else z * consts["_z_scale"],
        surface_pressure_hpa=None if ps is None else ps * consts["_ps_scale"],
        model_ground_m=None if zs is None else zs * consts["_zs_scale"],
        temperature_2m_c=None if t2 is None else t2 - consts["_t2_offset"],
        dewpoint_2m_c=None if td2 is None else td2 - consts["_td2_offset"],
        # kg m-2 s-1 of water is mm s-1: x 3600 for mm/h.
        precipitation_rate_mm_h=None if rate is None
        else np.clip(rate * to_si * 3600.0, 0.0, 500.0))


#: Units of a precipitation flux understood, as the factor to kg m-2 s-1.
PRECIPITATION_FLUX_UNITS = {"kg m-2 s-1": 1.0, "kg m**-2 s**-1": 1.0, "mm s-1": 1.0,
                            "mm/s": 1.0, "mm h-1": 1.0 / 3600.0, "mm/h": 1.0 / 3600.0}


def _precipitation_flux(ds, fields: GridFields) -> tuple[str | None, float]:
    """The surface precipitation rate (CF ``precipitation_flux``) on the temperature's
    horizontal grid and its factor to kg m-2 s-1, when the run has one in units understood."""
    dims = set(ds[fields.temperature].dims) - {fields.level_dim}
    for name, var in ds.data_vars.items():
        units = str(var.attrs.get("units", "")).strip()
        if (var.attrs.get("standard_name") == "precipitation_flux" and set(var.dims) <= dims
                and units in PRECIPITATION_FLUX_UNITS):
            return str(name), PRECIPITATION_FLUX_UNITS[units]
    return None, 1.0


def _lowest_valid(values: np.ndarray, p: np.ndarray, psfc: np.ndarray) -> np.ndarray:
    """Each row's value at its highest pressure level above ground with data."""
    ok = np.isfinite(values) & (p[None, :] < psfc[:, None])
    order = np.argsort(-p)
    first = np.argmax(ok[:, order], axis=1)
    out = values[np.arange(values.shape[0]), order[first]]
    return np.where(ok.any(axis=1), out, np.nan)


def model_surface(c: Columns) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Model surface pressure (hPa), ground height (m; NaN when unknown), screen temperature
    and dew point (degC) of every column (steps 1 of the module notes)."""
    p = c.pressure_hpa
    n = c.temperature_c.shape[0]
    psfc = c.surface_pressure_hpa
    if psfc is None or not np.isfinite(psfc).any():
        has = np.isfinite(c.temperature_c)
        psfc = np.where(has.any(axis=1), np.max(np.where(has, p[None, :], -np.inf), axis=1)
                        + 1e-6, np.nan)
    zs = c.model_ground_m if c.model_ground_m is not None else np.full(n, np.nan)
    if c.height_m is not None:
        # Geopotential height at the surface pressure, linear in ln p (hypsometric).
        lnp = np.log(p)
        order = np.argsort(lnp)
        zi = np.array([np.interp(np.log(ps), lnp[order], row[order]) if np.isfinite(ps)
                       else np.nan for ps, row in zip(psfc, c.height_m)])
        zs = np.where(np.isfinite(zs), zs, zi)
    t2 = c.temperature_2m_c if c.temperature_2m_c is not None else np.full(n, np.nan)
    td2 = c.dewpoint_2m_c if c.dewpoint_2m_c is not None else np.full(n, np.nan)
    t2 = np.where(np.isfinite(t2), t2, _lowest_valid(c.temperature_c, p, psfc + 1e-6))
    td2 = np.where(np.isfinite(td2), td2, _lowest_valid(c.dewpoint_c, p, psfc + 1e-6))
    return psfc, zs, t2, np.minimum(td2, t2)


def adjust_to_elevation(c: Columns, site_elevation_m: np.ndarray) -> dict[str, np.ndarray]:
    """Steps 2-3 of the module notes: the site's surface pressure, height and screen air.

    Returns ``{"p_site", "z_site", "t_site", "td_site", "p_model"}``, each ``(N,)``."""
    psfc, zs, t2, td2 = model_surface(c)
    z_site = np.asarray(site_elevation_m, dtype=np.float64)
    dz = np.where(np.isfinite(z_site) & np.isfinite(zs), z_site - zs, 0.0)
    ts_k = t2 + KELVIN
    exponent = g / (Rd * STANDARD_LAPSE_K_M)
    with np.errstate(invalid="ignore"):
        p_site = psfc * ((ts_k - STANDARD_LAPSE_K_M * dz) / ts_k) ** exponent
    t_site = t2 - STANDARD_LAPSE_K_M * dz
    td_site = t_site - (t2 - td2)
    z_out = np.where(np.isfinite(z_site), z_site, zs)
    return {"p_site": p_site, "z_site": z_out, "t_site": t_site, "td_site": td_site,
            "p_model": psfc}


def _round(a: np.ndarray | None) -> list | None:
    return None if a is None else np.round(a, DECIMALS).tolist()


def column_documents(c: Columns, surface: dict[str, np.ndarray]) -> list[dict | None]:
    """One profile document (levels and surface) per column (step 4 of the module notes);
    None for a column with fewer than three levels above its ground."""
    p = c.pressure_hpa
    # A level within SURFACE_GAP_HPA of the new ground is replaced by the screen-level air
    # (the two would be one level once rounded).
    p_ground = np.minimum(np.round(surface["p_site"], DECIMALS), surface["p_model"])
    keep = np.isfinite(c.temperature_c) & (p[None, :] < p_ground[:, None] - SURFACE_GAP_HPA)
    if c.height_m is not None:
        keep &= ~(c.height_m <= surface["z_site"][:, None] + 1.0)
    t, td = _round(c.temperature_c), _round(c.dewpoint_c)
    z = _round(c.height_m)
    ps, zs = _round(surface["p_site"]), _round(surface["z_site"])
    ts, tds = _round(surface["t_site"]), _round(surface["td_site"])
    rate = _round(c.precipitation_rate_mm_h)
    p_list = p.tolist()
    order = np.argsort(-p).tolist()
    docs: list[dict | None] = []
    for k, row in enumerate(keep.tolist()):
        if ps[k] != ps[k] or ts[k] != ts[k]:  # NaN: no column here
            docs.append(None)
            continue
        levels = [{"pressure_hpa": ps[k], "height_m": zs[k], "temperature_c": ts[k],
                   "dewpoint_c": tds[k]}]
        for i in order:
            if row[i]:
                lv = {"pressure_hpa": p_list[i], "temperature_c": t[k][i]}
                if td[k][i] == td[k][i]:
                    lv["dewpoint_c"] = td[k][i]
                if z is not None and z[k][i] == z[k][i]:
                    lv["height_m"] = z[k][i]
                levels.append(lv)
        if len(levels) < 3:
            docs.append(None)
            continue
        sfc = {"temperature_2m_c": ts[k], "dewpoint_2m_c": tds[k], "pressure_hpa": ps[k]}
        if rate is not None and rate[k] == rate[k]:
            sfc["precipitation_rate_mm_h"] = rate[k]
        docs.append({"levels": levels, "surface": sfc})
    return docs


def columns_at_sites(ds: xr.Dataset, fields: GridFields, sites: Sequence[SitePoint],
                     valid_times: Sequence[datetime], source: str,
                     members: Sequence[Any] | None = None) -> list[dict]:
    """Profile documents at every site, valid time (and member) of one run.

    Returns dicts ``{"site_id", "valid_time", "member", "document"}``, in site, time, member
    order, leaving out sites off the grid (``{"site_id", "skipped": reason}`` entries)."""
    w = site_weights(ds, fields, sites)
    from ptype.grid.ensemble import member_dim
    member = member_dim(ds, fields.horizontal_dims)
    lead = tuple(d for d in ((fields.time_dim,) if fields.time_dim else ()) + (
        (member,) if member else ()))
    c = extract_columns(ds, fields, w, lead)
    n_t = len(valid_times)
    n_m = ds.sizes[member] if member else 1
    per_site = n_t * n_m
    elevation = np.repeat([np.nan if s.elevation_m is None else s.elevation_m for s in sites],
                          per_site)
    docs = column_documents(c, adjust_to_elevation(c, elevation))
    labels = list(members) if members is not None else (
        [int(x) for x in ds[member].values] if member else [None])
    out: list[dict] = []
    for i, site in enumerate(sites):
        if not w.inside[i]:
            out.append({"site_id": site.site_id, "skipped": "outside the model grid"})
            continue
        site_doc = {"id": site.code or str(site.site_id), "name": site.name,
                    "latitude": site.latitude, "longitude": site.longitude}
        if site.elevation_m is not None:
            site_doc["elevation_m"] = site.elevation_m
        for it, vt in enumerate(valid_times):
            for im in range(n_m):
                doc = docs[i * per_site + it * n_m + im]
                if doc is None:
                    continue
                doc.update(site=site_doc, valid_time=vt.isoformat(), source=source[:200])
                out.append({"site_id": site.site_id, "valid_time": vt, "member": labels[im],
                            "document": doc})
    return out
