"""Freeform voids -> a layout of voids a shop can make, keeping the fabrication rules: ``rationalise``.

The steps, in order (docs/voids.md says the same at length):

1. clean: measure each freeform void (area, centroid, principal axes), drop those narrower than ``min_void``,
   fill solid islands (the outer outline is fitted; see ``measure``);
2. rooms: each freeform void within the region open to voids, less a margin from its neighbours so the web the
   rules ask for fits between them (``Room``);
3. candidates inside each room (``cover``): the whole room, splits along its length, honeycomb pieces, slot rows,
   packed bores; the one of most worth kept (area less the stiffness it costs, priced where the optimiser
   stopped); ``mixed`` lets the families compete the same way;
4. a honeycomb over the whole region competes as a second layout (``lattice_layout``), judged by analysis;
5. place the voids, largest first: a void that breaks a rule is moved a little, then made smaller, then dropped;
6. shape optimisation (``shape``): the same material made stiffer, then grown under the rules and the freeform
   layout's compliance, then new voids where room is left (``_fill``);
7. standardise sizes (``standardise``) and snap centres (an irregular n-gon's corners), each change kept only
   where the rules still hold;
8. prove: ``rules.check.check_layout`` on the final voids; its violations are returned as they are.

**Symmetric layouts** (``symmetry``). When the settings ask for mirror symmetry and the problem has it, the
freeform voids are folded onto the lower-left half (or quarter), the seeds fitted there (those on a mid-line made
symmetric about it), and every step above works on seeds with each seed's mirror images checked beside it; the
images are added at the end. Symmetry asked for but absent in the problem is not enforced; a note says why.

Ids are "V1", "V2", ... in order of the final centres, left to right and, for equal x, bottom to top.
"""

from __future__ import annotations

import hashlib
import itertools
import math
import os
import pickle
import threading
from dataclasses import dataclass, replace
from typing import Callable

import numpy as np
import shapely
from shapely.geometry import Polygon

from ..errors import LacunaError
from ..fe.boundary import where_text
from ..helper import ANALYSIS_MAX_ELEMENTS, analysis_fits_elsewhere, result_or, share_out
from ..model import Panel, Rules, Void
from ..optimize.beso import optimiser_threads
from ..rules import check as rule_check
from ..rules.profiles import JOB_SOURCE
from .cover import (hex_cells, hull_ngon, inscribed_circle, inscribed_slot, largest_part, major_axis_deg,
                    packed_bores, regular_corners, regular_ngon, slot_rows, split)
from .fit import fit_error, fit_polygon, fit_slot, overlay
from .measure import FreeformVoid, clean, inscribed_width
from .outline import Draft, segment_distance, segment_distances
from .shape import GROW_RATE, shape_ok
from .settings import CORNERS, FAMILIES, VoidOptions
from .standardise import align_centres, align_turns, size_groups, snap_centres, standardise_sizes
from .symmetry import (Mirror, fold, layout_mirror, split_centre, symmetric_bores, symmetric_polygon,
                       symmetric_slot)

# Every rule is kept with this much to spare, so the check on differently flattened arcs agrees (mm).
SAFETY_MM = 0.05
# The worth of a layout and its bound are both sampled on a grid of points (``mean_over``): a layout is passed
# over only when its bound is this share below the best found, so sampling cannot pass over a better one.
BOUND_SLACK = 0.02
SHRINK_STEPS = tuple(1.0 - 0.05 * k for k in range(11))  # down to half size
MOVE_RINGS = 4
# A made void may stand this far out of its freeform void (the contour is no more exact than the grid); the
# snapping step may move an irregular n-gon's corners by up to half the snap on top.
ROOM_TOLERANCE_MM = 0.5
# Rounds of refitting a void with the margin its own size asks for, where a web ratio ties the two.
SETTLE_ROUNDS = 4
# A sound fit whose size is within this share of the size its room was made for is kept without refitting.
SETTLE_TOLERANCE = 0.02
# The regrowth after the fill is told in the notes when it removes at least this share more (a growth of a
# fraction of a mm2 read "756142 against 756142 mm2").
GROWN_NOTE = 1e-4
# Relative tolerance of the largest-inscribed-circle searches that only choose among candidates (the proof and
# the placing step measure finely).
FIT_RTOL = 5e-3
# A honeycomb over the whole region replaces the voids fitted to the freeform ones only when it removes this many
# times their area (or they are softer than the freeform layout): the optimiser's load paths are worth keeping.
LATTICE_GAIN = 1.1
# ``Rationalised.layouts`` holds (-1, family, LARGEST_FIRST) when the first fit was made largest first
# (``largest_first``), so that a refit under other rules makes it the same way.
LARGEST_FIRST = "largest first"
# The largest-first fit is taken only when it removes this much more than the first fit: the shape optimisation
# and the fill that follow gain more on many small voids than on a few large ones. Measured 2026-12-03: the slotted
# panel in metres of tests/same_outputs.py, 0.7 % more at the first fit, ended with 5.2 % of the panel removed
# against 5.5 %; the 300 x 100 bench plate, 14 % more, with 19.5 % against 16.5 %.
LARGEST_GAIN = 1.1
# The honeycombs over the region open to voids (``lattice_layout``): sizes as shares of the region's depth. The
# large ones let a deep beam under a web ratio keep a few voids as deep as it allows; the finer ones, weighed on
# their own (``honeycomb_within_cap``), follow a wide plate's load paths.
LATTICE_SCALES = (1.0, 0.8, 0.6, 0.45)
LATTICE_FINE = (0.3, 0.2)
# A honeycomb a little softer than the freeform layout has its voids made this much smaller per round
# (``_within_cap``), rather than a fifth of them dropped.
CAP_SHRINK = 0.98
# The most voids one freeform void is split into along its length. Four was tried until 2026-12-04: a split into
# four never won on the bench panels (the same layouts over six copies each a micrometre apart, bench_spread.py)
# and its fits cost 0.1-0.3 s of the plate's void stage; of the 24 example runs two moved without it, both ways in
# one run but up over six copies (wall leaf, precast-formed: n-gons 76.1 -> 82.9 %, slots 59.8 -> 63.2 % kept).
MAX_PIECES = 3
# ``mixed`` picks each void's family at this share of the optimiser's price of stiffness (the worth's rho made
# 1 / MIXED_PRICE times larger), the price the shape optimisation's growth first lowers to (x 4) while the panel
# is stiffer than the freeform layout: most made layouts end well inside that cap, so a family chosen at the
# optimiser's own price (slots and bores, removing less but softer material) gives away material the n-gons would
# have kept within it. A house choice, no source. Measured 2026-12-03 on the examples' beams (precast-formed,
# timber-bored), mixed's kept share of the saving at prices 1 -> 1/4: beam loaded at 0.7 of the span, precast
# 68.8 -> 86.3 % (n-gons alone 86.4 %); travelling load 42.2 -> 49.3 % (54.5); central load 89.9 -> 91.4 % (92.8);
# load at 0.3 78.3 -> 79.0 % (72.4); timber-bored and steel-cut unchanged; at 1/16 the same as 1/4, with area
# alone (no price) the central beam fell to 86.3 %.
MIXED_PRICE = 0.25


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
    shape: object = None  # shape.ShapeResult of the shape optimisation, when it ran
    first_fit_mm2: float = 0.0  # area the first fit removed (voids fitted and placed, before any analysis)
    # the first fit's choice for each freeform void fitted one by one: (index, family, Layout.kind) each, and
    # (-1, family, LARGEST_FIRST) when the first fit taken was made largest first
    layouts: tuple[tuple[int, str, str], ...] = ()
    # area the voids removed as shaped, before their sizes were standardised (mm2, mirror images counted; 0 where
    # no layout reached that step)
    shaped_mm2: float = 0.0


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
    least_feature_mm: float = 0.0
    regular: bool = False
    tools: tuple[str, str, str] = ("cut", "slot", "bore")

    def web(self, a: float, b: float = 0.0) -> float:
        """The web the rules ask between voids of extents ``a`` and ``b`` (with the margin kept to spare)."""
        return max(self.min_web_mm, self.web_ratio * max(a, b)) + SAFETY_MM


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
    corner_mm = float(corner_mm or 0.0)
    # Without a profile value, a side must at least hold the easing at both its ends with a little straight between.
    feature = float(getattr(rules, "least_feature_mm", 0.0) or 0.0) or max(2.5 * corner_mm, 10.0)
    return Resolved(family=settings.family, sides=settings.sides, bore_diameters_mm=tuple(sorted(bores)),
                    slot_widths_mm=tuple(sorted(slots)), max_types=settings.max_types, snap_mm=settings.snap_mm,
                    corner=corner, corner_mm=corner_mm, min_void_mm=least,
                    min_web_mm=rules.min_web_mm, web_ratio=float(rules.web_ratio or 0.0),
                    least_feature_mm=feature, regular=bool(getattr(settings, "regular", False)),
                    tools=rules.tool_words)  # the profile's trade words (toolkit/rules/profiles.py)


def refuse_impossible(panel: Panel, settings: VoidOptions, rules: Rules, region=None) -> None:
    """LacunaError, before any long work, when the stock sizes or the n-gon's limits leave no void possible in the
    room the rules leave (``rules.check.impossible_rules`` has already said whether any void of the least size
    fits): one paragraph naming the setting and the smallest change that would admit a void. ``region``: what
    ``impossible_rules`` returned, when the caller has it already."""
    r = resolve_settings(settings, rules, panel.thickness_mm)
    if region is None:
        region = rule_check.impossible_rules(panel, rules)
    room = inscribed_width(region) if not region.is_empty else 0.0
    where_room = ("the largest circle the rules leave room for (edge cover, bearing zones, webs round openings"
                  + (", the depth band" if rules.depth_band else "") + f") is {room:.0f} mm across")
    # A regular n-gon with sides of the least feature has an inscribed circle of feature / tan(pi / n) across.
    ngon = max(r.min_void_mm, r.least_feature_mm / math.tan(math.pi / r.sides))
    problems = []
    # Why the least void is what it is: a profile's multiple of the thickness where that is larger than min_void.
    why_least = (f" ({float(rules.min_void_per_thickness):g} x the {panel.thickness_mm:g} mm thickness, the "
                 f"{rules.profile} profile's min_void_per_thickness)"
                 if rule_check.least_void_by_thickness(rules, panel.thickness_mm) else "")
    for family, stock, key, noun, ask in (("bore", r.bore_diameters_mm, "bore_diameters", "smallest bore", "a bore"),
                                          ("slot", r.slot_widths_mm, "slot_widths", "narrowest slot", "a slot width")):
        if r.family not in (family, "mixed"):
            continue
        usable = [d for d in stock if d >= r.min_void_mm]
        # The list is the rules' (the profile's, or the job's own where it gave one), else the job's [voids] one.
        given = rules.source(key) == JOB_SOURCE or not getattr(rules, f"{key}_mm")
        listed = "the job's list" if given else f"the {rules.profile} profile's list"
        if not usable:
            sizes = ", ".join(f"{d:g}" for d in stock)
            problems.append((f"every {key.replace('_', ' ')[:-1]} in {listed} ({sizes} mm) is under the least void "
                             f"of {r.min_void_mm:g} mm{why_least}", f"[voids] {key}",
                             f"List {ask} of at least {r.min_void_mm:g} mm in [voids] {key}"
                             + (", or choose a profile whose least void suits a panel this thick." if why_least
                                else ".")))
        elif min(usable) > room:
            problems.append((f"{where_room}, and the {noun} in {listed} is {min(usable):g} mm", f"[voids] {key}",
                             f"Add {ask} of at most {math.floor(room):g} mm to [voids] {key}."))
    if r.family in ("polygon", "mixed") and ngon > room:
        problems.append((f"{where_room}, and the smallest {r.sides}-gon with sides of the least feature "
                         f"{r.least_feature_mm:g} mm is {ngon:.0f} mm across its flats",
                         "[voids] sides",
                         f"Use fewer sides (a {r.sides}-gon needs room for {r.sides} sides of "
                         f"{r.least_feature_mm:g} mm), or a profile with a smaller least feature."))
    families = {"mixed": 3}.get(r.family, 1)
    if len(problems) >= families:
        what, where, hint = problems[0]
        raise LacunaError(f"no void can be made: {what}.", where=where, hint=hint)


def _check_lengths(values, where: str, what: str, example: str) -> None:
    if not values:
        raise LacunaError(f"no {what} given; at least one is needed.", where=where, hint=f"List them, {example}.")
    bad = [v for v in values if not (isinstance(v, (int, float)) and math.isfinite(v) and v > 0.0)]
    if bad:
        raise LacunaError(f"{what} must be positive lengths, got {bad[0]!r}.", where=where, hint=f"{example}.")


# --- the rule context -------------------------------------------------------------------------------------

