"""The helper process (toolkit/helper.py): the work it shares gives the answers the job's own process would, in
the same order; it is not started where it may not be; a piece it fails on is done here."""

from __future__ import annotations

import time
from concurrent.futures import Future
from dataclasses import replace

import numpy as np
import pytest
from shapely.geometry import box

from toolkit import helper as helper_module
from toolkit.fe.grid import make_grid
from toolkit.helper import Helper, analysis_fits_elsewhere, may_start, share_out
from toolkit.model import Material, Panel, PointLoad, Rules, Support
from toolkit.voids.layout import LARGEST_FIRST, rationalise
from toolkit.voids.settings import VoidOptions


def _square(x: int) -> int:
    return x * x


class _Stand_in:
    """A helper that answers at once in this process, or fails every piece (``broken``)."""

    def __init__(self, broken: bool = False):
        self.ready = self.idle = True
        self.broken, self.sent = broken, 0

    def submit(self, fn, *args):
        self.sent += 1
        future: Future = Future()
        if self.broken:
            future.set_exception(RuntimeError("lost"))
        else:
            future.set_result(fn(*args))
        return future


def test_shared_work_gives_every_answer_in_the_order_of_the_tasks():
    tasks = {f"t{k}": (k,) for k in (5, 3, 9, 1, 7, 2)}
    cost = {f"t{k}": float(k) for k in (5, 3, 9, 1, 7, 2)}
    for stand_in in (_Stand_in(), _Stand_in(broken=True), None):
        got = share_out(stand_in, _square, tasks, cost=cost.get)
        assert list(got) == list(tasks)
        assert got == {k: v[0] ** 2 for k, v in tasks.items()}
        if stand_in is not None:
            assert stand_in.sent >= 1  # the helper was given work (and, broken, it was done here instead)


class _Lockstep:
    """A helper that finishes the oldest piece handed to it each time this process finishes one of its own: its
    pieces are begun as handed over (they cannot be taken back), as in a process pool."""

    ready = idle = True

    def __init__(self):
        self.pending, self.sent, self.done = [], 0, []

    def submit(self, fn, *args):
        future: Future = Future()
        future.set_running_or_notify_cancel()
        self.pending.append((future, fn, args))
        self.sent += 1
        return future

    def finish_one(self):
        if self.pending:
            future, fn, args = self.pending.pop(0)
            self.done.append(args[0])
            future.set_result(fn(*args, here=False))


def test_shared_work_leaves_the_helper_no_piece_queued_once_few_are_left():
    # With two pieces in flight to the end, the helper would hold one queued that this process, out of work, must
    # wait for; once no more than two are left it takes one at a time. In lockstep the six pieces split three and
    # three, and the sharing ends without waiting on a piece nobody runs.
    import threading

    helper = _Lockstep()

    def work(x, here=True):
        if here:
            helper.finish_one()
        return x * x

    tasks = {k: (k,) for k in range(6)}
    got = {}
    runner = threading.Thread(target=lambda: got.update(share_out(helper, work, tasks)))
    runner.start()
    runner.join(timeout=10)
    while helper.pending:  # a piece left queued there: let the sharing end, then fail below
        helper.finish_one()
    runner.join()
    assert got == {k: k * k for k in range(6)}
    assert sorted(helper.done) == [3, 4, 5] and not helper.pending


def test_a_busy_helper_shares_only_when_the_caller_allows_it():
    tasks = {f"t{k}": (k,) for k in (5, 3, 9, 1)}
    busy = _Stand_in()
    busy.idle = False  # work of the caller's own still queued there
    assert share_out(busy, _square, tasks) == {k: v[0] ** 2 for k, v in tasks.items()} and busy.sent == 0
    assert share_out(busy, _square, tasks, busy_ok=True) == {k: v[0] ** 2 for k, v in tasks.items()}
    assert busy.sent >= 1


