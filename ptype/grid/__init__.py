"""Gridded diagnosis: CF NetCDF model output on pressure levels in, CF-1.13 NetCDF out.

Modules, each only calling the ones above it::

    fields   find_fields: CF standard names -> which variable is what, in which units
    kernel   column_kernel: (n_columns, n_levels) numpy arrays -> packed results
             (calls ptype.engine.run.run_columns)
    dataset  diagnose_dataset: xarray.apply_ufunc over chunks of columns -> output Dataset
    io       open_grid (files -> one xarray.Dataset, lazily chunked with dask) and
             write_grid (CF attributes, zlib compression, chunked NetCDF-4)

Inputs are recognised by CF ``standard_name`` (CF standard-name table v94):
``air_temperature`` on pressure levels (required); humidity as
``dew_point_temperature``, ``relative_humidity``, ``specific_humidity`` or
``humidity_mixing_ratio`` (one required, first found wins in that order);
``geopotential_height`` (optional); ``surface_air_pressure``, ``surface_altitude``
and screen-level ``air_temperature`` / ``dew_point_temperature`` (a 2 m ``height``
coordinate, or no vertical dimension; optional).  The vertical coordinate is the
dimension coordinate of the temperature whose standard name is ``air_pressure``
or whose units are a pressure (Pa, hPa, mbar, kPa).  Dimension names and order
are free; the time dimension is the one whose coordinate has standard name
``time``, axis ``T`` or a datetime type; every other dimension is horizontal.

Column construction (common practice for model soundings): levels below the
ground (pressure above the surface pressure) are dropped; when the surface
pressure and the 2 m temperature and dew point are all known, the screen-level
air is added as the lowest level at the surface pressure (its height the
surface altitude when given, else hypsometric from the level above).  The
resulting column is exactly what :func:`ptype.diagnose` would get from a profile
document with the same levels, which ``tests/test_grid.py`` checks.
"""

from __future__ import annotations

from ptype.grid.dataset import FLOAT_OUTPUTS, TYPE_FILL, diagnose_dataset
from ptype.grid.fields import HUMIDITY_KINDS, GridFields, find_fields, unit_conversions
from ptype.grid.io import (
    DEFAULT_CHUNK_WORK,
    default_chunks,
    encoding_for,
    history_line,
    open_grid,
    parse_chunks,
    retain_freed_memory,
    summary,
    write_grid,
)
from ptype.grid.kernel import (
    ENGINE_BATCH_COLUMNS,
    MEMBER_BATCH_COLUMNS,
    MIN_LEVELS,
    KernelLayout,
    build_columns,
    column_kernel,
    dewpoint_from_humidity_c,
)

__all__ = [
    "DEFAULT_CHUNK_WORK",
    "ENGINE_BATCH_COLUMNS",
    "FLOAT_OUTPUTS",
    "HUMIDITY_KINDS",
    "MEMBER_BATCH_COLUMNS",
    "MIN_LEVELS",
    "TYPE_FILL",
    "GridFields",
    "KernelLayout",
    "build_columns",
    "column_kernel",
    "default_chunks",
    "dewpoint_from_humidity_c",
    "diagnose_dataset",
    "encoding_for",
    "find_fields",
    "history_line",
    "open_grid",
    "parse_chunks",
    "retain_freed_memory",
    "summary",
    "unit_conversions",
    "write_grid",
]
