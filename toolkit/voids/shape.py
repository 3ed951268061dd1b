"""Shape optimisation of the made layout: move, turn and grow the voids a shop can make, the rules held at every step.

The method belongs to the family of explicit void parameterisations analysed on a fixed grid by exact area
fractions (moving morphable voids, geometry projection; docs/voids.md names the papers): each made void is a few
numbers (an irregular n-gon's corners; a regular n-gon's centre, size and turn; a slot's centre, direction and
length; a bore's centre), the grid's elements keep the solid fraction the voids leave them, and compliance's
self-adjoint gradient

    dC/dp = sum_e (d area(void n box_e) / dp) / A_e * sum_c w_c u_ec^T ke u_ec     (``sensitivity``)

steers the numbers. The outline's vertices are a smooth function of the numbers, so its Jacobian is taken by
central differences of the geometry alone (no analysis), and dC/dp = J^T dC/dv.

Two stages, each a few steps of one analysis:

1. *Same material, stiffer.* Each void moves along minus its compliance gradient with the part along its area
   gradient taken out (first order: its area stays), so the panel loses the same material in better places.
2. *Grow.* Each void moves along grad A - grad C / (2 rho): material is worth removing while the stiffness it costs
   is below what the optimiser paid at its removal threshold (``rho``, a strain-energy density; removing area dA
   where the density is w raises the compliance by 2 w dA). A step is kept when it removes more and the panel
   stays no softer than ``cap_Nmm`` (the freeform layout's compliance), or where it removes the same material
   (``SAME_MATERIAL``: bores only move) and the panel is stiffer; growth stops at the optimiser's removed area.

Every trial step of every void is checked against the rules (the caller's ``fits``: region open to voids, webs,
least size) and against the shape's own limits (corner count, least side, corner angles); a void whose step
breaks one halves it, then keeps its place. A step the analysis shows to be worse is undone and the step length
halved. A stage that cannot improve keeps what it was given, and says so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Callable

import numpy as np
import shapely

from ..fe.boundary import fixed_dofs
from ..fe.element import q4_stiffness
from ..fe.fractions import covered_fractions, solid_fractions
from ..fe.loads import element_weights, load_matrix, weight_lifted, weight_work
from ..fe.solve import LinearSolver, SharedSolver
from ..model import Panel
from .cover import MIN_INTERIOR_DEG, MIN_TURN_DEG, corner_measures
from .measure import following, preceding
from .outline import Draft
from .sensitivity import compliance_gradient, element_energy

# Elements a void empties keep this share of their stiffness, so the system keeps one pattern and one set of
# free dofs from step to step (the final figures come from the full analysis, which leaves them out).
EMPTY_SHARE = 1e-6
# Stage 2's first reach, in steps (element sizes) of travel of a void's furthest vertex.
GROW_REACH = 6.0
# Stage 2 moves each void as far as the rules let it, up to the reach: the whole reach tried, then halved this
# many times (bisection); its smallest step, the reach / GROW_HALVINGS_SPAN, is tried first.
GROW_HALVINGS = 4
GROW_HALVINGS_SPAN = 2.0 ** GROW_HALVINGS
# Stage 1 moves the voids at the same material: a step may change the removed area by this share at most.
SAME_AREA = 2e-3
# Stage 1 stops after a kept step that makes the panel stiffer by less than this share.
STAGE1_GAIN = 1e-3
# Stage 2 keeps a step only if the share of material it adds is at least this much of the share of stiffness it
# costs (relative area gain >= GROW_RATE x relative compliance rise), however much room the cap leaves: a house
# choice, no source. Measured 2026-12-02 without it: the precast spandrel's slots grew 0.05 % in area for 11 % in
# compliance, the steel plate's slots 0.007 % for 1.2 %; the steps it keeps elsewhere gained 2 to 24 times their
# share of compliance.
GROW_RATE = 0.1
# Two layouts whose removed areas differ by at most this share remove the same material: a step that only moves
# voids (a bore's area is fixed by its diameter) changes the area shapely measures by rounding alone, and a choice
# made on the sign of that rounding goes either way at random. Measured 2026-12-03: with stage 2's bores kept or
# dropped on it, a beam of the examples with bores under steel-cut ended at 22.5 or 19.3 % of the panel removed
# after a change of 1e-9 in the gradients' last digits.
SAME_MATERIAL = 1e-9
# Step of the geometry-only central differences for the outline's Jacobian (mm, radians).
_H = 1e-4


class Evaluator:
    """Compliance and element energies of the panel with a layout of drafts cut out, on one grid."""

    def __init__(self, panel: Panel, grid, orbit: Callable | None = None, shared: SharedSolver | None = None,
                 threads: int = 1):
        """``shared``: the job's solver (``fe.solve.SharedSolver``), refactored for the first analysis where it
        fits (the optimiser's, on the same grid and supports, made for as many MKL ``threads``)."""
        self.panel, self.grid = panel, grid
        self.threads = threads
        self.shared = shared if shared is not None else SharedSolver()
        # A symmetric layout is given by its seeds: ``orbit(draft)`` lists a seed and its mirror images.
        self.orbit = orbit if orbit is not None else (lambda d: [d])
        solid = panel.solid
        base = solid_fractions(grid, solid)
        self.base = base
        m = panel.material
        self.ke = q4_stiffness(grid.dx, grid.dy, m.E_MPa, m.nu, panel.thickness_mm)
        self.fixed = fixed_dofs(grid, panel.supports, solid=solid, active_nodes=grid.active_nodes(base > 0),
                                frame=panel.frame)
        self.F = load_matrix(grid, panel, fractions=base, solid=solid)
        # With self-weight the loads follow the layout: a cut element weighs its fraction (``shapes``).
        self.unit_weight = element_weights(grid, panel, np.ones(grid.n_elements))
        self.weights = np.array([panel.case_weight(c) for c in panel.cases], dtype=float)
        self.assembler = self.shared.assembler(grid)
        self.solid = solid
        self.solver: LinearSolver | None = None
        self.analyses = 0

    def __call__(self, drafts) -> tuple[float, np.ndarray]:
        return self.shapes([m.shape() for d in drafts for m in self.orbit(d)])

    def shapes(self, shapes) -> tuple[float, np.ndarray]:
        """Compliance and element energies with ``shapes`` (shapely polygons) cut out."""
        f = self.fractions(shapes)
        K = self.assembler.matrix(self.ke, np.maximum(f, EMPTY_SHARE))
        if self.solver is None:
            self.solver = self.shared.factor(K, ~self.fixed, self.grid, threads=self.threads)
        else:
            self.solver.refactor(K)
        F = self.F if self.unit_weight is None else self.loads(f)
        U = self.solver.solve(F)
        self.analyses += 1
        c = float(self.weights @ np.einsum("ic,ic->c", F, U))
        energy = element_energy(self.grid, U, self.ke, self.weights)
        if self.unit_weight is not None:
            # dC/df_e = -(u^T k0 u) + 2 u^T g_e, g_e the element's weight a quarter down at each node: the energies
            # the gradients take (sensitivity.compliance_gradient) are u^T k0 u + (W_e / 2) sum of its nodal u_y
            energy = energy + 2.0 * weight_work(self.unit_weight, U[self.grid.edof], self.weights)
        return c, energy

    def loads(self, f: np.ndarray) -> np.ndarray:
        """The loads with the elements at fractions ``f``: the drawn loads, less the weight the voids took away (a
        void element keeps no weight on its trace of stiffness: the optimiser's parasitic effect, beso.py)."""
        return weight_lifted(self.F, self.grid, self.unit_weight * (self.base - f))

    def fractions(self, shapes) -> np.ndarray:
        """Solid fraction of each element with ``shapes`` cut out. The voids keep clear of each other and of the
        openings (the rules see to it), so their area in each element, taken at once as one multipolygon (only
        the elements their outlines cross are intersected), comes off the drawn panel's fractions; a fraction
        never goes below zero."""
        parts = [p for s in shapes for p in shapely.get_parts(s) if not p.is_empty]
        if not parts:
            return self.base.copy()
        f = self.base.copy()
        cells, cut = covered_fractions(self.grid, shapely.multipolygons(parts))
        f[cells] -= cut
        return np.clip(f, 0.0, self.base)


# --- parameters of a draft ----------------------------------------------------------------------------------


def params(d: Draft) -> np.ndarray:
    """The numbers that move: see the module text."""
    if d.family == "polygon":
        if d.regular:
            first = np.asarray(d.corners[0])
            return np.array([*d.centre, math.hypot(*first), math.atan2(first[1], first[0])])
        return d.sharp.ravel().copy()
    if d.family == "slot":
        return np.array([*d.centre, math.radians(d.angle_deg), d.length])
    return np.array(d.centre, dtype=float)


def with_params(d: Draft, p: np.ndarray) -> Draft:
    """``d`` with the numbers ``p``."""
    p = np.asarray(p, dtype=float)
    if d.family == "polygon":
        n = len(d.corners)
        if d.regular:
            t = p[3] + 2.0 * np.pi * np.arange(n) / n
            rel = p[2] * np.column_stack([np.cos(t), np.sin(t)])
            return replace(d, centre=(float(p[0]), float(p[1])), size=2.0 * float(p[2]),
                           corners=tuple(map(tuple, rel.tolist())))
        pts = p.reshape(n, 2)
        area2 = pts[:, 0] * following(pts[:, 1]) - following(pts[:, 0]) * pts[:, 1]
        a = area2.sum() / 2.0
        if abs(a) < 1e-12:
            return d
        cx = float(np.sum((pts[:, 0] + following(pts[:, 0])) * area2) / (6.0 * a))
        cy = float(np.sum((pts[:, 1] + following(pts[:, 1])) * area2) / (6.0 * a))
        rel = pts - (cx, cy)
        return replace(d, centre=(cx, cy), size=2.0 * float(np.max(np.linalg.norm(rel, axis=1))),
                       corners=tuple(map(tuple, rel.tolist())))
    if d.family == "slot":
        return replace(d, centre=(float(p[0]), float(p[1])), angle_deg=math.degrees(p[2]) % 180.0,
                       length=float(max(p[3], d.size)))
    return replace(d, centre=(float(p[0]), float(p[1])))


def vertices(d: Draft) -> np.ndarray:
    """(m, 2) distinct vertices of the draft's flattened outline."""
    return np.asarray(d.shape().exterior.coords)[:-1, :2]


def jacobian(d: Draft) -> tuple[np.ndarray, np.ndarray] | None:
    """The outline's vertices (m, 2) and their Jacobian (2m, len(params)).

    An n-gon is taken by its sharp corners (the easing moves with them and changes the gradient only where the
    corners are): the corners themselves for an irregular one, closed forms for a regular one. Slots and bores by
    closed forms too: their flattened outline moves with the centre, turns about it and, as a slot grows longer,
    each end's points move half the change along the axis (the arcs keep the width's radius, so they are flattened
    to the same points). A slot within a step of a round hole, where the outline changes its points, by central
    differences (None where a step changes the number of vertices)."""
    if d.family == "polygon":
        v = d.sharp
        if not d.regular:
            return v, np.eye(v.size)
        rel = v - np.asarray(d.centre)
        r = float(np.mean(np.linalg.norm(rel, axis=1)))
        J = np.zeros((v.size, 4))
        J[0::2, 0] = 1.0
        J[1::2, 1] = 1.0
        J[:, 2] = (rel / r).ravel()
        J[:, 3] = np.column_stack([-rel[:, 1], rel[:, 0]]).ravel()
        return v, J
    p = params(d)
    v0 = vertices(with_params(d, p))  # rebuilt like the steps below (a kept shape may run from another vertex)
    if d.family == "bore" or d.length - _H > d.size:
        rel = v0 - np.asarray(d.centre, dtype=float)
        J = np.zeros((v0.size, p.size))
        J[0::2, 0] = 1.0
        J[1::2, 1] = 1.0
        if d.family == "slot":
            J[:, 2] = np.column_stack([-rel[:, 1], rel[:, 0]]).ravel()
            a = math.radians(d.angle_deg)
            u = np.array([math.cos(a), math.sin(a)])
            J[:, 3] = (0.5 * np.sign(rel @ u)[:, None] * u).ravel()
        return v0, J
    cols = []
    for j in range(p.size):
        e = np.zeros(p.size)
        e[j] = _H
        a, b = vertices(with_params(d, p + e)), vertices(with_params(d, p - e))
        if a.shape != v0.shape or b.shape != v0.shape:
            return None
        cols.append(((a - b) / (2.0 * _H)).ravel())
    return v0, np.column_stack(cols)


def area_gradient(v: np.ndarray) -> np.ndarray:
    """d area / d vertex (m, 2) of a counter-clockwise polygon (the shoelace formula's derivative)."""
    nxt, prev = following(v), preceding(v)
    return 0.5 * np.column_stack([nxt[:, 1] - prev[:, 1], prev[:, 0] - nxt[:, 0]])


def _orbit_jacobians(d: Draft, orbit: Callable) -> list[tuple[np.ndarray, np.ndarray]] | None:
    """For each member of the seed ``d``'s orbit (the seed and its mirror images): its outline points and their
    Jacobian with respect to the seed's parameters, by central differences of the geometry (exact for the
    mirrored corners of an n-gon, which are linear in the seed's). None where a step changes a point count."""
    p = params(d)

    def points(x):
        return [m.sharp if m.family == "polygon" else vertices(m) for m in orbit(with_params(d, x))]

    base = points(p)
    cols: list[list[np.ndarray]] = [[] for _ in base]
    for j in range(p.size):
        e = np.zeros(p.size)
        e[j] = _H
        a, b = points(p + e), points(p - e)
        for k, (pa, pb, p0) in enumerate(zip(a, b, base)):
            if pa.shape != p0.shape or pb.shape != p0.shape:
                return None
            cols[k].append(((pa - pb) / (2.0 * _H)).ravel())
    return [(v, np.column_stack(c)) for v, c in zip(base, cols)]


def gradients(grid, energy: np.ndarray, drafts, orbit: Callable | None = None
              ) -> list[tuple[np.ndarray, np.ndarray, np.ndarray] | None]:
    """Per draft: (dC/dp, dA/dp, J) or None (see ``jacobian``). With ``orbit`` (a symmetric layout given by its
    seeds), each seed's gradients sum those of its mirror images through the chain rule, ``J`` is the seed's own,
    and a seed standing on a mid-line (``fixed``) gets None: it keeps its place and shape."""
    if orbit is None:
        members = [[jacobian(d)] for d in drafts]
    else:
        members = []
        for d in drafts:
            if d.fixed:
                members.append([None])
            elif len(orbit(d)) == 1:
                members.append([jacobian(d)])
            else:
                members.append(_orbit_jacobians(d, orbit) or [None])
    flat = [j for group in members for j in group if j is not None]
    gv = compliance_gradient(grid, energy, [v for v, _ in flat]) if flat else []
    out, k = [], 0
    for d, group in zip(drafts, members):
        if any(j is None for j in group):
            out.append(None)
            continue
        gc = ga = 0.0
        for v, J in group:
            gc = gc + J.T @ gv[k].ravel()
            ga = ga + J.T @ area_gradient(v).ravel()
            k += 1
        if d.family == "bore":
            # A bore's numbers are its centre, which moves its area nowhere: its area gradient is zero, not the
            # rounding left of a sum of opposite terms (stage 1 divides by its square: the noise chose the step).
            ga = np.zeros_like(gc)
        out.append((gc, ga, group[0][1]))
    return out


def shape_ok(d: Draft, feature: float) -> bool:
    """Whether the draft is still a shape the shop can make: of a size above zero; a convex n-gon with sides of
    at least ``feature`` and corners neither flat nor sharp; a slot at least as long as it is wide. Kept per draft
    and feature (a trial step is asked here and again by the rules' ``fits``)."""
    held = d.__dict__.get("_shape_ok")
    if held is not None and held[0] == feature:
        return held[1]
    got = _shape_ok(d, feature)
    object.__setattr__(d, "_shape_ok", (feature, got))
    return got


def _shape_ok(d: Draft, feature: float) -> bool:
    if not d.size > 0.0:
        # a step through zero: a regular n-gon of negative circumradius draws the same corners turned half a turn
        return False
    if d.family == "polygon":
        pts = d.sharp
        x, y = pts[:, 0], pts[:, 1]
        if np.sum(x * following(y) - following(x) * y) <= 0:
            return False
        interior, turn, side, _ = corner_measures(pts)
        a, b = pts - preceding(pts), following(pts) - pts
        convex = np.all(a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0] > 0)
        return bool(convex and side.min() >= feature - 1e-9 and interior.min() >= MIN_INTERIOR_DEG - 1e-9
                    and turn.min() >= MIN_TURN_DEG - 1e-9)
    if d.family == "slot":
        return d.length >= d.size - 1e-9
    return True


