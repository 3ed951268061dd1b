"""The whole job on a panel, in memory: solid analysis, BESO, freeform voids, voids a shop can make, re-analysis.

No files here: :func:`optimize_panel` takes model values and returns every figure and geometry the writers need;
``api`` turns that into files, and a CAD host can call it on a document it already holds.
"""

from __future__ import annotations

import dataclasses
import math
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import Callable, NamedTuple

import numpy as np
import shapely
from shapely.geometry import Polygon

from .analysis import Analysis, analyze
from .edge_stress import edge_stress_tasks, edge_stresses_shared, edge_violations
from .fe.grid import Grid, grid_shape
from .fe.solve import SharedSolver
from .jobfile import Job
from .limits import check_memory
from .model import Panel, Region, Rules, Void
from .helper import ANALYSIS_MAX_ELEMENTS, Helper, analysis_fits_elsewhere, result_or
from .overlap import Overlap, own, side_threads
from .optimize import BesoResult, OptimizeSettings, ZoneSettings, build_problem, run_beso
from .optimize.beso import optimiser_threads, sensitivity_filter
from .rules.check import impossible_rules, least_void_by_thickness, least_void_size
from .rules.profiles import rules_for
from .voids.ceiling import Ceiling, ceiling
from .voids.extract import freeform_voids
from .voids.layout import (FIT_RTOL, Rationalised, analysis_threads, first_fit_area, rationalise,
                           refuse_impossible, resolve_settings, warm_evaluator)
from .voids.measure import inscribed_width

G_M_S2 = 9.81
# Grids up to this many elements build the optimiser's problem and filter on a side thread while the solid
# analysis runs (0.48 -> 0.37 s at 300 x 100, 2026-12-03); larger ones in sequence, where the peak memory of the
# job falls in the solid analysis's factorisation and the filter would add to it.
SET_UP_AHEAD_MAX = 250_000
# Elements across the panel's shorter side that a warning asks for when the grid was too coarse for any void.
FINE_ACROSS = 20


@dataclass(frozen=True, eq=False)
class OptimizeRun:
    """Everything one optimisation produced (local frame: mm, N, MPa)."""

    panel: Panel
    rules: Rules
    settings: OptimizeSettings
    solid: Analysis
    beso: BesoResult
    freeform: tuple[Polygon, ...]
    rationalised: Rationalised
    final: Analysis                 # the panel with the voids to make cut exactly
    freeform_analysis: Analysis     # the panel with the freeform outlines cut exactly (like for like)
    warnings: tuple[str, ...] = ()
    timings_s: dict = field(default_factory=dict)  # wall seconds of each stage, for benchmarks and reports
    limit: str = ""  # the rule that stopped the made layout short, and what relaxing it would give
    edge: tuple = ()  # edge_stress.EdgeStress of each void to make, in ``voids`` order (local models)
    edge_limit_MPa: float | None = None  # [rules] max_edge_stress_MPa, when the job gives it
    ceiling: Ceiling | None = None  # the most the family's voids can open under the spacing rules (voids/ceiling.py)

    @property
    def capture_percent(self) -> float | None:
        """Material removed by the voids to make per material removed by the freeform layout, %."""
        free = self.freeform_removed_percent
        return 100.0 * self.mass_removed_percent / free if free > 1e-9 else None

    @property
    def voids(self) -> tuple[Void, ...]:
        return self.rationalised.voids

    @property
    def removed_area_mm2(self) -> float:
        return float(sum(v.area_mm2 for v in self.voids))

    @property
    def mass_removed_percent(self) -> float:
        return 100.0 * self.removed_area_mm2 / float(self.panel.solid.area)

    @property
    def freeform_removed_percent(self) -> float:
        """Share of the drawn material the freeform outlines remove, as analysed."""
        return 100.0 * (1.0 - float(self.freeform_analysis.fractions.sum()) / float(self.solid.fractions.sum()))

    @property
    def mass_removed_kg(self) -> float | None:
        rho = self.panel.material.density_kg_m3
        if rho is None:
            return None
        return self.removed_area_mm2 * self.panel.thickness_mm * 1e-9 * rho


def job_rules(job: Job) -> Rules:
    """The rules in force: the job's profile with the job's own values over it."""
    r = job.rules
    v = job.voids
    overrides = {
        "min_web": r.min_web_mm,
        "edge_cover": r.edge_cover_mm,
        "min_void": r.min_void_mm,
        "bearing_clearance": r.bearing_clearance_mm,
        "web_ratio": r.web_ratio,
        "bore_diameters": v.bore_diameters_mm if job.is_set("voids.bore_diameters") else None,
        "slot_widths": v.slot_widths_mm,
        "corner": v.corner if job.is_set("voids.corner") else None,
        "corner_size": v.corner_size_mm,
    }
    return rules_for(r.profile, overrides)


def strain_energy_density(result: Analysis, panel: Panel) -> np.ndarray:
    """(ne,) weighted strain-energy density of the solid panel, N mm / mm2 (per unit area of the panel)."""
    g = result.grid
    from .fe.element import q4_stiffness

    ke = q4_stiffness(g.dx, g.dy, panel.material.E_MPa, panel.material.nu, panel.thickness_mm)
    ue = result.U[g.edof]                                   # (ne, 8, ncases)
    energy = 0.5 * np.einsum("eic,ij,ejc->ec", ue, ke, ue)  # per element, per case
    return (energy @ result.case_weights) * result.fractions / (g.dx * g.dy)


