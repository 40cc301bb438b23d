"""Generate the invented model grid used by the gridded demo (``demo_grid.nc``).

Invented data for the demo only: a warm front crossing the fictional Ostervale
lowlands and the Brannock hills on a 4 km grid, two forecast times three hours
apart, on 20 pressure levels, written as CF-1.13 NetCDF.  The front is built so
that every common winter type appears somewhere:

* south of the surface front: a warm sector, rain;
* just north of it: a shallow cold layer under a strong warm nose, freezing rain;
* further north: the cold dome deepens while the warm nose weakens, ice pellets;
* far north: the overrunning air is below 0 degC throughout, snow;
* a dry slot in the west, north of the front: only a shallow, supercooled but
  ice-free low cloud, freezing drizzle;
* the Brannock hills in the east stand above the lowest pressure levels, which
  are therefore below ground in the file (the reader must mask them), and their
  tops reach out of the shallow cold dome into the warm air.

Usage::

    python soundings_demo/grid/make_grid.py [-o soundings_demo/grid/demo_grid.nc]
        [--nx 160 --ny 120 --times 2]

The same generator, scaled up (``--nx 1800 --ny 1060 --levels 40``), makes the
benchmark grid of ``bench/bench_grid.py``.
"""

from __future__ import annotations

import argparse
import os
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    import xarray as xr

G = 9.80665
RD = 287.04
LEVELS_20 = (1000, 975, 950, 925, 900, 875, 850, 825, 800, 775, 750, 700, 650, 600, 550, 500,
             400, 300, 250, 200)


def pressure_levels(n: int) -> np.ndarray:
    """``n`` pressure levels, hPa: the 20 standard ones or an even 1000-200 hPa spread."""
    if n == len(LEVELS_20):
        return np.array(LEVELS_20, dtype=np.float64)
    return np.linspace(1000.0, 200.0, n)


def _front_y_km(x_km, hour):
    """Northing of the surface warm front: a gentle wave, moving north at 15 km/h."""
    span = np.ptp(x_km) + 1.0
    return (0.08 * span + 0.12 * (x_km - x_km.min())
            + 0.06 * span * np.sin(2.0 * np.pi * (x_km - x_km.min()) / (0.8 * span))
            + 15.0 * hour)


def _profiles(x_km, y_km, hour, z_m):
    """Temperature (degC) and relative humidity (%) on heights ``z_m`` for every column.

    Shapes: x_km, y_km (ny, nx); z_m (nz,); returns (ny, nx, nz) arrays.
    """
    d = (y_km - _front_y_km(x_km, hour))[..., None]   # km north of the surface front
    z = z_m[None, None, :]
    # Warm-sector air aloft: 11 degC at sea level, 6.2 K/km.
    t_warm = 11.0 - 6.2e-3 * z
    # Cold dome: frontal surface rising 1:130 northward; the dome air cools northward.
    dome_top = np.clip(d, 0.0, None) * 1000.0 / 130.0
    t_sfc = np.clip(np.where(d < 0, 8.0 - 0.01 * d, 3.5 - 0.075 * d), -14.0, 12.0)
    t_cold = t_sfc - 1.5e-3 * z                  # nearly isothermal cold dome
    # Smooth transition over 250 m at the frontal surface (the inversion).
    w = 0.5 * (1.0 + np.tanh((z - dome_top) / 125.0))
    t = np.where(d < 0, t_warm - (11.0 - t_sfc), (1.0 - w) * t_cold + w * t_warm)
    # Far north the overrunning air itself is colder (the warm nose fades away).
    t = t - np.clip(d - 150.0, 0.0, None) * 0.05 * w
    # Upper troposphere: stable above 8 km.
    t = np.where(z > 8000.0, t + (z - 8000.0) * 4.0e-3, t)

    # Humidity: frontal cloud from the ground to 6.5 km; a dry slot in the west, north of
    # the front, leaves only a shallow low cloud with mild, ice-free tops there.
    rh = np.where(z > 6500.0, 45.0, 96.0)
    span_x = np.ptp(x_km) + 1.0
    cx = x_km.min() + 0.16 * span_x
    r = np.hypot((x_km[..., None] - cx) / (0.17 * span_x), (d - 150.0) / 95.0)
    slot = r < 1.0
    low_top = 1200.0
    rh = np.where(slot & (z > low_top), 35.0, rh)
    t = np.where(slot, np.maximum(t_sfc, -4.0) - 2.0e-3 * z + np.where(z > low_top, 1.5, 0.0), t)
    return t, np.clip(rh + 0.0 * z, 5.0, 100.0)


