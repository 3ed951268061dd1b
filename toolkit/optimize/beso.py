"""Soft-kill BESO: bi-directional evolutionary structural optimisation for least weighted compliance.

The method of Huang & Xie (2007, Finite Elem Anal Des 43:1039-1049; 2009, Comput Mech 43:393-401; 2010,
*Evolutionary Topology Optimization of Continuum Structures*, Wiley). Each design element is solid (x = 1)
or void (x = x_min, soft kill) with stiffness x^p E. Per iteration:

1. solve every load case on the current design;
2. sensitivity alpha_e = sum_c w_c * 0.5 * x_e^(p-1) * u_e^T k0 u_e (the derivative of the weighted
   compliance, divided by -2p, which ranks solid and void elements on one scale); with self-weight, see below;
3. mesh-independency filter, then the mean with the previous iteration's value (damps oscillation);
4. with symmetry, the mean over each mirror orbit of design elements, so mirror images share one state;
5. next volume V_{k+1} = max(V*, V_k (1 - ER)); solid/void by the threshold on alpha with the admission cap.

Converged once the volume is on target and the last N compliances sum to within the tolerance of the N
before. Everything that does not change across iterations (dof map, assembly pattern, filter, orbits, the
solver's ordering and index maps) is built once before the loop.

Where the non-design zones are not mirror-symmetric (an opening, support or KEEP region on one side only),
symmetry still binds every design element exactly to its design images: an orbit whose image falls in a
zone is decided by its design members alone, and the zone element keeps its own state. The layout is then
mirror-symmetric everywhere except at those zone elements and their images.

**Self-weight** (``Problem.self_weight_N``) is a load that goes with the material: an element's weight follows its
state as its stiffness does, x^p (a void element keeps x_min^p of it). Weighed linearly (x_min of the weight
against x_min^p of the stiffness), the void regions would carry a thousand times the solid's weight per unit of
stiffness with p = 3 and x_min = 0.001: their nodes sag without bound, their strain energy ranks them above every
solid element, and the layout breaks into noise (a 4.8 m concrete leaf under its own weight came out as 313
specks). This is the parasitic effect of low densities under self-weight that Bruyneel & Duysinx (2005, Struct
Multidisc Optim 29:245-256, from memory) describe for SIMP; BESO with self-weight is Huang & Xie (2011, Finite
Elem Anal Des 47:942-948, from memory). The compliance F(x)^T U then has the derivative
dC/dx_e = p x_e^(p-1) (2 u_e^T g_e - u_e^T k_e u_e), g_e the element's solid weight as nodal forces (a quarter of
it down at each node), so alpha_e = x_e^(p-1) (0.5 u_e^T k_e u_e + 0.25 W_e sum of the element's four nodal
u_y): an element whose own weight does work on the panel's sag is worth less than its stiffness alone says.
tests/test_beso_self_weight.py checks it against finite differences.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from ..errors import LacunaError
from ..fe.loads import weight_lifted, weight_work
from ..fe.solve import SharedSolver
from ..overlap import side_threads
from .filters import SensitivityFilter
from .problem import Problem, check_problem
from .settings import OptimizeSettings
from .symmetry import symmetry_orbits
from .update import has_converged, next_volume, update_design

# Grids of at least this many elements are optimised on a PARDISO solver of their own made for two MKL threads,
# always two, whatever the machine's cores (fe.solve._Pardiso: its analysis plans for the threads it runs on; a fixed
# count gives the same bits run after run). Measured 2026-12-03: a refactor 0.43 -> 0.28-0.37 s at 600 x 200
# elements and 6.9 -> 4.1 s at 2000 x 500; BESO at 600 x 200 26-30 -> 21 s, the half-MBB design the same to the
# bit; no faster at 300 x 100, so smaller grids (every test's) keep the job's one-thread solver. Two threads are
# not one to the bit in general (5e-7 apart where void elements carry random loads), so a design above this size
# may differ in its last digits from one made on one thread. The job's helper process is idle while the optimiser
# runs; the stages after it go back to one thread (another solver). Not where the process may take one thread
# only (one core, or ``LACUNA_THREADS=1``: a host that keeps lacuna on its calling thread, a Dask worker of
# ``lacuna batch``, which takes a core per panel): there a large design may differ in its last digits from the one
# ``lacuna optimize`` makes on the same machine.
TWO_THREADS_FROM = 100_000


def optimiser_threads(n_elements: int) -> int:
    """MKL threads of the optimiser's solver for a grid of ``n_elements`` (see ``TWO_THREADS_FROM``)."""
    return 2 if n_elements >= TWO_THREADS_FROM and side_threads() >= 2 else 1