def with_voids(panel: Panel, voids) -> Panel:
    """The panel with ``voids`` (model.Void) cut as openings."""
    extra = tuple(Region(shape=v.shape, layer=f"LACUNA-VOID-{v.family.upper()}", handle=v.id) for v in voids)
    return dataclasses.replace(panel, openings=panel.openings + extra)


def with_freeform(panel: Panel, freeform, grid) -> Panel:
    """The panel with the optimiser's freeform outlines cut as openings, so it is analysed like the voids to make.

    The contour may pass within a fraction of an element of a support or a point load (the zones keep the
    elements there solid, not the contour); a disc of one element diagonal round each stays material, so every
    load and support still bears on the panel.
    """
    if not freeform:
        return panel
    reach = float(np.hypot(grid.dx, grid.dy))
    anchors = [shapely.Point(load.at) for load in panel.loads if hasattr(load, "at")]
    anchors += [shapely.LineString(s.points) if len(s.points) == 2 else shapely.Point(s.points[0])
                for s in panel.supports]
    cut = shapely.union_all(list(freeform))
    if anchors:
        cut = shapely.difference(cut, shapely.buffer(shapely.union_all(anchors), reach))
    cut = shapely.intersection(cut, panel.envelope)
    if cut.is_empty:
        return panel
    return dataclasses.replace(panel, openings=panel.openings + (Region(shape=cut, layer="LACUNA-FREEFORM"),))


