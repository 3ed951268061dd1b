"""Static analysis of a panel as drawn: grid, supports, loads, solve, and the figures a report needs."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .fe.boundary import check_mechanism, fixed_dofs, where_text
from .fe.element import q4_stiffness
from .fe.fractions import solid_fractions
from .fe.grid import Grid
from .limits import grid_within_memory
from .fe.loads import load_matrix
from .fe.solve import SharedSolver
from .fe.stress import element_stresses, von_mises
from .model import Panel

# Elements with less material than this are left out: a sliver of an element would only add a near-zero
# stiffness (and an ill-conditioned node) for a part of the panel smaller than the grid can describe.
MIN_FRACTION = 1e-6


@dataclass(frozen=True, eq=False)
class Analysis:
    """The panel's static response, local frame (mm, N, MPa); per-case arrays follow ``cases``."""

    grid: Grid
    fractions: np.ndarray            # (ne,) solid fraction of each element
    active: np.ndarray               # (ne,) elements carrying material in the analysis
    fixed: np.ndarray                # (n_dofs,) dofs held by supports
    cases: tuple[str, ...]
    case_weights: np.ndarray         # (ncases,)
    F: np.ndarray                    # (n_dofs, ncases) nodal forces, N
    U: np.ndarray                    # (n_dofs, ncases) displacements, mm
    compliance_per_case_Nmm: np.ndarray
    compliance_Nmm: float            # sum over cases of weight * F.U
    max_deflection_mm: float
    max_deflection_at: tuple[float, float]
    max_deflection_case: str
    stresses: np.ndarray             # (ncases, ne, 3) sx, sy, txy at element centres, MPa
    von_mises: np.ndarray            # (ncases, ne) MPa
    max_von_mises_MPa: float
    max_von_mises_at: tuple[float, float]
    max_von_mises_case: str
    reactions_N: np.ndarray          # (n_dofs, ncases) K U - F, non-zero only at held dofs
    reaction_sum_N: np.ndarray       # (ncases, 2)
    load_sum_N: np.ndarray           # (ncases, 2)
    warnings: tuple[str, ...]

    @property
    def elements(self) -> int:
        """Elements carrying material."""
        return int(self.active.sum())


def analyze(panel: Panel, grid: Grid | None = None, *, shared: SharedSolver | None = None,
            threads: int = 1) -> Analysis:
    """Solve the panel as drawn (openings cut exactly from the grid) for every load case. ``shared``: the
    job's solver, refactored where it fits this system (``fe.solve.SharedSolver``), made for ``threads`` MKL
    threads (PARDISO; the optimiser's count where it is to refactor this solver next)."""
    grid = grid or grid_within_memory(panel.width_mm, panel.height_mm, panel.element_size_mm)
    solid = panel.solid
    fractions = solid_fractions(grid, solid)
    active = fractions > MIN_FRACTION
    scale = np.where(active, fractions, 0.0)
    active_nodes = grid.active_nodes(active)
    fixed = fixed_dofs(grid, panel.supports, solid=solid, active_nodes=active_nodes, frame=panel.frame)
    check_mechanism(grid, fixed, active, frame=panel.frame)
    F = load_matrix(grid, panel, fractions=scale, solid=solid)

    mat = panel.material
    ke = q4_stiffness(grid.dx, grid.dy, mat.E_MPa, mat.nu, panel.thickness_mm)
    shared = shared if shared is not None else SharedSolver()  # alone: one of its own, dropped on return
    K = shared.assembler(grid).matrix(ke, scale)
    # Nodes touching only empty elements carry no stiffness; they are left out of the system.
    free = ~fixed & np.repeat(active_nodes, 2)
    U = shared.factor(K, free, grid, threads=threads).solve(F)

    cases = panel.cases
    weights = np.array([panel.case_weight(c) for c in cases])
    compliance = np.einsum("ic,ic->c", F, U)
    reactions = K @ U - F
    reactions[~fixed] = 0.0
    reaction_sum = np.stack([reactions[0::2].sum(axis=0), reactions[1::2].sum(axis=0)], axis=1)
    load_sum = np.stack([F[0::2].sum(axis=0), F[1::2].sum(axis=0)], axis=1)

    disp = np.hypot(U[0::2], U[1::2])            # (n_nodes, ncases)
    disp[~active_nodes] = 0.0
    node, case = np.unravel_index(int(np.argmax(disp)), disp.shape)

    stresses = element_stresses(grid, U, mat.E_MPa, mat.nu)
    vm = von_mises(stresses)
    vm_active = np.where(active[None, :], vm, -np.inf)
    vm_case, vm_element = np.unravel_index(int(np.argmax(vm_active)), vm_active.shape)

    warnings = []
    if not panel.loads and not panel.self_weight:
        warnings.append("the panel carries no load: every figure is zero.")
    if np.any(np.abs(load_sum + reaction_sum) > 1e-6 * max(1.0, np.abs(load_sum).max())):
        warnings.append("reactions do not balance the loads: the solution is not to be trusted.")
    if active[vm_element] and fractions[vm_element] < 1.0 - 1e-9:
        warnings.append(
            f"the grid's largest von Mises stress is in an element cut by an opening's edge, near "
            f"{where_text(grid.element_centres[vm_element], panel.frame)}: it is not the stress at that edge (the "
            "grid cuts openings by area fraction, and its stress in a cut element neither converges to nor bounds "
            "the edge stress as the elements shrink). Edge stresses come from the local models of the voids to "
            "make (peak_stress_MPa per void in lacuna optimize); drawn openings get none."
        )
    return Analysis(
        grid=grid,
        fractions=fractions,
        active=active,
        fixed=fixed,
        cases=cases,
        case_weights=weights,
        F=F,
        U=U,
        compliance_per_case_Nmm=compliance,
        compliance_Nmm=float(weights @ compliance),
        max_deflection_mm=float(disp[node, case]),
        max_deflection_at=tuple(float(v) for v in grid.node_xy[node]),
        max_deflection_case=cases[case],
        stresses=stresses,
        von_mises=vm,
        max_von_mises_MPa=float(vm_active[vm_case, vm_element]),
        max_von_mises_at=tuple(float(v) for v in grid.element_centres[vm_element]),
        max_von_mises_case=cases[vm_case],
        reactions_N=reactions,
        reaction_sum_N=reaction_sum,
        load_sum_N=load_sum,
        warnings=tuple(warnings),
    )