@dataclass(frozen=True, eq=False)
class BesoResult:
    """What a BESO run gives back.

    - ``densities`` (ne,): design variable times drawn solid fraction; design elements are 1 (solid) or
      ``void_density`` (void), zone elements 1, elements cut by an opening their drawn fraction.
    - ``compliance_Nmm`` and ``volume_fraction`` (iterations,): weighted compliance sum_c w_c F_c.U_c and the
      solid share of the design region, of the design analysed at each iteration (the last is the result).
    - ``case_compliance_Nmm`` (ncases,): F_c.U_c of the final design; ``displacements`` its U (ndof, ncases).
    - ``snapshots``: (iteration, densities) every ``keep_every`` iterations and at the end, for animations.
    """

    densities: np.ndarray
    compliance_Nmm: np.ndarray
    volume_fraction: np.ndarray
    iterations: int
    converged: bool
    design: np.ndarray
    passive: np.ndarray
    volume_fraction_target: float
    case_compliance_Nmm: np.ndarray
    displacements: np.ndarray
    filter_radius_mm: float
    snapshots: tuple[tuple[int, np.ndarray], ...] = ()

    @property
    def solid(self) -> np.ndarray:
        """(ne,) True for design elements left solid."""
        return self.design & (self.densities >= 1.0)

    @property
    def compliance_final_Nmm(self) -> float:
        return float(self.compliance_Nmm[-1])


def sensitivity_filter(problem: Problem, settings: OptimizeSettings) -> SensitivityFilter:
    """The filter ``run_beso`` uses on ``problem`` with ``settings``, built ahead (``run_beso``'s ``filt``)."""
    return SensitivityFilter(problem.grid, filter_radius(problem, settings))


def filter_radius(problem: Problem, settings: OptimizeSettings) -> float:
    """The filter radius in mm: the setting, or three element sizes; LacunaError below one element."""
    g = problem.grid
    size = max(g.dx, g.dy)
    r = settings.filter_radius_mm if settings.filter_radius_mm is not None else 3.0 * size
    if r < size * (1.0 - 1e-9):
        raise LacunaError(
            f"the filter radius {r:g} mm is smaller than one element ({size:g} mm): the layout would depend on "
            "the mesh and break into checkerboards.",
            where="[optimize] filter_radius",
            hint=f"Use at least {size:g} mm (about three element sizes, {3 * size:g} mm, is usual), or leave it out.",
        )
    return float(r)


