"""Dataset -> Dataset: :func:`diagnose_dataset` maps the column kernel over the chunks of a
model dataset (``xarray.apply_ufunc``) and labels the results with CF attributes."""

from __future__ import annotations

import functools
from collections.abc import Iterable
from typing import TYPE_CHECKING, Any

import numpy as np

from ptype.codes import GRIB2_4201_MEANINGS, LABELS, NO_RESULT, Code, to_grib2
from ptype.constants import CAUTION
from ptype.errors import OptionError
from ptype.grid.fields import GridFields, _std, find_fields, unit_conversions
from ptype.grid.kernel import KernelLayout, column_kernel

if TYPE_CHECKING:
    import xarray as xr

#: Missing value of the integer type variables (GRIB2 code table 4.201 "missing").
TYPE_FILL = 255


def _flag_attrs() -> tuple[np.ndarray, str]:
    values = np.array(sorted(GRIB2_4201_MEANINGS), dtype=np.uint8)
    return values, " ".join(GRIB2_4201_MEANINGS[int(v)] for v in values)


def _label_name(code: Code) -> str:
    return LABELS[code].replace(" ", "_")


def diagnose_dataset(ds: xr.Dataset, members: int = 0, seed: int | None = None,
                     methods: Iterable[str] | str | None = None, per_method: bool = False,
                     fractions: bool = False, calibration: Any = None,
                     fields: GridFields | None = None) -> xr.Dataset:
    """Diagnose every column of a model dataset; lazy when ``ds`` holds dask arrays.

    Parameters
    ----------
    ds : xarray.Dataset
        CF model output on pressure levels (see :mod:`ptype.grid` for what is recognised).
    members : int
        Monte-Carlo members per column for the probabilities (0: none).
    seed : int, optional
        Seed of the members (reproducible for the same seed and chunking).
    methods : iterable of str, optional
        Methods to run (default all of :data:`ptype.engine.methods.METHOD_NAMES`).
    calibration : Calibration, optional
        Calibrated probabilities (:mod:`ptype.engine.calibration`); the output's
        ``ptype_calibration`` attribute says which, or "uncalibrated".
    fractions : bool
        Also return the particle model's mass fractions at the ground
        (``mass_fraction_of_<class>_at_surface`` for snow, melting snow, liquid and refrozen
        ice; they sum to 1 where the model ran).
    per_method : bool
        Also return one type variable per method.

    Returns
    -------
    xarray.Dataset
        ``precipitation_type`` (GRIB2 code table 4.201 values), ``warm_layer_energy`` and
        ``cold_layer_energy`` (J kg-1), ``wet_bulb_zero_height`` and ``freezing_level_height``
        (m), ``probability_of_<type>`` when ``members > 0`` and
        ``precipitation_type_<method>`` when ``per_method``; CF-1.13 attributes throughout.
    """
    from ptype.engine.probability import check_members
    from ptype.engine.run import method_names

    members = check_members(members)
    if seed is not None and (isinstance(seed, bool) or not isinstance(seed, (int, np.integer))
                             or seed < 0):
        raise OptionError(f"seed = {seed!r}: expected a non-negative whole number", field="seed")
    fields = fields or find_fields(ds)
    layout = KernelLayout(methods=method_names(methods), members=members,
                          per_method=bool(per_method), fractions=bool(fractions),
                          calibration=calibration)
    packed = _packed_results(ds, fields, layout, seed)
    return _output_dataset(ds, fields, layout, packed, seed)


def _column_dims(fields: GridFields) -> tuple[str, ...]:
    return ((fields.time_dim,) if fields.time_dim else ()) + fields.horizontal_dims


def _kernel_inputs(ds, fields: GridFields) -> dict:
    """The arrays the column kernel reads, by its names, chunked like the temperature."""
    import xarray as xr
    lev = fields.level_dim
    inputs = {"pressure": ds[lev], "temperature": ds[fields.temperature],
              "humidity": ds[fields.humidity]}
    if fields.height:
        inputs["height"] = ds[fields.height]
    for key in ("surface_pressure", "surface_altitude", "temperature_2m", "dewpoint_2m"):
        name = getattr(fields, key)
        if name:
            inputs[key] = ds[name]
    # A global column index, chunked like the data, seeds each chunk's members.
    col_dims = _column_dims(fields)
    shape = tuple(ds.sizes[d] for d in col_dims)
    inputs["column_index"] = xr.DataArray(
        np.arange(int(np.prod(shape)), dtype=np.int64).reshape(shape), dims=col_dims)
    t_chunks = ds[fields.temperature].chunksizes if ds[fields.temperature].chunks else {}
    if t_chunks:
        if len(t_chunks[lev]) > 1:
            raise OptionError(f"chunks: the level dimension {lev!r} must be one chunk",
                              field="chunks")
        inputs = {k: (v.chunk({d: t_chunks[d] for d in v.dims if d in t_chunks})
                      if k != "pressure" else v) for k, v in inputs.items()}
    return inputs