def optimize_panel(
    panel: Panel,
    job: Job,
    *,
    on_iteration: Callable[[int, float, float], None] | None = None,
    keep_every: int = 0,
    on_stage: Callable[[str], None] | None = None,
    helper: bool = False,
) -> OptimizeRun:
    """The whole job on ``panel`` with ``job``'s settings and rules. ``on_iteration(index, compliance, volume)``
    after each BESO iteration; ``on_stage(words)`` as each later stage starts (what it does, in words), so that a
    progress display does not stand still on BESO's last line while the voids are fitted and checked. ``helper``:
    let a second process take part of the fitting where a second core is free and the grid is large enough for it
    to pay (``HELPER_MIN_ELEMENTS``; ``toolkit.helper``: only for a caller whose main script keeps its work under
    ``if __name__ == "__main__":``); the layout is the same."""
    tell = on_stage or (lambda words: None)
    rules = job_rules(job)
    settings = job.optimize
    # Before any work: "no void can be placed: ..." in plain words; else the region open to voids.
    void_region = impossible_rules(panel, rules)
    # The voids follow [optimize] symmetry unless [voids] symmetric says otherwise, however the Job was built.
    void_options = dataclasses.replace(job.voids, optimize_symmetry=job.optimize.symmetry)
    refuse_impossible(panel, void_options, rules, region=void_region)
    # The optimiser needs more memory than the analysis: refuse a grid too fine for it before either runs.
    nx, ny = grid_shape(panel.width_mm, panel.height_mm, panel.element_size_mm)
    if panel.travels:  # so many stops that the optimiser cannot hold their cases: the positions are at fault
        from .moving import check_memory as check_stops

        stops = {c for t in panel.travels for c in t.cases}
        check_stops([(t.source, t.set_by, len(t.cases)) for t in panel.travels], nx=nx, ny=ny,
                    dx=panel.width_mm / nx, dy=panel.height_mm / ny,
                    other_cases=len([c for c in panel.cases if c not in stops]), stage="optimize",
                    filter_radius_mm=settings.filter_radius_mm)
    check_memory(nx, ny, panel.width_mm / nx, panel.height_mm / ny, stage="optimize", cases=len(panel.cases),
                 filter_radius_mm=settings.filter_radius_mm)
    clock = [time.perf_counter()]
    timings: dict[str, float] = {}

    def lap(stage: str) -> None:
        now = time.perf_counter()
        timings[stage] = now - clock[0]
        clock[0] = now

    # One factorisation carried from the solid analysis through the optimiser to the voids' shape optimisation,
    # refactored wherever the system is the same (fe.solve.SharedSolver); dropped before the checks.
    shared = SharedSolver()
    # The helper process starts now so that its imports run beside the optimiser; it takes part of the fitting,
    # then the limiting rule's refits and the freeform re-analysis while the voids are shaped (``early``), then
    # part of the local models, and goes after the checks.
    early: dict = {}
    with Helper(helper and nx * ny >= HELPER_MIN_ELEMENTS,
                modules=("toolkit.voids.layout", "toolkit.edge_stress", "toolkit.pipeline")) as side:
        solid, beso, problem, freeform, energy, rationalised = _to_voids(
            panel, job, rules, settings, void_region, void_options, shared, side, lap, tell,
            on_iteration=on_iteration, keep_every=keep_every, early=early)
        made = float(sum(v.area_mm2 for v in rationalised.voids))
        free = float(sum(g.area for g in freeform))
        # The checks of the made layout need nothing from each other: the limiting rule's refit (collected from the
        # helper where it made it) and the local models run on the side threads (overlap.py), each on its own copy
        # of the geometry, while this thread makes the two re-analyses one after the other (one factorisation of
        # the grid in memory at a time, as in the optimiser). Each stage's own seconds are kept, and "checks" is the
        # wall time of them all.
        n = len(rationalised.voids)
        held_back = free > 0 and made < LIMIT_SHARE * free  # the limiting rule is looked for
        tell(f"checking the {n} void{'s' if n != 1 else ''} to make: the panel analysed again, a local model of the "
             "edge stress at each void" + (", the rule that held the layout back" if held_back else ""))

        # The re-analyses refactor the voids' stage's solver (on its threads), leaving out the dofs of nodes only
        # void elements touch (``fe.solve.LinearSolver.within``), instead of analysing a new system: 0.09 against
        # 0.2 s at 300 x 100 elements, 9 against 12 s at a million. Not the freeform layout's on a grid the helper
        # may analyse (``helper.ANALYSIS_MAX_ELEMENTS``): the helper makes it on a new solver, so it is made on one
        # here too, and the figures are the same to the bit wherever it was made (a refactor within another
        # solver's dofs gave the new solver's bits in every case measured, but nothing makes it so).
        threads = analysis_threads(solid.grid.n_elements)
        helper_may_analyse = solid.grid.n_elements <= ANALYSIS_MAX_ELEMENTS

        def freeform_here(p: Panel, ff) -> Analysis:
            """The freeform layout analysed in this process (``p``, ``ff``: the panel and outlines, or copies)."""
            return analyze(with_freeform(p, ff, solid.grid), grid=solid.grid, shared=shared, threads=threads)

        with Overlap() as work:
            threaded = work.threads > 1
            limit_job = None
            if held_back:
                mine = (panel, list(freeform), rationalised.voids)
                limit_panel, limit_freeform, limit_voids = own(mine) if threaded else mine
                limit_job = work.submit(timed, "limit", timings, limiting_rule, limit_panel, limit_freeform,
                                        void_options, rules, limit_voids, made, free, energy=energy,
                                        first_fit_mm2=rationalised.first_fit_mm2, layouts=rationalised.layouts,
                                        early=early, shaped_mm2=rationalised.shaped_mm2)
            final = timed("re-analysis", timings, analyze, with_voids(panel, rationalised.voids), grid=solid.grid,
                          shared=shared, threads=threads)
            # The freeform layout's re-analysis was made in the helper while the voids were shaped (``ahead``),
            # or is made here beside the local models: within the job's solver only on a grid the helper does not
            # analyse, else on a new solver, so the job's goes now where nothing here refactors it again.
            ahead = early.get(FREEFORM_AHEAD)
            if ahead is not None or helper_may_analyse:
                shared.release()
            # The grid cuts the voids by area fraction; the stress at their edges comes from a local model of each.
            started = time.perf_counter()
            freeform_analysis = None
            if side.idle and threaded and n >= 2:
                # The helper process is free: the local models are shared between it and this thread (two processes
                # instead of two threads of one, which the GIL holds back: docs/optimize.md), and the freeform
                # re-analysis, where it is still to make, goes to a side thread meanwhile (its own copy of the
                # geometry).
                freeform_job = None
                if ahead is None:  # the job's solver goes with it to the side thread (this one does not use it)
                    freeform_job = work.submit(timed, "freeform re-analysis", timings, freeform_here,
                                               *own((panel, freeform)))
                edge = edge_stresses_shared(panel, rationalised.voids, final, solid, side)
                timings["edge stresses"] = time.perf_counter() - started
                if freeform_job is not None:
                    freeform_analysis = freeform_job.result()
            else:
                edge_jobs = [work.submit(task) for task in
                             edge_stress_tasks(panel, rationalised.voids, final, solid, threaded=threaded)]
                if ahead is None:
                    freeform_analysis = timed("freeform re-analysis", timings, freeform_here, panel, freeform)
                shared.release()
                edge = tuple(job.result() for job in edge_jobs)
                timings["edge stresses"] = time.perf_counter() - started
            if freeform_analysis is None:  # the helper's, or made here where it failed there
                freeform_analysis = timed("freeform re-analysis", timings, result_or, ahead, freeform_here, panel,
                                          freeform)
            shared.release()
            limit = limit_job.result() if limit_job is not None else ""
        lap("checks")
    edge_limit = job.rules.max_edge_stress_MPa
    warnings = []
    if edge_limit is not None:
        broken, unchecked = edge_violations(edge, rationalised.voids, edge_limit)
        warnings += unchecked
        if broken:
            rationalised = dataclasses.replace(rationalised, violations=tuple(rationalised.violations) + broken)
    if not beso.converged:
        warnings.append(
            f"the optimiser stopped at max_iterations = {settings.max_iterations} before converging; "
            "the layout may still be changing (raise [optimize] max_iterations)."
        )
    if not rationalised.voids:
        warnings.append("no void could be made under the rules: the panel is left solid.")
    fine = _members_finer_than_the_rules(settings, rules, beso.filter_radius_mm, made, free)
    if fine:
        warnings.append(fine)
    emptied = 1.0 - float(beso.volume_fraction[-1]) if len(beso.volume_fraction) else 0.0
    if not freeform and emptied > 0.01:
        # Elements emptied one or two wide (a grid a few elements deep) outline no void the fitting can take.
        g = solid.grid
        depth, across = min((panel.height_mm, g.ny), (panel.width_mm, g.nx))
        warnings.append(
            f"the optimiser emptied {100 * emptied:.0f} % of the design region's elements but left no void wider "
            f"than the grid resolves: {across} elements across the panel's {depth:g} mm. Set [panel] element_size "
            f"to at most {depth / FINE_ACROSS:.3g} mm ({FINE_ACROSS} elements across it) for voids to take shape."
        )
    return OptimizeRun(
        panel=panel, rules=rules, settings=settings, solid=solid, beso=beso, freeform=freeform,
        rationalised=rationalised, final=final, freeform_analysis=freeform_analysis, warnings=tuple(warnings),
        timings_s=timings, limit=limit, edge=edge, edge_limit_MPa=edge_limit,
        ceiling=rules_ceiling(void_options, rules, panel.thickness_mm),
    )