def test_the_honeycomb_fitted_two_at_a_time_keeps_the_same_voids():
    # lattice_layout with a helper fits the next honeycomb there while it fits one here: the same voids as alone,
    # with the bound (the search stops early) and without it (every honeycomb), and the helper was given work.
    from dataclasses import replace

    from shapely.geometry import Polygon

    from toolkit.voids import layout as L

    r = replace(L.resolve_settings(VoidOptions(family="polygon", sides=6, snap_mm=0.0),
                                   Rules(min_web_mm=25, edge_cover_mm=25, min_void_mm=20)), web_ratio=0.5)
    region = Polygon([(0, 0), (2400, 0), (2400, 700), (900, 700), (0, 450)])
    field = lambda p: 1.0 + np.asarray(p)[:, 0] / 500.0  # noqa: E731
    score, bound = L.Worth(field, 10.0, 4.0), L.Worth(field, 10.0, 4.0, ceiling=True)
    for ceiling in (bound, None):
        alone = L.lattice_layout(region, "polygon", r, score, bound=ceiling)
        stand_in = _Stand_in()
        paired = L.lattice_layout(region, "polygon", r, score, bound=ceiling, helper=stand_in)
        assert alone and [(d.centre, d.corners) for d in paired] == [(d.centre, d.corners) for d in alone]
        assert stand_in.sent >= 1


def test_a_helper_is_not_started_where_it_may_not_be(monkeypatch):
    assert Helper(wanted=False).why_not == "not asked for"
    monkeypatch.setenv("LACUNA_THREADS", "1")
    assert "one core" in may_start()
    monkeypatch.delenv("LACUNA_THREADS")
    monkeypatch.setattr(helper_module, "side_threads", lambda: 2)
    monkeypatch.setattr(helper_module.sys, "executable", "/opt/cad/bin/host-app")
    assert "not a Python interpreter" in may_start()
    with Helper() as h:  # nothing is started: the work is done here
        assert not h.ready
        assert share_out(h, _square, {"a": (3,), "b": (4,)}) == {"a": 9, "b": 16}


@pytest.fixture(scope="module")
def ready_helper():
    """A helper process that has answered (one for the tests below: starting one costs about a second)."""
    if may_start():
        pytest.skip(f"no helper process on this machine: {may_start()}")
    with Helper(modules=("toolkit.voids.layout",)) as h:
        waited = time.monotonic()
        while not h.ready and time.monotonic() - waited < 120.0:
            time.sleep(0.1)
        assert h.ready, h.why_not
        yield h


# A cantilever plate of our own with four freeform voids, and the rules and settings they are fitted under.
PANEL = Panel(width_mm=1200.0, height_mm=400.0, thickness_mm=10.0, material=Material(E_MPa=210000.0, nu=0.3),
              supports=(Support(((0.0, 0.0), (0.0, 400.0)), "xy"),),
              loads=(PointLoad((1200.0, 150.0), (0.0, -20000.0)),), element_size_mm=20.0)
FREEFORM = [box(150, 150, 420, 250), box(520, 160, 760, 240), box(860, 170, 1040, 230), box(520, 300, 700, 350)]
RULES = Rules(min_web_mm=30.0, edge_cover_mm=30.0, min_void_mm=20.0, bearing_clearance_mm=60.0, web_ratio=0.3)
OPTS = VoidOptions(family="polygon", sides=6, snap_mm=0.0)


def _layout(res):
    """What must be the same to the bit: the voids, the notes, the drops and the changes."""
    return [(v.family, v.outline, v.area_mm2) for v in res.voids], res.notes, res.dropped, res.changes


def test_the_helper_process_gives_the_same_layout(ready_helper):
    # A strain-energy field that rises towards the support, so that the worth of each layout matters: fitted here
    # alone and with the helper process, the layouts must be the same.
    grid = make_grid(PANEL.width_mm, PANEL.height_mm, PANEL.element_size_mm)
    x = (np.arange(grid.n_elements) % grid.nx + 0.5) * grid.dx
    energy = (grid, 1.0 + 3.0 * (1.0 - x / PANEL.width_mm) ** 2)
    alone = rationalise(PANEL, FREEFORM, OPTS, RULES, energy=energy)
    sent = ready_helper.sent
    shared = rationalise(PANEL, FREEFORM, OPTS, RULES, energy=energy, helper=ready_helper)
    assert ready_helper.sent >= sent + 2  # the honeycomb over the region and some voids' candidates went there
    assert alone.voids and _layout(shared) == _layout(alone)


