"""The optimisation problem: everything BESO needs from a panel, as arrays on one grid."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import LacunaError
from ..fe.grid import Grid
from ..limits import grid_within_memory
from ..model import Panel
from .settings import ZoneSettings
from .zones import Zones, non_design_zones


@dataclass(frozen=True, eq=False)
class Problem:
    """A plane-stress panel on a grid, ready to optimise (local frame: mm, N).

    - ``ke`` (8, 8): stiffness of one solid element, N/mm.
    - ``fractions`` (ne,): drawn solid share of each element (1 inside the material, 0 inside an opening).
    - ``fixed``: held dofs, a boolean mask (n_dofs,) or dof numbers.
    - ``loads`` (ndof, ncases): nodal forces, N, one column per load case; ``weights`` (ncases,) their weights.
    - ``design`` (ne,): True where BESO decides; every other element keeps its drawn fraction.
    - ``zones``: the masks the design region came from (for reports and drawings), when built from a panel.
    - ``self_weight_N`` (ne,): each element's own weight as drawn, N toward local -y, already in ``loads`` (every
      case); None without self-weight. The optimiser moves a design element's share with its state (``run_beso``).
    """

    grid: Grid
    ke: np.ndarray
    fractions: np.ndarray
    fixed: np.ndarray
    loads: np.ndarray
    weights: np.ndarray
    design: np.ndarray
    cases: tuple[str, ...] = ("main",)
    zones: Zones | None = None
    self_weight_N: np.ndarray | None = None

    @property
    def passive(self) -> np.ndarray:
        return ~self.design

    @property
    def n_design(self) -> int:
        return int(np.count_nonzero(self.design))


def build_problem(panel: Panel, zones: ZoneSettings, element_size_mm: float | None = None) -> Problem:
    """Grid, element stiffness, supports, loads and non-design zones of ``panel``.

    ``element_size_mm`` overrides the panel's own; without either the grid has about 20,000 elements.
    """
    from ..fe.boundary import check_mechanism, fixed_dofs
    from ..fe.element import q4_stiffness
    from ..fe.fractions import solid_fractions
    from ..fe.loads import element_weights, load_matrix

    size = element_size_mm if element_size_mm is not None else panel.element_size_mm
    grid = grid_within_memory(panel.width_mm, panel.height_mm, size)
    solid = panel.solid
    fractions = solid_fractions(grid, solid)
    active = fractions > 0.0
    fixed = np.asarray(
        fixed_dofs(grid, panel.supports, solid=solid, active_nodes=grid.active_nodes(active), frame=panel.frame),
        dtype=bool,
    )
    check_mechanism(grid, fixed, active, frame=panel.frame)
    F = np.asarray(load_matrix(grid, panel, fractions=fractions, solid=solid), dtype=float)
    m = panel.material
    ke = q4_stiffness(grid.dx, grid.dy, m.E_MPa, m.nu, panel.thickness_mm)
    weights = np.array([panel.case_weight(c) for c in panel.cases], dtype=float)
    z = non_design_zones(grid, panel, zones)
    # Any element an opening cuts is passive, even where the zones test found no shared area (slivers).
    design = z.design & (fractions >= 1.0)
    return Problem(
        grid=grid, ke=ke, fractions=fractions, fixed=fixed, loads=F, weights=weights, design=design,
        cases=tuple(panel.cases), zones=z, self_weight_N=element_weights(grid, panel, fractions),
    )


def check_problem(problem: Problem) -> None:
    """LacunaError for a problem BESO cannot work on: no load, bad weights, no design region."""
    g = problem.grid
    F = problem.loads
    if F.ndim != 2 or F.shape[0] != g.n_dofs:
        raise ValueError(f"loads must be (n_dofs, ncases) = ({g.n_dofs}, k), got {F.shape}")
    w = np.asarray(problem.weights, dtype=float)
    if w.shape != (F.shape[1],):
        raise ValueError(f"one weight per load case expected, got {w.shape} for {F.shape[1]} cases")
    if not np.all(np.isfinite(F)):
        raise LacunaError("a load is not a finite number.", where="[[load]]", hint="Check the load values.")
    if not np.all(np.isfinite(w)) or np.any(w < 0):
        raise LacunaError(
            f"load-case weights must be zero or positive, got {dict(zip(problem.cases, w.tolist()))}.",
            where="[cases]",
            hint="Give each case a weight of zero or more (1 by default).",
        )
    free = np.ones(g.n_dofs, dtype=bool)
    free[problem.fixed] = False
    active = np.abs(F[free]).max(axis=0) * w if free.any() else np.zeros(F.shape[1])
    if F.shape[1] == 0 or not np.any(active > 0):
        raise LacunaError(
            "there is no load to optimise for: no load is given, or every load (with its case weight) is zero "
            "or acts only on supported points.",
            where="[[load]]",
            hint="Add at least one point or line load with a non-zero force, in a case of positive weight.",
        )
    if problem.n_design == 0:
        raise LacunaError(
            "no design region is left: the edge band, bearing zones, webs around openings and KEEP regions "
            "cover the whole panel.",
            where="[rules]",
            hint="Reduce edge_cover, bearing_clearance or min_web, or use a smaller element size.",
        )


def design_fraction_for_panel(problem: Problem, panel_fraction: float) -> float:
    """The design-region volume fraction that keeps ``panel_fraction`` of the panel's drawn material.

    For a request made on the whole panel: the non-design zones hold a fixed share of the material, so a
    whole-panel fraction below that share cannot be met (LacunaError giving both figures).
    """
    drawn = float(problem.fractions.sum())
    held = float(problem.fractions[problem.passive].sum())
    wanted = panel_fraction * drawn
    if not (0.0 < panel_fraction <= 1.0):
        raise LacunaError(
            f"the volume fraction must lie in (0, 1], got {panel_fraction!r}.",
            where="[optimize] volume_fraction",
            hint="Give the share of material to keep, e.g. 0.6 to keep 60 %.",
        )
    if wanted < held:
        raise LacunaError(
            f"a volume fraction of {panel_fraction:.1%} of the panel is less than the non-design zones already "
            f"hold ({held / drawn:.1%} of the panel's material).",
            where="[optimize] volume_fraction",
            hint=f"Ask for more than {held / drawn:.1%}, or narrow edge_cover, bearing_clearance or min_web.",
        )
    return (wanted - held) / problem.n_design