def rules_ceiling(void_options, rules: Rules, thickness_mm: float = 0.0) -> Ceiling | None:
    """The most the job's void families can open of the ground they stand on under its spacing rules and stock
    sizes (``voids.ceiling``; None where nothing bounds it)."""
    r = resolve_settings(void_options, rules, thickness_mm)
    families = ("polygon", "slot", "bore")[:max(1, r.max_types)] if r.family == "mixed" else (r.family,)
    return ceiling(families, min_web_mm=r.min_web_mm, web_ratio=r.web_ratio, slot_widths_mm=r.slot_widths_mm,
                   bore_diameters_mm=r.bore_diameters_mm, min_void_mm=r.min_void_mm)


# The optimiser's default filter radius (three elements) is a length of the grid, not of the rules: where the
# rules' minimum web is this many times larger and the voids to make keep less than FINE_CAPTURE of the saving, the
# job is told to set the radius to the web. Measured 2026-12-04 on a 3000 x 450 mm precast lintel of our own with a
# dapped end (19,427 elements, radius 25 mm, minimum web 100 mm): 16 % of the saving kept; radius 60 mm 60 %, 100 mm
# 88 %, 150 mm 84 %.
FINE_WEB_RATIO = 2.0
FINE_CAPTURE = 0.5


def _members_finer_than_the_rules(settings: OptimizeSettings, rules: Rules, radius_mm: float, made_mm2: float,
                                  free_mm2: float) -> str:
    """A warning where the default filter radius lays out members much finer than the minimum web and the voids
    to make keep little of the saving, else ""."""
    if settings.filter_radius_mm is not None or free_mm2 <= 0 or rules.min_web_mm < FINE_WEB_RATIO * radius_mm:
        return ""
    kept = made_mm2 / free_mm2
    if kept >= FINE_CAPTURE:
        return ""
    return (f"the optimiser's filter radius, three elements ({radius_mm:.3g} mm, the default), is well under the "
            f"rules' minimum web ({rules.min_web_mm:g} mm): its members come out finer than the rules can make, and "
            f"the voids to make keep {100 * kept:.0f} % of its saving. Set [optimize] filter_radius to the minimum "
            f"web, {rules.min_web_mm:g} mm, for members of a width the rules can make.")