# A bound of two voids' distance must clear the web by this much (mm) to stand for the exact distance: far above
# the rounding of either, far below any web.
CORE_MARGIN_MM = 1e-6
# Up to this many pairs, their cores' distances are worked in plain floats rather than as arrays.
FEW_PAIRS = 12
# Members (``Site.members``) remembered at most, before the memory is emptied and filled again.
MEMBERS_HELD = 20_000
# Centres within this many snap steps of each other along x (or y) are lined up into one column (row) where the
# rules allow (``standardise.align_centres``): a house choice, no source; two steps join the 326 / 328 / 330 mm
# column of a wall leaf of the examples and leave neighbouring columns (a void's width apart at least) alone.
ALIGN_STEPS = 2.0
# Slots of one width whose directions lie within this many degrees of each other are turned to one where the rules
# allow (``standardise.align_turns``): a house choice, no source; it joins the wall leaf's 156-164 degree slots.
ALIGN_TURN_DEG = 10.0
# The others of a state beside one void (``Site.others``) remembered at most.
OTHERS_HELD = 64


_PACKED = ("ext", "x", "y", "reach", "ax", "ay", "bx", "by", "inner", "outer")
_HULL, _SLACK = len(_PACKED) + 1, len(_PACKED) + 2  # a member's hull and its slack (``Site.__init__``)


class Packed:
    """Members (``Site.__init__``) as arrays, made once for the many moved copies of one trial: shapes, extents,
    centres' x and y, the radii of the circles round them, their cores (``Draft.core``, ``Draft.radii``), their
    hulls and slacks."""

    def __init__(self, members: list):
        self.members = members
        self.shapes = np.empty(len(members), dtype=object)
        self.shapes[:] = [m[0] for m in members]
        self.hulls = np.empty(len(members), dtype=object)
        self.hulls[:] = [m[_HULL] for m in members]
        self.slack = np.array([m[_SLACK] for m in members], dtype=float)
        for k, name in enumerate(_PACKED, 1):
            setattr(self, name, np.array([m[k] for m in members], dtype=float))

    def plus(self, more: list) -> Packed:
        """These members and ``more`` after them."""
        if not more:
            return self
        extra, out = Packed(list(more)), Packed.__new__(Packed)
        out.members = self.members + extra.members
        for name in ("shapes", "hulls", "slack") + _PACKED:
            setattr(out, name, np.concatenate([getattr(self, name), getattr(extra, name)]))
        return out


def _apart(packed: Packed, cx, cy, radius: float):
    """How far apart the circles round ``packed`` and a void's circle (centre ``cx``, ``cy``, ``radius``) are at
    least: the shapes lie within their circles. ``cx``, ``cy`` may be columns, one row per moved copy."""
    return np.hypot(packed.x - cx, packed.y - cy) - packed.reach - radius


class Site:
    """Where void material may go and how far apart voids stay: answers "may this void stand here?"."""

    def __init__(self, allowed, min_web_mm: float, move_step_mm: float, web_ratio: float = 0.0,
                 least_mm: float = 0.0, openings=(), mirror: Mirror | None = None, feature_mm: float = 0.0):
        inner = shapely.buffer(allowed, -SAFETY_MM, quad_segs=4) if not allowed.is_empty else allowed
        shapely.prepare(inner)
        self.inner = inner
        self.allowed = allowed
        self.web = min_web_mm
        self.ratio = web_ratio
        self.least = least_mm
        self.feature = feature_mm
        self.step = move_step_mm
        # The allowed region already keeps min_web from the openings; a web ratio also ties that web to the
        # larger of the void and the opening, which only a per-void test can say. Each other void or opening is
        # a member: (shape, extent, centre x, centre y, radius of a circle about the centre holding it, then its
        # core segment's ends and its inner and outer radii about it: ``Draft.core``, ``Draft.radii``; then its
        # hull, a shape of few points holding it, and the slack, how far the hull reaches past it: an n-gon's sharp
        # corners round its eased outline, the shape itself and 0 for the others: ``_hull_of``).
        self.openings = [_member_of(o) for o in openings] if web_ratio > 0.0 else []
        # In a symmetric layout every draft stands for itself and its mirror images: each is checked.
        self.mirror = mirror if mirror is not None else Mirror()
        self._members: dict[int, tuple[Draft, list]] = {}  # members of the drafts asked for, by id (``members``)
        self._others: dict[tuple, tuple[list, Packed]] = {}  # the others of a state beside one void (``others``)

    def __getstate__(self) -> dict:
        state = dict(self.__dict__)
        state["_members"], state["_others"] = {}, {}  # caches: not sent along
        return state

    def __setstate__(self, state: dict) -> None:
        # shapely pickles a geometry as its WKB, without GEOS's prepared index: prepared again in the helper
        self.__dict__.update(state)
        if not self.inner.is_empty:
            shapely.prepare(self.inner)

    def shapes(self, draft: Draft) -> list:
        """The shapes of ``draft`` and of its mirror images."""
        return [d.shape() for d in self.mirror.orbit(draft)]

    def area(self, drafts) -> float:
        """The area ``drafts`` and their mirror images remove, mm2."""
        return float(sum(g.area for d in drafts for g in self.shapes(d)))

    def members(self, draft: Draft) -> list[tuple]:
        """``draft`` and its mirror images as members (see ``__init__``), remembered per draft: drafts do not
        change, and every trial step of every void asks for all the others' (at 600 x 200 elements, 88 voids:
        361,000 calls, 4 s of mirror images built again)."""
        held = self._members.get(id(draft))
        if held is not None and held[0] is draft:
            return held[1]
        got = [(d.shape(), d.extent(), d.centre[0], d.centre[1], d.reach()) + d.core() + d.radii() + _hull_of(d)
               for d in self.mirror.orbit(draft)]
        if len(self._members) >= MEMBERS_HELD:
            self._members.clear()
        self._members[id(draft)] = (draft, got)  # the draft is held too, so its id is not taken by another
        return got

    def others(self, state: list[Draft], i: int) -> Packed:
        """The members of every draft of ``state`` but item ``i`` (and None), and the openings, remembered per state
        and void: the shape optimisation and the placing try one void several times beside the same others (the
        state is held with them, so the drafts' ids in the key stay theirs)."""
        key = (i, tuple(map(id, state)))
        held = self._others.get(key)
        if held is not None:
            return held[1]
        packed = Packed([m for j, d in enumerate(state) if j != i and d is not None for m in self.members(d)]
                        + self.openings)
        if len(self._others) >= OTHERS_HELD:
            self._others.clear()
        self._others[key] = (list(state), packed)
        return packed

    def inside(self, shape) -> bool:
        return bool(self.inner.covers(shape))

    def _webs(self, packed: Packed, extent: float) -> np.ndarray:
        """The web each of ``packed`` asks of a void of ``extent`` (with a web ratio, times the larger extent), plus
        the margin kept to spare."""
        need = np.full(len(packed.members), self.web)
        if self.ratio > 0.0:
            need = np.maximum(need, self.ratio * np.maximum(packed.ext, extent))
        return need + SAFETY_MM

    def clear(self, member, others) -> bool:
        """At least the web from every other void and opening; with a web ratio, that times the larger one's
        extent (the diameter of its smallest enclosing circle, as rules.check measures it). ``member``: the void
        to check; ``others``: members, or a ``Packed`` of them (the openings then already in it). The circles
        round the voids rule out most pairs; only those whose circles come closer than the web are measured."""
        packed = others if isinstance(others, Packed) else Packed(list(others) + self.openings)
        if not packed.members:
            return True
        shape, own, cx, cy, radius, ax, ay, bx, by, inner, outer, hull, slack = member
        need = self._webs(packed, own)
        close = np.flatnonzero(_apart(packed, cx, cy, radius) < need)
        if not close.size:
            return True
        if inner >= 0.0 or (packed.inner[close] >= 0.0).any():
            # Slots and bores: the distance of two drawn outlines lies between their cores' distance less the
            # outer radii and less the inner ones (``Draft.radii``; a polygon or opening has the lower bound alone),
            # a band some hundredths of a millimetre wide. Only a pair whose band holds the web (to CORE_MARGIN_MM)
            # is measured exactly, so the answer is the exact test's; the flattened arcs make that test costly.
            if close.size <= FEW_PAIRS:
                cores = np.array([segment_distance(ax, ay, bx, by, packed.ax[j], packed.ay[j], packed.bx[j],
                                                   packed.by[j]) for j in close.tolist()])
            else:
                cores = segment_distances(ax, ay, bx, by, packed.ax[close], packed.ay[close], packed.bx[close],
                                          packed.by[close])
            upper = np.where((inner >= 0.0) & (packed.inner[close] >= 0.0), cores - inner - packed.inner[close],
                             np.inf)
            if np.any(upper < need[close] - CORE_MARGIN_MM):
                return False
            close = close[cores - outer - packed.outer[close] < need[close] + CORE_MARGIN_MM]
            if not close.size:
                return True
        # Eased n-gons (some 80 points each) by their sharp hulls first: the outlines' distance lies between the hulls'
        # and that plus both slacks. Only a pair whose band holds the web (to CORE_MARGIN_MM) is measured exactly.
        spare = slack + packed.slack[close]
        rough = spare > 0.0
        if rough.any():
            pairs = close[rough]
            lower = shapely.distance(hull, packed.hulls[pairs])
            if np.any(lower + spare[rough] < need[pairs] - CORE_MARGIN_MM):
                return False
            close = np.concatenate([close[~rough], pairs[lower < need[pairs] + CORE_MARGIN_MM]])
            if not close.size:
                return True
        return bool(np.all(shapely.distance(shape, packed.shapes[close]) >= need[close]))

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
        """At least the least void size: a polygon's inscribed circle, a slot's width, a bore's diameter; and a
        polygon still one the shop can make (sides of the least feature, corners neither flat nor sharp)."""
        if draft.family == "polygon":
            if not shape_ok(draft, self.feature):  # checks convexity too, which the bounds below need
                return False
            shape, need = draft.shape(), self.least + SAFETY_MM
            # A convex shape of area A and perimeter P holds a largest circle of radius r with r P / 2 <= A <= r P
            # (the triangles from its centre to the sides; the rim of width r covers it): its diameter lies
            # between 2A/P and 4A/P, which settles most drafts without the search.
            low = 2.0 * shape.area / shape.length
            if low >= need:
                return True
            if 2.0 * low < need:
                return False
            return inscribed_width(shape, FIT_RTOL) >= need
        return draft.size >= self.least - 1e-9

    def fits(self, trial: Draft, i: int, state: list[Draft], move: bool = True) -> Draft | None:
        """``trial`` (or a copy moved a little, when ``move``) if it keeps the rules beside the others in
        ``state`` (item ``i`` of ``state`` is the void's own former self and is ignored). In a symmetric layout
        the trial's mirror images are checked too, against the others' images and each other; a void on a
        mid-line only moves along it."""
        if not self.big_enough(trial) or not self.mirror.keeps(trial):
            return None
        others = self.others(state, i)
        offsets = self.offsets(trial.size) if move else [(0.0, 0.0)]
        trial.extent(), trial.reach()  # worked out once, carried by every moved copy
        moves = self.mirror.along(trial, offsets)
        if len(moves) > 1 and not self.mirror.axes:
            moves = self._not_ruled_out(trial, moves, others)
        for dx, dy in moves:
            cand = trial.moved(dx, dy) if (dx or dy) else trial
            members = self.members(cand)
            if all(self.inside(m[0]) for m in members) and all(self.clear(m, others.plus(members[:k]))
                                                               for k, m in enumerate(members)):
                return cand
        return None

    def _not_ruled_out(self, trial: Draft, moves: list, packed: Packed) -> list:
        """The ``moves`` of ``trial`` (no mirror images) less those whose copy the tests of ``fits`` would refuse
        for a reason found for all the copies at once: reaching outside the region open to voids; for an eased
        n-gon beside n-gons and openings, a sharp hull closer to another's than the web less both slacks; for a slot
        or bore, a core closer to another slot's or bore's than the web plus both inner radii (``clear``'s first
        refusals, the hulls' on the same numbers, the cores' with a margin twice ``clear``'s, so that no rounding
        of the vectorised distances refuses a copy ``clear`` would take). What is left is tested one by one as
        before, so ``fits`` answers as it did; most of the placing's moved copies are refused (bench plate: 7,100 of
        7,500), each once costing a member built and two GEOS calls."""
        shape = trial.shape()
        n = len(shapely.get_coordinates(shape))
        d = np.asarray(moves, dtype=float)
        copies = shapely.transform(np.full(len(moves), shape, dtype=object), lambda c: c + np.repeat(d, n, 0))
        keep = shapely.covers(self.inner, copies)
        if packed.members:
            need = self._webs(packed, trial.extent())
            cx = trial.centre[0] + d[:, 0]
            cy = trial.centre[1] + d[:, 1]
            close = (_apart(packed, cx[:, None], cy[:, None], trial.reach()) < need) & keep[:, None]
            inner = trial.radii()[0]
            if inner >= 0.0:  # a slot or a bore
                k, j = np.nonzero(close & (packed.inner >= 0.0)[None, :])
                if len(k):
                    ax, ay, bx, by = trial.core()
                    cores = segment_distances(ax + d[k, 0], ay + d[k, 1], bx + d[k, 0], by + d[k, 1], packed.ax[j],
                                              packed.ay[j], packed.bx[j], packed.by[j])
                    keep[k[cores - inner - packed.inner[j] < need[j] - 2.0 * CORE_MARGIN_MM]] = False
            elif trial.family == "polygon" and not (packed.inner >= 0.0).any():
                slack = _slack_of(trial)
                k, j = np.nonzero(close) if slack > 0.0 else ((), ())
                if len(k):
                    hulls = shapely.polygons(np.asarray(trial.corners, dtype=float)[None, :, :]
                                             + np.column_stack([cx, cy])[:, None, :])
                    lower = shapely.distance(hulls[k], packed.hulls[j])
                    keep[k[lower + (slack + packed.slack[j]) < need[j] - CORE_MARGIN_MM]] = False
        return [m for m, ok in zip(moves, keep.tolist()) if ok]

    def keeps(self, trial: Draft, i: int, state: list[Draft]) -> Draft | None:
        """``fits`` with the trial where it is, unmoved: the later stages' test of a void they have placed."""
        return self.fits(trial, i, state, move=False)

    def why(self, d: Draft, r: Resolved) -> str:
        """Why ``d`` does not fit where it is, in words."""
        shapes = self.shapes(d)
        pair = len(shapes) > 1
        if not all(self.inside(g) for g in shapes):
            return ("it" + (" or a mirror image of it" if pair else "") + " reaches outside the area open to "
                    "voids (edge cover, webs to openings, bearing zones, KEEP zones)")
        web = f"the minimum web {r.min_web_mm:g} mm" + (f" (or {r.web_ratio:g} x the larger one's size)"
                                                          if r.web_ratio else "")
        return (f"it comes closer than {web} to another void or an opening"
                + (" or to its own mirror image" if pair else ""))


