"""Freeform voids -> a layout of voids a shop can make, keeping the fabrication rules: ``rationalise``.

The steps, in order:

1. clean: measure each freeform void (area, centroid, principal axes), drop those narrower than ``min_void``,
   fill solid islands (the outer outline is fitted; see ``measure``);
2. fit each void by the chosen family (``fit``); ``mixed`` fits all three and keeps, per void, the one that
   removes the least-working material (below);
3. place the fitted voids, largest first: a void that leaves the allowed region or comes closer than
   ``min_web`` to a void already placed is moved a little (rings of 8 directions around its place) and, if
   that is not enough, made smaller step by step (polygons scaled about their centre, slots shortened then
   narrowed to the next stock width, bores down the stock diameters); only when nothing fits is it dropped;
4. standardise sizes (``standardise``) and snap centres, each change kept only where the rules still hold;
5. prove: ``rules.check.check_layout`` on the final voids; its violations are returned as they are.

**Mixed family measure.** The strain-energy density of the solid panel, averaged over the area a candidate
removes (the integral over the removed shape divided by its area). The first-order loss of stiffness from
removing material is that integral, so the lowest average removes the least stiffness per unit of material
saved. Only candidates removing at least ``MIXED_MIN_SHARE`` of the largest candidate's area compete, so a
small bore in a quiet corner does not win by removing nearly nothing. Without an energy field the least fit
error decides.

**Symmetric layouts** (``symmetry``). When the settings ask for mirror symmetry and the problem has it, the
freeform voids are folded onto the lower-left half (or quarter), the seeds fitted there (those on a mid-line made
symmetric about it), and every step above works on seeds with each seed's mirror images checked beside it; the
images are added at the end. Symmetry asked for but absent in the problem is not enforced; a note says why.

Ids are "V1", "V2", ... in order of the final centres, left to right and, for equal x, bottom to top.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Callable

import numpy as np
import shapely
from shapely.geometry import Polygon

from ..errors import LacunaError
from ..jobfile import VoidOptions
from ..model import Panel, Rules, Void
from ..rules import check as rule_check
from .fit import fit_bores, fit_error, fit_polygon, fit_slot, overlay
from .measure import FreeformVoid, clean, inscribed_width
from .outline import Draft
from .standardise import snap_centres, standardise_sizes
from .symmetry import (Mirror, fold, layout_mirror, split_centre, symmetric_bores, symmetric_polygon,
                       symmetric_slot)

FAMILIES = ("polygon", "slot", "bore", "mixed")
CORNERS = ("none", "chamfer", "radius")
# Every rule is kept with this much to spare, so the check on differently flattened arcs agrees (mm).
SAFETY_MM = 0.05
MIXED_MIN_SHARE = 0.5
SHRINK_STEPS = tuple(1.0 - 0.05 * k for k in range(11))  # down to half size
MOVE_RINGS = 4


@dataclass(frozen=True)
class Rationalised:
    """The voids to make and the record of how they came about.

    ``changes``: "V3: moved 12.0 mm (closer than the minimum web 60 mm to another void)" and the like;
    ``dropped``: freeform voids that gave no void, with the reason; ``fit_errors``: (void id, fit error of the
    void's freeform, see ``fit.fit_error``; bores of one freeform share it); ``violations``: what
    ``rules.check.check_layout`` found in the final layout (empty: the rules are proved);
    ``notes``: islands filled, settings taken from the rules, symmetry kept or refused (and why).
    """

    voids: tuple[Void, ...]
    changes: tuple[str, ...]
    dropped: tuple[str, ...]
    fit_errors: tuple[tuple[str, float], ...]
    violations: tuple
    notes: tuple[str, ...] = ()


@dataclass(frozen=True)
class Resolved:
    """The void settings in force: job values where given, else the rules' (see ``resolve_settings``)."""

    family: str
    sides: int
    bore_diameters_mm: tuple[float, ...]
    slot_widths_mm: tuple[float, ...]
    max_types: int
    snap_mm: float
    corner: str
    corner_mm: float
    min_void_mm: float
    min_web_mm: float
    web_ratio: float = 0.0


def resolve_settings(settings: VoidOptions, rules: Rules, thickness_mm: float = 0.0) -> Resolved:
    """Check the [voids] settings and merge them with the rules.

    Bore diameters: the rules' stock list when it has one, else the job's. Slot widths: the rules', else the
    job's, else the bore diameters (a slot is cut with a bit). Corner easing: the job's when it asks for one,
    else the rules'. ``least_mm``: the least void size the rules allow, ``web_ratio``: the rules' web as a
    multiple of the larger void's extent (0 when the rules have none).
    """
    if settings.family not in FAMILIES:
        raise LacunaError(f"unknown void family {settings.family!r}.", where="[voids] family",
                          hint='Use "polygon", "slot", "bore" or "mixed".')
    if not (isinstance(settings.sides, int) and 3 <= settings.sides <= 12):
        raise LacunaError(f"a polygon void has 3 to 12 sides, got {settings.sides!r}.", where="[voids] sides",
                          hint="Set sides to a whole number from 3 to 12, e.g. 6.")
    if not (isinstance(settings.max_types, int) and settings.max_types >= 1):
        raise LacunaError(f"max_types must be a whole number of at least 1, got {settings.max_types!r}.",
                          where="[voids] max_types", hint="Allow at least one void size, e.g. max_types = 3.")
    if not (math.isfinite(settings.snap_mm) and settings.snap_mm >= 0.0):
        raise LacunaError(f"snap must be a length of zero or more, got {settings.snap_mm!r}.",
                          where="[voids] snap", hint="0 turns snapping off; 5 snaps to 5 mm.")
    # The proof checks stock sizes against the rules, so a stock list in the rules wins; the job's own list
    # reaches the rules through whoever builds them (job values override the profile's).
    if rules.bore_diameters_mm:
        bores, bores_where = tuple(rules.bore_diameters_mm), f"rules profile {rules.profile} bore diameters"
    else:
        bores, bores_where = tuple(settings.bore_diameters_mm), "[voids] bore_diameters"
    _check_lengths(bores, bores_where, "bore diameters", "e.g. bore_diameters = [20, 25, 32, 40, 50]")
    if rules.slot_widths_mm:
        slots, slots_where = tuple(rules.slot_widths_mm), f"rules profile {rules.profile} slot widths"
    elif settings.slot_widths_mm is not None:
        slots, slots_where = tuple(settings.slot_widths_mm), "[voids] slot_widths"
    else:
        slots, slots_where = bores, bores_where
    _check_lengths(slots, slots_where, "slot widths", "e.g. slot_widths = [20, 32, 50]")
    corner, corner_mm = settings.corner, settings.corner_size_mm
    if corner == "none" and rules.corner != "none":
        corner, corner_mm = rules.corner, rules.corner_size_mm
    if corner not in CORNERS:
        raise LacunaError(f"unknown corner easing {corner!r}.", where="[voids] corner",
                          hint='Use "none", "chamfer" or "radius".')
    if corner != "none" and not (corner_mm is not None and math.isfinite(corner_mm) and corner_mm > 0.0):
        raise LacunaError(f'corner = "{corner}" needs a positive corner_size, got {corner_mm!r}.',
                          where="[voids] corner_size", hint="Give corner_size as a length, e.g. 10.")
    for name, value in (("min_void", rules.min_void_mm), ("min_web", rules.min_web_mm)):
        if not (math.isfinite(value) and value >= 0.0):
            raise LacunaError(f"{name} must be a length of zero or more, got {value!r}.", where=f"[rules] {name}",
                              hint=f"Give {name} as a length in the job file's units.")
    from ..rules.check import least_void_size

    least = least_void_size(rules, thickness_mm)
    return Resolved(family=settings.family, sides=settings.sides, bore_diameters_mm=tuple(sorted(bores)),
                    slot_widths_mm=tuple(sorted(slots)), max_types=settings.max_types, snap_mm=settings.snap_mm,
                    corner=corner, corner_mm=float(corner_mm or 0.0), min_void_mm=least,
                    min_web_mm=rules.min_web_mm, web_ratio=float(rules.web_ratio or 0.0))


def _check_lengths(values, where: str, what: str, example: str) -> None:
    if not values:
        raise LacunaError(f"no {what} given; at least one is needed.", where=where, hint=f"List them, {example}.")
    bad = [v for v in values if not (isinstance(v, (int, float)) and math.isfinite(v) and v > 0.0)]
    if bad:
        raise LacunaError(f"{what} must be positive lengths, got {bad[0]!r}.", where=where, hint=f"{example}.")


# --- the rule context -------------------------------------------------------------------------------------


@lru_cache(maxsize=4096)
def _shape(draft: Draft) -> Polygon:
    return draft.shape()


class Site:
    """Where void material may go and how far apart voids stay: answers "may this void stand here?"."""

    def __init__(self, allowed, min_web_mm: float, move_step_mm: float, web_ratio: float = 0.0,
                 least_mm: float = 0.0, openings=(), mirror: Mirror | None = None):
        inner = shapely.buffer(allowed, -SAFETY_MM, quad_segs=4) if not allowed.is_empty else allowed
        shapely.prepare(inner)
        self.inner = inner
        self.allowed = allowed
        self.web = min_web_mm
        self.ratio = web_ratio
        self.least = least_mm
        self.step = move_step_mm
        # The allowed region already keeps min_web from the openings; a web ratio also ties that web to the
        # larger of the void and the opening, which only a per-void test can say.
        self.openings = list(openings) if web_ratio > 0.0 else []
        # In a symmetric layout every draft stands for itself and its mirror images: each is checked.
        self.mirror = mirror if mirror is not None else Mirror()

    def shapes(self, draft: Draft) -> list:
        """The shapes of ``draft`` and of its mirror images."""
        return [_shape(d) for d in self.mirror.orbit(draft)]

    def inside(self, shape) -> bool:
        return bool(self.inner.covers(shape))

    def clear(self, shape, others) -> bool:
        """At least the web from every other void and opening; with a web ratio, that times the larger one's
        extent (the diameter of its smallest enclosing circle, as rules.check measures it)."""
        others = list(others) + self.openings
        if not others:
            return True
        others = np.asarray(others, dtype=object)
        need = np.full(len(others), self.web)
        if self.ratio > 0.0:
            extent = 2.0 * shapely.minimum_bounding_radius(np.append(others, shape))
            need = np.maximum(need, self.ratio * np.maximum(extent[:-1], extent[-1]))
        return bool(np.all(shapely.distance(shape, others) >= need + SAFETY_MM))

    def offsets(self, size: float) -> list[tuple[float, float]]:
        """(0, 0), then rings of 8 directions further and further out, nearest first."""
        step = max(self.step, 0.05 * size, 0.5)
        out = [(0.0, 0.0)]
        for k in range(1, MOVE_RINGS + 1):
            for j in range(8):
                a = math.pi * j / 4.0
                out.append((k * step * math.cos(a), k * step * math.sin(a)))
        return out

    def big_enough(self, draft: Draft) -> bool:
        """At least the least void size: a polygon's inscribed circle, a slot's width, a bore's diameter."""
        if draft.family == "polygon":
            return inscribed_width(_shape(draft)) >= self.least + SAFETY_MM
        return draft.size >= self.least - 1e-9

    def fits(self, trial: Draft, i: int, state: list[Draft], move: bool = True) -> Draft | None:
        """``trial`` (or a copy moved a little, when ``move``) if it keeps the rules beside the others in
        ``state`` (item ``i`` of ``state`` is the void's own former self and is ignored). In a symmetric layout
        the trial's mirror images are checked too, against the others' images and each other; a void on a
        mid-line only moves along it."""
        if not self.big_enough(trial) or not self.mirror.keeps(trial):
            return None
        others = [g for j, d in enumerate(state) if j != i and d is not None for g in self.shapes(d)]
        offsets = self.offsets(trial.size) if move else [(0.0, 0.0)]
        for dx, dy in self.mirror.along(trial, offsets):
            cand = trial.moved(dx, dy) if (dx or dy) else trial
            shapes = self.shapes(cand)
            if all(self.inside(g) for g in shapes) and all(self.clear(g, others + shapes[:k])
                                                           for k, g in enumerate(shapes)):
                return cand
        return None

    def why(self, d: Draft, r: Resolved) -> str:
        """Why ``d`` does not fit where it is, in words."""
        shapes = self.shapes(d)
        pair = len(shapes) > 1
        if not all(self.inside(g) for g in shapes):
            return ("it" + (" or a mirror image of it" if pair else "") + " reaches outside the area open to "
                    "voids (edge cover, webs to openings, bearing zones, KEEP zones)")
        return (f"it comes closer than the minimum web {r.min_web_mm:g} mm to another void"
                + (" or to its own mirror image" if pair else ""))


def _smaller(d: Draft, r: Resolved) -> list[Draft]:
    """The draft and ever smaller versions of it, for a void that does not fit where it is."""
    if d.family == "bore":
        return [d] + [d.scaled(s) for s in sorted(r.bore_diameters_mm, reverse=True)
                      if r.min_void_mm <= s < d.size]
    if d.family == "slot":
        shorter = [d.with_length(d.length * f) for f in SHRINK_STEPS[1:] if d.length * f >= d.size]
        narrower = [d.scaled(s).with_length(d.length) for s in sorted(r.slot_widths_mm, reverse=True)
                    if r.min_void_mm <= s < d.size]
        return [d] + shorter + narrower
    return [d.scaled(d.size * f) for f in SHRINK_STEPS]


def place(drafts: list[Draft], site: Site, r: Resolved):
    """Place drafts largest first, moving or shrinking those that break a rule; returns
    (placed drafts, change records (draft, what, why), dropped records (source, reason))."""
    order = sorted(drafts, key=lambda d: (-_shape(d).area, d.source, d.part))
    placed: list[Draft] = []
    changes, dropped = [], []
    for d in order:
        why = None
        for trial in _smaller(d, r):
            got = site.fits(trial, -1, placed)
            if got is None:
                continue
            if got != d:
                why = why or site.why(d, r)
                if abs(got.size - d.size) > 1e-9 or abs(got.length - d.length) > 1e-9:
                    changes.append((got, f"made smaller ({_describe(d)} -> {_describe(got)})", why))
                if math.dist(got.centre, d.centre) > 1e-9:
                    changes.append((got, f"moved {math.dist(got.centre, d.centre):.1f} mm", why))
            placed.append(got)
            break
        else:
            dropped.append((d.source, f"{_describe(d)}: {site.why(d, r)}, and no smaller or nearby "
                                      "void of its kind fits"))
    return placed, changes, dropped


def _describe(d: Draft) -> str:
    if d.family == "slot":
        return f"slot {d.size:g} x {d.length:.1f} mm"
    if d.family == "bore":
        return f"bore {d.size:g} mm"
    return f"{len(d.corners)}-gon {d.size:.1f} mm"


# --- energy measure ---------------------------------------------------------------------------------------


def energy_sampler(energy) -> tuple[Callable[[np.ndarray], np.ndarray], float | None]:
    """A function points (k, 2) -> strain-energy density (k,), and the sampling spacing it suggests.

    ``energy`` is such a function already, or a pair (grid, values) with one value per element of the FE
    grid (``toolkit.fe.grid.Grid``, element e = iy * nx + ix).
    """
    if callable(energy):
        return energy, None
    try:
        grid, values = energy
        values = np.asarray(values, dtype=float)
        nx, ny, dx, dy = grid.nx, grid.ny, grid.dx, grid.dy
    except (TypeError, ValueError, AttributeError):
        raise LacunaError("the strain-energy field must be a function of points or a (grid, values) pair.",
                          where="energy", hint="Pass (grid, values) with one value per grid element.") from None
    if values.shape != (nx * ny,):
        raise LacunaError(f"the strain-energy field has {values.size} values for {nx * ny} elements.",
                          where="energy", hint="Pass one value per element of the grid the panel was solved on.")

    def sample(points: np.ndarray) -> np.ndarray:
        ix = np.clip(np.floor(points[:, 0] / dx).astype(int), 0, nx - 1)
        iy = np.clip(np.floor(points[:, 1] / dy).astype(int), 0, ny - 1)
        return values[iy * nx + ix]

    return sample, min(dx, dy) / 2.0


def mean_over(shape, sample, spacing: float | None) -> float:
    """Mean of the sampled field over ``shape`` (the integral divided by the area), on a grid of points."""
    minx, miny, maxx, maxy = shape.bounds
    h = spacing or math.sqrt(shape.area) / 20.0
    h = max(h, math.sqrt(shape.area) / 60.0)  # at most a few thousand points per shape
    # Cell midpoints of an even split of the bounds (the midpoint rule).
    mx, my = max(1, math.ceil((maxx - minx) / h)), max(1, math.ceil((maxy - miny) / h))
    xs = minx + (np.arange(mx) + 0.5) * (maxx - minx) / mx
    ys = miny + (np.arange(my) + 0.5) * (maxy - miny) / my
    x, y = np.meshgrid(xs, ys)
    inside = shapely.contains_xy(shape, x.ravel(), y.ravel())
    pts = np.column_stack([x.ravel()[inside], y.ravel()[inside]])
    if len(pts) == 0:
        p = shape.representative_point()
        pts = np.array([[p.x, p.y]])
    return float(np.mean(sample(pts)))


# --- fitting by family ------------------------------------------------------------------------------------


def _fit(v: FreeformVoid, family: str, r: Resolved, allowed, tolerance: float, fixed: tuple[str, ...] = (),
         mirror: Mirror | None = None) -> list[Draft]:
    """Drafts for one freeform void; on mid-lines (``fixed``) made symmetric about them."""
    if family == "polygon":
        d = fit_polygon(v.shape, r.sides, allowed=allowed, source=v.index, corner=r.corner, corner_mm=r.corner_mm)
        if fixed:
            d = symmetric_polygon(d, v.shape, fixed, mirror, allowed)
        return [d] if d is not None else []
    if family == "slot":
        widths = [w for w in r.slot_widths_mm if w >= r.min_void_mm]
        d = fit_slot(v.shape, widths, allowed=allowed, source=v.index) if widths else None
        if d is not None and fixed:
            d = symmetric_slot(d, v.shape, fixed, mirror, allowed)
        return [d] if d is not None else []
    if fixed:
        return symmetric_bores(v.shape, r.bore_diameters_mm, fixed=fixed, mirror=mirror, allowed=allowed,
                               min_web_mm=r.min_web_mm + SAFETY_MM, tolerance_mm=tolerance,
                               smallest_mm=r.min_void_mm, source=v.index)
    return fit_bores(v.shape, r.bore_diameters_mm, allowed=allowed, min_web_mm=r.min_web_mm + SAFETY_MM,
                     tolerance_mm=tolerance, smallest_mm=r.min_void_mm, source=v.index)


def _choose(v: FreeformVoid, fits: dict[str, list[Draft]], sample, spacing) -> str | None:
    """The family that removes the least-working material for the material removed (see module text)."""
    removed = {f: shapely.union_all([_shape(d) for d in ds]) for f, ds in fits.items() if ds}
    if not removed:
        return None
    largest = max(g.area for g in removed.values())
    scores = {}
    for f, g in removed.items():
        if g.area < MIXED_MIN_SHARE * largest:
            continue
        scores[f] = mean_over(g, sample, spacing) if sample is not None else fit_error(g, v.shape)
    return min(scores, key=lambda f: (scores[f], FAMILIES.index(f)))


# --- the whole step ---------------------------------------------------------------------------------------


def _seeds(freeform, mirror: Mirror, r: Resolved):
    """The freeform voids to fit: as given, or, in a symmetric layout, folded onto the lower-left side.

    Returns the kept voids (``clean``), the mid-lines each stands on (by index), and the notes.
    """
    if not mirror.axes:
        kept, notes = clean(freeform, r.min_void_mm)
        return kept, {}, notes
    filled, notes = clean(freeform, 0.0)  # checks the input and fills islands; drops nothing with area
    seeds = fold([v.shape for v in filled], mirror)
    if r.family == "polygon" and r.sides % 2 and len(mirror.axes) == 2:
        split = []
        for shape, fixed in seeds:
            if len(fixed) == 2:
                c = shape.centroid
                notes.append(f"freeform void at ({c.x:.0f}, {c.y:.0f}) on both mid-lines: a {r.sides}-gon cannot "
                             "be symmetric about both, so it is made as a pair, one each side of the horizontal "
                             "mid-line.")
                split.extend((part, ("x",)) for part in split_centre(shape, mirror, r.min_web_mm / 2.0))
            else:
                split.append((shape, fixed))
        seeds = split
    kept, more = clean([shape for shape, _ in seeds], r.min_void_mm, where="folded freeform voids")
    return kept, {i: fixed for i, (_, fixed) in enumerate(seeds)}, notes + more


def _region_for(allowed, mirror: Mirror, fixed, r: Resolved, cache: dict):
    """The region open to a seed: the allowed region, on the lower-left side of each mid-line the seed does not
    stand on and half a web clear of it (so that the seed and its mirror image keep the web)."""
    free = tuple(a for a in mirror.axes if a not in fixed)
    if free not in cache:
        cache[free] = overlay(shapely.intersection, allowed, mirror.side(free, margin=r.min_web_mm / 2.0)) \
            if free else allowed
    return cache[free]


def rationalise(panel: Panel, freeform, settings: VoidOptions, rules: Rules, *, energy=None,
                allowed=None) -> Rationalised:
    """Freeform voids (shapely polygons, local mm) -> voids a shop can make, keeping ``rules``.

    ``energy``: the solid panel's strain-energy density for the ``mixed`` family, as a function of points or
    a (grid, per-element values) pair. ``allowed``: the region open to voids; by default the one
    ``rules.check.impossible_rules`` returns (``allowed_region``). With ``settings.symmetric`` (or, by default,
    ``settings.optimize_symmetry``) the layout is kept mirror-symmetric about the mid-lines the problem is
    symmetric about (``symmetry``; a note says which and why not). Raises LacunaError when the rules leave no
    room for any void or a setting is out of range.
    """
    r = resolve_settings(settings, rules, panel.thickness_mm)
    region = rule_check.impossible_rules(panel, rules)  # raises, in words, when no void fits at all
    if allowed is None:
        allowed = region
    sample, spacing = energy_sampler(energy) if energy is not None else (None, None)
    mirror, notes = layout_mirror(panel, settings, r.snap_mm)

    kept, comp_fixed, clean_notes = _seeds(freeform, mirror, r)
    dropped = [n for n in clean_notes if n.endswith("dropped.")]
    notes += [n for n in clean_notes if not n.endswith("dropped.")]
    tolerance = max(0.5 * r.snap_mm, 0.5)
    by_source = {v.index: v for v in kept}
    regions: dict = {}

    def where(i: int) -> str:
        v = by_source[i]
        twins = " and its mirror image" if mirror.elements(comp_fixed.get(i, ())) else ""
        return f"freeform void #{i + 1} at ({v.centroid[0]:.0f}, {v.centroid[1]:.0f}){twins}"

    drafts: list[Draft] = []
    families = ("polygon", "slot", "bore") if r.family == "mixed" else (r.family,)
    fitted = {}
    for v in kept:
        fixed = comp_fixed.get(v.index, ())
        room = _region_for(allowed, mirror, fixed, r, regions)
        fitted[v.index] = {f: _fit(v, f, r, room, tolerance, fixed, mirror) for f in families}
    chosen = {i: (_choose(by_source[i], fits, sample, spacing) if r.family == "mixed" else r.family)
              for i, fits in fitted.items()}
    if r.family == "mixed":
        counts: dict[str, int] = {}
        for f in chosen.values():
            if f is not None:
                counts[f] = counts.get(f, 0) + 1
        if len(counts) > r.max_types:
            keep = sorted(counts, key=lambda f: (-counts[f], FAMILIES.index(f)))[: r.max_types]
            notes.append(f"mixed voids limited to {', '.join(keep)}: max_types = {r.max_types} allows no more "
                         "families")
            for i, fits in fitted.items():
                if chosen[i] not in keep:
                    chosen[i] = _choose(by_source[i], {f: fits[f] for f in keep}, sample, spacing)
    for i, f in chosen.items():
        got = fitted[i].get(f, []) if f else []
        if not got:
            dropped.append(f"{where(i)}: no {r.family} void of the stock sizes fits in it; dropped.")
        drafts.extend(got)

    site = Site(allowed, r.min_web_mm, r.snap_mm, r.web_ratio, r.min_void_mm,
                openings=[o.shape for o in panel.openings], mirror=mirror)
    placed, change_recs, drop_recs = place(drafts, site, r)
    for source, reason in drop_recs:
        dropped.append(f"{where(source)}: {reason}; dropped.")

    stock = {"bore": r.bore_diameters_mm, "slot": r.slot_widths_mm}
    before = list(placed)
    placed, size_recs = standardise_sizes(placed, r.max_types, r.snap_mm, stock, r.min_void_mm, site.fits)
    placed, snap_recs = snap_centres(placed, r.snap_mm, lambda t, i, s: site.fits(t, i, s, move=False),
                                     origin=mirror.origin)
    # Change records point at drafts; follow each to the final draft of the same void.
    final_of = {(d.source, d.part): d for d in placed if d is not None}
    records = [((d.source, d.part), what, why) for d, what, why in change_recs]
    for i, what, why in size_recs + snap_recs:
        if placed[i] is None:
            dropped.append(f"{where(before[i].source)}: {_describe(before[i])}: {why}; dropped.")
        else:
            records.append(((before[i].source, before[i].part), what, why))
    placed = [d for d in placed if d is not None]

    # Every seed and its mirror images; a key (source, part, map) tells them apart.
    entries = []
    for d in placed:
        entries.append((d, (d.source, d.part, ())))
        entries.extend((img, (d.source, d.part, g)) for g, img in mirror.images(d))
    entries.sort(key=lambda e: (round(e[0].centre[0], 6), round(e[0].centre[1], 6), e[1]))
    ids = {key: f"V{k}" for k, (_, key) in enumerate(entries, 1)}
    voids = tuple(d.void(ids[key]) for d, key in entries)
    orbit_ids: dict[tuple[int, int], list[str]] = {}
    for _, key in entries:
        orbit_ids.setdefault(key[:2], []).append(ids[key])
    changes = tuple(f"{', '.join(orbit_ids[key])}: {what} ({why})" for key, what, why in records if key in final_of)

    # Fit error per freeform void: the voids fitted to it (or to its mirror image) against it.
    def piece(key):
        source, _, g = key
        return source, tuple(a for a in g if a not in comp_fixed.get(source, ()))

    errors = []
    for (_, key), v in zip(entries, voids):
        group = shapely.union_all([w.shape for (_, k), w in zip(entries, voids) if piece(k) == piece(key)])
        source, g = piece(key)
        errors.append((v.id, round(fit_error(group, mirror.geometry(by_source[source].shape, g)), 6)))
    violations = tuple(rule_check.check_layout(panel, list(voids), rules))
    return Rationalised(voids=voids, changes=changes, dropped=tuple(dropped), fit_errors=tuple(errors),
                        violations=violations, notes=tuple(notes))
