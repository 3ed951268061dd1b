"""Hypothesis strategies for whole-pipeline fuzzing: random valid panels and random damaged drawings.

``valid_panels()`` draws a :class:`PanelCase`: a rectangular panel of random size, turned by a random angle,
placed anywhere (site coordinates far from the origin included), drawn in a random length unit, with random
round, rectangular and slotted openings inside it away from its edges, two segment supports on its bottom edge
at both ends, and random point and line loads on its material; its job file may use another unit than the
drawing, and supports and point loads may be drawn as markers instead of listed in the job. Every length of the
job (element size, rules) is scaled to the panel so a few hundred elements cover it and the fabrication rules
leave room for voids: a valid panel must analyse and optimise.

``damaged_drawings()`` draws a :class:`DamagedCase`: a valid panel's drawing damaged by one or more of:
truncation at a random byte, deletion of random group-code pairs, garbage entities, a wrong $INSUNITS code,
NaN / infinite / huge coordinates, duplicated handles, entities moved to another layer, and binary garbage.
Its job file is the valid panel's, so whatever goes wrong is the drawing's fault.

Both build their files only when asked (``write``), so a test picks its own folder. The drawings are drawn with
the builders of ``drawings.py``; the group-code pairs are split with ``group_codes.pairs``.
"""

from __future__ import annotations

import io
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import shapely
from hypothesis import strategies as st
from shapely.geometry import Point, box

from drawings import Placement, add_circle, add_load, add_rectangle, add_slot, add_support, new_doc
from group_codes import pairs
from toolkit.units import MM_PER_UNIT

UNITS = tuple(MM_PER_UNIT)
PROFILES = ("timber-bored", "precast-formed", "steel-cut")
FAMILIES = ("polygon", "slot", "bore", "mixed")
DXF_VERSIONS = ("R2000", "R2004", "R2007", "R2010", "R2013", "R2018")
OUR_LAYERS = ("PANEL", "OPENING", "KEEP", "SUPPORT", "LOAD", "0", "NOTES")

# Thickness ranges per profile (mm): what each trade makes, and small enough that a profile's least void
# (steel-cut: 1.5 thicknesses) still fits the panels drawn here. Common practice, no source.
THICKNESS_MM = {"timber-bored": (60.0, 200.0), "precast-formed": (100.0, 250.0), "steel-cut": (6.0, 25.0)}


def _num(value: float) -> str:
    """A float as TOML (repr keeps every digit; TOML has no NaN here because every value is finite)."""
    value = float(value)
    assert math.isfinite(value), value
    return repr(value)


# --- valid panels -------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Hole:
    """An opening in the panel's local frame (mm): a circle, an axis-parallel rectangle or a slot."""

    kind: str                      # "circle", "rect", "slot"
    centre: tuple[float, float]
    a: float                       # circle: diameter; rect: width; slot: centre-to-centre length
    b: float                       # circle: unused; rect: height; slot: width
    vertical: bool = False         # slot along local y
    style: str = "lwpolyline"      # "lwpolyline" or "lines"

    def shape(self):
        x, y = self.centre
        if self.kind == "circle":
            return Point(x, y).buffer(self.a / 2, quad_segs=32)
        if self.kind == "rect":
            return box(x - self.a / 2, y - self.b / 2, x + self.a / 2, y + self.b / 2)
        half = self.a / 2
        axis = shapely.LineString([(x, y - half), (x, y + half)] if self.vertical else [(x - half, y), (x + half, y)])
        return axis.buffer(self.b / 2, quad_segs=32)

    def draw(self, layout, pl: Placement) -> None:
        x, y = self.centre
        if self.kind == "circle":
            add_circle(layout, pl, self.centre, self.a)
        elif self.kind == "rect":
            add_rectangle(layout, pl, x - self.a / 2, y - self.b / 2, x + self.a / 2, y + self.b / 2,
                          layer="OPENING", style=self.style)
        elif self.vertical:
            # drawings.add_slot draws along local x; a vertical slot is the same slot a quarter turn further.
            turned = Placement(pl.unit, pl.angle_deg + 90.0, pl.point((x, y)), pl.scale)
            add_slot(layout, turned, (-self.a / 2, 0.0), (self.a / 2, 0.0), self.b / 2, style=self.style)
        else:
            add_slot(layout, pl, (x - self.a / 2, y), (x + self.a / 2, y), self.b / 2, style=self.style)


