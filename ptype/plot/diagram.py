"""The skew-T log-p diagram of a diagnosis: :func:`draw_diagram`.

Drawn with matplotlib's object API (no pyplot state, safe in threads and
server workers) on MetPy's :class:`~metpy.plots.SkewT` axes (May et al. 2022,
Bull. Amer. Meteor. Soc., "MetPy: a meteorological Python library for data analysis
and visualization" - from memory).  The skew-T log-p chart is the usual one of the
trade (isotherms skewed to the right, pressure on a log scale; described in the
U.S. Air Force Air Weather Service report AWS/TR-79/006 - from memory).  The figure shows

* temperature, dew point and wet-bulb temperature against log pressure,
* the 0 degC isotherm,
* each melting (warm) layer and each refreezing (cold) layer below it, shaded
  between the curve and 0 degC and labelled with its area in J/kg (the same
  numbers the methods compared, taken from ``Diagnosis.to_dict()["layers"]``),
* saturated (cloud) layers as a strip on the right edge,
* the surface: a marker on each curve and a box with T, Tw and Td (the surface temperature
  decides freezing rain against rain, so nothing else is drawn over it),
* the energy labels in a column right of the curves with leader lines to their layers,
* a second panel with the lowest 3 km against height above ground (where the refreezing
  layer and the surface decide the type),
* the consensus type and the probabilities in the title, the caution in small print.

The palette and layout are our own.
"""

from __future__ import annotations

import io
import warnings
from typing import Any

import numpy as np

from ptype.constants import CAUTION
from ptype.style import FIGURE

#: Colours of the figure, from the one palette (ptype/style/palette.py).
PALETTE = FIGURE

FORMATS = {"png": "image/png", "svg": "image/svg+xml"}

#: Top of the surface box in the column right of the chart, fraction of the axes height;
#: energy labels start above it.
SURFACE_BOX_TOP = 0.24

#: Upper edge of the drawing, hPa: precipitation type is decided below ~500 hPa (common practice);
#: we show a little more for the cloud tops.
TOP_HPA = 400.0


def draw_diagram(diagnosis_or_profile: Any, fmt: str = "png", *, width_in: float = 7.0,
                 dpi: int = 110) -> bytes:
    """Draw the skew-T log-p diagram and return the image bytes.

    Parameters
    ----------
    diagnosis_or_profile : Diagnosis, dict or Profile
        A :class:`ptype.engine.diagnosis.Diagnosis`, its ``to_dict()`` result, or a bare
        :class:`ptype.profile.Profile` (then only the curves and the air-temperature
        layers are drawn, with no type in the title).
    fmt : {"png", "svg"}
    width_in, dpi : figure width (inches) and raster resolution.

    Raises
    ------
    ptype.errors.OptionError
        For an unknown ``fmt``.
    """
    from ptype.errors import OptionError
    if fmt not in FORMATS:
        raise OptionError(f"format {fmt!r} is not supported; expected png or svg", field="format")
    data = _as_dict(diagnosis_or_profile)
    with warnings.catch_warnings():
        # MetPy's skewed axes still call a helper matplotlib 3.11 deprecated; harmless here.
        warnings.filterwarnings("ignore", message=".*interval_contains.*")
        return _render(data, fmt, width_in, dpi)


def _render(data: dict, fmt: str, width_in: float, dpi: int) -> bytes:
    fig = _figure(data, width_in)
    buf = io.BytesIO()
    metadata = {"Title": " ".join(_title_text(data)[:2])}
    if fmt == "svg":
        metadata = {"Title": metadata["Title"], "Description": CAUTION}
    else:
        metadata["Description"] = CAUTION
    import matplotlib
    # SVG keeps its text as text (searchable, readable by screen readers, smaller).
    with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": "ptype"}):
        fig.savefig(buf, format=fmt, dpi=dpi, facecolor=PALETTE["background"], metadata=metadata)
    return buf.getvalue()


# -- input ------------------------------------------------------------------------------
def _as_dict(obj: Any) -> dict:
    if isinstance(obj, dict):
        return obj
    if hasattr(obj, "to_dict"):
        return obj.to_dict()
    from ptype.profile import Profile
    if isinstance(obj, Profile):
        return _profile_dict(obj)
    raise TypeError(f"expected a Diagnosis, its dict or a Profile, got {type(obj).__name__}")