# --- the stages ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ShapeResult:
    """What the shape optimisation did: the drafts, compliance and removed area at each stage (first fit, after
    stage 1, after stage 2), the analyses it ran and its notes."""

    drafts: tuple
    compliance_Nmm: tuple[float, float, float]
    area_mm2: tuple[float, float, float]
    analyses: int
    notes: tuple[str, ...]


def _area_of(drafts, orbit: Callable | None = None) -> float:
    if orbit is None:
        return float(sum(d.shape().area for d in drafts))
    return float(sum(m.shape().area for d in drafts for m in orbit(d)))


def _direction(stage: int, g, rho: float) -> np.ndarray | None:
    """A void's step direction in its parameters, scaled so that its furthest outline vertex travels 1 mm per unit
    (None when it does not move): stage 1, minus the compliance gradient with the area gradient's part taken out;
    stage 2, grad A - grad C / (2 rho).

    Steepest in the outline's own measure: the parameters are of unlike kinds (a slot's turn in radians beside
    its length in mm, a regular n-gon's turn beside its radius), so a step in the plain gradient's direction is
    mostly whichever number has the longest lever, a long slot's turn. The gradient is taken in the metric
    M = J^T J of the outline's vertex moves (a Gauss-Newton step): the direction of most gain per squared
    millimetre of vertex travel."""
    gc, ga, J = g
    M = J.T @ J
    M = M + (1e-9 * float(np.trace(M)) / len(M) + 1e-300) * np.eye(len(M))
    try:
        chol = np.linalg.cholesky(M)
    except np.linalg.LinAlgError:
        return None

    def natural(v):
        return np.linalg.solve(chol.T, np.linalg.solve(chol, v))

    nc, na = natural(gc), natural(ga)
    if stage == 1:
        aa = float(ga @ na)
        d = -(nc - (ga @ nc) / aa * na) if aa > 0 else -nc
    else:
        d = na - nc / (2.0 * rho)
    travel = np.max(np.linalg.norm((J @ d).reshape(-1, 2), axis=1)) if d.any() else 0.0
    return d / travel if travel > 0 else None