def _to_voids(panel: Panel, job: Job, rules: Rules, settings, void_region, void_options, shared: SharedSolver,
              side: Helper, lap, tell, *, on_iteration, keep_every, early: dict):
    """The stages up to the made voids: the solid analysis, the optimiser, the freeform outlines, the voids.
    Where the helper process is ready once the first fit is made (before the shape optimisation), it starts the
    limiting rule's refits, each rule's Future put in ``early`` by its key (the checks take them; they are wasted
    only when no rule is looked for), and the freeform re-analysis (``early[FREEFORM_AHEAD]``)."""
    zones = ZoneSettings(
        edge_cover_mm=rules.edge_cover_mm,
        bearing_clearance_mm=rules.bearing_clearance_mm,
        min_web_mm=rules.min_web_mm,
        void_region=void_region,
    )
    n_elements = math.prod(grid_shape(panel.width_mm, panel.height_mm, panel.element_size_mm))
    # The optimiser's problem and filter need nothing from the solid analysis: on a small grid they are built on a
    # side thread meanwhile (its own copy of the geometry: overlap.own), the same as in sequence.
    pool = ThreadPoolExecutor(1) if n_elements <= SET_UP_AHEAD_MAX and side_threads() > 1 else None
    try:
        ahead = pool.submit(_problem_and_filter, *own((panel, zones)), settings) if pool is not None else None
        # On the optimiser's MKL threads (two on large grids): it refactors this solver, its first design being the
        # panel as drawn, instead of analysing the matrix again on its own.
        solid = analyze(panel, shared=shared, threads=optimiser_threads(n_elements))
        problem, filt = ahead.result() if ahead is not None else (build_problem(panel, zones), None)
    finally:
        if pool is not None:
            pool.shutdown(wait=True)
    lap("analysis")
    warm = []

    def iteration(it: int, compliance: float, volume: float) -> None:
        # Once the helper answers (its imports done), it makes the voids' stage's second Evaluator while its core
        # is idle (``voids.layout.warm_evaluator``), where an analysis fits there; not where the optimiser runs on
        # two threads (it would take the second core from it).
        if not warm and side.ready:
            g = solid.grid
            warm.append(optimiser_threads(g.n_elements) == 1 and analysis_fits_elsewhere(g))
            if warm[0]:
                try:
                    side.submit(warm_evaluator, panel, g.nx, g.ny, g.dx, g.dy, shared.backend)
                except Exception:  # noqa: BLE001 - a broken helper: the voids' stage makes its own
                    pass
        if on_iteration is not None:
            on_iteration(it, compliance, volume)

    beso = run_beso(problem, settings, on_iteration=iteration, keep_every=keep_every, shared=shared, filt=filt)
    lap("optimisation")
    openings = shapely.union_all([o.shape for o in panel.openings]) if panel.openings else None
    freeform = tuple(freeform_voids(problem.grid, beso.densities, exclude=openings))
    energy = (solid.grid, strain_energy_density(solid, panel))
    lap("freeform outlines")
    kind = {"polygon": f"{void_options.sides}-gons", "slot": "slots", "bore": "bores"}.get(void_options.family,
                                                                                          "n-gons, slots and bores")
    tell(f"fitting {kind} to {len(freeform)} freeform void{'s' if len(freeform) != 1 else ''} under "
         + (f"the {job.rules.profile} rules" if job.rules.profile else "the job's rules"))

    def refits(layouts: tuple, sizes: list) -> None:
        # The freeform re-analysis first (every job's checks need it), then the refits the limiting rule would
        # make for a layout of these sizes (a missing one is made in the checks). Told again (the honeycomb weighed
        # in the helper was taken after all), the refits sent before are for another layout: dropped.
        for key in [k for k in early if k != FREEFORM_AHEAD]:
            early.pop(key).cancel()
        if side.ready:
            g = solid.grid
            if FREEFORM_AHEAD not in early and analysis_fits_elsewhere(g):
                early[FREEFORM_AHEAD] = side.submit(analysis_elsewhere, with_freeform(panel, freeform, g), g.nx, g.ny,
                                                    g.dx, g.dy)
            for trial in limit_trials(rules, void_options, sizes, panel, freeform):
                early[trial.key] = side.submit(first_fit_area, panel, list(freeform), void_options, trial.rules,
                                               energy, layouts)

    rationalised = rationalise(panel, list(freeform), void_options, rules, energy=energy, shared=shared,
                               helper=side, on_first_fit=refits)
    shared.release()  # the factor goes; the assembly pattern serves the re-analyses below
    lap("voids")
    return solid, beso, problem, freeform, energy, rationalised


def _problem_and_filter(panel: Panel, zones: ZoneSettings, settings: OptimizeSettings):
    """The optimiser's problem and its sensitivity filter (``optimize.beso.sensitivity_filter``)."""
    problem = build_problem(panel, zones)
    return problem, sensitivity_filter(problem, settings)


def timed(stage: str, timings: dict, fn, *args, **kwargs):
    """``fn(*args, **kwargs)``, its wall seconds put in ``timings[stage]``."""
    start = time.perf_counter()
    try:
        return fn(*args, **kwargs)
    finally:
        timings[stage] = time.perf_counter() - start


# The helper process (toolkit/helper.py) only for grids of at least this many elements. Starting it costs this
# process about 0.2 s and its imports take the second core for a second or two, which a short optimiser run
# cannot hide: measured 2026-12-02, whole jobs in one invocation, helper on / off: a 40 x 15-element plate 2.6-3.0
# against 2.5-2.8 s, the demo's 210 x 40 grid 6.2-6.3 against 6.2-6.4 s, the 300 x 100 bench plate 25.1-26.6
# against 26.6-26.8 s (its void stage 7.8-8.4 against 9.4-9.5 s).
HELPER_MIN_ELEMENTS = 20_000


# The freeform layout's re-analysis needs only the optimiser's outlines: where the helper is ready and an analysis
# fits there (``helper.analysis_fits_elsewhere``) it is made there while the voids are shaped
# (``early[FREEFORM_AHEAD]``); elsewhere it stays in the checks.
FREEFORM_AHEAD = "freeform re-analysis"


def analysis_elsewhere(panel: Panel, nx: int, ny: int, dx: float, dy: float) -> Analysis:
    """``analyze(panel)`` on an nx x ny grid of dx x dy elements, for the helper process: the answer carries a new
    grid of that size, not the one the analysis filled with its index arrays (tens of megabytes to send back)."""
    result = analyze(panel, Grid(nx, ny, dx, dy))
    return dataclasses.replace(result, grid=Grid(nx, ny, dx, dy))


# Below this share of the freeform layout's removed area the report names the rule that held the layout back.
LIMIT_SHARE = 0.8


class Relaxed(NamedTuple):
    """One rule a limiting-rule refit relaxes: its key, the rules with it relaxed, the rule and the change in
    words, the job key that sets it and what to weigh before changing it."""

    key: str
    rules: Rules
    name: str
    change: str
    where: str
    caution: str


