"""Mirror symmetry: whether the problem has it, and void layouts that keep it.

Axes are named as CONTRACT.md's ``symmetry``: "x" mirrors about the vertical mid-line (x -> W - x), "y" about
the horizontal one (y -> H - y), both in the panel's local frame (mm).

**When the problem is symmetric** (``problem_symmetry``). The envelope is a rectangle with the local origin at a
corner, and material and thickness are uniform, so it is symmetric about both mid-lines; the rest must map onto
itself under the mirror, within ``tol`` mm for positions and ``force_rtol`` of the largest force for forces:

- openings and keep zones, as areas: every point of the mirrored shapes lies within ``tol`` of the shapes and,
  the mirror being its own inverse, the other way round (Hausdorff distance of the areas);
- supports: each mirrored support (a point, or a segment either way round) meets a support with the same fixity
  (a mirror turns a displacement along x into one along -x, so a restraint stays a restraint);
- loads: the mirrored loads of each case, the force's component across the mirror line reversed, are the loads
  of a case of the same weight (the same case, or its mirror twin: two mirrored cases of equal weight make a
  symmetric weighted compliance);
- self-weight acts along -y, which the horizontal mid-line does not mirror: never symmetric about "y".

**A symmetric layout.** The mirrors chosen make a group G of 2 or 4 maps. The freeform voids are *folded*: the
part of them in the lower-left half (quarter, for both axes) is kept and mirrored by every map of G, so that
what the optimiser left on one half decides the whole layout. Each connected void of the folded set either lies
clear of the mid-lines and has mirror twins elsewhere (it is fitted once, the *seed*, and mirrored), or crosses a
mid-line and is its own mirror image about it (it is fitted as a void symmetric about that line, centred on it:
``Draft.fixed``). Every later stage (placing, sizes, snapping) works on seeds and checks each seed together with
its mirror images, so mirror pairs share their size and every image keeps every rule.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, replace

import numpy as np
import shapely
from shapely.geometry import LineString, Point, Polygon, box

from ..errors import LacunaError
from ..model import LineLoad, Panel, PointLoad
from .fit import MIN_TURN, bore_room, minimize, overlay, overlay_error
from .measure import second_moments
from .outline import Draft


AXES = ("x", "y")
AXIS_NAMES = {"x": "the vertical mid-line", "y": "the horizontal mid-line"}
SYMMETRIES = {"none": (), "x": ("x",), "y": ("y",), "xy": ("x", "y")}
# Positions closer than this count as the same when deciding whether the problem is symmetric (mm): a drafting
# tolerance, common practice, no source. The layout stage uses the larger of it and half the snap, a difference
# the snapped layout could not show anyway.
SYMMETRY_TOL_MM = 1.0
FORCE_RTOL = 1e-3
# The folded half reaches this far past each mid-line (mm) so that a void crossing it joins its mirror image in
# one piece whatever the rounding of the cut.
FOLD_OVERLAP_MM = 1e-4


def _index(axis: str) -> int:
    return 0 if axis == "x" else 1


def mirror_points(points, axis: str, about: float) -> np.ndarray:
    """(n, 2) points mirrored about x = about (axis "x") or y = about (axis "y")."""
    p = np.array(points, dtype=float).reshape(-1, 2)
    k = _index(axis)
    p[:, k] = 2.0 * about - p[:, k]
    return p


def mirror_vector(v, axis: str) -> np.ndarray:
    """A force or direction mirrored: its component across the mirror line reverses."""
    out = np.array(v, dtype=float)
    out[_index(axis)] = -out[_index(axis)]
    return out


def mirror_geometry(geom, axis: str, about: float):
    """A shapely geometry mirrored about x = about or y = about."""
    return shapely.transform(geom, lambda xy: mirror_points(xy, axis, about))


# --- is the problem symmetric? -----------------------------------------------------------------------------------


def _mid(panel: Panel, axis: str) -> float:
    return (panel.width_mm if axis == "x" else panel.height_mm) / 2.0


def _region_mismatch(regions, axis: str, about: float) -> tuple[float, object]:
    """The largest distance from a mirrored region to the regions (mm), and that region."""
    union = shapely.union_all([r.shape for r in regions])
    worst, at = 0.0, None
    for r in regions:
        mirrored = mirror_geometry(shapely.segmentize(r.shape.boundary, 5.0), axis, about)
        pts = shapely.points(shapely.get_coordinates(mirrored))
        d = float(np.max(shapely.distance(pts, union))) if len(pts) else 0.0
        if d > worst:
            worst, at = d, r
    return worst, at


def _same_points(a: np.ndarray, b, tol: float) -> bool:
    b = np.asarray(b, dtype=float).reshape(-1, 2)
    if len(a) != len(b):
        return False
    return bool(np.all(np.linalg.norm(a - b, axis=1) <= tol)
                or np.all(np.linalg.norm(a - b[::-1], axis=1) <= tol))


def _load_image(load, axis: str, about: float):
    if isinstance(load, PointLoad):
        return ("point", mirror_points([load.at], axis, about), mirror_vector(load.force_N, axis))
    return ("line", mirror_points([load.start, load.end], axis, about), mirror_vector(load.intensity_N_per_mm, axis))


def _load_key(load):
    if isinstance(load, PointLoad):
        return ("point", np.array([load.at], dtype=float), np.asarray(load.force_N, dtype=float))
    return ("line", np.array([load.start, load.end], dtype=float), np.asarray(load.intensity_N_per_mm, dtype=float))


def _loads_match(images, keys, tol: float, ftol: dict[str, float]) -> bool:
    """Whether two load sets are the same, each load of one meeting a load of the other."""
    def meets(a, b):
        return a[0] == b[0] and _same_points(a[1], b[1], tol) and np.linalg.norm(a[2] - b[2]) <= ftol[a[0]]

    return all(any(meets(a, b) for b in keys) for a in images) and all(any(meets(b, a) for a in images)
                                                                      for b in keys)


def _describe_load(load) -> str:
    if load.source:
        return f"load {load.source}"
    if isinstance(load, PointLoad):
        return f"point load at ({load.at[0]:g}, {load.at[1]:g}) mm"
    return f"line load from ({load.start[0]:g}, {load.start[1]:g}) to ({load.end[0]:g}, {load.end[1]:g}) mm"


def asymmetry(panel: Panel, axis: str, tol: float = SYMMETRY_TOL_MM, force_rtol: float = FORCE_RTOL) -> str | None:
    """Why the problem is not mirror-symmetric about ``axis``'s mid-line, in words; None when it is."""
    if axis not in AXES:
        raise LacunaError(f'a mirror axis is "x" or "y", got {axis!r}.', where="symmetry axis",
                          hint='"x" mirrors about the vertical mid-line, "y" about the horizontal one.')
    if not (isinstance(tol, (int, float)) and math.isfinite(tol) and tol >= 0.0):
        raise LacunaError(f"the symmetry tolerance must be a length of zero or more, got {tol!r}.",
                          where="symmetry tolerance", hint="Give it in mm, e.g. 1.")
    about = _mid(panel, axis)
    for regions, word in ((panel.openings, "opening"), (panel.keep, "keep zone")):
        if regions:
            off, region = _region_mismatch(regions, axis, about)
            if off > tol:
                return (f"the {word} on {region.source or 'the drawing'} has no mirror image within {tol:g} mm "
                        f"(it is {off:.1f} mm off)")
    for s in panel.supports:
        image = mirror_points(s.points, axis, about)
        if not any(t.fix == s.fix and _same_points(image, t.points, tol) for t in panel.supports):
            name = s.source or f"at ({s.points[0][0]:g}, {s.points[0][1]:g}) mm"
            return f"the support {name} (fixed {s.fix}) has no mirror image within {tol:g} mm"
    if panel.self_weight and axis == "y":
        return "the self-weight acts down the panel, which a mirror about the horizontal mid-line turns up"
    point = [np.linalg.norm(load.force_N) for load in panel.loads if isinstance(load, PointLoad)]
    line = [np.linalg.norm(load.intensity_N_per_mm) for load in panel.loads if isinstance(load, LineLoad)]
    ftol = {"point": force_rtol * max(point, default=0.0), "line": force_rtol * max(line, default=0.0)}
    by_case = {c: [load for load in panel.loads if load.case == c] for c in panel.cases}
    keys = {c: [_load_key(load) for load in loads] for c, loads in by_case.items()}
    for c, loads in by_case.items():
        images = [_load_image(load, axis, about) for load in loads]
        twins = [t for t in by_case if math.isclose(panel.case_weight(t), panel.case_weight(c), rel_tol=1e-9)
                 and _loads_match(images, keys[t], tol, ftol)]
        if not twins:
            for load, image in zip(loads, images):
                if not any(_loads_match([image], [k], tol, ftol) for k in keys[c]):
                    return f"the {_describe_load(load)} (case {c}) has no mirror image in its case"
            return f"the loads of case {c} mirror onto no case of the same weight"
    return None


