"""The time-height view of a site's forecast: :func:`draw_time_height`.

The stored forecast profiles of one issue, side by side in time: air temperature filled in
bands of 2 K, wet-bulb temperature as labelled lines, the 0 degC isotherm of the air bold
and of the wet bulb dashed, layers above 0 degC hatched (the warm layers that melt snow,
Bourgouin 2000 [Bourgouin2000]), and under it the hourly type strip of the site's timeline
in our palette with each type's letters.  A winter forecaster reads a storm from this
picture: the warm nose arriving aloft, the cold layer under it thinning, the strip turning
from SN to PL to FZRA.  Layout and colours are ours (:mod:`ptype.style`).
"""

from __future__ import annotations

import io
from collections.abc import Mapping, Sequence
from datetime import datetime
from typing import Any

import numpy as np

from ptype.constants import CAUTION
from ptype.errors import OptionError
from ptype.style import FIGURE, UI, type_style

FORMATS = {"png": "image/png", "svg": "image/svg+xml"}
#: Height range drawn, m above the ground: precipitation type is decided in the lowest
#: 3-4 km in winter (common practice).
TOP_M = 4000.0
#: Air-temperature bands, degC.
BANDS_C = np.arange(-30.0, 16.0, 2.0)


def columns_on_heights(profiles: Sequence[Any], top_m: float = TOP_M,
                       n: int = 81) -> dict[str, np.ndarray]:
    """Temperature and wet-bulb of each profile on one grid of heights above its ground.

    Returns ``height_m`` ``(n,)``, ``temperature_c`` and ``wetbulb_c`` ``(time, n)`` (NaN
    above a profile's top) and ``time`` (datetime64, ``(time,)``).
    """
    heights = np.linspace(0.0, top_m, n)
    temps, wets, times = [], [], []
    for pr in profiles:
        z = np.asarray(pr.height_m, dtype=float)
        agl = z - z[0]
        order = np.argsort(agl)
        inside = heights <= agl.max()
        for out, values in ((temps, pr.temperature_c), (wets, pr.wetbulb_c("isobaric"))):
            row = np.full(n, np.nan)
            row[inside] = np.interp(heights[inside], agl[order], np.asarray(values)[order])
            out.append(row)
        times.append(np.datetime64(pr.valid_time.replace(tzinfo=None), "s"))
    return {"height_m": heights, "temperature_c": np.array(temps), "wetbulb_c": np.array(wets),
            "time": np.array(times)}


def draw_time_height(profiles: Sequence[Any], steps: Sequence[Mapping[str, Any]], fmt: str = "png",
                     *, title: str = "", start: datetime | None = None,
                     end: datetime | None = None) -> bytes:
    """Draw the view and return the image bytes.

    Parameters
    ----------
    profiles : sequence of :class:`ptype.profile.Profile`
        One issue of forecast profiles, each with a ``valid_time``.
    steps : sequence of mappings
        The timeline's steps (``valid_time`` ISO text, ``ptype`` code), drawn as the strip.
    fmt : {"png", "svg"}
    title : text of the first line of the title (the site's name).
    start, end : the time span shown (default: the profiles' span).
    """
    if fmt not in FORMATS:
        raise OptionError(f"format {fmt!r} is not supported; expected png or svg", field="format")
    if not profiles:
        raise OptionError("profiles: none stored for this site", field="profiles")
    data = columns_on_heights(sorted(profiles, key=lambda p: p.valid_time))
    fig = _figure(data, steps, title, start, end)
    buf = io.BytesIO()
    import matplotlib
    with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": "ptype",
                                "hatch.color": FIGURE["text"], "hatch.linewidth": 0.6}):
        fig.savefig(buf, format=fmt, dpi=100, facecolor=FIGURE["background"],
                    metadata={"Title": f"Time-height view {title}".strip(),
                              "Description": CAUTION})
    return buf.getvalue()


def _time_axis(times: np.ndarray) -> np.ndarray:
    """Profile times as matplotlib date numbers; one profile is widened to an hour."""
    from matplotlib.dates import date2num
    x = date2num(times.astype("datetime64[s]").astype(datetime))
    return x if x.size > 1 else np.array([x[0] - 1 / 48, x[0] + 1 / 48])


