"""Random winter soundings for property tests and the invariant benchmark.

Invented profiles, not climatology: each is drawn from a few structural parameters that span
the situations precipitation-type methods are built for (Bourgouin 2000 cases A-D; warm-topped
clouds as in Huffman & Norman 1988) and the awkward ones between them:

* surface pressure, surface air temperature and humidity;
* a surface-based layer (its depth and the temperature at its top: a cold pool or a warm
  surface layer);
* an optional elevated warm layer ("nose") with its base, depth and peak temperature;
* a saturated cloud from a base to a top, an optional dry slot inside it, dry air above;
* the number of levels and their spacing.

The temperature is piecewise linear in height between those knots, with a standard-atmosphere
lapse rate (6.5 K/km, USSA1976) above the nose up to 250 hPa; pressures follow from the
hypsometric equation with the layer-mean temperature (WallaceHobbs2006 eq. 3.29).  Everything
is vectorised: :func:`draw_parameters` then :func:`build_columns` gives thousands of columns
at once; :func:`profile_document` gives one as a ptype JSON document.
"""

from __future__ import annotations

import numpy as np

from ptype.thermo.constants import Rd, g

#: Top of every generated profile, hPa.
TOP_HPA = 250.0
#: Lapse rate above the knots, K/m (U.S. Standard Atmosphere 1976 troposphere).
LAPSE_K_M = 0.0065

PARAMETER_NAMES = (
    "surface_pressure_hpa", "surface_temperature_c", "surface_rh_pct",
    "surface_layer_top_m", "surface_layer_top_c",
    "nose", "nose_base_m", "nose_depth_m", "nose_peak_c",
    "cloud_base_m", "cloud_top_m", "dry_slot", "dry_slot_m", "n_levels",
)


def draw_parameters(rng: np.random.Generator, n: int) -> dict[str, np.ndarray]:
    """``n`` sets of structural parameters (see the module notes), each an ``(n,)`` array."""
    sfc_t = rng.uniform(-12.0, 7.0, n)
    layer_top = rng.uniform(100.0, 1800.0, n)
    # The top of the surface layer: colder than the surface (inversion-free) or a cold pool
    # under a warm nose; allowed to be above 0 degC so that surface-based melting occurs.
    layer_top_c = sfc_t + rng.uniform(-6.0, 3.0, n)
    nose = rng.random(n) < 0.7
    nose_base = layer_top + rng.uniform(0.0, 600.0, n)
    nose_depth = rng.uniform(200.0, 2200.0, n)
    nose_peak = rng.uniform(-4.0, 9.0, n)
    cloud_base = rng.uniform(0.0, 1500.0, n)
    # Cloud tops from shallow warm-topped stratus to deep ice-producing decks.
    cloud_top = cloud_base + rng.uniform(100.0, 7000.0, n)
    dry_slot = rng.random(n) < 0.25
    return {
        "surface_pressure_hpa": rng.uniform(950.0, 1035.0, n),
        "surface_temperature_c": sfc_t,
        "surface_rh_pct": rng.uniform(55.0, 100.0, n),
        "surface_layer_top_m": layer_top,
        "surface_layer_top_c": layer_top_c,
        "nose": nose,
        "nose_base_m": nose_base,
        "nose_depth_m": nose_depth,
        "nose_peak_c": nose_peak,
        "cloud_base_m": cloud_base,
        "cloud_top_m": cloud_top,
        "dry_slot": dry_slot,
        "dry_slot_m": cloud_base + rng.uniform(0.2, 0.8, n) * (cloud_top - cloud_base),
        "n_levels": rng.integers(25, 70, n),
    }