def _packed_results(ds, fields: GridFields, layout: KernelLayout, seed):
    """The column kernel mapped over the chunks: one ``ptype_field`` dimension holding
    :attr:`KernelLayout.names`, after the column dimensions."""
    import xarray as xr
    lev = fields.level_dim
    inputs = _kernel_inputs(ds, fields)
    kernel = functools.partial(column_kernel, names=tuple(inputs),
                               consts=unit_conversions(ds, fields), fields=fields,
                               layout=layout, seed=seed)
    packed = xr.apply_ufunc(
        kernel, *inputs.values(),
        input_core_dims=[[lev] if lev in v.dims else [] for v in inputs.values()],
        output_core_dims=[["ptype_field"]],
        dask="parallelized",
        output_dtypes=[np.float32],
        dask_gufunc_kwargs={"output_sizes": {"ptype_field": len(layout.names)}},
        keep_attrs=False,
    )
    # Keep only the dimension coordinates; the others are chosen by _output_dataset.
    return packed.transpose(*_column_dims(fields), "ptype_field").reset_coords(drop=True)


#: The particle model's classes of mass at the ground, as written in variable long names.
FRACTION_OUTPUTS = {"snow": "snow", "melting": "melting snow", "liquid": "liquid",
                    "refrozen": "refrozen ice"}
#: The float outputs: variable name -> (kernel field, units, long name).
FLOAT_OUTPUTS = {
    "warm_layer_energy": ("warm_area_j_kg", "J kg-1",
                          ("melting energy: area between the temperature profile and 0 degC "
                           "summed over the warm layers below 250 hPa (Bourgouin 2000)")),
    "cold_layer_energy": ("cold_area_j_kg", "J kg-1",
                          ("refreezing energy: area of the cold layers below the highest "
                           "warm layer aloft (Bourgouin 2000)")),
    "wet_bulb_zero_height": ("wetbulb_zero_height_m", "m",
                             ("geopotential height of the highest wet-bulb 0 degC crossing "
                              "(isobaric wet-bulb)")),
    "freezing_level_height": ("freezing_level_m", "m",
                              ("geopotential height of the highest 0 degC crossing of the "
                               "air temperature")),
}


def _output_dataset(ds, fields: GridFields, layout: KernelLayout, packed, seed):
    """Unpack the kernel's fields into CF-labelled variables, coordinates and attributes."""
    import xarray as xr
    field_index = {name: i for i, name in enumerate(layout.names)}

    def field(name):
        return packed.isel(ptype_field=field_index[name]).drop_vars("ptype_field", errors="ignore")

    grid_mapping = ds[fields.temperature].attrs.get("grid_mapping")
    extra = {"grid_mapping": grid_mapping} if grid_mapping else {}
    col_dims = _column_dims(fields)
    names_m = layout.methods
    out = xr.Dataset()
    out["precipitation_type"] = _type_variable(
        field("ptype"), col_dims, extra,
        f"predominant precipitation type at the surface, consensus of {len(names_m)} methods "
        f"({', '.join(names_m)})")
    for m in layout.method_fields:
        out[f"precipitation_type_{m}"] = _type_variable(
            field(f"m_{m}"), col_dims, extra,
            f"precipitation type at the surface by the {m} method")
    for var, (key, units, long_name) in FLOAT_OUTPUTS.items():
        out[var] = field(key).assign_attrs({"long_name": long_name, "units": units, **extra})
    if layout.members:
        for code in Code:
            attrs = {"long_name": f"probability of {LABELS[code]}", "units": "1",
                     "valid_range": np.array([0.0, 1.0], dtype=np.float32),
                     "comment": f"fraction of {layout.members} Monte-Carlo members (perturbed "
                                "temperature and humidity profiles) whose consensus type is "
                                f"{code.name}", **extra}
            out[f"probability_of_{_label_name(code)}"] = field(f"p_{code.name}").assign_attrs(attrs)
    if layout.fractions:
        for part, words in FRACTION_OUTPUTS.items():
            out[f"mass_fraction_of_{part}_at_surface"] = field(f"fraction_{part}").assign_attrs(
                {"long_name": f"mass fraction of the precipitation reaching the surface as "
                              f"{words} (particle model)", "units": "1",
                 "valid_range": np.array([0.0, 1.0], dtype=np.float32),
                 "comment": "size-resolved melting and refreezing from the cloud to the "
                            "ground (docs/particles.md); the four fractions sum to 1. "
                            + CAUTION, **extra})
    out = _with_ensemble(out, ds, fields, layout, field, extra)
    out = _with_coordinates(out, ds, fields, grid_mapping)
    out.attrs.update(_global_attributes(ds, layout, seed))
    hist = ds.attrs.get("history")
    if hist:
        out.attrs["history"] = str(hist)
    return out


