"""The panels the void benchmarks run on: scenarios of our own invention, built in memory.

Each entry gives a Panel and the job text it runs with. The names are what the benchmark tables print.
"""

from __future__ import annotations

from pathlib import Path

from toolkit.jobfile import parse_job
from toolkit.model import LineLoad, Material, Panel, PointLoad, Region, Support
from shapely.geometry import Point


def _job(volume: float, family: str, profile: str, sides: int = 6, extra: str = "") -> str:
    return (f"[optimize]\nvolume_fraction = {volume}\nmax_iterations = 120\n{extra}"
            f'[voids]\nfamily = "{family}"\nsides = {sides}\n[rules]\nprofile = "{profile}"\n')


def demo():
    """The bundled loft lintel, read from its drawing and job as `lacuna demo` does."""
    from toolkit.api import demo_files
    from toolkit.inputs import load_panel

    dxf, toml = demo_files()
    panel, job, _ = load_panel(dxf, toml)
    return panel, job


def timber_beam(family: str = "polygon"):
    """3000 x 600 glulam beam, 90 mm, point load at 0.3 span, pin + roller (timber-bored)."""
    panel = Panel(width_mm=3000, height_mm=600, thickness_mm=90, element_size_mm=15,
                  material=Material(E_MPa=11500, nu=0.3, density_kg_m3=420),
                  supports=(Support(((0, 0), (100, 0)), "xy"), Support(((2900, 0), (3000, 0)), "y")),
                  loads=(PointLoad((900, 600), (0.0, -30000.0)),))
    return panel, parse_job(_job(0.5, family, "timber-bored"))


def steel_plate(family: str = "polygon", sides: int = 6, element_mm: float = 10.0):
    """3000 x 1000 steel plate, 10 mm, half-MBB loading: load at the top-left corner, the left edge held across
    (the mirror line of the whole beam), a roller at the bottom-right corner (steel-cut, volume 0.5)."""
    panel = Panel(width_mm=3000, height_mm=1000, thickness_mm=10, element_size_mm=element_mm,
                  material=Material(E_MPa=210000, nu=0.3, density_kg_m3=7850),
                  supports=(Support(((0, 0), (0, 1000)), "x"), Support(((2950, 0), (3000, 0)), "y")),
                  loads=(PointLoad((0, 1000), (0.0, -50000.0)),))
    return panel, parse_job(_job(0.5, family, "steel-cut", sides))


def precast_spandrel(family: str = "polygon"):
    """6000 x 1500 precast spandrel over a shop front, a drain opening (precast-formed)."""
    panel = Panel(width_mm=6000, height_mm=1500, thickness_mm=200, element_size_mm=30,
                  material=Material(E_MPa=30000, nu=0.2, density_kg_m3=2400),
                  openings=(Region(Point(4500, 750).buffer(100), layer="OPENING"),),
                  supports=(Support(((0, 0), (300, 0)), "xy"), Support(((5700, 0), (6000, 0)), "y")),
                  loads=(LineLoad((0, 1500), (6000, 1500), (0.0, -25.0)),))
    return panel, parse_job(_job(0.5, family, "precast-formed"))


SCENARIOS = {
    "demo loft lintel, timber-bored, n-gons": demo,
    "3000 x 600 beam, timber-bored, n-gons": timber_beam,
    "3000 x 1000 plate, steel-cut, hexagons": steel_plate,
    "3000 x 1000 plate, steel-cut, slots": lambda: steel_plate("slot"),
    "6000 x 1500 spandrel, precast-formed, n-gons": precast_spandrel,
    "6000 x 1500 spandrel, precast-formed, slots": lambda: precast_spandrel("slot"),
}
