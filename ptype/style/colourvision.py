"""Colour difference and colour-vision-deficiency simulation, for checking our palette.

* sRGB <-> CIE L*a*b* (D65) following IEC 61966-2-1:1999 (sRGB transfer curve and primaries)
  and CIE 15:2004 (L*a*b*); see ``docs/references.md`` [IEC-sRGB], [CIE15].
* :func:`ciede2000`: the CIEDE2000 colour difference as written out step by step by
  Sharma, Wu & Dalal (2005) [Sharma2005], whose Table 1 test data our tests reproduce.
* :func:`simulate_cvd`: dichromatic vision (protanopia, deuteranopia, tritanopia) with the
  severity-1.0 matrices of Machado, Oliveira & Fernandes (2009) [Machado2009], applied to
  linear-light RGB as in their paper.

Pure numpy, vectorised over leading axes: colours are ``(..., 3)`` arrays.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

#: Machado, Oliveira & Fernandes (2009), severity 1.0 (their Table of matrices, the
#: dichromat rows); they act on linear RGB.
MACHADO_2009 = {
    "protanopia": np.array([[0.152286, 1.052583, -0.204868],
                            [0.114503, 0.786281, 0.099216],
                            [-0.003882, -0.048116, 1.051998]]),
    "deuteranopia": np.array([[0.367322, 0.860646, -0.227968],
                              [0.280085, 0.672501, 0.047413],
                              [-0.011820, 0.042940, 0.968881]]),
    "tritanopia": np.array([[1.255528, -0.076749, -0.178779],
                            [-0.078411, 0.930809, 0.147602],
                            [0.004733, 0.691367, 0.303900]]),
}
CVD_KINDS = tuple(MACHADO_2009)

#: sRGB (linear) to CIE XYZ, D65 white (IEC 61966-2-1:1999).
_RGB_TO_XYZ = np.array([[0.4124, 0.3576, 0.1805],
                        [0.2126, 0.7152, 0.0722],
                        [0.0193, 0.1192, 0.9505]])
#: D65 reference white, Y = 1 (CIE 15:2004).
_WHITE_D65 = np.array([0.95047, 1.0, 1.08883])


def hex_to_rgb(text: str) -> np.ndarray:
    """``"#rrggbb"`` as sRGB components in 0..1, shape ``(3,)``."""
    value = text.lstrip("#")
    if len(value) != 6:
        raise ValueError(f"colour {text!r}: expected #rrggbb")
    return np.array([int(value[i:i + 2], 16) for i in (0, 2, 4)], dtype=float) / 255.0


def rgb_to_hex(rgb: ArrayLike) -> str:
    """sRGB components in 0..1 as ``"#rrggbb"`` (clipped)."""
    values = np.clip(np.round(np.asarray(rgb, dtype=float) * 255.0), 0, 255).astype(int)
    return "#" + "".join(f"{v:02x}" for v in values)


def srgb_to_linear(rgb: ArrayLike) -> np.ndarray:
    """The sRGB transfer curve undone (IEC 61966-2-1:1999)."""
    c = np.asarray(rgb, dtype=float)
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def linear_to_srgb(linear: ArrayLike) -> np.ndarray:
    """Linear light to sRGB components, clipped to the gamut."""
    c = np.clip(np.asarray(linear, dtype=float), 0.0, 1.0)
    return np.where(c <= 0.0031308, 12.92 * c, 1.055 * c ** (1 / 2.4) - 0.055)


def relative_luminance(rgb: ArrayLike) -> np.ndarray:
    """WCAG 2.2 relative luminance of sRGB colours (0..1 components)."""
    return srgb_to_linear(rgb) @ np.array([0.2126, 0.7152, 0.0722])


def contrast_ratio(rgb_a: ArrayLike, rgb_b: ArrayLike) -> np.ndarray:
    """WCAG 2.2 contrast ratio (L1 + 0.05) / (L2 + 0.05), 1 to 21."""
    la, lb = relative_luminance(rgb_a), relative_luminance(rgb_b)
    return (np.maximum(la, lb) + 0.05) / (np.minimum(la, lb) + 0.05)


def srgb_to_lab(rgb: ArrayLike) -> np.ndarray:
    """sRGB (0..1) to CIE L*a*b* with the D65 white (CIE 15:2004)."""
    xyz = srgb_to_linear(rgb) @ _RGB_TO_XYZ.T / _WHITE_D65
    eps, kappa = 216.0 / 24389.0, 24389.0 / 27.0
    f = np.where(xyz > eps, np.cbrt(xyz), (kappa * xyz + 16.0) / 116.0)
    return np.stack([116.0 * f[..., 1] - 16.0, 500.0 * (f[..., 0] - f[..., 1]),
                     200.0 * (f[..., 1] - f[..., 2])], axis=-1)


def simulate_cvd(rgb: ArrayLike, kind: str) -> np.ndarray:
    """sRGB colours as a dichromat of ``kind`` sees them (Machado et al. 2009, severity 1)."""
    if kind not in MACHADO_2009:
        raise ValueError(f"kind {kind!r}: expected one of {', '.join(CVD_KINDS)}")
    return linear_to_srgb(srgb_to_linear(rgb) @ MACHADO_2009[kind].T)


def _hue_deg(b: np.ndarray, a: np.ndarray) -> np.ndarray:
    return np.where((a == 0) & (b == 0), 0.0, np.degrees(np.arctan2(b, a)) % 360.0)


def ciede2000(lab1: ArrayLike, lab2: ArrayLike, kl: float = 1.0, kc: float = 1.0,
              kh: float = 1.0) -> np.ndarray:
    """CIEDE2000 colour difference of two L*a*b* colours (Sharma, Wu & Dalal 2005, eqs 1-21)."""
    lab1, lab2 = np.asarray(lab1, dtype=float), np.asarray(lab2, dtype=float)
    l1, a1, b1 = lab1[..., 0], lab1[..., 1], lab1[..., 2]
    l2, a2, b2 = lab2[..., 0], lab2[..., 1], lab2[..., 2]
    c_bar = (np.hypot(a1, b1) + np.hypot(a2, b2)) / 2.0
    g = 0.5 * (1.0 - np.sqrt(c_bar ** 7 / (c_bar ** 7 + 25.0 ** 7)))        # eq 4
    a1p, a2p = (1.0 + g) * a1, (1.0 + g) * a2                                # eq 5
    c1p, c2p = np.hypot(a1p, b1), np.hypot(a2p, b2)                          # eq 6
    h1p, h2p = _hue_deg(b1, a1p), _hue_deg(b2, a2p)                          # eq 7
    dlp, dcp = l2 - l1, c2p - c1p                                            # eqs 8, 9
    dh = h2p - h1p                                                           # eq 10
    dh = np.where(dh > 180.0, dh - 360.0, np.where(dh < -180.0, dh + 360.0, dh))
    dh = np.where(c1p * c2p == 0, 0.0, dh)
    dhp = 2.0 * np.sqrt(c1p * c2p) * np.sin(np.radians(dh) / 2.0)            # eq 11
    lbp, cbp = (l1 + l2) / 2.0, (c1p + c2p) / 2.0                            # eqs 12, 13
    hsum = h1p + h2p                                                         # eq 14
    hbp = np.where(np.abs(h1p - h2p) <= 180.0, hsum / 2.0,
                   np.where(hsum < 360.0, (hsum + 360.0) / 2.0, (hsum - 360.0) / 2.0))
    hbp = np.where(c1p * c2p == 0, hsum, hbp)
    t = (1.0 - 0.17 * np.cos(np.radians(hbp - 30.0)) + 0.24 * np.cos(np.radians(2 * hbp))
         + 0.32 * np.cos(np.radians(3 * hbp + 6.0)) - 0.20 * np.cos(np.radians(4 * hbp - 63.0)))
    d_theta = 30.0 * np.exp(-(((hbp - 275.0) / 25.0) ** 2))                  # eq 16
    rc = 2.0 * np.sqrt(cbp ** 7 / (cbp ** 7 + 25.0 ** 7))                    # eq 17
    sl = 1.0 + 0.015 * (lbp - 50.0) ** 2 / np.sqrt(20.0 + (lbp - 50.0) ** 2)  # eq 18
    sc = 1.0 + 0.045 * cbp                                                   # eq 19
    sh = 1.0 + 0.015 * cbp * t                                               # eq 20
    rt = -np.sin(np.radians(2.0 * d_theta)) * rc                             # eq 21
    return np.sqrt((dlp / (kl * sl)) ** 2 + (dcp / (kc * sc)) ** 2 + (dhp / (kh * sh)) ** 2
                   + rt * (dcp / (kc * sc)) * (dhp / (kh * sh)))


def min_pair_difference(colours: ArrayLike, kind: str | None = None) -> tuple[float, int, int]:
    """The smallest CIEDE2000 difference between any two of ``colours`` (``(n, 3)`` sRGB),
    seen with normal vision (``kind=None``) or simulated dichromacy; with the pair's indices."""
    rgb = np.asarray(colours, dtype=float)
    seen = rgb if kind is None else simulate_cvd(rgb, kind)
    lab = srgb_to_lab(seen)
    d = ciede2000(lab[:, None, :], lab[None, :, :])
    d[np.diag_indices(len(rgb))] = np.inf
    i, j = np.unravel_index(np.argmin(d), d.shape)
    return float(d[i, j]), int(min(i, j)), int(max(i, j))