@dataclass(frozen=True)
class PanelCase:
    """A random valid panel: geometry in its local frame (mm), how it sits in the drawing, and its job.

    Forces are kN (point loads) and kN/m (line loads) along the panel's local axes; the job file gives them
    along the drawing's axes, turned by ``placement.angle_deg``.
    """

    width_mm: float
    height_mm: float
    thickness_mm: float
    placement: Placement
    unitless: bool                 # mm drawing with $INSUNITS = 0 (read as mm, with a warning)
    job_unit: str
    version: str
    outline_style: str
    holes: tuple[Hole, ...]
    supports: tuple[tuple[tuple[tuple[float, float], tuple[float, float]], str], ...]
    point_loads: tuple[tuple[tuple[float, float], tuple[float, float]], ...]
    line_loads: tuple[tuple[tuple[float, float], tuple[float, float], tuple[float, float]], ...]
    support_markers: bool
    load_markers: str              # "" (job file), "text" or "xdata"
    element_size_mm: float
    E_MPa: float
    nu: float
    profile: str
    family: str
    sides: int
    volume_fraction: float
    evolution_rate: float
    max_iterations: int
    rules_mm: dict = field(default_factory=dict)

    # -- the physics the generator knows, for checks that do not ask the program ------------------------------

    def load_sum_kN(self) -> np.ndarray:
        """Resultant of every load along the drawing's axes, kN: point forces plus intensity x length."""
        total = np.zeros(2)
        for _, f in self.point_loads:
            total += f
        for a, b, w in self.line_loads:
            total += np.asarray(w) * math.dist(a, b) / 1000.0
        return _turn(total, self.placement.angle_deg)

    def solid(self):
        """The panel's material in its local frame (mm)."""
        cut = shapely.union_all([h.shape() for h in self.holes]) if self.holes else None
        envelope = box(0.0, 0.0, self.width_mm, self.height_mm)
        return envelope if cut is None else envelope.difference(cut)

    def to_local(self, xy_drawing) -> np.ndarray:
        """Drawing coordinates (drawing unit) -> local mm: the inverse of ``placement.point``."""
        pl = self.placement
        d = (np.asarray(xy_drawing, dtype=float) - np.asarray(pl.origin)) * pl.mm_per_unit / pl.scale
        return _turn(d, -pl.angle_deg)

    # -- files ----------------------------------------------------------------------------------------------

    def document(self):
        pl = self.placement
        doc = new_doc(None if self.unitless else pl.unit, self.version)
        msp = doc.modelspace()
        add_rectangle(msp, pl, 0.0, 0.0, self.width_mm, self.height_mm, layer="PANEL", style=self.outline_style)
        for hole in self.holes:
            hole.draw(msp, pl)
        if self.support_markers:
            for (a, b), fix in self.supports:
                text_at = ((a[0] + b[0]) / 2, 0.1 * self.height_mm)
                add_support(msp, pl, [a, b], fix=fix, text_at=text_at)
        if self.load_markers:
            for at, f in self.point_loads:
                kn = float(np.hypot(*f))
                # Every digit in the text, so the force read back is the force drawn.
                add_load(msp, pl, at, f, kN=kn, text=f"{kn!r} kN", how=self.load_markers,
                         length_mm=self.marker_length_mm, text_offset=(5.0, 5.0))
        return doc

    @property
    def marker_length_mm(self) -> float:
        return 0.2 * self.height_mm

    def dxf_bytes(self, fmt: str = "asc") -> bytes:
        doc = self.document()
        if fmt == "bin":
            stream = io.BytesIO()
            doc.write(stream, fmt="bin")
            return stream.getvalue()
        stream = io.StringIO()
        doc.write(stream)
        return stream.getvalue().encode(doc.output_encoding)

    def job_text(self) -> str:
        """The job file: every length in ``job_unit``, positions along the drawing's axes."""
        k = 1.0 / MM_PER_UNIT[self.job_unit]   # mm -> job unit
        pl = self.placement

        def at(local) -> str:
            x, y = pl.point(local)             # drawing unit
            s = pl.mm_per_unit * k
            return f"[{_num(x * s)}, {_num(y * s)}]"

        lines = [
            f'units = "{self.job_unit}"',
            "[panel]",
            f"thickness = {_num(self.thickness_mm * k)}",
            f"element_size = {_num(self.element_size_mm * k)}",
            "[material]",
            f"E_MPa = {_num(self.E_MPa)}",
            f"nu = {_num(self.nu)}",
            "density_kg_m3 = 500",
        ]
        if not self.support_markers:
            for (a, b), fix in self.supports:
                lines += ["[[support]]", f"from = {at(a)}", f"to = {at(b)}", f'fix = "{fix}"']
        if not self.load_markers:
            for p, f in self.point_loads:
                fx, fy = _turn(f, pl.angle_deg)
                lines += ["[[load]]", f"at = {at(p)}", f"fx_kN = {_num(fx)}", f"fy_kN = {_num(fy)}"]
            for a, b, w in self.line_loads:
                wx, wy = _turn(w, pl.angle_deg)
                lines += ["[[load]]", f"from = {at(a)}", f"to = {at(b)}", f"wx_kN_m = {_num(wx)}",
                          f"wy_kN_m = {_num(wy)}"]
        lines += [
            "[optimize]",
            f"volume_fraction = {_num(self.volume_fraction)}",
            f"evolution_rate = {_num(self.evolution_rate)}",
            f"max_iterations = {self.max_iterations}",
            "[voids]",
            f'family = "{self.family}"',
        ]
        if self.family == "polygon":
            lines.append(f"sides = {self.sides}")
        lines += ["[rules]", f'profile = "{self.profile}"']
        lines += [f"{key} = {_num(value * k)}" for key, value in sorted(self.rules_mm.items())]
        return "\n".join(lines) + "\n"

    def write(self, folder: Path, stem: str = "panel") -> tuple[Path, Path]:
        """Write ``<stem>.dxf`` and ``<stem>.toml`` into ``folder``."""
        folder = Path(folder)
        dxf, job = folder / f"{stem}.dxf", folder / f"{stem}.toml"
        dxf.write_bytes(self.dxf_bytes())
        job.write_text(self.job_text())
        return dxf, job