def _profile_dict(profile) -> dict:
    from ptype.engine.layers import analyse_layers
    p = profile.pressure_hpa[None, :]
    z = profile.height_m[None, :]
    air = analyse_layers(p, z, profile.temperature_c[None, :])
    site = profile.site.model_dump(exclude_none=True) if profile.site is not None else None
    return {
        "profile": {"pressure_hpa": profile.pressure_hpa.tolist(),
                    "height_m": profile.height_m.tolist(),
                    "temperature_c": profile.temperature_c.tolist(),
                    "dewpoint_c": profile.dewpoint_c.tolist(),
                    "wetbulb_c": profile.wetbulb_c("isobaric").tolist()},
        "layers": air.column(0), "cloud_layers": [], "site": site,
        "valid_time": profile.valid_time.isoformat() if profile.valid_time else None,
        "caution": CAUTION,
    }


def _array(values) -> np.ndarray:
    return np.array([np.nan if v is None else v for v in (values or [])], dtype=float)


# -- drawing ----------------------------------------------------------------------------
def _title_text(data: dict) -> tuple[str, str, str]:
    where = []
    site = data.get("site") or {}
    if isinstance(site, dict) and (site.get("name") or site.get("id")):
        where.append(str(site.get("name") or site.get("id")))
    if data.get("valid_time"):
        where.append(str(data["valid_time"]).replace("T", " ").replace("+00:00", "Z"))
    code = data.get("ptype")
    if code:
        head = f"{code} \u2014 {data.get('ptype_label', '')}"
        if data.get("confidence"):
            where.append(f"{data['confidence']} confidence")
    else:
        head = "Sounding"
    probs = data.get("probabilities") or {}
    ranked = sorted(((v, k) for k, v in probs.items() if v and v >= 0.005), reverse=True)
    line3 = "  \u00b7  ".join(f"{k} {v * 100:.0f}%" for v, k in ranked[:5])
    return head, ", ".join(where), ("Probability: " + line3) if line3 else ""


def _figure(data: dict, width_in: float):
    from matplotlib.figure import Figure
    from metpy.plots import SkewT
    from metpy.units import units

    prof = data.get("profile") or {}
    p = _array(prof.get("pressure_hpa"))
    t = _array(prof.get("temperature_c"))
    td = _array(prof.get("dewpoint_c"))
    tw = _array(prof.get("wetbulb_c"))
    ok = np.isfinite(p) & np.isfinite(t)
    p, t = p[ok], t[ok]
    td = td[ok] if td.size == ok.size else np.full_like(t, np.nan)
    tw = tw[ok] if tw.size == ok.size else np.full_like(t, np.nan)

    fig = Figure(figsize=(width_in, width_in * 1.55))
    fig.patch.set_facecolor(PALETTE["background"])
    skew = SkewT(fig, rotation=40, aspect="auto", rect=(0.12, 0.39, 0.62, 0.46))
    ax = skew.ax
    ax.set_facecolor(PALETTE["axes"])

    bottom = float(np.nanmax(p)) + 8 if p.size else 1050.0
    top = max(float(np.nanmin(p)), TOP_HPA) if p.size else TOP_HPA
    if top >= bottom - 50.0:  # a profile that starts high up: show all of it
        top = max(float(np.nanmin(p)) - 10.0, 1.0) if p.size else bottom - 100.0
    view = (p >= top) if p.size else np.zeros(0, bool)
    ax.set_ylim(bottom, top)
    _fit_x(ax, p[view], np.concatenate([t[view], td[view]]), bottom)

    ticks = [t_ for t_ in (1000, 950, 900, 850, 800, 700, 600, 500, 400, 300, 250, 200, 150, 100)
             if top <= t_ <= bottom]
    ax.set_yticks(ticks)
    ax.set_yticklabels([str(x) for x in ticks])
    ax.tick_params(colors=PALETTE["text"], labelsize=9)
    ax.grid(True, color=PALETTE["grid"], linewidth=0.5)
    skew.plot_dry_adiabats(colors=PALETTE["faint"], linewidths=0.6, alpha=1.0)
    skew.plot_moist_adiabats(colors=PALETTE["faint"], linewidths=0.6, linestyles="dotted",
                             alpha=1.0)
    ax.set_xlabel("Temperature (\u00b0C)", color=PALETTE["text"], fontsize=10)
    ax.set_ylabel("Pressure (hPa)", color=PALETTE["text"], fontsize=10)

    # Melting and refreezing areas, between the curve and 0 degC.
    _shade_layers(skew, data.get("layers") or [], p, t)

    ax.axvline(0.0, color=PALETTE["zero"], linewidth=1.6, zorder=4,
               label="0 \u00b0C isotherm")
    if p.size:
        skew.plot(p * units.hPa, t * units.degC, color=PALETTE["temperature"], linewidth=2.4,
                  label="Temperature", zorder=6)
        if np.isfinite(td).any():
            skew.plot(p * units.hPa, td * units.degC, color=PALETTE["dewpoint"], linewidth=2.0,
                      label="Dew point", zorder=5)
        if np.isfinite(tw).any():
            skew.plot(p * units.hPa, tw * units.degC, color=PALETTE["wetbulb"], linewidth=1.6,
                      linestyle=(0, (5, 2)), label="Wet-bulb", zorder=5)

    _cloud_strip(ax, data.get("cloud_layers") or [], bottom, top)
    if p.size:
        _surface_marker(skew, p[0], t[0], tw[0], td[0])

    legend = ax.legend(loc="upper left", fontsize=8.5, frameon=True, framealpha=0.92,
                       edgecolor=PALETTE["grid"])
    legend.set_zorder(10)
    _low_panel(fig, prof, data.get("layers") or [])

    head, where, probs = _title_text(data)
    fig.text(0.12, 0.955, head, fontsize=15, fontweight="bold", color=PALETTE["text"],
             ha="left", va="bottom")
    fig.text(0.12, 0.935, where, fontsize=10, color=PALETTE["text-soft"], ha="left", va="bottom")
    fig.text(0.12, 0.915, probs, fontsize=10.5, color=PALETTE["text"], ha="left", va="bottom")
    fig.text(0.12, 0.875, "Shaded: warm = melting (air above 0 \u00b0C), cool = refreezing\n"
             "(below 0 \u00b0C under a melting layer); labels give the area in J/kg.",
             fontsize=8.5, color=PALETTE["text-soft"], ha="left", va="bottom")
    caution = data.get("caution") or CAUTION
    fig.text(0.5, 0.008, caution, fontsize=7.5, color=PALETTE["text-soft"], ha="center",
             va="bottom", wrap=True, style="italic")
    return fig


