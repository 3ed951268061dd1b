"""The stress colour scale, held against outside colour science.

Measures used here:
- CIE 1976 L*a*b* from sRGB (IEC 61966-2-1 transfer curve and primaries, D65 white; CIE 15:2004 for L*a*b*).
- Colour difference: CIE76 delta E, the Euclidean distance in L*a*b*. A difference of about 2.3 is commonly
  taken as just noticeable (Sharma, Digital Color Imaging Handbook, 2003 — from memory); the thresholds below
  are more than ten times that.
- Colour-vision deficiency: Machado, Oliveira & Fernandes 2009, "A physiologically-based model for simulation of
  color vision deficiency", IEEE TVCG 15(6):1291-1298, the severity-1.0 matrices for protanopia, deuteranopia
  and tritanopia, applied to linear sRGB. Written from memory and matched digit for digit against copies of the
  paper's table in public code.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from toolkit.write import palette

# Machado et al. 2009, severity 1.0 (see module docstring for the source).
MACHADO_2009 = {
    "protanopia": np.array(
        [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216], [-0.003882, -0.048116, 1.051998]]
    ),
    "deuteranopia": np.array(
        [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413], [-0.011820, 0.042940, 0.968881]]
    ),
    "tritanopia": np.array(
        [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602], [0.004733, 0.691367, 0.303900]]
    ),
}
VIEWS = {"normal": np.eye(3), **MACHADO_2009}

T = np.linspace(-1.0, 1.0, 201)  # scale positions; index 100 is the middle


def seen_as(view: str, rgb: np.ndarray) -> np.ndarray:
    """L*a*b* of sRGB colours as seen with the given colour vision."""
    lin = palette.srgb_to_linear(rgb) @ VIEWS[view].T
    return palette.linear_to_lab(np.clip(lin, 0.0, 1.0))


def delta_e76(a, b) -> np.ndarray:
    return np.linalg.norm(np.asarray(a) - np.asarray(b), axis=-1)


# --- the colour science itself, against published values


@pytest.mark.parametrize(
    "code, lab",
    [
        # sRGB primaries and greys in CIE L*a*b* (D65), as tabulated widely, e.g. B. Lindbloom's colour
        # calculator (brucelindbloom.com) — from memory, to two decimals.
        ("#ffffff", (100.0, 0.0, 0.0)),
        ("#ff0000", (53.24, 80.09, 67.20)),
        ("#00ff00", (87.73, -86.18, 83.18)),
        ("#0000ff", (32.30, 79.19, -107.86)),
        ("#808080", (53.59, 0.0, 0.0)),
    ],
)
def test_lab_conversion_matches_published_values(code, lab):
    # 0.05: the published values differ by a few hundredths with the primaries' matrix precision.
    assert np.allclose(palette.srgb_to_lab(palette.hex_to_rgb(code)), lab, atol=0.05)


def test_lab_round_trip():
    rgb = np.random.default_rng(3).random((50, 3))
    back = palette.linear_to_srgb(palette.lab_to_linear(palette.srgb_to_lab(rgb)))
    assert np.allclose(back, rgb, atol=1e-9)


@pytest.mark.parametrize("view", list(MACHADO_2009))
def test_simulation_matrices_keep_white(view):
    # Machado et al. 2009 normalise each matrix so that white maps to white: every row sums to 1. A slip in a
    # digit copied from memory would show here.
    assert np.allclose(MACHADO_2009[view].sum(axis=1), 1.0, atol=2e-6)


# --- the scale


def test_scale_ends_and_middle_are_the_stops():
    assert palette.colour(-5.0, 5.0) == palette.STOPS[0][1]
    assert palette.colour(0.0, 5.0) == palette.STOPS[len(palette.STOPS) // 2][1]
    assert palette.colour(5.0, 5.0) == palette.STOPS[-1][1]
    # Beyond the range: the end colours. A zero range: the middle.
    assert palette.colour(-80.0, 5.0) == palette.STOPS[0][1]
    assert palette.colour(80.0, 5.0) == palette.STOPS[-1][1]
    assert palette.colour(3.0, 0.0) == palette.STOPS[len(palette.STOPS) // 2][1]


def test_scale_is_not_red_against_blue():
    # CIELAB hue angle of sRGB red = atan2(67.20, 80.09) = 40.0 deg, of sRGB blue = atan2(-107.86, 79.19) =
    # 306.3 deg (published L*a*b* values above). Every stop away from the middle keeps 20 deg clear of both.
    red, blue = 40.0, 306.3
    for t, code in palette.STOPS:
        if t == 0.0:
            continue
        lab = palette.srgb_to_lab(palette.hex_to_rgb(code))
        hue = math.degrees(math.atan2(lab[2], lab[1])) % 360.0
        for avoid in (red, blue):
            gap = abs((hue - avoid + 180.0) % 360.0 - 180.0)
            assert gap > 20.0, (code, hue, avoid)


@pytest.mark.parametrize("view", list(VIEWS))
def test_lightness_rises_from_each_end_to_the_middle(view):
    lab = seen_as(view, palette.scale_rgb(T))
    L = lab[:, 0]
    assert np.all(np.diff(L[:101]) > 0), "compression side must lighten towards zero"
    assert np.all(np.diff(L[100:]) < 0), "tension side must darken away from zero"
    # A pale middle and dark ends (measured: middle L* 94-95, ends 22-26 in every view).
    assert L[100] > 90.0
    assert L[0] < 35.0 and L[-1] < 35.0


@pytest.mark.parametrize("view", list(VIEWS))
def test_ends_stay_apart_under_colour_vision_deficiency(view):
    lab = seen_as(view, palette.scale_rgb(T))
    # Measured (CIE76): ends apart 43-54, each end from the middle 70-77.
    assert delta_e76(lab[0], lab[-1]) > 40.0
    assert delta_e76(lab[0], lab[100]) > 60.0
    assert delta_e76(lab[-1], lab[100]) > 60.0
    # Equal tension and compression stay apart from a third of the range up (measured minimum 40).
    pairs = delta_e76(lab[:71], lab[::-1][:71])
    assert pairs.min() > 35.0


@pytest.mark.parametrize("view", ["protanopia", "deuteranopia"])
def test_the_measure_catches_a_red_green_pair(view):
    # Negative control: CSS "darkred" #8b0000 against "darkgreen" #006400 (W3C CSS Color Module Level 3 named
    # colours), the classic pair a red-green deficient reader confuses, fails the end test above
    # (measured: delta E 4 under deuteranopia, 25 under protanopia, 95 with normal vision).
    lab = seen_as(view, np.array([palette.hex_to_rgb("#8b0000"), palette.hex_to_rgb("#006400")]))
    assert delta_e76(lab[0], lab[1]) < 40.0


def test_classes_split_at_zero_and_cover_the_range():
    per_side = 10
    values = np.array([-1e9, -5.0, -4.99, -0.01, 0.0, 0.01, 4.99, 5.0, 1e9])
    cls = palette.classify(values, 5.0, per_side)
    assert cls.tolist() == [0, 0, 0, 9, 10, 10, 19, 19, 19]
    assert len(palette.class_colours(per_side)) == 2 * per_side
    assert np.allclose(palette.class_edges(5.0, per_side)[[0, per_side, -1]], [-5.0, 0.0, 5.0])


@given(st.floats(-1e6, 1e6, allow_nan=False), st.floats(1e-3, 1e6))
def test_class_side_follows_sign(value, vmax):
    per_side = 10
    c = int(palette.classify(np.array([value]), vmax, per_side)[0])
    assert 0 <= c < 2 * per_side
    if value < 0:
        assert c < per_side
    else:
        assert c >= per_side


def test_class_colours_follow_the_scale():
    colours = palette.class_colours(10)
    lab = palette.srgb_to_lab(np.array([palette.hex_to_rgb(c) for c in colours]))
    assert np.all(np.diff(lab[:10, 0]) > 0) and np.all(np.diff(lab[10:, 0]) < 0)