def test_the_limiting_rule_refits_made_in_the_helper_give_the_same_sentence(ready_helper):
    # The demo's job (its layout is held back by the web ratio): the limiting rule's refits made in the helper
    # process (as the pipeline starts them while the voids are shaped), made here, and handed over as failed
    # pieces (made here again) give the same sentence, the one the job reported.
    from dataclasses import replace

    from toolkit import pipeline
    from toolkit.api import demo_files
    from toolkit.inputs import load_panel
    from toolkit.voids.layout import first_fit_area

    drawing, job_path = demo_files()
    panel, job, _ = load_panel(drawing, job_path)
    run = pipeline.optimize_panel(panel, job)
    assert run.limit.startswith("the web ratio")
    freeform = list(run.freeform)
    made, free = sum(v.area_mm2 for v in run.voids), sum(g.area for g in freeform)
    energy = (run.solid.grid, pipeline.strain_energy_density(run.solid, panel))
    options = replace(job.voids, optimize_symmetry=job.optimize.symmetry)
    layouts = run.rationalised.layouts
    sent = ready_helper.sent
    there = {key: ready_helper.submit(first_fit_area, panel, freeform, options, relaxed, energy, layouts)
             for key, relaxed, *_ in pipeline.relaxed_rules(run.rules, options)}
    lost: Future = Future()
    lost.set_exception(RuntimeError("the helper process was lost"))
    texts = [pipeline.limiting_rule(panel, freeform, options, run.rules, run.voids, made, free, energy=energy,
                                    first_fit_mm2=run.rationalised.first_fit_mm2, layouts=layouts, early=early)
             for early in (there, None, {key: lost for key in there})]
    assert ready_helper.sent == sent + len(there) >= 1
    assert texts == [run.limit] * 3


def test_work_the_helper_cannot_take_is_done_here(ready_helper):
    # An energy field given as a function the helper cannot unpickle (a lambda): each void's candidates fail to
    # go over and are fitted here; the layout is the one made without the helper.
    field = lambda p: 1.0 + 3.0 * (1.0 - np.asarray(p)[:, 0] / PANEL.width_mm) ** 2  # noqa: E731
    alone = rationalise(PANEL, FREEFORM, OPTS, RULES, energy=field)
    sent = ready_helper.sent
    shared = rationalise(PANEL, FREEFORM, OPTS, RULES, energy=field, helper=ready_helper)
    assert ready_helper.sent > sent  # it was offered work, and could not take it
    assert alone.voids and _layout(shared) == _layout(alone)


def test_local_models_shared_with_the_helper_give_the_same_figures(ready_helper):
    # The edge stress at each of three made voids of the cantilever plate: the local models computed here one by
    # one, and shared between this process and the helper (as the pipeline's checks do), give the same figures.
    from shapely.geometry import Point

    from toolkit.analysis import analyze
    from toolkit.edge_stress import edge_stresses, edge_stresses_shared
    from toolkit.model import Void

    from toolkit.pipeline import with_voids

    voids = tuple(Void(f"V{k + 1}", "bore", (x, y), 2 * r, Point(x, y).buffer(r, 32))
                  for k, (x, y, r) in enumerate([(300, 200, 60), (450, 210, 50), (880, 210, 50)]))
    solid = analyze(PANEL)
    final = analyze(with_voids(PANEL, voids), grid=solid.grid)
    alone = edge_stresses(PANEL, voids, final, solid)
    sent = ready_helper.sent
    shared = edge_stresses_shared(PANEL, voids, final, solid, ready_helper)
    assert ready_helper.sent > sent
    assert all(a.peak_MPa is not None for a in alone)
    assert [repr(s) for s in shared] == [repr(a) for a in alone]


def test_the_freeform_re_analysis_made_in_the_helper_is_the_one_made_here(ready_helper):
    # The pipeline sends the freeform layout's re-analysis to the helper while the voids are shaped: its answer
    # (with a new grid of the same size) must be the analysis made here, to the bit.
    from toolkit.analysis import analyze
    from toolkit.fe.grid import make_grid
    from toolkit.pipeline import analysis_elsewhere, with_freeform

    grid = make_grid(PANEL.width_mm, PANEL.height_mm, PANEL.element_size_mm)
    panel = with_freeform(PANEL, FREEFORM, grid)
    here = analyze(panel, grid)
    there = ready_helper.submit(analysis_elsewhere, panel, grid.nx, grid.ny, grid.dx, grid.dy).result()
    assert there.grid == grid and "edof" not in vars(there.grid)  # no cached index arrays came back
    assert there.compliance_Nmm == here.compliance_Nmm
    assert np.array_equal(there.U, here.U) and np.array_equal(there.stresses, here.stresses)