def _turn(v, angle_deg: float) -> np.ndarray:
    """Vectors (shape (2,) or (n, 2)) turned counter-clockwise by ``angle_deg``."""
    a = math.radians(angle_deg)
    c, s = math.cos(a), math.sin(a)
    return np.asarray(v, dtype=float) @ np.array([[c, s], [-s, c]])


def _roller_fix(angle_deg: float) -> str:
    """The fixity letter that holds the panel's bottom edge across itself, in the reader's local axes.

    The reader takes local x as the side direction within (-45, 45] degrees of drawing x (toolkit.dxf_in.outline);
    our bottom edge runs at ``angle_deg``, so it is the reader's x direction when the angle is near a multiple
    of 180 degrees and its y direction when it is near an odd multiple of 90.
    """
    quarter = round(angle_deg / 90.0) % 2
    return "y" if quarter == 0 else "x"


def _spread(candidates, keep_apart, gap: float):
    """Keep candidates in order, dropping each one nearer than ``gap`` to one already kept or to keep_apart."""
    kept = []
    for item, geom in candidates:
        if all(geom.distance(other) >= gap for _, other in kept) and all(geom.distance(g) >= gap for g in keep_apart):
            kept.append((item, geom))
    return [item for item, _ in kept]


@st.composite
def valid_panels(draw, *, max_holes: int = 3, elements=(150, 450), units=UNITS) -> PanelCase:
    """A random valid panel (see the module's docstring); ``elements``: the range of the FE element count;
    ``units``: the drawing units to draw in."""
    width = draw(st.floats(1200.0, 4000.0))
    height = draw(st.floats(300.0, min(1200.0, width)))
    unit = draw(st.sampled_from(units))
    # Angles within half a degree of 45 + k 90 would leave the reader's choice of local x to rounding.
    angle = draw(st.floats(0.0, 360.0, exclude_max=True).filter(lambda a: abs((a % 90.0) - 45.0) > 0.5))
    far = draw(st.sampled_from([0.0, 1e3, 1e5, 6e6]))
    origin_mm = (draw(st.floats(-1.0, 1.0)) * far, draw(st.floats(-1.0, 1.0)) * far)
    pl = Placement(unit, angle, (origin_mm[0] / MM_PER_UNIT[unit], origin_mm[1] / MM_PER_UNIT[unit]))
    unitless = unit == "mm" and draw(st.booleans())
    profile = draw(st.sampled_from(PROFILES))
    thickness = draw(st.floats(*THICKNESS_MM[profile]))

    # Rules scaled to the panel, so the edge bands, webs and bearing zones leave room for voids.
    depth = min(width, height)
    rules = {
        "edge_cover": draw(st.floats(0.02, 0.06)) * depth,
        "min_web": draw(st.floats(0.02, 0.06)) * depth,
        "bearing_clearance": draw(st.floats(0.03, 0.08)) * width,
        "min_void": draw(st.floats(0.03, 0.08)) * depth,
    }

    # Openings inside the middle of the panel, clear of the bearing zones at the ends and of each other.
    holes = []
    for _ in range(draw(st.integers(0, max_holes))):
        kind = draw(st.sampled_from(["circle", "rect", "slot"]))
        a = draw(st.floats(0.1, 0.3)) * height
        b = draw(st.floats(0.1, 0.3)) * height if kind != "circle" else a
        vertical = kind == "slot" and draw(st.booleans())
        if kind == "slot":
            a, b = max(a, b) * draw(st.floats(1.0, 2.0)), min(a, b)  # length between centres, width
        half_x = (b if vertical else a + b) / 2 if kind == "slot" else a / 2
        half_y = (a + b if vertical else b) / 2 if kind == "slot" else b / 2
        x = draw(st.floats(0.2, 0.8)) * width
        y = draw(st.floats(0.0, 1.0)) * max(height - 2 * (half_y + 0.15 * height), 0.0) + half_y + 0.15 * height
        if not (0.15 * width + half_x <= x <= 0.85 * width - half_x and y + half_y <= 0.85 * height):
            continue
        style = draw(st.sampled_from(["lwpolyline", "lines"]))
        holes.append(Hole(kind, (x, y), a, b, vertical, style))
    gap = rules["min_web"] + rules["edge_cover"]
    holes = _spread([(h, h.shape()) for h in holes], [], gap)

    seat = draw(st.floats(0.03, 0.08)) * width
    roller = draw(st.sampled_from(["xy", _roller_fix(angle)]))
    supports = ((((0.0, 0.0), (seat, 0.0)), "xy"), (((width - seat, 0.0), (width, 0.0)), roller))

    # Point loads on the top edge or on material inside; line loads along part of the top edge.
    top = st.tuples(st.floats(0.1, 0.9).map(lambda f: f * width), st.just(height))
    inside = st.tuples(st.floats(0.1, 0.9).map(lambda f: f * width), st.floats(0.2, 0.8).map(lambda f: f * height))
    force = st.tuples(st.floats(0.0, 360.0), st.floats(1.0, 50.0)).map(
        lambda am: (am[1] * math.cos(math.radians(am[0])), am[1] * math.sin(math.radians(am[0]))))
    points = draw(st.lists(st.tuples(st.one_of(top, inside), force), min_size=0, max_size=3))
    spacing = max(0.1 * width, 0.25 * height)
    hole_shapes = [h.shape() for h in holes]
    points = _spread([(p, Point(p[0])) for p in points], [s.buffer(0.05 * height) for s in hole_shapes], spacing)
    load_markers = draw(st.sampled_from(["", "", "text", "xdata"]))
    lines = []
    if not load_markers:
        for _ in range(draw(st.integers(0 if points else 1, 2))):
            x0, x1 = sorted(draw(st.tuples(st.floats(0.0, 1.0), st.floats(0.0, 1.0))))
            if x1 - x0 < 0.05:
                x0, x1 = 0.0, 1.0
            w = draw(st.tuples(st.floats(-20.0, 20.0), st.floats(-20.0, 20.0)).filter(lambda v: math.hypot(*v) > 1))
            lines.append(((x0 * width, height), (x1 * width, height), w))
    if not points and not lines:  # markers only, and none kept: one load at mid-span on the top edge
        points = [((0.5 * width, height), (0.0, -10.0))]

    n = draw(st.integers(*elements))
    return PanelCase(
        width_mm=width, height_mm=height, thickness_mm=thickness, placement=pl, unitless=unitless,
        job_unit=draw(st.sampled_from(UNITS)), version=draw(st.sampled_from(DXF_VERSIONS)),
        outline_style=draw(st.sampled_from(["lwpolyline", "polyline", "lines"])),
        holes=tuple(holes), supports=supports, point_loads=tuple(points), line_loads=tuple(lines),
        support_markers=draw(st.booleans()), load_markers=load_markers,
        element_size_mm=math.sqrt(width * height / n),
        E_MPa=draw(st.floats(1000.0, 210000.0)), nu=draw(st.floats(0.0, 0.45)),
        profile=profile, family=draw(st.sampled_from(FAMILIES)), sides=draw(st.integers(3, 12)),
        volume_fraction=draw(st.floats(0.5, 0.9)), evolution_rate=draw(st.floats(0.05, 0.2)),
        max_iterations=draw(st.integers(2, 5)), rules_mm=rules,
    )


