"""What the voids stage takes from the job: the family of made voids, stock sizes, snapping, corners.

The job file reader (:mod:`toolkit.jobfile`) parses ``[voids]`` into :class:`VoidOptions` and hands it over;
the stage itself (:mod:`toolkit.voids.layout`) resolves it against the rules. Lengths in mm.
"""

from __future__ import annotations

from dataclasses import dataclass

FAMILIES = ("polygon", "slot", "bore", "mixed")
CORNERS = ("none", "chamfer", "radius")

# Twist-drill, auger and hole-saw sizes a joinery or steel shop usually keeps in stock, in mm
# (common practice, no source); a job replaces them with [voids] bore_diameters.
DEFAULT_BORE_DIAMETERS_MM = (20.0, 25.0, 32.0, 40.0, 50.0, 65.0, 80.0, 100.0, 125.0, 150.0)


@dataclass(frozen=True)
class VoidOptions:
    """[voids]: how the optimiser's freeform holes become voids a shop can make (lengths in mm)."""

    family: str = "polygon"
    sides: int = 6
    bore_diameters_mm: tuple[float, ...] = DEFAULT_BORE_DIAMETERS_MM
    max_types: int = 3
    snap_mm: float = 5.0
    corner: str = "none"
    corner_size_mm: float | None = None
    slot_widths_mm: tuple[float, ...] | None = None  # None: the bore diameters (a slot is cut with a bit)
    # Mirror-symmetric layout: True, False, or None to follow [optimize] symmetry. The reader copies that
    # setting into ``optimize_symmetry`` so the voids stage needs nothing but these options (docs/voids.md).
    symmetric: bool | None = None
    optimize_symmetry: str = "none"
    # n-gons: True makes every one regular (equal sides and angles, a stock former or template); False lets each
    # take the irregular convex shape that fills its freeform void best, scheduled by its corners.
    regular: bool = False