def problem_symmetry(panel: Panel, tol: float = SYMMETRY_TOL_MM, force_rtol: float = FORCE_RTOL) -> set[str]:
    """The mid-lines the problem is mirror-symmetric about: a subset of {"x", "y"} (see the module text)."""
    return {axis for axis in AXES if asymmetry(panel, axis, tol, force_rtol) is None}


# --- the mirror group of a layout ---------------------------------------------------------------------------------


@dataclass(frozen=True)
class Mirror:
    """The mirrors a layout keeps: ``axes`` (a subset of ("x", "y"); empty: no symmetry) and the panel's
    centre (W / 2, H / 2), where the mid-lines cross."""

    axes: tuple[str, ...] = ()
    centre: tuple[float, float] = (0.0, 0.0)

    def about(self, axis: str) -> float:
        return self.centre[_index(axis)]

    def elements(self, fixed=()) -> list[tuple[str, ...]]:
        """The maps of the group other than the identity, less those that leave a void on ``fixed`` in place."""
        free = [a for a in self.axes if a not in fixed]
        return [g for k in range(1, len(free) + 1) for g in itertools.combinations(free, k)]

    def image(self, d: Draft, g: tuple[str, ...]) -> Draft:
        for axis in g:
            d = d.mirrored(axis, self.about(axis))
        return d

    def images(self, d: Draft) -> list[tuple[tuple[str, ...], Draft]]:
        """Each distinct mirror image of ``d`` (not ``d`` itself) with the map that makes it."""
        return [(g, self.image(d, g)) for g in self.elements(d.fixed)]

    def orbit(self, d: Draft) -> list[Draft]:
        return [d] + [img for _, img in self.images(d)]

    def geometry(self, geom, g: tuple[str, ...]):
        for axis in g:
            geom = mirror_geometry(geom, axis, self.about(axis))
        return geom

    def keeps(self, d: Draft) -> bool:
        """Whether ``d`` stands exactly on the mid-lines it is fixed to."""
        return all(d.centre[_index(a)] == self.about(a) for a in d.fixed)

    def along(self, d: Draft, offsets) -> list[tuple[float, float]]:
        """The moves ``d`` may make: none across a mid-line it stands on (repeats removed, order kept)."""
        out: list[tuple[float, float]] = []
        for dx, dy in offsets:
            move = (0.0 if "x" in d.fixed else dx, 0.0 if "y" in d.fixed else dy)
            if all(math.dist(move, m) > 1e-9 for m in out):
                out.append(move)
        return out

    @property
    def origin(self) -> tuple[float, float]:
        """Where the snap grid runs through: a mid-line kept symmetric, else the panel's corner."""
        return (self.centre[0] if "x" in self.axes else 0.0, self.centre[1] if "y" in self.axes else 0.0)

    def side(self, axes, margin: float = 0.0, reach: float = 1e7) -> Polygon:
        """The lower-left side of the mid-lines ``axes``, held ``margin`` away from them (negative: past them)."""
        hi = [reach, reach]
        for a in axes:
            hi[_index(a)] = self.about(a) - margin
        return box(-reach, -reach, hi[0], hi[1])

    def describe(self) -> str:
        parts = [f"{AXIS_NAMES[a]} ({a} = {self.about(a):g} mm)" for a in self.axes]
        return " and ".join(parts)


