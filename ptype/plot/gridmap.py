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

if TYPE_CHECKING:
    import xarray as xr

#: ptype's palette for GRIB2 4.201 values (ours): liquid in teals, frozen in indigo/violet,
#: ice pellets and mixed ice in ambers, freezing types in crimson and rose so the most
#: hazardous stand out; no precipitation in a pale stone colour.
PALETTE = {
    0: "#eeebe3",    # no precipitation
    1: "#1b7f79",    # rain
    3: "#a50f15",    # freezing rain
    4: "#b35806",    # mixed/ice (rain or freezing rain with ice pellets)
    5: "#4b3f8f",    # snow
    7: "#9e9ac8",    # rain and snow
    8: "#e6a117",    # ice pellets
    11: "#8cc7b9",   # drizzle
    12: "#f768a1",   # freezing drizzle
}
MISSING_COLOUR = "#9a9a9a"


def _label(meaning: str) -> str:
    return meaning.replace("_", " ")


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
            handles.append(Patch(facecolor=MISSING_COLOUR, edgecolor="#333333",
                                 label="not diagnosed"))
        else:
            c = codes[i]
            share = 100.0 * np.count_nonzero(index == i) / index.size
            handles.append(Patch(facecolor=PALETTE[c], edgecolor="#333333",
                                 label=f"{_label(GRIB2_4201_MEANINGS[c])} ({share:.0f} %)"))
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False,
              title="type at the surface")
    head = title or "Precipitation type at the surface (ptype consensus)"
    ax.set_title(f"{head}\n{when}" if when else head, fontsize=11)
    fig.text(0.01, 0.01, CAUTION, fontsize=7, color="#444444", wrap=True)
    fig.tight_layout(rect=(0, 0.05, 1, 1))
    fig.savefig(path)
    plt.close(fig)
    return str(path)