def _with_ensemble(out, ds, fields: GridFields, layout: KernelLayout, field, extra: dict):
    """With an ensemble member dimension: probabilities over the members and the most likely
    type (:mod:`ptype.grid.ensemble`) replace the per-member probabilities."""
    from ptype.grid import ensemble
    member = ensemble.member_dim(ds, fields.horizontal_dims)
    if member is None:
        return out
    probs = ensemble.ensemble_probabilities(field, member, layout.members, ds.sizes[member],
                                            extra)
    out = out.drop_vars([k for k in probs if k in out])
    for name, p in probs.items():
        out[name] = p
    col_dims = tuple(d for d in _column_dims(fields) if d != member)
    out["most_likely_precipitation_type"] = _type_variable(
        ensemble.most_likely_type(probs).transpose(*col_dims), col_dims, extra,
        f"most likely precipitation type at the surface over {ds.sizes[member]} ensemble "
        "members")
    out.attrs["ptype_ensemble_members"] = np.int32(ds.sizes[member])
    return out


def _type_variable(values, col_dims, extra: dict, long_name: str):
    import xarray as xr
    flag_values, flag_meanings = _flag_attrs()
    attrs = {"standard_name": "predominant_precipitation_type_at_surface",
             "long_name": long_name, "flag_values": flag_values,
             "flag_meanings": flag_meanings,
             "comment": "values follow WMO GRIB2 code table 4.201; 255 = not diagnosed "
                        "(fewer than 3 levels above ground or missing input). " + CAUTION,
             **extra}
    return xr.DataArray(_grib2_codes(values), dims=col_dims, attrs=attrs)


def _with_coordinates(out, ds, fields: GridFields, grid_mapping):
    """The column dimensions' coordinates and auxiliary coordinates on them (latitude, ...),
    and the grid mapping variable."""
    lev = fields.level_dim
    col_dims = _column_dims(fields)
    for name, c in ds.coords.items():
        if name == lev or lev in c.dims or not set(c.dims) <= set(col_dims):
            continue
        if not c.dims and (_std(c) == "height" or name == "height"):
            continue  # the screen level's 2 m: the output is at the surface
        out = out.assign_coords({name: c.variable})
    if grid_mapping and grid_mapping in ds.variables:
        out[grid_mapping] = ds[grid_mapping].variable
    return out


def _global_attributes(ds, layout: KernelLayout, seed) -> dict:
    from ptype import __version__
    names_m = layout.methods
    return {
        "Conventions": "CF-1.13",
        "title": "Precipitation type at the surface diagnosed from model pressure-level profiles",
        "source": f"ptype {__version__} gridded diagnosis ({', '.join(names_m)}) applied to "
                  f"{ds.attrs.get('_ptype_sources') or ds.attrs.get('source') or 'model output'}",
        "ptype_version": __version__,
        "ptype_methods": " ".join(names_m),
        "ptype_members": np.int32(layout.members),
        "ptype_calibration": (
            "uncalibrated: member frequencies" if layout.calibration is None or not layout.members
            else f"calibrated: fitted on {layout.calibration.n_cases} cases from "
                 f"{layout.calibration.source} ({layout.calibration.fitted})"),
        "ptype_seed": "none" if seed is None else str(int(seed)),
        "comment": CAUTION,
    }


def _grib2_codes(values):
    """Float ptype codes (NaN missing) -> uint8 GRIB2 4.201 values (255 missing), lazily."""
    def conv(a):
        a = np.asarray(a)
        codes = np.where(np.isfinite(a), a, NO_RESULT).astype(np.int64)
        return to_grib2(codes)
    return values.copy(data=_map_array(values.data, conv, np.uint8))


def _map_array(data, func, dtype):
    try:
        import dask.array as da
        if isinstance(data, da.Array):
            return data.map_blocks(func, dtype=dtype)
    except ImportError:  # pragma: no cover
        pass
    return func(data)
