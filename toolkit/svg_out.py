"""Results -> SVG: the analysis figure of a panel, drawn to scale on a sheet sized in millimetres.

The sheet holds a heading, the panel drawn at a stated scale (1:N) in its local frame, a legend band (colour
bar, line key, scale bar) and a title block. Everything that belongs to the panel lives in the group
``drawing``, whose coordinates are the panel's local frame in mm (x right, y up); one transform on that group
flips y and scales to paper. Inside it each kind of content has a group of its own ("stress", "directions",
"panel", "openings", "keep", "deflected", "supports", "loads"); the result sheet adds "density" and one group
per output layer of CONTRACT.md, named in lower case, with :meth:`Figure.layer`.

Figures: :func:`analysis_svg` (stress and deflection of one load case), :func:`result_svg` (the voids to make,
over the optimised layout or the stress), :func:`layout_frame_svg` (one frame of the evolving layout) and
:func:`convergence_svg` (compliance and volume fraction per iteration).

Inputs are plain arrays so the figure depends on no result type: displacements (ndof,) in mm, element-centre
stresses (ne, 3) = sx, sy, txy in MPa, solid area fractions (ne,).
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Iterable, Sequence

import numpy as np
import shapely
import svgwrite
from shapely.geometry import MultiPolygon, Polygon

from . import dxf_out, palette
from .errors import LacunaError
from .fe.fractions import solid_fractions
from .fe.stress import principal_stresses
from .model import LineLoad, Panel, PointLoad, Support, Void

SHEET_WIDTH_MM = 260.0
CAUTION = (
    "For design exploration only: members must be checked by a qualified engineer to the local code."
)
FRAME_NOTE = "Drawn in the panel's local frame: x to the right, y up, origin at the lower-left corner."

# Drafting scales offered, 1:N (common practice, no source).
DRAWING_SCALES = (1, 2, 5, 10, 20, 25, 50, 100, 200, 250, 500, 1000, 2000, 2500, 5000, 10000)

_MARGIN = 8.0  # sheet edge to content, paper mm
_HEADING = 15.0  # heading band height
_ROOM = 24.0  # space above and beside the panel for load arrows, support symbols and their labels
_ROOM_BELOW = 16.0
_LEGEND = 30.0  # legend band height
_TITLE_BLOCK = 24.0
_MAX_PANEL_W = SHEET_WIDTH_MM - 2 * (_MARGIN + _ROOM)
_MAX_PANEL_H = 150.0
_STRESS_CLASSES_PER_SIDE = 10
_DEFLECTION_TARGET = 0.04  # largest drawn deflection as a share of the panel's smaller side

INK = "#1c1c1c"
DEFLECTED_INK = "#7a1f5c"  # plum: apart from both stress hues and from the black line work
FONT = "DejaVu Sans, Liberation Sans, Arial, sans-serif"


# --------------------------------------------------------------------------------------------- numbers


def nice_125(x: float, *, mode: str = "nearest") -> float:
    """A value of the 1-2-5 series (1, 2, 5, 10, 20, ...) near ``x`` > 0: nearest on a log scale, or the
    next one up (``mode="ceil"``)."""
    if not (x > 0 and math.isfinite(x)):
        raise ValueError(f"need a positive finite number, got {x}")
    k = math.floor(math.log10(x))
    candidates = [m * 10.0**e for e in (k - 1, k, k + 1) for m in (1, 2, 5)]
    if mode == "ceil":
        return min(c for c in candidates if c >= x * (1 - 1e-12))
    return min(candidates, key=lambda c: abs(math.log(c / x)))


def drawing_scale(width_mm: float, height_mm: float) -> int:
    """The smallest drafting scale 1:N at which the panel fits the drawing area of the sheet."""
    for n in DRAWING_SCALES:
        if width_mm / n <= _MAX_PANEL_W and height_mm / n <= _MAX_PANEL_H:
            return n
    n = DRAWING_SCALES[-1]
    while width_mm / n > _MAX_PANEL_W or height_mm / n > _MAX_PANEL_H:
        n *= 10
    return n


def deflection_scale_for(max_deflection_mm: float, width_mm: float, height_mm: float) -> float | None:
    """Magnification that draws the largest deflection as about 4 % of the panel's smaller side, on the 1-2-5
    series; None when there is nothing to magnify."""
    if not (max_deflection_mm > 0 and math.isfinite(max_deflection_mm)):
        return None
    return nice_125(_DEFLECTION_TARGET * min(width_mm, height_mm) / max_deflection_mm)


def nice_ceil(x: float) -> float:
    """The next value up of the series 1, 1.2, 1.5, 2, 2.5, 3, 4, 5, 6, 8, 10, ...: tidy tenths and halves."""
    if not (x > 0 and math.isfinite(x)):
        raise ValueError(f"need a positive finite number, got {x}")
    k = math.floor(math.log10(x))
    for e in (k, k + 1):
        for m in (1, 1.2, 1.5, 2, 2.5, 3, 4, 5, 6, 8):
            if m * 10.0**e >= x * (1 - 1e-12):
                return m * 10.0**e
    return 10.0 ** (k + 2)


def stress_limit(values: np.ndarray) -> float:
    """Symmetric colour range for signed stresses: the 99th percentile of |value|, rounded up (:func:`nice_ceil`).

    A percentile rather than the peak, so that one stress concentration at a re-entrant corner does not wash
    the whole panel out to the pale middle; the peaks are stated in the legend.
    """
    mags = np.abs(np.asarray(values, dtype=float))
    mags = mags[np.isfinite(mags)]
    if mags.size == 0 or not mags.max() > 0:
        return 1.0
    p = float(np.percentile(mags, 99.0))
    return nice_ceil(p if p > 0 else float(mags.max()))


def dominant_principal(stress: np.ndarray) -> np.ndarray:
    """The principal stress of larger magnitude, with its sign, (ne,)."""
    s1, s2, _ = principal_stresses(stress)
    return np.where(np.abs(s1) >= np.abs(s2), s1, s2)


def _fmt(v: float, digits: int = 2) -> str:
    """Short decimal text for SVG coordinates."""
    text = f"{v:.{digits}f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def _fmt_value(v: float) -> str:
    """A figure for people: three significant digits, no exponent for everyday sizes."""
    if v == 0:
        return "0"
    digits = max(0, 2 - int(math.floor(math.log10(abs(v)))))
    return f"{v:.{digits}f}"


def _points(xy: Iterable[Sequence[float]]) -> str:
    """Path data of a closed polygon through the points."""
    return "M" + "L".join(f"{_fmt(x)} {_fmt(y)}" for x, y in xy) + "Z"


# --------------------------------------------------------------------------------------------- the sheet


class Figure:
    """A sheet being drawn: an svgwrite document with the panel placed at 1:N and named groups.

    ``layer(name)`` returns the group of that id in the panel's local frame (mm, y up), creating it on first
    use, stacked above the layers made before it. ``sheet_group(name)`` does the same in paper mm (y down).
    """

    def __init__(self, panel: Panel, *, legend_height: float = _LEGEND, title_block: float = _TITLE_BLOCK,
                 heading: float = _HEADING, room: float = _ROOM, room_below: float = _ROOM_BELOW,
                 width: float | None = SHEET_WIDTH_MM):
        self.panel = panel
        self.scale = drawing_scale(panel.width_mm, panel.height_mm)
        self.panel_paper = (panel.width_mm / self.scale, panel.height_mm / self.scale)
        # width=None: just wide enough for the panel and its room (light sheets, such as layout frames).
        self.width = width if width is not None else self.panel_paper[0] + 2 * (_MARGIN + room)
        top = _MARGIN + heading + room
        # Centre the panel across the sheet; its lower-left corner is the local origin.
        self.origin = ((self.width - self.panel_paper[0]) / 2.0, top + self.panel_paper[1])
        self.legend_top = self.origin[1] + room_below
        self.title_top = self.legend_top + legend_height
        self.height = self.title_top + title_block + _MARGIN
        self.dwg = svgwrite.Drawing(
            size=(f"{_fmt(self.width)}mm", f"{_fmt(self.height)}mm"), profile="full", debug=False
        )
        self.dwg.viewbox(0, 0, self.width, self.height)
        self.dwg.add(self.dwg.rect((0, 0), (self.width, self.height), fill="#ffffff", id="sheet"))
        k = 1.0 / self.scale
        self.drawing = self.dwg.g(
            id="drawing", transform=f"matrix({_fmt(k, 9)} 0 0 {_fmt(-k, 9)} {_fmt(self.origin[0], 4)} "
            f"{_fmt(self.origin[1], 4)})"
        )
        self._groups: dict[str, svgwrite.container.Group] = {}
        self.dwg.add(self.drawing)

    def paper(self, length_mm_on_paper: float) -> float:
        """A length on paper as a length in the panel's local frame."""
        return length_mm_on_paper * self.scale

    def to_sheet(self, xy) -> np.ndarray:
        """Local points (mm, y up) -> sheet position (paper mm, y down)."""
        p = np.asarray(xy, dtype=float)
        return np.stack([self.origin[0] + p[..., 0] / self.scale, self.origin[1] - p[..., 1] / self.scale], -1)

    def layer(self, name: str, **attrs) -> svgwrite.container.Group:
        """The group ``name`` inside the drawing (local frame), created on first use."""
        if name not in self._groups:
            group = self.dwg.g(id=name, **attrs)
            self.drawing.add(group)
            self._groups[name] = group
        return self._groups[name]

    def sheet_group(self, name: str, **attrs) -> svgwrite.container.Group:
        """The group ``name`` on the sheet (paper mm), created on first use."""
        if name not in self._groups:
            group = self.dwg.g(id=name, **attrs)
            self.dwg.add(group)
            self._groups[name] = group
        return self._groups[name]

    def text(self, group, content: str, at, size: float, *, anchor: str = "start", weight: str = "normal",
             style: str = "normal", fill: str = INK, local: bool = False):
        """Upright text of ``size`` paper mm; ``at`` in paper mm, or in the local frame with ``local=True``."""
        if local:
            # Undo the drawing's flip and scale so the lettering stands upright at its paper size.
            s = self.scale
            element = _lettering(self.dwg, content, (0, 0), size, anchor=anchor, weight=weight, style=style,
                                 fill=fill, transform=f"matrix({_fmt(s, 6)} 0 0 {_fmt(-s, 6)} {_fmt(at[0])} "
                                 f"{_fmt(at[1])})")
        else:
            element = _lettering(self.dwg, content, at, size, anchor=anchor, weight=weight, style=style, fill=fill)
        group.add(element)
        return element

    def tostring(self) -> str:
        return self.dwg.tostring()


def _lettering(dwg, content: str, at, size: float, *, anchor: str = "start", weight: str = "normal",
               style: str = "normal", fill: str = INK, transform: str | None = None):
    """A text element of ``size`` (font size in the units it is drawn in), not yet added to a group."""
    attrs = dict(font_size=_fmt(size, 3), font_family=FONT, text_anchor=anchor, fill=fill, stroke="none")
    if weight != "normal":
        attrs["font_weight"] = weight
    if style != "normal":
        attrs["font_style"] = style
    if transform is not None:
        return dwg.text(content, insert=(0, 0), transform=transform, **attrs)
    return dwg.text(content, insert=(_fmt(at[0], 3), _fmt(at[1], 3)), **attrs)


def _ring_path(coords: np.ndarray) -> str:
    return "M" + " L".join(f"{_fmt(x)},{_fmt(y)}" for x, y in coords[:-1]) + " Z"


def _polygons(geom) -> list[Polygon]:
    if geom.is_empty:
        return []
    if isinstance(geom, Polygon):
        return [geom]
    if isinstance(geom, MultiPolygon):
        return list(geom.geoms)
    return [g for g in getattr(geom, "geoms", []) if isinstance(g, Polygon)]