# --- damaged drawings ---------------------------------------------------------------------------------------


@dataclass(frozen=True)
class DamagedCase:
    """A damaged drawing (its bytes), the valid job of the panel it was made from, and what was done to it."""

    data: bytes
    job: str
    damage: tuple[str, ...]

    def write(self, folder: Path, stem: str = "damaged") -> tuple[Path, Path]:
        folder = Path(folder)
        dxf, job = folder / f"{stem}.dxf", folder / f"{stem}.toml"
        dxf.write_bytes(self.data)
        job.write_text(self.job)
        return dxf, job

    def __repr__(self) -> str:  # the bytes are long; the recipe says what happened
        return f"DamagedCase(damage={self.damage!r}, {len(self.data)} bytes)"


Pairs = list[tuple[int, str]]

# Group codes of coordinates and sizes (DXF reference: 10-18 / 20-28 x and y, 40 radius or height, 42 bulge).
NUMERIC_CODES = (10, 20, 11, 21, 40, 42)
BAD_NUMBERS = ("nan", "NaN", "inf", "-inf", "1e309", "-1e309", "1e300", "1e-300", "0", "", "12,5", "x")
GARBAGE_TYPES = ("LINE", "CIRCLE", "ARC", "LWPOLYLINE", "POLYLINE", "VERTEX", "SEQEND", "3DFACE", "SOLID",
                 "SPLINE", "ELLIPSE", "HATCH", "TEXT", "MTEXT", "INSERT", "POINT", "XLINE", "RAY", "WIPEOUT",
                 "LACUNA-NONSENSE")


