"""The sheet every SVG figure is drawn on, and what the figures share: paper sizes and margins, number formatting,
path data, the :class:`Figure` (a sheet with the panel placed at 1:N), lettering, the heading, line key, scale bar
and title block, input checks, and the blank plot sheet of the convergence and trade-off plots.

Everything that belongs to the panel lives in the group ``drawing``, whose coordinates are the panel's local frame
in mm (x right, y up); one transform on that group flips y and scales to paper. Inside it each kind of content has
a group of its own, made with :meth:`Figure.layer`. The figures themselves: :mod:`.analysis_figure`,
:mod:`.result_sheet`, :mod:`.layout_frame`, :mod:`.convergence_plot`, :mod:`.tradeoff_plot`.
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Iterable, Sequence

import numpy as np
import svgwrite
from shapely.geometry import MultiPolygon, Polygon

from ..arcs import arc_radius
from ..errors import LacunaError
from ..model import Panel
from . import palette


SHEET_WIDTH_MM = 260.0
CAUTION = (
    "For design exploration only: members must be checked by a qualified engineer to the local code."
)
FRAME_NOTE = "Drawn in the panel's local frame: x to the right, y up, origin at the lower-left corner."

# Drafting scales offered, 1:N (common practice, no source).
DRAWING_SCALES = (1, 2, 5, 10, 20, 25, 50, 100, 200, 250, 500, 1000, 2000, 2500, 5000, 10000)

MARGIN = 8.0  # sheet edge to content, paper mm
HEADING = 15.0  # heading band height
ROOM = 24.0  # space above and beside the panel for load arrows, support symbols and their labels
ROOM_BELOW = 16.0
LEGEND = 30.0  # legend band height
TITLE_BLOCK = 24.0
_MAX_PANEL_W = SHEET_WIDTH_MM - 2 * (MARGIN + ROOM)
_MAX_PANEL_H = 150.0

INK = "#1c1c1c"
DEFLECTED_INK = "#7a1f5c"  # plum: apart from both stress hues and from the black line work
FONT = "DejaVu Sans, Liberation Sans, Arial, sans-serif"


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


def tick_labels(ticks: np.ndarray, power: int = 0) -> list[str]:
    """Tick values as text, to the decimals their step needs, in units of 10**power, with a true minus."""
    step = abs(ticks[1] - ticks[0]) / 10.0**power if len(ticks) > 1 else 1.0
    decimals = max(0, -math.floor(math.log10(step) + 1e-9))
    return [f"{t / 10.0**power:.{decimals}f}".replace("-", "\u2212") for t in ticks]


SUPERSCRIPT = str.maketrans("-0123456789", "\u207b\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076\u2077\u2078\u2079")


def fmt(v: float, digits: int = 2) -> str:
    """Short decimal text for SVG coordinates."""
    text = f"{v:.{digits}f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def fmt_value(v: float) -> str:
    """A figure for people: three significant digits, no exponent for everyday sizes."""
    if v == 0:
        return "0"
    digits = max(0, 2 - int(math.floor(math.log10(abs(v)))))
    return f"{v:.{digits}f}"


def kilograms(kg: float) -> str:
    """A mass as a drafter writes it, never with an exponent: three significant figures below 100 kg (20.6 kg,
    0.534 kg), whole kilograms above (1210 kg)."""
    if kg == 0:
        return "0 kg"
    digits = max(0, 2 - int(math.floor(math.log10(abs(kg)))))
    text = f"{round(kg, digits):.{digits}f}"
    return (text.rstrip("0").rstrip(".") if "." in text else text) + " kg"


def polygon_path(xy: Iterable[Sequence[float]]) -> str:
    """Path data of a closed polygon through the points."""
    return "M" + "L".join(f"{fmt(x)} {fmt(y)}" for x, y in xy) + "Z"


def _ring_path(coords: np.ndarray) -> str:
    return "M" + " L".join(f"{fmt(x)},{fmt(y)}" for x, y in coords[:-1]) + " Z"


def polygons(geom) -> list[Polygon]:
    """The polygons of a shapely geometry (none for an empty one)."""
    if geom.is_empty:
        return []
    if isinstance(geom, Polygon):
        return [geom]
    if isinstance(geom, MultiPolygon):
        return list(geom.geoms)
    return [g for g in getattr(geom, "geoms", []) if isinstance(g, Polygon)]


def area_path(geom) -> str:
    """SVG path data for polygons with holes (draw with the even-odd rule)."""
    parts = []
    for poly in polygons(geom):
        parts.append(_ring_path(np.asarray(poly.exterior.coords)))
        parts.extend(_ring_path(np.asarray(r.coords)) for r in poly.interiors)
    return " ".join(parts)


def outline_path(outline) -> str:
    """SVG path data of a closed run of (x, y, bulge) vertices: straight sides as L, arcs as true arcs (A).

    The path is meant for a group in the local frame (y up). SVG's sweep flag 1 turns the arc towards increasing
    angle in the coordinates it is drawn in, which in the local frame is counter-clockwise: the sense of a
    positive bulge. The group's flip to paper turns both together, so the arc keeps its side.
    """
    v = np.asarray(outline, dtype=float)
    n = len(v)
    parts = [f"M{fmt(v[0, 0], 4)} {fmt(v[0, 1], 4)}"]
    for i in range(n):
        x1, y1 = v[(i + 1) % n, :2]
        b = v[i, 2]
        end = f"{fmt(x1, 4)} {fmt(y1, 4)}"
        if b == 0.0:
            if i < n - 1:
                parts.append(f"L{end}")
            continue
        chord = math.hypot(x1 - v[i, 0], y1 - v[i, 1])
        r = fmt(arc_radius(chord, b), 4)
        parts.append(f"A{r} {r} 0 {1 if abs(b) > 1.0 else 0} {1 if b > 0 else 0} {end}")
    return "".join(parts) + "Z"


class Figure:
    """A sheet being drawn: an svgwrite document with the panel placed at 1:N and named groups.

    ``layer(name)`` returns the group of that id in the panel's local frame (mm, y up), creating it on first
    use, stacked above the layers made before it. ``sheet_group(name)`` does the same in paper mm (y down).
    """

    def __init__(self, panel: Panel, *, legend_height: float = LEGEND, title_block: float = TITLE_BLOCK,
                 heading: float = HEADING, room: float = ROOM, room_below: float = ROOM_BELOW,
                 width: float | None = SHEET_WIDTH_MM):
        self.panel = panel
        self.scale = drawing_scale(panel.width_mm, panel.height_mm)
        self.panel_paper = (panel.width_mm / self.scale, panel.height_mm / self.scale)
        # width=None: just wide enough for the panel and its room (light sheets, such as layout frames).
        self.width = width if width is not None else self.panel_paper[0] + 2 * (MARGIN + room)
        top = MARGIN + heading + room
        # Centre the panel across the sheet; its lower-left corner is the local origin.
        self.origin = ((self.width - self.panel_paper[0]) / 2.0, top + self.panel_paper[1])
        self.legend_top = self.origin[1] + room_below
        self.title_top = self.legend_top + legend_height
        self.height = self.title_top + title_block + MARGIN
        self.dwg = svgwrite.Drawing(
            size=(f"{fmt(self.width)}mm", f"{fmt(self.height)}mm"), profile="full", debug=False
        )
        self.dwg.viewbox(0, 0, self.width, self.height)
        self.dwg.add(self.dwg.rect((0, 0), (self.width, self.height), fill="#ffffff", id="sheet"))
        k = 1.0 / self.scale
        self.drawing = self.dwg.g(
            id="drawing", transform=f"matrix({fmt(k, 9)} 0 0 {fmt(-k, 9)} {fmt(self.origin[0], 4)} "
            f"{fmt(self.origin[1], 4)})"
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

    def to_local(self, xy) -> np.ndarray:
        """Sheet positions (paper mm, y down) -> local points (mm, y up)."""
        p = np.asarray(xy, dtype=float)
        return np.stack([(p[..., 0] - self.origin[0]) * self.scale, (self.origin[1] - p[..., 1]) * self.scale], -1)

    def _group(self, parent, name: str, attrs: dict) -> svgwrite.container.Group:
        if name not in self._groups:
            group = self.dwg.g(id=name, **attrs)
            parent.add(group)
            self._groups[name] = group
        return self._groups[name]

    def layer(self, name: str, **attrs) -> svgwrite.container.Group:
        """The group ``name`` inside the drawing (local frame), created on first use."""
        return self._group(self.drawing, name, attrs)

    def sheet_group(self, name: str, **attrs) -> svgwrite.container.Group:
        """The group ``name`` on the sheet (paper mm), created on first use."""
        return self._group(self.dwg, name, attrs)

    def text(self, group, content: str, at, size: float, *, anchor: str = "start", weight: str = "normal",
             style: str = "normal", fill: str = INK, local: bool = False):
        """Upright text of ``size`` paper mm; ``at`` in paper mm, or in the local frame with ``local=True``."""
        if local:
            # Undo the drawing's flip and scale so the lettering stands upright at its paper size.
            s = self.scale
            element = lettering(self.dwg, content, (0, 0), size, anchor=anchor, weight=weight, style=style,
                                 fill=fill, transform=f"matrix({fmt(s, 6)} 0 0 {fmt(-s, 6)} {fmt(at[0])} "
                                 f"{fmt(at[1])})")
        else:
            element = lettering(self.dwg, content, at, size, anchor=anchor, weight=weight, style=style, fill=fill)
        group.add(element)
        return element

    def clip_path(self, name: str, geom) -> str:
        """A reference to the clip path ``name`` of ``geom`` (local frame, holes cut by the even-odd rule), made on
        first use."""
        if name not in self._groups:
            clip = self.dwg.defs.add(self.dwg.clipPath(id=name))
            clip.add(self.dwg.path(d=area_path(geom), clip_rule="evenodd"))
            self._groups[name] = clip
        return f"url(#{name})"

    def tostring(self) -> str:
        return self.dwg.tostring()


def lettering(dwg, content: str, at, size: float, *, anchor: str = "start", weight: str = "normal",
               style: str = "normal", fill: str = INK, transform: str | None = None):
    """A text element of ``size`` (font size in the units it is drawn in), not yet added to a group."""
    attrs = dict(font_size=fmt(size, 3), font_family=FONT, text_anchor=anchor, fill=fill, stroke="none")
    if weight != "normal":
        attrs["font_weight"] = weight
    if style != "normal":
        attrs["font_style"] = style
    if transform is not None:
        return dwg.text(content, insert=(0, 0), transform=transform, **attrs)
    return dwg.text(content, insert=(fmt(at[0], 3), fmt(at[1], 3)), **attrs)


def cased_text(fig: Figure, group, content: str, at, size: float, casing: float = 0.6, **kw):
    """Lettering over the underlay, on a paper-white casing (a stroked copy underneath) so it reads on any grey.

    A copy rather than ``paint-order``, which not every renderer honours. Lettering is set in paper units even
    inside the drawing (see :meth:`Figure.text`), so the casing's width is in paper mm."""
    under = fig.text(group, content, at, size, **{**kw, "fill": "#ffffff"})
    under.attribs.update({"stroke": "#ffffff", "stroke-width": fmt(casing, 3), "stroke-linejoin": "round",
                           "data-casing": "1"})
    return fig.text(group, content, at, size, **kw)


