"""The proof: fabrication rules checked with shapely on the final void geometry (panel local frame, mm).

Distances are measured on the real shapes. A bore is checked as the true circle (its centre and radius), a
slot as the true stadium (its axis segment and half its width): a distance to either is the distance to the
centre or axis less the radius, which is exact, where the flattened polygon in ``Void.shape`` would sit up to
r (1 - cos(pi / n)) inside the arc. Other voids are checked as their ``shape``.

Definitions (docs/rules.md says the same in words):

- size of a void (``min_void``): the diameter of the largest circle inside it — what the narrowest part of a
  cutter or former must pass; a bore's diameter, a slot's width, an n-gon's inscribed-circle diameter.
- extent of a void or opening (``web_ratio``): the diameter of its smallest enclosing circle.
- overlap depth (``overlap``, ``opening``, ``keep``): the larger of how far one shape reaches into the other
  (exact for circles and stadia) and the diameter of the largest circle inside the shared area.
- tolerance: a rule fails only when it is missed by more than ``TOLERANCE_MM``; stock sizes match within it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np
import shapely
from shapely.geometry import LineString, Point, Polygon, box

from ..errors import LacunaError
from ..model import Frame, Panel, PointLoad, Rules, Void, lengths_in_unit

TOLERANCE_MM = 0.01

# Segments per quarter circle of the zones grown around openings and supports; the grown polygons are
# circumscribed (chords outside the true arc), so a void inside allowed_region passes the exact check.
_QUAD_SEGS = 32

RULE_ORDER = ("outside", "edge_cover", "depth_band", "opening", "overlap", "min_web", "bearing_clearance", "keep",
              "min_void", "stock_size", "max_edge_stress")
# Rules whose measured and required figures are stresses (MPa), not lengths: no unit change to the drawing's.
STRESS_RULES = ("max_edge_stress",)

_SIDES = ("left", "right", "bottom", "top")
_SIDE_DIRS = np.array([[-1.0, 0.0], [1.0, 0.0], [0.0, -1.0], [0.0, 1.0]])


@dataclass(frozen=True)
class Violation:
    """One broken rule, located where it happens (local mm).

    ``where``: for a distance rule, the midpoint of the shortest segment between the two things; for an
    overlap, the centre of the largest circle inside the shared area; for a size rule, the void's centre.
    ``measured`` and ``required`` in mm (an overlap's ``measured`` is its depth and ``required`` 0).
    """

    rule: str
    where: tuple[float, float]
    measured: float
    required: float
    handles: tuple[str, ...] = ()
    void_ids: tuple[str, ...] = ()
    message: str = ""

    def to_json(self, frame: Frame | None = None) -> dict:
        """The CONTRACT.md ``check`` entry; with ``frame``, position and lengths in the drawing's unit."""
        where = np.asarray(self.where, dtype=float)
        measured, required = self.measured, self.required
        if frame is not None:
            where = frame.to_drawing(where)
            if self.rule not in STRESS_RULES:
                measured, required = frame.length_to_drawing(measured), frame.length_to_drawing(required)
        return {
            "rule": self.rule,
            "where": [round(float(where[0]), 6), round(float(where[1]), 6)],
            "measured": round(float(measured), 6),
            "required": round(float(required), 6),
            "handles": list(self.handles),
            "void_ids": list(self.void_ids),
            "message": lengths_in_unit(self.message, frame) if frame is not None else self.message,
        }


# --- rule values ----------------------------------------------------------------------------------------------


def _extras(rules: Rules) -> tuple[float, float, float | None]:
    """Profile-specific rules (web_ratio, min_void_per_thickness, depth_band); absent on a plain model.Rules."""
    return float(rules.web_ratio or 0.0), float(rules.min_void_per_thickness or 0.0), rules.depth_band


def _validate_rules(rules: Rules) -> None:
    for key in ("min_web", "edge_cover", "min_void", "bearing_clearance", "corner_size"):
        value = getattr(rules, f"{key}_mm")
        if not (isinstance(value, (int, float)) and math.isfinite(value) and value >= 0):
            raise LacunaError(f"{key} must be a length of 0 or more, got {value!r}.", where=f"[rules] {key}",
                              hint="Give it in the job file's length unit.")
    for key in ("bore_diameters", "slot_widths"):
        for value in getattr(rules, f"{key}_mm"):
            if not (math.isfinite(value) and value > 0):
                raise LacunaError(f"{key} holds {value!r}; every stock size must be above 0.",
                                  where=f"[rules] {key}", hint="Remove the entry or correct it.")
    ratio, per_t, band = _extras(rules)
    for key, value in (("web_ratio", ratio), ("min_void_per_thickness", per_t)):
        if not (math.isfinite(value) and value >= 0):
            raise LacunaError(f"{key} must be 0 or more, got {value!r}.", where=f"profile {rules.profile}, {key}")
    if band is not None and not (0 < band <= 1):
        raise LacunaError(f"depth_band must lie in (0, 1], got {band!r}.", where=f"profile {rules.profile}, depth_band",
                          hint="It is the middle fraction of the depth that voids may use, e.g. 0.5.")


def least_void_size(rules: Rules, thickness_mm: float) -> float:
    """The least void size in force (mm): min_void, or the profile's multiple of the thickness if larger."""
    _, per_t, _ = _extras(rules)
    return max(rules.min_void_mm, per_t * thickness_mm)


def least_void_by_thickness(rules: Rules, thickness_mm: float) -> bool:
    """Whether the profile's multiple of the thickness, not min_void, sets the least void size."""
    _, per_t, _ = _extras(rules)
    return per_t * thickness_mm > rules.min_void_mm


def _depth_axis(panel: Panel) -> int:
    """The axis across the panel's depth: y unless the panel is taller than it is long."""
    return 1 if panel.height_mm <= panel.width_mm else 0


# --- voids as exact bodies --------------------------------------------------------------------------------------


def _void_where(v: Void) -> str:
    text = f"void {v.id}"
    if v.handle:
        text += f" (layer {v.layer}, handle {v.handle})" if v.layer else f" (handle {v.handle})"
    return text


@dataclass(frozen=True)
class _Bodies:
    """Each void as core geometry + radius (a bore: centre + r; a slot: axis + w/2; else: polygon + 0)."""

    voids: tuple[Void, ...]
    cores: np.ndarray      # object array of shapely geometries
    radii: np.ndarray
    shapes: np.ndarray     # object array: the void polygons (flattened), for overlap areas
    size: np.ndarray       # largest inscribed circle diameter
    size_at: np.ndarray    # (n, 2) its centre
    extent: np.ndarray     # smallest enclosing circle diameter


def _check_void(v: Void) -> None:
    shape = v.shape
    if v.family not in ("polygon", "slot", "bore"):
        raise LacunaError(f'void family must be "polygon", "slot" or "bore", got {v.family!r}.', where=_void_where(v))
    if not isinstance(shape, Polygon) or shape.is_empty or not shape.area > 0:
        raise LacunaError("the void has no area.", where=_void_where(v),
                          hint="Draw each void as a closed polyline or a circle.")
    if not shape.is_valid:
        raise LacunaError(f"the void's outline is not a simple closed shape ({shapely.is_valid_reason(shape)}).",
                          where=_void_where(v), hint="Redraw the outline so that it does not cross itself.")


def _stadium_axis(v: Void) -> LineString | Point | None:
    half = (v.length_mm - v.size_mm) / 2.0
    if not (v.size_mm > 0 and half >= 0):
        return None
    if half < 1e-9:  # as long as it is wide: a circle (a zero-length line upsets the distance code)
        return Point(v.centre)
    a = math.radians(v.angle_deg)
    d = np.array([math.cos(a), math.sin(a)]) * half
    c = np.asarray(v.centre, dtype=float)
    return LineString([c - d, c + d])


def _agrees(shape: Polygon, core, radius: float) -> bool:
    """Whether the void's polygon is a flattened outline of core grown by radius: every vertex and every edge
    midpoint lies at the radius from the core (a chord's sagitta counts, so a square is no circle)."""
    xy = shapely.get_coordinates(shape.exterior)
    probes = np.vstack([xy, (xy[:-1] + xy[1:]) / 2])
    off = np.abs(shapely.distance(shapely.points(probes), core) - radius)
    return bool(off.max() <= max(0.5, 0.02 * radius))


def _bodies(voids: Sequence[Void]) -> _Bodies:
    cores, radii, size, size_at, extent = [], [], [], [], []
    for v in voids:
        _check_void(v)
        core, r = None, 0.0
        if v.family == "bore":
            if not v.size_mm > 0:
                raise LacunaError(f"the bore's diameter must be above 0, got {v.size_mm!r}.", where=_void_where(v))
            core, r = Point(v.centre), v.size_mm / 2.0
            if not _agrees(v.shape, core, r):
                raise LacunaError(f"the void is marked as a bore of {v.size_mm:g} mm but its outline is not that "
                                  f"circle.", where=_void_where(v),
                                  hint="Draw bores as CIRCLE entities, or put the outline on the polygon layer.")
        elif v.family == "slot":
            axis = _stadium_axis(v)
            if axis is not None and _agrees(v.shape, axis, v.size_mm / 2.0):
                core, r = axis, v.size_mm / 2.0
        if core is None:
            # not a true circle or stadium: the polygon itself, measured on its outline
            core, r = v.shape, 0.0
            width, at = _inscribed(v.shape)
            size.append(width)
            size_at.append(at)
            extent.append(2.0 * shapely.minimum_bounding_radius(v.shape))
        else:
            size.append(2.0 * r)
            size_at.append(np.asarray(v.centre, dtype=float))
            extent.append(2.0 * r + (core.length if isinstance(core, LineString) else 0.0))
        cores.append(core)
        radii.append(r)
    return _Bodies(tuple(voids), _objects(cores), np.asarray(radii, dtype=float), _objects([v.shape for v in voids]),
                   np.asarray(size, dtype=float), np.asarray(size_at, dtype=float).reshape(-1, 2),
                   np.asarray(extent, dtype=float))


def _objects(items) -> np.ndarray:
    """A 1-D object array of geometries (np.array would try to unpack them)."""
    out = np.empty(len(items), dtype=object)
    out[:] = list(items)
    return out


def _inscribed(geom) -> tuple[float, np.ndarray]:
    """Diameter and centre of the largest circle inside a polygonal geometry (0 and a point on it for slivers)."""
    area = float(geom.area)
    if area > 0:
        with np.errstate(divide="ignore", invalid="ignore"):  # slivers of rounding-error area defeat the search
            mic = shapely.maximum_inscribed_circle(geom, tolerance=max(1e-4, 1e-4 * math.sqrt(area)))
        width = 2.0 * mic.length
        if math.isfinite(width):
            return width, shapely.get_coordinates(mic)[0]
    return 0.0, shapely.get_coordinates(geom.representative_point())[0]


def _support_point(core, radius: float, direction: np.ndarray) -> np.ndarray:
    """The body's farthest point along a unit direction (ties on a flat side: the middle of that side)."""
    xy = shapely.get_coordinates(core)
    reach = xy @ direction
    top = xy[reach >= reach.max() - 1e-9]
    return top.mean(axis=0) + radius * direction


def _segment_between(core_a, ra: float, core_b, rb: float) -> tuple[np.ndarray, np.ndarray]:
    """End points of the shortest segment between two bodies (equal points where they touch)."""
    p, q = shapely.get_coordinates(shapely.shortest_line(core_a, core_b))
    gap = float(np.hypot(*(q - p)))
    if gap <= 0:
        return p, p
    u = (q - p) / gap
    a, b = p + ra * u, q - rb * u
    if gap < ra + rb:  # overlapping bodies: the segment turns round; both ends at the overlap's middle
        m = (a + b) / 2
        return m, m
    return a, b


def _overlap(bodies: _Bodies, i: int, other_core, other_r: float, other_shape, signed: float
             ) -> tuple[float, np.ndarray]:
    """Overlap depth of body i with another body and where it is (see the module notes)."""
    depth = max(-signed, 0.0)
    where = None
    inter = shapely.intersection(bodies.shapes[i], other_shape)
    if not inter.is_empty and inter.area > 0:
        width, where = _inscribed(inter)
        depth = max(depth, width)
    core, r = bodies.cores[i], bodies.radii[i]
    if isinstance(core, Point) and isinstance(other_core, Point) and signed < 0:
        # two circles: the lens' middle on the line of centres, exactly
        c1, c2 = shapely.get_coordinates(core)[0], shapely.get_coordinates(other_core)[0]
        gap = float(np.hypot(*(c2 - c1)))
        u = (c2 - c1) / gap if gap > 0 else np.array([1.0, 0.0])
        where = c1 + u * (r - depth / 2.0)
    if where is None:
        a, b = _segment_between(core, r, other_core, other_r)
        where = (a + b) / 2
    return depth, where


# --- the check --------------------------------------------------------------------------------------------------


def _pt(xy) -> tuple[float, float]:
    return (float(xy[0]), float(xy[1]))


def _handles(*items) -> tuple[str, ...]:
    return tuple(h for h in (getattr(x, "handle", None) for x in items) if h)


def _region_name(region, kind: str) -> str:
    return f"{kind} ({region.source})" if region.layer or region.handle else kind


def _edge_gaps(b: _Bodies, W: float, H: float) -> np.ndarray:
    """(n, 4) each void's gap to the left, right, bottom and top edge: the envelope is the rectangle [0, W] x
    [0, H], so a body's bounds grown by its radius give the gaps exactly."""
    bounds = shapely.bounds(b.cores)
    lo, hi = bounds[:, :2] - b.radii[:, None], bounds[:, 2:] + b.radii[:, None]
    return np.column_stack([lo[:, 0], W - hi[:, 0], lo[:, 1], H - hi[:, 1]])


def _void_webs(b: _Bodies, ii: np.ndarray, jj: np.ndarray, min_web: float, ratio: float):
    """Between voids ii and jj: the clear gap (0 where they touch or overlap) and the web the rules ask, the
    minimum web or the ratio times the larger one's extent."""
    signed = shapely.distance(b.cores[ii], b.cores[jj]) - b.radii[ii] - b.radii[jj]
    return signed, np.maximum(min_web, ratio * np.maximum(b.extent[ii], b.extent[jj]))


def _opening_webs(b: _Bodies, panel: Panel, min_web: float, ratio: float):
    """(n voids, m openings) gaps and required webs, as :func:`_void_webs`."""
    shapes = _objects([o.shape for o in panel.openings])
    o_extent = 2.0 * shapely.minimum_bounding_radius(shapes)
    signed = shapely.distance(b.cores[:, None], shapes[None, :]) - b.radii[:, None]
    return signed, np.maximum(min_web, ratio * np.maximum(b.extent[:, None], o_extent[None, :]))


def check_layout(panel: Panel, voids: Sequence[Void], rules: Rules) -> list[Violation]:
    """Every fabrication rule proved on the final geometry; the list is empty only when all hold.

    Rules: edge cover from the outline (and voids inside it), the profile's depth band, webs between voids and
    between voids and openings (no overlaps), bearing clearance around supports and point loads, no void
    in a keep zone, least void size, stock bore diameters and slot widths. Sorted by rule, then void ids.
    """
    _validate_rules(rules)
    voids = tuple(voids)
    if not voids:
        return []
    tol = TOLERANCE_MM
    ratio, _, band = _extras(rules)
    b = _bodies(voids)
    out: list[Violation] = []
    W, H = panel.width_mm, panel.height_mm

    gaps = _edge_gaps(b, W, H)
    axis = _depth_axis(panel)
    depth = (W, H)[axis]
    need_band = None if band is None else (1.0 - band) / 2.0 * depth
    across = (2, 3) if axis == 1 else (0, 1)
    for i, v in enumerate(voids):
        side = int(np.argmin(gaps[i]))
        gap = float(gaps[i, side])
        if gap < -tol or gap < rules.edge_cover_mm - tol:
            p = _support_point(b.cores[i], b.radii[i], _SIDE_DIRS[side])
            q = p.copy()
            q[side // 2] = (0.0, W, 0.0, H)[side]
            if gap < -tol:
                out.append(Violation("outside", _pt((p + q) / 2), -gap, 0.0, _handles(v), (v.id,),
                                     f"Void {v.id} reaches {-gap:.1f} mm beyond the {_SIDES[side]} edge of the panel."))
                continue
            out.append(Violation("edge_cover", _pt((p + q) / 2), gap, rules.edge_cover_mm, _handles(v), (v.id,),
                                 f"Void {v.id} is {gap:.1f} mm from the {_SIDES[side]} edge; the edge cover is "
                                 f"{rules.edge_cover_mm:g} mm."))
        if need_band is not None:
            s = across[int(np.argmin(gaps[i, list(across)]))]
            residual = float(gaps[i, s])
            if residual < need_band - tol:
                p = _support_point(b.cores[i], b.radii[i], _SIDE_DIRS[s])
                q = p.copy()
                q[s // 2] = (0.0, W, 0.0, H)[s]
                out.append(Violation("depth_band", _pt((p + q) / 2), residual, need_band, _handles(v), (v.id,),
                                     f"Void {v.id} leaves {residual:.1f} mm of depth at the {_SIDES[s]} edge; "
                                     f"voids must stay in the middle {band:.0%} of the {depth:g} mm depth, "
                                     f"leaving {need_band:g} mm."))

    # void to void: candidate pairs from the tree, then exact clearances
    if len(voids) > 1:
        reach = max(rules.min_web_mm, ratio * float(b.extent.max())) + 2.0 * float(b.radii.max()) + tol
        tree = shapely.STRtree(b.cores)
        ii, jj = tree.query(b.cores, predicate="dwithin", distance=reach)
        keep = ii < jj
        ii, jj = ii[keep], jj[keep]
        signed, required = _void_webs(b, ii, jj, rules.min_web_mm, ratio)
        for i, j, s, req in zip(ii, jj, signed, required):
            # polygons report distance 0 whether they touch or overlap: those always get the overlap test
            if s >= req - tol and s > tol:
                continue
            vi, vj = voids[i], voids[j]
            ids = (vi.id, vj.id)
            if s <= tol:
                depth_ij, where = _overlap(b, i, b.cores[j], b.radii[j], b.shapes[j], s)
                if depth_ij > tol:
                    out.append(Violation("overlap", _pt(where), depth_ij, 0.0, _handles(vi, vj), ids,
                                         f"Voids {vi.id} and {vj.id} overlap by {depth_ij:.1f} mm."))
                    continue
                if s >= req - tol:
                    continue
            a, c = _segment_between(b.cores[i], b.radii[i], b.cores[j], b.radii[j])
            web = max(float(s), 0.0)
            out.append(Violation("min_web", _pt((a + c) / 2), web, float(req), _handles(vi, vj), ids,
                                 f"The web between voids {vi.id} and {vj.id} is {web:.1f} mm; at least "
                                 f"{req:g} mm is required."))

    # voids and the panel's own openings
    if panel.openings:
        signed, required = _opening_webs(b, panel, rules.min_web_mm, ratio)
        for i, k in zip(*np.nonzero((signed < required - tol) | (signed <= tol))):
            v, o = voids[i], panel.openings[k]
            s, req = float(signed[i, k]), float(required[i, k])
            name = _region_name(o, "opening")
            if s <= tol:
                depth_ik, where = _overlap(b, i, o.shape, 0.0, o.shape, s)
                if depth_ik > tol:
                    out.append(Violation("opening", _pt(where), depth_ik, 0.0, _handles(v, o), (v.id,),
                                         f"Void {v.id} runs {depth_ik:.1f} mm into the {name}."))
                    continue
                if s >= req - tol:
                    continue
            a, c = _segment_between(b.cores[i], b.radii[i], o.shape, 0.0)
            web = max(s, 0.0)
            out.append(Violation("min_web", _pt((a + c) / 2), web, req, _handles(v, o), (v.id,),
                                 f"The web between void {v.id} and the {name} is {web:.1f} mm; at least {req:g} mm "
                                 f"is required."))

    # bearing zones around supports (point or segment) and point loads
    zones = bearing_anchors(panel)
    if zones and rules.bearing_clearance_mm > 0:
        geoms = _objects([g for g, _ in zones])
        signed = shapely.distance(b.cores[:, None], geoms[None, :]) - b.radii[:, None]
        bc = rules.bearing_clearance_mm
        for i, k in zip(*np.nonzero(signed < bc - tol)):
            v = voids[i]
            gap = max(float(signed[i, k]), 0.0)
            a, c = _segment_between(b.cores[i], b.radii[i], geoms[k], 0.0)
            where = (a + c) / 2 if gap > 0 else shapely.get_coordinates(shapely.shortest_line(b.cores[i], geoms[k]))[1]
            out.append(Violation("bearing_clearance", _pt(where), gap, bc, _handles(v), (v.id,),
                                 f"Void {v.id} is {gap:.1f} mm from the {zones[k][1]}; the bearing clearance is "
                                 f"{bc:g} mm."))

    # keep zones stay solid
    if panel.keep:
        shapes = _objects([z.shape for z in panel.keep])
        signed = shapely.distance(b.cores[:, None], shapes[None, :]) - b.radii[:, None]
        for i, k in zip(*np.nonzero(signed <= tol)):
            v, z = voids[i], panel.keep[k]
            depth_ik, where = _overlap(b, i, z.shape, 0.0, z.shape, float(signed[i, k]))
            if depth_ik > tol:
                out.append(Violation("keep", _pt(where), depth_ik, 0.0, _handles(v, z), (v.id,),
                                     f"Void {v.id} cuts {depth_ik:.1f} mm into the "
                                     f"{_region_name(z, 'keep zone')}, which must stay solid."))

    # size and stock sizes
    least = least_void_size(rules, panel.thickness_mm)
    for i, v in enumerate(voids):
        if b.size[i] < least - tol:
            out.append(Violation("min_void", _pt(b.size_at[i]), float(b.size[i]), least, _handles(v), (v.id,),
                                 f"Void {v.id} is {b.size[i]:.1f} mm across at its narrowest; the least void size is "
                                 f"{least:g} mm."))
        stock = rules.bore_diameters_mm if v.family == "bore" else rules.slot_widths_mm if v.family == "slot" else ()
        if stock:
            sizes = np.asarray(stock, dtype=float)
            nearest = float(sizes[np.argmin(np.abs(sizes - b.size[i]))])
            if abs(nearest - b.size[i]) > tol:
                what = "diameter" if v.family == "bore" else "width"
                out.append(Violation("stock_size", _pt(b.size_at[i]), float(b.size[i]), nearest, _handles(v), (v.id,),
                                     f"Void {v.id} has a {what} of {b.size[i]:.2f} mm, not a stock size; the nearest "
                                     f"is {nearest:g} mm."))

    order = {r: n for n, r in enumerate(RULE_ORDER)}
    out.sort(key=lambda x: (order.get(x.rule, len(order)), x.void_ids, x.where))
    return out


@dataclass(frozen=True)
class Margin:
    """How closely a layout keeps one rule: the tightest place (``measured`` against ``required``, mm; for
    ``corner`` and the stock sizes a count of voids kept), the voids there, and ``margin`` = measured - required
    (None where the rule is kept by construction or counted)."""

    rule: str
    required: float | None
    measured: float | None
    void_ids: tuple[str, ...]
    text: str

    @property
    def margin(self) -> float | None:
        if self.required is None or self.measured is None:
            return None
        return self.measured - self.required


def rule_margins(panel: Panel, voids: Sequence[Void], rules: Rules) -> list[Margin]:
    """Every rule in force, with the place where the layout comes closest to breaking it, measured as
    ``check_layout`` measures (the same bodies, gaps and webs): edge cover, depth band, webs (the minimum web or
    the web ratio, between voids and to openings), bearing clearance, keep zones, least void size, least side of
    an n-gon, corner easing, stock sizes. A rule with nothing to measure (no second void, no opening) says so."""
    _validate_rules(rules)
    voids = tuple(voids)
    out: list[Margin] = []
    if not voids:
        return out
    ratio, _, band = _extras(rules)
    b = _bodies(voids)
    W, H = panel.width_mm, panel.height_mm
    gaps = _edge_gaps(b, W, H)
    i = int(np.argmin(gaps.min(axis=1)))
    out.append(Margin("edge_cover", rules.edge_cover_mm, float(gaps[i].min()), (voids[i].id,),
                      f"{voids[i].id} is {gaps[i].min():.1f} mm from the {_SIDES[int(np.argmin(gaps[i]))]} edge"))
    if band is not None:
        axis = _depth_axis(panel)
        depth = (W, H)[axis]
        across = [2, 3] if axis == 1 else [0, 1]
        left = gaps[:, across].min(axis=1)
        i = int(np.argmin(left))
        out.append(Margin("depth_band", (1.0 - band) / 2.0 * depth, float(left[i]), (voids[i].id,),
                          f"{voids[i].id} leaves {left[i]:.1f} mm of the {depth:g} mm depth (middle {band:.0%})"))
    # webs: between voids, and to openings; the required web of each pair follows the web ratio where it is in force
    webs: list[tuple[float, float, tuple[str, ...], str]] = []
    if len(voids) > 1:
        ii, jj = np.triu_indices(len(voids), k=1)
        signed, required = _void_webs(b, ii, jj, rules.min_web_mm, ratio)
        k = int(np.argmin(signed - required))
        webs.append((float(signed[k]), float(required[k]), (voids[ii[k]].id, voids[jj[k]].id),
                     f"between {voids[ii[k]].id} and {voids[jj[k]].id}"))
    if panel.openings:
        signed, required = _opening_webs(b, panel, rules.min_web_mm, ratio)
        i, k = np.unravel_index(int(np.argmin(signed - required)), signed.shape)
        webs.append((float(signed[i, k]), float(required[i, k]), (voids[i].id,),
                     f"between {voids[i].id} and the {_region_name(panel.openings[k], 'opening')}"))
    name = "web_ratio" if ratio > 0 else "min_web"
    if webs:
        measured, required, ids, where = min(webs, key=lambda w: w[0] - w[1])
        rule = "min_web" if required <= rules.min_web_mm + 1e-9 else name
        out.append(Margin(rule, required, measured, ids, f"the web {where} is {measured:.1f} mm"))
    else:
        out.append(Margin(name, None, None, (), "one void and no opening: no web to measure"))
    zones = bearing_anchors(panel)
    if zones and rules.bearing_clearance_mm > 0:
        geoms = _objects([g for g, _ in zones])
        signed = shapely.distance(b.cores[:, None], geoms[None, :]) - b.radii[:, None]
        i, k = np.unravel_index(int(np.argmin(signed)), signed.shape)
        out.append(Margin("bearing_clearance", rules.bearing_clearance_mm, float(signed[i, k]), (voids[i].id,),
                          f"{voids[i].id} is {signed[i, k]:.1f} mm from the {zones[k][1]}"))
    if panel.keep:
        shapes = _objects([z.shape for z in panel.keep])
        signed = shapely.distance(b.cores[:, None], shapes[None, :]) - b.radii[:, None]
        i, k = np.unravel_index(int(np.argmin(signed)), signed.shape)
        out.append(Margin("keep", 0.0, float(signed[i, k]), (voids[i].id,),
                          f"{voids[i].id} is {signed[i, k]:.1f} mm from the {_region_name(panel.keep[k], 'keep zone')}"))
    least = least_void_size(rules, panel.thickness_mm)
    i = int(np.argmin(b.size))
    out.append(Margin("min_void", least, float(b.size[i]), (voids[i].id,),
                      f"{voids[i].id} is {b.size[i]:.1f} mm across at its narrowest"))
    polygons = [(v, np.asarray(v.corners, dtype=float)) for v in voids if v.family == "polygon" and v.corners]
    if polygons and rules.least_feature_mm > 0:
        sides = [(float(np.min(np.linalg.norm(np.roll(c, -1, axis=0) - c, axis=1))), v) for v, c in polygons]
        side, v = min(sides, key=lambda t: t[0])
        out.append(Margin("least_feature", rules.least_feature_mm, side, (v.id,),
                          f"the shortest side, of {v.id}, is {side:.1f} mm between sharp corners"))
    if polygons and rules.corner != "none" and rules.corner_size_mm > 0:
        out.append(Margin("corner", None, None, tuple(v.id for v, _ in polygons),
                          f"every corner of the {len(polygons)} n-gon(s) drawn with a {rules.corner} of "
                          f"{rules.corner_size_mm:g} mm (kept by construction: the outline carries it)"))
    for family, stock, key in (("bore", rules.bore_diameters_mm, "bore_diameters"),
                               ("slot", rules.slot_widths_mm, "slot_widths")):
        mine = [k for k, v in enumerate(voids) if v.family == family]
        if mine and stock:
            sizes = np.asarray(stock, dtype=float)
            ok = sum(1 for k in mine if np.min(np.abs(sizes - b.size[k])) <= TOLERANCE_MM)
            out.append(Margin(key, None, None, tuple(voids[k].id for k in mine),
                              f"{ok} of {len(mine)} {family}s at a stock size"))
    return out


def bearing_anchors(panel: Panel) -> list[tuple[object, str]]:
    """Each support (point or segment) and point load as a geometry with a name for messages."""
    out: list[tuple[object, str]] = []
    for s in panel.supports:
        # a segment shorter than a micron is a point: shapely's distance to a zero-length line is NaN
        geom = Point(s.points[0]) if s.is_point or math.dist(*s.points) < 1e-6 else LineString(s.points)
        place = f"at {_fmt(s.points[0])}" if s.is_point else f"from {_fmt(s.points[0])} to {_fmt(s.points[1])}"
        out.append((geom, f"support {s.source}" if s.source else f"support {place}"))
    for load in panel.loads:
        if isinstance(load, PointLoad):
            name = f"point load {load.source}" if load.source else f"point load at {_fmt(load.at)}"
            out.append((Point(load.at), name))
    return out


def _fmt(p) -> str:
    return f"({p[0]:g}, {p[1]:g}) mm"


# --- where void material may go -----------------------------------------------------------------------------------


def _grow(geom, distance: float):
    """``geom`` grown by ``distance``, polygon circumscribing the true offset (never smaller than it)."""
    if distance < 1e-9:
        # GEOS returns an EMPTY geometry for a vanishing (e.g. denormal) positive distance: grow by nothing.
        return geom
    return shapely.buffer(geom, distance / math.cos(math.pi / (4 * _QUAD_SEGS)), quad_segs=_QUAD_SEGS)


def _stages(panel: Panel, rules: Rules):
    """The allowed region after each rule in turn: (stage name, region)."""
    _validate_rules(rules)
    ratio, _, band = _extras(rules)
    W, H, ec = panel.width_mm, panel.height_mm, rules.edge_cover_mm
    region = box(ec, ec, W - ec, H - ec) if (W > 2 * ec and H > 2 * ec) else Polygon()
    yield "edge_cover", region
    if band is not None and not region.is_empty:
        axis = _depth_axis(panel)
        depth = (W, H)[axis]
        lo, hi = (1 - band) / 2 * depth, (1 + band) / 2 * depth
        region = region.intersection(box(0, lo, W, hi) if axis == 1 else box(lo, 0, hi, H))
        yield "depth_band", region
    if panel.openings and not region.is_empty:
        grown = []
        for o in panel.openings:
            web = max(rules.min_web_mm, ratio * 2.0 * shapely.minimum_bounding_radius(o.shape))
            grown.append(_grow(o.shape, web) if web > 0 else o.shape)
        region = region.difference(shapely.union_all(grown))
        yield "openings", region
    zones = bearing_anchors(panel)
    if zones and rules.bearing_clearance_mm > 0 and not region.is_empty:
        region = region.difference(shapely.union_all([_grow(g, rules.bearing_clearance_mm) for g, _ in zones]))
        yield "bearing", region
    if panel.keep and not region.is_empty:
        region = region.difference(shapely.union_all([z.shape for z in panel.keep]))
        yield "keep", region


def allowed_region(panel: Panel, rules: Rules):
    """Where void material may go: the envelope shrunk by edge cover (and held to the profile's depth band),
    less the openings grown by their web, the bearing zones and the keep zones (shapely geometry, local mm).

    A void inside this region keeps every rule that does not depend on the other voids (webs between voids,
    size and stock sizes are checked by :func:`check_layout`). Round zones are slightly conservative: the
    grown polygons circumscribe the true offsets (by at most 0.03 % of the grown distance).
    """
    region = Polygon()
    for _, region in _stages(panel, rules):
        pass
    return region


def _room(region) -> float:
    """Diameter of the largest circle that fits in the region (0 when empty)."""
    if region.is_empty:
        return 0.0
    return _inscribed(region)[0]


def impossible_rules(panel: Panel, rules: Rules):
    """Raise LacunaError in plain words when no void of the least size can be placed at all; else return
    :func:`allowed_region` (the fitting stage calls this first)."""
    least = max(least_void_size(rules, panel.thickness_mm), TOLERANCE_MM)
    W, H, ec = panel.width_mm, panel.height_mm, rules.edge_cover_mm
    axis = _depth_axis(panel)
    depth, length = (W, H)[axis], (W, H)[1 - axis]
    ratio, _, band = _extras(rules)
    done: list[str] = []
    region = Polygon()
    for stage, region in _stages(panel, rules):
        room = _room(region)
        if room >= least - TOLERANCE_MM:
            done.append(stage)
            continue
        lead = "no void can be placed: "
        if stage == "edge_cover":
            short = depth if depth - 2 * ec < least else length
            word = "deep" if short == depth else "long"
            raise LacunaError(
                lead + f"edge cover {ec:g} mm leaves no room in a {short:g} mm {word} panel "
                f"({max(short - 2 * ec, 0):g} mm left between the covers; the least void is {least:g} mm).",
                where="[rules] edge_cover",
                hint=f"Lower edge_cover to at most {max((short - least) / 2, 0):g} mm, lower min_void, "
                     f"or choose a larger panel.")
        if stage == "depth_band":
            raise LacunaError(
                lead + f"the profile keeps voids in the middle {band:.0%} of the {depth:g} mm depth, and with "
                f"the edge cover of {ec:g} mm that leaves {room:.0f} mm, less than the least void of {least:g} mm.",
                where=f"profile {rules.profile}, depth_band",
                hint="Choose a deeper panel, lower min_void, or another profile.")
        names = {"openings": f"the webs of {rules.min_web_mm:g} mm"
                             + (f" (or {ratio:g} x the opening's size)" if ratio else "")
                             + f" around {len(panel.openings)} opening(s)",
                 "bearing": f"the bearing zones of {rules.bearing_clearance_mm:g} mm around the supports and "
                            f"point loads",
                 "keep": f"{len(panel.keep)} keep zone(s)"}
        keys = {"openings": "[rules] min_web", "bearing": "[rules] bearing_clearance",
                "keep": "layer " + (panel.keep[0].layer or "KEEP") if panel.keep else "keep"}
        hints = {"openings": "Lower min_web, or move or shrink the openings.",
                 "bearing": "Lower bearing_clearance, or check the support and load positions.",
                 "keep": "Make the keep zones smaller, or lower edge_cover and min_web."}
        before = [names[s] for s in done if s in names]
        taken = (", ".join(before) + " and " if before else "") + names[stage]
        raise LacunaError(
            lead + f"with an edge cover of {ec:g} mm, {taken} leave no place for a void of {least:g} mm "
            f"(the largest that fits is {room:.0f} mm).",
            where=keys[stage], hint=hints[stage])
    return region