def _entities_span(p: Pairs) -> tuple[int, int]:
    """Indices of the first entity record and of the ENDSEC that closes the ENTITIES section."""
    start = next((i for i in range(len(p) - 1) if p[i] == (0, "SECTION") and p[i + 1] == (2, "ENTITIES")), None)
    if start is None:  # an earlier damage took the section's start: any pair will do
        return 0, len(p)
    end = next((i for i in range(start, len(p)) if p[i] == (0, "ENDSEC")), len(p))
    return start + 2, end


def _records(p: Pairs, lo: int, hi: int) -> list[tuple[int, int]]:
    """(start, end) index ranges of the records between lo and hi (each starts at a code-0 pair)."""
    starts = [i for i in range(lo, hi) if p[i][0] == 0]
    return list(zip(starts, starts[1:] + [hi]))


def _join(p: Pairs) -> bytes:
    return "".join(f"{code:>3}\n{value}\n" for code, value in p).encode("utf-8")


@st.composite
def _garbage_record(draw) -> Pairs:
    kind = draw(st.sampled_from(GARBAGE_TYPES))
    record: Pairs = [(0, kind)]
    if draw(st.booleans()):
        record.append((5, draw(st.sampled_from(["FFFF", "1", "0", "ZZ", ""]))))
    record.append((8, draw(st.sampled_from(OUR_LAYERS))))
    number = st.one_of(st.floats(-1e4, 1e4).map(repr), st.sampled_from(BAD_NUMBERS))
    codes = st.sampled_from([10, 20, 30, 11, 21, 40, 41, 42, 50, 51, 70, 71, 72, 90, 1, 2, 3, 100, 330, 1001])
    for code in draw(st.lists(codes, max_size=12)):
        if code in (1, 2, 3, 100, 330, 1001):
            value = draw(st.sampled_from(["40 kN", "xy", "AcDbEntity", "AcDbLine", "LACUNA", "", "??"]))
        elif code in (70, 71, 72, 90):
            value = draw(st.sampled_from(["0", "1", "2", "4", "-1", "99999999", "1.5", "q"]))
        else:
            value = draw(number)
        record.append((code, value))
    return record


