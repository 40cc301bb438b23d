"""Grid files in and out: opening model output lazily (chunked with dask) and writing the
diagnosed grid as compressed CF-1.13 NetCDF-4."""

from __future__ import annotations

import math
import os
import sys
from collections.abc import Iterable, Mapping, Sequence
from datetime import UTC, datetime
from typing import TYPE_CHECKING, Any

import numpy as np

from ptype.errors import OptionError, ReaderError
from ptype.grid.dataset import TYPE_FILL
from ptype.grid.fields import GridFields, find_fields

if TYPE_CHECKING:
    import xarray as xr

#: Column diagnoses per dask chunk when no chunks are given (a chunk of ``c`` columns with
#: ``m`` members makes ``c (1 + m)``).  Large, so that the whole grid is a few dozen tasks:
#: every task is a round trip through the scheduler's thread, and with 4,096-column chunks
#: the 1.9 M-column run had 14,000 tasks and its two worker threads waited for work 15 % of
#: the time (measured, docs/performance.md).
DEFAULT_CHUNK_WORK = 32768


def parse_chunks(text: str | None) -> dict[str, int]:
    """``"y=256,x=256"`` -> ``{"y": 256, "x": 256}``; raises :class:`OptionError`."""
    if not text:
        return {}
    out: dict[str, int] = {}
    for part in text.split(","):
        part = part.strip()
        if not part:
            continue
        name, sep, value = part.partition("=")
        try:
            size = int(value)
        except ValueError:
            size = 0
        if not sep or not name.strip() or size <= 0:
            raise OptionError(f"chunks: {part!r} is not NAME=SIZE with a positive whole SIZE "
                              "(example: y=256,x=256)", field="chunks")
        out[name.strip()] = size
    return out