def test_the_freeform_re_analysis_goes_to_the_helper_only_where_the_free_memory_holds_it(monkeypatch):
    # The helper's analysis is a second factor beside the job's own, which the job's memory check did not count:
    # it is sent only while the memory free then holds an analysis of the grid (limits' estimate).
    from toolkit import limits
    from toolkit.fe.grid import Grid
    from toolkit.helper import room_for_analysis_elsewhere

    grid = Grid(300, 100, 10.0, 10.0)
    need = limits.peak_memory_bytes(300, 100, 10.0, 10.0, stage="analysis")
    assert 100e6 < need < 1e9
    monkeypatch.setattr(limits, "available_memory_bytes", lambda: need * 0.99)
    assert not room_for_analysis_elsewhere(grid)
    monkeypatch.setattr(limits, "available_memory_bytes", lambda: need * 1.01)
    assert room_for_analysis_elsewhere(grid)


def test_a_layout_made_largest_first_in_the_helper_is_the_one_made_here(ready_helper):
    # A 3000 x 1000 steel plate (25 mm elements, half-MBB loading, hexagons, steel-cut) takes the largest-first fit;
    # where the helper is ready that fit is made there while this process fits the candidates: the same voids.
    from dataclasses import replace

    from panels import half_mbb_plate
    from toolkit import pipeline

    panel, job = half_mbb_plate()
    run = pipeline.optimize_panel(panel, job)
    options = replace(job.voids, optimize_symmetry=job.optimize.symmetry)
    energy = (run.solid.grid, pipeline.strain_energy_density(run.solid, panel))
    told = []  # the first fit's layouts as the caller is told them (the finer honeycomb is taken after it here)
    alone = rationalise(panel, list(run.freeform), options, run.rules, energy=energy,
                        on_first_fit=lambda layouts, sizes: told.append(layouts))
    sent = ready_helper.sent
    shared = rationalise(panel, list(run.freeform), options, run.rules, energy=energy, helper=ready_helper)
    assert ready_helper.sent > sent
    assert (-1, "polygon", LARGEST_FIRST) in told[0]
    assert [repr(v) for v in shared.voids] == [repr(v) for v in alone.voids]
    assert shared.notes == alone.notes and shared.layouts == alone.layouts


def _honeycomb_cases():
    """Two jobs of our own whose honeycomb over the region is laid and analysed: a glulam beam with bores, where it
    is taken (tests/test_voids_layout.py), and the half-MBB steel plate with hexagons, where it is not."""
    from panels import half_mbb_plate
    from test_voids_layout import _glulam_case
    from toolkit import pipeline

    for panel, job in (_glulam_case("bore"), half_mbb_plate()):
        run = pipeline.optimize_panel(panel, job)
        options = replace(job.voids, optimize_symmetry=job.optimize.symmetry)
        yield run, panel, options, (run.solid.grid, pipeline.strain_energy_density(run.solid, panel))