# ISO 3 preferred numbers, series R10 (the series most of the profiles' stock lists follow): a stock-size trial adds
# the first two of it at least STOCK_STEP times the largest stock size held (a size a step up, not one a few per
# cent larger where a list is not of the series, e.g. 160 mm above a 152 mm auger).
R10 = (1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0)
STOCK_STEP = 1.2


def larger_stock(largest: float, count: int = 2) -> tuple[float, ...]:
    """The first ``count`` R10 preferred numbers at least ``STOCK_STEP`` x ``largest`` (mm)."""
    least = STOCK_STEP * largest * (1.0 - 1e-9)
    decade = 10.0 ** (math.floor(math.log10(least)) - 1)
    out: list[float] = []
    while len(out) < count:
        out += [round(m * decade, 6) for m in R10 if m * decade >= least][:count - len(out)]
        decade *= 10.0
    return tuple(out)


# A refit with smaller stock sizes is tried where the freeform voids narrower than every stock size (and wide
# enough for the least void) hold at least this share of the freeform voids' area. Measured 2026-12-04: the 300 x
# 100 bench plate with steel-cut slots (40 mm the smallest) has a few such voids holding little of it, and the refit
# (0.5 s) changed nothing; an 1800 x 600 bracket of our own with slots of 300 mm and up, every void.
NARROW_SHARE = 0.1


def smaller_stock(least: float, most: float, count: int = 2) -> tuple[float, ...]:
    """The largest ``count`` R10 preferred numbers from ``least`` to ``most`` (mm), rising; () where none lies there."""
    if not 0 < least <= most:
        return ()
    out: list[float] = []
    decade = 10.0 ** (math.floor(math.log10(least)) - 1)
    while decade * R10[0] <= most:
        out += [round(m * decade, 6) for m in R10 if least * (1 - 1e-9) <= m * decade <= most * (1 + 1e-9)]
        decade *= 10.0
    return tuple(sorted(set(out))[-count:])


def relaxed_rules(rules: Rules, void_options=None, *, thickness_mm: float = 0.0, widths_mm=(), areas_mm2=()
                  ) -> list[Relaxed]:
    """The rules a limiting-rule refit may relax: the web ratio and the minimum web halved where they are set;
    where some freeform void (``widths_mm``: the diameters of their largest inscribed circles, ``areas_mm2``: their
    areas) is narrower than the least void size in force for a panel ``thickness_mm`` thick, the least void size
    halved, or brought to 0.8 of the widest such void's width where halving would still leave it out; and, given
    the job's ``void_options``, the stock list of the family's slots or bores with two larger preferred sizes added
    (the widest slot bounds a slot's width however wide the freeform void is), and, where some freeform void admits
    the least void but no stock size, and such voids hold at least ``NARROW_SHARE`` of the freeform voids' area,
    two smaller preferred sizes added, up to 0.8 of the widest such void (the smallest slot bounds what a narrow
    freeform void can take)."""
    spacing = "the profile's value has its source, check it before changing it"
    trials = []
    least = least_void_size(rules, thickness_mm)
    narrow_mm = max([w for w in widths_mm if w < least], default=0.0)
    if narrow_mm > 0 and least > 0:
        per_t = float(rules.min_void_per_thickness or 0.0)
        by_thickness = least_void_by_thickness(rules, thickness_mm)
        less = min(least / 2.0, math.floor(0.8 * narrow_mm))
        if less > 0:
            relaxed = dataclasses.replace(rules, min_void_mm=min(rules.min_void_mm, less),
                                          min_void_per_thickness=per_t * less / least)
            # Slots and bores need a stock size the narrow voids can hold, or a smaller least void admits none:
            # preferred sizes from the new least void to 0.8 of the widest narrow void are added where the list
            # has none there.
            added, where = [], []
            r = resolve_settings(void_options, relaxed) if void_options is not None else None
            for family, field_name, key, tool in (("slot", "slot_widths_mm", "slot_widths", "slots"),
                                                  ("bore", "bore_diameters_mm", "bore_diameters", "bores")):
                if r is None or r.family not in (family, "mixed"):
                    continue
                stock = getattr(r, field_name)
                if any(less <= size <= narrow_mm for size in stock):
                    continue
                extra = smaller_stock(less, 0.8 * narrow_mm)
                if extra:
                    relaxed = dataclasses.replace(relaxed, **{field_name: tuple(sorted(set(stock) | set(extra)))})
                    added.append(f"{tool} of {' and '.join(f'{e:g}' for e in extra)} mm added")
                    where.append(f"[voids] {key}")
            trials.append(Relaxed(
                "min_void", relaxed,
                f"the least void size ({least:g} mm" + (f": {per_t:g} x the {thickness_mm:g} mm thickness)"
                                                        if by_thickness else ")"),
                f"a least void size of {less:g} mm" + (f" ({', '.join(added)})" if added else ""),
                (f"the profile {rules.profile}'s min_void_per_thickness" if by_thickness else "[rules] min_void")
                + "".join(f" and {w}" for w in where),
                "smaller voids are harder to make cleanly; " + spacing))
    if rules.web_ratio:
        trials.append(Relaxed("web_ratio", dataclasses.replace(rules, web_ratio=rules.web_ratio / 2.0),
                              f"the web ratio ({rules.web_ratio:g} x the larger void's size)",
                              f"a web ratio of {rules.web_ratio / 2.0:g}", "[rules] web_ratio", spacing))
    if rules.min_web_mm > 0:
        trials.append(Relaxed("min_web", dataclasses.replace(rules, min_web_mm=rules.min_web_mm / 2.0),
                              f"the minimum web ({rules.min_web_mm:g} mm)",
                              f"a minimum web of {rules.min_web_mm / 2.0:g} mm", "[rules] min_web", spacing))
    if void_options is not None:
        r = resolve_settings(void_options, rules)
        for family, stock, key, field_name, what, tool, measure in (
                ("slot", r.slot_widths_mm, "slot_widths", "slot_widths_mm", "the widest stock slot", "slots", "wide"),
                ("bore", r.bore_diameters_mm, "bore_diameters", "bore_diameters_mm", "the largest stock bore", "bores",
                 "across")):
            if r.family not in (family, "mixed") or not stock:
                continue
            more = larger_stock(max(stock))
            trials.append(Relaxed(key, dataclasses.replace(rules, **{field_name: tuple(stock) + more}),
                                  f"{what} ({max(stock):g} mm)",
                                  f"{tool} up to {more[-1]:g} mm {measure} (stock sizes of "
                                  f"{' and '.join(f'{m:g}' for m in more)} mm added)",
                                  f"[voids] {key}", "a larger cutter, bit or former must be at hand"))
            admitted = [size for size in stock if size >= least]
            narrow_voids = [(w, a) for w, a in zip(widths_mm, areas_mm2) if least <= w < min(admitted, default=0.0)]
            between = [w for w, _ in narrow_voids]
            held = sum(a for _, a in narrow_voids) >= NARROW_SHARE * sum(areas_mm2)
            fewer = smaller_stock(least, 0.8 * max(between)) if between and held else ()
            if fewer:
                trials.append(Relaxed(f"{key}_smaller", dataclasses.replace(
                    rules, **{field_name: tuple(sorted(set(stock) | set(fewer)))}),
                    f"the smallest stock {tool[:-1]} ({min(admitted):g} mm, wider than {len(between)} of the freeform "
                    f"voids)", f"{tool} of {' and '.join(f'{m:g}' for m in fewer)} mm added", f"[voids] {key}",
                    "a smaller cutter, bit or former must be at hand"))
    return trials