def _stock_below(d: Draft, r: Resolved) -> list[float]:
    """The stock bore diameters or slot widths under a bore's or slot's size, of at least the least void, largest
    first."""
    stock = r.bore_diameters_mm if d.family == "bore" else r.slot_widths_mm
    return [s for s in sorted(stock, reverse=True) if r.min_void_mm <= s < d.size]


def _smaller(d: Draft, r: Resolved) -> list[Draft]:
    """The draft and ever smaller versions of it, for a void that does not fit where it is."""
    if d.family == "bore":
        return [d] + [d.scaled(s) for s in _stock_below(d, r)]
    if d.family == "slot":
        shorter = [d.with_length(d.length * f) for f in SHRINK_STEPS[1:] if d.length * f >= d.size]
        narrower = [d.scaled(s).with_length(d.length) for s in _stock_below(d, r)]
        return [d] + shorter + narrower
    return [d.scaled(d.size * f) for f in SHRINK_STEPS]


def place(drafts: list[Draft], site: Site, r: Resolved):
    """Place drafts largest first, moving or shrinking those that break a rule; returns
    (placed drafts, change records (draft, what, why), dropped records (source, reason))."""
    order = sorted(drafts, key=lambda d: (-d.shape().area, d.source, d.part))
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

    return GridSample(values, nx, ny, dx, dy), min(dx, dy) / 2.0


class GridSample:
    """The value of the element holding each point (k, 2) -> (k,): a function of points that pickles (the helper
    process takes it, helper.py)."""

    def __init__(self, values: np.ndarray, nx: int, ny: int, dx: float, dy: float):
        self.values, self.nx, self.ny, self.dx, self.dy = values, nx, ny, dx, dy

    def __call__(self, points: np.ndarray) -> np.ndarray:
        ix = np.clip(np.floor(points[:, 0] / self.dx).astype(int), 0, self.nx - 1)
        iy = np.clip(np.floor(points[:, 1] / self.dy).astype(int), 0, self.ny - 1)
        return self.values[iy * self.nx + ix]


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


def _area(g) -> float:
    return g.area


class Worth:
    """A layout's worth (``rationalise``): the area of ``g`` less what it costs in stiffness at the price
    ``rho``, ``g.area * (1 - mean density / rho)``; with ``ceiling``, an upper bound of the worth of any shape
    inside ``g``: its material that works less than ``rho``, ``g.area * mean(max(1 - density / rho, 0))``.
    Objects, not closures, so that the helper process can take them."""

    def __init__(self, sample, spacing: float | None, rho: float, ceiling: bool = False):
        self.sample, self.spacing, self.rho, self.ceiling = sample, spacing, rho, ceiling

    def at(self, rho: float) -> Worth:
        """The same measure at another price."""
        return Worth(self.sample, self.spacing, rho, self.ceiling)

    def _below(self, points: np.ndarray) -> np.ndarray:
        return np.maximum(1.0 - self.sample(points) / self.rho, 0.0)

    def __call__(self, g) -> float:
        if self.ceiling:
            return g.area * mean_over(g, self._below, self.spacing)
        return g.area * (1.0 - mean_over(g, self.sample, self.spacing) / self.rho)


# --- fitting by family ------------------------------------------------------------------------------------


def _fit_fixed(v: FreeformVoid, family: str, r: Resolved, allowed, tolerance: float, fixed: tuple[str, ...],
               mirror: Mirror) -> list[Draft]:
    """Drafts for a seed standing on mid-lines (``fixed``), made symmetric about them (``symmetry``)."""
    if family == "polygon":
        d = fit_polygon(v.shape, r.sides, allowed=allowed, source=v.index, corner=r.corner, corner_mm=r.corner_mm)
        d = symmetric_polygon(d, v.shape, fixed, mirror, allowed)
        return [_dressed(d, r)] if d is not None else []
    if family == "slot":
        widths = [w for w in r.slot_widths_mm if w >= r.min_void_mm]
        d = fit_slot(v.shape, widths, allowed=allowed, source=v.index) if widths else None
        if d is not None:
            d = symmetric_slot(d, v.shape, fixed, mirror, allowed)
        return [_dressed(d, r)] if d is not None else []
    return [_dressed(d, r) for d in symmetric_bores(
        v.shape, r.bore_diameters_mm, fixed=fixed, mirror=mirror, allowed=allowed,
        min_web_mm=r.min_web_mm + SAFETY_MM, tolerance_mm=tolerance, smallest_mm=r.min_void_mm, source=v.index)]


def _dressed(d: Draft, r: Resolved) -> Draft:
    return replace(d, tools=r.tools, corner=r.corner if d.family == "polygon" else d.corner,
                   corner_mm=r.corner_mm if d.family == "polygon" else d.corner_mm)


def _extent(shape) -> float:
    return 2.0 * float(shapely.minimum_bounding_radius(shape))


def _member_of(shape) -> tuple:
    """A fixed shape (an opening) as a member for ``Site.clear``: its smallest enclosing circle gives both."""
    circle = shapely.minimum_bounding_circle(shape)
    centre = circle.centroid
    radius = float(shapely.minimum_bounding_radius(shape))
    reach = radius * (1.0 + 1e-9) + 1e-9
    return (shape, 2.0 * radius, centre.x, centre.y, reach, centre.x, centre.y, centre.x, centre.y, -1.0, reach, shape,
            0.0)


def _hull_of(d: Draft) -> tuple:
    """(hull, slack) of a draft as a member (``Site.__init__``): an eased n-gon's sharp n-gon, which holds its
    outline (the easing cuts into the corners), and the furthest its corners stand off that outline (the sharp
    n-gon is convex, so the furthest of its points is a corner: no point of it is further from the outline); the
    draft's own shape and 0 for a sharp n-gon, a slot, a bore. The slack is kept on the draft and carried by its
    moved and mirrored copies (``outline._carry``): a move or a mirror changes no distance, and measuring it again
    for each of the placing's moved copies was a fifth of the time spent testing them (bench plate, 7,500 copies)."""
    slack = _slack_of(d)
    return (shapely.polygons(d.sharp), slack) if slack > 0.0 else (d.shape(), 0.0)


def _slack_of(d: Draft) -> float:
    """``_hull_of``'s slack alone: how far an eased n-gon's sharp corners stand off its outline (0: no easing)."""
    if d.family != "polygon" or d.corner == "none" or d.corner_mm <= 0.0:
        return 0.0
    slack = d.__dict__.get("_slack")
    if slack is None:
        slack = float(np.max(shapely.distance(shapely.points(d.sharp), d.shape()))) * (1.0 + 1e-9) + 1e-9
        object.__setattr__(d, "_slack", slack)
    return slack


class Room:
    """The room one freeform void gives its voids: the void within the region open to voids, less a margin from
    every neighbouring freeform void so that the web the rules ask for fits between them.

    Two neighbours a bar of width b apart, each needing a web W, each give up (W - b) / 2 of their own side: a
    void of extent D keeps (web(D) + b) / 2 from a neighbour's outline. A void from the neighbour then lies
    inside that outline, itself (web + b) / 2 back from ours, so the web holds for like sizes; the placing step
    settles the rest.
    """

    def __init__(self, v: FreeformVoid, room, others: list, r: Resolved, tolerance: float, openings=()):
        self.v, self.r = v, r
        # Openings are fixed: a void keeps the whole web from them (the region open to voids already keeps the
        # minimum web; a web ratio ties it to the larger of the two as well).
        self.openings = [(o, _extent(o)) for o in openings] if r.web_ratio else []
        self.region = largest_part(overlay(shapely.intersection, shapely.buffer(v.shape, tolerance), room)) \
            if room is not None else v.shape
        others = np.asarray(others, dtype=object)
        if len(others):
            gaps = shapely.distance(v.shape, others)
            reach = r.web(_extent(v.shape)) if r.web_ratio else r.min_web_mm + SAFETY_MM
            near = gaps < reach
            self.others, self.gaps = others[near], gaps[near]
        else:
            self.others, self.gaps = others, np.zeros(0)
        self.fitted: dict = {}

    @classmethod
    def bare(cls, region, r: Resolved, openings=()) -> Room:
        """A room with no neighbours: ``region`` as it is."""
        room = cls.__new__(cls)
        room.v, room.r, room.region = None, r, region
        room.others, room.gaps = np.zeros(0, dtype=object), np.zeros(0)
        room.openings = [(o, _extent(o)) for o in openings] if r.web_ratio else []
        room.fitted = {}
        return room

    def within(self, part, extent: float):
        """``part`` less the margins its neighbours ask for a void of ``extent``."""
        if part is None or part.is_empty:
            return None
        web = self.r.web(extent)
        close = self.gaps < web
        margins = list(shapely.buffer(self.others[close], (web + self.gaps[close]) / 2.0, quad_segs=8)) \
            if close.any() else []
        margins += [shapely.buffer(o, self.r.web(extent, size), quad_segs=8) for o, size in self.openings]
        if margins:
            part = largest_part(overlay(shapely.difference, part, shapely.union_all(margins)))
        return part if part is not None and part.area > 0.0 else None


def _settled(room: Room, part, fit, kind: tuple) -> tuple | None:
    """``fit(space)`` -> (extent, area, result) in the room ``part`` leaves for a void of the size it finds;
    ``kind`` names the fit for ``_fitted``.

    The margin from the neighbours depends on the void's own size when the rules tie the web to it, and the size
    on the margin: a fit made for extent e has size s(e), smaller the larger e is, and is sound when s(e) <= e. The
    best sound fit is near the e where s(e) = e: start from the part's extent, refit with the size found, and once
    a sound and an unsound extent bracket that point, refit at the secant's root between them, a tenth of the way
    back to the sound one (the plain refit would zigzag towards it); keep the largest sound fit."""
    extent = _extent(part)
    best = None
    sound = unsound = None  # (extent, s(e) - e)
    # Only a web tied to the void's own size, to a neighbour or an opening, makes the room depend on the size.
    tied = room.r.web_ratio and (len(room.others) or room.openings)
    for _ in range(SETTLE_ROUNDS if tied else 1):
        space = room.within(part, extent)
        got = _fitted(room, kind, fit, space) if space is not None else None
        if got is None:
            if best is not None:
                break
            extent *= 0.7
            continue
        gap = got[0] - extent
        if gap <= 1e-6:
            if best is None or got[1] > best[1]:
                best = got
            sound = (extent, gap)
            if -gap <= SETTLE_TOLERANCE * extent:
                break  # the fit takes nearly all the room its own size leaves
        else:
            unsound = (extent, gap)
        if sound is not None and unsound is not None and sound[1] < unsound[1]:
            (e0, g0), (e1, g1) = sound, unsound
            root = e0 - g0 * (e1 - e0) / (g1 - g0)
            extent = root + 0.1 * (e0 - root)  # a little to the sound side: a fit there is one to keep
        else:
            extent = got[0]
    return best[2] if best is not None else None


def _fitted(room: Room, kind: tuple, fit, space):
    """``fit(space)``, remembered in the room by ``kind`` (what is fitted, under which settings) and the space's
    exact coordinates: the pieces of a void's layouts and the rounds of ``_settled`` often come to the same space
    (a tenth of the plate's fits)."""
    key = (kind, shapely.to_wkb(space))
    if key not in room.fitted:
        room.fitted[key] = fit(space)
    return room.fitted[key]


