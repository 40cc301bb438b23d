"""``ptype grid IN.nc [IN2.nc ...] -o OUT.nc``: diagnose every column of model output."""

from __future__ import annotations

import argparse
import os
import sys
import time

from ptype.constants import CAUTION

#: Seconds to wait for a --scheduler to answer.
CONNECT_TIMEOUT_S = 10


def register(sub: argparse._SubParsersAction) -> None:
    """Add the ``grid`` command to the sub-command parsers ``sub``."""
    p = sub.add_parser(
        "grid", help="diagnose every column of model output (CF NetCDF or GRIB2) on pressure "
                     "levels",
        description="Read CF NetCDF or GRIB2 model output on pressure levels (NetCDF "
                    "variables found by CF standard_name, GRIB2 fields by their WMO parameter "
                    "numbers; several files are combined along time; an ensemble member "
                    "dimension gives probabilities over the members), diagnose the "
                    "precipitation type of every column in chunks, and write CF-1.13 NetCDF with "
                    "the type as WMO GRIB2 code table 4.201 values, layer energies, the "
                    "wet-bulb-zero height and, with --members, per-type probabilities.",
        epilog="Example: ptype grid soundings_demo/grid/demo_grid.nc -o ptype_grid.nc "
               "--members 20 --seed 1 --plot ptype_grid.png")
    p.add_argument("inputs", nargs="+", metavar="IN.nc", help="model output file(s): NetCDF "
                   "or GRIB2")
    p.add_argument("-o", "--output", required=True, metavar="OUT.nc",
                   help="file to write: NetCDF, or GRIB2 (the type only, product 0/1/19) when "
                        "it ends in .grib2/.grb2")
    p.add_argument("--members", type=int, default=0, metavar="N",
                   help="Monte-Carlo members per column for probabilities (default 0: none; "
                        "on an ensemble they widen every ensemble member)")
    p.add_argument("--seed", type=int, default=None, metavar="S",
                   help="seed for the members (reproducible for the same seed and chunks)")
    p.add_argument("--chunks", default=None, metavar="DIM=SIZE,...",
                   help="chunk sizes by dimension name, e.g. y=256,x=256 (default: about "
                        "4096 columns per chunk, one time step)")
    p.add_argument("--scheduler", default=None, metavar="ADDRESS",
                   help="run on a dask.distributed scheduler at ADDRESS (e.g. tcp://host:8786)")
    p.add_argument("--methods", default=None, metavar="NAME,...",
                   help="restrict to these methods (default: all)")
    p.add_argument("--per-method", action="store_true",
                   help="also write one type variable per method")
    p.add_argument("--calibration", default=None, metavar="FILE",
                   help="calibrate the probabilities with FILE (from ptype calibrate)")
    p.add_argument("--fractions", action="store_true",
                   help="also write the particle model's mass fractions at the ground (snow, "
                        "melting snow, liquid, refrozen ice)")
    p.add_argument("--plot", default=None, metavar="MAP.png", help="also draw a map of the type")
    p.add_argument("--plot-time", type=int, default=None, metavar="INDEX",
                   help="time step drawn by --plot, counted from 0 (default 0, the first)")
    p.add_argument("--progress", action=argparse.BooleanOptionalAction, default=None,
                   help="show a progress bar (default: when standard error is a terminal)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """Diagnose a model grid and write the NetCDF result; exit status."""
    from ptype import grid
    from ptype.grid import io as grid_io

    check_options(args)
    progress = sys.stderr.isatty() if args.progress is None else args.progress
    chunks = grid.parse_chunks(args.chunks)
    calibration = None
    if args.calibration:
        from ptype.engine.calibration import Calibration
        calibration = Calibration.load(args.calibration)
    start = time.perf_counter()
    ds = grid.open_grid(args.inputs, chunks, members=args.members)  # lazy: reads metadata
    if args.plot:
        _check_plot_time(ds, args.plot_time or 0)
    client = None
    if args.scheduler:
        client = _connect(args.scheduler)
    else:
        grid.retain_freed_memory()  # this process computes: reuse freed memory (see there)
    try:
        out = grid.diagnose_dataset(ds, members=args.members, seed=args.seed,
                                    methods=args.methods, per_method=args.per_method,
                                    fractions=args.fractions, calibration=calibration)
        if _is_grib_output(args.output):
            counts = _write_grib(out, args)
        else:
            grid.write_grid(out, args.output, progress=progress, client=client,
                            argv=_argv(args))
            counts = grid.summary(args.output)
        elapsed = time.perf_counter() - start
    finally:
        if client is not None:
            client.close()
    total = sum(counts.values())
    print(f"wrote {args.output}: {total} columns in {grid_io.format_seconds(elapsed)}")
    for meaning, k in sorted(counts.items(), key=lambda kv: -kv[1]):
        print(f"  {meaning.replace('_', ' '):<28} {k:>10}  {100.0 * k / total:5.1f} %")
    if args.plot and _is_grib_output(args.output):
        from ptype.plot.gridmap import plot_types
        plot_types(out, args.plot, time_index=args.plot_time or 0)
        print(f"map: {args.plot}")
    elif args.plot:
        import xarray as xr

        from ptype.plot.gridmap import plot_types
        with xr.open_dataset(args.output, engine="netcdf4", mask_and_scale=False) as written:
            plot_types(written, args.plot, time_index=args.plot_time or 0)
        print(f"map: {args.plot}")
    print(CAUTION)
    return 0


def check_options(args: argparse.Namespace) -> None:
    """Every option and output path, checked before any work (one line, exit status 2)."""
    from ptype.cli.checks import distinct, figure_file, writable_file
    from ptype.errors import OptionError
    for path in args.inputs:
        if not os.path.isfile(path):
            raise OptionError(f"{path}: no such file", field="inputs")
    writable_file(args.output, "--output")
    if args.plot:
        figure_file(args.plot, "--plot")
    elif args.plot_time is not None:
        raise OptionError("--plot-time chooses the time step of --plot; add --plot MAP.png",
                          field="plot_time")
    if args.plot_time is not None and args.plot_time < 0:
        raise OptionError(f"--plot-time {args.plot_time}: expected 0 or more",
                          field="plot_time")
    distinct({"--output": args.output, "--plot": args.plot}, args.inputs)
    if args.members < 0:
        raise OptionError(f"--members {args.members}: expected 0 or more", field="members")
    if args.methods:
        from ptype.engine.methods import get_method
        for name in (m.strip() for m in args.methods.split(",")):
            get_method(name)  # an unknown name is an OptionError naming it
    if args.calibration and not os.path.isfile(args.calibration):
        raise OptionError(f"--calibration {args.calibration}: no such file",
                          field="calibration")


def _check_plot_time(ds, index: int) -> None:
    """Refuse a ``--plot-time`` beyond the time steps of the (lazily opened) input."""
    from ptype.errors import OptionError
    n = next((ds.sizes[d] for d in ds.dims if d in ds.coords
              and str(ds[d].dtype).startswith("datetime64")), 1)
    if index >= n:
        raise OptionError(f"--plot-time {index}: the input has {n} time step"
                          f"{'s' if n != 1 else ''} (0 to {n - 1})", field="plot_time")


def _is_grib_output(path: str) -> bool:
    from ptype.grid.grib import GRIB_EXTENSIONS
    return path.lower().endswith(GRIB_EXTENSIONS)


def _write_grib(out, args: argparse.Namespace) -> dict[str, int]:
    """Compute the result and write the type as GRIB2 (0/1/19, code table 4.201), on the
    grid of the first input when it is GRIB; the counts of each type."""
    import numpy as np

    from ptype.grid import grib
    from ptype.grid.dataset import TYPE_FILL
    out = out.compute()
    template = grib.first_message(args.inputs[0]) if grib.is_grib(args.inputs[0]) else None
    grib.write_type_grib2(out, args.output, template)
    var = out["precipitation_type"]
    values = np.asarray(var.values)
    meanings = str(var.attrs["flag_meanings"]).split()
    counts = {m: int(np.count_nonzero(values == v))
              for v, m in zip(np.atleast_1d(var.attrs["flag_values"]), meanings)}
    counts = {m: k for m, k in counts.items() if k}
    missing = int(np.count_nonzero(values == TYPE_FILL))
    if missing:
        counts["not_diagnosed"] = missing
    return counts


def _argv(args: argparse.Namespace) -> list[str]:
    parts = list(args.inputs) + ["-o", args.output]
    if args.members:
        parts += ["--members", str(args.members)]
    if args.seed is not None:
        parts += ["--seed", str(args.seed)]
    if args.chunks:
        parts += ["--chunks", args.chunks]
    if args.methods:
        parts += ["--methods", args.methods]
    if args.per_method:
        parts.append("--per-method")
    if args.fractions:
        parts.append("--fractions")
    return parts


def _connect(address: str):
    from ptype.errors import OptionError
    try:
        from distributed import Client
    except ImportError:  # pragma: no cover - distributed is a declared dependency
        raise OptionError("--scheduler needs the 'distributed' package",
                          field="scheduler") from None
    try:
        return Client(address, timeout=f"{CONNECT_TIMEOUT_S}s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise OptionError(f"--scheduler {address}: cannot connect ({exc})",
                          field="scheduler") from None
