"""The values that flow through the pipeline: a panel, its openings, supports, loads and material.

Everything here is in the panel's *local frame*: millimetres, origin at the envelope's lower-left corner,
x along its bottom edge, y along its left edge. Forces are in N, line loads in N/mm, stresses in MPa.
A :class:`Frame` maps drawing coordinates (in the drawing's own unit, possibly rotated and far from the
origin) to the local frame and back; only the readers and writers at the edges use it.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Union

import numpy as np
import shapely
from shapely.geometry import Polygon, box

from .errors import LacunaError

Point = tuple[float, float]


@dataclass(frozen=True)
class Frame:
    """Drawing coordinates <-> the panel's local frame.

    ``origin`` is the drawing position (drawing units) of the local origin; ``angle_deg`` turns the drawing's
    x axis onto the local x axis (counter-clockwise); ``mm_per_unit`` scales drawing units to mm. The origin is
    subtracted before anything else, so site coordinates millions of mm from zero lose no precision.
    """

    origin: Point = (0.0, 0.0)
    angle_deg: float = 0.0
    mm_per_unit: float = 1.0
    unit: str = "mm"

    def _rotation(self) -> np.ndarray:
        a = math.radians(self.angle_deg)
        c, s = math.cos(a), math.sin(a)
        return np.array([[c, -s], [s, c]])

    def to_local(self, xy) -> np.ndarray:
        """Drawing points (drawing units), shape (2,) or (n, 2) -> local mm."""
        p = np.asarray(xy, dtype=float) - np.asarray(self.origin, dtype=float)
        return (p * self.mm_per_unit) @ self._rotation()

    def to_drawing(self, xy) -> np.ndarray:
        """Local points (mm) -> drawing units."""
        p = np.asarray(xy, dtype=float) @ self._rotation().T
        return p / self.mm_per_unit + np.asarray(self.origin, dtype=float)

    def vector_to_local(self, v) -> np.ndarray:
        """Turn a direction or force given along the drawing's axes onto the local axes (no scaling)."""
        return np.asarray(v, dtype=float) @ self._rotation()

    def vector_to_drawing(self, v) -> np.ndarray:
        return np.asarray(v, dtype=float) @ self._rotation().T

    def length_to_local(self, length: float) -> float:
        return float(length) * self.mm_per_unit

    def length_to_drawing(self, length_mm: float) -> float:
        return float(length_mm) / self.mm_per_unit


# A length in words as the voids stage and the rules write it: a number, or numbers joined by " x ", " -> ",
# " and " or " to " ("slot 100 x 450.0 mm", "size 125.0 -> 100 mm", "stock sizes of 250 and 315 mm"), then " mm".
_LENGTHS = re.compile(r"(\d+(?:\.\d+)?(?:(?: x | -> | and | to )\d+(?:\.\d+)?)*) mm\b")
_NUMBER = re.compile(r"\d+(?:\.\d+)?")
# An area in words as the voids stage writes it: a number, or numbers joined by " against " or " -> ", then " mm2"
# ("593202 against 584216 mm2 removed").
_AREAS = re.compile(r"(\d+(?:\.\d+)?(?:(?: against | -> | and | to )\d+(?:\.\d+)?)*) mm2\b")


def lengths_in_unit(text: str, frame: Frame) -> str:
    """``text`` with its lengths and areas (written in mm and mm2 by the voids stage, the rules and the limiting
    rule) in the drawing's unit, so that a report in metres says "0.282 m overall", "a minimum web of 0.05 m" and
    "0.5932 against 0.5842 m2 removed", like its columns. Coordinates in brackets are left as they are."""
    if frame.unit == "mm" or not text:
        return text

    def convert(match) -> str:
        numbers = _NUMBER.sub(lambda n: f"{frame.length_to_drawing(float(n.group())):.4g}", match.group(1))
        return f"{numbers} {frame.unit}"

    def convert_area(match) -> str:
        per = frame.mm_per_unit ** 2
        numbers = _NUMBER.sub(lambda n: f"{float(n.group()) / per:.4g}", match.group(1))
        return f"{numbers} {frame.unit}2"

    return _LENGTHS.sub(convert, _AREAS.sub(convert_area, text))


@dataclass(frozen=True)
class Material:
    E_MPa: float
    nu: float
    density_kg_m3: float | None = None
    name: str = ""

    def __post_init__(self):
        if not (self.E_MPa > 0 and math.isfinite(self.E_MPa)):
            raise LacunaError(f"Young's modulus must be positive, got E = {self.E_MPa} MPa.", where="[material] E_MPa")
        if not (0.0 <= self.nu < 0.5):
            raise LacunaError(
                f"Poisson's ratio must lie in [0, 0.5) for plane stress, got nu = {self.nu}.", where="[material] nu"
            )
        if self.density_kg_m3 is not None and not self.density_kg_m3 >= 0:
            raise LacunaError(
                f"density must not be negative, got {self.density_kg_m3} kg/m3.", where="[material] density_kg_m3"
            )