def no_mirror() -> Mirror:
    return Mirror()


def requested_axes(settings) -> tuple[tuple[str, ...], str]:
    """The mid-lines the [voids] settings ask the layout to keep symmetric, and the key that asked.

    ``symmetric`` None follows ``optimize_symmetry`` ([optimize] symmetry); False asks for none; True asks for
    those of [optimize] symmetry, or, when that is "none", for every mid-line ("x", "y") the problem is
    symmetric about (the caller keeps only those).
    """
    symmetric = getattr(settings, "symmetric", None)
    follow = getattr(settings, "optimize_symmetry", "none")
    if symmetric is not None and not isinstance(symmetric, bool):
        raise LacunaError(f"symmetric must be true or false, got {symmetric!r}.", where="[voids] symmetric",
                          hint="Write true or false without quotes, or leave it out to follow [optimize] symmetry.")
    if follow not in SYMMETRIES:
        raise LacunaError(f"unknown symmetry {follow!r}.", where="[optimize] symmetry",
                          hint='Use "none", "x", "y" or "xy".')
    if symmetric is False:
        return (), "[voids] symmetric = false"
    if symmetric is None:
        return SYMMETRIES[follow], f'[optimize] symmetry = "{follow}"'
    if follow != "none":
        return SYMMETRIES[follow], f'[voids] symmetric = true with [optimize] symmetry = "{follow}"'
    return AXES, "[voids] symmetric = true"