def _temperature_on(height_m: np.ndarray, prm: dict[str, np.ndarray]) -> np.ndarray:
    """Temperature, degC, on ``(n, L)`` heights above ground from the knots of each column."""
    z1 = prm["surface_layer_top_m"][:, None]
    t0 = prm["surface_temperature_c"][:, None]
    t1 = prm["surface_layer_top_c"][:, None]
    nose = prm["nose"][:, None]
    zb = np.maximum(prm["nose_base_m"][:, None], z1 + 1.0)
    zp = zb + 0.5 * prm["nose_depth_m"][:, None]
    ze = zb + prm["nose_depth_m"][:, None]
    tp = prm["nose_peak_c"][:, None]
    # Surface layer: linear from the surface to its top.
    t = t0 + (t1 - t0) * np.clip(height_m / z1, 0.0, 1.0)
    # Above the surface layer: without a nose, a standard lapse from the layer top.
    plain = t1 - LAPSE_K_M * (height_m - z1)
    # With a nose: flat to its base, up to the peak, down to the end, then the lapse rate;
    # the end temperature is below the base one so the nose is a real inversion aloft.
    t_end = np.minimum(tp - 4.0, t1) - LAPSE_K_M * 200.0
    nosed = np.select(
        [height_m <= zb, height_m <= zp, height_m <= ze],
        [t1 + (height_m - z1) * 0.0,
         t1 + (tp - t1) * (height_m - zb) / (zp - zb),
         tp + (t_end - tp) * (height_m - zp) / (ze - zp)],
        default=t_end - LAPSE_K_M * (height_m - ze))
    above = np.where(nose, nosed, plain)
    return np.where(height_m <= z1, t, above)


def _dewpoint(temperature_c, height_m, prm) -> np.ndarray:
    """Dew point: saturated in the cloud (depression 0-0.3 K), the surface humidity below the
    cloud base, dry (depression 8-20 K) above the top and in the dry slot."""
    zb = prm["cloud_base_m"][:, None]
    zt = prm["cloud_top_m"][:, None]
    rh = prm["surface_rh_pct"][:, None]
    # Depression for the surface RH at the surface temperature, roughly (Magnus slope at 0 degC).
    below_base = np.clip(1.0 - height_m / np.maximum(zb, 1.0), 0.0, 1.0)
    sub_cloud = np.clip((100.0 - rh) / 5.0, 0.0, 12.0) * below_base
    in_cloud = (height_m >= zb) & (height_m <= zt)
    slot = prm["dry_slot"][:, None] & (np.abs(height_m - prm["dry_slot_m"][:, None]) < 300.0)
    dep = np.where(in_cloud, 0.15, np.where(height_m > zt, 12.0, sub_cloud))
    dep = np.where(slot & in_cloud, 10.0, dep)
    return temperature_c - dep


def build_columns(prm: dict[str, np.ndarray]):
    """:class:`~ptype.engine.columns.Columns` of the soundings described by ``prm``."""
    from ptype.engine.columns import Columns
    n = len(prm["surface_pressure_hpa"])
    L = int(prm["n_levels"].max())
    frac = np.linspace(0.0, 1.0, L)[None, :] ** 1.3  # denser near the ground
    # Heights up to ~10.5 km; trimmed to 250 hPa below.
    z = frac * 10500.0
    t = _temperature_on(z, prm)
    td = _dewpoint(t, z, prm)
    # Hypsometric pressures with the layer-mean temperature (dry; heights are above ground).
    tk = t + 273.15
    dz = np.diff(z, axis=1)
    dlnp = -g * dz / (Rd * 0.5 * (tk[:, 1:] + tk[:, :-1]))
    p = prm["surface_pressure_hpa"][:, None] * np.exp(np.concatenate(
        [np.zeros((n, 1)), np.cumsum(dlnp, axis=1)], axis=1))
    keep = (np.arange(L)[None, :] < prm["n_levels"][:, None]) & (p >= TOP_HPA)
    nan = np.where(keep, 1.0, np.nan)
    return Columns.from_arrays(p * nan, t * nan, td * nan, z * nan,
                               surface_height_m=np.zeros(n))


def draw_columns(seed: int, n: int):
    """``n`` random winter soundings as columns, and their parameters."""
    prm = draw_parameters(np.random.default_rng(seed), n)
    return build_columns(prm), prm


def profile_document(prm: dict[str, np.ndarray], i: int = 0) -> dict:
    """Column ``i`` of ``prm`` as a ptype JSON profile document (invented site)."""
    cols = build_columns({k: v[i:i + 1] for k, v in prm.items()})
    k = int(cols.n_levels[0])
    levels = [{"pressure_hpa": round(float(cols.pressure_hpa[0, j]), 2),
               "height_m": round(float(cols.height_m[0, j]), 1),
               "temperature_c": round(float(cols.temperature_c[0, j]), 2),
               "dewpoint_c": round(float(cols.dewpoint_c[0, j]), 2)} for j in range(k)]
    return {"site": {"id": "GEN", "name": "Generated sounding (invented)", "elevation_m": 0.0},
            "source": "tests/winter_soundings.py", "levels": levels}