@dataclass(frozen=True)
class Region:
    """A closed shape in the panel: an existing opening or a zone that must stay solid (local mm)."""

    shape: Polygon
    layer: str = ""
    handle: str | None = None

    @property
    def source(self) -> str:
        return f"layer {self.layer}, handle {self.handle}" if self.handle else f"layer {self.layer}"


@dataclass(frozen=True)
class Support:
    """A support at one point, or along a straight piece of the outline (two end points), local mm.

    ``fix`` names the restrained local directions: "xy", "x" or "y".
    """

    points: tuple[Point, ...]
    fix: str = "xy"
    source: str = ""

    def __post_init__(self):
        if self.fix not in ("xy", "x", "y"):
            raise LacunaError(f'support fixity must be "xy", "x" or "y", got {self.fix!r}.', where=self.source or None)
        if len(self.points) not in (1, 2):
            raise LacunaError("a support is one point or a segment of two points.", where=self.source or None)

    @property
    def is_point(self) -> bool:
        return len(self.points) == 1


@dataclass(frozen=True)
class PointLoad:
    at: Point
    force_N: Point
    case: str = "main"
    source: str = ""


@dataclass(frozen=True)
class LineLoad:
    """A load spread uniformly along a straight segment: intensity in N per mm of segment length."""

    start: Point
    end: Point
    intensity_N_per_mm: Point
    case: str = "main"
    source: str = ""

    @property
    def length_mm(self) -> float:
        return math.dist(self.start, self.end)


Load = Union[PointLoad, LineLoad]


@dataclass(frozen=True)
class MovingLoad:
    """A load travelling along a straight path, as the job file gives it (drawing axes, mm, N).

    A point load (``force_N``) or a patch (``intensity_N_per_mm`` over ``length_mm`` of the path); ``positions``
    stops from end to end, or stops at most ``step_mm`` apart. ``case`` names its stops' load cases ("" for the
    default); ``weight`` is the weight of the whole travelling load, shared equally by its stops.
    """

    start: Point
    end: Point
    positions: int | None = None
    step_mm: float | None = None
    force_N: Point | None = None
    intensity_N_per_mm: Point | None = None
    length_mm: float = 0.0
    case: str = ""
    weight: float = 1.0
    source: str = ""

    @property
    def is_patch(self) -> bool:
        return self.intensity_N_per_mm is not None


@dataclass(frozen=True)
class Travel:
    """A travelling load as the panel carries it: one load case per stop (local frame, mm).

    ``cases`` are the stops' case names in order along the path; ``at`` the load's centre at each stop.
    """

    name: str
    cases: tuple[str, ...]
    at: tuple[Point, ...]
    weight: float = 1.0
    length_mm: float = 0.0          # a patch's length (0: a point load)
    source: str = ""                # the [[moving_load]] table(s) it comes from
    set_by: str = "positions"       # the job key that set the number of stops: "positions" or "step"


@dataclass(frozen=True)
class Panel:
    """A rectangular panel in its local frame, with everything the analysis needs."""

    width_mm: float
    height_mm: float
    thickness_mm: float
    material: Material
    openings: tuple[Region, ...] = ()
    keep: tuple[Region, ...] = ()
    supports: tuple[Support, ...] = ()
    loads: tuple[Load, ...] = ()
    case_weights: tuple[tuple[str, float], ...] = ()
    self_weight: bool = False
    element_size_mm: float | None = None
    travels: tuple[Travel, ...] = ()  # travelling loads: their stops are load cases among ``loads``
    frame: Frame = field(default_factory=Frame)
    name: str = "panel"
    source: str = ""

    def __post_init__(self):
        if not (self.thickness_mm > 0 and math.isfinite(self.thickness_mm)):
            raise LacunaError(
                f"panel thickness must be positive, got {self.thickness_mm} mm.", where="[panel] thickness"
            )
        if not (self.width_mm > 0 and self.height_mm > 0):
            raise LacunaError(f"panel envelope {self.width_mm} x {self.height_mm} mm has no area.")
        if self.element_size_mm is not None and not self.element_size_mm > 0:
            raise LacunaError(
                f"element size must be positive, got {self.element_size_mm} mm.", where="[panel] element_size"
            )

    @property
    def envelope(self) -> Polygon:
        return box(0.0, 0.0, self.width_mm, self.height_mm)

    @property
    def solid(self) -> Polygon:
        """The envelope less its openings: the material the drawing shows."""
        if not self.openings:
            return self.envelope
        return shapely.difference(self.envelope, shapely.union_all([o.shape for o in self.openings]))

    @property
    def cases(self) -> tuple[str, ...]:
        """Load-case names in the order they first appear (loads, then weights)."""
        names: dict[str, None] = {}
        for load in self.loads:
            names.setdefault(load.case, None)
        for name, _ in self.case_weights:
            names.setdefault(name, None)
        return tuple(names) or ("main",)

    def case_weight(self, case: str) -> float:
        return dict(self.case_weights).get(case, 1.0)