def _surface_marker(skew, p0: float, t0: float, tw0: float, td0: float) -> None:
    """Markers on the three curves at the surface and a box with their values, placed
    right of the curves with a leader line to the temperature marker."""
    ax = skew.ax
    for value, key, marker in ((t0, "temperature", "o"), (tw0, "wetbulb", "s"),
                               (td0, "dewpoint", "D")):
        if np.isfinite(value):
            ax.plot([value], [p0], marker=marker, markersize=7, color=PALETTE[key],
                    markeredgecolor=PALETTE["axes"], zorder=9, clip_on=False)
    parts = [f"T {t0:.1f} \u00b0C"]
    parts += [f"{name} {v:.1f} \u00b0C" for name, v in (("Tw", tw0), ("Td", td0))
              if np.isfinite(v)]
    # In the column right of the chart, at its foot: nothing is drawn over the surface.
    ax.annotate(f"Surface {p0:.0f} hPa\n" + "\n".join(parts), xy=(t0, p0),
                xycoords="data", xytext=(1.03, 0.0), textcoords="axes fraction",
                ha="left", va="bottom", fontsize=9, color=PALETTE["text"], zorder=11,
                annotation_clip=False, gid="surface-values",
                bbox={"boxstyle": "round,pad=0.3", "facecolor": PALETTE["axes"],
                      "edgecolor": PALETTE["temperature"]},
                arrowprops={"arrowstyle": "-", "color": PALETTE["temperature"],
                            "linewidth": 0.9})


