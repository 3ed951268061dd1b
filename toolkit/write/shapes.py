"""What the drawing copy and the SVG sheets both draw, checked before either draws it: the voids to make, the
optimiser's freeform outlines as rings, and the rule-violation markers."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
from shapely.geometry import MultiPolygon, Polygon

from ..errors import LacunaError
from ..model import Point, Void
from .layers import VOID_LAYERS


@dataclass(frozen=True)
class Marker:
    """A rule violation to mark: a circle round ``where`` (local mm) and a short label beside it."""

    where: Point
    label: str
    radius_mm: float | None = None


def short_number(v: float) -> str:
    """A figure in a drawing's text: six significant digits."""
    return f"{v:.6g}"


# Decimals of a length in a schedule, by unit: a thousandth of a millimetre whatever the unit (the corner
# coordinates are set out from these figures).
_SCHEDULE_DECIMALS = {"mm": 3, "cm": 4, "m": 6, "in": 5, "ft": 6}


def schedule_decimals(unit: str) -> int:
    """Decimals of a length or coordinate in ``unit`` in the void schedules (the CSV and the drawing's notes)."""
    return _SCHEDULE_DECIMALS.get(unit, 6)


def check_void(void: Void) -> None:
    """Refuse a void neither writer can draw: an unknown family, a size or centre that is not finite, no outline."""
    where = f"void {void.id}"
    if void.family not in VOID_LAYERS:
        raise LacunaError(
            f"unknown void family {void.family!r}.", where=where, hint=f"Use one of {', '.join(VOID_LAYERS)}."
        )
    if not (math.isfinite(void.size_mm) and void.size_mm > 0):
        raise LacunaError(f"void size must be a positive length, got {void.size_mm} mm.", where=where)
    if not all(math.isfinite(c) for c in void.centre):
        raise LacunaError("void centre is not a finite point.", where=where)
    if void.family != "bore":
        if void.outline:
            arr = np.asarray(void.outline, dtype=float)
            if arr.ndim != 2 or arr.shape[1] != 3 or len(arr) < 2 or not np.isfinite(arr).all():
                raise LacunaError(
                    "void outline must be two or more finite (x, y, bulge) vertices.", where=where,
                    hint="Give the outline as (x, y, bulge) tuples in local mm.",
                )
        elif void.shape.is_empty or void.shape.geom_type != "Polygon":
            raise LacunaError("void has neither an outline nor a polygon shape.", where=where)


def freeform_rings(freeform) -> list[np.ndarray]:
    """Every ring (outer and holes) of the freeform polygons, without the repeated closing vertex."""
    if freeform is None:
        return []
    geoms = [freeform] if isinstance(freeform, (Polygon, MultiPolygon)) else list(freeform)
    rings = []
    for k, g in enumerate(geoms):
        if isinstance(g, MultiPolygon):
            parts = list(g.geoms)
        elif isinstance(g, Polygon):
            parts = [g]
        else:
            raise LacunaError(
                f"freeform outline {k} is a {type(g).__name__}, not a shapely Polygon or MultiPolygon.",
                where=f"freeform {k}",
            )
        for p in parts:
            if p.is_empty:
                continue
            for ring in (p.exterior, *p.interiors):
                xy = np.asarray(ring.coords, dtype=float)[:-1, :2]
                if len(xy) >= 3:
                    rings.append(xy)
    return rings


def as_marker(m, k: int) -> Marker:
    """A :class:`Marker` from a Marker or a mapping shaped like a check-JSON violation (``where``, ``rule``, and
    ``measured`` with ``required`` for the label); ``k`` numbers it in the messages."""
    if isinstance(m, Marker):
        marker = m
    elif isinstance(m, Mapping) and "where" in m:
        label = str(m.get("rule", "check"))
        if "measured" in m and "required" in m:
            # a stress rule is broken from above (MPa), a length rule from below
            sign = ">" if m.get("rule") == "max_edge_stress" else "<"
            measured, required = _two_figures(float(m["measured"]), float(m["required"]))
            label += f" {measured} {sign} {required}"
        marker = Marker(tuple(m["where"]), label, m.get("radius_mm"))
    else:
        raise LacunaError(
            f"check marker {k} is neither a Marker nor a mapping with 'where'.", where=f"check marker {k}"
        )
    if len(marker.where) != 2 or not all(math.isfinite(float(c)) for c in marker.where):
        raise LacunaError(f"check marker {k} has no finite position: {marker.where!r}.", where=f"check marker {k}")
    if marker.radius_mm is not None and not marker.radius_mm > 0:
        raise LacunaError(f"check marker {k} radius must be positive.", where=f"check marker {k}")
    return marker


def _two_figures(measured: float, required: float) -> tuple[str, str]:
    """A marker's measured and required figures with three significant digits, more only where three would
    print the two alike (1.2004 against 1.2 reads "1.2004 > 1.2", never "1.2 > 1.2"); six at most."""
    for digits in range(3, 7):
        a, b = f"{measured:.{digits}g}", f"{required:.{digits}g}"
        if a != b:
            break
    return a, b