def layout_mirror(panel: Panel, settings, snap_mm: float = 0.0) -> tuple[Mirror, list[str]]:
    """The mirrors the layout keeps (asked for and present in the problem) and notes on those refused.

    A mirror asked for that the problem does not have is not enforced, and a note says why: the optimiser
    itself runs symmetric over an asymmetric problem (its zones stay as drawn), so refusing here would throw away
    a finished run for what is a choice of layout, not bad input.
    """
    asked, key = requested_axes(settings)
    centre = (panel.width_mm / 2.0, panel.height_mm / 2.0)
    if not asked:
        return Mirror(centre=centre), []
    tol = max(SYMMETRY_TOL_MM, 0.5 * snap_mm)
    notes, axes = [], []
    any_present = key == "[voids] symmetric = true"
    reasons = {}
    for axis in asked:
        why = asymmetry(panel, axis, tol)
        if why is None:
            axes.append(axis)
        else:
            reasons[axis] = why
    if not any_present:
        for axis, why in reasons.items():
            notes.append(f"{key} asks for voids mirrored about {AXIS_NAMES[axis]}, but the problem is not "
                         f"symmetric about it: {why}. The voids are not kept symmetric about it.")
    elif not axes:
        notes.append(f"{key}, but the problem is symmetric about neither mid-line ({reasons['x']}; "
                     f"{reasons['y']}). The voids are not kept symmetric.")
    mirror = Mirror(axes=tuple(axes), centre=centre)
    if axes:
        half = "lower-left quarter" if len(axes) == 2 else ("left half" if axes == ["x"] else "lower half")
        notes.append(f"voids kept mirror-symmetric about {mirror.describe()}: fitted on the {half} and "
                     f"mirrored; the snap grid runs through the mid-line")
    return mirror, notes


# --- folding the freeform voids onto one half ----------------------------------------------------------------------


def fold(shapes, mirror: Mirror) -> list[tuple[Polygon, tuple[str, ...]]]:
    """Seeds of a symmetric layout: (void, the mid-lines it crosses and is symmetric about).

    The parts of ``shapes`` on the lower-left side of the mirrors are mirrored by every map; of the connected
    voids this gives, those whose centroid is on the lower-left side (or on a mid-line) are returned.
    """
    half = mirror.side(mirror.axes, margin=-FOLD_OVERLAP_MM)
    pieces = []
    for geom in shapes:
        part = overlay(shapely.intersection, geom, half)
        if not part.is_empty and part.area > 0.0:
            pieces.append(part)
    if not pieces:
        return []
    images = pieces + [mirror.geometry(p, g) for p in pieces for g in mirror.elements()]
    folded = shapely.union_all(images)
    out = []
    for comp in shapely.get_parts(folded):
        if not isinstance(comp, Polygon) or comp.area <= 0.0:
            continue
        c = comp.centroid
        if any((c.x, c.y)[_index(a)] > mirror.about(a) + 1e-3 for a in mirror.axes):
            continue  # a mirror image of a seed
        fixed = tuple(a for a in mirror.axes if comp.intersects(_mid_line(mirror, a)))
        out.append((comp, fixed))
    out.sort(key=lambda s: (round(s[0].centroid.x, 6), round(s[0].centroid.y, 6)))
    return out