def _low_panel(fig, prof: dict, layers: list[dict]) -> None:
    """The lowest 3 km against height above ground: T, Tw, Td, 0 degC, warm layers."""
    z = _array(prof.get("height_m"))
    if z.size < 2 or not np.isfinite(z[0]):
        return
    agl_km = (z - z[0]) / 1000.0
    ax = fig.add_axes((0.12, 0.07, 0.62, 0.22))
    ax.set_facecolor(PALETTE["axes"])
    low = agl_km <= 3.05
    t = _array(prof.get("temperature_c"))
    for key, label, style in (("temperature_c", "T", "-"), ("wetbulb_c", "Tw", "--"),
                              ("dewpoint_c", "Td", "-")):
        values = _array(prof.get(key))
        colour = PALETTE[{"temperature_c": "temperature", "wetbulb_c": "wetbulb",
                          "dewpoint_c": "dewpoint"}[key]]
        if values.size == z.size and np.isfinite(values[low]).any():
            ax.plot(values[low], agl_km[low], style, color=colour, linewidth=2, label=label)
    ax.fill_betweenx(agl_km[low], 0, t[low], where=t[low] > 0, color=PALETTE["melt"],
                     alpha=0.5, linewidth=0)
    # Cold air counts as refreezing only under a melting layer (as on the chart above).
    warm_heights = agl_km[low][t[low] > 0]
    if warm_heights.size:
        under = t[low] < 0
        under &= agl_km[low] <= warm_heights.max()
        ax.fill_betweenx(agl_km[low], 0, t[low], where=under, color=PALETTE["refreeze"],
                         alpha=0.35, linewidth=0)
    ax.axvline(0.0, color=PALETTE["zero"], linewidth=1.4)
    ax.set_ylim(0, 3)
    ax.grid(True, color=PALETTE["grid"], linewidth=0.5)
    ax.set_xlabel("Temperature (\u00b0C)", fontsize=10, color=PALETTE["text"])
    ax.set_ylabel("Height above\nground (km)", fontsize=10, color=PALETTE["text"])
    ax.tick_params(labelsize=9, colors=PALETTE["text"])
    ax.set_title("Lowest 3 km", fontsize=10.5, loc="left", color=PALETTE["text"])
    ax.legend(loc="center left", bbox_to_anchor=(1.01, 0.5), fontsize=9, frameon=False)
    _fraction_panel(fig, ax, prof, agl_km, low)


def _fraction_panel(fig, low_ax, prof: dict, agl_km: np.ndarray, low: np.ndarray) -> None:
    """Beside the lowest 3 km: the particle model's melted and refrozen mass fractions at
    each level (:mod:`ptype.engine.particles`), on the same heights, so the melting and
    refreezing the energies above describe can be read as what happens to the falling mass."""
    melted = _array(prof.get("melted_fraction"))
    refrozen = _array(prof.get("refrozen_fraction"))
    if melted.size != agl_km.size or not np.isfinite(melted[low]).any():
        return
    ax = fig.add_axes((0.845, 0.07, 0.125, 0.22), sharey=low_ax)
    ax.set_facecolor(PALETTE["axes"])
    ax.plot(melted[low], agl_km[low], "-", color=PALETTE["melt"], linewidth=2.2, label="melted")
    if refrozen.size == agl_km.size and np.isfinite(refrozen[low]).any():
        ax.plot(refrozen[low], agl_km[low], "--", color=PALETTE["refreeze"], linewidth=2.2,
                label="refrozen")
    ax.set_xlim(-0.02, 1.02)
    ax.set_xticks([0.0, 0.5, 1.0])
    ax.grid(True, color=PALETTE["grid"], linewidth=0.5)
    ax.tick_params(labelsize=8, colors=PALETTE["text"], labelleft=False)
    ax.set_xlabel("Mass fraction", fontsize=9, color=PALETTE["text"])
    ax.set_title("Particles", fontsize=10, loc="left", color=PALETTE["text"])
    ax.legend(loc="upper right", fontsize=7.5, frameon=True, framealpha=0.9,
              edgecolor=PALETTE["grid"], handlelength=1.6)


def _fit_x(ax, p: np.ndarray, values: np.ndarray, bottom: float) -> None:
    """Choose the temperature range so every point of the curves stays inside the skewed frame.

    On skewed axes a point's horizontal position depends on its pressure; we map each point
    back to the bottom edge (its "effective" temperature there) and fit the limits to those.
    The mapping depends on the limits, so iterate a few times (it converges fast).
    """
    pp = np.concatenate([p, p])
    ok = np.isfinite(values)
    pts = np.column_stack([values[ok], pp[ok]])
    if not len(pts):
        ax.set_xlim(-30, 15)
        return
    lo, hi = float(pts[:, 0].min()), float(pts[:, 0].max())
    ax.set_xlim(lo - 5.0, hi + 8.0)
    for _ in range(8):
        disp = ax.transData.transform(pts)
        y_bottom = ax.transData.transform([(0.0, bottom)])[0, 1]
        back = ax.transData.inverted().transform(np.column_stack([disp[:, 0],
                                                                  np.full(len(disp), y_bottom)]))
        eff = np.concatenate([back[:, 0], [0.0]])
        ax.set_xlim(max(float(eff.min()) - 6.0, -120.0), min(float(eff.max()) + 8.0, 60.0))