# The standard sizes are named as what held the layout back where they took more than this share of the area the
# voids removed as shaped (and more than the best relaxed rule gives back). Measured 2026-12-04: a 5.4 m precast
# spandrel of our own with one former ([voids] max_types = 1, regular hexagons): 18.6 % of the panel as shaped,
# 11.2 % at the one size; the limit named the minimum web, whose halving gave 5 % more.
STANDARD_COST = 0.1


def _standard_sizes_held(void_options, rules: Rules, made_mm2: float, free_mm2: float, shaped_mm2: float,
                         solid_mm2: float, rule_gain_mm2: float) -> str:
    """The sentence naming the standard sizes as what held the layout back, or "" where they did not."""
    lost = shaped_mm2 - made_mm2
    if void_options is None or shaped_mm2 <= 0 or lost <= STANDARD_COST * shaped_mm2 or lost <= rule_gain_mm2:
        return ""
    n = resolve_settings(void_options, rules).max_types
    return (f"the standard sizes held the voids to make to {100 * made_mm2 / solid_mm2:.1f} % of the panel "
            f"({100 * made_mm2 / free_mm2:.0f} % of the freeform saving of {100 * free_mm2 / solid_mm2:.1f} %): as "
            f"shaped they removed {100 * shaped_mm2 / solid_mm2:.1f} %, and at most {n} void size"
            f"{'s' if n != 1 else ''} ([voids] max_types = {n}) leave{'s' if n == 1 else ''} "
            f"{100 * made_mm2 / solid_mm2:.1f} %; more sizes keep more of it (each one more former, cutter or bit "
            "at hand).")