def _polygon_in(room: Room, part, r: Resolved, source: int, k: int) -> Draft | None:
    """The largest n-gon in ``part`` that keeps its web to the neighbours."""

    def fit(space):
        if r.regular:
            found = regular_ngon(space, r.sides, r.least_feature_mm)
            if found is None:
                return None
            pts, centre = regular_corners(found[0], found[1], found[2], r.sides), np.asarray(found[0])
        else:
            pts = hull_ngon(space, r.sides, r.least_feature_mm)
            if pts is None:
                return None
            centre = np.asarray(Polygon(pts).centroid.coords[0])
        poly = Polygon(pts)
        if inscribed_width(poly, FIT_RTOL) < r.min_void_mm + SAFETY_MM:
            return None
        return _extent(poly), poly.area, (pts, centre)

    got = _settled(room, part, fit, ("polygon", id(r)))
    if got is None:
        return None
    pts, centre = got
    rel = pts - centre
    return Draft(family="polygon", centre=(float(centre[0]), float(centre[1])),
                 size=2.0 * float(np.max(np.linalg.norm(rel, axis=1))), source=source, part=k,
                 corners=tuple((float(x), float(y)) for x, y in rel), corner=r.corner, corner_mm=r.corner_mm,
                 regular=r.regular, tools=r.tools)


def _slot_in(room: Room, part, r: Resolved, source: int, k: int) -> Draft | None:
    """The slot of a stock width removing most in ``part`` that keeps its web to the neighbours."""
    widths = [w for w in r.slot_widths_mm if w >= r.min_void_mm]
    if not widths:
        return None

    def fit(space):
        got = inscribed_slot(space, widths)
        if got is None:
            return None
        _, _, width, length = got
        return length, width * (length - width) + math.pi * width * width / 4.0, got

    got = _settled(room, part, fit, ("slot", id(r)))
    if got is None:
        return None
    centre, angle, width, length = got
    return Draft(family="slot", centre=centre, size=width, length=length, angle_deg=angle, source=source, part=k,
                 tools=r.tools)


def _bores_in(room: Room, r: Resolved, source: int) -> list[Draft]:
    stock = [d for d in r.bore_diameters_mm if d >= r.min_void_mm]
    if not stock:
        return []
    width = inscribed_width(room.region)
    largest = max([d for d in stock if d <= width] or [stock[0]])
    space = room.within(room.region, largest)
    if space is None:
        return []
    bores = packed_bores(space, stock, r.web)
    return [Draft(family="bore", centre=(x, y), size=d, source=source, part=k, tools=r.tools)
            for k, (x, y, d) in enumerate(bores)]


def _pitches(room: Room, r: Resolved) -> list[float]:
    """Void sizes to try for a honeycomb of voids in one freeform void: from the least void that holds its corners
    up to half the void's extent, in steps of a quarter."""
    least = max(r.min_void_mm * 1.5, 3.0 * r.least_feature_mm if r.family != "slot" else 0.0, 1e-6)
    top = _extent(room.region) / 2.0
    sizes = []
    size = top
    while size >= least and len(sizes) < 6:
        sizes.append(size)
        size *= 0.75
    return sizes


def _highest_first(groups: list[list], bound) -> list[tuple[int, float]]:
    """(index, ceiling) of each group of pieces, ceiling the sum of ``bound`` over its pieces, highest first (equal
    ones in their given order); without ``bound``, every group in its order with an endless ceiling. A search
    that fits the groups in this order may stop at the first whose ceiling the best found beats."""
    if bound is None:
        return [(k, math.inf) for k in range(len(groups))]
    ceilings = [sum(bound(p) for p in pieces) for pieces in groups]
    return [(int(k), ceilings[k]) for k in np.argsort(-np.asarray(ceilings), kind="stable")]


class Layout(list):
    """The drafts of one candidate layout of a freeform void, and which kind of layout it is (``kind``: "split 1"
    for the whole void, "split k" for k pieces, "comb s o" for the honeycomb of the s-th pitch and o-th offset,
    "rows" for slots side by side, "bores"), so that the same kind can be fitted again under other rules."""

    def __init__(self, drafts=(), kind: str = ""):
        super().__init__(drafts)
        self.kind = kind


def _void_candidates(room: Room, families, r: Resolved, score, bound, only) -> dict[str, list[Layout]]:
    """``candidates`` of one void in each of ``families`` (a module-level function: the helper process runs it)."""
    return {f: candidates(room, f, r, score=score, bound=bound, only=only) for f in families}