@pytest.mark.parametrize("process", ["helper process", "stand-in", "broken"])
def test_the_honeycomb_weighed_in_the_helper_gives_the_layout_made_here(process, request, monkeypatch):
    # The large honeycomb over the region is laid, placed and cut down to the stiffness cap in the helper, which
    # then finishes the layout the stage starts from (the honeycomb's where it is taken, else the first fit's),
    # while this process weighs and finishes the finer honeycomb. The layout, the notes and the analyses counted
    # are those of the run without a helper; a helper that fails leaves its work to this process, with the same
    # outcome.
    helper = request.getfixturevalue("ready_helper") if process == "helper process" else \
        _Stand_in(broken=process == "broken")
    sent = []
    submit = helper.submit

    def recording(fn, *args):
        future = submit(fn, *args)
        sent.append((fn.__name__, future))
        return future

    monkeypatch.setattr(helper, "submit", recording)
    taken = []
    for run, panel, options, energy in _honeycomb_cases():
        told_alone, told_shared = [], []
        alone = rationalise(panel, list(run.freeform), options, run.rules, energy=energy,
                            on_first_fit=lambda layouts, sizes: told_alone.append(layouts))
        sent.clear()
        shared = rationalise(panel, list(run.freeform), options, run.rules, energy=energy, helper=helper,
                             on_first_fit=lambda layouts, sizes: told_shared.append(layouts))
        # the limiting rule's refits are last told of the layout made, and told no more often than in sequence
        assert told_shared[-1] == shared.layouts == told_alone[-1]
        assert len(told_shared) <= len(told_alone)
        weighed = [f for name, f in sent if name == "finished_elsewhere"]
        assert len(weighed) == 1
        if process != "broken":
            honey, done, analyses = weighed[0].result()
            assert honey[1] is not None and done.shaped is not None and analyses >= 2  # weighed and shaped there
        assert [repr(v) for v in shared.voids] == [repr(v) for v in alone.voids]
        assert shared.notes == alone.notes and shared.layouts == alone.layouts
        assert shared.shape.analyses == alone.shape.analyses
        assert shared.shape.compliance_Nmm == alone.shape.compliance_Nmm
        taken.append((any(n.startswith("the voids are laid as a honeycomb") for n in alone.notes),
                      any(n.startswith("the finer honeycomb") for n in alone.notes)))
    # the finer honeycomb taken after the shaping on both (the beam's large honeycomb taken before it, the plate's
    # not: test_voids_layout.py has the plate's without the finer one)
    assert taken == [(True, True), (True, True)]


@pytest.mark.parametrize("family", ["slot", "polygon"])
def test_analyses_counted_with_the_helper_leave_out_a_fill_given_up_as_in_sequence(family):
    # The shape optimisation's count stops at its end: a fill that made analyses and was then given up is not in it
    # (in sequence it came after the count was taken). Finished in the helper, the count is this process's
    # analyses plus the helper's up to that end: the central-load beam of the examples under the precast rules
    # counted 19 against 14 (slots) and 21 against 18 (n-gons) when the helper's whole count was added.
    from pathlib import Path

    from toolkit import pipeline
    from toolkit.inputs import load_panel
    from toolkit.jobfile import read_job

    example = Path(__file__).resolve().parents[1] / "fixtures" / "examples" / "beam-central-load"
    job = read_job(example.with_suffix(".toml"))
    job = replace(job, voids=replace(job.voids, family=family), rules=replace(job.rules, profile="precast-formed"))
    panel, job, _ = load_panel(example.with_suffix(".dxf"), job=job)
    run = pipeline.optimize_panel(panel, job)
    options = replace(job.voids, optimize_symmetry=job.optimize.symmetry)
    energy = (run.solid.grid, pipeline.strain_energy_density(run.solid, panel))
    alone = rationalise(panel, list(run.freeform), options, run.rules, energy=energy)
    shared = rationalise(panel, list(run.freeform), options, run.rules, energy=energy, helper=_Stand_in())
    assert [repr(v) for v in shared.voids] == [repr(v) for v in alone.voids] and shared.notes == alone.notes
    assert shared.shape.analyses == alone.shape.analyses


@pytest.mark.parametrize("broken", [False, True], ids=["stand-in", "broken"])
def test_a_honeycomb_not_taken_in_the_helper_leaves_the_first_fits_layout(broken, monkeypatch):
    # With the large honeycombs alone (LATTICE_FINE emptied in this process, so a stand-in helper), the half-MBB
    # plate's honeycomb is weighed in the helper and not taken: the first fit's layout, finished meanwhile, is kept,
    # with the voids, notes and analyses counted of the run without a helper (the helper's counted as in sequence).
    from panels import half_mbb_plate
    from toolkit import pipeline
    from toolkit.voids import layout

    monkeypatch.setattr(layout, "LATTICE_FINE", ())
    panel, job = half_mbb_plate()
    run = pipeline.optimize_panel(panel, job)
    options = replace(job.voids, optimize_symmetry=job.optimize.symmetry)
    energy = (run.solid.grid, pipeline.strain_energy_density(run.solid, panel))
    alone = rationalise(panel, list(run.freeform), options, run.rules, energy=energy)
    stand_in = _Stand_in(broken=broken)
    sent = []
    submit = stand_in.submit

    def recording(fn, *args):
        sent.append(fn.__name__)
        return submit(fn, *args)

    monkeypatch.setattr(stand_in, "submit", recording)
    shared = rationalise(panel, list(run.freeform), options, run.rules, energy=energy, helper=stand_in)
    assert "finished_elsewhere" in sent
    assert not any("honeycomb" in n for n in alone.notes)
    assert [repr(v) for v in shared.voids] == [repr(v) for v in alone.voids]
    assert shared.notes == alone.notes and shared.layouts == alone.layouts
    assert shared.shape.analyses == alone.shape.analyses