def _area_path(geom) -> str:
    """SVG path data for polygons with holes (draw with the even-odd rule)."""
    parts = []
    for poly in _polygons(geom):
        parts.append(_ring_path(np.asarray(poly.exterior.coords)))
        parts.extend(_ring_path(np.asarray(r.coords)) for r in poly.interiors)
    return " ".join(parts)


# --------------------------------------------------------------------------------------------- checks


def _checked_array(values, shape, name: str, grid, where: str = "result figure") -> np.ndarray:
    array = np.asarray(values, dtype=float)
    if array.shape != shape:
        raise LacunaError(
            f"the {name} array has shape {array.shape}, but the {grid.nx} x {grid.ny} grid needs {shape}.",
            where=where,
            hint="Pass the arrays of the same run as the grid.",
        )
    if not np.all(np.isfinite(array)):
        raise LacunaError(
            f"the {name} array holds {int(np.sum(~np.isfinite(array)))} values that are not finite numbers.",
            where=where,
            hint="The analysis behind it did not give a usable result; check supports and loads.",
        )
    return array


def _check_grid(panel: Panel, grid, where: str) -> None:
    if abs(grid.nx * grid.dx - panel.width_mm) > 1e-6 * panel.width_mm or abs(
        grid.ny * grid.dy - panel.height_mm
    ) > 1e-6 * panel.height_mm:
        raise LacunaError(
            f"the grid covers {grid.nx * grid.dx:g} x {grid.ny * grid.dy:g} mm but the panel is "
            f"{panel.width_mm:g} x {panel.height_mm:g} mm.",
            where=where,
            hint="Build the grid from this panel's envelope.",
        )


def _check_inputs(panel: Panel, grid, fractions, displacement, stress, case: str):
    ne = grid.nx * grid.ny
    ndof = 2 * (grid.nx + 1) * (grid.ny + 1)
    fractions = _checked_array(fractions, (ne,), "fractions", grid, "analysis figure")
    displacement = _checked_array(displacement, (ndof,), "displacement", grid, "analysis figure")
    stress = _checked_array(stress, (ne, 3), "stress", grid, "analysis figure")
    _check_grid(panel, grid, "analysis figure")
    if case not in panel.cases:
        raise LacunaError(
            f"load case {case!r} is not in this panel.",
            where="analysis figure",
            hint=f"Use one of: {', '.join(panel.cases)}.",
        )
    return fractions, displacement, stress


# --------------------------------------------------------------------------------------------- content


def _enodes(nx: int, ny: int) -> np.ndarray:
    ix, iy = np.meshgrid(np.arange(nx), np.arange(ny))
    n0 = (iy * (nx + 1) + ix).ravel()
    return np.stack([n0, n0 + 1, n0 + nx + 2, n0 + nx + 1], axis=1)


