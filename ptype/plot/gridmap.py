"""Map of a diagnosed precipitation-type grid (PNG), in ptype's own palette.

Reads the output of :func:`ptype.grid.diagnose_dataset` (or a file written by
``ptype grid``): the ``precipitation_type`` variable with its CF ``flag_values``
(WMO GRIB2 code table 4.201) is drawn as categories with a legend; the
caution every human-facing output carries is printed under the map.
"""

from __future__ import annotations

import os
from typing import TYPE_CHECKING

import numpy as np

from ptype.codes import GRIB2_4201_MEANINGS
from ptype.errors import OptionError
from ptype.style import FIGURE, GRIB2_STYLE

if TYPE_CHECKING:
    import xarray as xr

#: Colour of each GRIB2 4.201 value on the map: the one palette (ptype/style/palette.py),
#: each value drawn as the ptype type it stands for, with that type's hatching as a
#: second cue so the map reads without colour.
PALETTE = {value: style.colour for value, style in GRIB2_STYLE.items()}
MISSING_COLOUR = FIGURE["missing"]


def _label(meaning: str) -> str:
    return meaning.replace("_", " ")


def _hatch_types(ax, x, y, index: np.ndarray, codes: list[int]) -> None:
    """Each patterned type's area hatched in its text colour (the second cue)."""
    for i, c in enumerate(codes):
        style = GRIB2_STYLE[c]
        mask = index == i
        if not style.hatch or not mask.any():
            continue
        with matplotlib_rc({"hatch.color": style.ink, "hatch.linewidth": 0.5}):
            ax.contourf(x, y, mask.astype(float), levels=[0.5, 1.5], colors="none",
                        hatches=[style.hatch])


def matplotlib_rc(settings: dict):
    """matplotlib's rc_context (imported late: matplotlib is an optional extra)."""
    import matplotlib
    return matplotlib.rc_context(settings)


def plot_types(ds: xr.Dataset, path: str | os.PathLike, *, time_index: int = 0,
               title: str | None = None) -> str:
    """Draw ``ds.precipitation_type`` (one time) to ``path`` (PNG); returns the path."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.colors import BoundaryNorm, ListedColormap
    from matplotlib.patches import Patch

    from ptype.constants import CAUTION

    if "precipitation_type" not in ds:
        raise OptionError("plot: the dataset has no precipitation_type variable", field="plot")
    var = ds["precipitation_type"]
    time_dims = [d for d in var.dims
                 if d in ds.coords and np.issubdtype(ds[d].dtype, np.datetime64)]
    when = ""
    if time_dims:
        n = var.sizes[time_dims[0]]
        if not -n <= time_index < n:
            raise OptionError(f"plot time index {time_index}: expected 0 to {n - 1}",
                              field="plot_time")
        var = var.isel({time_dims[0]: time_index})
        when = np.datetime_as_string(var[time_dims[0]].values, unit="m").replace("T", " ") + " UTC"
    if var.ndim != 2:
        raise OptionError(f"plot: expected a 2-D field after choosing the time, got dims "
                          f"{var.dims}", field="plot")
    values = np.asarray(var.values, dtype=np.float64)
    values = np.where(np.isfinite(values) & (values != 255), values, -1)
    codes = sorted(PALETTE)
    # Map each code to a category index; missing -> last category.
    index = np.full(values.shape, len(codes), dtype=np.int16)
    for i, c in enumerate(codes):
        index[values == c] = i
    cmap = ListedColormap([PALETTE[c] for c in codes] + [MISSING_COLOUR])
    norm = BoundaryNorm(np.arange(-0.5, len(codes) + 1.5), cmap.N)

    ydim, xdim = var.dims
    x = ds[xdim].values if xdim in ds.coords else np.arange(var.sizes[xdim])
    y = ds[ydim].values if ydim in ds.coords else np.arange(var.sizes[ydim])
    aspect = len(y) / max(len(x), 1)
    map_width_in = 6.2
    fig, ax = plt.subplots(figsize=(10.0, min(12.0, max(3.5, map_width_in * aspect) + 1.8)),
                           dpi=110)
    ax.pcolormesh(x, y, index, cmap=cmap, norm=norm, shading="nearest")
    _hatch_types(ax, x, y, index, codes)
    ax.set_aspect("equal" if xdim in ds.coords and ydim in ds.coords else "auto")

    def axis_label(dim):
        if dim in ds.coords:
            c = ds[dim]
            name = c.attrs.get("long_name") or c.attrs.get("standard_name") or dim
            units = c.attrs.get("units")
            return f"{name} ({units})" if units else name
        return dim

    ax.set_xlabel(axis_label(xdim))
    ax.set_ylabel(axis_label(ydim))
    present = [i for i in range(len(codes) + 1) if np.any(index == i)]
    handles = []
    for i in present:
        if i == len(codes):
            handles.append(Patch(facecolor=MISSING_COLOUR, edgecolor=FIGURE["edge"],
                                 label="not diagnosed"))
        else:
            c = codes[i]
            share = 100.0 * np.count_nonzero(index == i) / index.size
            style = GRIB2_STYLE[c]
            handles.append(Patch(facecolor=style.colour, edgecolor=style.ink,
                                 hatch=style.hatch or None, linewidth=0.6,
                                 label=f"{_label(GRIB2_4201_MEANINGS[c])} ({share:.0f} %)"))
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False,
              title="type at the surface")
    head = title or "Precipitation type at the surface (ptype consensus)"
    ax.set_title(f"{head}\n{when}" if when else head, fontsize=11)
    fig.text(0.01, 0.01, CAUTION, fontsize=7, color=FIGURE["text-soft"], wrap=True)
    fig.tight_layout(rect=(0, 0.05, 1, 1))
    fig.savefig(path)
    plt.close(fig)
    return str(path)
