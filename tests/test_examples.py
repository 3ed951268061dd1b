"""The shipped examples (fixtures/examples/, made by fixtures/make_examples.py): the first cases a practitioner
checks, each held to the outcome the trade expects of it.

Each example runs the whole job once (voids to make, local edge models, every file: 45 s for the seven on two
cores); the layout measures read the optimiser's layout of that run. The pin-and-roller variants run the
optimiser alone.

Figures quoted as "measured here" are from the committed examples on the development machine; the thresholds
beside them say where they come from. Every measure is also shown able to fail (a layout it must reject).
"""

from __future__ import annotations

import dataclasses
import importlib.util
from pathlib import Path

import numpy as np
import pytest

from toolkit.api import optimize_file
from toolkit.inputs import load_panel
from toolkit.optimize import ZoneSettings, build_problem, run_beso
from toolkit.optimize.symmetry import mirror_map
from toolkit.pipeline import job_rules
from toolkit.voids.extract import freeform_voids

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures"
EXAMPLES = FIXTURES / "examples"


def _maker():
    spec = importlib.util.spec_from_file_location("make_examples", FIXTURES / "make_examples.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


MAKER = _maker()


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    """The whole job on every example, once: name -> Outcome (summary, files written, the run)."""
    out = tmp_path_factory.mktemp("examples")
    return {name: optimize_file(EXAMPLES / f"{name}.dxf", EXAMPLES / f"{name}.toml", out_dir=out / name)
            for name in MAKER.EXAMPLES}


@pytest.fixture(scope="module")
def layouts(runs):
    """name -> (problem, BesoResult): each run's optimiser layout with the problem it solved."""
    out = {}
    for name, outcome in runs.items():
        problem, _ = example_problem(name)
        beso = outcome.run.beso
        # The pipeline also closes to the optimiser what no void could be made in; the measures need the grid,
        # loads and supports, which are the same.
        assert beso.densities.shape == (problem.grid.n_elements,)
        out[name] = (dataclasses.replace(problem, design=beso.design), beso)
    return out


def design_solid(problem, result):
    """(ny, nx) booleans: solid elements of the optimiser's layout inside its design region."""
    g = problem.grid
    return ((result.densities >= 1.0) & problem.design).reshape(g.ny, g.nx)


def iou(a: np.ndarray, b: np.ndarray) -> float:
    return float(np.count_nonzero(a & b) / np.count_nonzero(a | b))


def example_problem(name: str, *, roller: bool = False):
    """The optimiser's problem of an example as the pipeline builds it (the rules' zones; the region open to voids
    is left out: it only narrows the design region), and the job; optionally the right-hand bearing a roller."""
    panel, job, _ = load_panel(EXAMPLES / f"{name}.dxf", EXAMPLES / f"{name}.toml")
    if roller:
        left, right = panel.supports
        panel = dataclasses.replace(panel, supports=(left, dataclasses.replace(right, fix="y")))
    r = job_rules(job)
    zones = ZoneSettings(edge_cover_mm=r.edge_cover_mm, bearing_clearance_mm=r.bearing_clearance_mm,
                         min_web_mm=r.min_web_mm)
    return build_problem(panel, zones), job


def beso_only(name: str, *, roller: bool = False):
    """The optimiser alone on an example (no voids stage), optionally with the right-hand bearing a roller."""
    problem, job = example_problem(name, roller=roller)
    return problem, run_beso(problem, job.optimize)


def test_examples_are_what_the_script_makes():
    # The committed job files are the script's text, so `python fixtures/make_examples.py` makes them again.
    for name, (width, height, _note, job) in MAKER.EXAMPLES.items():
        assert (EXAMPLES / f"{name}.toml").read_text() == job
        panel, _, _ = load_panel(EXAMPLES / f"{name}.dxf", EXAMPLES / f"{name}.toml")
        assert (panel.width_mm, panel.height_mm) == (width, height)


def test_every_example_converges(layouts):
    for name, (_, result) in layouts.items():
        assert result.converged, name


def test_central_point_load_gives_a_symmetric_truss_like_layout(layouts):
    problem, result = layouts["beam-central-load"]
    m = mirror_map(problem.grid, "x")
    d = result.densities
    # Symmetric problem (both ends pinned, load at mid-span), no symmetry option: at least 98 % of elements equal
    # their mirror images (the threshold of the optimiser's own test; measured here: 99.0 %, 16 of 1,600).
    assert np.mean(d == d[m]) >= 0.98
    # Truss-like: members with openings between them, not one hole in a solid beam: at least 4 freeform voids
    # (measured here: 7). Common practice, no source: a point load on a simply supported deep beam is carried
    # by a web of struts and ties.
    assert len(freeform_voids(problem.grid, d)) >= 4
    # ...which a single off-centre load does not give symmetric: the symmetry measure can fail (measured: 0.41
    # IoU between the 0.3 and 0.7 layouts unmirrored, below).


def test_load_at_0_3_and_0_7_span_give_mirrored_layouts(layouts):
    pa, ra = layouts["beam-load-at-0.3"]
    _, rb = layouts["beam-load-at-0.7"]
    m = mirror_map(pa.grid, "x")
    design = pa.design & pa.design[m]
    void_a = (ra.densities < 1.0) & design
    void_b = (rb.densities < 1.0) & design
    # Both ends pinned alike: the 0.7 problem is the mirror image of the 0.3 one, so are its layouts. IoU of the
    # optimiser's voids >= 0.9 (the threshold asked for in the issue; measured here: 1.00).
    assert iou(void_a, void_b[m]) >= 0.9
    # Unmirrored the two differ: the measure can fail (measured here: 0.41).
    assert iou(void_a, void_b) < 0.7


def test_pin_and_roller_mirror_too_but_need_a_tie():
    # A pin and a roller under vertical loads: the pin's horizontal reaction is zero, so swapping which end is the
    # pin moves the panel by a rigid shift only and strains nothing: mirror problems still give mirror layouts (a
    # consequence of the mathematics; measured here: IoU 1.00). What changes is the layout itself: with nothing to
    # take an arch's thrust the bottom edge must work as a tie, so more material stays along the bottom than with
    # two pins (common practice, no source). Measured here: the roller's layout keeps 0.76 of the bottom quarter's
    # design elements against 0.51 with two pins, and the two layouts' voids overlap by IoU 0.47.
    pa, ra = beso_only("beam-load-at-0.3", roller=True)
    _, rb = beso_only("beam-load-at-0.7", roller=True)
    _, rp = beso_only("beam-load-at-0.3")
    m = mirror_map(pa.grid, "x")
    design = pa.design & pa.design[m]
    void = lambda r: (r.densities < 1.0) & design  # noqa: E731
    assert iou(void(ra), void(rb)[m]) >= 0.9
    assert iou(void(ra), void(rp)) < 0.9
    y = pa.grid.element_centres[:, 1]
    band = pa.design & (y < 150.0)  # the bottom quarter of the depth
    assert (ra.densities[band] >= 1.0).mean() > (rp.densities[band] >= 1.0).mean()


def root_and_tip(problem, result) -> tuple[float, float]:
    """Solid share of the design region in the left (root) third of the panel and in the right (tip) third."""
    solid = design_solid(problem, result)
    inside = problem.design.reshape(solid.shape)
    third = solid.shape[1] // 3
    return (solid[:, :third].sum() / inside[:, :third].sum(), solid[:, -third:].sum() / inside[:, -third:].sum())


def test_cantilever_plate_tapers_to_its_tip(layouts):
    root, tip = root_and_tip(*layouts["cantilever-plate"])
    # The bending moment grows from zero at the tip to P L at the root (statics), so the material kept grows
    # toward the root. Solid share of the design region, root third against tip third, at least 0.1 apart (our
    # margin; measured here: 0.53 against 0.32).
    assert root >= tip + 0.1


def arch_line(problem, result):
    """x (mm) and the centroid line of the material: per column of elements, the mean height of its solid design
    elements (columns with none are left out)."""
    g = problem.grid
    solid = design_solid(problem, result)
    ys = (np.arange(g.ny) + 0.5) * g.dy
    cols = [i for i in range(g.nx) if solid[:, i].any()]
    return (np.array(cols) + 0.5) * g.dx, np.array([ys[solid[:, i]].mean() for i in cols])


def test_wall_leaf_on_two_bearings_carries_its_load_on_an_arch(layouts):
    problem, result = layouts["wall-leaf-on-two-bearings"]
    g = problem.grid
    xs, line = arch_line(problem, result)
    over_bearings = line[(xs < 120.0) | (xs > g.width_mm - 120.0)].mean()   # the bearing pads are 120 mm long
    crown = line[np.abs(xs - g.width_mm / 2.0) < 2 * g.dx].mean()
    # An arch between the bearings rises from them to its crown at mid-span. Rise of the centroid line at least
    # half the wall's height (our margin; measured here: 1,688 mm of 2,400, from 652 mm over the bearings to
    # 2,340 mm at mid-span, just under the top edge band). Columns of material standing on the
    # bearings would give a flat line near mid-height (rise about 0), so the measure can fail.
    assert crown - over_bearings >= 0.5 * g.height_mm
    # The line of thrust of a load spread evenly along the span is a parabola (a consequence of statics); the
    # centroid line follows the one through the bearings and the top at mid-span: RMS distance at most a tenth of
    # the height (our margin; measured here: 113 mm; a flat line at mid-height would be 800 mm off).
    parabola = g.height_mm * (1.0 - ((xs - g.width_mm / 2.0) / (g.width_mm / 2.0)) ** 2)
    assert np.sqrt(np.mean((line - parabola) ** 2)) <= 0.1 * g.height_mm
    # ...and the line climbs from each bearing to the crown: no drop of more than one element on the way.
    half = len(line) // 2
    assert np.all(np.diff(line[:half]) > -g.dy)
    assert np.all(np.diff(line[half:]) < g.dy)
    # The load comes down to the bearings: the middle third of the width over the lower half of the height is
    # open (solid share at most 0.1; our margin; measured here: 0.0).
    solid = design_solid(problem, result)
    assert solid[: g.ny // 2, g.nx // 3: 2 * g.nx // 3].mean() <= 0.1


def test_beam_under_a_travelling_load(layouts):
    problem, result = layouts["beam-travelling-load"]
    m = mirror_map(problem.grid, "x")
    design = problem.design & problem.design[m]
    # symmetry = "x" in the job (a symmetric path, both ends pinned): exact on every design element.
    assert np.array_equal(result.densities[design], result.densities[m][design])
    assert len(problem.cases) == 9
    # The layout serves every stop: its compliance over the solid beam's is much the same at every stop (largest
    # ratio at most 1.5 times the smallest; our margin, measured here: 1.64 to 1.94, 1.18 times). The central-load
    # example's layout fails it by far (measured here: 1.41 at mid-span, 75 at the end stops).
    solid = weighted_compliances(problem, np.ones(problem.grid.n_elements))
    ratio = result.case_compliance_Nmm / solid
    assert ratio.max() <= 1.5 * ratio.min()
    np.testing.assert_allclose(ratio, ratio[::-1], rtol=1e-6)  # mirror stops alike (the layout is symmetric)
    _, central = layouts["beam-central-load"]
    other = weighted_compliances(problem, central.densities) / solid
    assert other.max() > 1.5 * other.min()


def test_leaf_under_its_own_weight_keeps_whole_members_and_tapers(layouts, runs):
    problem, result = layouts["leaf-under-its-own-weight"]
    root, tip = root_and_tip(problem, result)
    # The moment of a cantilever's own weight grows as the square of the distance from the tip (statics), and the
    # tip material mostly weighs: the root third keeps at least 0.3 more of its design region than the tip third
    # (our margin; measured here: 0.91 against 0.29). Members, not specks: at most 12 freeform voids (measured
    # here: 6), and the lighter leaf no more than half again as soft as the solid one (measured here: 1.08 times).
    # Before the weight went with the material (docs/optimize.md, "Self-weight") the optimiser alone (as beso_only
    # runs it) gave this leaf 58 specks, much the same share at root and tip (0.64, 0.59) and a compliance 9.8
    # times the solid's: every measure fails there.
    assert root >= tip + 0.3
    assert 1 <= len(freeform_voids(problem.grid, result.densities)) <= 12
    assert result.compliance_Nmm[-1] <= 1.5 * result.compliance_Nmm[0]
    # the voids to make are no softer than the freeform layout they come from, weighed alike
    s = runs["leaf-under-its-own-weight"].summary
    assert s["compliance_rationalized_Nmm"] <= s["compliance_freeform_Nmm"]
    # the JSON and the report say the weight is in: rho g t A of the leaf as drawn, 5.29 kN (statics)
    weight = 2450.0 * 9.81 * 0.150 * 2.4 * 0.6 / 1000.0
    assert s["solid"]["self_weight_kN"] == pytest.approx(weight, rel=1e-12)
    (report,) = [Path(p) for p in s["outputs"] if p.endswith("-report.md")]
    assert f"**Self-weight** is included: {weight:.4g} kN" in report.read_text()
    assert runs["beam-central-load"].summary["solid"]["self_weight_kN"] is None


def weighted_compliances(problem, densities, penalty=3.0):
    """F.U of each case for a density field (soft-kill stiffness x^p), by our own assembly and solver."""
    from toolkit.fe.assembly import Assembler
    from toolkit.fe.solve import LinearSolver

    K = Assembler(problem.grid).matrix(problem.ke, problem.fractions * densities**penalty)
    U = LinearSolver(K, ~problem.fixed, grid=problem.grid).solve(problem.loads)
    return np.einsum("ic,ic->c", problem.loads, U)


def test_whole_job_on_every_example(runs):
    for name, outcome in runs.items():
        s = outcome.summary
        assert s["converged"], name
        assert s["rules"]["violations"] == [], name
        assert s["voids"], name  # each example lightens its panel
        # Under fixed loads, taking material away never stiffens the panel (a consequence of the mathematics); under
        # its own weight it may (the weight goes too).
        if name != "leaf-under-its-own-weight":
            assert s["compliance_rationalized_Nmm"] >= s["compliance_solid_Nmm"], name
        written = {Path(p).name for p in s["outputs"]}
        for suffix in ("result.svg", "report.md", "optimize.json", "lacuna.dxf"):
            assert f"{name}-{suffix}" in written and all(Path(p).is_file() for p in s["outputs"]), (name, suffix)
        if name == "beam-travelling-load":
            (travel,) = s["moving_loads"]
            assert travel["stops"] == 9
            solid = np.array([p["compliance_solid_Nmm"] for p in travel["positions"]])
            made = np.array([p["compliance_rationalized_Nmm"] for p in travel["positions"]])
            np.testing.assert_allclose(solid, solid[::-1], rtol=1e-9)  # mirror stops of the solid beam alike
            assert np.all(made >= solid)
