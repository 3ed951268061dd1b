"""Panels in memory that more than one test file runs (scenarios of our own)."""

from __future__ import annotations

from toolkit.jobfile import parse_job
from toolkit.model import Material, Panel, PointLoad, Support


def half_mbb_plate(element_mm: float = 25.0):
    """A 3000 x 1000 x 10 mm steel plate under half-MBB loading (50 kN down at the top-left corner, the left edge
    held across as the whole beam's mirror line, a roller at the bottom-right corner), volume 0.5, hexagons,
    steel-cut: its freeform voids are long and the bars between them thin, so the voids are made largest first.
    Returns (panel, job)."""
    panel = Panel(width_mm=3000, height_mm=1000, thickness_mm=10, element_size_mm=element_mm,
                  material=Material(E_MPa=210000, nu=0.3, density_kg_m3=7850),
                  supports=(Support(((0, 0), (0, 1000)), "x"), Support(((2950, 0), (3000, 0)), "y")),
                  loads=(PointLoad((0, 1000), (0.0, -50000.0)),))
    job = parse_job('[optimize]\nvolume_fraction = 0.5\nmax_iterations = 120\n[voids]\nfamily = "polygon"\n'
                    'sides = 6\n[rules]\nprofile = "steel-cut"\n')
    return panel, job