def candidates(room: Room, family: str, r: Resolved, *, trials: int = 2, score=None, bound=None,
               only: str | None = None) -> list[Layout]:
    """The layouts one freeform void could become in one family: the whole void; split into 2 to ``MAX_PIECES``
    voids along its length; slots side by side; bores packed into it; and, for the ``mixed`` family, a honeycomb of
    smaller voids (a web tied to the void's size is narrower between small voids), the honeycombs ranked by the
    area of their pieces and only the best ``trials`` fitted. A single family gets its honeycombs over the whole
    region open to voids (``lattice_layout``) and in the room a layout leaves (``_fill``), not in each freeform
    void: over copies of the bench panels a micrometre apart (benchmarks/bench_spread.py) each void's own
    honeycombs kept no more of the saving on average and cost a tenth of the void stage; with ``mixed`` they are the
    small n-gons that compete with bores and slots in a void, and without them the examples' beam loaded at 0.7 of
    its span kept 76 instead of 90 % of the saving under the precast-formed rules (docs/voids.md).

    With ``score`` (a layout's worth, as ``rationalise`` takes it) and ``bound`` (an upper bound of the worth of
    anything fitted inside a region), the layouts are fitted in falling order of their pieces' bound and the
    search stops once no layout left can beat the best found: the layout of most worth is the same as without
    the bound, found with fewer fits. ``only``: fit the layouts of that kind (``Layout.kind``) alone."""
    v = room.v
    if room.region is None:
        return []
    if family == "bore":
        got = _bores_in(room, r, v.index) if only in (None, "bores") else []
        return [Layout(got, "bores")] if got else []
    fit = _polygon_in if family == "polygon" else _slot_in
    wanted = (lambda kind: True) if only is None else (lambda kind: kind == only)  # noqa: E731
    layouts: list[tuple[str, list]] = []
    length = _extent(room.region)
    most = int(min(MAX_PIECES, max(1, length // max(r.min_void_mm + r.min_web_mm, 1e-9))))
    for k in range(1, most + 1):
        if not wanted(f"split {k}"):
            continue
        pieces = split(room.region, k, r.web(length / k)) if k > 1 else [room.region]
        if k > 1 and r.web_ratio and pieces:
            # the web between pieces follows the pieces' own size
            pieces = split(room.region, k, r.web(max(_extent(p) for p in pieces)))
        layouts.append((f"split {k}", pieces))
    angle = major_axis_deg(room.region)
    combs = []
    for s, size in enumerate(_pitches(room, r) if r.family == "mixed" or (only or "").startswith("comb ") else ()):
        web = r.web(size)
        for o, offset in enumerate(((0.0, 0.0), (0.5, 0.5))):
            if not wanted(f"comb {s} {o}"):
                continue
            pieces = hex_cells(room.region, size + web, web, angle, offset)
            useful = [p for p in pieces if inscribed_width(p, FIT_RTOL) >= r.min_void_mm]
            if useful:
                combs.append((sum(p.area for p in useful), f"comb {s} {o}", useful))
    combs.sort(key=lambda c: -c[0])
    layouts += [(kind, pieces) for _, kind, pieces in combs[:trials]]
    out = []
    best = -math.inf
    for k, ceiling in _highest_first([pieces for _, pieces in layouts], bound if score is not None else None):
        kind, pieces = layouts[k]
        if ceiling * (1.0 + BOUND_SLACK) < best:
            break  # the rest are sorted below it
        drafts = [d for i, p in enumerate(pieces) if (d := fit(room, p, r, v.index, i)) is not None]
        if drafts:
            out.append(Layout(drafts, kind))
            if score is not None:
                best = max(best, score(_removed(drafts)))
    if family == "slot" and wanted("rows"):
        # Slots side by side along the void's length, in the room its neighbours leave for slots of the void's size.
        widths = [w for w in r.slot_widths_mm if w >= r.min_void_mm]
        space = room.within(room.region, min(length, max(widths or [0.0])))
        rows = slot_rows(space, widths, r.web) if space is not None and widths else []
        if rows:
            out.append(Layout([Draft(family="slot", centre=c, size=w, length=n, angle_deg=ang, source=v.index,
                                     part=k, tools=r.tools) for k, (c, ang, w, n) in enumerate(rows)], "rows"))
    return out


def lattice_layout(allowed, family: str, r: Resolved, score, *, source: int = -1, openings=(), bound=None,
                   helper=None, scales: tuple[float, ...] = LATTICE_SCALES) -> list[Draft]:
    """A layout laid over the whole region open to voids, ignoring the freeform voids: a honeycomb of voids of one
    size with the web the rules ask between them (a row where the region is one void deep), each cell keeping
    its void only where the material it removes is worth it (``score`` above zero). The sizes tried are ``scales``
    of the region's depth (its largest inscribed circle's diameter). Where the rules tie the web
    to the void's size, few large voids in a row can beat the optimiser's many small ones; the caller compares.

    With ``bound`` (an upper bound of the worth of anything fitted inside a region, as ``candidates`` takes it)
    the honeycombs are fitted in falling order of their cells' bound and the search stops once none left can
    beat the best found: the same layout with fewer fits. With an idle ``helper`` (``toolkit.helper``) two
    honeycombs are fitted at a time, one there.
    """
    region = largest_part(allowed) if allowed is not None else None
    if region is None:
        return []
    depth = inscribed_width(region)
    sizes = sorted({min(depth, f * depth) for f in scales}, reverse=True)
    combs = []  # (cells: (piece, centre, radius) each) per size and offset, in the plain order
    centre_y = inscribed_circle(region)[0][1]
    for size in sizes:
        if size < max(r.min_void_mm, 1e-6):
            continue
        web = r.web(size)
        pitch = size + web
        row = pitch * math.sqrt(3.0) / 2.0
        # Offsets along the rows, and across them: the plain one and the one putting a row through the middle of
        # the region's depth (a band one void deep holds one row).
        through = ((centre_y - (region.bounds[1] - row)) / row) % 1.0
        for offset in [(ox, oy) for oy in (0.0, through) for ox in (0.0, 0.5)]:
            cells = []
            for p in hex_cells(region, pitch, web, 0.0, offset):
                c, radius = inscribed_circle(p)  # one search: its centre and radius go together
                cells.append((p, c, radius if 2.0 * radius >= r.min_void_mm else None))
            combs.append(cells)
    best: tuple[float, int, list[Draft]] = (0.0, -1, [])

    def weigh(k: int, drafts: list[Draft]) -> None:
        nonlocal best
        scores = [score(d.shape()) for d in drafts]  # each once
        worth = [d for d, v in zip(drafts, scores) if v > 0.0]
        total = sum(v for v in scores if v > 0.0)
        # the first of equal worth in the plain order, as a search of every honeycomb would keep
        if total > best[0] or (total == best[0] and total > 0.0 and k < best[1]):
            best = (total, k, worth)

    order = _highest_first([[p for p, _, radius in cells if radius is not None] for cells in combs], bound)
    at = 0
    while at < len(order) and order[at][1] * (1.0 + BOUND_SLACK) >= best[0]:  # the rest are sorted below it
        k = order[at][0]
        # With an idle helper, the next honeycomb is fitted there meanwhile. Which is weighed first does not
        # matter (equal worth goes to the first in the plain order), and one the search would have stopped
        # before cannot beat the best (its worth is under its ceiling): the same layout either way.
        ahead = None
        if helper is not None and helper.idle and at + 1 < len(order):
            ahead = order[at + 1][0], helper.submit(_comb_drafts, combs[order[at + 1][0]], family, r, source,
                                                    openings)
        weigh(k, _comb_drafts(combs[k], family, r, source, openings))
        if ahead is not None:
            weigh(ahead[0], result_or(ahead[1], _comb_drafts, combs[ahead[0]], family, r, source, openings))
        at += 2 if ahead is not None else 1
    return best[2]


def _comb_drafts(cells, family: str, r: Resolved, source: int, openings) -> list[Draft]:
    """The voids of one honeycomb: each cell (piece, centre, radius; radius None for a cell too small) fitted
    with a void of ``family`` (a module-level function: the helper process runs it)."""
    drafts = []
    for i, (p, c, radius) in enumerate(cells):
        if radius is None:
            continue
        if family == "bore":
            stock = [d for d in r.bore_diameters_mm if r.min_void_mm <= d <= 2.0 * radius]
            if stock:
                drafts.append(Draft(family="bore", centre=(float(c[0]), float(c[1])), size=max(stock),
                                    source=source, part=i, tools=r.tools))
            continue
        room = Room.bare(p, r, openings)
        d = (_polygon_in if family == "polygon" else _slot_in)(room, p, r, source, i)
        if d is not None:
            drafts.append(d)
    return drafts


def largest_first(kept, allowed, site: Site, r: Resolved, openings=(), score=None, bound=None
                  ) -> tuple[list[Draft], list, list]:
    """Another first fit, for a web tied to the void's size: each freeform void fitted whole (``kept``: polygons or
    slots) with no margin kept for its neighbours, placed largest first (``place`` moves, shrinks or drops what
    breaks a rule beside the larger ones), then each void left out fitted again in what the placed voids and their
    webs leave of it. Where the first fit gives every void its share of the bars between them, so that a web
    ratio keeps them all small, this one lets a large void keep the web it asks by giving up a neighbour: on the
    300 x 100 bench plate 563,000 mm2 against 492,000 (2026-12-03). With ``mixed`` each void is fitted whole as an
    n-gon and the voids left out get the layouts of every family (as many families as ``max_types`` allows).
    Returns (drafts, change records, dropped records) as ``place`` does."""
    families = ("polygon", "slot", "bore")[:max(1, r.max_types)] if r.family == "mixed" else (r.family,)
    fit = _polygon_in if "polygon" in families else _slot_in
    regions, drafts = {}, []
    for v in kept:
        region = largest_part(overlay(shapely.intersection, shapely.buffer(v.shape, ROOM_TOLERANCE_MM), allowed))
        if region is None or region.is_empty:
            continue
        regions[v.index] = region
        d = fit(Room.bare(region, r, openings), region, r, v.index, 0)
        if d is not None:
            drafts.append(d)
    placed, changes, dropped = place(drafts, site, r)
    have = {d.source for d in placed}
    for v in sorted(kept, key=lambda v: (-v.shape.area, v.index)):
        if v.index in have or v.index not in regions:
            continue
        taken = shapely.union_all([shapely.buffer(d.shape(), r.web(d.extent())) for d in placed])
        region = largest_part(overlay(shapely.difference, regions[v.index], taken))
        if region is None or region.is_empty:
            continue
        room = Room.bare(region, r, openings)
        room.v = v  # the drafts' source
        if score is not None:
            layout = _choose_layout([c for f in families for c in candidates(room, f, r, score=score, bound=bound)],
                                    score)
        else:
            layout = [d] if (d := fit(room, region, r, v.index, 0)) is not None else []
        for k, d in enumerate(layout):
            for trial in _smaller(replace(d, source=v.index, part=k), r):
                got = site.fits(trial, -1, placed)
                if got is not None:
                    placed.append(got)
                    have.add(v.index)
                    break
    return placed, changes, [(source, why) for source, why in dropped if source not in have]


def _lattice_of(allowed, families, r: Resolved, score, *, openings=(), bound=None, helper=None,
                scales: tuple[float, ...] = LATTICE_SCALES) -> list[Draft]:
    """The honeycomb over ``allowed`` (``lattice_layout``) of most worth among ``families``, one family each."""
    best: tuple[float, list[Draft]] = (0.0, [])
    for family in families:
        got = lattice_layout(allowed, family, r, score, source=-1, openings=openings, bound=bound, helper=helper,
                             scales=scales)
        worth = sum(score(d.shape()) for d in got)
        if worth > best[0]:
            best = (worth, got)
    return best[1]


def _fill(placed: list[Draft], allowed, site: Site, r: Resolved, score, evaluate, cap: float, openings,
          bound=None, helper=None) -> tuple[list[Draft], int, tuple | None]:
    """New voids in the room the layout leaves (the region open to voids less every void grown by its web): a
    honeycomb there, each new void kept where it keeps the rules beside the others and is worth it; then those
    costing most stiffness dropped until the panel is no softer than ``cap``. Returns the drafts, how many
    were added and, where some were, the analysis of the drafts returned (compliance, element energies)."""
    if not placed:
        return placed, 0, None
    grown = [shapely.buffer(d.shape(), r.web(d.extent())) for d in placed]
    room = overlay(shapely.difference, allowed, shapely.union_all(grown))
    # ``mixed``: a honeycomb of one of the families the layout already uses (max_types counts families).
    families = sorted({d.family for d in placed}) if r.family == "mixed" else [r.family]
    extra = _lattice_of(room, families, r, score, openings=openings, bound=bound, helper=helper) \
        if not room.is_empty else []
    # Numbered after the voids of the same source already there (a honeycomb layout is source -1 too): every
    # void keeps its own (source, part), which its id follows.
    first = 1 + max((d.part for d in placed if d.source == -1), default=-1)
    extra = [replace(d, part=first + k) for k, d in enumerate(extra)]
    state = list(placed)
    added = []
    for d in extra:
        got = site.keeps(d, -1, state)
        if got is not None:
            state.append(got)
            added.append(got)
    if not added:
        return placed, 0, None
    c, kept, energy = _within_cap(state, evaluate, cap, keep=len(placed))
    if c > cap or len(kept) <= len(placed):
        return placed, 0, None
    return kept, len(kept) - len(placed), (c, energy)


def threshold_density(grid, energy: np.ndarray, voids, band: float = 2.0) -> float | None:
    """The strain-energy density (N mm / mm2) of the solid material within ``band`` elements of the voids in a
    design analysed with them cut (``energy``: per element, u^T ke u of the solid element): the median, taken as
    the density at which the optimiser stopped removing material (what it left round its voids is what it would
    have removed next)."""
    if not voids:
        return None
    union = shapely.union_all(list(voids))
    # prepared: the distance test then runs on GEOS's prepared geometry, the same answer for every element centre
    # in a third of the time (600 x 200 elements: 0.43 -> 0.13 s)
    shapely.prepare(union)
    reach = band * max(grid.dx, grid.dy)
    centres = grid.element_centres
    near = shapely.dwithin(union, shapely.points(centres), reach) & ~shapely.contains_xy(
        shapely.buffer(union, 0.5 * max(grid.dx, grid.dy)), centres[:, 0], centres[:, 1])
    if not near.any():
        return None
    return float(np.median(energy[near])) / (2.0 * grid.element_area)


def _a_size_smaller(d: Draft, r: Resolved) -> Draft | None:
    """``d`` a step smaller, in sizes a shop stocks: an n-gon ``CAP_SHRINK`` of its size; a bore the next stock
    diameter down; a slot ``CAP_SHRINK`` of its length at its stock width, or the next stock width down once it is
    no longer than wide. None: no smaller one of at least the least void size."""
    if d.family == "polygon":
        return d.scaled(CAP_SHRINK * d.size)
    if d.family == "slot" and d.length > d.size + 1e-9:
        return d.with_length(max(d.size, CAP_SHRINK * d.length))
    below = _stock_below(d, r)
    return d.scaled(below[0]) if below else None


def _within_cap(drafts: list[Draft], evaluate, cap: float, rounds: int = 5, keep: int = 0, floor_mm2: float = 0.0,
                fits=None, smaller=None) -> tuple[float, list[Draft], np.ndarray]:
    """``drafts`` less the voids that cost most stiffness for their area, a fifth at a time, until the compliance is
    at most ``cap``: (compliance, drafts left, their element energies). The first ``keep`` drafts are not dropped.
    The caller needs no layout removing less than ``floor_mm2``: where dropping would go below it, the voids are
    made smaller instead (``smaller(draft)`` a round, by default ``CAP_SHRINK`` of its size; each only where
    ``fits(trial, i, state)``, the rules, allow; without ``fits`` none is), and where that cannot go on either the
    compliance returned is the last one analysed, above the cap."""
    if smaller is None:
        def smaller(d: Draft) -> Draft:
            return d.scaled(CAP_SHRINK * d.size)
    state = list(drafts)
    c, energy = evaluate(state)
    bounded = False
    for done in range(rounds):
        if c <= cap or len(state) <= keep:
            break
        grid = evaluate.grid
        centres = np.array([d.centre for d in state])
        ix = np.clip((centres[:, 0] / grid.dx).astype(int), 0, grid.nx - 1)
        iy = np.clip((centres[:, 1] / grid.dy).astype(int), 0, grid.ny - 1)
        hot = energy[iy * grid.nx + ix]
        hot[:keep] = -np.inf
        worst = set(np.argsort(-hot)[: max(1, (len(state) - keep) // 5)].tolist())
        fewer = [d for k, d in enumerate(state) if k < keep or k not in worst]
        if sum(d.shape().area for d in fewer) < floor_mm2:
            # A honeycomb a little too soft: every void a little smaller rather than a fifth of them gone.
            left = rounds - done
            if not bounded and left >= 3:
                # Once here every later round makes voids smaller (a dropped one would leave less than the floor),
                # each inside its former self, so no round can go below the compliance of every void made smaller
                # as many times as rounds are left, the rules aside (less material removed, a stiffer panel: the
                # loads do not change). Where even that is softer than the cap, the rounds are not made (the
                # steel bench plate's honeycomb: 289,000 against 193,000 N mm, four analyses saved).
                bounded = True
                least = [_smallest(d, smaller, left) if k >= keep else d for k, d in enumerate(state)]
                if evaluate(least)[0] > cap:
                    break
            shrunk = list(state)
            for k in range(keep, len(state)):
                t = smaller(state[k])
                if t is not None and fits is not None and fits(t, k, shrunk) is not None:
                    shrunk[k] = t
            if shrunk == state or sum(d.shape().area for d in shrunk) < floor_mm2:
                break
            fewer = shrunk
        state = fewer
        c, energy = evaluate(state)
    return c, state, energy


def _smallest(d: Draft, smaller: Callable[[Draft], Draft | None], times: int) -> Draft:
    """``d`` made ``smaller`` ``times`` times, or as far as it goes (``smaller`` answers None)."""
    for _ in range(times):
        t = smaller(d)
        if t is None:
            break
        d = t
    return d


def _removed(drafts: list[Draft]):
    return shapely.union_all([d.shape() for d in drafts])


def _choose_layout(options: list[list[Draft]], score) -> list[Draft]:
    """The layout of the most worth (``score``; see ``rationalise``) among ``options``; [] when there is none."""
    if not options:
        return []
    return max(options, key=lambda ds: (score(_removed(ds)), -len(ds)))


def analysis_threads(n_elements: int) -> int:
    """MKL threads of the voids' stage's analyses on a grid of ``n_elements``: the optimiser's (two on large grids,
    ``optimize.beso.optimiser_threads``, whose solver the stage then refactors instead of analysing the matrix
    again) where the helper process takes no analysis of such a grid (above ``helper.ANALYSIS_MAX_ELEMENTS``),
    else one, so that the honeycomb weighed there is the one weighed here, to the bit. Measured 2026-12-03 at
    2000 x 500 elements: a refactor 6.9 s on one thread, 4.1 s on two; the stage makes some sixteen."""
    return optimiser_threads(n_elements) if n_elements > ANALYSIS_MAX_ELEMENTS else 1


@dataclass
class _Stage:
    """A layout the last stages start from: its drafts, change and drop records, (compliance, element energies)
    where analysed, and the notes that came with it."""

    placed: list
    change_recs: list
    drop_recs: list
    first: tuple | None
    notes: tuple = ()
    # another first fit's choice of layout per void and its area (``mixed``'s n-gons, ``_mixed_or_ngons``); None:
    # the run's own
    kinds: dict | None = None
    first_fit_mm2: float | None = None


@dataclass
class _Done:
    """What the last stages made of a ``_Stage`` (``rationalise``'s ``finish``)."""

    placed: list
    change_recs: list
    notes: list
    dropped: list
    kinds: dict
    first_fit_mm2: float
    shaped: object
    told: tuple | None = None  # what ``on_first_fit`` is told for this layout (``rationalise``)
    sent: bool = False  # ``on_first_fit`` was told as the layout was made


@dataclass
class _Finisher:
    """The last stages from a first fit (``_Stage``), or the honeycomb taken instead: the largest-first fit where it
    removes more, the shape optimisation and the fill. Every value of the run it reads is a field, so the helper
    process can finish one layout while this process finishes another."""

    r: Resolved
    site: Site
    allowed: object
    openings: list
    score: object  # the later stages' worth and bound (``rationalise``)
    bound: object
    rho: float | None
    step_mm: float  # the shape optimisation's step: the grid's element
    shape_steps: int
    kinds: dict  # the first fit's choice of layout per void
    first_fit_mm2: float
    big: tuple | None  # the largest-first fit (drafts, change records, drop records) where it is weighed, else None
    wheres: dict  # {freeform void: where it is, in words}
    mirrored: bool

    def where(self, source: int) -> str:
        return self.wheres.get(source, "a void of the honeycomb over the region open to voids")

    def __call__(self, start: _Stage, evaluate, cap, free_shapes, *, helper=None,
                 tell: Callable[[tuple, list], None] | None = None) -> _Done:
        """``start`` finished, nothing of the run changed; ``tell`` (``rationalise``'s ``on_first_fit``), where
        given, is told the layout's choice per void and its sizes before it is shaped; ``helper`` may take part of
        the fill's honeycomb."""
        r, site = self.r, self.site
        placed, change_recs, drop_recs, first = start.placed, start.change_recs, start.drop_recs, start.first
        notes_now = list(start.notes)
        kinds_now = dict(self.kinds if start.kinds is None else start.kinds)
        fit_mm2 = self.first_fit_mm2 if start.first_fit_mm2 is None else start.first_fit_mm2
        if evaluate is not None and self.big is not None:
            # Largest first: fewer, larger voids, each keeping the web its size asks (``largest_first``), taken
            # where it removes clearly more (LARGEST_GAIN), no softer than the freeform layout, and costs no more
            # stiffness for it than the shape optimisation's growth may (GROW_RATE).
            big, big_changes, big_drops = (list(part) for part in self.big)
            area_now, area_big = sum(d.shape().area for d in placed), sum(d.shape().area for d in big)
            if big and area_big > LARGEST_GAIN * area_now:
                c_now = first[0]
                c_big, e_big = evaluate(big)
                worth_it = area_now <= 0.0 or \
                    (area_big - area_now) / area_now >= GROW_RATE * max(c_big - c_now, 0.0) / c_now
                if c_big <= cap and worth_it:
                    notes_now.append(f"the voids are fitted largest first, each keeping the web its size asks: "
                                     f"fewer, larger voids keep more of the saving than every freeform void kept "
                                     f"small ({area_big:.0f} against {area_now:.0f} mm2 removed, no softer than the "
                                     "freeform layout).")
                    placed, change_recs, drop_recs, first = big, big_changes, big_drops, (c_big, e_big)
                    fit_mm2 = site.area(big)
                    kinds_now[-1] = (r.family, LARGEST_FIRST)  # the limiting rule's refits follow it
        dropped_now = [f"{self.where(source)}: {reason}; dropped." for source, reason in drop_recs]
        # told before the shaping (mostly analyses), so that the limiting rule's refits can run meanwhile
        told = (tuple((i, f, kind) for i, (f, kind) in kinds_now.items()),
                [_extent(g) for d in placed for g in site.shapes(d)])
        if tell is not None:
            tell(*told)
        shaped = None
        if self.shape_steps and evaluate is not None and placed:
            from .shape import optimise

            def shaped_from(drafts, analysis):
                return optimise(drafts, evaluate, site.keeps, rho=self.rho,
                                target_area_mm2=sum(g.area for g in free_shapes), feature_mm=r.least_feature_mm,
                                step_mm=self.step_mm, steps=self.shape_steps, cap_Nmm=cap, first=analysis)

            shaped = shaped_from(placed, first)
            notes_now += list(shaped.notes)
            placed = list(shaped.drafts)
            if not self.mirrored:
                placed, filled, filled_at = _fill(placed, self.allowed, site, r, self.score, evaluate, cap,
                                                  self.openings, self.bound, helper)
                if filled:
                    notes_now.append(f"{filled} more void(s) placed in the room the layout left, where the material "
                                     "works least, the panel staying no softer than the freeform layout.")
                    # The new voids are fitted to their cells and the voids grown before them stopped where the
                    # cap or a rule held them; the cap often leaves stiffness to spend, so the whole layout is shaped
                    # again from the fill's analysis (``optimise`` never returns a worse layout).
                    again = shaped_from(placed, filled_at)
                    shaped = replace(shaped, analyses=again.analyses)
                    placed = list(again.drafts)  # the same, or stiffer at the same material, or grown under the cap
                    if again.area_mm2[-1] > again.area_mm2[0] * (1.0 + GROWN_NOTE):  # else no growth to speak of
                        notes_now.append(f"the layout with them shaped and grown again: {again.area_mm2[-1]:.0f} "
                                         f"against {again.area_mm2[0]:.0f} mm2 removed, no softer than the freeform "
                                         "layout.")
        return _Done(placed, change_recs, notes_now, dropped_now, kinds_now, fit_mm2, shaped, told,
                     sent=tell is not None)


def honeycomb_within_cap(allowed, families, r: Resolved, score, bound, openings, site: Site, evaluate, cap: float,
                         c_fit: float, area_fit: float, helper=None):
    """The honeycomb over the region open to voids (``_lattice_of``), placed, and where it could be taken (it
    removes clearly more than the first fit, LATTICE_GAIN, or the first fit is softer than ``cap``) cut down to
    the cap: (``place``'s answer or None, ``_within_cap``'s answer or None where it was not analysed), and the
    same pair for the finer honeycomb.

    The worth that chooses among the honeycombs of the sizes tried is first order (the solid panel's energy under
    each cell): it favours large cells, and a cell as deep as the region cuts through load paths the analysis then
    finds. So the finer honeycomb (``LATTICE_FINE``) is weighed on its own too; whether it is taken is settled once
    it is shaped, grown, filled and given standard sizes beside the layout otherwise made (``_removing_more``): it
    ends at the cap where the first fit still has room to grow. Taken at the cut-down, where it removes more than the
    first fit, it lost on two beams of the examples with bores under the steel-cut rules (the first fit, stiffer
    there, grew further: 22.5 against 20.2 % of the panel, 2026-12-03)."""
    args = (allowed, families, r, score, bound, openings, site, evaluate, cap, c_fit, area_fit)
    return (honeycomb_at(LATTICE_SCALES, *args, helper=helper), honeycomb_at(LATTICE_FINE, *args, helper=helper))


def honeycomb_at(scales: tuple[float, ...], allowed, families, r: Resolved, score, bound, openings, site: Site,
                 evaluate, cap: float, c_fit: float, area_fit: float, helper=None):
    """One of ``honeycomb_within_cap``'s pairs: the honeycomb of the cell sizes ``scales`` (of the web's), placed,
    and cut down to the cap where it could be taken."""
    grid_drafts = _lattice_of(allowed, families, r, score, openings=openings, bound=bound, helper=helper,
                              scales=scales)
    other = place(grid_drafts, site, r) if grid_drafts else None
    within = None
    if other is not None and other[0] and (
            c_fit > cap or sum(d.shape().area for d in other[0]) > LATTICE_GAIN * area_fit):
        within = _within_cap(other[0], evaluate, cap,
                             floor_mm2=LATTICE_GAIN * area_fit if c_fit <= cap else 0.0,
                             fits=site.keeps,
                             smaller=lambda d: _a_size_smaller(d, r))
    return other, within


# In the helper process: the largest-first fit made ahead for the layout it finishes (``largest_ahead``), by a
# token of the run; one at a time.
_LARGEST: dict = {}
_TOKENS = itertools.count()

# In the helper process: the Evaluator made ahead for a job (``warm_evaluator``), by the digest of what it was made
# from; one at a time.
_WARM: dict = {}


def _warm_key(panel: Panel, nx: int, ny: int, dx: float, dy: float, backend: str) -> str:
    return hashlib.sha256(pickle.dumps((panel, nx, ny, dx, dy, backend))).hexdigest()


def warm_evaluator(panel: Panel, nx: int, ny: int, dx: float, dy: float, backend: str) -> bool:
    """Made in the helper process while the optimiser runs (its core is idle then): the Evaluator of the panel as
    drawn, its solver analysed and factorised, kept for ``finished_elsewhere`` (whose analyses are then refactors:
    its set-up, 0.8 s of the helper's at 300 x 100 elements, is off the job's path)."""
    _WARM.clear()
    evaluate = _helper_evaluator(panel, nx, ny, dx, dy, backend)
    evaluate.shapes([])
    evaluate.analyses = 0
    _WARM[_warm_key(panel, nx, ny, dx, dy, backend)] = evaluate
    return True


def _helper_evaluator(panel: Panel, nx: int, ny: int, dx: float, dy: float, backend: str):
    """The helper process's Evaluator of the panel as drawn on an nx x ny grid, on a solver of its own."""
    from ..fe.grid import Grid
    from ..fe.solve import SharedSolver
    from .shape import Evaluator

    return Evaluator(panel, Grid(nx, ny, dx, dy), shared=SharedSolver(backend))


def finished_elsewhere(panel: Panel, nx: int, ny: int, dx: float, dy: float, backend: str, fitted: _Stage,
                       finisher: _Finisher, big_token: str, cap: float, free_shapes, *honey_args):
    """``_finished`` on a solver of its own (the helper process runs it, on the Evaluator ``warm_evaluator`` made
    there where it did): the large honeycomb weighed and the layout the stage starts from finished, while this
    process weighs and finishes the finer honeycomb. A solver's factor of a matrix is the same to the bit whether
    made for it or refactored from another of the same pattern, so the answer is the one made here. ``big_token``:
    the largest-first fit is the one ``largest_ahead`` made here under it (else the finisher's own)."""
    if big_token:
        finisher = replace(finisher, big=_LARGEST.pop(big_token))
    evaluate = _WARM.pop(_warm_key(panel, nx, ny, dx, dy, backend), None)
    _WARM.clear()
    if evaluate is None:
        evaluate = _helper_evaluator(panel, nx, ny, dx, dy, backend)
    try:
        return _finished(evaluate, fitted, finisher, cap, free_shapes, honey_args)
    finally:
        evaluate.shared.release()


def largest_ahead(token: str, *args) -> tuple:
    """``largest_first(*args)`` made in the helper process and kept there under ``token`` for the layout it
    finishes next (``finished_elsewhere``); one at a time."""
    _LARGEST.clear()
    _LARGEST[token] = made = largest_first(*args)
    return made


def _finished(evaluate, fitted: _Stage, finisher: _Finisher, cap: float, free_shapes, honey_args, helper=None):
    """The large honeycomb over the region (``honeycomb_at`` with ``LATTICE_SCALES``; ``honey_args`` its arguments
    but the scales and the Evaluator), and the honeycomb's layout where it is taken instead of ``fitted``, else
    ``fitted``, finished (``_Finisher``): (the honeycomb's answer, the ``_Done``, the analyses made). The
    ``_Done``'s shape optimisation counts the analyses made here up to its end (a fill given up after it made some
    is not counted there, as in sequence): the caller adds those it made before."""
    before = evaluate.analyses
    honey = honeycomb_at(LATTICE_SCALES, *honey_args[:7], evaluate, *honey_args[7:], helper=helper)
    c_fit, area_fit = honey_args[-2:]
    start = _with_honeycomb(fitted, honey, cap, c_fit, area_fit) or fitted
    done = finisher(start, evaluate, cap, free_shapes, helper=helper)
    if done.shaped is not None:
        done = replace(done, shaped=replace(done.shaped, analyses=done.shaped.analyses - before))
    return honey, done, evaluate.analyses - before


def _with_honeycomb(fitted: _Stage, honey, cap: float, c_fit: float, area_fit: float) -> _Stage | None:
    """The honeycomb's stage where it is taken instead of the first fit ``fitted``, else None. The optimiser's own
    topology is kept unless the honeycomb removes clearly more (LATTICE_GAIN) or the first fit is too soft."""
    other, within = honey
    if within is None:
        return None
    c_grid, lattice, e_grid = within
    area_grid = sum(d.shape().area for d in lattice)
    if not (c_grid <= cap and (c_fit > cap or area_grid > LATTICE_GAIN * area_fit)):
        return None
    note = (f"the voids are laid as a honeycomb over the region open to voids: under the web the rules ask it keeps "
            f"more of the saving than voids fitted one by one to the optimiser's freeform voids ({area_grid:.0f} "
            f"against {area_fit:.0f} mm2 removed, no softer than the freeform layout).")
    keys = {(d.source, d.part): d for d in lattice}
    change_recs = [c for c in other[1] if (c[0].source, c[0].part) in keys]
    change_recs += [(d, f"made smaller, {_describe(d)}", "so that the honeycomb is no softer than the freeform "
                     "layout") for d in lattice if d not in other[0]]
    return _Stage(lattice, change_recs, other[2], (c_grid, e_grid), (note,))


def _chosen_drafts(chosen: dict, best: dict) -> tuple[list[Draft], dict[int, tuple[str, str]], list[int]]:
    """The drafts of each void's layout in the family ``chosen`` for it (None: none), from ``best`` ({void: {family:
    layout}}): (drafts, {void: (family, layout kind)}, the voids with nothing)."""
    drafts: list[Draft] = []
    kinds: dict[int, tuple[str, str]] = {}
    missing = []
    for i, f in chosen.items():
        got = best[i].get(f, []) if f else []
        if not got:
            missing.append(i)
        elif isinstance(got, Layout):
            kinds[i] = (f, got.kind)
        drafts.extend(got)
    return drafts, kinds, missing


def _stock(r: Resolved) -> dict[str, tuple[float, ...]]:
    """The stock sizes the standard sizes keep to: {family: sizes}."""
    return {"bore": r.bore_diameters_mm, "slot": r.slot_widths_mm}


def _mixed_or_ngons(done: _Done, chosen: dict, best: dict, site: Site, r: Resolved, evaluate, cap: float,
                    free_shapes, finish: _Finisher, on_first_fit, helper=None) -> _Done:
    """``mixed``: the layout ``done`` made from the first fit's choice of family per void, or the same voids made
    as n-gons wherever an n-gon fits (the others as chosen) where that removes more once both are shaped, grown and
    filled. The choice is made at the first
    fit, where a slot or a bore may remove more than an n-gon, but an n-gon's corners can then move and grow where
    a stock slot or bore cannot: measured 2026-12-03, a wall leaf of the examples with regular squares under the
    precast rules removed 24.7 % of the panel as mixed against 30.2 % as n-gons alone. One more first fit and its
    shaping, only where the first fit chose a slot or a bore for some void that an n-gon could take."""
    alt = {i: ("polygon" if best[i].get("polygon") else f) for i, f in chosen.items()}
    if alt == chosen:
        return done
    drafts, kinds, _ = _chosen_drafts(alt, best)
    placed, change_recs, drop_recs = place(drafts, site, r)
    if not placed:
        return done
    start = _Stage(placed, change_recs, drop_recs, evaluate(placed), kinds=kinds, first_fit_mm2=site.area(placed))
    other = finish(start, evaluate, cap, free_shapes, helper=helper, tell=on_first_fit)
    return _removing_more(done, other, site, r, evaluate, on_first_fit,
                          "the voids made as n-gons wherever one fits remove more than with the family chosen per void "
                          "at the first fit")


def _standard_area(drafts, site: Site, r: Resolved) -> float:
    """What a layout keeps once given standard sizes (the first sizes the layout tries, up to each group's largest
    member; without the analysis that may step them back), as slots and bores lose more there than n-gons cut to
    their own corners, which keep theirs. Measured on the 13 mixed runs of the examples (2026-12-03): compared
    before the standard sizes, the central-load beam under precast-formed kept 23.47 % against its n-gons'
    23.66 %; compared after them with sizes up to the median only, the cantilever plate lost 0.57 %; as here,
    23.66 % and no loss."""
    sized, _ = standardise_sizes(list(drafts), r.max_types, r.snap_mm, _stock(r), r.min_void_mm, site.fits,
                                 upward=True)
    return site.area([d for d in sized if d is not None])


def _removing_more(done: _Done, other: _Done, site: Site, r: Resolved, evaluate, on_first_fit, what: str) -> _Done:
    """Of two finished layouts, ``other`` where it removes more once given standard sizes (``_standard_area``; a note
    beginning with ``what`` says so), else ``done`` (the caller's limiting rule told of it again); the analyses
    counted are all the stage made."""
    ours, theirs = _standard_area(done.placed, site, r), _standard_area(other.placed, site, r)
    if theirs > ours * (1.0 + 1e-9):
        if on_first_fit is not None and other.told is not None and not other.sent:
            on_first_fit(*other.told)  # the limiting rule's refits follow the layout taken
        note = (f"{what} ({theirs:.0f} against {ours:.0f} mm2 once shaped, grown and given standard sizes, both no "
                "softer than the freeform layout): taken.")
        return replace(other, notes=other.notes + [note], shaped=replace(other.shaped, analyses=evaluate.analyses)
                       if other.shaped is not None else None)
    if on_first_fit is not None and done.told is not None and other.sent:
        on_first_fit(*done.told)  # the limiting rule's refits follow the layout kept, told since of ``other``'s
    if done.shaped is not None:
        done = replace(done, shaped=replace(done.shaped, analyses=evaluate.analyses))
    return done


# --- the whole step ---------------------------------------------------------------------------------------


def _seeds(freeform, mirror: Mirror, r: Resolved, at: Callable[[tuple], str]):
    """The freeform voids to fit: as given, or, in a symmetric layout, folded onto the lower-left side.

    Returns the kept voids (``clean``), the mid-lines each stands on (by index), and the notes (points in them
    in words by ``at``, as ``clean`` takes it).
    """
    if not mirror.axes:
        kept, notes = clean(freeform, r.min_void_mm, at=at)
        return kept, {}, notes
    filled, notes = clean(freeform, 0.0, at=at)  # checks the input and fills islands; drops nothing with area
    seeds = fold([v.shape for v in filled], mirror)
    if r.family == "polygon" and r.sides % 2 and len(mirror.axes) == 2:
        split = []
        for shape, fixed in seeds:
            if len(fixed) == 2:
                c = shape.centroid
                notes.append(f"freeform void at {at((c.x, c.y))} on both mid-lines: a {r.sides}-gon cannot "
                             "be symmetric about both, so it is made as a pair, one each side of the horizontal "
                             "mid-line.")
                split.extend((part, ("x",)) for part in split_centre(shape, mirror, r.min_web_mm / 2.0))
            else:
                split.append((shape, fixed))
        seeds = split
    kept, more = clean([shape for shape, _ in seeds], r.min_void_mm, where="folded freeform voids", at=at)
    return kept, {i: fixed for i, (_, fixed) in enumerate(seeds)}, notes + more


def first_fit_area(panel: Panel, freeform, settings: VoidOptions, rules: Rules, energy, layouts) -> float:
    """The area the first fit removes under ``rules``, each freeform void fitted as the kind of layout
    ``layouts`` (``Rationalised.layouts``) names: the limiting rule's refit (``pipeline.limiting_rule``), a
    module-level function so that the helper process can run it."""
    chosen = {i: (f, kind) for i, f, kind in layouts} if layouts else None
    return rationalise(panel, freeform, settings, rules, energy=energy, first_fit_only=True,
                       layouts=chosen).first_fit_mm2


def _region_for(allowed, mirror: Mirror, fixed, r: Resolved, cache: dict):
    """The region open to a seed: the allowed region, on the lower-left side of each mid-line the seed does not
    stand on and half a web clear of it (so that the seed and its mirror image keep the web)."""
    free = tuple(a for a in mirror.axes if a not in fixed)
    if free not in cache:
        cache[free] = overlay(shapely.intersection, allowed, mirror.side(free, margin=r.min_web_mm / 2.0)) \
            if free else allowed
    return cache[free]


def rationalise(panel: Panel, freeform, settings: VoidOptions, rules: Rules, *, energy=None,
                allowed=None, shape_steps: int = 4, first_fit_only: bool = False, shared=None,
                layouts: dict[int, tuple[str, str]] | None = None, helper=None,
                on_first_fit: Callable[[tuple, list], None] | None = None) -> Rationalised:
    """Freeform voids (shapely polygons, local mm) -> voids a shop can make, keeping ``rules``.

    ``energy``: the solid panel's strain-energy density for the ``mixed`` family, as a function of points or
    a (grid, per-element values) pair. ``allowed``: the region open to voids; by default the one
    ``rules.check.impossible_rules`` returns (``allowed_region``). With ``settings.symmetric`` (or, by default,
    ``settings.optimize_symmetry``) the layout is kept mirror-symmetric about the mid-lines the problem is
    symmetric about (``symmetry``; a note says which and why not). Raises LacunaError when the rules leave no
    room for any void or a setting is out of range. ``first_fit_only``: stop after the first fit (voids fitted
    and placed, no analysis, no standard sizes, no proof) and return it, with ``first_fit_mm2`` set (what
    ``pipeline.limiting_rule`` compares). ``shared``: the job's solver for the shape optimisation's analyses
    (``fe.solve.SharedSolver``), refactored where it fits. ``layouts``: {freeform void: (family, layout kind)},
    from another run's ``Rationalised.layouts``: each of those voids is fitted as that kind of layout
    alone (the others get the whole search), so a refit under other rules is a fraction of the search.
    ``helper``: a ``helper.Helper`` whose process takes part of the fitting, and weighs the honeycomb over the
    region (analyses on a solver of its own) while this process shapes the first fit (the same layout as without it).
    ``on_first_fit(layouts, sizes)``: told the first fit's choice of layout per void (``Rationalised.layouts``) and the
    sizes of its voids (the diameter of the smallest circle round each, mm) before the
    shape optimisation, so that a caller can start work that needs only that (the limiting rule's refits,
    ``first_fit_area``) while the layout is shaped; told again, with the honeycomb's, where the honeycomb weighed in
    the helper process is taken after all (the layout is then shaped again from it).
    """
    r = resolve_settings(settings, rules, panel.thickness_mm)
    region = rule_check.impossible_rules(panel, rules)  # raises, in words, when no void fits at all
    if allowed is None:
        allowed = region
    sample, spacing = energy_sampler(energy) if energy is not None else (None, None)
    mirror, notes = layout_mirror(panel, settings, r.snap_mm)

    def at(xy) -> str:
        """A local point in words, as the drafter reads it: drawing coordinates and unit."""
        return where_text(xy, panel.frame)

    kept, comp_fixed, clean_notes = _seeds(freeform, mirror, r, at)
    dropped = [n for n in clean_notes if n.endswith("dropped.")]
    notes += [n for n in clean_notes if not n.endswith("dropped.")]
    tolerance = max(0.5 * r.snap_mm, 0.5)
    by_source = {v.index: v for v in kept}
    regions: dict = {}

    def where(i: int) -> str:
        if i not in by_source:
            return "a void of the honeycomb over the region open to voids"
        v = by_source[i]
        twins = " and its mirror image" if mirror.elements(comp_fixed.get(i, ())) else ""
        return f"freeform void #{i + 1} at {at(v.centroid)}{twins}"

    # Worth of a layout: the area it removes less what that area costs in stiffness, priced at the rate at which
    # the optimiser itself stopped removing material. The first-order rise of compliance from removing material
    # is twice the strain energy it held, so area A holding energy E is worth A - E / rho, rho being the energy
    # density at the optimiser's removal threshold (taken as the highest mean density of a freeform void): a
    # layout scores above zero where it removes material that works less than what the optimiser removed.
    # Without an energy field the area alone decides.
    rho = None
    if sample is not None and kept:
        rho = max(max(mean_over(v.shape, sample, spacing) for v in kept), 1e-300)
        # No shape inside g can be worth more than g's material that works less than the threshold (the bound).
        score, bound = Worth(sample, spacing, rho), Worth(sample, spacing, rho, ceiling=True)
    else:
        score = bound = _area
    opening_shapes = [o.shape for o in panel.openings]
    site = Site(allowed, r.min_web_mm, r.snap_mm, r.web_ratio, r.min_void_mm, openings=opening_shapes, mirror=mirror,
                feature_mm=r.least_feature_mm)
    if first_fit_only and (layouts or {}).get(-1, (None, None))[1] == LARGEST_FIRST:
        # The refit of a layout that was made largest first (below) is that fit alone.
        big = largest_first(kept, allowed, site, r, opening_shapes, score, bound)[0]
        return Rationalised(voids=(), changes=(), dropped=tuple(dropped), fit_errors=(), violations=(),
                            notes=tuple(notes), first_fit_mm2=site.area(big),
                            layouts=((-1, r.family, LARGEST_FIRST),))
    families = ("polygon", "slot", "bore") if r.family == "mixed" else (r.family,)
    options: dict[int, dict[str, list[list[Draft]]] | None] = {}
    jobs: dict[int, tuple] = {}
    shapes = [v.shape for v in kept]
    for k, v in enumerate(kept):
        fixed = comp_fixed.get(v.index, ())
        space = _region_for(allowed, mirror, fixed, r, regions)
        if fixed:
            options[v.index] = {f: [d] if (d := _fit_fixed(v, f, r, space, tolerance, fixed, mirror)) else []
                                for f in families}
            continue
        room = Room(v, space, shapes[:k] + shapes[k + 1:], r, ROOM_TOLERANCE_MM, openings=opening_shapes)
        family, kind = (layouts or {}).get(v.index, (None, None))
        options[v.index] = None  # its place in the order; filled below
        jobs[v.index] = (room, (family,) if kind is not None else families, r, score, bound, kind)
    # Each void's candidates alone, shared with the helper process where there is one (the same answers).
    options.update(share_out(helper, _void_candidates, jobs,
                             cost=lambda i: jobs[i][0].region.area if jobs[i][0].region is not None else 0.0))
    # The largest-first fit (below) needs nothing of the candidates: where the helper is ready it is made there next,
    # while this process places and analyses the first fit (kept there for the layout it finishes, ``largest_ahead``).
    grid = energy[0] if isinstance(energy, tuple) else None
    largest_wanted = not mirror.axes and r.family in ("polygon", "slot", "mixed") and r.web_ratio > 0.0
    big_ahead, big_token = None, ""
    if (largest_wanted and helper is not None and helper.ready and not first_fit_only and grid is not None
            and rho is not None):
        big_token = f"{os.getpid()}-{next(_TOKENS)}"
        try:
            big_ahead = helper.submit(largest_ahead, big_token, kept, allowed, site, r, opening_shapes, score, bound)
        except Exception:  # noqa: BLE001 - a broken helper: made here below
            big_ahead, big_token = None, ""
    best = {i: {f: _choose_layout(layouts, score) for f, layouts in fams.items()} for i, fams in options.items()}

    pick_score = score.at(score.rho / MIXED_PRICE) if isinstance(score, Worth) else score

    def pick(fits: dict[str, list[Draft]]) -> str | None:
        """The family of most worth at ``MIXED_PRICE`` (one family: that one)."""
        worth = {f: pick_score(_removed(ds)) for f, ds in fits.items() if ds}
        return max(worth, key=lambda f: (worth[f], -FAMILIES.index(f))) if worth else None

    chosen = {i: pick(fits) for i, fits in best.items()}
    if r.family == "mixed":
        counts: dict[str, int] = {}
        for f in chosen.values():
            if f is not None:
                counts[f] = counts.get(f, 0) + 1
        if len(counts) > r.max_types:
            keep = sorted(counts, key=lambda f: (-counts[f], FAMILIES.index(f)))[: r.max_types]
            notes.append(f"mixed voids limited to {', '.join(keep)}: max_types = {r.max_types} allows no more "
                         "families")
            for i, fits in best.items():
                if chosen[i] not in keep:
                    chosen[i] = pick({f: fits[f] for f in keep})
    drafts, kinds, missing = _chosen_drafts(chosen, best)
    dropped += [f"{where(i)}: no {r.family} void of the stock sizes fits in it; dropped." for i in missing]

    placed, change_recs, drop_recs = place(drafts, site, r)
    first_fit_mm2 = site.area(placed)
    # The largest-first fit (below) ranks layouts by the worth the first fit used, before the analyses reprice it.
    first_score, first_bound = score, bound
    if first_fit_only:
        return Rationalised(voids=(), changes=(), dropped=tuple(dropped), fit_errors=(), violations=(),
                            notes=tuple(notes), first_fit_mm2=first_fit_mm2,
                            layouts=tuple((i, f, kind) for i, (f, kind) in kinds.items()))

    def finisher(big: tuple | None = None) -> _Finisher:
        """The last stages with the run's values as they stand (the worth repriced once the layout is analysed)."""
        return _Finisher(r, site, allowed, opening_shapes, score, bound, rho,
                         max(grid.dx, grid.dy) if grid is not None else 0.0, shape_steps, kinds, first_fit_mm2, big,
                         {i: where(i) for i in by_source}, bool(mirror.axes))

    analysed = None  # (evaluator, cap) where the layout is analysed
    if grid is not None and kept and rho is not None:
        from .shape import Evaluator

        # A symmetric layout is analysed whole: each seed with its mirror images.
        evaluate = Evaluator(panel, grid, orbit=mirror.orbit if mirror.axes else None, shared=shared,
                             threads=analysis_threads(grid.n_elements))
        # The made layout must be no softer than the freeform one it stands for, and the price of stiffness is
        # where the optimiser stopped: the strain-energy density of the material left round its voids.
        free_shapes = [v.shape for v in clean(freeform, 0.0)[0]] if mirror.axes else [v.shape for v in kept]
        cap, e_free = evaluate.shapes(free_shapes)
        analysed = (evaluate, cap)
        rho = threshold_density(grid, e_free, free_shapes) or rho
        score, bound = score.at(rho), bound.at(rho)  # the later stages' price
        c_fit, e_fit = evaluate(placed)
        area_fit = sum(d.shape().area for d in placed)
        fitted = _Stage(placed, change_recs, drop_recs, (c_fit, e_fit))
        largest_made: list = []

        def largest() -> tuple | None:
            """The largest-first fit (``largest_first``, ranked by the first fit's worth), made once and the same for
            every layout finished; None where it is not weighed."""
            if not largest_wanted:
                return None
            if not largest_made:
                largest_made.append(result_or(big_ahead, largest_first, kept, allowed, site, r, opening_shapes,
                                              first_score, first_bound))
            return largest_made[0]

        # The honeycomb over the whole region is not laid symmetric: a symmetric layout keeps its own voids.
        # ``mixed``: the families the fitted voids chose (all three when none was), one family per honeycomb.
        lattice_families = (sorted({d.family for d in placed}) or list(families)[: r.max_types]) \
            if r.family == "mixed" else [r.family]
        honey_args = (allowed, lattice_families, r, score, bound, opening_shapes, site, cap, c_fit, area_fit)
        ahead = None
        if not mirror.axes and helper is not None and helper.ready and analysis_fits_elsewhere(grid):
            # The helper process weighs the large honeycomb and finishes the layout the stage starts from (the
            # first fit's, or the honeycomb's where it is taken) while this one weighs and finishes the finer
            # honeycomb: the same layouts, notes and analyses counted as in sequence.
            try:
                # the largest-first fit is the one made there (by ``big_token``) where it was sent there
                sent = finisher(None if big_token else largest())
                ahead = helper.submit(finished_elsewhere, panel, grid.nx, grid.ny, grid.dx, grid.dy,
                                      evaluate.shared.backend, fitted, sent, big_token, cap, free_shapes, *honey_args)
            except Exception:  # noqa: BLE001 - a broken helper: made here below
                ahead = None
        if ahead is None:
            finish = finisher(largest())
            honey, finer = honeycomb_within_cap(*honey_args[:-3], evaluate, *honey_args[-3:], helper=helper) \
                if not mirror.axes else ((None, None), None)
            start = _with_honeycomb(fitted, honey, cap, c_fit, area_fit) or fitted
            done = finish(start, evaluate, cap, free_shapes, helper=helper, tell=on_first_fit)
            finer_start = _with_honeycomb(fitted, finer, cap, c_fit, area_fit) if finer is not None else None
            other = finish(finer_start, evaluate, cap, free_shapes, helper=helper, tell=on_first_fit) \
                if finer_start is not None else None
        else:
            # The limiting rule's refits (``on_first_fit``) follow the finer honeycomb's layout as it is shaped
            # (where there is one it is mostly the one taken: 8 of the 11 example runs that finished one), else the
            # helper's as soon as it is in.
            finer = honeycomb_at(LATTICE_FINE, *honey_args[:-3], evaluate, *honey_args[-3:], helper=helper)
            finer_start = _with_honeycomb(fitted, finer, cap, c_fit, area_fit)
            finish = finisher(largest())
            told = threading.Event()
            if finer_start is None and on_first_fit is not None:
                def tell_ahead(future) -> None:
                    try:
                        if not future.cancelled() and future.exception() is None:
                            on_first_fit(*future.result()[1].told)
                    finally:
                        told.set()

                ahead.add_done_callback(tell_ahead)
            else:
                told.set()
            other = finish(finer_start, evaluate, cap, free_shapes, helper=helper, tell=on_first_fit) \
                if finer_start is not None else None
            _, done, elsewhere = result_or(ahead, _finished, evaluate, fitted, finish, cap, free_shapes, honey_args)
            told.wait()
            if not ahead.cancelled() and ahead.exception() is None:  # made there: its analyses counted here
                evaluate.analyses += elsewhere
            elif on_first_fit is not None and other is None:  # made here instead
                on_first_fit(*done.told)
            if done.shaped is not None:  # counted as in sequence: this process's analyses, then the finishing's
                done = replace(done, shaped=replace(done.shaped, analyses=evaluate.analyses - elsewhere
                                                    + done.shaped.analyses))
        if other is not None:
            done = _removing_more(done, other, site, r, evaluate, on_first_fit,
                                  "the finer honeycomb over the region open to voids removes more than the layout "
                                  "otherwise made")
        if r.family == "mixed":
            done = _mixed_or_ngons(done, chosen, best, site, r, evaluate, cap, free_shapes, finish, on_first_fit,
                                   helper)
    else:
        done = finisher()(_Stage(placed, change_recs, drop_recs, None), None, None, [], tell=on_first_fit)
    placed, change_recs, shaped = done.placed, done.change_recs, done.shaped
    notes += done.notes
    dropped += done.dropped
    kinds, first_fit_mm2 = done.kinds, done.first_fit_mm2

    before = list(placed)
    shaped_mm2 = site.area(before)

    def standard(most_material: bool, upward: bool = False, held=()):
        return standardise_sizes(before, r.max_types, r.snap_mm, _stock(r), r.min_void_mm, site.fits,
                                 most_material=most_material, upward=upward, held=held)

    def grown(sized) -> dict:
        """Per size group, the area its members gained (those that grew)."""
        return {key: sum(max(sized[i].shape().area - before[i].shape().area, 0.0) for i in members
                         if sized[i] is not None and sized[i].size > before[i].size + 1e-9)
                for key, members in groups.items()}

    def softer(drafts) -> bool:
        """Whether the panel with ``drafts`` cut is softer than the freeform layout (False where not analysed)."""
        return analysed is not None and analysed[0]([d for d in drafts if d is not None])[0] > analysed[1]

    # A group's size keeping most material, tried up to its largest member, then up to its median, may grow its
    # small members, and so may the largest size they all keep; where that makes the panel softer than the
    # freeform layout, the next of these is taken, and last the groups that grew most are held to their smallest
    # member's size one after the other (a size that grows none: all held, the layout is no softer than the one
    # shaped). Measured 2026-12-03: a 6 m spandrel of our own under mixed with regular pentagons took the sizes all
    # keep unchecked and was 0.12 % softer than its freeform layout.
    groups = size_groups(before, r.max_types)
    for most_material, upward in ((True, True), (True, False), (False, False)):
        placed, size_recs = standard(most_material, upward)
        if not any(grown(placed).values()) or not softer(placed):
            break
    else:  # the sizes all keep, too soft: hold the group that grew most, then the next, until none is
        held: tuple = ()
        while True:
            gains = grown(placed)
            held += (max(gains, key=lambda g: (gains[g], g)),)
            placed, size_recs = standard(False, False, held)
            if not any(grown(placed).values()) or not softer(placed):
                break
    unsnapped = list(placed)

    def snapped(inward_only: bool = False):
        return snap_centres(unsnapped, r.snap_mm,
                            lambda t, i, s: site.keeps(t, i, s) if shape_ok(t, r.least_feature_mm) else None,
                            origin=mirror.origin, inward_only=inward_only)

    # Snapping moves centres and corners by up to a grid step, and a corner snapped to its nearest grid point may
    # take the void a little further: where the snapped layout is softer than the freeform one, corners snap towards
    # their centres only, and where that is still softer the layout stays as shaped, unsnapped. Measured 2026-12-03:
    # a 6 m timber beam of our own, its three n-gons snapped, 296.475 against the freeform layout's 296.442 N mm.
    placed, snap_recs = snapped()
    if placed != unsnapped and softer(placed):
        placed, snap_recs = snapped(inward_only=True)
        if softer(placed):
            placed = unsnapped
            snap_recs = [(i, "not snapped to the grid", f"the {r.snap_mm:g} mm grid would make the panel softer "
                          "than the freeform layout") for i, d in enumerate(unsnapped) if d is not None]
    # Centres that nearly share a column or a row are lined up (within two grid steps), kept where the panel stays
    # no softer than the freeform layout.
    if r.snap_mm > 0.0:
        lined, moved = align_centres(placed, ALIGN_STEPS * r.snap_mm, site.keeps, r.snap_mm, mirror.origin)
        if moved and not softer(lined):
            placed = lined
            notes.append(f"{moved} void centre(s) lined up with their neighbours' in columns and rows (within "
                         f"{ALIGN_STEPS * r.snap_mm:g} mm), the rules kept.")
    # Slots of one width whose directions nearly agree turned to one, kept where the panel stays no softer.
    turned_to, turned = align_turns(placed, ALIGN_TURN_DEG, site.keeps)
    if turned and not softer(turned_to):
        placed = turned_to
        notes.append(f"{turned} slot(s) turned to the direction of their neighbours of the same width (within "
                     f"{ALIGN_TURN_DEG:g} degrees), the rules kept.")
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
    keys = [(d.source, d.part) for d in placed]
    if len(set(keys)) != len(keys):  # a void's id, its change records and its fit error all follow this key
        raise AssertionError(f"two voids to make share a (source, part): {sorted(keys)}")
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

    # The voids of one piece share its error, measured once (a honeycomb's dozens of voids are one piece).
    pieces: dict = {}
    for (_, key), v in zip(entries, voids):
        pieces.setdefault(piece(key), []).append(v.shape)
    # the kept freeform voids together: the target of voids fitted to no one of them (a honeycomb's)
    whole = shapely.union_all([k.shape for k in kept]) if any(s not in by_source for s, _ in pieces) else None

    def error_of(source, g) -> float:
        target = by_source[source].shape if source in by_source else whole
        if target.is_empty:
            return 1.0
        return round(fit_error(shapely.union_all(pieces[(source, g)]), mirror.geometry(target, g)), 6)

    error_by_piece = {key: error_of(*key) for key in pieces}
    errors = [(v.id, error_by_piece[piece(key)]) for (_, key), v in zip(entries, voids)]
    violations = tuple(rule_check.check_layout(panel, list(voids), rules))
    return Rationalised(voids=voids, changes=changes, dropped=tuple(dropped), fit_errors=tuple(errors),
                        violations=violations, notes=tuple(notes), shape=shaped, first_fit_mm2=first_fit_mm2,
                        layouts=tuple((i, f, kind) for i, (f, kind) in kinds.items()), shaped_mm2=shaped_mm2)
