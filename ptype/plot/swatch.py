"""The palette as a picture (``docs/images/palette.png``): :func:`draw_swatch`.

One row per type code: its colour with its pattern and letters, its text colour, its label,
and the same swatch as seen with simulated protanopia, deuteranopia and tritanopia
(Machado et al. 2009 [Machado2009], severity 1.0), then the hazard badges.
"""

from __future__ import annotations

import io

from ptype.constants import CAUTION
from ptype.style import FIGURE, HAZARD_STYLES, TYPE_STYLES
from ptype.style.colourvision import CVD_KINDS, hex_to_rgb, rgb_to_hex, simulate_cvd


def draw_swatch() -> bytes:
    """The swatch as PNG bytes."""
    from matplotlib.figure import Figure
    from matplotlib.patches import Rectangle
    rows = list(TYPE_STYLES.values())
    fig = Figure(figsize=(8.0, 0.42 * (len(rows) + len(HAZARD_STYLES)) + 1.2))
    ax = fig.add_axes((0.01, 0.06, 0.98, 0.86))
    n = len(rows) + len(HAZARD_STYLES)
    ax.set_xlim(0, 9.9)
    ax.set_ylim(n, -1)
    ax.axis("off")
    ax.text(0.1, -0.5, "type", fontsize=9, fontweight="bold", color=FIGURE["text"])
    ax.text(1.6, -0.5, "label", fontsize=9, fontweight="bold", color=FIGURE["text"])
    for k, kind in enumerate(CVD_KINDS):
        ax.text(5.5 + 1.5 * k, -0.5, kind, fontsize=9, fontweight="bold", color=FIGURE["text"])
    for i, s in enumerate(rows):
        views = [s.colour] + [rgb_to_hex(simulate_cvd(hex_to_rgb(s.colour), k)) for k in CVD_KINDS]
        for x, colour in zip((0.1, 5.5, 7.0, 8.5), views):
            ax.add_patch(Rectangle((x, i), 1.3, 0.8, facecolor=colour, hatch=s.hatch or None,
                                   edgecolor=s.ink, linewidth=0.4))
            ax.text(x + 0.65, i + 0.4, s.code, ha="center", va="center", fontsize=8,
                    fontweight="bold", color=s.ink,
                    bbox={"boxstyle": "square,pad=0.1", "facecolor": colour, "edgecolor": "none"})
        ax.text(1.6, i + 0.4, f"{s.label} \u00b7 {s.colour} \u00b7 {s.pattern}", va="center",
                fontsize=8, color=FIGURE["text"])
    for j, h in enumerate(HAZARD_STYLES.values(), start=len(rows)):
        ax.add_patch(Rectangle((0.1, j + 0.1), 1.3, 0.6, facecolor=h.colour, edgecolor=h.ink))
        ax.text(0.75, j + 0.4, h.badge, ha="center", va="center", fontsize=8, color=h.ink,
                fontweight="bold")
        ax.text(1.6, j + 0.4, f"badge: {h.label}", va="center", fontsize=8.5,
                color=FIGURE["text"])
    fig.text(0.01, 0.95, "ptype palette: lightness tells the hazard, the pattern the phase",
             fontsize=11, fontweight="bold", color=FIGURE["text"])
    fig.text(0.01, 0.01, CAUTION, fontsize=6.5, color=FIGURE["text-soft"], style="italic")
    buf = io.BytesIO()
    import matplotlib
    with matplotlib.rc_context({"hatch.linewidth": 0.5}):
        fig.savefig(buf, format="png", dpi=110, facecolor=FIGURE["background"])
    return buf.getvalue()


if __name__ == "__main__":  # python -m ptype.plot.swatch > docs/images/palette.png
    import sys
    sys.stdout.buffer.write(draw_swatch())