@dataclass(frozen=True)
class Layers:
    """Where things are found in a drawing (CONTRACT.md defaults; renamable in the job file's [layers])."""

    outline: str = "PANEL"
    openings: str = "OPENING"
    keep: str = "KEEP"
    support: str = "SUPPORT"
    load: str = "LOAD"


@dataclass(frozen=True)
class Drawing:
    """What a drawing says about a panel, already in the panel's local frame (mm, N).

    ``supports`` and ``loads`` come from the drawing's markers; the job file may add to or replace them.
    ``warnings`` lists what was healed or assumed (unitless drawing taken as mm, a gap closed, audit findings).
    """

    path: str
    unit: str
    frame: Frame
    width_mm: float
    height_mm: float
    outline_handles: tuple[str, ...] = ()
    openings: tuple[Region, ...] = ()
    keep: tuple[Region, ...] = ()
    supports: tuple[Support, ...] = ()
    loads: tuple[Load, ...] = ()
    warnings: tuple[str, ...] = ()


@dataclass(frozen=True)
class Rules:
    """Fabrication rules in force for one panel (mm), each value with where it comes from.

    ``sources`` maps a rule name ("min_web", "edge_cover", ...) to its source: a standard or design guide,
    "common practice, no source", "from memory", or "job file" when the job set it.
    """

    profile: str = "custom"
    min_web_mm: float = 60.0
    edge_cover_mm: float = 50.0
    min_void_mm: float = 20.0
    bearing_clearance_mm: float = 100.0
    bore_diameters_mm: tuple[float, ...] = ()
    slot_widths_mm: tuple[float, ...] = ()
    corner: str = "none"
    corner_size_mm: float = 0.0
    # Profile-specific rules (0 or None: not in force). ``web_ratio``: a web is at least this many times the
    # larger void's size (its smallest enclosing circle); ``min_void_per_thickness``: a void's size is at least
    # this many panel thicknesses; ``depth_band``: void material stays within this middle fraction of the
    # panel's depth (its shorter side).
    web_ratio: float = 0.0
    min_void_per_thickness: float = 0.0
    depth_band: float | None = None
    # Shortest side of a made n-gon (0: the fitting's own default from the corner easing, see voids.layout).
    least_feature_mm: float = 0.0
    # The schedule's words for what makes an n-gon, a slot and a bore, in the profile's trade ([tool_words] in
    # toolkit/rules/profiles/*.toml); these are the words of a job without a profile.
    tool_words: tuple[str, str, str] = ("cut", "slot", "bore")
    sources: tuple[tuple[str, str], ...] = ()

    def source(self, rule: str) -> str:
        return dict(self.sources).get(rule, "")


Vertex = tuple[float, float, float]


@dataclass(frozen=True)
class Void:
    """A void to make (or one drawn by hand, for checking), in the panel's local frame (mm).

    ``outline`` is the closed path as (x, y, bulge) vertices, bulge = tan(theta / 4) of the arc to the next vertex
    (0 for a straight side; DXF LWPOLYLINE convention), so slots and eased corners keep true arcs; a bore has an
    empty outline and its ``size_mm`` is the diameter. ``shape`` is the flattened polygon used for checks and FE.
    """

    id: str
    family: str                      # "polygon", "slot" or "bore"
    centre: Point
    size_mm: float                   # bore: diameter; slot: width; polygon: diameter of the smallest circle
                                     # round its corners (a regular n-gon: across corners)
    shape: Polygon
    outline: tuple[Vertex, ...] = ()
    sides: int = 0                   # polygon vertex count; 0 for slots and bores
    length_mm: float = 0.0           # slot: overall length; polygon: longest extent
    angle_deg: float = 0.0           # slot / polygon orientation in the local frame
    tool: str = ""                   # the bit, cutter or former that makes it, e.g. "bore 50 mm"
    handle: str | None = None        # drawing entity, when read from a drawing
    layer: str = ""
    corners: tuple[Point, ...] = ()  # polygon: the sharp corners before any easing, counter-clockwise
    regular: bool = False            # polygon: equal sides and equal angles

    @property
    def area_mm2(self) -> float:
        return float(self.shape.area)