def checked_array(values, shape, name: str, grid, where: str = "result figure") -> np.ndarray:
    """The values as a float array of ``shape``, refused when the shape is wrong or a value not finite."""
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


def check_grid(panel: Panel, grid, where: str) -> None:
    """Refuse a grid that does not cover the panel's envelope."""
    if abs(grid.nx * grid.dx - panel.width_mm) > 1e-6 * panel.width_mm or abs(
        grid.ny * grid.dy - panel.height_mm
    ) > 1e-6 * panel.height_mm:
        raise LacunaError(
            f"the grid covers {grid.nx * grid.dx:g} x {grid.ny * grid.dy:g} mm but the panel is "
            f"{panel.width_mm:g} x {panel.height_mm:g} mm.",
            where=where,
            hint="Build the grid from this panel's envelope.",
        )


def draw_heading(fig: Figure, title: str, scale_note: str) -> None:
    """The sheet's title and, under it, the frame note and the scale."""
    g = fig.sheet_group("heading")
    title, size = fit(title, fig.width - 2 * MARGIN, 5.0)
    fig.text(g, title, (MARGIN, MARGIN + 5.0), size, weight="bold")
    note, size = fit(f"{FRAME_NOTE} {scale_note}", fig.width - 2 * MARGIN, 2.8)
    fig.text(g, note, (MARGIN, MARGIN + 10.5), size)