def _mid_line(mirror: Mirror, axis: str, reach: float = 1e7) -> LineString:
    m = mirror.about(axis)
    return LineString([(m, -reach), (m, reach)]) if axis == "x" else LineString([(-reach, m), (reach, m)])


def split_centre(shape: Polygon, mirror: Mirror, margin: float) -> list[Polygon]:
    """A void on both mid-lines cut to the part below the horizontal one, ``margin`` clear of it: an n-gon with
    an odd number of sides cannot be symmetric about two lines at right angles, so it is made as a pair."""
    part = overlay(shapely.intersection, shape, mirror.side(("y",), margin=margin))
    return [p for p in shapely.get_parts(part) if isinstance(p, Polygon) and p.area > 0.0]


# --- voids symmetric about the mid-lines they stand on -------------------------------------------------------------


def _permutations(n: int, fixed, k: int) -> dict[tuple[str, ...], np.ndarray]:
    """Vertex index maps of the mirrors in ``fixed`` for a counter-clockwise n-gon: a mirror reverses the order,
    i -> (k - i) mod n; with both mirrors the y map is i -> (k + n/2 - i) and their product a half turn."""
    i = np.arange(n)
    if len(fixed) == 1:
        return {tuple(fixed): (k - i) % n}
    return {("x",): (k - i) % n, ("y",): (k + n // 2 - i) % n, ("x", "y"): (i + n // 2) % n}


def _apply(mirror: Mirror, g, pts: np.ndarray) -> np.ndarray:
    for axis in g:
        pts = mirror_points(pts, axis, mirror.about(axis))
    return pts


def group_average(points: np.ndarray, fixed, mirror: Mirror) -> np.ndarray | None:
    """The n-gon nearest ``points`` that the mirrors ``fixed`` map onto itself, vertex for vertex.

    Each vertex is averaged with the images of its partner vertices (the pairing that moves the corners least);
    the average over a group is invariant under it. Corners that pair with themselves are put exactly on the
    mid-line, and partners are set as exact images, so the result is symmetric to the last bit. None when no
    such n-gon exists (an odd n and both mirrors).
    """
    p = np.asarray(points, dtype=float)
    n = len(p)
    if len(fixed) == 2 and n % 2:
        return None
    best = None
    for k in range(n):
        perms = _permutations(n, fixed, k)
        spread = sum(float(np.sum((p - _apply(mirror, g, p[s])) ** 2)) for g, s in perms.items())
        if best is None or spread < best[0]:
            best = (spread, perms)
    perms = best[1]
    avg = (p + sum(_apply(mirror, g, p[s]) for g, s in perms.items())) / (len(perms) + 1)
    out = np.full_like(avg, np.nan)
    for i in range(n):
        if not np.isnan(out[i, 0]):
            continue
        rep = avg[i].copy()
        for g, s in perms.items():
            if len(g) == 1 and s[i] == i:
                rep[_index(g[0])] = mirror.about(g[0])
        out[i] = rep
        for g, s in perms.items():
            out[s[i]] = _apply(mirror, g, rep[None, :])[0]
    return out


def _good_ngon(pts: np.ndarray, scale: float) -> bool:
    """Convex, counter-clockwise, every corner turning by at least MIN_TURN and every side of some length."""
    if not np.all(np.isfinite(pts)):
        return False
    e = np.roll(pts, -1, axis=0) - pts
    lengths = np.linalg.norm(e, axis=1)
    if np.any(lengths < 1e-3 * scale):
        return False
    e_prev = np.roll(e, 1, axis=0)
    cross = e_prev[:, 0] * e[:, 1] - e_prev[:, 1] * e[:, 0]
    turn = np.arctan2(cross, np.sum(e_prev * e, axis=1))
    return bool(np.all(turn >= MIN_TURN) and abs(np.sum(turn) - 2.0 * math.pi) < 1e-6)


def _aligned_ngons(target: Polygon, n: int, fixed, mirror: Mirror, cost) -> list[np.ndarray]:
    """Affine regular n-gons with their axes along the panel's, turned so that the mirrors ``fixed`` map them
    onto themselves, fitted by the semi-axes and the centre's place along a free mid-line."""
    if len(fixed) == 2 and n % 2:
        return []
    area, (cx, cy), tensor = second_moments(target)
    if area <= 0.0:
        return []
    if fixed == ("x",):
        phases = (math.pi / 2.0, math.pi / 2.0 + math.pi / n)
    else:
        phases = (0.0, math.pi / n)
    centre = [cx, cy]
    for a in fixed:
        centre[_index(a)] = mirror.about(a)
    free = [k for k in (0, 1) if AXES[k] not in fixed]
    ab = area / (0.5 * n * math.sin(2.0 * math.pi / n))
    ratio = math.sqrt(max(tensor[0, 0], 1e-12) / max(tensor[1, 1], 1e-12))
    a0, b0 = math.sqrt(ab * ratio), math.sqrt(ab / ratio)
    t = 2.0 * np.pi * np.arange(n) / n

    def ngon(q, phase):
        c = list(centre)
        for j, k in enumerate(free):
            c[k] += q[2 + j]
        return np.column_stack([c[0] + abs(q[0]) * np.cos(t + phase), c[1] + abs(q[1]) * np.sin(t + phase)])

    out = []
    for phase in phases:
        q0 = np.zeros(2 + len(free))
        q0[:2] = (a0, b0)
        res = minimize(lambda q, ph=phase: cost(Polygon(ngon(q, ph))), q0, method="Nelder-Mead",
                       options={"maxfev": 300, "xatol": 1e-3 * math.sqrt(area), "fatol": 1e-6})
        out.append(ngon(res.x, phase))
    return out


def _polygon_draft(pts: np.ndarray, like: Draft, fixed, mirror: Mirror) -> Draft:
    _, (px, py), _ = second_moments(Polygon(pts))
    centre = [float(px), float(py)]
    for a in fixed:
        centre[_index(a)] = mirror.about(a)
    rel = pts - centre
    size = 2.0 * float(np.max(np.linalg.norm(rel, axis=1)))
    return replace(like, centre=(centre[0], centre[1]), size=size, fixed=tuple(fixed),
                   corners=tuple((float(x), float(y)) for x, y in rel))


def symmetric_polygon(draft: Draft, target: Polygon, fixed, mirror: Mirror, allowed=None) -> Draft | None:
    """A polygon draft made symmetric about the mid-lines ``fixed``, centred on them: the nearer (by the fitting's
    own measure) of the fitted n-gon averaged with its mirror images and an affine regular n-gon aligned with the
    mid-lines. None when no n-gon of that many sides can be (an odd n and both mid-lines)."""
    cost = overlay_error(target, allowed)
    n = len(draft.corners)
    scale = math.sqrt(max(target.area, 1e-9))
    candidates = []
    averaged = group_average(draft.sharp, fixed, mirror)
    if averaged is not None and _good_ngon(averaged, scale):
        candidates.append(averaged)
    for pts in _aligned_ngons(target, n, fixed, mirror, cost):
        if _good_ngon(pts, scale):
            sym = group_average(pts, fixed, mirror)  # exact to the last bit
            if sym is not None and _good_ngon(sym, scale):
                candidates.append(sym)
    if not candidates:
        return None
    best = min(candidates, key=lambda pts: cost(Polygon(pts)))
    return _polygon_draft(best, draft, fixed, mirror)


def symmetric_slot(draft: Draft, target: Polygon, fixed, mirror: Mirror, allowed=None) -> Draft:
    """A slot draft centred on the mid-lines ``fixed`` and turned along or across them (the only turns a mirror
    through its centre maps onto themselves), whichever fits nearer."""
    cost = overlay_error(target, allowed)
    centre = list(draft.centre)
    for a in fixed:
        centre[_index(a)] = mirror.about(a)
    options = [replace(draft, centre=(centre[0], centre[1]), angle_deg=angle, fixed=tuple(fixed))
               for angle in (0.0, 90.0)]
    return min(options, key=lambda d: (cost(d.shape()), abs(((draft.angle_deg - d.angle_deg) + 90.0) % 180.0 - 90.0)))


def _axis_candidates(region, mirror: Mirror, axis: str, others, web: float, step: float):
    """The best centre on the mid-line ``axis`` inside ``region``: (radius, centre); radius is the room to the
    region's edge and, for a void that must also clear its mirror image across ``others``, half the gap to it
    less half the web."""
    line = overlay(shapely.intersection, _mid_line(mirror, axis), region)
    if line.is_empty or line.length <= 0.0:
        return None
    for b in others:
        line = overlay(shapely.intersection, line, mirror.side((b,)))
    if line.is_empty or line.length <= 0.0:
        return None
    dense = shapely.segmentize(line, step)
    pts = shapely.get_coordinates(dense)
    pts[:, _index(axis)] = mirror.about(axis)
    inside = shapely.contains_xy(region, pts[:, 0], pts[:, 1])
    pts = pts[inside]
    if not len(pts):
        return None
    room = shapely.distance(shapely.points(pts), region.boundary)
    for b in others:
        room = np.minimum(room, np.abs(pts[:, _index(b)] - mirror.about(b)) - web / 2.0)
    k = int(np.argmax(room))
    return float(room[k]), (float(pts[k, 0]), float(pts[k, 1]))


def symmetric_bores(target: Polygon, diameters, *, fixed, mirror: Mirror, allowed=None, min_web_mm: float = 0.0,
                    tolerance_mm: float = 0.5, smallest_mm: float = 0.0, source: int = 0,
                    max_bores: int = 64) -> list[Draft]:
    """Stock-size bores covering a void symmetric about the mid-lines ``fixed``, greedily, largest first.

    As ``cover.greedy_bores``, but each step takes the largest stock circle among three kinds of place: off the
    mid-lines by at least half the web (the bore and its mirror image then keep the web), on one mid-line (its own
    mirror image about it), or at the centre when the void is on both. Ties go to the place on a mid-line (one
    bore where the void's own centre is). The bore and its images under ``fixed`` are then taken out, grown by
    the web. Bores off the mid-lines are returned once: their images come from ``Mirror.images``.
    """
    stock, region = bore_room(target, diameters, smallest_mm, tolerance_mm, allowed)
    if not stock:
        return []
    sub = Mirror(axes=tuple(fixed), centre=mirror.centre)
    step = max(0.25, min(1.0, tolerance_mm))
    out: list[Draft] = []
    while len(out) < max_bores and not region.is_empty and region.area > 0.0:
        places = []  # (radius, number of mid-lines it stands on, centre, those mid-lines)
        inner = overlay(shapely.intersection, region, mirror.side(fixed, margin=min_web_mm / 2.0))
        if not inner.is_empty and inner.area > 0.0:
            mic = shapely.maximum_inscribed_circle(inner, 1e-3)
            places.append((float(mic.length), 0, tuple(map(float, mic.coords[0])), ()))
        for a in fixed:
            got = _axis_candidates(region, mirror, a, [b for b in fixed if b != a], min_web_mm, step)
            if got is not None:
                places.append((got[0], 1, got[1], (a,)))
        if len(fixed) == 2 and region.contains(Point(mirror.centre)):
            places.append((float(region.boundary.distance(Point(mirror.centre))), 2, mirror.centre, tuple(fixed)))
        best = None
        for radius, rank, centre, on in places:
            fits = [d for d in stock if d / 2.0 <= radius * (1.0 + 1e-9)]
            if fits and (best is None or (fits[0], rank) > (best[0], best[1])):
                best = (fits[0], rank, centre, on)
        if best is None:
            break
        d, _, centre, on = best
        draft = Draft(family="bore", centre=centre, size=d, source=source, part=len(out), fixed=tuple(on))
        out.append(draft)
        taken = [Point(img.centre).buffer(d / 2.0 + min_web_mm, quad_segs=32) for img in sub.orbit(draft)]
        region = overlay(shapely.difference, region, shapely.union_all(taken))
    return out