def default_chunks(ds: xr.Dataset, fields: GridFields, members: int = 0) -> dict:
    """Chunks of about ``DEFAULT_CHUNK_WORK / (1 + members)`` columns that follow how the
    temperature is stored: whole multiples of its file chunks when it is chunked, and when it
    is contiguous, whole rows of the inner horizontal dimensions (bands along the outermost),
    so that every chunk is read as a few long runs of the file.  One time step per chunk; the
    level dimension whole."""
    chunks: dict[str, int] = {fields.level_dim: -1}
    if fields.time_dim:
        chunks[fields.time_dim] = 1
    var = ds[fields.temperature]
    stored = var.encoding.get("chunksizes") or (1,) * var.ndim
    unit = {d: max(1, int(c)) for d, c in zip(var.dims, stored)}
    remaining = float(max(1, DEFAULT_CHUNK_WORK // (1 + int(members))))
    # Innermost (fastest varying in the file) first: it is taken whole when it fits.
    for dim in reversed([d for d in var.dims if d in fields.horizontal_dims]):
        size, u = ds.sizes[dim], unit.get(dim, 1)
        if u > 2.0 * remaining:
            # A file chunk much larger than the work wanted (a whole variable stored as one
            # chunk, say) is split rather than making one task of it; HDF5's chunk cache
            # keeps the repeated reads of one file chunk cheap.
            u = 1
        units = max(1, min(-(-size // u), round(remaining / u)))
        chunks[dim] = min(size, units * u)
        remaining = max(1.0, remaining / chunks[dim])
    return chunks


def open_grid(paths: str | os.PathLike | Sequence, chunks: Mapping[str, int] | None = None,
              members: int = 0) -> xr.Dataset:
    """Open one or more NetCDF files (or GRIB2 files, :mod:`ptype.grid.grib`) as one
    dask-backed dataset, combined along time.

    ``chunks`` maps dimension names to chunk sizes (the level dimension is always whole); the
    dimensions not given follow :func:`default_chunks`, sized for ``members`` Monte-Carlo
    members per column (the work of a chunk grows with them).
    """
    import xarray as xr

    from ptype.engine.probability import check_members
    members = check_members(members)
    if isinstance(paths, (str, os.PathLike)):
        paths = [paths]
    paths = [os.fspath(p) for p in paths]
    if not paths:
        raise OptionError("no input file given", field="input")
    def _open(path, file_chunks):
        try:
            return xr.open_dataset(path, engine="netcdf4", chunks=file_chunks,
                                   decode_timedelta=False)
        except (OSError, ValueError, TypeError) as exc:
            reason = (str(exc).strip().splitlines() or [type(exc).__name__])[0]
            raise ReaderError(f"{path}: not a readable NetCDF file ({reason})",
                              field="input") from None

    for path in paths:
        if not os.path.exists(path):
            raise FileNotFoundError(2, "No such file or directory", path)
    from ptype.grid import grib
    if any(grib.is_grib(p) for p in paths):
        return _open_grib(paths, chunks, members)
    datasets = []
    for path in paths:
        datasets.append((path, _open(path, {})))
    fields = find_fields(datasets[0][1], datasets[0][0])
    for path, ds in datasets[1:]:
        other = find_fields(ds, path)
        if (other.temperature, other.level_dim, other.horizontal_dims) != \
                (fields.temperature, fields.level_dim, fields.horizontal_dims):
            raise ReaderError(f"{path}: its variables or dimensions differ from {datasets[0][0]} "
                              f"(temperature {other.temperature!r} on {other.horizontal_dims}, "
                              f"expected {fields.temperature!r} on {fields.horizontal_dims})",
                              field="input")
    ds = _combine(datasets, fields)
    full = _working_chunks(ds, fields, chunks, members)
    if all(d[fields.temperature].encoding.get("contiguous") for _, d in datasets):
        # A contiguous (unchunked) variable opens as one dask chunk: its whole array would be
        # read by one task, under the HDF5 lock, before any column could be diagnosed.  It is
        # reopened in bands instead: the working chunk along the outermost horizontal
        # dimension (as stored) and every dimension after it whole, so that each read is a
        # few long runs of the file; the bands are then split into the working chunks (same
        # values, same chunks).  Measured on 1.9 M columns x 40 levels, three variables:
        # whole arrays 4.2 s, slabs of 64 x 64 columns 8.8 s (short strided reads), bands
        # 2.8 s, and the bands interleave with the computing.
        t_dims = datasets[0][1][fields.temperature].dims
        outer = next((k for k in t_dims if k in fields.horizontal_dims), None)
        whole = set(t_dims[t_dims.index(outer) + 1:]) if outer else set()
        for _, d in datasets:
            d.close()
        datasets = [(path, _open(path, {k: (-1 if k in whole else v) for k, v in full.items()
                                        if k in d.dims}))
                    for path, d in datasets]
        ds = _combine(datasets, fields)
    ds = ds.chunk(full)
    ds.attrs["_ptype_sources"] = " ".join(os.path.basename(p) for p in paths)
    return ds


def _working_chunks(ds, fields, chunks: Mapping[str, int] | None, members: int) -> dict:
    """The chunks a grid is computed in: :func:`default_chunks` with the user's ``chunks``
    over them (an unknown dimension is an :class:`OptionError`), levels always whole, only
    the dimensions ``ds`` has."""
    want = dict(chunks or {})
    unknown = sorted(set(want) - set(ds.dims))
    if unknown:
        raise OptionError(f"chunks: unknown dimension(s) {', '.join(unknown)}; the input has "
                          f"{', '.join(map(str, ds.dims))}", field="chunks")
    full = default_chunks(ds, fields, members)
    full.update(want)
    full[fields.level_dim] = -1
    return {d: c for d, c in full.items() if d in ds.dims}


def _open_grib(paths: list[str], chunks: Mapping[str, int] | None, members: int):
    """GRIB2 files through :func:`ptype.grid.grib.open_grib_dataset`, chunked as NetCDF is."""
    from ptype.grid import grib
    not_grib = [p for p in paths if not grib.is_grib(p)]
    if not_grib:
        raise ReaderError(f"{not_grib[0]}: not GRIB, while other inputs are; give either "
                          "GRIB2 or NetCDF files", field="input")
    ds = grib.open_grib_dataset(paths)
    fields = find_fields(ds, paths[0])
    ds = ds.chunk(_working_chunks(ds, fields, chunks, members))
    ds.attrs["_ptype_sources"] = " ".join(os.path.basename(p) for p in paths)
    return ds


def _combine(datasets, fields: GridFields):
    """One dataset from the opened files, along time (checked by :func:`open_grid`)."""
    import xarray as xr
    if len(datasets) == 1:
        ds = datasets[0][1]
    else:
        if fields.time_dim is None:
            raise ReaderError(f"{datasets[0][0]}: several input files are combined along time, "
                              "but the temperature has no time dimension", field="input")
        for path, d in datasets[1:]:
            for dim in fields.horizontal_dims + (fields.level_dim,):
                if d.sizes.get(dim) != datasets[0][1].sizes[dim]:
                    raise ReaderError(f"{path}: dimension {dim!r} has size {d.sizes.get(dim)}, "
                                      f"expected {datasets[0][1].sizes[dim]} as in "
                                      f"{datasets[0][0]}", field=dim)
        ds = xr.concat([d for _, d in datasets], dim=fields.time_dim, data_vars="minimal",
                       coords="minimal", compat="override", join="override",
                       combine_attrs="override")
        ds = ds.sortby(fields.time_dim)
    return ds


# --------------------------------------------------------------------------------------------
# Writing
# --------------------------------------------------------------------------------------------

def encoding_for(out: xr.Dataset, complevel: int = 4) -> dict:
    """zlib-compressed, chunked NetCDF-4 encoding matching the dask chunks."""
    enc = {}
    for name, var in out.data_vars.items():
        e = {"zlib": True, "complevel": complevel, "shuffle": True}
        if var.chunks:
            e["chunksizes"] = tuple(int(c[0]) for c in var.chunks)
        if var.dtype == np.uint8:
            e["_FillValue"] = np.uint8(TYPE_FILL)
        elif np.issubdtype(var.dtype, np.floating):
            e["_FillValue"] = np.float32(np.nan)
            e["dtype"] = "float32"
        else:
            e["_FillValue"] = None
        if var.ndim == 0:
            e = {"_FillValue": None}
        enc[name] = e
    return enc


#: glibc ``mallopt`` parameters (malloc.h): M_TRIM_THRESHOLD and M_MMAP_THRESHOLD.
_M_TRIM_THRESHOLD, _M_MMAP_THRESHOLD = -1, -3


def retain_freed_memory(mmap_threshold_bytes: int = 32 << 20,
                        trim_threshold_bytes: int = 128 << 20) -> bool:
    """Let the C allocator keep freed memory for reuse instead of handing it back to the
    operating system after every batch (glibc ``mallopt``; a process-wide setting, used by
    ``ptype grid`` for its own process).

    The engine allocates and frees the same megabyte-sized arrays batch after batch; by
    default glibc returns such memory to the kernel and takes it back on the next batch,
    page by page.  With 20 members that cost 1.4-1.9 us of system time per member column
    (about 9 % of the work) and nothing with these settings (measured, docs/performance.md).
    Resident memory stays bounded: at most ``trim_threshold_bytes`` of free memory is kept
    per allocator arena.  Returns False where it does not apply (no glibc).
    """
    import ctypes
    try:
        mallopt = ctypes.CDLL("libc.so.6").mallopt
    except (OSError, AttributeError):
        return False
    mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
    return bool(mallopt(_M_MMAP_THRESHOLD, int(mmap_threshold_bytes))
                and mallopt(_M_TRIM_THRESHOLD, int(trim_threshold_bytes)))


def history_line(argv: Iterable[str] | None = None) -> str:
    """CF ``history`` entry: UTC time stamp and the command line (or the API call)."""
    from ptype import __version__
    now = datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    if argv is None:
        return f"{now}: ptype.grid.write_grid (ptype {__version__})"
    return f"{now}: ptype grid {' '.join(argv)}".rstrip()


def write_grid(out: xr.Dataset, path: str | os.PathLike, *, progress: bool = False,
               client: Any = None, argv: Iterable[str] | None = None) -> None:
    """Compute (with a progress bar when asked) and write a diagnosed dataset to NetCDF-4."""
    line = history_line(argv)
    prior = out.attrs.get("history")
    out.attrs["history"] = f"{line}\n{prior}" if prior else line
    tmp = f"{path}.part"
    delayed = out.to_netcdf(tmp, engine="netcdf4", format="NETCDF4", encoding=encoding_for(out),
                            compute=False)
    try:
        if client is not None:
            future = client.compute(delayed)
            if progress:
                import contextlib

                from distributed import progress as dist_progress
                with contextlib.redirect_stdout(sys.stderr):  # the bar, like dask's, on stderr
                    dist_progress(future)
                print(file=sys.stderr)
            future.result()
        elif progress:
            from dask.diagnostics import ProgressBar
            with ProgressBar(out=sys.stderr):
                delayed.compute()
        else:
            delayed.compute()
        os.replace(tmp, path)  # never leave a half-written file under the requested name
    finally:
        if os.path.exists(tmp):
            os.remove(tmp)


def summary(path: str | os.PathLike) -> dict:
    """Counts of each type in a written file (for the command's closing lines)."""
    import xarray as xr
    # engine named: letting xarray guess imports every installed backend (1.5 s measured).
    with xr.open_dataset(path, engine="netcdf4") as ds:
        v = ds["precipitation_type"].values
        meanings = ds["precipitation_type"].attrs["flag_meanings"].split()
        values = list(np.atleast_1d(ds["precipitation_type"].attrs["flag_values"]))
    finite = v[np.isfinite(v)] if v.dtype.kind == "f" else v
    counts = {}
    for val, meaning in zip(values, meanings):
        k = int(np.count_nonzero(finite == val))
        if k:
            counts[meaning] = k
    missing = int(v.size - sum(counts.values()))
    if missing:
        counts["not_diagnosed"] = missing
    return counts


def format_seconds(s: float) -> str:
    """A duration for people: ``12.3 s`` under two minutes, else ``4 min 7 s``."""
    return f"{s:.1f} s" if s < 120 else f"{math.floor(s / 60)} min {s % 60:.0f} s"