def limit_trials(rules: Rules, void_options, sizes, panel: Panel | None = None, freeform=()) -> list[Relaxed]:
    """The ``relaxed_rules`` a limiting-rule refit tries for a layout of voids of these ``sizes`` (mm): the minimum
    web only where it, not the web ratio, sets the web of a void of the middle size; the least void size only
    where some of the ``freeform`` voids of ``panel`` are narrower than it (each trial is a fitting run of its
    own)."""
    sizes = sorted(sizes) or [0.0]
    thickness = panel.thickness_mm if panel is not None else 0.0
    widths = [inscribed_width(g, FIT_RTOL) for g in freeform]
    return [t for t in relaxed_rules(rules, void_options, thickness_mm=thickness, widths_mm=widths,
                                     areas_mm2=[g.area for g in freeform])
            if t.key != "min_web" or rules.min_web_mm >= rules.web_ratio * sizes[len(sizes) // 2]]


def limiting_rule(panel: Panel, freeform, void_options, rules: Rules, made_voids, made_mm2: float,
                  free_mm2: float, *, energy=None, first_fit_mm2: float | None = None, layouts=None,
                  early: dict | None = None, shaped_mm2: float = 0.0) -> str:
    """Which rule held the made layout short of the freeform one, in words with the figure relaxing it would
    give: the layout's first fit (voids fitted and placed, no analysis; ``first_fit_mm2`` when the caller's run
    has it, made with the same ``energy``) is made again with the web ratio halved, where it sets the web with the
    minimum web halved, and for slots and bores with two larger stock sizes (``relaxed_rules``); the largest
    gain, applied to the made layout, is named. ``layouts``: the
    first fit's choice of layout for each freeform void (``Rationalised.layouts``): the refits then fit that
    kind of layout alone for each (the whole void, k pieces, a honeycomb of one pitch) in the wider room the
    relaxed rule leaves, instead of searching again: "the same layout, fitted again, removes X % more". Measured
    on the 300 x 100 bench plate, 0.39 s against 1.72 s for a new search, which found 49 % more against 47 %; on
    the demo 31 % against 23 % (a new search chooses by worth, not by area, so it need not remove more).
    ``early``: {rule key: a Future of its refit's area} started in the helper process while the voids were
    still being shaped (``limit_trials``); a refit missing there is made here. ``shaped_mm2``: the area the voids
    removed as shaped, before their sizes were standardised (``Rationalised.shaped_mm2``): where the standard sizes
    took more of it than the best relaxed rule would give back (and over ``STANDARD_COST`` of it), they are named
    first (``_standard_sizes_held``)."""
    trials = limit_trials(rules, void_options, [2.0 * float(shapely.minimum_bounding_radius(v.shape))
                                                for v in made_voids], panel, freeform)
    early = early or {}

    def first_fit(r: Rules, key: str = "") -> float:
        return result_or(early.get(key), first_fit_area, panel, freeform, void_options, r, energy, layouts)

    best = None
    base = (first_fit_mm2 if first_fit_mm2 else first_fit(rules)) if trials else 0.0
    for trial in trials:
        area = first_fit(trial.rules, trial.key)
        if best is None or area > best[0]:
            best = (area, trial)
    solid = float(panel.solid.area)
    share = 100.0 * made_mm2 / free_mm2
    if best is not None and base <= 0 < best[0]:
        area, trial = best
        made_words = (f"the voids to make, laid over the region instead, remove {100 * made_mm2 / solid:.1f} % of "
                      f"the panel, {share:.0f} % of the freeform saving of {100 * free_mm2 / solid:.1f} %"
                      if made_mm2 > 0 else f"the freeform layout removed {100 * free_mm2 / solid:.1f} % of the panel")
        return (f"{trial.name} left no void to fit in the freeform voids ({made_words}); with {trial.change} the "
                "freeform voids, fitted again, remove about "
                f"{100 * area / solid:.1f} % of the panel before the voids are shaped and checked ({trial.where}; "
                f"{trial.caution}).")
    if best is None or base <= 0 or best[0] <= base * 1.02:
        sized = _standard_sizes_held(void_options, rules, made_mm2, free_mm2, shaped_mm2, solid, 0.0)
        if sized:
            return sized
        names = {"web_ratio": "the web ratio", "min_web": "the minimum web", "min_void": "the least void size"}
        spacing = [names[t.key] for t in trials if t.key in names]
        stock = len(spacing) < len(trials)
        if not trials:
            return (f"the voids to make keep {share:.0f} % of the freeform saving; no web rule or stock list is set "
                    "that a refit could relax: the least void, the least feature and the stiffness of the freeform "
                    "layout (which the voids to make must not fall below) hold them back.")
        other = "larger or smaller" if any(t.key.endswith("_smaller") for t in trials) else "larger"
        tried = ([" or ".join(spacing) + " halved"] if spacing else []) + ([f"{other} stock sizes"] if stock else [])
        return (f"the voids to make keep {share:.0f} % of the freeform saving; fitted again with "
                f"{', or with '.join(tried)}, the same layout keeps less than 2 % more, so no such rule is what holds "
                f"them back: {'' if stock else 'the stock sizes, '}the least feature and the stiffness of the freeform "
                "layout (which the voids to make must not fall below) do.")
    area, trial = best
    gain = area / base
    sized = _standard_sizes_held(void_options, rules, made_mm2, free_mm2, shaped_mm2, solid, made_mm2 * (gain - 1.0))
    if sized:
        return (f"{sized} Of the rules, {trial.name} would give the most: with {trial.change} the same layout, fitted "
                f"again, removes {100 * (gain - 1):.0f} % more ({trial.where}; {trial.caution}).")
    return (f"{trial.name} held the voids to make to {100 * made_mm2 / solid:.1f} % of the panel ({share:.0f} % of "
            f"the freeform saving of {100 * free_mm2 / solid:.1f} %); with {trial.change} the same layout, fitted "
            f"again, removes {100 * (gain - 1):.0f} % more, so the panel could lose about "
            f"{100 * made_mm2 * gain / solid:.1f} % ({trial.where}; {trial.caution}).")
