"""Property tests: check_layout against an independent brute-force measure on random layouts and rules.

The reference side uses no shapely: each void is a circle, a stadium or a regular n-gon given by its parameters;
its boundary is sampled every H_MM along its true outline (arcs included), distances come from a k-d tree over
the samples (scipy) and point-in-shape tests from the parameters (distance to the centre or axis; crossing count
for a polygon). Sampled distances exceed the true ones by at most H_MM, so a rule is judged only where the brute
measure clears the requirement by MARGIN_MM either way; cases closer than that are skipped as undecidable.
Sizes in closed form: a circle's diameter, a stadium's width, a regular n-gon's inscribed diameter
2 R cos(pi / n) (elementary geometry).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st
from scipy.spatial import cKDTree
from shapely.geometry import LineString, Point, Polygon, box

from toolkit.model import Material, Panel, PointLoad, Region, Support, Void
from toolkit.rules.check import TOLERANCE_MM, allowed_region, check_layout
from toolkit.model import Rules

H_MM = 0.2
MARGIN_MM = 3 * H_MM + TOLERANCE_MM
MAT = Material(E_MPa=11500, nu=0.3)
STOCK = (20.0, 25.0, 40.0, 50.0, 80.0, 100.0)


# --- the reference shapes ------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Shape:
    kind: str                  # "circle", "slot", "ngon", "rect"
    c: tuple[float, float]
    r: float                   # circle / slot: radius; ngon: circumradius
    half: float = 0.0          # slot: half axis length
    angle: float = 0.0         # radians
    sides: int = 0
    corners: tuple = ()        # rect: (x0, y0, x1, y1)

    def vertices(self) -> np.ndarray:
        if self.kind == "rect":
            x0, y0, x1, y1 = self.corners
            return np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]])
        t = self.angle + 2 * np.pi * np.arange(self.sides) / self.sides
        return np.column_stack([self.c[0] + self.r * np.cos(t), self.c[1] + self.r * np.sin(t)])

    def axis(self) -> tuple[np.ndarray, np.ndarray]:
        d = self.half * np.array([math.cos(self.angle), math.sin(self.angle)])
        return np.asarray(self.c) - d, np.asarray(self.c) + d

    def boundary(self, h: float = H_MM) -> np.ndarray:
        if self.kind == "circle":
            n = max(16, int(math.ceil(2 * math.pi * self.r / h)))
            t = np.linspace(0, 2 * np.pi, n, endpoint=False)
            return np.column_stack([self.c[0] + self.r * np.cos(t), self.c[1] + self.r * np.sin(t)])
        if self.kind == "slot":
            a, b = self.axis()
            n_arc = max(8, int(math.ceil(math.pi * self.r / h)))
            normal = np.array([-math.sin(self.angle), math.cos(self.angle)])
            pieces = []
            for end, base in ((b, self.angle - np.pi / 2), (a, self.angle + np.pi / 2)):
                t = base + np.linspace(0, np.pi, n_arc)
                pieces.append(np.column_stack([end[0] + self.r * np.cos(t), end[1] + self.r * np.sin(t)]))
            n_side = max(2, int(math.ceil(2 * self.half / h)) + 1)
            s = np.linspace(0, 1, n_side)[:, None]
            pieces.append(a + s * (b - a) + self.r * normal)
            pieces.append(a + s * (b - a) - self.r * normal)
            return np.vstack(pieces)
        v = self.vertices()
        out = []
        for p, q in zip(v, np.roll(v, -1, axis=0)):
            n = max(2, int(math.ceil(np.hypot(*(q - p)) / h)) + 1)
            out.append(p + np.linspace(0, 1, n)[:, None] * (q - p))
        return np.vstack(out)

    def inside(self, pts: np.ndarray) -> np.ndarray:
        """Strictly inside (by more than 1e-9), from the parameters."""
        pts = np.atleast_2d(pts)
        if self.kind == "circle":
            return np.hypot(*(pts - self.c).T) < self.r - 1e-9
        if self.kind == "slot":
            a, b = self.axis()
            return _seg_dist(pts, a, b) < self.r - 1e-9
        v = self.vertices()
        x, y = pts[:, 0][:, None], pts[:, 1][:, None]
        x1, y1 = v[:, 0][None, :], v[:, 1][None, :]
        x2, y2 = np.roll(v[:, 0], -1)[None, :], np.roll(v[:, 1], -1)[None, :]
        crosses = ((y1 > y) != (y2 > y)) & (x < x1 + (y - y1) * (x2 - x1) / np.where(y2 == y1, 1, y2 - y1))
        odd = crosses.sum(axis=1) % 2 == 1
        edge = np.min(np.column_stack([_seg_dist(pts, p, q) for p, q in zip(v, np.roll(v, -1, axis=0))]), axis=1)
        return odd & (edge > 1e-9)

    @property
    def size(self) -> float:
        """Largest inscribed circle diameter, closed form."""
        if self.kind in ("circle", "slot"):
            return 2 * self.r
        return 2 * self.r * math.cos(math.pi / self.sides)

    @property
    def extent(self) -> float:
        """Smallest enclosing circle diameter, closed form."""
        if self.kind == "slot":
            return 2 * (self.r + self.half)
        if self.kind == "rect":
            x0, y0, x1, y1 = self.corners
            return math.hypot(x1 - x0, y1 - y0)
        return 2 * self.r


def _seg_dist(pts: np.ndarray, a, b) -> np.ndarray:
    a, b = np.asarray(a, float), np.asarray(b, float)
    ab = b - a
    L2 = float(ab @ ab)
    t = np.zeros(len(pts)) if L2 == 0 else np.clip((pts - a) @ ab / L2, 0, 1)
    return np.hypot(*(pts - (a + t[:, None] * ab)).T)


def to_void(s: Shape, vid: str, bore_d: float | None = None) -> Void:
    if s.kind == "circle":
        return Void(id=vid, family="bore", centre=s.c, size_mm=2 * s.r, shape=Point(s.c).buffer(s.r, quad_segs=32),
                    handle=f"H{vid}")
    if s.kind == "slot":
        a, b = s.axis()
        return Void(id=vid, family="slot", centre=s.c, size_mm=2 * s.r, length_mm=2 * (s.r + s.half),
                    angle_deg=math.degrees(s.angle), shape=LineString([a, b]).buffer(s.r, quad_segs=32),
                    handle=f"H{vid}")
    return Void(id=vid, family="polygon", centre=s.c, size_mm=2 * s.r, sides=s.sides, shape=Polygon(s.vertices()),
                handle=f"H{vid}")


# --- brute-force measures ------------------------------------------------------------------------------------


def brute_distance(a: Shape, b: Shape) -> float:
    """0 when they intersect, else the sampled boundary-to-boundary distance."""
    pa, pb = a.boundary(), b.boundary()
    if b.inside(pa).any() or a.inside(pb).any():
        return 0.0
    return float(cKDTree(pb).query(pa)[0].min())


def brute_depth(a: Shape, b: Shape) -> float:
    """How far the boundary of one reaches into the other (0 when apart)."""
    pa, pb = a.boundary(), b.boundary()
    depth = 0.0
    for p, q, other in ((pa, pb, b), (pb, pa, a)):
        inner = p[other.inside(p)]
        if len(inner):
            depth = max(depth, float(cKDTree(q).query(inner)[0].max()))
    return depth


def brute_to_geometry(s: Shape, pts: np.ndarray) -> float:
    """Distance from the shape to a point or polyline given by dense points (0 when the points are inside)."""
    if s.inside(pts).any():
        return 0.0
    return float(cKDTree(pts).query(s.boundary())[0].min())


def dense_segment(a, b, h=H_MM) -> np.ndarray:
    a, b = np.asarray(a, float), np.asarray(b, float)
    n = max(2, int(math.ceil(np.hypot(*(b - a)) / h)) + 1)
    return a + np.linspace(0, 1, n)[:, None] * (b - a)


# --- strategies ----------------------------------------------------------------------------------------------


@st.composite
def shapes(draw, width, height):
    kind = draw(st.sampled_from(["circle", "circle", "slot", "ngon"]))
    c = (draw(st.floats(-30, width + 30)), draw(st.floats(-30, height + 30)))
    if kind == "circle":
        d = draw(st.sampled_from(STOCK + (33.0, 61.5)))
        return Shape("circle", c, d / 2)
    if kind == "slot":
        w = draw(st.sampled_from((20.0, 40.0, 50.0, 45.0)))
        return Shape("slot", c, w / 2, half=draw(st.floats(0, 120)), angle=draw(st.floats(0, math.pi)))
    return Shape("ngon", c, draw(st.floats(8, 90)), angle=draw(st.floats(0, math.pi)), sides=draw(st.integers(3, 12)))


def _moved(s: Shape, c) -> Shape:
    return Shape(s.kind, (float(c[0]), float(c[1])), s.r, s.half, s.angle, s.sides, s.corners)


@st.composite
def placed(draw, width, height, rules, previous):
    """A shape placed freely, or near the threshold of a rule: its nearest point about the edge cover from an
    edge, or about the required web from the previous shape (within +-12 mm), so that near misses are common."""
    s = draw(shapes(width, height))
    how = draw(st.sampled_from(["free", "edge", "pair"] if previous else ["free", "edge"]))
    off = draw(st.floats(-12, 12))
    if how == "edge":
        pts = s.boundary(2.0) - s.c
        side = draw(st.integers(0, 3))
        along = draw(st.floats(0, 1)) * (width if side >= 2 else height)
        if side == 0:
            c = (rules.edge_cover_mm + off - pts[:, 0].min(), along)
        elif side == 1:
            c = (width - rules.edge_cover_mm - off - pts[:, 0].max(), along)
        elif side == 2:
            c = (along, rules.edge_cover_mm + off - pts[:, 1].min())
        else:
            c = (along, height - rules.edge_cover_mm - off - pts[:, 1].max())
        return _moved(s, c)
    if how == "pair":
        p = previous[-1]
        t = draw(st.floats(0, 2 * math.pi))
        u = np.array([math.cos(t), math.sin(t)])
        req = max(rules.min_web_mm, rules.web_ratio * max(p.extent, s.extent))
        # reach of each shape along u, from its boundary samples: an estimate, exact for circles
        reach = float((p.boundary(2.0) - p.c).dot(u).max() + (-(s.boundary(2.0) - s.c)).dot(u).max())
        return _moved(s, np.asarray(p.c) + u * (reach + req + off))
    return s


@st.composite
def scenes(draw):
    W = draw(st.floats(300, 1200))
    H = draw(st.floats(200, 600))
    rules = Rules(
        min_web_mm=draw(st.floats(0, 80)), edge_cover_mm=draw(st.floats(0, 80)), min_void_mm=draw(st.floats(0, 60)),
        bearing_clearance_mm=draw(st.floats(0, 150)), bore_diameters_mm=STOCK, slot_widths_mm=(20.0, 40.0, 50.0),
        web_ratio=draw(st.sampled_from((0.0, 0.5, 1.0))),
        min_void_per_thickness=draw(st.sampled_from((0.0, 1.5))),
        depth_band=draw(st.sampled_from((None, 0.5, 0.8))),
    )
    voids: list[Shape] = []
    for _ in range(draw(st.integers(1, 7))):
        voids.append(draw(placed(W, H, rules, voids)))
    ox, oy = draw(st.floats(0, W - 100)), draw(st.floats(0, H - 80))
    opening = Shape("rect", (0, 0), 0, corners=(ox, oy, ox + draw(st.floats(20, 100)), oy + draw(st.floats(20, 80))))
    kx, ky = draw(st.floats(0, W - 100)), draw(st.floats(0, H - 80))
    keep = Shape("rect", (0, 0), 0, corners=(kx, ky, kx + draw(st.floats(20, 100)), ky + draw(st.floats(20, 80))))
    s0 = draw(st.floats(0, W / 2))
    support = ((s0, 0.0), (s0 + draw(st.floats(0, 150)), 0.0))
    load = (draw(st.floats(0, W)), H)
    thickness = draw(st.floats(5, 40))
    return W, H, thickness, voids, opening, keep, support, load, rules


def _panel(W, H, t, opening, keep, support, load):
    return Panel(width_mm=W, height_mm=H, thickness_mm=t, material=MAT,
                 openings=(Region(shape=box(*opening.corners), layer="OPENING", handle="OP"),),
                 keep=(Region(shape=box(*keep.corners), layer="KEEP", handle="KP"),),
                 supports=(Support(points=support) if support[0] != support[1] else Support(points=(support[0],)),),
                 loads=(PointLoad(at=load, force_N=(0.0, -1e3)),))


def _rect_points(r: Shape) -> np.ndarray:
    v = r.vertices()
    return np.vstack([dense_segment(p, q) for p, q in zip(v, np.roll(v, -1, axis=0))])


# --- the properties ------------------------------------------------------------------------------------------


def _agreement(scene):
    W, H, t, shapes_, opening, keep, support, load, rules = scene
    panel = _panel(W, H, t, opening, keep, support, load)
    voids = [to_void(s, f"V{i}") for i, s in enumerate(shapes_)]
    found = check_layout(panel, voids, rules)
    by = {}
    for v in found:
        by.setdefault((v.rule, v.void_ids), []).append(v)
    has = lambda rule, ids: (rule, ids) in by  # noqa: E731
    m = MARGIN_MM

    for i, s in enumerate(shapes_):
        vid = (f"V{i}",)
        pts = s.boundary()
        gap = float(np.min(np.column_stack([pts[:, 0], W - pts[:, 0], pts[:, 1], H - pts[:, 1]])))
        # outline: outside / edge cover (one report per void)
        if gap < -m:
            assert has("outside", vid), (s, gap, found)
        elif gap > m:
            assert not has("outside", vid), (s, gap, found)
        if gap < rules.edge_cover_mm - m:
            assert has("outside", vid) or has("edge_cover", vid), (s, gap, found)
        elif gap > rules.edge_cover_mm + m:
            assert not has("edge_cover", vid) and not has("outside", vid), (s, gap, found)
        # depth band across the shorter side
        if rules.depth_band is not None and gap > m:
            ax = 1 if H <= W else 0
            D = (W, H)[ax]
            residual = float(min(pts[:, ax].min(), D - pts[:, ax].max()))
            need = (1 - rules.depth_band) / 2 * D
            if residual < need - m:
                assert has("depth_band", vid), (s, residual, need, found)
            elif residual > need + m:
                assert not has("depth_band", vid)
        # bearing: segment support and point load
        for anchor in (dense_segment(*support), np.array([load])):
            d = brute_to_geometry(s, anchor)
            if d < rules.bearing_clearance_mm - m:
                assert has("bearing_clearance", vid), (s, d, found)
        far = min(brute_to_geometry(s, dense_segment(*support)), brute_to_geometry(s, np.array([load])))
        if far > rules.bearing_clearance_mm + m:
            assert not has("bearing_clearance", vid)
        # keep zone
        kd = brute_depth(s, keep)
        if kd > m:
            assert has("keep", vid), (s, kd, found)
        elif brute_distance(s, keep) > m:
            assert not has("keep", vid)
        # opening: overlap or web
        od = brute_depth(s, opening)
        dist = brute_distance(s, opening)
        req = max(rules.min_web_mm, rules.web_ratio * max(s.extent, opening.extent))
        if od > m:
            assert has("opening", vid), (s, od, found)
        elif dist > m:
            assert not has("opening", vid)
            web = [v for v in by.get(("min_web", vid), [])]
            if dist < req - m:
                assert web, (s, dist, req, found)
            elif dist > req + m:
                assert not web, (s, dist, req, found)
        # size and stock
        need = max(rules.min_void_mm, rules.min_void_per_thickness * t)
        if s.size < need - m:
            assert has("min_void", vid)
        elif s.size > need + m:
            assert not has("min_void", vid)
        stock = STOCK if s.kind == "circle" else rules.slot_widths_mm if s.kind == "slot" else None
        if stock is not None:
            assert has("stock_size", vid) == (min(abs(x - s.size) for x in stock) > TOLERANCE_MM)

    for i in range(len(shapes_)):
        for j in range(i + 1, len(shapes_)):
            a, b = shapes_[i], shapes_[j]
            ids = (f"V{i}", f"V{j}")
            depth, dist = brute_depth(a, b), brute_distance(a, b)
            req = max(rules.min_web_mm, rules.web_ratio * max(a.extent, b.extent))
            if depth > m:
                assert has("overlap", ids), (a, b, depth, found)
            elif dist > m:
                assert not has("overlap", ids), (a, b, dist, found)
                if dist < req - m:
                    assert has("min_web", ids), (a, b, dist, req, found)
                elif dist > req + m:
                    assert not has("min_web", ids), (a, b, dist, req, found)
            if has("min_web", ids):
                v = by[("min_web", ids)][0]
                assert v.handles == (f"HV{i}", f"HV{j}")
                if dist > m:
                    # the sampled distance is within H_MM of the true one; where lies between the two voids
                    assert v.measured == pytest.approx(dist, abs=2 * H_MM)
                    assert brute_to_geometry(a, np.array([v.where])) == pytest.approx(v.measured / 2, abs=2 * H_MM)
                    assert brute_to_geometry(b, np.array([v.where])) == pytest.approx(v.measured / 2, abs=2 * H_MM)


_BARE = Rules(min_web_mm=0, edge_cover_mm=0, min_void_mm=0, bearing_clearance_mm=0,
                     bore_diameters_mm=STOCK, slot_widths_mm=(20.0, 40.0, 50.0))
_SQUARE = Shape("rect", (0, 0), 0, corners=(0.0, 0.0, 20.0, 20.0))
# Cases the long run once found: overlapping polygons with no web required (shapely's distance is 0 whether
# they touch or overlap); a support segment of almost zero length (shapely's distance to it is NaN).
_REGRESSIONS = [
    (300.0, 200.0, 5.0, [Shape("ngon", (0.0, 24.0), 8.0, sides=3), Shape("ngon", (0.0, 25.0), 8.0, sides=3)],
     _SQUARE, _SQUARE, ((0.0, 0.0), (0.0, 0.0)), (0.0, 200.0), _BARE),
    (300.0, 200.0, 5.0, [Shape("ngon", (0.0, 0.0), 8.0, sides=3)], _SQUARE, _SQUARE, ((0.0, 0.0), (0.0, 0.0)),
     (0.0, 200.0), _BARE),
    (300.0, 200.0, 5.0, [Shape("circle", (0.0, 0.0), 10.0)], _SQUARE, _SQUARE, ((0.0, 0.0), (2.9e-257, 0.0)),
     (0.0, 200.0), Rules(min_web_mm=0, edge_cover_mm=0, min_void_mm=0, bearing_clearance_mm=1.0,
                                bore_diameters_mm=STOCK, slot_widths_mm=(20.0, 40.0, 50.0))),
]


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(scenes())
@example(_REGRESSIONS[0])
@example(_REGRESSIONS[1])
@example(_REGRESSIONS[2])
def test_check_agrees_with_brute_force(scene):
    _agreement(scene)


@pytest.mark.slow
@settings(max_examples=600, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(scenes())
def test_check_agrees_with_brute_force_long(scene):
    _agreement(scene)


@settings(max_examples=30, deadline=None)
@given(d=st.sampled_from(STOCK), web=st.floats(0, 120), cover=st.floats(0, 120), clearance=st.floats(0, 250),
       W=st.floats(600, 2400), H=st.floats(300, 900), ratio=st.sampled_from((0.0, 1.0)))
def test_a_lattice_built_to_the_rules_passes(d, web, cover, clearance, W, H, ratio):
    """Bores on a square lattice at pitch d + web (+ a hair), clear of cover and bearing zones: no violations."""
    gap = max(web, ratio * d) + 0.05
    pitch = d + gap
    rules = Rules(min_web_mm=web, edge_cover_mm=cover, min_void_mm=d, bearing_clearance_mm=clearance,
                         bore_diameters_mm=STOCK, web_ratio=ratio)
    support = ((0.0, 0.0), (100.0, 0.0))
    load = (W / 2, H)
    panel = Panel(width_mm=W, height_mm=H, thickness_mm=40, material=MAT, supports=(Support(points=support),),
                  loads=(PointLoad(at=load, force_N=(0, -1e3)),))
    r = d / 2
    xs = np.arange(cover + r + 0.05, W - cover - r - 0.05, pitch)
    ys = np.arange(cover + r + 0.05, H - cover - r - 0.05, pitch)
    voids = []
    for x in xs:
        for y in ys:
            c = np.array([x, y])
            if _seg_dist(c[None], *support)[0] - r < clearance + 0.05 or np.hypot(*(c - load)) - r < clearance + 0.05:
                continue
            voids.append(Void(id=f"L{len(voids)}", family="bore", centre=(x, y), size_mm=d,
                              shape=Point(x, y).buffer(r, quad_segs=32)))
    assert check_layout(panel, voids, rules) == []
    # one bore pushed a millimetre towards its lattice neighbour breaks exactly that web (or, with no web
    # required, makes the two overlap)
    c = np.array([v.centre for v in voids]).reshape(-1, 2)
    spacing = np.hypot(*(c[1:] - c[0]).T) if len(c) > 1 else np.array([np.inf])
    if spacing.min() < pitch + 1e-6:  # L0 has a lattice neighbour left (bearing zones remove some)
        k = 1 + int(np.argmin(spacing))
        u = (c[k] - c[0]) / np.hypot(*(c[k] - c[0]))
        x, y = c[0] + u
        moved = Void(id="L0", family="bore", centre=(x, y), size_mm=d, shape=Point(x, y).buffer(r, quad_segs=32))
        found = check_layout(panel, [moved] + voids[1:], rules)
        pairs = [(v.rule, v.void_ids) for v in found if v.rule in ("min_web", "overlap")]
        assert pairs == [("min_web" if gap > 1.0 else "overlap", ("L0", voids[k].id))], found


@settings(max_examples=25, deadline=None)
@given(scenes(), st.integers(0, 2**31 - 1))
def test_allowed_region_holds_exactly_the_single_void_rules(scene, seed):
    """Points in allowed_region keep cover, band, opening webs, bearing clearance and keep zones (brute force);
    points in the envelope outside it break one of them."""
    W, H, t, _, opening, keep, support, load, rules = scene
    panel = _panel(W, H, t, opening, keep, support, load)
    region = allowed_region(panel, rules)
    rng = np.random.default_rng(seed)
    pts = rng.uniform([0, 0], [W, H], size=(400, 2))
    from shapely import contains_xy  # only to ask which side of the region each sample falls on

    inside = contains_xy(region, pts[:, 0], pts[:, 1])
    ld = np.array([load])
    ax = 1 if H <= W else 0
    D = (W, H)[ax]
    band_lo = 0.0 if rules.depth_band is None else (1 - rules.depth_band) / 2 * D
    web_o = max(rules.min_web_mm, rules.web_ratio * opening.extent)
    o_pts, k_pts = _rect_points(opening), _rect_points(keep)
    for p, ok in zip(pts, inside):
        cover = min(p[0], W - p[0], p[1], H - p[1])
        band = min(p[ax], D - p[ax])
        d_open = 0.0 if opening.inside(p[None])[0] else float(cKDTree(o_pts).query(p)[0])
        in_keep = keep.inside(p[None])[0]
        d_keep = float(cKDTree(k_pts).query(p)[0])
        d_bear = min(float(_seg_dist(p[None], *support)[0]), float(np.hypot(*(p - ld[0]))))
        slack = [cover - rules.edge_cover_mm, band - band_lo, d_open - web_o,
                 d_bear - rules.bearing_clearance_mm if rules.bearing_clearance_mm > 0 else math.inf,
                 -d_keep if in_keep else d_keep]
        if min(abs(x) for x in slack) < 2 * MARGIN_MM + 0.1:
            continue  # on a border: undecidable by sampling
        assert ok == all(x > 0 for x in slack), (p, slack, ok)