def _free_corners(d: Draft, p: np.ndarray, move: np.ndarray, i: int, state, fits, feature: float):
    """The step ``move`` of an irregular n-gon's corners with each corner that breaks a rule on its own held back:
    every corner is tried alone; the corners whose lone move keeps the rules move together."""
    n = len(d.corners)
    free = np.zeros(n, dtype=bool)
    for k in range(n):
        lone = np.zeros_like(move)
        lone[2 * k:2 * k + 2] = move[2 * k:2 * k + 2]
        if not lone.any():
            continue
        t = with_params(d, p + lone)
        free[k] = shape_ok(t, feature) and fits(t, i, state) is not None
    if not free.any():
        return None
    return with_params(d, p + move * np.repeat(free, 2))


def _grow_step(state, grads, rho: float, fits, feature: float, reach_mm: float):
    """Every void moved along grad A - grad C / (2 rho) as far as the rules let it, up to ``reach_mm`` of travel of
    its furthest vertex (bisection), one void after the other; returns the new drafts and each moved void's
    (parameters before, move)."""
    trial_state = list(state)
    moves = {}
    for i, (d, g) in enumerate(zip(state, grads)):
        unit = _direction(2, g, rho) if g is not None else None
        if unit is None:
            continue
        p = params(d)

        def ok(t):
            return t is not None and shape_ok(t, feature) and fits(t, i, trial_state) is not None

        best = None
        lo, hi = 0.0, reach_mm
        top = with_params(d, p + hi * unit)
        if ok(top):
            best = (hi, top)
        elif ok(least := with_params(d, p + reach_mm / GROW_HALVINGS_SPAN * unit)):
            # the bisection's smallest step tried first: where it breaks a rule the void stays (most voids, once
            # the webs hold them: 143 of 148 of the bench plate's, each then one test instead of four; in the six
            # bench scenarios no larger step kept the rules where the smallest did not)
            for _ in range(GROW_HALVINGS):
                mid = 0.5 * (lo + hi)
                if lo == 0.0 and mid == reach_mm / GROW_HALVINGS_SPAN:  # the step just tried
                    lo, best = mid, (mid, least)
                    continue
                t = with_params(d, p + mid * unit)
                if ok(t):
                    lo, best = mid, (mid, t)
                else:
                    hi = mid
        if best is None and d.family == "polygon" and not d.regular:
            t = _free_corners(d, p, unit * reach_mm / 8.0, i, trial_state, fits, feature)
            if ok(t):
                best = (None, t)
        if best is not None:
            trial_state[i] = best[1]
            moves[i] = (p, params(best[1]) - p)
    return trial_state, moves