def _key_sample(fig: Figure, g, kind: str, style: dict | None, x: float, y: float) -> None:
    """One line-key sample, 8 mm wide, its middle at height ``y`` (paper mm)."""
    if kind == "line":
        g.add(fig.dwg.line(start=(fmt(x), fmt(y)), end=(fmt(x + 8.0), fmt(y)), **style))
    elif kind == "ticks":
        g.add(fig.dwg.line(start=(fmt(x), fmt(y)), end=(fmt(x + 3.5), fmt(y)),
                           stroke=palette.TENSION_INK, stroke_width="0.32", stroke_linecap="round"))
        g.add(fig.dwg.line(start=(fmt(x + 5.5), fmt(y - 1.5)), end=(fmt(x + 5.5), fmt(y + 1.5)),
                           stroke=palette.COMPRESSION_INK, stroke_width="0.32", stroke_linecap="round"))
    elif kind == "area":
        g.add(fig.dwg.rect((fmt(x + 0.4), fmt(y - 1.3)), (7.2, 2.6), rx="1.0", **style))
    elif kind == "cross":
        g.add(fig.dwg.path(d=f"M{fmt(x + 2.5)} {fmt(y)}h3M{fmt(x + 4.0)} {fmt(y - 1.5)}v3", fill="none",
                           **style))
    elif kind == "ring":
        g.add(fig.dwg.circle(center=(fmt(x + 4.0), fmt(y)), r="1.5", fill="none", **style))
    elif kind == "label":
        fig.text(g, "V1", (x + 4.0, y + 0.8), 2.3, anchor="middle", weight="bold", **(style or {}))