@st.composite
def _damage_pairs(draw, p: Pairs) -> tuple[Pairs, str]:
    """One structural damage to the group-code pairs of an ASCII drawing, and its description."""
    p = list(p)
    lo, hi = _entities_span(p)
    records = _records(p, lo, hi)
    how = draw(st.sampled_from(["delete", "garbage", "insunits", "number", "handle", "layer", "copy"]))
    spots = {
        "number": [i for i in range(lo, hi) if p[i][0] in NUMERIC_CODES],
        "handle": [i for i in range(lo, hi) if p[i][0] == 5],
        "layer": [i for i in range(lo, hi) if p[i][0] == 8],
        "copy": records,
    }
    if how in spots and len(spots[how]) < 2:
        how = "garbage"  # too little left of the entities to damage this way
    if how == "delete":
        n = draw(st.integers(1, 8))
        where = "entities" if draw(st.booleans()) else "anywhere"
        span = (lo, hi) if where == "entities" else (0, len(p))
        doomed = set(draw(st.lists(st.integers(span[0], max(span[1] - 1, span[0])), min_size=1, max_size=n)))
        return [q for i, q in enumerate(p) if i not in doomed], f"deleted pairs {sorted(doomed)} ({where})"
    if how == "garbage":
        at = draw(st.sampled_from([r[0] for r in records] + [hi]))  # before an entity, or last
        junk = draw(st.lists(_garbage_record(), min_size=1, max_size=3))
        flat = [q for record in junk for q in record]
        return p[:at] + flat + p[at:], f"garbage entities {[r[0][1] for r in junk]} at pair {at}"
    if how == "insunits":
        value = draw(st.one_of(st.integers(-5, 30).map(str), st.sampled_from(["", "mm", "4.5", "1e9", "nan"])))
        i = next((k for k, q in enumerate(p) if q == (9, "$INSUNITS")), None)
        if i is None:
            return p, "no $INSUNITS to damage"
        p[i + 1] = (p[i + 1][0], value)
        return p, f"$INSUNITS = {value!r}"
    if how == "number":
        i = draw(st.sampled_from(spots["number"]))
        value = draw(st.sampled_from(BAD_NUMBERS))
        p[i] = (p[i][0], value)
        return p, f"pair {i} (code {p[i][0]}) = {value!r}"
    if how == "handle":
        i, j = draw(st.lists(st.sampled_from(spots["handle"]), min_size=2, max_size=2, unique=True))
        p[j] = (5, p[i][1])
        return p, f"handle of pair {j} duplicated from pair {i} ({p[i][1]})"
    if how == "layer":
        i = draw(st.sampled_from(spots["layer"]))
        layer = draw(st.sampled_from(OUR_LAYERS))
        p[i] = (8, layer)
        return p, f"pair {i} moved to layer {layer}"
    a, b = draw(st.sampled_from(records))
    return p[:b] + p[a:b] + p[b:], f"record at pair {a} ({p[a][1]}) copied"


