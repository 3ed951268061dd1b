"""Travelling loads: a ``[[moving_load]]`` of the job file becomes one load case per stop along its path.

The layout must serve every stop, so the stops are optimised together as load cases of equal weight, and the
objective is their weighted sum of compliances (docs/moving-loads.md says why the sum and not the worst stop).
A travelling load's ``weight`` belongs to the whole load and is shared equally by its stops: the sum is then the
mean compliance over the stops times the weight, and the number of stops does not change how much the travelling
load counts against the panel's other load cases.

Stops are spaced evenly from one end of the path to the other; a patch keeps all of its length on the path, so
its centre travels from half its length after ``from`` to half its length before ``to``. Stops are computed as
``s a + t b`` with ``s = (n-1-k)/(n-1)`` and ``t = k/(n-1)``, so a path symmetric about a mid-line gives stops
that are mirror images of one another to rounding.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .errors import LacunaError
from .model import LineLoad, Load, MovingLoad, Point, PointLoad, Travel

def travel_length(m: MovingLoad) -> float:
    """How far the load's centre travels, mm: the path less a patch's length."""
    return math.dist(m.start, m.end) - m.length_mm


def stop_count(m: MovingLoad) -> int:
    """Number of stops: ``positions``, or as few stops as keep neighbours at most ``step_mm`` apart (both ends
    included; the spacing is then the travel divided evenly, never more than the step)."""
    if m.positions is not None:
        return int(m.positions)
    ratio = travel_length(m) / float(m.step_mm)
    if not math.isfinite(ratio) or ratio > 1e15:
        return 10**15  # a step so small no machine could hold the stops: the memory check refuses it
    return max(2, math.ceil(ratio - 1e-9) + 1)


def default_case(index: int) -> str:
    """The case name of the ``index``-th [[moving_load]] (from 1) when it gives none."""
    return f"moving {index}"


def stop_case(name: str, k: int) -> str:
    """The load case of stop ``k`` (from 1) of travelling load ``name``."""
    return f"{name} @{k}"


def stop_counts(moving: tuple[MovingLoad, ...]) -> list[tuple[str, str, int]]:
    """(source, key, stops) of each group of travelling loads that share a case (its first member speaks for it);
    ``key`` is the job key that sets the count: "positions" or "step"."""
    seen: dict[str, tuple[str, str, int]] = {}
    for i, m in enumerate(moving, 1):
        seen.setdefault(m.case or default_case(i),
                        (m.source, "positions" if m.positions is not None else "step", stop_count(m)))
    return list(seen.values())


def _stops(m: MovingLoad) -> list[tuple[Point, Load]]:
    """(centre, load) of each stop, drawing axes in mm, in order from ``start`` to ``end``."""
    n = stop_count(m)
    (x0, y0), (x1, y1) = m.start, m.end
    path = math.dist(m.start, m.end)
    ux, uy = (x1 - x0) / path, (y1 - y0) / path
    half = m.length_mm / 2.0
    ax, ay = x0 + half * ux, y0 + half * uy      # the centre's first stop
    bx, by = x1 - half * ux, y1 - half * uy      # and its last
    out = []
    for k in range(n):
        s, t = (n - 1 - k) / (n - 1), k / (n - 1)
        c = (s * ax + t * bx, s * ay + t * by)
        if m.is_patch:
            load = LineLoad(start=(c[0] - half * ux, c[1] - half * uy), end=(c[0] + half * ux, c[1] + half * uy),
                            intensity_N_per_mm=m.intensity_N_per_mm, source=m.source)
        else:
            load = PointLoad(at=c, force_N=m.force_N, source=m.source)
        out.append((c, load))
    return out


@dataclass(frozen=True)
class Expanded:
    """The job's travelling loads as load cases (drawing axes, mm, N); ``travels`` carry the stops' centres."""

    loads: tuple[Load, ...]
    case_weights: tuple[tuple[str, float], ...]
    travels: tuple[Travel, ...]


def expand(moving: tuple[MovingLoad, ...], static_cases, weighted_cases) -> Expanded:
    """Every stop of every travelling load as a load in its own case, with the case weights.

    Travelling loads that name the same ``case`` travel together (the axles of one vehicle): they must have the
    same number of stops and the same weight, and their k-th stops share one case. A travelling load's case
    name may not be a [[load]] case or a [cases] name: its stops are cases of their own, weighted by it.
    """
    static_cases, weighted_cases = set(static_cases), set(weighted_cases)
    groups: dict[str, list[tuple[int, MovingLoad]]] = {}
    for i, m in enumerate(moving, 1):
        groups.setdefault(m.case or default_case(i), []).append((i, m))
    loads: list[Load] = []
    weights: list[tuple[str, float]] = []
    travels: list[Travel] = []
    for name, members in groups.items():
        first_i, first = members[0]
        for i, m in members:
            where = f"{m.source} case" if m.case else m.source
            taken = name in static_cases and "a [[load]] case" or name in weighted_cases and "a [cases] name"
            if taken:
                raise LacunaError(
                    f'the travelling load\'s case "{name}" is also {taken}: a travelling load\'s stops are load '
                    "cases of their own.", where=where,
                    hint="Give the [[moving_load]] a case name no [[load]] or [cases] entry uses; set its weight "
                    "with weight = ... on the [[moving_load]] itself.")
            clash = next((c for c in static_cases | weighted_cases if c.startswith(f"{name} @")), None)
            if clash is not None:
                raise LacunaError(f'the load case "{clash}" has the name of a stop of travelling load "{name}".',
                                  where=where, hint="Rename that case, or the travelling load's case.")
            if m is first:
                continue
            if stop_count(m) != stop_count(first):
                raise LacunaError(
                    f'this travelling load shares case "{name}" with {first.source} but makes {stop_count(m)} '
                    f"stops against {stop_count(first)}: loads of one case travel together, stop by stop.",
                    where=f"{m.source} positions" if m.positions is not None else f"{m.source} step",
                    hint="Give both the same number of positions, or give them different case names.")
            if m.weight != first.weight:
                raise LacunaError(
                    f'this travelling load shares case "{name}" with {first.source} but has weight {m.weight:g} '
                    f"against {first.weight:g}.", where=f"{m.source} weight",
                    hint="Give the weight once, the same on both, or give them different case names.")
        n = stop_count(first)
        per_stop = first.weight / n
        centres = None
        for _, m in members:
            stops = _stops(m)
            if centres is None:
                centres = tuple(c for c, _ in stops)
            for k, (_, load) in enumerate(stops, 1):
                loads.append(_with_case(load, stop_case(name, k)))
        weights += [(stop_case(name, k), per_stop) for k in range(1, n + 1)]
        travels.append(Travel(name=name, cases=tuple(stop_case(name, k) for k in range(1, n + 1)), at=centres,
                              weight=first.weight, length_mm=first.length_mm,
                              source=", ".join(m.source for _, m in members),
                              set_by="positions" if first.positions is not None else "step"))
    return Expanded(loads=tuple(loads), case_weights=tuple(weights), travels=tuple(travels))


def _with_case(load: Load, case: str) -> Load:
    if isinstance(load, PointLoad):
        return PointLoad(at=load.at, force_N=load.force_N, case=case, source=load.source)
    return LineLoad(start=load.start, end=load.end, intensity_N_per_mm=load.intensity_N_per_mm, case=case,
                    source=load.source)


def check_on_panel(moving: tuple[MovingLoad, ...], paths_local, solid, frame) -> None:
    """LacunaError naming the [[moving_load]] whose path leaves the panel's material (outline or an opening).

    ``paths_local``: each load's (start, end) in the local frame, mm; ``solid``: the panel's material.
    """
    import shapely
    from shapely.geometry import LineString

    from .fe.boundary import where_text

    tol = 1e-6 * max(solid.bounds[2] - solid.bounds[0], solid.bounds[3] - solid.bounds[1])
    grown = shapely.buffer(solid, tol)
    for m, (a, b) in zip(moving, paths_local):
        outside = shapely.difference(LineString([a, b]), grown)
        if shapely.length(outside) > tol:
            bad = shapely.get_coordinates(outside)[0]
            raise LacunaError(
                f"the travelling load's path from {where_text(a, frame)} to {where_text(b, frame)} runs off the "
                f"panel (outside its outline or across an opening), for example at {where_text(bad, frame)}.",
                where=f"{m.source} from",
                hint="Keep the whole path on the panel's material, for example along its top edge.",
            )


def check_memory(counts, *, nx: int, ny: int, dx: float, dy: float, other_cases: int, stage: str,
                 filter_radius_mm: float | None = None, budget_bytes: float | None = None) -> None:
    """LacunaError naming the travelling load whose stops make more load cases than the free memory holds.

    ``counts``: (source, key, stops) of each travelling load ("positions" or "step" as the key to blame);
    ``other_cases``: the panel's load cases that are no stop. Memory grows with dofs x cases (every case keeps
    its displacements, forces, stresses and element energies; toolkit.limits has the measured law). When even
    one stop per travelling load does not fit, the grid is at fault and this check leaves it to the grid's own.
    """
    from .limits import amount_text, available_memory_bytes, peak_memory_bytes

    counts = list(counts)
    if not counts:
        return
    total = other_cases + sum(n for _, _, n in counts)

    def need(cases: int) -> float:
        return peak_memory_bytes(nx, ny, dx, dy, stage=stage, cases=cases, filter_radius_mm=filter_radius_mm)

    budget = available_memory_bytes() if budget_bytes is None else budget_bytes
    if need(total) <= budget:
        return
    least = other_cases + len(counts)
    if need(least) > budget:
        return
    # need() is linear in the number of cases: the most that fit, by the slope between two counts.
    slope = need(least + 1) - need(least)
    fit = least + int((budget - need(least)) // slope) if slope > 0 else total
    source, key, n = max(counts, key=lambda c: c[2])
    room = fit - (total - n)
    verb = "analyse" if stage == "analysis" else "optimise"
    raise LacunaError(
        f"{n:,} stops make {total:,} load cases with the panel's other loads; on this grid ({nx} x {ny} elements) "
        f"they need about {amount_text(need(total))} of memory to {verb}, and about {amount_text(budget)} is free: at most "
        f"{max(room, 1):,} stops of this load fit (every load case keeps its own displacements, stresses and "
        "element energies).",
        where=f"{source} {key}",
        hint=f"Give at most {max(room, 1):,} positions (or a longer step), or a larger [panel] element_size.",
    )


def summary(panel, columns: dict) -> list[dict]:
    """The JSON of each travelling load: stops in the drawing's axes and unit, and each stop's compliance
    (F.U of its own case, N mm, not weighted) in every analysis of ``columns`` (name -> Analysis)."""
    import numpy as np

    f = panel.frame
    out = []
    for travel in panel.travels:
        stops = []
        for case, at in zip(travel.cases, travel.at):
            stop = {"case": case, "at": [float(v) for v in f.to_drawing(np.asarray(at, dtype=float))]}
            for key, analysis in columns.items():
                stop[f"compliance_{key}_Nmm"] = float(analysis.compliance_per_case_Nmm[analysis.cases.index(case)])
            stops.append(stop)
        entry = {
            "case": travel.name,
            "source": travel.source,
            "weight": travel.weight,
            "patch_length": f.length_to_drawing(travel.length_mm),
            "stops": len(stops),
        }
        for key in columns:
            values = [s[f"compliance_{key}_Nmm"] for s in stops]
            entry[f"compliance_{key}_mean_Nmm"] = float(sum(values) / len(values))
            entry[f"compliance_{key}_max_Nmm"] = float(max(values))
        entry["positions"] = stops
        out.append(entry)
    return out
