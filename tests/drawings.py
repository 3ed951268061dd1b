"""Builders of test drawings: panels drawn with ezdxf in several ways, written into a test's tmp_path.

Every builder takes positions in the panel's local frame (mm) and a :class:`Placement` that says how the
panel sits in the drawing (unit, rotation, position), so one panel can be drawn many ways and the reader's
answer compared. The sample panel (``sample_panel``) is a scenario of our own: a 3000 x 600 mm panel with a
200 mm round opening, a 400 x 200 mm rectangular opening, a 400 x 160 mm slot, a keep zone under the load, two
supports and two loads.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import ezdxf
import numpy as np

from toolkit.dxf_in import XDATA_APPID, marker_xdata
from toolkit.units import MM_PER_UNIT, UNIT_TO_INSUNITS

LAYERS = ("PANEL", "OPENING", "KEEP", "SUPPORT", "LOAD")

# A glulam beam job of our own (3000 x 600 panel drawn on PANEL, 100 mm thick, pin + roller, 6 kN/m on top,
# bores, timber-bored): the whole job on a coarse grid, shared by the tests of optimize and of edge stresses.
GLULAM_BEAM_JOB = """units = "mm"
[panel]
name = "test beam"
thickness = 100
element_size = 50
[material]
E_MPa = 11000
nu = 0.3
density_kg_m3 = 450
[[support]]
from = [0, 0]
to = [150, 0]
[[support]]
from = [2850, 0]
to = [3000, 0]
fix = "y"
[[load]]
from = [0, 600]
to = [3000, 600]
wy_kN_m = -6
[optimize]
volume_fraction = 0.5
filter_radius = 150
[voids]
family = "bore"
[rules]
profile = "timber-bored"
min_web = 60
edge_cover = 60
bearing_clearance = 150
"""


@dataclass(frozen=True)
class Placement:
    """Where the panel's local frame sits in the drawing: drawing = origin + R(angle) local scale / mm_per_unit.

    ``scale`` other than 1 draws block contents meant to be inserted at 1 / scale.
    """

    unit: str = "mm"
    angle_deg: float = 0.0
    origin: tuple[float, float] = (0.0, 0.0)
    scale: float = 1.0

    @property
    def mm_per_unit(self) -> float:
        return MM_PER_UNIT[self.unit]

    def point(self, local) -> tuple[float, float]:
        x, y = self.vector(local)
        return (self.origin[0] + x, self.origin[1] + y)

    def vector(self, local) -> tuple[float, float]:
        a = math.radians(self.angle_deg)
        k = self.scale / self.mm_per_unit
        lx, ly = float(local[0]) * k, float(local[1]) * k
        return (lx * math.cos(a) - ly * math.sin(a), lx * math.sin(a) + ly * math.cos(a))

    def length(self, mm: float) -> float:
        return mm * self.scale / self.mm_per_unit


def new_doc(unit: str | None = "mm", version: str = "R2018"):
    """A new drawing with the default layers; ``unit=None`` leaves $INSUNITS unitless (0)."""
    doc = ezdxf.new(version)
    if version != "R12":
        doc.header["$INSUNITS"] = UNIT_TO_INSUNITS[unit] if unit else 0
    for name in LAYERS:
        if name not in doc.layers:
            doc.layers.add(name)
    if XDATA_APPID not in doc.appids:
        doc.appids.new(XDATA_APPID)
    return doc


def write(doc, path: Path, fmt: str = "asc") -> Path:
    doc.saveas(path, fmt=fmt)
    return Path(path)


def add_rectangle(layout, pl: Placement, x0, y0, x1, y1, *, layer="PANEL", style="lwpolyline", extra_vertices=False):
    """A rectangle from (x0, y0) to (x1, y1) local mm: one closed polyline, or four LINEs ("lines")."""
    corners = [(x0, y0), (x1, y0), (x1, y1), (x0, y1)]
    if extra_vertices:  # a collinear vertex halfway along the bottom side
        corners.insert(1, ((x0 + x1) / 2, y0))
    pts = [pl.point(c) for c in corners]
    if style == "lwpolyline":
        return [layout.add_lwpolyline(pts, close=True, dxfattribs={"layer": layer})]
    if style == "polyline":
        return [layout.add_polyline2d(pts, close=True, dxfattribs={"layer": layer})]
    return [
        layout.add_line(pts[i], pts[(i + 1) % len(pts)], dxfattribs={"layer": layer}) for i in range(len(pts))
    ]


def add_circle(layout, pl: Placement, centre, diameter_mm, *, layer="OPENING"):
    return layout.add_circle(pl.point(centre), pl.length(diameter_mm / 2), dxfattribs={"layer": layer})


def add_slot(layout, pl: Placement, a, b, radius_mm, *, layer="OPENING", style="lines"):
    """A slot with semicircular ends round the local points a and b (a left of b, on one horizontal line).

    ``style="lines"``: two LINEs and two ARCs; ``"lwpolyline"``: one closed polyline with bulges of 1
    (a half circle: bulge = tan(180 deg / 4) = 1, DXF reference).
    """
    (ax, ay), (bx, by) = a, b
    r = radius_mm
    if style == "lwpolyline":
        pts = [pl.point(p) for p in [(ax, ay - r), (bx, by - r), (bx, by + r), (ax, ay + r)]]
        return [layout.add_lwpolyline(
            [(*pts[0], 0), (*pts[1], 1), (*pts[2], 0), (*pts[3], 1)], format="xyb", close=True,
            dxfattribs={"layer": layer},
        )]
    return [
        layout.add_line(pl.point((ax, ay - r)), pl.point((bx, by - r)), dxfattribs={"layer": layer}),
        layout.add_line(pl.point((bx, by + r)), pl.point((ax, ay + r)), dxfattribs={"layer": layer}),
        layout.add_arc(pl.point((bx, by)), pl.length(r), -90 + pl.angle_deg, 90 + pl.angle_deg,
                       dxfattribs={"layer": layer}),
        layout.add_arc(pl.point((ax, ay)), pl.length(r), 90 + pl.angle_deg, 270 + pl.angle_deg,
                       dxfattribs={"layer": layer}),
    ]


def add_text(layout, pl: Placement, text, at, *, layer, height_mm=40.0, mtext=False):
    if mtext:
        return layout.add_mtext(text, dxfattribs={"layer": layer, "insert": pl.point(at),
                                                  "char_height": pl.length(height_mm)})
    return layout.add_text(text, dxfattribs={"layer": layer, "insert": pl.point(at), "height": pl.length(height_mm)})


def add_support(layout, pl: Placement, points, *, fix=None, how="text", text_at=None, layer="SUPPORT"):
    """A support marker: a POINT (one local point) or a LINE (two); fixity by TEXT, XDATA, or none."""
    if len(points) == 1:
        marker = layout.add_point(pl.point(points[0]), dxfattribs={"layer": layer})
    else:
        marker = layout.add_line(pl.point(points[0]), pl.point(points[1]), dxfattribs={"layer": layer})
    if fix is not None and how == "xdata":
        marker.set_xdata(XDATA_APPID, marker_xdata(fix=fix))
    elif fix is not None:
        where = text_at or tuple(np.mean(np.asarray(points, dtype=float), axis=0) + (0.0, 40.0))
        add_text(layout, pl, fix, where, layer=layer)
    return marker


def add_load(layout, pl: Placement, at, direction, *, kN=None, case=None, text=None, how="text", length_mm=300.0,
             text_offset=(20.0, 20.0), layer="LOAD", mtext=False):
    """A load marker: a LINE from ``at`` (local mm) along ``direction``; magnitude by TEXT or XDATA."""
    d = np.asarray(direction, dtype=float)
    d = d / np.hypot(*d)
    end = np.asarray(at, dtype=float) + d * length_mm
    line = layout.add_line(pl.point(at), pl.point(end), dxfattribs={"layer": layer})
    if how == "xdata":
        line.set_xdata(XDATA_APPID, marker_xdata(force_kN=kN, case=case))
    elif how == "text":
        label = text if text is not None else f"{kN:g} kN" + (f" {case}" if case else "")
        add_text(layout, pl, label, np.asarray(at, dtype=float) + text_offset, layer=layer, mtext=mtext)
    return line


# The sample panel, local mm.
WIDTH, HEIGHT = 3000.0, 600.0
ROUND_CENTRE, ROUND_DIAMETER = (600.0, 300.0), 200.0
RECT = (1300.0, 200.0, 1700.0, 400.0)
SLOT_A, SLOT_B, SLOT_RADIUS = (2300.0, 300.0), (2500.0, 300.0), 80.0
KEEP_RECT = (1450.0, 500.0, 1550.0, 600.0)
SUPPORT_LINE = ((0.0, 0.0), (150.0, 0.0))
SUPPORT_POINT = (3000.0, 0.0)
LOAD_TEXT_AT, LOAD_TEXT_KN = (1500.0, 600.0), 40.0
LOAD_XDATA_AT, LOAD_XDATA_KN, LOAD_XDATA_CASE = (2700.0, 600.0), 12.5, "wind"


def sample_panel(layout, pl: Placement, *, outline="lwpolyline", openings="lwpolyline"):
    """Draw the sample panel into ``layout``; ``outline``/``openings``: "lwpolyline" or "lines"."""
    add_rectangle(layout, pl, 0.0, 0.0, WIDTH, HEIGHT, layer="PANEL", style=outline)
    add_circle(layout, pl, ROUND_CENTRE, ROUND_DIAMETER)
    add_rectangle(layout, pl, *RECT, layer="OPENING", style=openings)
    add_slot(layout, pl, SLOT_A, SLOT_B, SLOT_RADIUS, style=openings)
    add_rectangle(layout, pl, *KEEP_RECT, layer="KEEP")
    add_support(layout, pl, SUPPORT_LINE, fix="xy", text_at=(75.0, 60.0))
    add_support(layout, pl, [SUPPORT_POINT], fix="y", text_at=(2950.0, 60.0))
    add_load(layout, pl, LOAD_TEXT_AT, (0.0, -1.0), kN=LOAD_TEXT_KN, text_offset=(20.0, -60.0))
    add_load(layout, pl, LOAD_XDATA_AT, (0.0, -1.0), kN=LOAD_XDATA_KN, case=LOAD_XDATA_CASE, how="xdata")


# Where each way of sample_drawing puts the panel ("insert": the INSERT's scale 2 undoes the block's half size).
PLACEMENTS = {
    "mm": Placement(),
    "m": Placement("m", 0.0, (12.5, -3.0)),
    "insert": Placement("mm", 30.0, (5000.0, 2000.0)),
    "far": Placement("mm", 30.0, (6_000_000.0, 2_000_000.0)),
}


def sample_drawing(tmp_path: Path, way: str) -> Path:
    """The sample panel written to a DXF file in one of four ways.

    - "mm": polylines (slot with bulges) in mm, at the origin;
    - "m": exploded LINEs and ARCs in metres ($INSUNITS 6), shifted;
    - "insert": drawn half size in a block (the round opening a nested block), inserted at scale 2 turned
      30 degrees;
    - "far": polylines turned 30 degrees, 6,000,000 mm from the origin (site coordinates).
    """
    if way == "mm":
        doc = new_doc("mm")
        sample_panel(doc.modelspace(), PLACEMENTS[way])
    elif way == "m":
        doc = new_doc("m")
        sample_panel(doc.modelspace(), PLACEMENTS[way], outline="lines", openings="lines")
    elif way == "insert":
        doc = new_doc("mm")
        block = doc.blocks.new("SAMPLE-PANEL")
        round_block = doc.blocks.new("ROUND-HOLE")
        add_circle(round_block, Placement(), (0.0, 0.0), ROUND_DIAMETER / 2, layer="0")
        scaled = Placement("mm", scale=0.5)
        add_rectangle(block, scaled, 0.0, 0.0, WIDTH, HEIGHT, layer="0")  # takes the INSERT's layer
        block.add_blockref("ROUND-HOLE", scaled.point(ROUND_CENTRE), dxfattribs={"layer": "OPENING"})
        add_rectangle(block, scaled, *RECT, layer="OPENING")
        add_slot(block, scaled, SLOT_A, SLOT_B, SLOT_RADIUS, style="lines")
        add_rectangle(block, scaled, *KEEP_RECT, layer="KEEP")
        add_support(block, scaled, SUPPORT_LINE, fix="xy", text_at=(75.0, 60.0))
        add_support(block, scaled, [SUPPORT_POINT], fix="y", text_at=(2950.0, 60.0))
        add_load(block, scaled, LOAD_TEXT_AT, (0.0, -1.0), kN=LOAD_TEXT_KN, text_offset=(20.0, -60.0),
                 length_mm=300.0)
        add_load(block, scaled, LOAD_XDATA_AT, (0.0, -1.0), kN=LOAD_XDATA_KN, case=LOAD_XDATA_CASE, how="xdata")
        pl = PLACEMENTS[way]
        doc.modelspace().add_blockref("SAMPLE-PANEL", pl.origin, dxfattribs={
            "layer": "PANEL", "xscale": 2, "yscale": 2, "rotation": pl.angle_deg})
    elif way == "far":
        doc = new_doc("mm")
        sample_panel(doc.modelspace(), PLACEMENTS[way])
    else:
        raise ValueError(way)
    return write(doc, tmp_path / f"sample-{way}.dxf")