@st.composite
def _damage_bytes(draw, data: bytes) -> tuple[bytes, str]:
    """One damage to the raw bytes: truncation, spliced binary garbage, or a run of bytes overwritten."""
    how = draw(st.sampled_from(["truncate", "splice", "overwrite"]))
    # A share of the length, not a byte index: the drawing's header holds the time it was written, so its length
    # differs by a byte or two between runs, and the draw must not depend on it (hypothesis replays draws).
    at = int(draw(st.floats(0.0, 1.0, exclude_max=True)) * len(data))
    if how == "truncate":
        return data[:at], f"truncated at byte {at} of {len(data)}"
    junk = draw(st.binary(min_size=1, max_size=64))
    if how == "splice":
        return data[:at] + junk + data[at:], f"{len(junk)} garbage bytes spliced in at byte {at}"
    return data[:at] + junk + data[at + len(junk):], f"{len(junk)} bytes overwritten at byte {at}"


@st.composite
def damaged_drawings(draw, *, base=None) -> DamagedCase:
    """A valid panel's drawing with random damage (see the module's docstring).

    The default base panels are drawn in metres or feet: a wrong but known $INSUNITS code then makes the panel
    at most 3.3 times larger (feet read as metres), so the element count stays in the thousands. Pass ``base``
    (e.g. ``valid_panels(elements=(100, 200))``) to damage drawings in any unit; their grids may grow up to
    a millionfold (millimetres read as metres), and the run then measures the grid-size refusal too.
    """
    case = draw(base if base is not None else valid_panels(max_holes=2, elements=(100, 200), units=("m", "ft")))
    job = case.job_text()
    kind = draw(st.sampled_from(["ascii", "ascii", "ascii", "binary-dxf", "garbage"]))
    if kind == "garbage":
        head = draw(st.sampled_from([b"", b"  0\nSECTION\n", b"AutoCAD Binary DXF\r\n\x1a\x00", b"PK\x03\x04"]))
        tail = draw(st.binary(min_size=0, max_size=2048))
        return DamagedCase(head + tail, job, (f"binary garbage after {head!r}",))
    if kind == "binary-dxf":
        data, story = draw(_damage_bytes(case.dxf_bytes("bin")))
        return DamagedCase(data, job, ("binary DXF", story))
    p = pairs(case.dxf_bytes())
    stories = []
    for _ in range(draw(st.integers(1, 3))):
        p, story = draw(_damage_pairs(p))
        stories.append(story)
    data = _join(p)
    if draw(st.booleans()):
        data, story = draw(_damage_bytes(data))
        stories.append(story)
    return DamagedCase(data, job, tuple(stories))