def test_the_evaluator_made_ahead_in_the_helper_serves_the_honeycomb_and_answers_as_a_new_one(monkeypatch):
    # While the optimiser runs, the helper makes the voids' stage's second Evaluator (layout.warm_evaluator); the
    # honeycomb weighed there then uses it, its analyses refactors of its solver: the layout of the run without a
    # helper. Made for another panel it is not used.
    from toolkit.voids import layout as L
    from toolkit.voids import shape as S

    run, panel, options, energy = next(_honeycomb_cases())
    alone = rationalise(panel, list(run.freeform), options, run.rules, energy=energy)
    made = []
    init = S.Evaluator.__init__

    def counting(self, *args, **kwargs):
        made.append(1)
        init(self, *args, **kwargs)

    monkeypatch.setattr(S.Evaluator, "__init__", counting)
    g = energy[0]
    for other, used in ((None, True), (10.0, False)):
        target = panel if other is None else replace(panel, thickness_mm=other)
        assert L.warm_evaluator(target, g.nx, g.ny, g.dx, g.dy, "auto") and len(L._WARM) == 1
        made.clear()
        shared = rationalise(panel, list(run.freeform), options, run.rules, energy=energy, helper=_Stand_in())
        assert not L._WARM  # taken, or dropped when made for another panel
        assert len(made) == (1 if used else 2)  # the job's own Evaluator, and the helper's where not made ahead
        assert [repr(v) for v in shared.voids] == [repr(v) for v in alone.voids] and shared.notes == alone.notes


def test_a_job_whose_honeycomb_is_taken_after_the_helper_weighed_it_is_the_job_made_alone(monkeypatch):
    # The whole job with the helper on the glulam beam at 8 mm elements (28,125: the helper starts), n-gons: the
    # honeycomb weighed there is taken, so the layout the helper finishes is the honeycomb's, and the limiting
    # rule's refits are sent for it alone. Voids, notes and the limiting rule's sentence are those of the job made
    # without the helper.
    if may_start():
        pytest.skip(f"no helper process on this machine: {may_start()}")
    from test_voids_layout import _glulam_case
    from toolkit import pipeline

    panel, job = _glulam_case("polygon")
    panel = replace(panel, element_size_mm=8.0)
    alone = pipeline.optimize_panel(panel, job)
    sent = []
    submit = Helper.submit

    def recording(self, fn, *args, **kwargs):
        sent.append(fn.__name__)
        return submit(self, fn, *args, **kwargs)

    monkeypatch.setattr(Helper, "submit", recording)
    asked = []  # the limiting rule's trials worked out: at each first fit the helper is told of, and in the checks
    trials = pipeline.limit_trials
    monkeypatch.setattr(pipeline, "limit_trials", lambda *a: asked.append(1) or trials(*a))
    shared = pipeline.optimize_panel(panel, job, helper=True)
    assert any(n.startswith("the voids are laid as a honeycomb") for n in alone.rationalised.notes)
    assert "finished_elsewhere" in sent and "first_fit_area" in sent
    # told once, of the layout the helper finished (the honeycomb, taken there before any refit was sent); then the
    # checks
    assert len(asked) == 2
    assert [repr(v) for v in shared.voids] == [repr(v) for v in alone.voids]
    assert shared.rationalised.notes == alone.rationalised.notes and shared.limit == alone.limit
    assert shared.rationalised.shape == alone.rationalised.shape
    # the re-analyses: the made layout's here both times (a refactor within the voids' stage's solver), the
    # freeform layout's in the helper (a new solver) or here alone (a new solver too): the same bits
    assert "analysis_elsewhere" in sent or not analysis_fits_elsewhere(alone.solid.grid)
    assert np.array_equal(shared.final.U, alone.final.U)
    assert np.array_equal(shared.freeform_analysis.U, alone.freeform_analysis.U)
    assert np.array_equal(shared.freeform_analysis.stresses, alone.freeform_analysis.stresses)
