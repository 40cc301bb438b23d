"""The one palette: colour science checked against published data, the palette checked for
colour-vision deficiency and contrast, and no colour written anywhere but the style module."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from ptype.codes import Code
from ptype.style import GRIB2_STYLE, TYPE_STYLES, UI
from ptype.style.colourvision import (
    CVD_KINDS,
    ciede2000,
    contrast_ratio,
    hex_to_rgb,
    min_pair_difference,
    simulate_cvd,
    srgb_to_lab,
)
from ptype.style.css import palette_css
from ptype.style.palette import INK_DARK, MIN_CVD_DIFFERENCE

ROOT = Path(__file__).resolve().parents[1]

#: Sharma, Wu & Dalal (2005), Table 1: the 34 test pairs (L*, a*, b*) and their CIEDE2000
#: difference, given to 4 decimals.
SHARMA_2005_TABLE_1 = [


 ((50.0,2.6772,-79.7751),(50.0,0.0,-82.7485),2.0425),
 ((50.0,3.1571,-77.2803),(50.0,0.0,-82.7485),2.8615),
 ((50.0,2.8361,-74.0200),(50.0,0.0,-82.7485),3.4412),
 ((50.0,-1.3802,-84.2814),(50.0,0.0,-82.7485),1.0000),
 ((50.0,-1.1848,-84.8006),(50.0,0.0,-82.7485),1.0000),
 ((50.0,-0.9009,-85.5211),(50.0,0.0,-82.7485),1.0000),
 ((50.0,0.0,0.0),(50.0,-1.0,2.0),2.3669),
 ((50.0,-1.0,2.0),(50.0,0.0,0.0),2.3669),
 ((50.0,2.4900,-0.0010),(50.0,-2.4900,0.0009),7.1792),
 ((50.0,2.4900,-0.0010),(50.0,-2.4900,0.0010),7.1792),
 ((50.0,2.4900,-0.0010),(50.0,-2.4900,0.0011),7.2195),
 ((50.0,2.4900,-0.0010),(50.0,-2.4900,0.0012),7.2195),
 ((50.0,-0.0010,2.4900),(50.0,0.0009,-2.4900),4.8045),
 ((50.0,-0.0010,2.4900),(50.0,0.0010,-2.4900),4.8045),
 ((50.0,-0.0010,2.4900),(50.0,0.0011,-2.4900),4.7461),
 ((50.0,2.5,0.0),(50.0,0.0,-2.5),4.3065),
 ((50.0,2.5,0.0),(73.0,25.0,-18.0),27.1492),
 ((50.0,2.5,0.0),(61.0,-5.0,29.0),22.8977),
 ((50.0,2.5,0.0),(56.0,-27.0,-3.0),31.9030),
 ((50.0,2.5,0.0),(58.0,24.0,15.0),19.4535),
 ((50.0,2.5,0.0),(50.0,3.1736,0.5854),1.0000),
 ((50.0,2.5,0.0),(50.0,3.2972,0.0),1.0000),
 ((50.0,2.5,0.0),(50.0,1.8634,0.5757),1.0000),
 ((50.0,2.5,0.0),(50.0,3.2592,0.3350),1.0000),
 ((60.2574,-34.0099,36.2677),(60.4626,-34.1751,39.4387),1.2644),
 ((63.0109,-31.0961,-5.8663),(62.8187,-29.7946,-4.0864),1.2630),
 ((61.2901,3.7196,-5.3901),(61.4292,2.2480,-4.9620),1.8731),
 ((35.0831,-44.1164,3.7933),(35.0232,-40.0716,1.5901),1.8645),
 ((22.7233,20.0904,-46.6940),(23.0331,14.9730,-42.5619),2.0373),
 ((36.4612,47.8580,18.3852),(36.2715,50.5065,21.2231),1.4146),
 ((90.8027,-2.0831,1.4410),(91.1528,-1.6435,0.0447),1.4441),
 ((90.9257,-0.5406,-0.9208),(88.6381,-0.8985,-0.7239),1.5381),
 ((6.7747,-0.2908,-2.4247),(5.8714,-0.0985,-2.2286),0.6377),
 ((2.0776,0.0795,-1.1350),(0.9033,-0.0636,-0.5514),0.9082),
]


@pytest.mark.parametrize("lab1, lab2, expected", SHARMA_2005_TABLE_1)
def test_ciede2000_matches_sharma_2005_table_1(lab1, lab2, expected):
    # Sharma, Wu & Dalal (2005) Table 1; the table rounds to 4 decimals.
    assert ciede2000(lab1, lab2) == pytest.approx(expected, abs=1e-4)
    assert ciede2000(lab2, lab1) == pytest.approx(expected, abs=1e-4)  # symmetric (their note)


@pytest.mark.parametrize("kind, name", [("protanopia", "protanomaly"),
                                        ("deuteranopia", "deuteranomaly"),
                                        ("tritanopia", "tritanomaly")])
def test_cvd_simulation_matches_colorspacious(kind, name):
    # colorspacious (Smith & van der Walt) implements Machado, Oliveira & Fernandes (2009);
    # severity 100 is their dichromat matrix.
    colorspacious = pytest.importorskip("colorspacious")
    rgb = np.random.default_rng(3).random((40, 3))
    ref = colorspacious.cspace_convert(rgb, {"name": "sRGB1+CVD", "cvd_type": name,
                                             "severity": 100}, "sRGB1")
    assert np.allclose(simulate_cvd(rgb, kind), np.clip(ref, 0, 1), atol=1e-9)


def test_lab_matches_colorspacious():
    # CIE 15:2004 L*a*b* (D65); colorspacious as the reference implementation.  The sRGB
    # matrix rounding (IEC 61966-2-1 gives 4 decimals) differs by a few hundredths.
    colorspacious = pytest.importorskip("colorspacious")
    rgb = np.random.default_rng(4).random((40, 3))
    assert np.allclose(srgb_to_lab(rgb), colorspacious.cspace_convert(rgb, "sRGB1", "CIELab"),
                       atol=0.05)


def test_contrast_ratio_of_black_on_white_is_21():
    # WCAG 2.2, definition of contrast ratio: black on white is 21:1, equal colours 1:1.
    assert contrast_ratio([0, 0, 0], [1, 1, 1]) == pytest.approx(21.0)
    assert contrast_ratio([0.4, 0.4, 0.4], [0.4, 0.4, 0.4]) == pytest.approx(1.0)


def _type_colours() -> np.ndarray:
    return np.array([hex_to_rgb(s.colour) for s in TYPE_STYLES.values()])


@pytest.mark.parametrize("kind", (None,) + CVD_KINDS)
def test_every_pair_of_type_colours_stays_apart(kind):
    """Normal vision and simulated dichromacy (Machado et al. 2009, severity 1.0): every
    pair of the ten type colours differs by at least MIN_CVD_DIFFERENCE (CIEDE2000)."""
    difference, i, j = min_pair_difference(_type_colours(), kind)
    codes = list(TYPE_STYLES)
    assert difference >= MIN_CVD_DIFFERENCE, (kind, codes[i], codes[j], difference)


def test_the_check_fails_for_a_red_green_pair():
    # A red and a green of equal lightness collapse for a deuteranope (Machado et al. 2009):
    # the same check must catch it.
    pair = np.array([hex_to_rgb("#d0342c"), hex_to_rgb("#6a9a1f")])
    assert min_pair_difference(pair, None)[0] > MIN_CVD_DIFFERENCE
    assert min_pair_difference(pair, "deuteranopia")[0] < MIN_CVD_DIFFERENCE


def test_type_text_reaches_wcag_aa_on_its_colour():
    # WCAG 2.2 SC 1.4.3: 4.5:1 for text.
    for s in TYPE_STYLES.values():
        assert contrast_ratio(hex_to_rgb(s.colour), hex_to_rgb(s.ink)) >= 4.5, s.code


def test_page_text_pairs_reach_wcag_aa():
    # WCAG 2.2 SC 1.4.3 for the text/background pairs the stylesheet uses.
    pairs = [("ink", "paper"), ("ink-soft", "paper"), ("ink-soft", "card"), ("accent", "card"),
             ("accent", "paper"), ("alarm", "alarm-bg"), ("ink", "caution-bg"),
             ("pre-ink", "pre-bg"), ("ink", "code-bg"), ("ink", "verdict-bg")]
    for fg, bg in pairs:
        assert contrast_ratio(hex_to_rgb(UI[fg]), hex_to_rgb(UI[bg])) >= 4.5, (fg, bg)


def test_every_code_has_a_style_and_a_second_cue():
    assert set(TYPE_STYLES) == {c.name for c in Code}
    # Letters are the first second cue (the code itself is shown); the pattern tells the
    # phase: every freezing type is hatched, every frozen type dotted, every mix crossed.
    assert {TYPE_STYLES[c].pattern for c in ("FZRA", "FZDZ", "FZRAPL")} == {"diagonal"}
    assert {TYPE_STYLES[c].pattern for c in ("SN", "PL")} == {"dots"}
    assert {TYPE_STYLES[c].pattern for c in ("RASN", "RAPL")} == {"cross"}
    assert all(s.hatch for s in GRIB2_STYLE.values() if s.pattern != "plain")


def test_palette_is_not_the_broadcast_convention():
    """Ours, not the usual one: rain is not green, snow not a saturated blue, freezing types
    not pink or red, ice pellets not purple (hue angles in CIE LCh, common practice)."""
    def lch(code):
        lab = srgb_to_lab(hex_to_rgb(TYPE_STYLES[code].colour))
        return np.hypot(lab[1], lab[2]), np.degrees(np.arctan2(lab[2], lab[1])) % 360
    chroma, hue = lch("RA")
    assert not 110 <= hue <= 170
    chroma, hue = lch("SN")
    assert chroma < 15 or not 220 <= hue <= 300
    for code in ("FZRA", "FZDZ", "FZRAPL"):
        chroma, hue = lch(code)
        assert chroma < 20 or not (hue >= 330 or hue <= 40), code
    chroma, hue = lch("PL")
    assert not 280 <= hue <= 330


def test_stylesheet_carries_every_type_and_variable():
    css = palette_css()
    for s in TYPE_STYLES.values():
        assert f".ty-{s.code} " in css and s.colour in css
    for name in UI:
        assert f"--{name}:" in css
    assert INK_DARK in css


#: Where colours may be written: the style package only.
STYLE_DIR = ROOT / "ptype" / "style"
COLOUR_LITERAL = re.compile(r"#[0-9a-fA-F]{6}\b|#[0-9a-fA-F]{3}\b(?![\w-])|\brgba?\(|\bhsla?\(")
NAMED_COLOUR = re.compile(r"(?i)(?:colou?r|facecolor|edgecolor|fill|stroke|background)"
                          r"[\"']?\s*[:=]\s*[\"'](white|black|red|green|blue|grey|gray|"
                          r"orange|purple|pink|yellow)[\"']")


def _sources():
    for folder in (ROOT / "ptype", ROOT / "api"):
        for path in folder.rglob("*"):
            if path.suffix in (".py", ".css", ".js", ".html", ".svg", ".xsl") \
                    and STYLE_DIR not in path.parents:
                yield path


def test_no_colour_literal_outside_the_style_module():
    stray = []
    for path in _sources():
        for number, line in enumerate(path.read_text().splitlines(), 1):
            if COLOUR_LITERAL.search(line) or NAMED_COLOUR.search(line):
                stray.append(f"{path.relative_to(ROOT)}:{number}: {line.strip()[:80]}")
    assert not stray, "colours belong in ptype/style/palette.py:\n" + "\n".join(stray)


def test_the_stray_colour_check_catches_literals():
    assert COLOUR_LITERAL.search("color: #1d2733;")
    assert COLOUR_LITERAL.search("fill='#fff'")
    assert NAMED_COLOUR.search('ax.set_facecolor("white")') is None  # call, not keyword
    assert NAMED_COLOUR.search('facecolor="white"')
    assert not COLOUR_LITERAL.search('<a href="#main">')


def test_palette_document_lists_every_type_with_its_colour():
    text = (ROOT / "docs" / "palette.md").read_text()
    for s in TYPE_STYLES.values():
        assert f"| {s.code} | {s.label} | `{s.colour}` |" in text, s.code
    assert (ROOT / "docs" / "images" / "palette.png").stat().st_size > 10_000


def test_swatch_draws_from_the_palette():
    pytest.importorskip("matplotlib")
    from ptype.plot.swatch import draw_swatch
    assert draw_swatch().startswith(b"\x89PNG")