def interpolate_displacement(grid, displacement: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Displacement (k, 2) at local points (k, 2), by the bilinear shape functions of the holding element."""
    pts = np.asarray(points, dtype=float)
    u = np.asarray(displacement, dtype=float).reshape(-1, 2)
    fx, fy = pts[:, 0] / grid.dx, pts[:, 1] / grid.dy
    ix = np.clip(np.floor(fx).astype(np.int64), 0, grid.nx - 1)
    iy = np.clip(np.floor(fy).astype(np.int64), 0, grid.ny - 1)
    xi, eta = fx - ix, fy - iy
    n0 = iy * (grid.nx + 1) + ix
    return (
        ((1 - xi) * (1 - eta))[:, None] * u[n0]
        + (xi * (1 - eta))[:, None] * u[n0 + 1]
        + (xi * eta)[:, None] * u[n0 + grid.nx + 2]
        + ((1 - xi) * eta)[:, None] * u[n0 + grid.nx + 1]
    )


def stress_runs(classes: np.ndarray, drawn: np.ndarray, nx: int, ny: int) -> dict[int, list[tuple[int, int, int]]]:
    """Merge each row's neighbouring drawn elements of one colour class into runs: class -> [(ix, iy, length)]."""
    cls = np.where(drawn, classes, -1).reshape(ny, nx)
    runs: dict[int, list[tuple[int, int, int]]] = {}
    for iy in range(ny):
        row = cls[iy]
        starts = np.flatnonzero(np.r_[True, row[1:] != row[:-1]])
        lengths = np.diff(np.r_[starts, nx])
        for ix, n in zip(starts.tolist(), lengths.tolist()):
            c = int(row[ix])
            if c >= 0:
                runs.setdefault(c, []).append((ix, iy, n))
    return runs


def _solid_clip(fig: Figure, solid) -> str:
    """The clip path of the panel's solid outline (made once per sheet), so openings are cut exactly."""
    if "panel-solid" not in fig._groups:
        clip = fig.dwg.defs.add(fig.dwg.clipPath(id="panel-solid"))
        clip.add(fig.dwg.path(d=_area_path(solid), clip_rule="evenodd"))
        fig._groups["panel-solid"] = clip
    return "url(#panel-solid)"


def _draw_cells(fig: Figure, name: str, grid, classes, drawn, colours: Sequence[str], solid) -> None:
    """Elements filled by colour class, a row's neighbours of one class merged, clipped to the solid outline."""
    group = fig.layer(name, clip_path=_solid_clip(fig, solid))
    # Cells in element units: integer path data keeps a 20,000-element panel small.
    cells = fig.dwg.g(transform=f"scale({_fmt(grid.dx, 6)} {_fmt(grid.dy, 6)})", shape_rendering="crispEdges")
    group.add(cells)
    for c, runs in sorted(stress_runs(classes, drawn, grid.nx, grid.ny).items()):
        d = "".join(f"M{ix} {iy}h{n}v1h-{n}z" for ix, iy, n in runs)
        cells.add(fig.dwg.path(d=d, fill=colours[c], **{"data-class": str(c)}))


def _draw_stress(fig: Figure, grid, drawn, dominant, vmax, solid) -> None:
    classes = palette.classify(dominant, vmax, _STRESS_CLASSES_PER_SIDE)
    _draw_cells(fig, "stress", grid, classes, drawn, palette.class_colours(_STRESS_CLASSES_PER_SIDE), solid)


def _draw_directions(fig: Figure, grid, fractions, stress, vmax) -> None:
    """Both principal stresses as crossed ticks on a coarse lattice: direction, length by magnitude, ink by sign."""
    k = max(1, int(round(fig.paper(5.0) / max(grid.dx, grid.dy))))
    nbx, nby = grid.nx // k, grid.ny // k
    if nbx == 0 or nby == 0:
        return
    f = fractions.reshape(grid.ny, grid.nx)[: nby * k, : nbx * k].reshape(nby, k, nbx, k)
    s = stress.reshape(grid.ny, grid.nx, 3)[: nby * k, : nbx * k].reshape(nby, k, nbx, k, 3)
    weight = f.sum(axis=(1, 3))
    solid_share = weight / (k * k)
    mean = (s * f[..., None]).sum(axis=(1, 3)) / np.maximum(weight, 1e-12)[..., None]
    s1, s2, theta = principal_stresses(mean.reshape(-1, 3))
    ok = solid_share.ravel() >= 0.75
    bx = (np.arange(nbx) + 0.5) * k * grid.dx + (grid.nx - nbx * k) * grid.dx / 2
    by = (np.arange(nby) + 0.5) * k * grid.dy + (grid.ny - nby * k) * grid.dy / 2
    cx, cy = (a.ravel() for a in np.meshgrid(bx, by))
    half_max = 0.42 * k * min(grid.dx, grid.dy)
    strokes = {palette.TENSION_NAME: [], palette.COMPRESSION_NAME: []}
    for value, angle in ((s1, theta), (s2, theta + 0.5 * math.pi)):
        length = np.clip(np.abs(value) / vmax, 0.0, 1.0) * half_max
        dx, dy = np.cos(angle) * length, np.sin(angle) * length
        show = ok & (np.abs(value) >= 0.06 * vmax)
        for i in np.flatnonzero(show):
            side = palette.TENSION_NAME if value[i] > 0 else palette.COMPRESSION_NAME
            strokes[side].append(
                f"M{_fmt(cx[i] - dx[i])} {_fmt(cy[i] - dy[i])}L{_fmt(cx[i] + dx[i])} {_fmt(cy[i] + dy[i])}"
            )
    group = fig.layer("directions", fill="none", stroke_linecap="round")
    for side, ink in ((palette.TENSION_NAME, palette.TENSION_INK), (palette.COMPRESSION_NAME, palette.COMPRESSION_INK)):
        if strokes[side]:
            d = "".join(strokes[side])
            # A pale casing keeps a tick legible on the dark fills at either end of the scale.
            group.add(fig.dwg.path(d=d, stroke="#ffffff", stroke_opacity="0.75", stroke_width=_fmt(fig.paper(0.75), 4)))
            group.add(fig.dwg.path(d=d, stroke=ink, stroke_width=_fmt(fig.paper(0.35), 4), **{"data-sign": side}))


def _draw_outlines(fig: Figure, panel: Panel) -> None:
    width = _fmt(fig.paper(0.4), 4)
    g = fig.layer("panel", fill="none", stroke=INK, stroke_width=width, stroke_linejoin="miter")
    g.add(fig.dwg.rect((0, 0), (_fmt(panel.width_mm), _fmt(panel.height_mm))))
    g = fig.layer("openings", fill="none", stroke=INK, stroke_width=width)
    for region in panel.openings:
        g.add(fig.dwg.path(d=_area_path(region.shape), fill_rule="evenodd"))
    dash = f"{_fmt(fig.paper(2.0), 4)} {_fmt(fig.paper(1.0), 4)}"
    g = fig.layer("keep", fill="none", stroke=INK, stroke_width=_fmt(fig.paper(0.3), 4), stroke_dasharray=dash)
    for region in panel.keep:
        g.add(fig.dwg.path(d=_area_path(region.shape)))


def _draw_deflected(fig: Figure, grid, solid, displacement, magnification: float | None) -> None:
    g = fig.layer("deflected", fill="none", stroke=DEFLECTED_INK, stroke_width=_fmt(fig.paper(0.45), 4),
                  stroke_linejoin="round")
    if magnification is None:
        return
    step = min(grid.dx, grid.dy)
    for poly in _polygons(shapely.segmentize(solid, step)):
        for ring, kind in [(poly.exterior, "outline")] + [(r, "opening") for r in poly.interiors]:
            xy = np.asarray(ring.coords)
            moved = xy + magnification * interpolate_displacement(grid, displacement, xy)
            g.add(fig.dwg.path(d=_points(moved[:-1]), **{"data-ring": kind}))


# --- symbols of our own: supports and loads, sized on paper


def _outward(point, panel: Panel) -> np.ndarray:
    """Unit vector from the panel towards the nearest envelope edge at ``point`` (local frame)."""
    x, y = point
    gaps = {(-1.0, 0.0): x, (1.0, 0.0): panel.width_mm - x, (0.0, -1.0): y, (0.0, 1.0): panel.height_mm - y}
    return np.array(min(gaps, key=gaps.get))


def _restraint_direction(support: Support, panel: Panel) -> np.ndarray:
    mid = np.mean(np.asarray(support.points, dtype=float), axis=0)
    if support.fix == "y":
        return np.array([0.0, -1.0 if mid[1] <= panel.height_mm / 2 else 1.0])
    if support.fix == "x":
        return np.array([-1.0 if mid[0] <= panel.width_mm / 2 else 1.0, 0.0])
    return _outward(mid, panel)


def _draw_supports(fig: Figure, panel: Panel) -> None:
    """Pin ("xy"): a solid wedge on a hatched ground line. Roller ("x" or "y"): an open wedge on two wheels,
    free to roll across the restrained direction. Wedges point at the panel along the restrained direction; a
    supported segment carries a row of them on one ground line."""
    p = fig.paper
    group = fig.layer("supports", stroke=INK, stroke_width=_fmt(p(0.3), 4), stroke_linejoin="round")
    for support in panel.supports:
        g = group.add(fig.dwg.g(**{"data-fix": support.fix}))
        d = _restraint_direction(support, panel)
        t = np.array([-d[1], d[0]])
        pts = np.asarray(support.points, dtype=float)
        if len(pts) == 1:
            anchors = pts
        else:
            n = max(2, int(round(np.linalg.norm(pts[1] - pts[0]) / p(9.0))) + 1)
            anchors = pts[0] + np.linspace(0.0, 1.0, n)[:, None] * (pts[1] - pts[0])
        h, w = p(3.2), p(1.8)
        pin = support.fix == "xy"
        base = h + (0.0 if pin else p(1.5))
        for a in anchors:
            wedge = [a, a + d * h + t * w, a + d * h - t * w]
            g.add(fig.dwg.path(d=_points(wedge), fill=INK if pin else "#ffffff"))
            if not pin:
                for side in (-0.55, 0.55):
                    c = a + d * (h + p(0.75)) + t * side * w
                    g.add(fig.dwg.circle(center=(_fmt(c[0]), _fmt(c[1])), r=_fmt(p(0.7), 4), fill="#ffffff"))
        ends = anchors[[0, -1]]
        ground = [ends[0] + d * base - t * p(2.6), ends[1] + d * base + t * p(2.6)]
        if np.dot(ground[1] - ground[0], t) < 0:
            ground = ground[::-1]
        g.add(fig.dwg.line(start=(_fmt(ground[0][0]), _fmt(ground[0][1])),
                           end=(_fmt(ground[1][0]), _fmt(ground[1][1])), stroke_width=_fmt(p(0.45), 4)))
        if pin:
            length = np.linalg.norm(ground[1] - ground[0])
            hatch = []
            for s in np.arange(p(0.6), length, p(1.3)):
                q = ground[0] + t * s
                e = q + d * p(1.2) - t * p(1.0)
                hatch.append(f"M{_fmt(q[0])} {_fmt(q[1])}L{_fmt(e[0])} {_fmt(e[1])}")
            g.add(fig.dwg.path(d="".join(hatch), fill="none"))


def _arrow(fig: Figure, group, tip, direction, length: float, heavy: bool = False) -> np.ndarray:
    """An arrow of ``length`` (local) ending at ``tip`` along unit ``direction``; returns its tail.

    Point loads are drawn heavy so they stand out of a row of line-load arrows."""
    p = fig.paper
    tail = tip - direction * length
    n = np.array([-direction[1], direction[0]])
    neck = tip - direction * p(3.0 if heavy else 2.0)
    extra = {"stroke_width": _fmt(p(0.6), 4)} if heavy else {"stroke_width": _fmt(p(0.25), 4)}
    group.add(fig.dwg.line(start=(_fmt(tail[0]), _fmt(tail[1])), end=(_fmt(neck[0]), _fmt(neck[1])), **extra))
    half = p(1.1 if heavy else 0.7)
    head = [tip, neck + n * half, neck - n * half]
    group.add(fig.dwg.path(d=_points(head), fill=INK, stroke="none"))
    return tail


def _label_at(fig: Figure, group, text: str, tail, direction, gap: float = 1.2) -> None:
    """Load value beyond the arrow's tail (paper ``gap``), set so it does not run back over the arrow."""
    p = fig.paper
    at = tail - direction * p(gap)
    anchor = "middle"
    if abs(direction[0]) > 0.5:
        anchor = "end" if direction[0] > 0 else "start"
    # Paper y grows downwards: lift the baseline for arrows pointing down onto the panel.
    shift = p(0.9) if direction[1] < -0.5 else (-p(2.6) if direction[1] > 0.5 else -p(0.9))
    fig.text(group, text, (at[0], at[1] + shift), 2.6, anchor=anchor, local=True)


def _draw_loads(fig: Figure, panel: Panel, case: str) -> None:
    p = fig.paper
    g = fig.layer("loads", stroke=INK, stroke_width=_fmt(p(0.35), 4))
    for load in panel.loads:
        if load.case != case:
            continue
        if isinstance(load, PointLoad):
            f = np.asarray(load.force_N, dtype=float)
            size = float(np.hypot(*f))
            if size == 0:
                continue
            tail = _arrow(fig, g, np.asarray(load.at, dtype=float), f / size, p(17.0), heavy=True)
            _label_at(fig, g, f"{size / 1000.0:.3g} kN", tail, f / size)
        elif isinstance(load, LineLoad):
            w = np.asarray(load.intensity_N_per_mm, dtype=float)  # N/mm is kN/m
            size = float(np.hypot(*w))
            if size == 0:
                continue
            d = w / size
            a, b = np.asarray(load.start, dtype=float), np.asarray(load.end, dtype=float)
            n = max(2, int(round(np.linalg.norm(b - a) / p(7.0))) + 1)
            tails = [_arrow(fig, g, a + s * (b - a), d, p(7.0)) for s in np.linspace(0.0, 1.0, n)]
            g.add(fig.dwg.line(start=(_fmt(tails[0][0]), _fmt(tails[0][1])),
                               end=(_fmt(tails[-1][0]), _fmt(tails[-1][1]))))
            # Beyond the left end of a lying row, or the top end of a standing one: clear of point loads arriving
            # mid-span and of supports at the foot of a wall.
            row = tails[-1] - tails[0]
            key = (lambda q: q[0]) if abs(row[0]) >= abs(row[1]) else (lambda q: -q[1])
            end, other = (tails[0], tails[-1]) if key(tails[0]) <= key(tails[-1]) else (tails[-1], tails[0])
            along = (end - other) / max(float(np.linalg.norm(end - other)), 1e-12)
            _label_at(fig, g, f"{size:.3g} kN/m", end + along * p(1.0), -along, gap=0.0)


# --- sheet furniture: heading, legend band, title block


def _draw_heading(fig: Figure, title: str, scale_note: str) -> None:
    g = fig.sheet_group("heading")
    title, size = _fit(title, fig.width - 2 * _MARGIN, 5.0)
    fig.text(g, title, (_MARGIN, _MARGIN + 5.0), size, weight="bold")
    note, size = _fit(f"{FRAME_NOTE} {scale_note}", fig.width - 2 * _MARGIN, 2.8)
    fig.text(g, note, (_MARGIN, _MARGIN + 10.5), size)


def _draw_stress_bar(fig: Figure, g, x0: float, top: float, vmax: float, peak_t: float, peak_c: float) -> None:
    """The stress colour bar with its heading, side labels, ticks and the peaks, 120 mm wide from (x0, top)."""
    bar_w, bar_h = 120.0, 5.0
    bar_y = top + 9.0
    fig.text(g, "Dominant principal stress, MPa (the principal of larger magnitude, with its sign)", (x0, top + 2.5),
             2.8, weight="bold")
    fig.text(g, "\u25c0 COMPRESSION (negative)", (x0, bar_y - 1.2), 2.6, fill=palette.COMPRESSION_INK,
             weight="bold")
    fig.text(g, "TENSION (positive) \u25b6", (x0 + bar_w, bar_y - 1.2), 2.6, anchor="end",
             fill=palette.TENSION_INK, weight="bold")
    n = 2 * _STRESS_CLASSES_PER_SIDE
    colours = palette.class_colours(_STRESS_CLASSES_PER_SIDE)
    cw = bar_w / n
    bar = fig.dwg.g(id="legend-bar")
    g.add(bar)
    for i, c in enumerate(colours):
        bar.add(fig.dwg.rect((_fmt(x0 + i * cw, 3), _fmt(bar_y, 3)), (_fmt(cw + 0.02, 3), _fmt(bar_h)), fill=c,
                             **{"data-from-MPa": _fmt_value(-vmax + 2 * vmax * i / n)}))
    # End wedges say that values beyond the range take the end colours.
    beyond_c, beyond_t = peak_c < -vmax, peak_t > vmax
    if beyond_c:
        g.add(fig.dwg.path(d=_points([(x0, bar_y), (x0 - 3.0, bar_y + bar_h / 2), (x0, bar_y + bar_h)]),
                              fill=colours[0]))
    if beyond_t:
        e = x0 + bar_w
        g.add(fig.dwg.path(d=_points([(e, bar_y), (e + 3.0, bar_y + bar_h / 2), (e, bar_y + bar_h)]),
                              fill=colours[-1]))
    g.add(fig.dwg.rect((_fmt(x0, 3), _fmt(bar_y, 3)), (_fmt(bar_w), _fmt(bar_h)), fill="none", stroke=INK,
                       stroke_width="0.2"))
    for i in range(n + 1):
        x = x0 + i * cw
        major = i % (n // 4) == 0
        g.add(fig.dwg.line(start=(_fmt(x, 3), _fmt(bar_y + bar_h, 3)), end=(_fmt(x, 3), _fmt(bar_y + bar_h +
                           (1.4 if major else 0.7), 3)), stroke=INK, stroke_width="0.2"))
        if major:
            v = -vmax + 2 * vmax * i / n
            label = "0" if abs(v) < 1e-12 * vmax else (f"+{v:.4g}" if v > 0 else f"\u2212{-v:.4g}")
            fig.text(g, label, (x, bar_y + bar_h + 4.2), 2.5, anchor="middle")
    note = (f"Peak tension {'+' if peak_t > 0 else ''}{_fmt_value(peak_t)} MPa, peak compression "
            f"{_fmt_value(peak_c).replace('-', chr(0x2212))} MPa")
    if beyond_c or beyond_t:
        note += "; beyond the bar: its end colours"
    fig.text(g, note + ".", (x0, bar_y + bar_h + 8.5), 2.4)


def _key_sample(fig: Figure, g, kind: str, style: dict | None, x: float, y: float) -> None:
    """One line-key sample, 8 mm wide, its middle at height ``y`` (paper mm)."""
    if kind == "line":
        g.add(fig.dwg.line(start=(_fmt(x), _fmt(y)), end=(_fmt(x + 8.0), _fmt(y)), **style))
    elif kind == "ticks":
        g.add(fig.dwg.line(start=(_fmt(x), _fmt(y)), end=(_fmt(x + 3.5), _fmt(y)),
                           stroke=palette.TENSION_INK, stroke_width="0.32", stroke_linecap="round"))
        g.add(fig.dwg.line(start=(_fmt(x + 5.5), _fmt(y - 1.5)), end=(_fmt(x + 5.5), _fmt(y + 1.5)),
                           stroke=palette.COMPRESSION_INK, stroke_width="0.32", stroke_linecap="round"))
    elif kind == "area":
        g.add(fig.dwg.rect((_fmt(x + 0.4), _fmt(y - 1.3)), (7.2, 2.6), rx="1.0", **style))
    elif kind == "cross":
        g.add(fig.dwg.path(d=f"M{_fmt(x + 2.5)} {_fmt(y)}h3M{_fmt(x + 4.0)} {_fmt(y - 1.5)}v3", fill="none",
                           **style))
    elif kind == "ring":
        g.add(fig.dwg.circle(center=(_fmt(x + 4.0), _fmt(y)), r="1.5", fill="none", **style))
    elif kind == "label":
        fig.text(g, "V1", (x + 4.0, y + 0.8), 2.3, anchor="middle", weight="bold", **(style or {}))


def _draw_key(fig: Figure, g, x: float, top: float, rows, pitch: float = 4.2) -> None:
    """A line key: rows of (sample kind, sample style, label) from (x, top) down."""
    for r, (kind, style, label) in enumerate(rows):
        y = top + 2.0 + pitch * r
        _key_sample(fig, g, kind, style, x, y - 0.9)
        fig.text(g, label, (x + 10.0, y), 2.4)


def _draw_legend(fig: Figure, vmax: float, peak_t: float, peak_c: float, magnification, umax: float) -> None:
    g = fig.sheet_group("legend")
    x0, top = _MARGIN, fig.legend_top
    _draw_stress_bar(fig, g, x0, top, vmax, peak_t, peak_c)
    # Line key and scale bar on the right of the band.
    kx = x0 + 120.0 + 12.0
    rows = [
        ("line", dict(stroke=INK, stroke_width="0.4"), "panel and openings as drawn"),
        ("line", dict(stroke=DEFLECTED_INK, stroke_width="0.45"),
         f"deflected shape drawn \u00d7 {magnification:g} (largest deflection {_fmt_value(umax)} mm)"
         if magnification else "no deflection to draw"),
        ("line", dict(stroke=INK, stroke_width="0.3", stroke_dasharray="2 1"), "zone kept solid"),
        ("ticks", None, "principal directions, length by magnitude"),
    ]
    _draw_key(fig, g, kx, top, rows)
    _draw_scale_bar(fig, kx, top + 22.5)


def _draw_scale_bar(fig: Figure, x0: float, y0: float) -> None:
    """A bar of a round length in the drawing's own unit, in alternate filled and open parts."""
    g = fig.sheet_group("scale-bar")
    frame = fig.panel.frame
    unit_mm = frame.mm_per_unit
    target_paper = min(50.0, max(20.0, fig.panel_paper[0] / 4.0))
    length_unit = nice_125(target_paper * fig.scale / unit_mm, mode="nearest")
    paper_len = length_unit * unit_mm / fig.scale
    lead = int(f"{length_unit:e}"[0])
    parts = 4 if lead == 2 else 5
    h = 1.6
    for i in range(parts):
        g.add(fig.dwg.rect((_fmt(x0 + i * paper_len / parts, 3), _fmt(y0, 3)), (_fmt(paper_len / parts, 3), _fmt(h)),
                           fill=INK if i % 2 == 0 else "#ffffff", stroke=INK, stroke_width="0.15"))
    fig.text(g, "0", (x0, y0 + h + 3.0), 2.4, anchor="middle")
    fig.text(g, f"{length_unit:g} {frame.unit}", (x0 + paper_len, y0 + h + 3.0), 2.4, anchor="middle")
    fig.text(g, f"scale 1:{fig.scale}", (x0 + paper_len + 6.0, y0 + h), 2.4)
    g.attribs["data-length"] = f"{length_unit:g} {frame.unit}"


def _fit(text: str, width: float, size: float, smallest: float = 2.0) -> tuple[str, float]:
    """Shrink (then shorten) a line of text to fit ``width`` paper mm; a DejaVu Sans glyph averages ~0.6 em."""
    em = 0.6
    if len(text) * em * size <= width:
        return text, size
    size = max(smallest, width / (len(text) * em))
    keep = int(width / (em * size))
    return (text if len(text) <= keep else text[: max(1, keep - 1)].rstrip() + "\u2026"), size


def _draw_title_block(fig: Figure, cells: Sequence[tuple[float, str, Sequence[str]]]) -> None:
    """Our title block: a ruled band across the sheet foot, cells of (width share, heading, lines) over a
    caution strip. The first line of the first cell (the panel's name) is set large."""
    g = fig.sheet_group("title", stroke=INK)
    x0, y0 = _MARGIN, fig.title_top
    w, h = fig.width - 2 * _MARGIN, _TITLE_BLOCK
    g.add(fig.dwg.rect((_fmt(x0), _fmt(y0)), (_fmt(w), _fmt(h)), fill="none", stroke_width="0.5"))
    strip = 6.0
    g.add(fig.dwg.line(start=(_fmt(x0), _fmt(y0 + h - strip)), end=(_fmt(x0 + w), _fmt(y0 + h - strip)),
                       stroke_width="0.25"))
    x = x0
    for k, (share, head, lines) in enumerate(cells):
        cw = w * share
        if x > x0:
            g.add(fig.dwg.line(start=(_fmt(x), _fmt(y0)), end=(_fmt(x), _fmt(y0 + h - strip)), stroke_width="0.25"))
        fig.text(g, head, (x + 2.0, y0 + 3.6), 2.0, weight="bold", fill="#555555")
        for i, line in enumerate(lines):
            big = k == 0 and i == 0
            line, size = _fit(line, cw - 4.0, 4.0 if big else 3.0)
            fig.text(g, line, (x + 2.0, y0 + (9.0 if big else 8.6) + i * 5.0), size, weight="bold" if big else "normal")
        x += cw
    fig.text(g, CAUTION, (x0 + 2.0, y0 + h - strip + 4.0), 2.7, style="italic")
    fig.text(g, "lacuna", (x0 + w - 2.0, y0 + h - strip + 4.0), 2.7, anchor="end", weight="bold")


def _material_lines(panel: Panel) -> list[str]:
    m = panel.material
    return [f"E = {m.E_MPa:g} MPa, \u03bd = {m.nu:g}", m.name]


def _section_lines(panel: Panel) -> list[str]:
    """Thickness and size in the drawing's unit, like the sheet's other lengths (round-off dropped: 4.8, not
    4.800000000000001)."""
    f = panel.frame
    u = f.unit

    def n(mm: float) -> str:
        return f"{round(f.length_to_drawing(mm), 9):g}"

    return [f"thickness {n(panel.thickness_mm)} {u}", f"{n(panel.width_mm)} \u00d7 {n(panel.height_mm)} {u}"]


def _date_text(date) -> str:
    if date is None:
        date = _dt.date.today()
    return date.isoformat() if isinstance(date, _dt.date) else str(date)


# --------------------------------------------------------------------------------------------- public


def analysis_svg(
    panel: Panel,
    grid,
    fractions,
    displacement,
    stress,
    *,
    case: str = "main",
    title: str | None = None,
    deflection_scale: float | None = None,
    date: _dt.date | str | None = None,
) -> str:
    """The analysis figure of one load case as SVG text: principal stress, directions, deflected shape,
    openings, supports, loads, legend, scale bar and title block, drawn at 1:N on a 260 mm wide sheet.

    ``grid`` needs nx, ny, dx, dy (element e = iy * nx + ix, node n = j * (nx + 1) + i); ``fractions`` (ne,)
    solid area share (0: not drawn); ``displacement`` (ndof,) mm; ``stress`` (ne, 3) sx, sy, txy in MPa.
    ``deflection_scale`` overrides the automatic magnification of the deflected shape.
    """
    fractions, displacement, stress = _check_inputs(panel, grid, fractions, displacement, stress, case)
    drawn = fractions > 0.0
    dominant = dominant_principal(stress)
    shown = dominant[drawn]
    vmax = stress_limit(shown)
    peak_t = float(shown.max()) if shown.size else 0.0
    peak_c = float(shown.min()) if shown.size else 0.0

    enodes = _enodes(grid.nx, grid.ny)
    active = np.zeros((grid.nx + 1) * (grid.ny + 1), dtype=bool)
    active[enodes[drawn].ravel()] = True
    u = displacement.reshape(-1, 2)
    umax = float(np.max(np.hypot(u[active, 0], u[active, 1]))) if active.any() else 0.0
    if deflection_scale is not None:
        if not (deflection_scale > 0 and math.isfinite(deflection_scale)):
            raise LacunaError(f"the deflection scale must be a positive number, got {deflection_scale}.",
                              where="analysis figure")
        magnification = float(deflection_scale)
    else:
        magnification = deflection_scale_for(umax, panel.width_mm, panel.height_mm)

    date_text = _date_text(date)

    fig = Figure(panel)
    solid = panel.solid
    _draw_heading(fig, title or f"{panel.name}: stress and deflection, load case {case}",
                  f"Scale 1:{fig.scale} on a {SHEET_WIDTH_MM:g} mm wide sheet; lengths in {panel.frame.unit}.")
    _draw_stress(fig, grid, drawn, dominant, vmax, solid)
    _draw_directions(fig, grid, fractions, stress, vmax)
    _draw_outlines(fig, panel)
    _draw_deflected(fig, grid, solid, displacement, magnification)
    _draw_supports(fig, panel)
    _draw_loads(fig, panel, case)
    _draw_legend(fig, vmax, peak_t, peak_c, magnification, umax)
    _draw_title_block(fig, [
        (0.34, "PANEL", [panel.name, f"load case: {case}"]),
        (0.26, "MATERIAL", _material_lines(panel)),
        (0.2, "SECTION", _section_lines(panel)),
        (0.2, "FIGURE", [f"date {date_text}", f"1:{fig.scale}, {int(drawn.sum())} elements"]),
    ])
    fig.drawing.attribs["data-stress-limit-MPa"] = f"{vmax:g}"
    if magnification:
        fig.drawing.attribs["data-deflection-scale"] = f"{magnification:g}"
    return fig.tostring()


# --------------------------------------------------------------------------------------------- result sheet

# Material-state greys (our own): CIE L* from pale to dark in equal steps, so equal steps of density read as
# equal steps of grey; the first class (under 1/8 of an element's material) is left as paper, i.e. void.
DENSITY_CLASSES = 8
_DENSITY_L = (92.0, 50.0)  # L* of the palest drawn class's lower edge and of full material
_DENSITY_TINT = (0.0, 1.5)  # a* b*: a hair warm, to sit with the stress scale's paper-white middle
VOID_FILL = "#ffffff"  # voids to make are cut through: they show the paper
SHOWN = 1.0 / DENSITY_CLASSES  # material state below which an element is drawn as void

# The output layers of CONTRACT.md in drawing order, and what draws on each.
RESULT_LAYERS = tuple(look.name.lower() for look in dxf_out.LOOKS)
_LOOK = {look.name.lower(): look for look in dxf_out.LOOKS}
_VOID_GROUP = {family: name.lower() for family, name in dxf_out.VOID_LAYERS.items()}


def density_colours() -> list[str]:
    """Colour of each material-state class 0 .. DENSITY_CLASSES-1 (class 0, void, as paper white)."""
    mids = (np.arange(DENSITY_CLASSES) + 0.5) / DENSITY_CLASSES
    lightness = _DENSITY_L[0] + (_DENSITY_L[1] - _DENSITY_L[0]) * (mids - mids[1]) / (mids[-1] - mids[1])
    lab = np.column_stack([lightness, np.full_like(mids, _DENSITY_TINT[0]), np.full_like(mids, _DENSITY_TINT[1])])
    colours = [palette.rgb_to_hex(c) for c in palette.linear_to_srgb(palette.lab_to_linear(lab))]
    colours[0] = VOID_FILL
    return colours


def density_classes(state) -> np.ndarray:
    """Class 0 .. DENSITY_CLASSES-1 of each material state in [0, 1] (1 goes to the top class)."""
    state = np.clip(np.asarray(state, dtype=float), 0.0, 1.0)
    return np.minimum((state * DENSITY_CLASSES).astype(np.int64), DENSITY_CLASSES - 1)


def material_state(panel: Panel, grid, densities) -> tuple[np.ndarray, np.ndarray]:
    """(state, fractions): each element's material state with the drawn solid fraction divided out, and that
    fraction. An element half cut by an opening but kept by the optimiser has density 0.5 and state 1; the
    clip to the solid outline then draws exactly its half."""
    fractions = solid_fractions(grid, panel.solid)
    densities = _checked_array(densities, (grid.nx * grid.ny,), "densities", grid)
    state = np.divide(densities, fractions, out=np.zeros_like(densities), where=fractions > 0.0)
    return np.clip(state, 0.0, 1.0), fractions


def _exact(v: float) -> str:
    """Shortest text that reads back as exactly the same float (bore radii must equal the drawing's)."""
    text = repr(float(v))
    return text[:-2] if text.endswith(".0") else text


def arc_radius(chord: float, bulge: float) -> float:
    """Radius of the arc of ``bulge`` = tan(sweep / 4) over a chord: chord (1 + b^2) / (4 |b|)."""
    return chord * (1.0 + bulge * bulge) / (4.0 * abs(bulge))


def outline_path(outline) -> str:
    """SVG path data of a closed run of (x, y, bulge) vertices: straight sides as L, arcs as true arcs (A).

    The path is meant for a group in the local frame (y up). SVG's sweep flag 1 turns the arc towards increasing
    angle in the coordinates it is drawn in, which in the local frame is counter-clockwise: the sense of a
    positive bulge. The group's flip to paper turns both together, so the arc keeps its side.
    """
    v = np.asarray(outline, dtype=float)
    n = len(v)
    parts = [f"M{_fmt(v[0, 0], 4)} {_fmt(v[0, 1], 4)}"]
    for i in range(n):
        x1, y1 = v[(i + 1) % n, :2]
        b = v[i, 2]
        end = f"{_fmt(x1, 4)} {_fmt(y1, 4)}"
        if b == 0.0:
            if i < n - 1:
                parts.append(f"L{end}")
            continue
        chord = math.hypot(x1 - v[i, 0], y1 - v[i, 1])
        r = _fmt(arc_radius(chord, b), 4)
        parts.append(f"A{r} {r} 0 {1 if abs(b) > 1.0 else 0} {1 if b > 0 else 0} {end}")
    return "".join(parts) + "Z"


def _void_label_anchor(void: Void) -> np.ndarray:
    """Where the outline meets the ray from the centre up and to the right (local mm): the label sits beyond."""
    c = np.asarray(void.centre, dtype=float)
    if void.family == "bore":
        return c + void.size_mm / 2.0 * np.array([math.sqrt(0.5), math.sqrt(0.5)])
    reach = 2.0 * max(void.length_mm, void.size_mm, 1.0) + float(np.ptp(np.asarray(void.shape.bounds)))
    ray = shapely.LineString([c, c + reach * np.array([math.sqrt(0.5), math.sqrt(0.5)])])
    hits = shapely.get_coordinates(shapely.intersection(void.shape.boundary, ray))
    if len(hits) == 0:
        return c
    return hits[np.argmax(np.hypot(*(hits - c).T))]


def _as_marker(item, k: int):
    """A check marker from a :class:`toolkit.rules.check.Violation`, a dxf_out Marker or a check-JSON mapping."""
    if hasattr(item, "to_json") and hasattr(item, "rule"):
        item = item.to_json()
    return dxf_out._marker(item, k)


# Void ids on the sheet: lettering of this size (paper mm).
LABEL_SIZE = 2.3
_EM = 0.72


def label_box(fig: Figure, text: str, at, size: float):
    """The box (local mm) a line of lettering of ``size`` paper mm started at ``at`` (its baseline) covers: a
    bold capital or digit of DejaVu Sans is about 0.7 em wide (``_EM``), capitals stand 0.73 em, descenders
    0.24 em."""
    s = fig.scale
    return shapely.box(at[0], at[1] - 0.24 * size * s, at[0] + _EM * size * s * len(text), at[1] + 0.75 * size * s)


def _label_spots(fig: Figure, voids: Sequence[Void], size: float):
    """Where each void's id goes so that no two ids, no id and another void, and no id and the loads or
    supports overlap: inside the void when it fits with room to spare, else just outside it in the first of
    eight directions (up-right first) that is clear, further out with a leader line when none is. Returns
    [(baseline start (local mm), leader segment or None)] in ``voids`` order."""
    p = fig.paper
    panel = fig.panel
    gap = p(0.6)
    shapes = [v.shape for v in voids]
    taken: list = []
    # The loads and supports are drawn on the panel's edges and outside it: ids stay inside the panel, clear of
    # the edge band where arrows and bearing marks stand.
    inner = shapely.box(0.0, 0.0, panel.width_mm, panel.height_mm).buffer(-p(1.0), join_style="mitre")
    # A point load's arrow and its figure stand at its point: ids keep a square of 12 paper mm clear round it.
    for load in panel.loads:
        if isinstance(load, PointLoad):
            inner = inner.difference(shapely.Point(load.at).buffer(p(12.0), cap_style="square"))
    tree = shapely.STRtree(shapes) if shapes else None
    dirs = [(math.cos(a), math.sin(a)) for a in np.radians([45, 135, 0, 180, 90, 270, 315, 225])]
    out = []
    for k, void in enumerate(voids):
        w = _EM * size * fig.scale * len(void.id)
        h = 0.99 * size * fig.scale
        c = np.asarray(void.centre, dtype=float)

        def clear(box, inside_own: bool) -> bool:
            spaced = box.buffer(p(0.5))  # a little air between two ids
            if not inner.covers(box) or any(spaced.intersects(t) for t in taken):
                return False
            near = tree.query(box.buffer(gap), predicate="intersects") if tree is not None else []
            for j in near:
                if j == k and inside_own:
                    continue
                return False
            return True

        # Inside, above the centre cross, when the void holds the box with a margin.
        at = c + (-w / 2.0, min(p(1.5), 0.35 * void.size_mm) + p(0.5) + 0.24 * size * fig.scale)
        box = label_box(fig, void.id, at, size)
        if void.shape.buffer(-gap).covers(box) and clear(box, inside_own=True):
            taken.append(box)
            out.append((at, None))
            continue
        placed = None
        reach = 0.5 * float(max(void.length_mm, void.size_mm)) + gap
        for ring in (1.0, 2.0, 3.5, 5.0):
            for dx, dy in dirs:
                # the box's nearest corner (or edge middle) in the direction faces the void
                ox = 0.0 if dx > 0.3 else (-w if dx < -0.3 else -w / 2.0)
                oy = 0.24 * size * fig.scale if dy > 0.3 else (-0.75 * size * fig.scale if dy < -0.3 else -0.3 * h)
                point = c + reach * ring * np.array([dx, dy])
                at = point + (ox, oy)
                box = label_box(fig, void.id, at, size)
                if clear(box, inside_own=False):
                    placed = (at, None if ring == 1.0 else (_towards(void.shape, point), point))
                    break
            if placed is not None:
                break
        if placed is None:  # nowhere clear: the first spot outside, as before
            at = _void_label_anchor(void) + p(0.6)
            placed = (at, None)
        taken.append(label_box(fig, void.id, placed[0], size))
        out.append(placed)
    return out


def _towards(shape, point) -> np.ndarray:
    """The point of ``shape``'s outline nearest ``point`` (a leader's foot)."""
    line = shapely.shortest_line(shape.boundary, shapely.Point(point))
    return shapely.get_coordinates(line)[0]


def _draw_result_layers(fig: Figure, voids: Sequence[Void], freeform, markers) -> None:
    """The CONTRACT.md output layers, each a group (present even when empty, so a viewer can toggle it)."""
    p = fig.paper
    looks = {name: palette.rgb_to_hex(np.asarray(look.rgb) / 255.0) for name, look in _LOOK.items()}
    bold, thin = _fmt(p(0.6), 4), _fmt(p(0.25), 4)
    g = {}
    for name in RESULT_LAYERS:
        look = _LOOK[name]
        if name == "lacuna-freeform":
            attrs = dict(fill="none", stroke=looks[name], stroke_width=thin, stroke_linejoin="round",
                         stroke_dasharray=f"{_fmt(p(1.6), 4)} {_fmt(p(0.8), 4)}")
        elif name in _VOID_GROUP.values():
            attrs = dict(fill=VOID_FILL, stroke=looks[name], stroke_width=bold, stroke_linejoin="round")
        elif name == "lacuna-centre":
            attrs = dict(fill="none", stroke=looks[name], stroke_width=_fmt(p(0.18), 4))
        elif name == "lacuna-check":
            attrs = dict(fill="none", stroke=looks[name], stroke_width=_fmt(p(0.35), 4))
        else:
            attrs = {}
        g[name] = fig.layer(name, **attrs, **{"data-layer": look.name})

    for ring in dxf_out._freeform_rings(freeform):
        g["lacuna-freeform"].add(fig.dwg.path(d=_points(ring)))
    for void in voids:
        dxf_out._check_void(void)
        group = g[_VOID_GROUP[void.family]]
        tag = {"data-void-id": void.id}
        if void.family == "bore":
            cx, cy = void.centre
            group.add(fig.dwg.circle(center=(_exact(cx), _exact(cy)), r=_exact(void.size_mm / 2.0), **tag))
        else:
            outline = void.outline or tuple((x, y, 0.0) for x, y in list(void.shape.exterior.coords)[:-1])
            group.add(fig.dwg.path(d=outline_path(outline), **tag))
        # Crosses about 3 mm on paper, never longer than the void is wide.
        half = min(p(1.5), 0.35 * void.size_mm)
        cx, cy = void.centre
        g["lacuna-centre"].add(fig.dwg.path(
            d=f"M{_fmt(cx - half)} {_fmt(cy)}h{_fmt(2 * half)}M{_fmt(cx)} {_fmt(cy - half)}v{_fmt(2 * half)}", **tag))
    spots = _label_spots(fig, voids, LABEL_SIZE)
    for void, (at, leader) in zip(voids, spots):
        if leader is not None:
            g["lacuna-note"].add(fig.dwg.line(start=(_fmt(leader[0][0]), _fmt(leader[0][1])),
                                              end=(_fmt(leader[1][0]), _fmt(leader[1][1])),
                                              stroke=looks["lacuna-note"], stroke_width=_fmt(p(0.15), 4),
                                              **{"data-void-id": void.id, "data-leader": "1"}))
        label = _cased_text(fig, g["lacuna-note"], void.id, (at[0], at[1]), LABEL_SIZE, weight="bold",
                            fill=looks["lacuna-note"], local=True)
        label.attribs["data-void-id"] = void.id
    for m in markers:
        r = m.radius_mm if m.radius_mm is not None else p(2.5)
        x, y = m.where
        g["lacuna-check"].add(fig.dwg.circle(center=(_fmt(x), _fmt(y)), r=_fmt(r, 4)))
        _cased_text(fig, g["lacuna-check"], m.label, (x + r * math.sqrt(0.5) + p(0.5), y + r * math.sqrt(0.5)),
                    1.8, casing=0.4, fill=looks["lacuna-check"], local=True)


def _cased_text(fig: Figure, group, content: str, at, size: float, casing: float = 0.6, **kw):
    """Lettering over the underlay, on a paper-white casing (a stroked copy underneath) so it reads on any grey.

    A copy rather than ``paint-order``, which not every renderer honours. Lettering is set in paper units even
    inside the drawing (see :meth:`Figure.text`), so the casing's width is in paper mm."""
    under = fig.text(group, content, at, size, **{**kw, "fill": "#ffffff"})
    under.attribs.update({"stroke": "#ffffff", "stroke-width": _fmt(casing, 3), "stroke-linejoin": "round",
                           "data-casing": "1"})
    return fig.text(group, content, at, size, **kw)


def _layer_key_rows(leave_out: tuple[str, ...] = ()) -> list:
    """The line key of the result sheets: the panel's lines and each output layer (less ``leave_out``: layers
    with nothing on the sheet)."""
    looks = {name: palette.rgb_to_hex(np.asarray(look.rgb) / 255.0) for name, look in _LOOK.items()}
    rows = [
        ("line", dict(stroke=INK, stroke_width="0.4"), "panel and openings as drawn"),
        ("line", dict(stroke=INK, stroke_width="0.3", stroke_dasharray="2 1"), "zone kept solid"),
    ]
    for name in RESULT_LAYERS:
        if name in leave_out:
            continue
        look = _LOOK[name]
        colour = looks[name]
        if name in _VOID_GROUP.values():
            sample = ("area", dict(fill=VOID_FILL, stroke=colour, stroke_width="0.6"))
        elif name == "lacuna-freeform":
            sample = ("line", dict(stroke=colour, stroke_width="0.25", stroke_dasharray="1.6 0.8"))
        elif name == "lacuna-centre":
            sample = ("cross", dict(stroke=colour, stroke_width="0.18"))
        elif name == "lacuna-note":
            sample = ("label", dict(fill=colour))
        else:
            sample = ("ring", dict(stroke=colour, stroke_width="0.35"))
        rows.append((*sample, f"{look.description} \u2014 layer {look.name}"))
    return rows


def _draw_density_bar(fig: Figure, g, x0: float, top: float) -> None:
    """The material-state bar: paper white (void) to dark (solid), in its classes."""
    bar_w, bar_h = 120.0, 5.0
    bar_y = top + 9.0
    fig.text(g, "Optimised layout: material kept in each element", (x0, top + 2.5), 2.8, weight="bold")
    fig.text(g, "VOID", (x0, bar_y - 1.2), 2.6, weight="bold")
    fig.text(g, "SOLID", (x0 + bar_w, bar_y - 1.2), 2.6, anchor="end", weight="bold")
    colours = density_colours()
    cw = bar_w / DENSITY_CLASSES
    bar = fig.dwg.g(id="legend-density-bar")
    g.add(bar)
    for i, c in enumerate(colours):
        bar.add(fig.dwg.rect((_fmt(x0 + i * cw, 3), _fmt(bar_y, 3)), (_fmt(cw + 0.02, 3), _fmt(bar_h)), fill=c,
                             **{"data-from": _fmt(i / DENSITY_CLASSES, 4)}))
    g.add(fig.dwg.rect((_fmt(x0, 3), _fmt(bar_y, 3)), (_fmt(bar_w), _fmt(bar_h)), fill="none", stroke=INK,
                       stroke_width="0.2"))
    for i in range(0, DENSITY_CLASSES + 1, 2):
        x = x0 + i * cw
        g.add(fig.dwg.line(start=(_fmt(x, 3), _fmt(bar_y + bar_h, 3)), end=(_fmt(x, 3), _fmt(bar_y + bar_h + 1.4, 3)),
                           stroke=INK, stroke_width="0.2"))
        fig.text(g, f"{i / DENSITY_CLASSES:g}", (x, bar_y + bar_h + 4.2), 2.5, anchor="middle")
    fig.text(g, "Share of each element kept (elements cut by an opening: of the part inside the panel).",
             (x0, bar_y + bar_h + 8.5), 2.4)


_RESULT_LEGEND = 44.0


# Paper room (mm) under the panel for the x ordinates, below the support symbols.
_ORDINATE_BAND = 16.0
_ORDINATE_SIZE = 2.0


def _spread(values: np.ndarray, pitch: float) -> np.ndarray:
    """Positions for labels at ``values`` (sorted) at least ``pitch`` apart: each at its value unless the one
    before it pushes it on (a leader then joins it to its value)."""
    out = values.astype(float).copy()
    for k in range(1, len(out)):
        out[k] = max(out[k], out[k - 1] + pitch)
    return out


def _draw_ordinates(fig: Figure, voids: Sequence[Void]) -> None:
    """Ordinate dimensions of every void's centre from the datum (the panel's lower-left corner, local 0, 0):
    x values along a line under the panel, y values up a line left of it, each with a tick at the true position
    and a jogged leader to its lettering where neighbours crowd it. Values in the drawing's unit; a centre shared
    by several voids is written once."""
    if not voids:
        return
    p = fig.paper
    f = fig.panel.frame
    g = fig.layer("ordinates", stroke=INK, stroke_width=_fmt(p(0.15), 4), fill="none")
    decimals = {"mm": 0, "cm": 1, "m": 3, "in": 2, "ft": 3}.get(f.unit, 3)

    def text(v: float) -> str:
        return f"{f.length_to_drawing(v):.{decimals}f}"

    pitch = p(_ORDINATE_SIZE * 1.25)
    # x ordinates: a datum line below the support symbols, values written upright-turned (reading up).
    base = -p(_ROOM_BELOW - 2.0)
    xs = np.unique(np.round([v.centre[0] for v in voids], 6))
    xs = np.concatenate([[0.0], xs])
    where = _spread(xs, pitch)
    g.add(fig.dwg.line(start=(_fmt(0), _fmt(base)), end=(_fmt(fig.panel.width_mm), _fmt(base))))
    for x, at in zip(xs, where):
        g.add(fig.dwg.path(d=f"M{_fmt(x)} {_fmt(base)}v{_fmt(-p(1.2))}L{_fmt(at)} {_fmt(base - p(3.0))}"
                           f"v{_fmt(-p(0.6))}", **{"data-ordinate": f"x {text(x)}"}))
        label = "0" if x == 0.0 else text(x)
        s = fig.scale
        g.add(_lettering(fig.dwg, label, (0, 0), _ORDINATE_SIZE, anchor="end", fill=INK,
                         transform=f"matrix(0 {_fmt(s, 6)} {_fmt(s, 6)} 0 {_fmt(at + 0.35 * p(_ORDINATE_SIZE))} "
                                   f"{_fmt(base - p(4.0))})"))
    # y ordinates: a datum line left of the panel, beyond the support symbols, values written level.
    side = -p(_ROOM - 6.0)
    ys = np.unique(np.round([v.centre[1] for v in voids], 6))
    ys = np.concatenate([[0.0], ys])
    where = _spread(ys, pitch)
    g.add(fig.dwg.line(start=(_fmt(side), _fmt(0)), end=(_fmt(side), _fmt(fig.panel.height_mm))))
    for y, at in zip(ys, where):
        g.add(fig.dwg.path(d=f"M{_fmt(side)} {_fmt(y)}h{_fmt(-p(1.2))}L{_fmt(side - p(3.0))} {_fmt(at)}"
                           f"h{_fmt(-p(0.6))}", **{"data-ordinate": f"y {text(y)}"}))
        fig.text(g, "0" if y == 0.0 else text(y), (side - p(4.2), at - 0.35 * p(_ORDINATE_SIZE)), _ORDINATE_SIZE,
                 anchor="end", local=True)
    # The datum: a circle with a cross at the corner.
    r = p(1.2)
    g.add(fig.dwg.circle(center=(0, 0), r=_fmt(r), **{"data-datum": "1"}))
    g.add(fig.dwg.path(d=f"M{_fmt(-r)} 0h{_fmt(2 * r)}M0 {_fmt(-r)}v{_fmt(2 * r)}"))


def _draw_result_legend(fig: Figure, underlay: str, stress_range) -> None:
    g = fig.sheet_group("legend")
    x0, top = _MARGIN, fig.legend_top
    if underlay == "density":
        _draw_density_bar(fig, g, x0, top)
    elif underlay == "stress":
        _draw_stress_bar(fig, g, x0, top, *stress_range)
    elif underlay == "made":
        fig.text(g, "The panel as it will be made: material grey, voids cut through.", (x0, top + 2.5), 2.8,
                 weight="bold")
        for k, line in enumerate((
                f"Ordinates: each void's centre from the datum at the panel's lower-left corner, in "
                f"{fig.panel.frame.unit}; x along the",
                "bottom, y up the left side. Sizes and corner coordinates: the void schedule (CSV).",
                "The optimiser's layout and its freeform voids: the layout figure.")):
            fig.text(g, line, (x0, top + 8.0 + 4.2 * k), 2.4)
    else:
        fig.text(g, "No underlay: the voids over the panel as drawn.", (x0, top + 2.5), 2.8, weight="bold")
    _draw_scale_bar(fig, x0, top + 29.0)
    # The sheet a shop makes from shows no freeform outlines: its key does not list them.
    leave_out = ("lacuna-freeform",) if underlay == "made" else ()
    _draw_key(fig, g, x0 + 132.0, top, _layer_key_rows(leave_out), pitch=4.3)


_UNDERLAYS = ("made", "density", "stress", "none")
# The panel's material on the sheet a shop makes from: a light grey, so the cut voids (paper white) and every line
# over it read clearly.
MADE_FILL = "#d6d6d0"
_FAMILY_WORDS = {"polygon": ("n-gon", "n-gons"), "slot": ("slot", "slots"), "bore": ("bore", "bores")}


def _void_count_text(voids: Sequence[Void]) -> str:
    if not voids:
        return "no voids to make"
    counts = {f: sum(v.family == f for v in voids) for f in _FAMILY_WORDS}
    parts = [f"{n} {_FAMILY_WORDS[f][n != 1]}" for f, n in counts.items() if n]
    return f"{len(voids)} to make: " + ", ".join(parts)


def result_svg(
    panel: Panel,
    grid,
    *,
    densities=None,
    freeform=(),
    voids: Iterable[Void] = (),
    stress=None,
    underlay: str = "density",
    title: str | None = None,
    profile: str = "",
    volume_removed_percent: float | None = None,
    mass_removed_kg: float | None = None,
    date: _dt.date | str | None = None,
    violations: Iterable = (),
) -> str:
    """The result sheet as SVG text: the voids to make over an underlay, at 1:N on a 260 mm wide sheet.

    One group per output layer of CONTRACT.md (ids in lower case, present even when empty): voids to make
    bold over a paper-white cut (slots and eased corners as true arcs, bores as circles of the drill's radius in
    local mm), the optimiser's freeform outlines thin and dashed, centre crosses, void ids, and ``violations``
    (rule checks: Violation values, check-JSON mappings or dxf_out Markers) ringed. ``underlay`` is "density"
    (the optimised material state of ``densities`` (ne,) in greys; nothing when no densities are given),
    "stress" (``stress`` (ne, 3) sx, sy, txy in MPa, drawn as on the analysis figure) or "none". The title block
    names the panel, profile, the volume removed and the date, over the caution.
    """
    if underlay not in _UNDERLAYS:
        raise LacunaError(f"unknown underlay {underlay!r}.", where="result figure",
                          hint=f"Use one of: {', '.join(_UNDERLAYS)}.")
    voids = list(voids)
    markers = [_as_marker(m, k) for k, m in enumerate(violations)]
    ne = grid.nx * grid.ny
    _check_grid(panel, grid, "result figure")
    solid = panel.solid
    state = None
    if densities is not None:
        state, _ = material_state(panel, grid, densities)
    elif underlay == "density":
        underlay = "none"
    stress_range = None
    if underlay == "stress":
        if stress is None:
            raise LacunaError("a stress underlay was asked for, but no stresses were given.", where="result figure",
                              hint="Pass stress=(ne, 3) element stresses of one load case, or underlay='density'.")
        stress = _checked_array(stress, (ne, 3), "stress", grid)
        # The stress belongs to the panel with the voids to make cut: draw that material, not the optimiser's.
        if voids:
            solid = shapely.difference(solid, shapely.union_all([v.shape for v in voids]))
        drawn = solid_fractions(grid, solid) > 0.0
        dominant = dominant_principal(stress)
        shown = dominant[drawn]
        vmax = stress_limit(shown)
        stress_range = (vmax, float(shown.max()) if shown.size else 0.0, float(shown.min()) if shown.size else 0.0)

    fig = Figure(panel, legend_height=_RESULT_LEGEND,
                 room_below=_ROOM_BELOW + (_ORDINATE_BAND if underlay == "made" else 0.0))
    what = {"density": "under them the optimised layout", "stress": "under them the stress with the voids cut",
            "none": "over the panel as drawn",
            "made": "cut from the panel as it will be made"}[underlay]
    _draw_heading(fig, title or f"{panel.name}: voids to make",
                  f"Scale 1:{fig.scale}; lengths in {panel.frame.unit}; voids to make {what}.")
    if underlay == "made":
        made = shapely.difference(solid, shapely.union_all([v.shape for v in voids])) if voids else solid
        g = fig.layer("made", fill=MADE_FILL, stroke="none")
        for poly in _polygons(made):
            g.add(fig.dwg.path(d=_area_path(poly), fill_rule="evenodd"))
    elif underlay == "density":
        _draw_cells(fig, "density", grid, density_classes(state), state >= SHOWN, density_colours(), solid)
    elif underlay == "stress":
        _draw_stress(fig, grid, drawn, dominant, stress_range[0], solid)
        fig.drawing.attribs["data-stress-limit-MPa"] = f"{stress_range[0]:g}"
    _draw_outlines(fig, panel)
    _draw_result_layers(fig, voids, freeform, markers)
    _draw_supports(fig, panel)
    for case in panel.cases:
        _draw_loads(fig, panel, case)
    if underlay == "made":
        _draw_ordinates(fig, voids)
    _draw_result_legend(fig, underlay, stress_range)
    removed = "volume removed: not stated"
    if volume_removed_percent is not None:
        removed = f"volume removed {volume_removed_percent:.1f} %"
        if mass_removed_kg is not None:
            removed += f" ({_kilograms(mass_removed_kg)})"
    _draw_title_block(fig, [
        (0.3, "PANEL", [panel.name, f"profile: {profile}" if profile else "profile: not stated"]),
        (0.3, "VOIDS", [_void_count_text(voids), removed]),
        (0.2, "SECTION", _section_lines(panel)),
        (0.2, "FIGURE", [f"date {_date_text(date)}",
                         f"1:{fig.scale}, {len(markers)} rule marker{'' if len(markers) == 1 else 's'}"]),
    ])
    fig.drawing.attribs["data-underlay"] = underlay
    return fig.tostring()


# --------------------------------------------------------------------------------------------- layout frames


def layout_frame_svg(panel: Panel, grid, densities, *, iteration: int, compliance_Nmm: float,
                     volume_fraction: float) -> str:
    """One frame of the evolving layout (``--frames``): the panel's material state in greys under a one-line
    caption, on a light sheet just wider than the panel. Every frame of a run has the same size and scale, so
    the sequence plays as an animation."""
    where = f"layout frame {iteration}"
    if not (isinstance(iteration, (int, np.integer)) and iteration >= 0):
        raise LacunaError(f"the iteration must be a whole number of zero or more, got {iteration!r}.", where=where)
    if not (math.isfinite(compliance_Nmm) and math.isfinite(volume_fraction) and 0.0 <= volume_fraction <= 1.0):
        raise LacunaError(
            f"compliance {compliance_Nmm!r} N mm and volume fraction {volume_fraction!r} must be finite, the "
            "volume fraction between 0 and 1.", where=where, hint="Pass the history entry of the same iteration.",
        )
    _check_grid(panel, grid, where)
    state, _ = material_state(panel, grid, densities)
    fig = Figure(panel, legend_height=0.0, title_block=0.0, heading=7.0, room=4.0, room_below=6.0, width=None)
    caption = (f"{panel.name} \u00b7 iteration {iteration} \u00b7 compliance {_fmt_value(compliance_Nmm)} N mm "
               f"\u00b7 volume fraction {volume_fraction:.3f} (design region)")
    caption, size = _fit(caption, fig.width - 2 * _MARGIN, 3.0)
    fig.text(fig.sheet_group("heading"), caption, (_MARGIN, _MARGIN + 4.0), size)
    _draw_cells(fig, "density", grid, density_classes(state), state >= SHOWN, density_colours(), panel.solid)
    _draw_outlines(fig, panel)
    note, size = _fit(CAUTION, fig.width - 2 * _MARGIN, 2.0, smallest=1.5)
    fig.text(fig.sheet_group("caution"), note, (_MARGIN, fig.origin[1] + 4.5), size, style="italic", fill="#555555")
    fig.drawing.attribs["data-iteration"] = str(int(iteration))
    return fig.tostring()


# --------------------------------------------------------------------------------------------- convergence

VOLUME_INK = palette.STOPS[1][1]  # the stress scale's second teal: apart from the black compliance line
TARGET_INK = DEFLECTED_INK
TARGET_TOLERANCE = 0.005  # volume fraction within half a percentage point of the target counts as reached
_SUPERSCRIPT = str.maketrans("-0123456789", "\u207b\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076\u2077\u2078\u2079")


# Share of a value axis's tick span left clear beyond each end tick of the convergence plot.
_AXIS_PAD = 0.05


def nice_ticks(lo: float, hi: float, count: int = 5) -> np.ndarray:
    """Round tick values covering [lo, hi]: a step of the 1-2-5 series giving about ``count`` intervals."""
    if not (math.isfinite(lo) and math.isfinite(hi)):
        raise ValueError(f"need finite limits, got {lo}, {hi}")
    if hi < lo:
        lo, hi = hi, lo
    if hi - lo <= 1e-12 * max(abs(lo), abs(hi), 1e-300):
        pad = 0.05 * abs(lo) if lo != 0 else 1.0
        lo, hi = lo - pad, hi + pad
    step = nice_125((hi - lo) / count, mode="ceil")
    first = math.floor(lo / step + 1e-9)
    last = math.ceil(hi / step - 1e-9)
    return np.arange(first, last + 1) * step


def target_reached(volume_fraction, target: float, tolerance: float = TARGET_TOLERANCE) -> int | None:
    """Index of the first iteration whose volume fraction is within ``tolerance`` of the target or past it."""
    v = np.asarray(volume_fraction, dtype=float)
    if v.size == 0:
        return None
    side = np.sign(v[0] - target)
    hits = np.flatnonzero((np.abs(v - target) <= tolerance) | (np.sign(v - target) != side))
    return int(hits[0]) if hits.size else None


def _tick_labels(ticks: np.ndarray, power: int = 0) -> list[str]:
    step = abs(ticks[1] - ticks[0]) / 10.0**power if len(ticks) > 1 else 1.0
    decimals = max(0, -math.floor(math.log10(step) + 1e-9))
    return [f"{t / 10.0**power:.{decimals}f}".replace("-", "\u2212") for t in ticks]


def convergence_svg(compliance_Nmm, volume_fraction, *, target: float | None = None, title: str | None = None) -> str:
    """The convergence plot as SVG text: compliance (left axis) and volume fraction of the design region
    (right axis) against iteration, one polyline vertex per iteration, ticks at round values, a legend, and a
    marker where the volume fraction reached ``target``. 200 x 125 mm, sized in millimetres."""
    where = "convergence plot"
    c = np.asarray(compliance_Nmm, dtype=float)
    v = np.asarray(volume_fraction, dtype=float)
    if c.ndim != 1 or v.shape != c.shape or c.size == 0:
        raise LacunaError(
            f"the compliance history has shape {c.shape} and the volume history {v.shape}; they must be two "
            "non-empty lists of the same length, one entry per iteration.", where=where,
        )
    if not (np.all(np.isfinite(c)) and np.all(np.isfinite(v))):
        raise LacunaError("the history holds values that are not finite numbers.", where=where,
                          hint="The run did not give a usable result; check supports and loads.")
    if target is not None and not (math.isfinite(target) and 0.0 < target <= 1.0):
        raise LacunaError(f"the target volume fraction must lie in (0, 1], got {target!r}.", where=where)
    n = c.size
    width, height = 200.0, 125.0
    x0, x1, y0, y1 = 30.0, width - 30.0, 32.0, height - 26.0  # plot area, paper mm (y down)
    dwg, group, text = _plot_sheet(width, height)

    heading = group("heading")
    line, size = _fit(title or "Convergence", width - 2 * _MARGIN, 4.5)
    text(heading, line, (_MARGIN, _MARGIN + 4.5), size, weight="bold")
    text(heading, "Convergence: compliance and volume fraction of the design region at each iteration.",
         (_MARGIN, _MARGIN + 10.0), 2.6)

    iters = np.arange(1, n + 1)
    xt = nice_ticks(0.0, float(n), 6)
    xt = xt[xt == np.round(xt)]
    ct = nice_ticks(float(c.min()), float(c.max()), 5)
    vt = nice_ticks(float(min(v.min(), target if target is not None else v.min())), float(v.max()), 5)

    def px(i):
        return x0 + (np.asarray(i, dtype=float) - xt[0]) / (xt[-1] - xt[0]) * (x1 - x0)

    # The value axes reach a little past their end ticks, so that no line runs along the frame (a volume fraction
    # starting at 1.0 on the top edge hid under it).
    def padded(t):
        span = t[-1] - t[0]
        return t[0] - _AXIS_PAD * span, t[-1] + _AXIS_PAD * span

    c_lo, c_hi = padded(ct)
    v_lo, v_hi = padded(vt)

    def pc(y):
        return y1 - (np.asarray(y, dtype=float) - c_lo) / (c_hi - c_lo) * (y1 - y0)

    def pv(y):
        return y1 - (np.asarray(y, dtype=float) - v_lo) / (v_hi - v_lo) * (y1 - y0)

    axes = group("axes", stroke=INK, stroke_width="0.25", fill="none")
    grid_lines = "".join(f"M{_fmt(x0)} {_fmt(float(pc(t)), 3)}H{_fmt(x1)}" for t in ct)
    grid_lines += "".join(f"M{_fmt(float(px(t)), 3)} {_fmt(y0)}V{_fmt(y1)}" for t in xt[1:-1])
    axes.add(dwg.path(d=grid_lines, stroke="#d9d9d9", stroke_width="0.15"))
    axes.add(dwg.rect((_fmt(x0), _fmt(y0)), (_fmt(x1 - x0), _fmt(y1 - y0))))
    power = 3 * math.floor(math.log10(max(abs(ct[0]), abs(ct[-1]))) / 3) if max(abs(ct[0]), abs(ct[-1])) >= 1e4 else 0
    labels = group("tick-labels")
    for t, label in zip(ct, _tick_labels(ct, power)):
        y = float(pc(t))
        axes.add(dwg.line(start=(_fmt(x0 - 1.2), _fmt(y, 3)), end=(_fmt(x0), _fmt(y, 3))))
        text(labels, label, (x0 - 2.0, y + 0.9), 2.5, anchor="end")
    for t, label in zip(vt, _tick_labels(vt)):
        y = float(pv(t))
        axes.add(dwg.line(start=(_fmt(x1), _fmt(y, 3)), end=(_fmt(x1 + 1.2), _fmt(y, 3)), stroke=VOLUME_INK))
        text(labels, label, (x1 + 2.0, y + 0.9), 2.5, fill=VOLUME_INK)
    for t, label in zip(xt, _tick_labels(xt)):
        x = float(px(t))
        axes.add(dwg.line(start=(_fmt(x, 3), _fmt(y1)), end=(_fmt(x, 3), _fmt(y1 + 1.2))))
        text(labels, label, (x, y1 + 4.2), 2.5, anchor="middle")
    text(labels, "iteration", ((x0 + x1) / 2, y1 + 9.0), 2.8, anchor="middle")
    unit = "N mm" if power == 0 else f"10{str(power).translate(_SUPERSCRIPT)} N mm"
    mid = (y0 + y1) / 2
    text(labels, f"compliance, {unit}", (0, 0), 2.8, anchor="middle",
         transform=f"translate({_fmt(x0 - 15.0)} {_fmt(mid)}) rotate(-90)")
    text(labels, "volume fraction of the design region", (0, 0), 2.8, anchor="middle", fill=VOLUME_INK,
         transform=f"translate({_fmt(x1 + 15.0)} {_fmt(mid)}) rotate(90)")

    def polyline(name, ys, **style):
        pts = [(round(float(x), 3), round(float(y), 3)) for x, y in zip(px(iters), ys)]
        g = group(name, fill="none", stroke_linejoin="round", **style)
        g.add(dwg.polyline(points=pts, id=f"{name}-line", **{"data-iterations": str(n)}))
        if n == 1:  # a lone point draws no line: mark it
            g.add(dwg.circle(center=(_fmt(float(px(1)), 3), _fmt(float(ys[0]), 3)), r="0.6", fill=style["stroke"]))
        return g

    polyline("compliance", pc(c), stroke=INK, stroke_width="0.5")
    polyline("volume", pv(v), stroke=VOLUME_INK, stroke_width="0.45", stroke_dasharray="2.2 1")

    legend = group("legend")
    ly = y0 - 5.0
    legend.add(dwg.line(start=(_fmt(x0), _fmt(ly - 0.9)), end=(_fmt(x0 + 8), _fmt(ly - 0.9)), stroke=INK,
                        stroke_width="0.5"))
    text(legend, "compliance (left axis)", (x0 + 10.0, ly), 2.5)
    legend.add(dwg.line(start=(_fmt(x0 + 48), _fmt(ly - 0.9)), end=(_fmt(x0 + 56), _fmt(ly - 0.9)),
                        stroke=VOLUME_INK, stroke_width="0.45", stroke_dasharray="2.2 1"))
    text(legend, "volume fraction (right axis)", (x0 + 58.0, ly), 2.5, fill=VOLUME_INK)

    mark = group("target")
    k = target_reached(v, target) if target is not None else None
    if target is not None:
        yt = float(pv(target))
        mark.add(dwg.line(start=(_fmt(x0), _fmt(yt, 3)), end=(_fmt(x1), _fmt(yt, 3)), stroke=VOLUME_INK,
                          stroke_width="0.2", stroke_dasharray="0.6 0.8"))
        legend.add(dwg.circle(center=(_fmt(x0 + 106), _fmt(ly - 0.9)), r="1.1", fill="#ffffff", stroke=TARGET_INK,
                              stroke_width="0.35"))
        text(legend, f"target {target:g} reached" if k is not None else f"target {target:g} not reached",
             (x0 + 109.0, ly), 2.5, fill=TARGET_INK)
    if k is not None:
        xk, yk = float(px(k + 1)), float(pv(v[k]))
        mark.add(dwg.line(start=(_fmt(xk, 3), _fmt(y0)), end=(_fmt(xk, 3), _fmt(y1)), stroke=TARGET_INK,
                          stroke_width="0.2", stroke_dasharray="0.6 0.8"))
        mark.add(dwg.circle(center=(_fmt(xk, 3), _fmt(yk, 3)), r="1.1", fill="#ffffff", stroke=TARGET_INK,
                            stroke_width="0.35"))
        right = xk > (x0 + x1) / 2
        text(mark, f"iteration {k + 1}", (xk + (-1.2 if right else 1.2), y0 + 3.5), 2.4,
             anchor="end" if right else "start", fill=TARGET_INK)
        mark.attribs["data-iteration"] = str(k + 1)

    foot = group("caution")
    note, size = _fit(CAUTION, width - 2 * _MARGIN, 2.4)
    text(foot, note, (_MARGIN, height - _MARGIN + 2.0), size, style="italic", fill="#555555")
    return dwg.tostring()


# Colour-blind-safe line colours, one per profile: the qualitative set of Okabe and Ito ("Color universal design",
# 2008), which stays apart under the common colour-vision deficiencies; each line also has its own marker shape.
PROFILE_INKS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9")
_MARKERS = ("circle", "square", "triangle", "diamond", "circle", "square")


def _marker(dwg, shape: str, x: float, y: float, r: float, **style):
    if shape == "circle":
        return dwg.circle(center=(_fmt(x, 3), _fmt(y, 3)), r=_fmt(r, 3), **style)
    if shape == "square":
        return dwg.rect((_fmt(x - r * 0.9, 3), _fmt(y - r * 0.9, 3)), (_fmt(1.8 * r, 3), _fmt(1.8 * r, 3)), **style)
    if shape == "triangle":
        pts = [(x, y - 1.2 * r), (x + 1.05 * r, y + 0.7 * r), (x - 1.05 * r, y + 0.7 * r)]
    else:
        pts = [(x, y - 1.2 * r), (x + 1.2 * r, y), (x, y + 1.2 * r), (x - 1.2 * r, y)]
    return dwg.polygon(points=[(round(a, 3), round(b, 3)) for a, b in pts], **style)


def _plot_sheet(width: float, height: float):
    """A blank plot sheet of ``width`` x ``height`` paper mm and two pens for it: ``group(name, **attrs)`` adds a
    group with that id, ``text(group, content, at, size, **kw)`` letters into a group."""
    dwg = svgwrite.Drawing(size=(f"{_fmt(width)}mm", f"{_fmt(height)}mm"), profile="full", debug=False)
    dwg.viewbox(0, 0, width, height)
    dwg.add(dwg.rect((0, 0), (width, height), fill="#ffffff", id="sheet"))

    def group(name, **attrs):
        return dwg.add(dwg.g(id=name, **attrs))

    def text(g, content, at, size, **kw):
        return g.add(_lettering(dwg, content, at, size, **kw))

    return dwg, group, text


def tradeoff_svg(rows, *, title: str, mass_unit: str = "kg") -> str:
    """The trade-off plot of a sweep as SVG text: compliance (upper plot) and largest deflection (lower plot)
    against the made mass, one line per profile through its points in order of mass, each point labelled with its
    volume fraction, the knee ringed. ``rows``: the sweep's rows (toolkit.sweep); points without figures (refused
    or failed) are left out and counted in the foot note. 200 x 190 mm, sized in millimetres."""
    key = "made_mass_kg" if mass_unit == "kg" else "made_mass_percent"
    drawn = [r for r in rows if r.get(key) is not None and r.get("compliance_Nmm") is not None]
    profiles = list(dict.fromkeys(r["profile"] for r in rows))
    width, height = 200.0, 190.0
    x0, x1 = 32.0, width - 12.0
    plots = (("compliance", "compliance_Nmm", "compliance", "N mm", 34.0, 96.0),
             ("deflection", "max_deflection_mm", "largest deflection", "mm", 112.0, 166.0))
    dwg, group, text = _plot_sheet(width, height)

    heading = group("heading")
    line, size = _fit(title, width - 2 * _MARGIN, 4.5)
    text(heading, line, (_MARGIN, _MARGIN + 4.5), size, weight="bold")
    text(heading, "Each point a whole job at one volume fraction (voids to make, rules proved); the knee ringed.",
         (_MARGIN, _MARGIN + 10.0), 2.6)
    legend = group("legend")
    lx = x0
    for i, name in enumerate(profiles):
        ink, shape = PROFILE_INKS[i % len(PROFILE_INKS)], _MARKERS[i % len(_MARKERS)]
        legend.add(dwg.line(start=(_fmt(lx), _fmt(_MARGIN + 15.1)), end=(_fmt(lx + 8), _fmt(_MARGIN + 15.1)),
                            stroke=ink, stroke_width="0.5"))
        legend.add(_marker(dwg, shape, lx + 4, _MARGIN + 15.1, 0.9, fill=ink))
        label, _ = _fit(name, 40.0, 2.5)
        text(legend, label, (lx + 10.0, _MARGIN + 16.0), 2.5)
        lx += 12.0 + 0.6 * 2.5 * len(label) + 6.0
    legend.add(dwg.circle(center=(_fmt(lx + 2), _fmt(_MARGIN + 15.1)), r="1.8", fill="none", stroke=INK,
                          stroke_width="0.35"))
    text(legend, "knee", (lx + 5.0, _MARGIN + 16.0), 2.5)

    if not drawn:
        text(group("empty"), "No point gave figures: see the CSV for each point's message.", (x0, 60.0), 3.0)
        mt = np.array([0.0, 1.0])
    else:
        masses = [float(r[key]) for r in drawn]
        mt = nice_ticks(min(masses), max(masses), 6)

    def px(v):
        return x0 + (float(v) - mt[0]) / (mt[-1] - mt[0]) * (x1 - x0)

    for name, field_key, words, unit, y0, y1 in plots if drawn else ():
        values = [float(r[field_key]) for r in drawn]
        yt = nice_ticks(min(values), max(values), 4)
        big = max(abs(yt[0]), abs(yt[-1]))
        power = 3 * math.floor(math.log10(big) / 3) if big >= 1e4 else 0

        def py(v, yt=yt, y0=y0, y1=y1):
            return y1 - (float(v) - yt[0]) / (yt[-1] - yt[0]) * (y1 - y0)

        axes = group(f"{name}-axes", stroke=INK, stroke_width="0.25", fill="none")
        grid_lines = "".join(f"M{_fmt(x0)} {_fmt(py(t), 3)}H{_fmt(x1)}" for t in yt[1:-1])
        grid_lines += "".join(f"M{_fmt(px(t), 3)} {_fmt(y0)}V{_fmt(y1)}" for t in mt[1:-1])
        axes.add(dwg.path(d=grid_lines, stroke="#d9d9d9", stroke_width="0.15"))
        axes.add(dwg.rect((_fmt(x0), _fmt(y0)), (_fmt(x1 - x0), _fmt(y1 - y0))))
        labels = group(f"{name}-tick-labels")
        for t, label in zip(yt, _tick_labels(yt, power)):
            axes.add(dwg.line(start=(_fmt(x0 - 1.2), _fmt(py(t), 3)), end=(_fmt(x0), _fmt(py(t), 3))))
            text(labels, label, (x0 - 2.0, py(t) + 0.9), 2.5, anchor="end")
        for t, label in zip(mt, _tick_labels(mt)):
            axes.add(dwg.line(start=(_fmt(px(t), 3), _fmt(y1)), end=(_fmt(px(t), 3), _fmt(y1 + 1.2))))
            text(labels, label, (px(t), y1 + 4.2), 2.5, anchor="middle")
        text(labels, "made mass, kg" if mass_unit == "kg" else "made mass, % of the solid panel",
             ((x0 + x1) / 2, y1 + 9.0), 2.8, anchor="middle")
        shown = unit if power == 0 else f"10{str(power).translate(_SUPERSCRIPT)} {unit}"
        text(labels, f"{words}, {shown}", (0, 0), 2.8, anchor="middle",
             transform=f"translate({_fmt(x0 - 17.0)} {_fmt((y0 + y1) / 2)}) rotate(-90)")
        for i, profile in enumerate(profiles):
            ink, shape = PROFILE_INKS[i % len(PROFILE_INKS)], _MARKERS[i % len(_MARKERS)]
            mine = sorted((r for r in drawn if r["profile"] == profile), key=lambda r: float(r[key]))
            if not mine:
                continue
            g = group(f"{name}-{i + 1}", fill="none", stroke=ink, stroke_linejoin="round")
            g.attribs["data-profile"] = profile
            pts = [(round(px(r[key]), 3), round(py(r[field_key]), 3)) for r in mine]
            g.add(dwg.polyline(points=pts, stroke_width="0.5"))
            for r, (x, y) in zip(mine, pts):
                g.add(_marker(dwg, shape, x, y, 0.9, fill=ink, stroke="none",
                              **{"data-volume-fraction": f"{r['volume_fraction']:g}"}))
                text(g, f"{r['volume_fraction']:g}", (x + 1.6, y - 1.4), 2.0, fill=ink)
                if r.get("knee"):
                    g.add(dwg.circle(center=(_fmt(x, 3), _fmt(y, 3)), r="1.8", fill="none", stroke=INK,
                                     stroke_width="0.35", id=f"{name}-knee-{i + 1}",
                                     **{"data-volume-fraction": f"{r['volume_fraction']:g}"}))

    foot = group("caution")
    missing = len(rows) - len(drawn)
    if missing:
        text(foot, f"{missing} of {len(rows)} points gave no figures (refused or failed): see the CSV.",
             (_MARGIN, height - _MARGIN - 3.0), 2.4, fill="#555555")
    note, size = _fit(CAUTION, width - 2 * _MARGIN, 2.4)
    text(foot, note, (_MARGIN, height - _MARGIN + 2.0), size, style="italic", fill="#555555")
    return dwg.tostring()


def _kilograms(kg: float) -> str:
    """A mass as a drafter writes it, never with an exponent: three significant figures below 100 kg (20.6 kg,
    0.534 kg), whole kilograms above (1210 kg)."""
    if kg == 0:
        return "0 kg"
    digits = max(0, 2 - int(math.floor(math.log10(abs(kg)))))
    text = f"{round(kg, digits):.{digits}f}"
    return (text.rstrip("0").rstrip(".") if "." in text else text) + " kg"