def _interp_at(a, idx, f):
    """``a[..., idx] (1 - f) + a[..., idx + 1] f`` along the last axis."""
    lo = np.take_along_axis(a, idx[..., None], -1)[..., 0]
    hi = np.take_along_axis(a, idx[..., None] + 1, -1)[..., 0]
    return lo * (1.0 - f) + hi * f


def _hydrostatic_ln_p(t, z_fine):
    """ln p (hPa) on the fine heights: hydrostatic from 1008 hPa at sea level (virtual
    temperature neglected)."""
    tk = t + 273.15
    dz = np.diff(z_fine)
    return np.log(1008.0) - np.concatenate(
        [np.zeros(tk.shape[:2] + (1,)),
         np.cumsum(G * dz / (RD * 0.5 * (tk[..., 1:] + tk[..., :-1])), axis=-1)], axis=-1)


def _on_level(ln_p, t, rh, z_fine, p):
    """Height (m), temperature (degC) and RH (%) where the fine column crosses ``p`` hPa."""
    idx = np.argmax(ln_p < np.log(p), axis=-1)  # first fine level above p
    idx = np.clip(idx, 1, z_fine.size - 1)
    lo = np.take_along_axis(ln_p, idx[..., None] - 1, -1)[..., 0]
    hi = np.take_along_axis(ln_p, idx[..., None], -1)[..., 0]
    f = (lo - np.log(p)) / (lo - hi)
    zk = z_fine[idx - 1] + f * 50.0
    tk = np.take_along_axis(t, idx[..., None] - 1, -1)[..., 0] * (1 - f) + \
        np.take_along_axis(t, idx[..., None], -1)[..., 0] * f
    rhk = np.take_along_axis(rh, idx[..., None] - 1, -1)[..., 0] * (1 - f) + \
        np.take_along_axis(rh, idx[..., None], -1)[..., 0] * f
    return zk, tk, rhk


