"""optimize stage: soft-kill BESO inside the fixed envelope (pure: panel + grid in, densities + history out).

- ``settings``: :class:`OptimizeSettings`, :class:`ZoneSettings`.
- ``zones``: :func:`non_design_zones` -> :class:`Zones` masks.
- ``problem``: :func:`build_problem` (panel -> :class:`Problem`), :func:`check_problem`.
- ``beso``: :func:`run_beso` -> :class:`BesoResult`.
- ``filters``, ``symmetry``, ``update``: the loop's pieces (filter operator, mirror orbits, threshold update
  and convergence test).
"""

from .beso import BesoResult, run_beso
from .problem import Problem, build_problem, check_problem, design_fraction_for_panel
from .settings import OptimizeSettings, ZoneSettings
from .zones import Zones, non_design_zones

__all__ = [
    "BesoResult",
    "OptimizeSettings",
    "Problem",
    "ZoneSettings",
    "Zones",
    "build_problem",
    "check_problem",
    "design_fraction_for_panel",
    "non_design_zones",
    "run_beso",
]