def _fine(p: np.ndarray, t: np.ndarray, p_bottom: float, p_top: float):
    """The curve resampled finely in log p between two pressures (for clean shading edges)."""
    grid = np.exp(np.linspace(np.log(p_bottom), np.log(p_top), 80))
    # np.interp needs increasing x: pressures go surface -> top (decreasing).
    order = np.argsort(p)
    return grid, np.interp(grid, p[order], t[order])


def _shade_layers(skew, layers: list[dict], p: np.ndarray, t: np.ndarray) -> None:
    from metpy.units import units
    if p.size < 2:
        return
    warm = [lyr for lyr in layers if lyr.get("kind") == "warm"]
    if not warm:
        return
    highest_warm_top = max(float(lyr.get("top_hpa") or np.inf) for lyr in warm)
    labels: list[tuple[float, str, float, str]] = []
    for lyr in layers:
        kind = lyr.get("kind")
        pb, pt = lyr.get("bottom_hpa"), lyr.get("top_hpa")
        if pb is None or pt is None or not pb > pt:
            continue
        # Cold layers above the highest melting layer are the ordinary cold troposphere,
        # not a refreezing layer: leave them plain.
        if kind == "cold" and pb <= highest_warm_top + 1e-6:
            continue
        grid, curve = _fine(p, t, float(pb), float(pt))
        colour = PALETTE["melt"] if kind == "warm" else PALETTE["refreeze"]
        where = curve > 0 if kind == "warm" else curve < 0
        skew.shade_area(grid * units.hPa, curve * units.degC, 0 * units.degC, where=where,
                        facecolor=colour, alpha=0.55, edgecolor=None, linewidth=0, zorder=2)
        area = lyr.get("area_j_kg")
        if area is None:
            continue
        labels.append((float(np.sqrt(pb * pt)), kind, area, colour))
    _energy_labels(skew.ax, labels)


def _energy_labels(ax, labels: list[tuple[float, str, float, str]]) -> None:
    """Each layer's energy in a column outside the axes, right of the curves, with a leader
    line to the layer's middle on the 0 degC line; labels are spread so none overlap."""
    from matplotlib.transforms import blended_transform_factory
    if not labels:
        return
    y0, y1 = ax.get_ylim()  # bottom (high pressure), top
    span = np.log(y0) - np.log(y1)
    # Positions as fractions of the axis height, pushed apart by at least 0.075 and kept
    # above the surface box at the foot of the column.
    wanted = sorted(((np.log(y0) - np.log(mid)) / span, i) for i, (mid, *_r) in
                    enumerate(labels))
    placed: dict[int, float] = {}
    last = -1.0
    for frac, i in wanted:
        frac = max(frac, last + 0.075, SURFACE_BOX_TOP)
        placed[i] = last = frac
    trans = blended_transform_factory(ax.transAxes, ax.transAxes)
    for i, (mid, kind, area, colour) in enumerate(labels):
        word = "melting" if kind == "warm" else "refreezing"
        ax.annotate(f"{word} {area:.0f} J/kg", xy=(0.0, mid), xycoords="data", gid="energy",
                    xytext=(1.03, min(placed[i], 0.97)), textcoords=trans, fontsize=8.5,
                    color=PALETTE["text"], ha="left", va="center", zorder=8,
                    annotation_clip=False,
                    bbox={"boxstyle": "round,pad=0.25", "facecolor": PALETTE["axes"],
                          "edgecolor": colour},
                    arrowprops={"arrowstyle": "-", "color": colour, "linewidth": 0.9,
                                "shrinkA": 0, "shrinkB": 2})


def _cloud_strip(ax, clouds: list[dict], bottom: float, top: float) -> None:
    first = True
    for c in clouds:
        pb, pt = c.get("bottom_hpa"), c.get("top_hpa")
        if pb is None or pt is None:
            continue
        pb, pt = min(float(pb), bottom), max(float(pt), top)
        if pb <= pt:
            continue
        ax.axhspan(pt, pb, xmin=0.955, xmax=1.0, facecolor=PALETTE["cloud"], alpha=0.75,
                   linewidth=0, zorder=7, label="Cloud (saturated)" if first else None)
        first = False
    ax.text(0.977, 1.005, "cloud", transform=ax.transAxes, fontsize=7, ha="center",
            va="bottom", color=PALETTE["text"])