def draw_key(fig: Figure, g, x: float, top: float, rows, pitch: float = 4.2) -> None:
    """A line key: rows of (sample kind, sample style, label) from (x, top) down."""
    for r, (kind, style, label) in enumerate(rows):
        y = top + 2.0 + pitch * r
        _key_sample(fig, g, kind, style, x, y - 0.9)
        fig.text(g, label, (x + 10.0, y), 2.4)


def draw_scale_bar(fig: Figure, x0: float, y0: float) -> None:
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
        g.add(fig.dwg.rect((fmt(x0 + i * paper_len / parts, 3), fmt(y0, 3)), (fmt(paper_len / parts, 3), fmt(h)),
                           fill=INK if i % 2 == 0 else "#ffffff", stroke=INK, stroke_width="0.15"))
    fig.text(g, "0", (x0, y0 + h + 3.0), 2.4, anchor="middle")
    fig.text(g, f"{length_unit:g} {frame.unit}", (x0 + paper_len, y0 + h + 3.0), 2.4, anchor="middle")
    fig.text(g, f"scale 1:{fig.scale}", (x0 + paper_len + 6.0, y0 + h), 2.4)
    g.attribs["data-length"] = f"{length_unit:g} {frame.unit}"


def fit(text: str, width: float, size: float, smallest: float = 2.0) -> tuple[str, float]:
    """Shrink (then shorten) a line of text to fit ``width`` paper mm; a DejaVu Sans glyph averages ~0.6 em."""
    em = 0.6
    if len(text) * em * size <= width:
        return text, size
    size = max(smallest, width / (len(text) * em))
    keep = int(width / (em * size))
    return (text if len(text) <= keep else text[: max(1, keep - 1)].rstrip() + "\u2026"), size


