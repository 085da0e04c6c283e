"""The overlay's layer colours stay apart for colour-blind readers and in a
grey print, measured with an outside colour-science library.

Reference: the colour-science package (registry: colour-science) for the
sRGB transfer function, CIE L*a*b*, the CIEDE2000 colour difference and the
colour-vision-deficiency matrices of G. M. Machado, M. M. Oliveira and L. A.
F. Fernandes, "A physiologically-based model for simulation of color vision
deficiency", IEEE TVCG 15(6), 2009 (severity 1.0: dichromacy).

Thresholds are common practice, not a standard: a CIEDE2000 difference of
about 10 or more reads as a different colour at a glance, about 2 is a just
noticeable difference (rule of thumb); a lightness step of 10 L* or more
survives a greyscale print of thin lines (rule of thumb).
"""

from __future__ import annotations

import itertools
import warnings

import numpy as np
import pytest

from checker.report import svg

with warnings.catch_warnings():  # the library warns on import that matplotlib is absent
    warnings.simplefilter("ignore")
    import colour  # the test extra installs it

VISIONS = ("normal", "Protanomaly", "Deuteranomaly", "Tritanomaly")
WHITE = np.ones(3)

#: any two layers up to this far apart in the colour cycle can be drawn together
#: (a broadside finding's two layers, a plane between them, the picture of a layer group)
SPAN = 2
MIN_DELTA_E = 12.0  # rule of thumb: distinct at a glance, with margin
MIN_LIGHTNESS_STEP = 10.0  # rule of thumb: neighbours apart in a grey print
MAX_LIGHTNESS = 88.0  # a thin line of this lightness on white is still seen
MIN_DELTA_E_TO_SEVERITY = 8.0


def encoded(hex_colour: str) -> np.ndarray:
    return np.array([int(hex_colour[i:i + 2], 16) / 255 for i in (1, 3, 5)])


def on_white(hex_colour: str, opacity: float = svg.COPPER_OPACITY) -> np.ndarray:
    """SVG source-over compositing on white, in encoded sRGB (as browsers
    and the SVG 1.1 default colour-interpolation do)."""
    return opacity * encoded(hex_colour) + (1 - opacity) * WHITE


def lab(rgb_encoded: np.ndarray, vision: str) -> np.ndarray:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # colour warns about the domain of its tritan matrices
        linear = colour.cctf_decoding(rgb_encoded, function="sRGB")
        if vision != "normal":
            linear = np.clip(colour.blindness.matrix_cvd_Machado2009(vision, 1.0) @ linear, 0, 1)
        xyz = colour.RGB_to_XYZ(linear, colour.RGB_COLOURSPACES["sRGB"], apply_cctf_decoding=False)
        return colour.XYZ_to_Lab(xyz, colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]["D65"])


def delta_e(a: np.ndarray, b: np.ndarray) -> float:
    """The smallest CIEDE2000 difference of two encoded colours over the
    four visions."""
    return min(float(colour.delta_E(lab(a, v), lab(b, v), method="CIE 2000")) for v in VISIONS)


def worst_pairs(palette: tuple[str, ...], opacity: float = svg.COPPER_OPACITY) -> tuple[float, float]:
    """(smallest colour difference between layers up to SPAN apart in the
    cycle, smallest lightness step between neighbours)."""
    n = len(palette)
    worst_e = min(delta_e(on_white(palette[i], opacity), on_white(palette[(i + k) % n], opacity))
                  for i in range(n) for k in range(1, SPAN + 1))
    worst_l = min(abs(float(lab(on_white(palette[i], opacity), "normal")[0]
                            - lab(on_white(palette[(i + 1) % n], opacity), "normal")[0])) for i in range(n))
    return worst_e, worst_l


def test_reference_library_agrees_with_a_published_value():
    # CIEDE2000 test data of G. Sharma, W. Wu and E. N. Dalal, Color Res. Appl. 30(1), 2005, pair 1:
    # Lab (50, 2.6772, -79.7751) and (50, 0, -82.7485) differ by 2.0425 (quoted from memory)
    d = colour.delta_E(np.array([50, 2.6772, -79.7751]), np.array([50, 0, -82.7485]), method="CIE 2000")
    assert float(d) == pytest.approx(2.0425, abs=1e-4)


def test_layers_that_meet_in_a_picture_stay_distinct_in_every_vision():
    worst_e, _ = worst_pairs(svg.LAYER_COLOURS)
    assert worst_e >= MIN_DELTA_E, worst_e


def test_neighbouring_layers_differ_in_lightness_for_grey_print():
    _, worst_l = worst_pairs(svg.LAYER_COLOURS)
    assert worst_l >= MIN_LIGHTNESS_STEP, worst_l


def test_every_layer_colour_shows_as_a_thin_line_on_white():
    for c in svg.LAYER_COLOURS:
        assert lab(on_white(c), "normal")[0] <= MAX_LIGHTNESS, c


def test_layer_colours_stay_clear_of_the_severity_colours():
    for c, s in itertools.product(svg.LAYER_COLOURS, svg.SEVERITY_COLOURS.values()):
        assert delta_e(on_white(c), on_white(s)) >= MIN_DELTA_E_TO_SEVERITY, (c, s)


def test_the_measure_rejects_the_earlier_palette():
    # the palette before this test (Okabe-Ito blue, reddish purple, bluish green, sky blue, yellow, black at
    # opacity 0.55): two layers two apart nearly merged for some readers, neighbours in grey print too
    before = tuple(svg.OKABE_ITO[n] for n in ("blue", "reddish purple", "bluish green", "sky blue", "yellow", "black"))
    worst_e, worst_l = worst_pairs(before, 0.55)
    assert worst_e < MIN_DELTA_E and worst_l < MIN_LIGHTNESS_STEP