def _backed_off(state, trial_state, moves, share: float, fits, feature: float):
    """The moves of ``_grow_step`` cut to ``share`` of their length (a void whose shorter move breaks a rule stays
    where it was)."""
    out = list(trial_state)
    for i, (p, move) in moves.items():
        t = with_params(state[i], p + share * move)
        out[i] = t if shape_ok(t, feature) and fits(t, i, out) is not None else state[i]
    return out


def _worth_growing(analysed: tuple, c_new: float, a_new: float) -> bool:
    """Whether a layout removing ``a_new`` at compliance ``c_new`` is a growth worth keeping over the last analysed
    one (its state, energies, compliance, area): more material, its share at least ``GROW_RATE`` times the share of
    stiffness it costs."""
    _, _, c_old, a_old = analysed
    if abs(a_new - a_old) <= SAME_MATERIAL * a_old:
        return c_new < c_old  # the same material placed where the panel is stiffer
    return a_new > a_old and (a_new - a_old) / a_old >= GROW_RATE * max(c_new - c_old, 0.0) / c_old


def optimise(drafts, evaluate: Evaluator, fits: Callable, *, rho: float, target_area_mm2: float,
             feature_mm: float, step_mm: float, steps: int = 6, cap_Nmm: float = math.inf,
             first: tuple[float, np.ndarray] | None = None) -> ShapeResult:
    """Stage 1 then stage 2 (module text) on ``drafts``. ``fits(trial, i, state)`` returns the trial when draft i
    may become it beside the others (the rules), else None; ``step_mm``: the first step, as the largest move of
    any outline vertex; ``cap_Nmm``: growth stops short of this compliance (the freeform layout's); ``first``: the
    analysis of ``drafts`` (compliance, element energies) when the caller has it already. A symmetric layout is
    given by its seeds (the evaluator's ``orbit``): areas count the mirror images, gradients sum over them."""
    orbit = getattr(evaluate, "orbit", None)

    def _area(ds) -> float:
        return _area_of(ds, orbit)

    state = list(drafts)
    c0, energy = first if first is not None else evaluate(state)
    a0 = _area(state)
    record = [(c0, a0)]
    notes = []
    # Stage 1: same material, stiffer: small steps, each kept only when the analysis shows a stiffer panel; it
    # stops when a kept step gains less than STAGE1_GAIN.
    c_now, a_now = record[-1]
    step = step_mm
    improved = False
    for _ in range(steps):
        grads = gradients(evaluate.grid, energy, state, orbit)
        trial_state = list(state)
        moved = False
        for i, (d, g) in enumerate(zip(state, grads)):
            unit = _direction(1, g, rho) if g is not None else None
            if unit is None:
                continue
            p = params(d)
            for halving in range(4):
                trial = with_params(d, p + unit * step * 0.5 ** halving)
                if shape_ok(trial, feature_mm) and fits(trial, i, trial_state) is not None:
                    trial_state[i] = trial
                    moved = True
                    break
        if not moved:
            step *= 0.5
            continue
        c_new, e_new = evaluate(trial_state)
        a_new = _area(trial_state)
        # The material stays (to first order; a step losing more than SAME_AREA of it is no like-for-like gain).
        if c_new < c_now and a_new >= a0 * (1.0 - SAME_AREA):
            gain = (c_now - c_new) / c_now
            state, energy, c_now, a_now = trial_state, e_new, c_new, a_new
            improved = True
            if gain < STAGE1_GAIN:
                break
        else:
            step *= 0.5
    record.append((c_now, a_now))
    if not improved:
        notes.append("the shape optimisation found no stiffer placing of the same material than the first fit; "
                     "it kept the first fit.")

    # Stage 2: grow. Each void goes as far along its ascent direction as the rules let it (bisection on the
    # rules alone, no analysis). While the first-order rise of compliance keeps the panel well inside the cap
    # (within half the room left), the step is taken on that prediction and the next gradient comes from the
    # last analysis; otherwise, and at the end, one analysis, and the moves are halved while the panel is softer
    # than the cap. A predicted run the closing analysis finds too soft goes back to the last analysed layout.
    improved = False
    reach_mm = GROW_REACH * step_mm
    price = rho
    analysed = (state, energy, c_now, a_now)
    pending = False
    for _ in range(steps):
        if a_now >= target_area_mm2:
            break
        grads = gradients(evaluate.grid, energy, state, orbit)
        trial_state, moves = _grow_step(state, grads, price, fits, feature_mm, reach_mm)
        if not moves or _area(trial_state) < a_now * (1.0 - SAME_MATERIAL):
            # Growing here costs more stiffness than the optimiser's own rate; while the panel is stiffer than the
            # cap there is stiffness to spend: price it lower (the cap still bounds the result).
            price *= 4.0
            continue
        a_new = _area(trial_state)
        predicted = c_now + sum(float(grads[i][0] @ move) for i, (_, move) in moves.items())
        if predicted <= c_now + 0.5 * (cap_Nmm - c_now) and a_new < target_area_mm2:
            state, c_now, a_now, pending = trial_state, predicted, a_new, True
            improved = True
            continue
        for halving in range(4):
            c_new, e_new = evaluate(trial_state)
            a_new = _area(trial_state)
            if c_new <= cap_Nmm or halving == 3:
                break
            trial_state = _backed_off(state, trial_state, moves, 0.5 ** (halving + 1), fits, feature_mm)
        pending = False
        if c_new <= cap_Nmm and _worth_growing(analysed, c_new, a_new):
            state, energy, c_now, a_now = trial_state, e_new, c_new, a_new
            analysed = (state, energy, c_now, a_now)
            improved = True
        else:
            state, energy, c_now, a_now = analysed
            reach_mm *= 0.5
    if pending:
        c_new, e_new = evaluate(state)
        if c_new <= cap_Nmm and _worth_growing(analysed, c_new, a_now):
            c_now, energy = c_new, e_new
        else:
            state, energy, c_now, a_now = analysed
            improved = a_now > record[-1][1]
    c_before, a_before = record[-1]
    record.append((c_now, a_now))
    if not improved or a_now <= a_before * (1.0 + SAME_MATERIAL):
        kept = "it moved them where the panel is stiffer" if c_now < c_before else "it kept the layout it had"
        notes.append("the shape optimisation found no room to grow the voids under the rules and the stiffness of "
                     f"the freeform layout; {kept}.")
    return ShapeResult(drafts=tuple(state), compliance_Nmm=tuple(c for c, _ in record),
                       area_mm2=tuple(a for _, a in record), analyses=evaluate.analyses, notes=tuple(notes))
