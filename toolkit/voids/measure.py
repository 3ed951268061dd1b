"""Freeform voids measured and cleaned: area, centroid, principal axes, width; slivers and small voids dropped.

The principal axes come from the second moments of area of the polygon about its centroid (the exact
vertex-sum formulas for a polygon); the major axis is the direction in which the void spreads most. A void's
*width* is the diameter of the largest circle that fits inside it: a sliver, however long, has a small width,
so one rule ("width below ``min_void``: dropped") removes both slivers and small voids.

A freeform void with solid islands inside it is fitted by its outer ring: a shop cannot leave a loose piece of
solid floating in a hole, and the islands the optimiser leaves are the smallest features of its result. The
measure keeps the island count so the caller can report it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import shapely
from shapely.geometry import MultiPolygon, Polygon

from ..errors import LacunaError
from ..model import Point


def following(a: np.ndarray) -> np.ndarray:
    """The next item of a closed run for every item (rows of a 2-D array): ``np.roll(a, -1, axis=0)``, cheaper."""
    return np.concatenate((a[1:], a[:1]))


def preceding(a: np.ndarray) -> np.ndarray:
    """The previous item of a closed run for every item: ``np.roll(a, 1, axis=0)``, cheaper."""
    return np.concatenate((a[-1:], a[:-1]))


@dataclass(frozen=True)
class FreeformVoid:
    """One cleaned freeform void (local mm).

    ``shape`` is the outer ring (islands filled); ``angle_deg`` the direction of the major principal axis in
    [0, 180); ``spread_mm`` the radii of gyration about the centroid along the major and the minor axis
    (sqrt of the second moment divided by the area); ``width_mm`` the diameter of the largest inscribed circle;
    ``index`` the position of the void in the list it came from; ``islands`` how many solid islands were filled.
    """

    shape: Polygon
    area_mm2: float
    centroid: Point
    angle_deg: float
    spread_mm: tuple[float, float]
    width_mm: float
    index: int
    islands: int = 0


def second_moments(polygon: Polygon) -> tuple[float, Point, np.ndarray]:
    """Area, centroid and the 2 x 2 second-moment tensor [[Ixx', Ixy'], [Ixy', Iyy']] about the centroid.

    Here Ixx' = integral of x'^2 dA and Iyy' = integral of y'^2 dA (x', y' measured from the centroid), so the
    tensor's eigenvector of the larger eigenvalue points along the direction of largest spread.
    Holes count with their sign.
    """
    rings = [polygon.exterior, *polygon.interiors]
    area = 0.0
    sx = sy = sxx = syy = sxy = 0.0
    ox, oy = polygon.exterior.coords[0]  # a local origin keeps far-off coordinates precise
    for k, ring in enumerate(rings):
        xy = np.asarray(ring.coords, dtype=float)[:, :2] - (ox, oy)
        sign = 1.0 if (k == 0) == ring.is_ccw else -1.0
        x0, y0, x1, y1 = xy[:-1, 0], xy[:-1, 1], xy[1:, 0], xy[1:, 1]
        c = (x0 * y1 - x1 * y0) * sign
        area += c.sum() / 2.0
        sx += (c * (x0 + x1)).sum() / 6.0
        sy += (c * (y0 + y1)).sum() / 6.0
        sxx += (c * (x0 * x0 + x0 * x1 + x1 * x1)).sum() / 12.0
        syy += (c * (y0 * y0 + y0 * y1 + y1 * y1)).sum() / 12.0
        sxy += (c * (x0 * y1 + 2 * x0 * y0 + 2 * x1 * y1 + x1 * y0)).sum() / 24.0
    # The signs above count every ring as a counter-clockwise exterior or a clockwise hole, whatever its
    # stored direction, so the sums come out positive for the area.
    if area <= 0.0:
        return 0.0, (ox, oy), np.zeros((2, 2))
    cx, cy = sx / area, sy / area
    tensor = np.array([[sxx - area * cx * cx, sxy - area * cx * cy], [sxy - area * cx * cy, syy - area * cy * cy]])
    return area, (cx + ox, cy + oy), tensor


def principal_axes(polygon: Polygon) -> tuple[float, tuple[float, float]]:
    """Major-axis direction in degrees [0, 180) and the radii of gyration (major, minor) about the centroid."""
    area, _, tensor = second_moments(polygon)
    if area == 0.0:
        return 0.0, (0.0, 0.0)
    values, vectors = np.linalg.eigh(tensor)
    major = vectors[:, 1]
    angle = math.degrees(math.atan2(major[1], major[0])) % 180.0
    if abs(values[1] - values[0]) <= 1e-9 * abs(values[1]):
        angle = 0.0  # no preferred direction (a circle, a square, any regular n-gon)
    radii = np.sqrt(np.maximum(values[::-1], 0.0) / area)
    return angle, (float(radii[0]), float(radii[1]))


def inscribed_width(polygon, rtol: float = 1e-4) -> float:
    """Diameter of the largest circle inside the shape (0 for an empty one), found to ``rtol`` of the square root
    of its area (the search returns a circle that fits, so a coarse answer errs small)."""
    if polygon.is_empty or polygon.area <= 0.0:
        return 0.0
    tol = max(1e-3, rtol * math.sqrt(polygon.area))
    return 2.0 * float(shapely.maximum_inscribed_circle(polygon, tol).length)


def measure(polygon: Polygon, index: int = 0) -> FreeformVoid:
    """Area, centroid, principal axes and width of one freeform void (its islands filled)."""
    filled = Polygon(polygon.exterior)
    area, centroid, _ = second_moments(filled)
    angle, spread = principal_axes(filled)
    return FreeformVoid(shape=filled, area_mm2=area, centroid=(float(centroid[0]), float(centroid[1])),
                        angle_deg=angle, spread_mm=spread, width_mm=inscribed_width(filled), index=index,
                        islands=len(polygon.interiors))


def clean(freeform, min_void_mm: float, *, where: str = "freeform voids", at=None
          ) -> tuple[list[FreeformVoid], list[str]]:
    """Measure every freeform void and drop those narrower than ``min_void_mm``.

    ``freeform`` is a sequence of shapely polygons (multi-polygons are split). Returns the kept voids (each
    with ``index`` = its position in ``freeform``) and one plain sentence per dropped void or filled island,
    each placed by ``at(local point)`` (the point in words; by default its local mm, to the millimetre).
    """
    at = at if at is not None else (lambda xy: f"({xy[0]:.0f}, {xy[1]:.0f})")
    if not (isinstance(min_void_mm, (int, float)) and math.isfinite(min_void_mm) and min_void_mm >= 0.0):
        raise LacunaError(f"the smallest void size must be a length of zero or more, got {min_void_mm!r}.",
                          where="[rules] min_void", hint="Give min_void as a length, e.g. 20.")
    kept: list[FreeformVoid] = []
    notes: list[str] = []
    for i, geom in enumerate(freeform):
        if not isinstance(geom, (Polygon, MultiPolygon)):
            raise LacunaError(f"freeform void #{i + 1} is a {type(geom).__name__}, not an area.", where=where,
                              hint="Pass the closed void outlines (shapely polygons) from the extraction step.")
        # Coordinates on a micrometre grid: overlays then never meet edges a rounding error apart.
        geom = shapely.set_precision(geom, 1e-6)
        if not geom.is_valid:
            geom = shapely.make_valid(geom)
        parts = [p for p in shapely.get_parts(geom) if isinstance(p, Polygon) and p.area > 0.0]
        if not parts:
            notes.append(f"freeform void #{i + 1}: no area; dropped.")
            continue
        for part in parts:
            m = measure(part, i)
            if m.width_mm < min_void_mm:
                notes.append(f"freeform void #{i + 1} at {at(m.centroid)}: "
                             f"{m.width_mm:.1f} mm wide, under the smallest void size {min_void_mm:g} mm; dropped.")
                continue
            if m.islands:
                notes.append(f"freeform void #{i + 1} at {at(m.centroid)}: "
                             f"{m.islands} solid island(s) inside it filled; the outer outline is fitted.")
            kept.append(m)
    return kept, notes