def draw_title_block(fig: Figure, cells: Sequence[tuple[float, str, Sequence[str]]]) -> None:
    """Our title block: a ruled band across the sheet foot, cells of (width share, heading, lines) over a
    caution strip. The first line of the first cell (the panel's name) is set large."""
    g = fig.sheet_group("title", stroke=INK)
    x0, y0 = MARGIN, fig.title_top
    w, h = fig.width - 2 * MARGIN, TITLE_BLOCK
    g.add(fig.dwg.rect((fmt(x0), fmt(y0)), (fmt(w), fmt(h)), fill="none", stroke_width="0.5"))
    strip = 6.0
    g.add(fig.dwg.line(start=(fmt(x0), fmt(y0 + h - strip)), end=(fmt(x0 + w), fmt(y0 + h - strip)),
                       stroke_width="0.25"))
    x = x0
    for k, (share, head, lines) in enumerate(cells):
        cw = w * share
        if x > x0:
            g.add(fig.dwg.line(start=(fmt(x), fmt(y0)), end=(fmt(x), fmt(y0 + h - strip)), stroke_width="0.25"))
        fig.text(g, head, (x + 2.0, y0 + 3.6), 2.0, weight="bold", fill="#555555")
        for i, line in enumerate(lines):
            big = k == 0 and i == 0
            line, size = fit(line, cw - 4.0, 4.0 if big else 3.0)
            fig.text(g, line, (x + 2.0, y0 + (9.0 if big else 8.6) + i * 5.0), size, weight="bold" if big else "normal")
        x += cw
    fig.text(g, CAUTION, (x0 + 2.0, y0 + h - strip + 4.0), 2.7, style="italic")
    fig.text(g, "lacuna", (x0 + w - 2.0, y0 + h - strip + 4.0), 2.7, anchor="end", weight="bold")


def section_lines(panel: Panel) -> list[str]:
    """Thickness and size in the drawing's unit, like the sheet's other lengths (round-off dropped: 4.8, not
    4.800000000000001)."""
    f = panel.frame
    u = f.unit

    def n(mm: float) -> str:
        return f"{round(f.length_to_drawing(mm), 9):g}"

    return [f"thickness {n(panel.thickness_mm)} {u}", f"{n(panel.width_mm)} \u00d7 {n(panel.height_mm)} {u}"]


def date_text(date) -> str:
    """The date for a title block: the ISO date of ``date`` (a date or text), today's when None."""
    if date is None:
        date = _dt.date.today()
    return date.isoformat() if isinstance(date, _dt.date) else str(date)


def plot_sheet(width: float, height: float):
    """A blank plot sheet of ``width`` x ``height`` paper mm and two pens for it: ``group(name, **attrs)`` adds a
    group with that id, ``text(group, content, at, size, **kw)`` letters into a group."""
    dwg = svgwrite.Drawing(size=(f"{fmt(width)}mm", f"{fmt(height)}mm"), profile="full", debug=False)
    dwg.viewbox(0, 0, width, height)
    dwg.add(dwg.rect((0, 0), (width, height), fill="#ffffff", id="sheet"))

    def group(name, **attrs):
        return dwg.add(dwg.g(id=name, **attrs))

    def text(g, content, at, size, **kw):
        return g.add(lettering(dwg, content, at, size, **kw))

    return dwg, group, text
