"""The project's diverging colour scale for signed stress: compression teal, tension ochre, a pale middle.

The stops are our own, chosen in CIE L*a*b* so that lightness climbs evenly from each dark end to the pale
middle and the two sides stay apart for readers with red-green or blue-yellow colour-vision deficiency (the
checks and their figures are in tests/test_palette.py and docs/figures.md). Between stops the scale is
interpolated in L*a*b*, so equal steps of stress read as roughly equal steps of colour.

Negative values (compression) take the teal side, positive values (tension) the ochre side; the range is
symmetric about zero.
"""

from __future__ import annotations

import math

import numpy as np

# (position in [-1, 1], sRGB colour). Compression at -1, tension at +1.
STOPS: tuple[tuple[float, str], ...] = (
    (-1.00, "#0d3f4f"),  # deep slate teal
    (-0.75, "#1f6f7a"),
    (-0.50, "#5aa3a3"),
    (-0.25, "#a7d0c8"),
    (0.00, "#f2efe6"),  # warm paper white
    (0.25, "#ecc483"),
    (0.50, "#cc8a2e"),
    (0.75, "#9a5c0c"),
    (1.00, "#5c3406"),  # deep umber
)

# Line work drawn over the scale (principal-direction ticks): darker than either end so it reads on every fill.
TENSION_INK = "#3d1f02"
COMPRESSION_INK = "#062a35"
TENSION_NAME = "tension"
COMPRESSION_NAME = "compression"

# sRGB (IEC 61966-2-1) primaries to CIE XYZ, D65 white; CIE 1976 L*a*b* with the D65 reference white.
_RGB_TO_XYZ = np.array(
    [
        [0.4124, 0.3576, 0.1805],
        [0.2126, 0.7152, 0.0722],
        [0.0193, 0.1192, 0.9505],
    ]
)
_XYZ_TO_RGB = np.linalg.inv(_RGB_TO_XYZ)
_WHITE_D65 = np.array([0.95047, 1.0, 1.08883])
_EPS = (6.0 / 29.0) ** 3


def hex_to_rgb(code: str) -> np.ndarray:
    """'#rrggbb' -> (3,) floats in [0, 1]."""
    code = code.lstrip("#")
    return np.array([int(code[i : i + 2], 16) for i in (0, 2, 4)], dtype=float) / 255.0


def rgb_to_hex(rgb) -> str:
    """(3,) floats in [0, 1] -> '#rrggbb' (clipped to the sRGB gamut)."""
    r, g, b = (int(round(c)) for c in np.clip(np.asarray(rgb, dtype=float), 0.0, 1.0) * 255.0)
    return f"#{r:02x}{g:02x}{b:02x}"


def srgb_to_linear(rgb) -> np.ndarray:
    rgb = np.asarray(rgb, dtype=float)
    return np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)


def linear_to_srgb(lin) -> np.ndarray:
    lin = np.clip(np.asarray(lin, dtype=float), 0.0, 1.0)
    return np.where(lin <= 0.0031308, lin * 12.92, 1.055 * lin ** (1.0 / 2.4) - 0.055)


def linear_to_lab(lin) -> np.ndarray:
    """Linear-light sRGB (..., 3) -> CIE L*a*b* (..., 3), D65."""
    xyz = np.asarray(lin, dtype=float) @ _RGB_TO_XYZ.T / _WHITE_D65
    f = np.where(xyz > _EPS, np.cbrt(xyz), xyz / (3.0 * (6.0 / 29.0) ** 2) + 4.0 / 29.0)
    return np.stack([116.0 * f[..., 1] - 16.0, 500.0 * (f[..., 0] - f[..., 1]), 200.0 * (f[..., 1] - f[..., 2])], -1)


def lab_to_linear(lab) -> np.ndarray:
    """CIE L*a*b* (..., 3) -> linear-light sRGB (..., 3), D65 (not clipped)."""
    lab = np.asarray(lab, dtype=float)
    fy = (lab[..., 0] + 16.0) / 116.0
    f = np.stack([fy + lab[..., 1] / 500.0, fy, fy - lab[..., 2] / 200.0], -1)
    xyz = np.where(f > 6.0 / 29.0, f**3, 3.0 * (6.0 / 29.0) ** 2 * (f - 4.0 / 29.0)) * _WHITE_D65
    return xyz @ _XYZ_TO_RGB.T


def srgb_to_lab(rgb) -> np.ndarray:
    """sRGB in [0, 1] (..., 3) -> CIE L*a*b* (..., 3)."""
    return linear_to_lab(srgb_to_linear(rgb))


_STOP_T = np.array([t for t, _ in STOPS])
_STOP_LAB = srgb_to_lab(np.array([hex_to_rgb(c) for _, c in STOPS]))


def scale_rgb(t) -> np.ndarray:
    """Scale position(s) t in [-1, 1] (clipped) -> sRGB in [0, 1], shape t.shape + (3,)."""
    t = np.clip(np.asarray(t, dtype=float), -1.0, 1.0)
    lab = np.stack([np.interp(t, _STOP_T, _STOP_LAB[:, k]) for k in range(3)], -1)
    return linear_to_srgb(lab_to_linear(lab))


def colour(value: float, vmax: float) -> str:
    """The scale's colour for ``value`` on a range symmetric about zero, -vmax..+vmax; '#rrggbb'.

    Values beyond the range take the end colours; a zero range gives the middle colour.
    """
    t = 0.0 if not (vmax > 0 and math.isfinite(vmax)) else float(value) / vmax
    if not math.isfinite(t):
        t = 0.0
    return rgb_to_hex(scale_rgb(t))


def class_edges(vmax: float, per_side: int) -> np.ndarray:
    """Boundaries of 2 * per_side equal colour classes over -vmax..+vmax (zero is always a boundary)."""
    return np.linspace(-vmax, vmax, 2 * per_side + 1)


def classify(values, vmax: float, per_side: int) -> np.ndarray:
    """Class index 0 .. 2*per_side-1 of each value (values beyond +-vmax go to the end classes).

    Zero itself goes to the first tension class, so the classes are [-vmax, -..), ..., [0, step), ... [.., vmax].
    """
    values = np.asarray(values, dtype=float)
    if not vmax > 0:
        return np.full(values.shape, per_side, dtype=np.int64)
    idx = np.floor(values / vmax * per_side).astype(np.int64) + per_side
    return np.clip(idx, 0, 2 * per_side - 1)


def class_colours(per_side: int) -> list[str]:
    """Colour of each class: the scale at the class's mid value."""
    edges = class_edges(1.0, per_side)
    mids = 0.5 * (edges[:-1] + edges[1:])
    return [rgb_to_hex(c) for c in scale_rgb(mids)]