def loose_elements(grid, solid: np.ndarray, anchored: np.ndarray) -> np.ndarray:
    """The ``solid`` elements (ne,) in no piece that holds an ``anchored`` one (an element with a held node). A
    piece is solid elements joined along whole sides: two joined at one corner node only hinge about it, and a
    piece hung from such a node under its own weight is a near-mechanism to the finite elements (its sag, and the
    compliance, jumped a hundredfold from one iteration to the next on the cantilever of
    tests/test_beso_self_weight.py)."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    nx, ny = grid.nx, grid.ny
    s = solid.reshape(ny, nx)
    ids = np.arange(nx * ny).reshape(ny, nx)
    across = s[:, :-1] & s[:, 1:]
    up = s[:-1, :] & s[1:, :]
    rows = np.concatenate([ids[:, :-1][across], ids[:-1, :][up]])
    cols = np.concatenate([ids[:, 1:][across], ids[1:, :][up]])
    links = coo_matrix((np.ones(rows.size), (rows, cols)), shape=(nx * ny, nx * ny))
    _, label = connected_components(links, directed=False)
    held = np.zeros(label.max() + 1, dtype=bool)
    held[label[solid & anchored]] = True
    return solid & ~held[label]


def weight_scale(x: np.ndarray, p: float, loose: np.ndarray | None, x_min: float) -> np.ndarray:
    """The share of each element's weight the optimiser loads the panel with: x^p, and x_min^p for a loose solid
    element (``loose_elements``): material with no path to a support is a void's load on the model, the parasitic
    effect again (module text)."""
    scale = x ** p
    if loose is not None and loose.any():
        scale[loose] = x_min ** p
    return scale


def loads_at(F: np.ndarray, grid, moving: np.ndarray, scale: np.ndarray) -> np.ndarray:
    """The loads ``F`` (drawn: every element's weight in full) with each element's weight ``moving`` (N, ne)
    scaled by ``scale`` (``weight_scale``): the share 1 - scale of it taken off again, a quarter at each node."""
    return weight_lifted(F, grid, moving * (1.0 - scale))


def sensitivity_numbers(x: np.ndarray, p: float, base: np.ndarray, energy: np.ndarray, Ue: np.ndarray,
                        w: np.ndarray, weight: np.ndarray | None = None) -> np.ndarray:
    """alpha_e = -dC/dx_e / (2p) of the weighted compliance C = sum_c w_c F_c^T U_c: ``energy`` (ne, ncases) the
    elements' u^T k0 u, ``Ue`` (ne, 8, ncases) their displacements, ``base`` their stiffness share at x = 1;
    ``weight`` (ne,) their weight in N where self-weight goes with the design (module text), else None."""
    alpha = 0.5 * x ** (p - 1.0) * base * (energy @ w)
    if weight is not None:
        alpha = alpha + weight_work(x ** (p - 1.0) * weight, Ue, w)
    return alpha


def _no_loose(weight: np.ndarray, loose: np.ndarray | None) -> np.ndarray:
    if loose is None or not loose.any():
        return weight
    out = weight.copy()
    out[loose] = 0.0
    return out


def run_beso(
    problem: Problem,
    settings: OptimizeSettings,
    *,
    on_iteration: Callable[[int, float, float], None] | None = None,
    keep_every: int = 0,
    backend: str = "auto",
    shared: SharedSolver | None = None,
    filt: SensitivityFilter | None = None,
) -> BesoResult:
    """Optimise ``problem`` by soft-kill BESO; see the module docstring for the method.

    ``on_iteration(iteration, compliance_Nmm, volume_fraction)`` is called after every analysis (progress
    bars). ``keep_every`` > 0 keeps a copy of the densities every that many iterations, and of the last.
    ``backend`` chooses the sparse solver (:class:`~toolkit.fe.solve.LinearSolver`; "auto" takes the fastest
    one installed). ``shared``: the job's solver (``fe.solve.SharedSolver`` of the same backend), refactored
    where it fits: the design is the same. ``filt``: the sensitivity filter of ``problem``'s grid at
    ``filter_radius(problem, settings)``, where the caller built it ahead (``sensitivity_filter``).
    """
    check_problem(problem)
    g = problem.grid
    ne = g.n_elements
    p = settings.penalty
    xmin = settings.void_density
    design = np.asarray(problem.design, dtype=bool)
    n_design = int(design.sum())
    n_final = int(round(settings.volume_fraction * n_design))
    if n_final < 1:
        held = float(problem.fractions[~design].sum()) / float(problem.fractions.sum())
        raise LacunaError(
            f"a volume fraction of {settings.volume_fraction:g} keeps less than one of the {n_design} elements "
            f"of the design region, while the non-design zones already hold {held:.1%} of the panel.",
            where="[optimize] volume_fraction",
            hint=f"Ask for at least {1.0 / n_design:.2g}, or a finer grid.",
        )
    radius = filter_radius(problem, settings)
    keep_every = int(keep_every)

    # --- built once ---
    filt = filt if filt is not None else SensitivityFilter(g, radius)
    orbit_all = symmetry_orbits(g, settings.symmetry)
    design_idx = np.flatnonzero(design)
    _, orbit = np.unique(orbit_all[design_idx], return_inverse=True)
    orbit = orbit.ravel()
    orbit_size = np.bincount(orbit)
    edof = g.edof
    ke = np.asarray(problem.ke, dtype=float)
    F = np.asarray(problem.loads, dtype=float)
    w = np.asarray(problem.weights, dtype=float)
    fractions = np.asarray(problem.fractions, dtype=float)
    # An element wholly inside an opening behaves as a BESO void, so no node is left without stiffness.
    base = np.maximum(fractions, xmin**p)
    if shared is None or shared.backend != backend:
        shared = SharedSolver(backend)  # one of its own, dropped on return
    assembler = shared.assembler(g)
    free = np.ones(g.n_dofs, dtype=bool)
    free[problem.fixed] = False
    n_admit = settings.admission_ratio * n_design
    # Self-weight: the design elements' weight moves with their state (module text); the rest stays in F as drawn.
    weight = None if problem.self_weight_N is None else np.asarray(problem.self_weight_N, dtype=float)
    moving = None
    if weight is not None:
        moving = np.zeros(ne)
        moving[design_idx] = weight[design_idx]
        if not moving.any():
            moving = None
        else:
            anchored = ~free[edof].all(axis=1)  # an element with a held dof
            present = fractions > 0.0
    loose = None

    x = np.ones(ne)
    solid_orbit = np.ones(orbit_size.size, dtype=bool)
    solver = None
    alpha_prev = None
    history_c: list[float] = []
    history_v: list[float] = []
    snapshots: list[tuple[int, np.ndarray]] = []
    converged = False
    volume = 1.0

    for it in range(settings.max_iterations):
        K = assembler.matrix(ke, base * x**p)
        if solver is None:
            solver = shared.factor(K, free, g, threads=optimiser_threads(g.n_elements))
        else:
            solver.refactor(K)
        if moving is not None:
            loose = loose_elements(g, present & (x >= 1.0), anchored)
            F_now = loads_at(F, g, moving, weight_scale(x, p, loose, xmin))
        else:
            F_now = F
        U = solver.solve(F_now)
        Ue = U[edof]  # (ne, 8, ncases)
        # u_e^T k0 u_e per case, as one matrix product per case and a row sum (an einsum over the three took 3.5
        # times as long: 1.4 against 0.4 ms at 300 x 100); the designs are the same to the bit at 300 x 100 and
        # 600 x 200 (half MBB beam, 2026-12-03)
        Uc = np.moveaxis(Ue, 2, 0)  # (ncases, ne, 8)
        energy = np.einsum("cei,cei->ec", Uc @ ke, Uc)
        case_c = np.einsum("dc,dc->c", F_now, U)
        compliance = float(case_c @ w)
        volume = float(np.count_nonzero(x[design_idx] >= 1.0)) / n_design
        history_c.append(compliance)
        history_v.append(volume)
        if on_iteration is not None:
            on_iteration(it, compliance, volume)
        if keep_every > 0 and it % keep_every == 0:
            snapshots.append((it, (x * fractions).astype(np.float32)))

        # With symmetry the count moves by whole orbits (up to four elements), so the target is met as near as an
        # orbit allows; asking for it exactly would never converge when the orbits cannot add up to it.
        on_target = abs(np.count_nonzero(x[design_idx] >= 1.0) - n_final) < orbit_size.max()
        if on_target and has_converged(np.array(history_c), settings.convergence_window,
                                       settings.convergence_tolerance):
            converged = True
            break
        if it == settings.max_iterations - 1:
            break

        alpha = sensitivity_numbers(x, p, base, energy, Ue, w, None if weight is None else _no_loose(weight, loose))
        alpha = filt(alpha)
        if alpha_prev is not None:
            alpha = 0.5 * (alpha + alpha_prev)
        alpha_prev = alpha
        alpha_orbit = np.bincount(orbit, weights=alpha[design_idx]) / orbit_size

        v_next = next_volume(volume, settings.volume_fraction, settings.evolution_rate)
        n_next = n_final if v_next == settings.volume_fraction else v_next * n_design
        n_now = np.count_nonzero(x[design_idx] >= 1.0)
        if n_now != n_final and round(n_next) == n_now:
            # A small design region: a 2 % step is less than half an element and the count would round back to
            # where it is for ever; one element a step towards the target instead.
            n_next = n_now + (1 if n_final > n_now else -1)
        solid_orbit = update_design(alpha_orbit, solid_orbit, orbit_size, n_next, n_admit)
        x[design_idx] = np.where(solid_orbit[orbit], 1.0, xmin)

    densities = x * fractions
    if keep_every > 0 and (not snapshots or snapshots[-1][0] != it):
        snapshots.append((it, densities.astype(np.float32)))
    return BesoResult(
        densities=densities,
        compliance_Nmm=np.array(history_c),
        volume_fraction=np.array(history_v),
        iterations=len(history_c),
        converged=converged,
        design=design.copy(),
        passive=~design,
        volume_fraction_target=float(n_final) / n_design,
        case_compliance_Nmm=case_c,
        displacements=U,
        filter_radius_mm=radius,
        snapshots=tuple(snapshots),
    )