def _at_surface(ln_p, t, rh, z_fine, zs):
    """Surface pressure (Pa), 2 m temperature and dew point (K) at the terrain height ``zs``."""
    i_s = np.clip((zs // 50.0).astype(int), 0, z_fine.size - 2)
    f = (zs - z_fine[i_s]) / 50.0
    ts = _interp_at(t, i_s, f)
    rs = _interp_at(rh, i_s, f)
    b, c = 17.625, 243.04   # Alduchov & Eskridge (1996), as ptype.thermo
    gam = np.log(rs / 100.0) + b * ts / (c + ts)
    return np.exp(_interp_at(ln_p, i_s, f)) * 100.0, ts + 273.15, c * gam / (b - gam) + 273.15


def _dataset(fields, plev, x, y, times, dtype):
    """The fields as a CF-1.13 :class:`xarray.Dataset`."""
    import pandas as pd
    import xarray as xr

    time = pd.date_range("2031-01-14T06:00", periods=times, freq="3h")
    level_attrs = {"standard_name": "air_pressure", "long_name": "pressure level", "units": "hPa",
                   "positive": "down", "axis": "Z"}
    on_levels = ("time", "plev", "y", "x")
    kelvin = {"units": "K", "units_metadata": "temperature: on_scale"}
    ds = xr.Dataset(
        {
            "ta": (on_levels, fields["t"], {"standard_name": "air_temperature", **kelvin}),
            "hur": (on_levels, np.clip(fields["rh"], 1.0, 100.0).astype(dtype),
                    {"standard_name": "relative_humidity", "units": "%"}),
            "zg": (on_levels, fields["z"],
                   {"standard_name": "geopotential_height", "units": "m"}),
            "ps": (("time", "y", "x"), fields["ps"],
                   {"standard_name": "surface_air_pressure", "units": "Pa"}),
            "orog": (("y", "x"), fields["orog"].astype(dtype),
                     {"standard_name": "surface_altitude", "units": "m"}),
            "tas": (("time", "y", "x"), fields["tas"],
                    {"standard_name": "air_temperature", **kelvin, "coordinates": "height"}),
            "tds": (("time", "y", "x"), fields["tds"],
                    {"standard_name": "dew_point_temperature", **kelvin}),
        },
        coords={
            "time": ("time", time, {"standard_name": "time", "axis": "T"}),
            "plev": ("plev", plev, level_attrs),
            "y": ("y", y, {"long_name": "northing on the demo grid", "units": "km", "axis": "Y"}),
            "x": ("x", x, {"long_name": "easting on the demo grid", "units": "km", "axis": "X"}),
            "height": ((), 2.0, {"standard_name": "height", "units": "m", "positive": "up"}),
        },
        attrs={
            "Conventions": "CF-1.13",
            "title": "Invented model forecast over the fictional Ostervale lowlands (demo data)",
            "institution": "ptype demo data (invented; not a real model or region)",
            "source": "soundings_demo/grid/make_grid.py",
            "history": "generated by soundings_demo/grid/make_grid.py",
        },
    )
    ds["tds"] = ds["tds"].assign_coords(height=ds["height"])
    ds["tas"] = ds["tas"].assign_coords(height=ds["height"])
    return ds


def make_grid(nx: int = 160, ny: int = 120, times: int = 2, levels: int = 20,
              spacing_km: float = 4.0, dtype: type = np.float32, seed: int = 7) -> xr.Dataset:
    """Build the invented grid as an :class:`xarray.Dataset` (CF-1.13 attributes)."""
    x = np.arange(nx) * spacing_km
    y = np.arange(ny) * spacing_km
    xx, yy = np.meshgrid(x, y)
    # Brannock hills: a ridge in the east, up to 1100 m, reaching into the freezing-rain
    # zone: their tops stand in the warm air above the shallow cold dome.
    zsfc = 1100.0 * np.exp(-(((xx - 0.74 * x.max()) / (0.07 * x.max() + 1)) ** 2
                             + ((yy - 0.33 * y.max()) / (0.16 * y.max() + 1)) ** 2))
    plev = pressure_levels(levels)
    z_fine = np.arange(0.0, 12500.0, 50.0)
    shape = (times, levels, ny, nx)
    fields = {k: np.empty(shape, dtype=dtype) for k in ("t", "rh", "z")}
    fields.update({k: np.empty((times, ny, nx), dtype=dtype) for k in ("ps", "tas", "tds")})
    fields["orog"] = zsfc
    for it in range(times):
        hour = 3.0 * it
        # Rows in blocks to keep memory small for large grids.
        step = max(1, int(2_000_000 // (nx * z_fine.size)))
        for j0 in range(0, ny, step):
            sl = slice(j0, min(ny, j0 + step))
            t, rh = _profiles(xx[sl], yy[sl], hour, z_fine)
            ln_p = _hydrostatic_ln_p(t, z_fine)
            for k, p in enumerate(plev):
                zk, tk, rhk = _on_level(ln_p, t, rh, z_fine, p)
                fields["z"][it, k, sl] = zk
                fields["t"][it, k, sl] = tk + 273.15
                fields["rh"][it, k, sl] = rhk
            ps, t2, td2 = _at_surface(ln_p, t, rh, z_fine, zsfc[sl])
            fields["ps"][it, sl], fields["tas"][it, sl], fields["tds"][it, sl] = ps, t2, td2
    rng = np.random.default_rng(seed)
    fields["t"] += rng.normal(0.0, 0.15, shape).astype(dtype)  # a little model-like texture
    return _dataset(fields, plev, x, y, times, dtype)


def write_grid(ds: xr.Dataset, path: str, compress: bool = True) -> None:
    """Write ``ds`` as NetCDF-4 (deflated, two significant decimals, unless ``compress`` is
    False)."""
    enc = {}
    for name in ds.data_vars:
        e = {"_FillValue": None}
        if compress:
            e.update(zlib=True, complevel=4, shuffle=True, least_significant_digit=2)
        enc[name] = e
    enc["time"] = {"units": "hours since 2031-01-14 00:00:00", "calendar": "standard"}
    ds.to_netcdf(path, format="NETCDF4", encoding=enc)


def main(argv: list[str] | None = None) -> int:
    """Command line: write the demo grid (see the module docstring)."""
    here = os.path.dirname(os.path.abspath(__file__))
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("-o", "--output", default=os.path.join(here, "demo_grid.nc"))
    ap.add_argument("--nx", type=int, default=160)
    ap.add_argument("--ny", type=int, default=120)
    ap.add_argument("--times", type=int, default=2)
    ap.add_argument("--levels", type=int, default=20)
    ap.add_argument("--no-compress", action="store_true", help="write uncompressed (faster)")
    args = ap.parse_args(argv)
    ds = make_grid(args.nx, args.ny, args.times, args.levels)
    write_grid(ds, args.output, compress=not args.no_compress)
    print(f"wrote {args.output} ({os.path.getsize(args.output) / 1e6:.1f} MB)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
