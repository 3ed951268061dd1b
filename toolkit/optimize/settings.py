"""Parameters of the optimiser and of the non-design zones (all lengths in mm).

The defaults of :class:`OptimizeSettings` are the values usually published with soft-kill BESO
(Huang & Xie 2009, Comput Mech 43:393-401; Huang & Xie 2010, *Evolutionary Topology Optimization of
Continuum Structures*, Wiley): penalty 3, void design variable 0.001, evolution ratio 2 %, admission ratio
2 %, convergence when the last 5 compliances differ from the 5 before by less than 0.1 %. These are written
down from memory of those sources; the volume fraction 0.6 and the 200-iteration cap are our own defaults.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

from ..errors import LacunaError

SYMMETRIES = ("none", "x", "y", "xy")


def _finite(value) -> bool:
    return isinstance(value, numbers.Real) and not isinstance(value, bool) and math.isfinite(value)


def _whole(value) -> bool:
    return isinstance(value, numbers.Integral) and not isinstance(value, bool)


@dataclass(frozen=True)
class OptimizeSettings:
    """How BESO runs. Every figure is checked on creation; a bad one raises LacunaError naming its job key.

    - ``volume_fraction``: material kept, as a share of the *design region* (the elements in no zone), in (0, 1].
    - ``evolution_rate``: share of the current volume removed per iteration until the target is reached.
    - ``filter_radius_mm``: radius of the mesh-independency filter; ``None`` means three element sizes.
    - ``symmetry``: "none", "x" (mirror about the vertical mid-line), "y" (about the horizontal one) or "xy".
    - ``max_iterations``: the loop stops here even if not converged.
    - ``penalty``: exponent p of the material interpolation E(x) = x^p E.
    - ``void_density``: the design variable x_min of a void element (soft kill); its stiffness is
      ``void_density ** penalty`` times that of solid material (1e-9 with the defaults).
    - ``admission_ratio``: at most this share of the design region may turn from void to solid per iteration.
    - ``convergence_tolerance`` and ``convergence_window`` N: converged once the target volume is reached and
      the summed compliance of the last N iterations differs from that of the N before by less than this share.
    """

    volume_fraction: float = 0.6
    evolution_rate: float = 0.02
    filter_radius_mm: float | None = None
    symmetry: str = "none"
    max_iterations: int = 200
    penalty: float = 3.0
    void_density: float = 1e-3
    admission_ratio: float = 0.02
    convergence_tolerance: float = 0.001
    convergence_window: int = 5

    def __post_init__(self):
        vf = self.volume_fraction
        if not (_finite(vf) and 0.0 < vf <= 1.0):
            raise LacunaError(
                f"the volume fraction must lie in (0, 1], got {vf!r}.",
                where="[optimize] volume_fraction",
                hint="Give the share of the design region to keep, e.g. 0.6 to keep 60 %.",
            )
        er = self.evolution_rate
        if not (_finite(er) and 0.0 < er < 1.0):
            raise LacunaError(
                f"the evolution rate must lie in (0, 1), got {er!r}.",
                where="[optimize] evolution_rate",
                hint="0.01 to 0.05 is usual (0.02 removes 2 % of the material per iteration).",
            )
        r = self.filter_radius_mm
        if r is not None and not (_finite(r) and r > 0.0):
            raise LacunaError(
                f"the filter radius must be a positive length, got {r!r}.",
                where="[optimize] filter_radius",
                hint="Leave it out for the default of three element sizes.",
            )
        if self.symmetry not in SYMMETRIES:
            raise LacunaError(
                f"unknown symmetry {self.symmetry!r}.",
                where="[optimize] symmetry",
                hint='Use "none", "x" (mirror about the vertical mid-line), "y" (about the horizontal one) or "xy".',
            )
        if not (_whole(self.max_iterations) and self.max_iterations >= 1):
            raise LacunaError(
                f"the iteration cap must be a whole number of at least 1, got {self.max_iterations!r}.",
                where="[optimize] max_iterations",
                hint="200 is usually plenty.",
            )
        if not (_finite(self.penalty) and self.penalty >= 1.0):
            raise LacunaError(
                f"the penalty exponent must be at least 1, got {self.penalty!r}.",
                where="[optimize] penalty",
                hint="3 is the usual value.",
            )
        if not (_finite(self.void_density) and 0.0 < self.void_density < 1.0):
            raise LacunaError(
                f"the void design variable must lie in (0, 1), got {self.void_density!r}.",
                where="[optimize] void_density",
                hint="0.001 is the usual value.",
            )
        if not (_finite(self.admission_ratio) and self.admission_ratio > 0.0):
            raise LacunaError(
                f"the admission ratio must be positive, got {self.admission_ratio!r}.",
                where="[optimize] admission_ratio",
                hint="0.02 is the usual value (at most 2 % of the design region added per iteration).",
            )
        if not (_finite(self.convergence_tolerance) and self.convergence_tolerance > 0.0):
            raise LacunaError(
                f"the convergence tolerance must be positive, got {self.convergence_tolerance!r}.",
                where="[optimize] convergence_tolerance",
                hint="0.001 (0.1 %) is the usual value.",
            )
        w = self.convergence_window
        if not (_whole(w) and w >= 1):
            raise LacunaError(
                f"the convergence window must be a whole number of at least 1, got {w!r}.",
                where="[optimize] convergence_window",
                hint="5 is the usual value.",
            )


@dataclass(frozen=True)
class ZoneSettings:
    """Widths of the non-design zones, mm (CONTRACT.md [rules] edge_cover, bearing_clearance, min_web).

    - ``edge_cover_mm``: solid band along the whole outline (keeps the straight edges).
    - ``bearing_clearance_mm``: solid radius around every support and point load.
    - ``min_web_mm``: solid band around every existing opening.
    - ``void_region``: where the fabrication rules let a made void go (a shapely geometry, local mm), or None.
      Elements sharing area with the rest of the panel stay solid: a freeform void where no made void may stand
      (outside a profile's depth band, say) is a saving the layout could never keep.
    """

    edge_cover_mm: float = 0.0
    bearing_clearance_mm: float = 0.0
    min_web_mm: float = 0.0
    void_region: object = None

    def __post_init__(self):
        for key, value in (
            ("edge_cover", self.edge_cover_mm),
            ("bearing_clearance", self.bearing_clearance_mm),
            ("min_web", self.min_web_mm),
        ):
            if not (_finite(value) and value >= 0.0):
                raise LacunaError(
                    f"{key} must be a length of zero or more, got {value!r}.",
                    where=f"[rules] {key}",
                    hint="Give it in the job file's unit; 0 switches the zone off.",
                )
