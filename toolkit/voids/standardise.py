"""At most ``max_types`` void sizes per panel, and sizes and centres on the ``snap`` grid.

Sizes are grouped by optimal one-dimensional k-means: the sorted sizes are split into k runs so that the sum
of squared deviations from each run's mean is least, found exactly by dynamic programming over split points
(the method of Wang & Song 2011, "Ckmeans.1d.dp", The R Journal 3(2):29-33; written here, O(k n^2)).

Each group then takes one size: of the candidates from the group's median down to its smallest member, the one
at which the members that still keep the rules (the caller's ``fits`` decides, and may move a member a little)
remove most material; a member that keeps no rule at that size is dropped. The search stops at the first size
every member keeps (a smaller one keeps less of each). The group's smallest size always works at the members'
own places: every family's shape at a smaller size about the same centre lies inside the larger one (convex
polygon scaled about its centroid, circle, stadium of the same length and a narrower width), so nothing gets
closer to anything.
Sizes snap *down* to the grid for the same reason. Bores and slots keep stock sizes: their candidates are
the stock sizes in the group's range.
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Callable, Collection, Sequence

import numpy as np

from .outline import Draft


def cluster_1d(values: Sequence[float], k: int, cost: str = "sse") -> tuple[np.ndarray, float]:
    """Optimal split of ``values`` into at most ``k`` groups of consecutive sorted values.

    ``cost`` "sse": least total sum of squared deviations from the group means (1-D k-means); "area": least total
    of v^2 - (the group's least v)^2, the area (of like shapes, v their size) lost when every member takes its
    group's smallest size (``size_groups``: k-means on sizes puts large voids with middling ones, and a group
    shrinks to what its small members keep). Returns the group label of each value (0 for the smallest group, in
    input order) and the total cost.
    """
    x = np.asarray(values, dtype=float)
    n = len(x)
    if n == 0:
        return np.zeros(0, dtype=int), 0.0
    order = np.argsort(x, kind="stable")
    s = x[order]
    k = max(1, min(int(k), len(np.unique(s))))
    c1 = np.concatenate([[0.0], np.cumsum(s)])
    c2 = np.concatenate([[0.0], np.cumsum(s * s)])

    if cost not in ("sse", "area"):
        raise ValueError(f"unknown grouping cost {cost!r}")
    by_area = cost == "area"

    def sse(i, j):  # values s[i..j] inclusive, i and j arrays or ints
        m = j - i + 1
        if by_area:
            return np.maximum(c2[j + 1] - c2[i] - m * s[i] * s[i], 0.0)
        total = c1[j + 1] - c1[i]
        return np.maximum(c2[j + 1] - c2[i] - total * total / m, 0.0)

    cost = np.full((k + 1, n), np.inf)
    split = np.zeros((k + 1, n), dtype=int)
    cost[1] = sse(np.zeros(n, dtype=int), np.arange(n))
    for m in range(2, k + 1):
        for j in range(m - 1, n):
            i = np.arange(m - 1, j + 1)  # first index of the last group
            trial = cost[m - 1, i - 1] + sse(i, np.full_like(i, j))
            best = int(np.argmin(trial))
            cost[m, j] = trial[best]
            split[m, j] = i[best]
    labels_sorted = np.zeros(n, dtype=int)
    j = n - 1
    for m in range(k, 0, -1):
        i = split[m, j] if m > 1 else 0
        labels_sorted[i:j + 1] = m - 1
        j = i - 1
    labels = np.empty(n, dtype=int)
    labels[order] = labels_sorted
    return labels, float(cost[k, n - 1])


def snap_down(value: float, snap: float) -> float:
    """``value`` rounded down to a multiple of ``snap`` (unchanged for snap 0)."""
    if snap <= 0.0:
        return value
    return math.floor(value / snap + 1e-9) * snap


# How ``size_groups`` splits a family's sizes into groups (``cluster_1d``'s cost). Regular n-gons by the area lost:
# measured 2026-12-04, a 5.4 m precast spandrel of our own, regular hexagons, three sizes: k-means on the sizes put
# the three largest (611, 599, 582 mm) with two of 472 and 489 mm, all five went to 470, and the voids to make kept
# 43 % of the saving; by the area lost 57 %, no softer than the freeform layout; over the shipped examples with
# regular n-gons under polygon and mixed and the three profiles (32 runs), 3 changed: +0.45 and +0.03 points of
# the panel removed, -0.11; the same spandrel on a 40 mm grid -0.7 (18.6 against 19.3 %). Bores and slots stay with k-means: by the area lost, 4 of their 30 example runs changed,
# 3 for the worse (-1.75, -0.59, -0.13 points, one +1.38): their sizes are stock sizes and a group drops the
# members that keep no rule at its size rather than shrinking the large ones. ``share_types`` weighs k-means for
# all (a common measure across families).
GROUPING = {"polygon": "area", "slot": "sse", "bore": "sse"}


def share_types(sizes_by_family: dict[str, list[float]], max_types: int) -> dict[str, int]:
    """How many sizes each family may use so that all together use at most ``max_types``.

    Each family present gets one; the rest go one at a time to the family whose grouping error falls most.
    The caller makes sure no more families are present than ``max_types``.
    """
    share = {f: 1 for f, v in sizes_by_family.items() if v}
    spare = max_types - len(share)
    while spare > 0:
        gains = {}
        for f, k in share.items():
            v = sizes_by_family[f]
            if len(set(v)) > k:
                gains[f] = cluster_1d(v, k)[1] - cluster_1d(v, k + 1)[1]
        if not gains:
            break
        f = max(sorted(gains), key=lambda name: gains[name])
        share[f] += 1
        spare -= 1
    return share


def size_candidates(values: Sequence[float], family: str, snap: float, stock: Sequence[float],
                    smallest: float, upward: bool = False, grow: bool = True) -> list[float]:
    """Sizes to try for one group, largest first, ending with one that always keeps the rules: from the group's
    median down, or with ``upward`` from its largest member down; without ``grow``, only sizes no member grows to
    (the smallest member's, snapped down where that keeps the least void)."""
    lo, mid = min(values), float(max(values) if upward else np.median(values))
    if not grow:
        mid = lo
    if family in ("bore", "slot"):
        # Stock sizes only; the smallest member is a stock size itself.
        return sorted({d for d in stock if lo - 1e-9 <= d <= mid + 1e-9} | {lo}, reverse=True)
    out = []
    if snap > 0.0:
        v = snap_down(mid, snap)
        while v >= lo - 1e-9:
            out.append(v)
            v -= snap
        floor_lo = snap_down(lo, snap)
        if floor_lo >= smallest and floor_lo > 0.0:
            out.append(floor_lo)
    else:
        out = list(np.linspace(mid, lo, 5))
    out.append(lo)  # last resort: the smallest member as it is
    seen: list[float] = []
    for v in out:
        if v > 0.0 and all(abs(v - w) > 1e-9 for w in seen):
            seen.append(v)
    return seen


def size_groups(drafts: list[Draft], max_types: int) -> dict[tuple[str, int], list[int]]:
    """The groups ``standardise_sizes`` gives one size each: {(family, group number): indices into ``drafts``}, the
    groups of a family numbered from its smallest sizes up; irregular n-gons are in none."""
    by_family: dict[str, list[int]] = {}
    for i, d in enumerate(drafts):
        if d.family == "polygon" and not d.regular:
            continue  # each irregular n-gon is cut to its own corners: its size is no tool or former to stock
        by_family.setdefault(d.family, []).append(i)
    share = share_types({f: [drafts[i].size for i in idx] for f, idx in by_family.items()}, max_types)
    groups: dict[tuple[str, int], list[int]] = {}
    for family in sorted(by_family):
        idx = by_family[family]
        labels, _ = cluster_1d([drafts[i].size for i in idx], share[family], GROUPING[family])
        for g in sorted(set(labels.tolist()), reverse=True):
            groups[(family, g)] = [i for i, lab in zip(idx, labels) if lab == g]
    return groups


def standardise_sizes(drafts: list[Draft], max_types: int, snap: float, stock: dict[str, Sequence[float]],
                      smallest: float, fits: Callable[[Draft, int, list[Draft]], Draft | None],
                      most_material: bool = True, upward: bool = False, grow: bool = True,
                      held: Collection[tuple[str, int]] = ()) -> tuple[list[Draft], list[tuple[int, str, str]]]:
    """Give the drafts at most ``max_types`` sizes, snapped down to the ``snap`` grid where the rules allow.

    ``fits(trial, i, state)`` returns the trial (or a moved copy) if draft i may become ``trial`` beside the
    other drafts in ``state``, else None. Returns the new drafts (same order; None for a draft dropped because
    it fits at none of its group's sizes) and change records (index, what, why). ``most_material``: each group's
    size is the one keeping most material (module text); False: the largest size every member keeps where there
    is one (the group's small members grow less). ``upward``: the sizes tried reach the group's largest member,
    not its median (``size_candidates``), so small members may grow where the rules leave them room; the caller
    checks the stiffness of what grew. ``grow`` False: no member grows (each group takes its smallest member's
    size), so the layout is no softer than the one given; ``held``: the groups (keys of ``size_groups``) where
    no member grows, the others as asked.
    """
    state = list(drafts)
    changes: list[tuple[int, str, str]] = []
    for (family, g), members in size_groups(state, max_types).items():
        values = [state[i].size for i in members]
        best = None  # (members that fit, trial state, size, area kept) of the best size so far
        for size in size_candidates(values, family, snap, stock.get(family, ()), smallest, upward,
                                    grow and (family, g) not in held):
            trial_state = list(state)
            failed = []
            for i in members:
                d = state[i]
                trial = d.scaled(size) if abs(size - d.size) > 1e-9 else d
                if family == "slot":
                    # A slot keeps its length at another width (a narrower stadium of the same length about
                    # the same axis lies inside the wider one; its extent, which a web ratio reads, is the same).
                    trial = trial.with_length(snap_down(d.length, snap))
                placed = fits(trial, i, trial_state)
                if placed is None:
                    failed.append(i)
                    trial_state[i] = None
                else:
                    trial_state[i] = placed
            kept = sum(trial_state[i].shape().area for i in members if trial_state[i] is not None)
            # The size keeping most material wins (a small member the size does not fit is dropped rather
            # than every large one shrunk to the smallest's size); among equal ones, the larger size.
            if best is None or (kept > best[3] * (1.0 + 1e-9) if most_material else len(failed) < len(best[0])):
                best = (failed, trial_state, size, kept)
            if not failed:
                break  # every member kept: a smaller size keeps less of each
        # A member that can take none of the group's sizes (a thin polygon scaled down to the group's
        # size may fall under the least void size) is dropped rather than given a size of its own.
        failed, trial_state, size, _ = best
        for i in members:
            old, new = state[i], trial_state[i]
            if new is None:
                changes.append((i, "dropped", f"it keeps no rule at the group size {size:g} mm, and at most "
                                              f"{max_types} void sizes are allowed"))
                continue
            if abs(old.size - new.size) > 1e-9:
                changes.append((i, f"size {old.size:.1f} -> {new.size:g} mm",
                                f"one of at most {max_types} void sizes"))
            if math.dist(old.centre, new.centre) > 1e-6:
                changes.append((i, f"moved {math.dist(old.centre, new.centre):.1f} mm",
                                "to keep the rules at the standard size"))
        state = trial_state
    return state, changes


def snap_centres(drafts: list[Draft], snap: float, fits: Callable[[Draft, int, list[Draft]], Draft | None],
                 origin: tuple[float, float] = (0.0, 0.0), inward_only: bool = False
                 ) -> tuple[list[Draft], list[tuple[int, str, str]]]:
    """Move every centre to the nearest point of the ``snap`` grid where the rules allow (else leave it).

    The grid runs through ``origin``: the panel's corner, or a mid-line the layout is symmetric about (a grid
    through the mirror line is its own mirror image, so mirror pairs both land on it). An irregular n-gon's
    corners snap instead, to the nearest grid points, else towards its centre; with ``inward_only``, towards its
    centre alone.
    """
    state = list(drafts)
    changes: list[tuple[int, str, str]] = []
    if snap <= 0.0:
        return state, changes
    ox, oy = origin
    for i, d in enumerate(state):
        if d is None:
            continue
        if d.family == "polygon" and not d.regular:
            # The nearest grid points first (the shape keeps its size); where that breaks a rule, towards the centre.
            placed = None
            for inward in ((True,) if inward_only else (False, True)):
                trial = d.corners_snapped(snap, origin, inward=inward)
                placed = fits(trial, i, state) if trial is not None else None
                if placed is not None:
                    break
            if placed is not None:
                state[i] = placed
            else:
                changes.append((i, "corners not snapped", f"the {snap:g} mm grid would break a rule or the shape"))
            continue
        cx, cy = d.centre
        gx, gy = math.floor((cx - ox) / snap), math.floor((cy - oy) / snap)
        points = [(ox + (gx + a) * snap, oy + (gy + b) * snap) for a in range(-1, 3) for b in range(-1, 3)]
        points.sort(key=lambda p: (math.dist(p, d.centre), p))
        for p in points:
            placed = fits(d.at(p), i, state)
            if placed is not None and placed.centre == d.at(p).centre:
                state[i] = placed
                break
        else:
            changes.append((i, "centre not snapped", f"no point of the {snap:g} mm grid near it keeps the rules"))
    return state, changes


def align_centres(drafts: list[Draft], tolerance: float, fits: Callable[[Draft, int, list[Draft]], Draft | None],
                  snap: float = 0.0, origin: tuple[float, float] = (0.0, 0.0)) -> tuple[list[Draft], int]:
    """Centres that nearly share a column or a row put on one line, where the rules allow: the setting-out a
    detailer draws and a shop marks (a honeycomb's voids are placed and moved one by one, and the edge cover or a
    web can keep a void off the grid point its neighbours took: a column at 325.7, 328.3 and 330 mm).

    For x, then y: the centres sorted along the axis fall into runs no longer than ``tolerance`` from their first
    (a run ends where the next centre is further). Each value a run's voids stand on, and each point of the
    ``snap`` grid through ``origin`` within half a step of the run, is tried as the line: every void of the run
    moves to it, one by one, each only where ``fits`` keeps it there unmoved. The line that ends with most voids on
    it is taken; of equals, one on the grid, then the value most voids stood on, then the one nearest the run's
    median. A void on a mirror line and an irregular n-gon (its corners are on the grid, not its centre) keep their
    places. Returns the drafts and how many moved."""
    state = list(drafts)
    moved: set[int] = set()
    if tolerance <= 0.0:
        return state, 0
    for axis in (0, 1):
        free = [i for i, d in enumerate(state) if d is not None and not d.fixed
                and not (d.family == "polygon" and not d.regular)]
        free.sort(key=lambda i: (state[i].centre[axis], i))
        for run in _runs(free, {i: state[i].centre[axis] for i in free}, tolerance):
            if len(run) < 2:
                continue
            values = [state[i].centre[axis] for i in run]
            middle = float(np.median(values))
            # each line to the micrometre, with the value it is drawn at (a void's own, to the bit, or a grid point)
            lines: dict[float, tuple[float, int, bool]] = {}
            for v in values:
                key = round(v, 6)
                at, count, _ = lines.get(key, (v, 0, False))
                lines[key] = (at, count + 1, False)
            if snap > 0.0:
                o = origin[axis]
                for k in range(math.floor((min(values) - o) / snap), math.ceil((max(values) - o) / snap) + 1):
                    at = o + k * snap
                    if min(values) - 0.5 * snap <= at <= max(values) + 0.5 * snap:
                        key = round(at, 6)
                        drawn_at, count, _ = lines.get(key, (at, 0, True))
                        lines[key] = (drawn_at, count, True)
            if len(lines) < 2:
                continue
            ax = axis

            def onto(d: Draft, target: float) -> Draft:
                return d.at((target, d.centre[1]) if ax == 0 else (d.centre[0], target))

            best = _best_line(state, run, [(t, (g, c, -abs(t - middle), -t)) for t, c, g in lines.values()],
                              onto, lambda d, target: d.centre[ax] == target, fits)
            if best[0][0] >= 2:
                state = best[1]
                moved |= best[2]
    return state, len(moved)


def _runs(order: list[int], value: dict[int, float], tolerance: float) -> list[list[int]]:
    """``order`` (sorted by ``value``) cut into runs no longer than ``tolerance`` from their first."""
    runs: list[list[int]] = []
    for i in order:
        if runs and value[i] - value[runs[-1][0]] <= tolerance:
            runs[-1].append(i)
        else:
            runs.append([i])
    return runs


def _best_line(state: list[Draft], run: list[int], lines: list[tuple[float, tuple]], onto, on, fits):
    """Of ``lines`` ((value, rank after the count)), the one that ends with most of ``run`` on it: every void of
    the run is moved onto each (``onto(draft, value)``) one by one, kept only where ``fits`` keeps it unmoved;
    ``on(draft, value)`` tells a void on the line. Returns (rank, drafts, the voids moved)."""
    best: tuple[tuple, list[Draft], set[int]] | None = None
    for target, rank_after in lines:
        trial_state, shifted = list(state), set()
        for i in run:
            d = trial_state[i]
            if on(d, target):
                continue
            trial = onto(d, target)
            placed = fits(trial, i, trial_state)
            if placed is not None and placed.centre == trial.centre and on(placed, target):
                trial_state[i] = placed
                shifted.add(i)
        rank = (sum(on(trial_state[i], target) for i in run),) + rank_after
        if best is None or rank > best[0]:
            best = (rank, trial_state, shifted)
    return best


def align_turns(drafts: list[Draft], tolerance_deg: float, fits: Callable[[Draft, int, list[Draft]], Draft | None]
                ) -> tuple[list[Draft], int]:
    """Slots of one width whose directions nearly agree turned to one direction, where the rules allow: the
    shape optimisation turns each slot its own way (156 to 164 degrees among a wall leaf's slots of one cutter),
    and a drawing, a jig and a router's setting-out read better with one.

    Per slot width: the directions (taken modulo 180 degrees, the circle cut at its widest gap, so that 178 and
    2 degrees are neighbours) sorted fall into runs no wider than ``tolerance_deg`` from their first. Each direction
    a run's slots lie at is tried: every slot of the run turns to it about its centre, one by one, each only where
    ``fits`` keeps it so, unmoved; the direction that ends with most slots at it is taken (of equals, the one most
    lay at, then the one nearest the run's median). A slot no longer than it is wide (to half a millimetre: a round
    hole) or on a mirror line keeps its own. Returns the drafts and how many turned."""
    state = list(drafts)
    turned: set[int] = set()
    if tolerance_deg <= 0.0:
        return state, 0
    widths = sorted({d.size for d in state if d is not None and d.family == "slot"})
    for width in widths:
        slots = [i for i, d in enumerate(state) if d is not None and d.family == "slot" and d.size == width
                 and not d.fixed and d.length - d.size >= 0.5]
        if len(slots) < 2:
            continue
        at = {i: state[i].angle_deg % 180.0 for i in slots}
        order = sorted(slots, key=lambda i: (at[i], i))
        gaps = [(at[order[(k + 1) % len(order)]] - at[order[k]]) % 180.0 for k in range(len(order))]
        cut = max(range(len(order)), key=lambda k: (gaps[k], -k))
        order = order[cut + 1:] + order[:cut + 1]
        base = at[order[0]]
        unwrapped = {i: base + (at[i] - base) % 180.0 for i in order}
        for run in _runs(order, unwrapped, tolerance_deg):
            values = [unwrapped[i] for i in run]
            middle = float(np.median(values))
            lines: dict[float, tuple[float, int]] = {}
            for i, v in zip(run, values):
                key = round(v % 180.0, 6)
                target, count = lines.get(key, (state[i].angle_deg % 180.0, 0))
                lines[key] = (target, count + 1)
            if len(run) < 2 or len(lines) < 2:
                continue
            best = _best_line(state, run,
                              [(t, (c, -abs(((t - middle + 90.0) % 180.0) - 90.0), -t)) for t, c in lines.values()],
                              lambda d, target: replace(d, angle_deg=target),
                              lambda d, target: d.angle_deg % 180.0 == target, fits)
            if best[0][0] >= 2:
                state = best[1]
                turned |= best[2]
    return state, len(turned)