def _figure(data: dict, steps, title: str, start, end):
    from matplotlib.dates import DateFormatter, HourLocator, date2num
    from matplotlib.figure import Figure

    x = _time_axis(data["time"])
    t, tw = data["temperature_c"], data["wetbulb_c"]
    if t.shape[0] == 1:
        t, tw = np.vstack([t, t]), np.vstack([tw, tw])
    km = data["height_m"] / 1000.0
    fig = Figure(figsize=(9.0, 5.6))
    ax = fig.add_axes((0.08, 0.30, 0.76, 0.56))
    strip = fig.add_axes((0.08, 0.155, 0.76, 0.10), sharex=ax)
    filled = ax.contourf(x, km, t.T, levels=BANDS_C, cmap=_band_colours(), extend="both")
    ax.contourf(x, km, t.T, levels=[0.0, 60.0], colors="none", hatches=["///"])
    lines = ax.contour(x, km, tw.T, levels=[v for v in np.arange(-20.0, 12.0, 4.0) if v],
                       colors=FIGURE["wetbulb"], linewidths=0.8, linestyles="solid")
    ax.clabel(lines, fmt="%.0f", fontsize=7)
    ax.contour(x, km, t.T, levels=[0.0], colors=FIGURE["zero"], linewidths=2.2)
    ax.contour(x, km, tw.T, levels=[0.0], colors=FIGURE["wetbulb"], linewidths=1.8,
               linestyles="dashed")
    ax.set_ylabel("Height above ground (km)", fontsize=9, color=FIGURE["text"])
    ax.set_ylim(0, km[-1])
    ax.tick_params(labelsize=8, colors=FIGURE["text"], labelbottom=False)
    bar = fig.colorbar(filled, cax=fig.add_axes((0.86, 0.30, 0.018, 0.56)))
    bar.set_label("Air temperature (\u00b0C)", fontsize=8)
    bar.ax.tick_params(labelsize=7)
    _strip(strip, steps)
    lo = date2num(start) if start is not None else x[0]
    hi = date2num(end) if end is not None else x[-1]
    ax.set_xlim(min(lo, hi - 1 / 24) - 1 / 48, hi + 1 / 48)  # half a cell each side
    strip.xaxis.set_major_locator(HourLocator(byhour=range(0, 24, 3)))
    strip.xaxis.set_major_formatter(DateFormatter("%H:%M\n%d %b"))
    strip.tick_params(labelsize=8, colors=FIGURE["text"])
    strip.set_xlabel("Valid time (UTC)", fontsize=9, color=FIGURE["text"])
    fig.text(0.08, 0.95, f"{title} \u2014 forecast column and type by the hour".lstrip(" \u2014"),
             fontsize=12, fontweight="bold", color=FIGURE["text"], va="bottom")
    fig.text(0.08, 0.905, "Filled: air temperature; lines: wet-bulb (\u00b0C); bold line: "
             "0 \u00b0C; dashed: wet-bulb 0 \u00b0C; hatched: above 0 \u00b0C (melting).",
             fontsize=8, color=FIGURE["text-soft"], va="bottom")
    fig.text(0.5, 0.015, CAUTION, fontsize=7, color=FIGURE["text-soft"], ha="center",
             style="italic", wrap=True)
    return fig


def _band_colours():
    """Bands below 0 degC from the refreezing colour to white, above it from white to the
    melting colour, so the change of colour sits at 0 degC (plus the two extensions)."""
    from matplotlib.colors import ListedColormap, to_rgb
    edges = BANDS_C[:-1] + 1.0
    cold_end, warm_end = np.array(to_rgb(FIGURE["refreeze"])), np.array(to_rgb(FIGURE["melt"]))
    white = np.array(to_rgb(UI["white"]))
    colours = []
    for mid in edges:
        if mid < 0:
            w = min(-mid / abs(BANDS_C[0]), 1.0)
            colours.append(white + (cold_end - white) * (0.15 + 0.85 * w))
        else:
            w = min(mid / BANDS_C[-1], 1.0)
            colours.append(white + (warm_end - white) * (0.2 + 0.8 * w))
    return ListedColormap(colours).with_extremes(under=cold_end, over=warm_end)


def _strip(ax, steps) -> None:
    """The hourly types as coloured, patterned cells with their letters."""
    from matplotlib.dates import date2num
    from matplotlib.patches import Rectangle

    from ptype.clock import parse_time
    ax.set_yticks([])
    ax.set_ylim(0, 1)
    ax.set_ylabel("type", fontsize=8, rotation=0, ha="right", va="center",
                  color=FIGURE["text"])
    if not steps:
        return
    x = np.array([date2num(parse_time(s["valid_time"])) for s in steps])
    width = float(np.median(np.diff(x))) if x.size > 1 else 1 / 24
    for xi, step in zip(x, steps):
        style = type_style(step["ptype"])
        ax.add_patch(Rectangle((xi - width / 2, 0), width, 1, facecolor=style.colour,
                               edgecolor=FIGURE["background"], linewidth=0.5,
                               hatch=style.hatch or None))
        ax.text(xi, 0.5, style.code, ha="center", va="center", fontsize=6,
                rotation=90 if len(style.code) > 2 else 0, color=style.ink, fontweight="bold",
                bbox={"boxstyle": "square,pad=0.1", "facecolor": style.colour,
                      "edgecolor": "none"})
