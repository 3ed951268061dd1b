"""The result sheet: the voids to make over an underlay, at 1:N, one group per output layer of CONTRACT.md.

The sheet a shop makes from (underlay "made"): the panel as it will be made, material grey and the voids cut
through, ordinate dimensions from the datum at the lower-left corner to each void's centre. The same function with
the "density" underlay draws the optimiser's layout (its freeform voids under the voids to make), and with
"stress" the stress with the voids cut. The layers' colours are the drawing copy's (:mod:`.layers`).
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Iterable, Sequence

import numpy as np
import shapely

from ..errors import LacunaError
from ..fe.fractions import solid_fractions
from ..model import Panel, PointLoad, Void
from . import palette, shapes
from .fields import (SHOWN, VOID_FILL, density_classes, density_colours, dominant_principal, draw_cells,
                     draw_density_bar, draw_stress, draw_stress_bar, material_state, stress_limit)
from .labels import Labels, text_box
from .layers import DIM, LOOKS, VOID_LAYERS
from .ordinates import ordinate_features, ordinate_text, spread
from .sheet import (INK, MARGIN, ROOM, ROOM_BELOW, Figure, area_path, cased_text, check_grid, checked_array,
                    date_text, draw_heading, draw_key, draw_scale_bar, draw_title_block, fmt, kilograms, lettering,
                    outline_path, polygon_path, polygons, section_lines)
from .symbols import draw_loads, draw_outlines, draw_supports


# The output layers of CONTRACT.md in drawing order, and what draws on each.
RESULT_LAYERS = tuple(look.name.lower() for look in LOOKS)
_LOOK = {look.name.lower(): look for look in LOOKS}
_VOID_GROUP = {family: name.lower() for family, name in VOID_LAYERS.items()}
_DIM_GROUP = DIM.lower()


def _exact(v: float) -> str:
    """Shortest text that reads back as exactly the same float (bore radii must equal the drawing's)."""
    text = repr(float(v))
    return text[:-2] if text.endswith(".0") else text


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
    """A check marker from a :class:`toolkit.rules.check.Violation`, a :class:`~toolkit.write.shapes.Marker` or a
    check-JSON mapping."""
    if hasattr(item, "to_json") and hasattr(item, "rule"):
        item = item.to_json()
    return shapes.as_marker(item, k)


# Void ids on the sheet: lettering of this size (paper mm), bold.
LABEL_SIZE = 2.3
# An id outside its void with no leader stands at most this share of its distance to any other void or opening
# from its own void: a house choice, no source. Measured 2026-12-04 on a precast lintel of our own: two ids
# 0.88 and 0.95 as far from their voids as from a duct opening and a pipe sleeve read as the openings' labels.
LABEL_NEARER = 0.5


def _drawn_blocked(fig: Figure, voids: Sequence[Void]) -> Labels:
    """A placer for the sheet keeping lettering and leaders off the voids (each void's own id may stand in it) and
    off the panel's openings."""
    labels = Labels(fig)
    for void in voids:
        labels.block(void.shape, owner=void.id)
    for opening in fig.panel.openings:
        labels.block(opening.shape)
    return labels


def label_box(fig: Figure, text: str, at, size: float):
    """The box (local mm) a void id of ``size`` paper mm started at ``at`` (its baseline) covers."""
    return text_box(fig, text, at, size, bold=True)


def _label_spots(fig: Figure, voids: Sequence[Void], size: float, labels: Labels | None = None):
    """Where each void's id goes so that no two ids overlap, and no id covers another void, or what ``labels``
    already holds (the loads' arrows and figures, supports, ordinates; by default the voids and openings): inside
    the void, above its centre cross (or below, right or left of it), when it fits with room to spare; else just
    outside it in the first of sixteen directions (up-right first) that is clear; further out with a leader line
    (itself crossing no other void or label) when none is; in a crowd that leaves no such spot, further out still
    with a leader that may cross another void's outline but no label. An id just outside its void with no leader
    stands at most ``LABEL_NEARER`` as far from its own void as from any other void or opening (about as near to
    another, a reader takes it for that one's). Returns [(baseline start (local mm), leader segment or None)] in
    ``voids`` order."""
    p = fig.paper
    panel = fig.panel
    if labels is None:
        labels = _drawn_blocked(fig, voids)
    # Ids stay inside the panel, clear of the edge band where arrows and bearing marks stand.
    inner = shapely.box(0.0, 0.0, panel.width_mm, panel.height_mm).buffer(-p(1.0), join_style="mitre")
    # A point load's arrow and its figure stand at its point: ids keep a square of 12 paper mm clear round it.
    for load in panel.loads:
        if isinstance(load, PointLoad):
            inner = inner.difference(shapely.Point(load.at).buffer(p(12.0), cap_style="square"))
    # Eight directions, up-right first, then the eight between them.
    dirs = [(math.cos(a), math.sin(a)) for a in np.radians([45, 135, 0, 180, 90, 270, 315, 225,
                                                            22.5, 67.5, 112.5, 157.5, 202.5, 247.5, 292.5, 337.5])]
    fine = [(math.cos(a), math.sin(a)) for a in np.radians(np.arange(0.0, 360.0, 15.0))]
    gap = labels.gap
    drawn = np.array([v.shape for v in voids] + [o.shape for o in panel.openings], dtype=object)
    out = []
    for k, void in enumerate(voids):
        others = np.delete(drawn, k)
        box0 = label_box(fig, void.id, (0.0, 0.0), size)
        w = box0.bounds[2]
        h = box0.bounds[3] - box0.bounds[1]
        below = -box0.bounds[1]  # the baseline stands this far above the box's foot
        c = np.asarray(void.centre, dtype=float)

        # Inside, above the centre cross (else below, right or left of it), when the void holds the box with a
        # margin.
        cross = min(p(1.5), 0.35 * void.size_mm) + p(0.5)
        core = void.shape.buffer(-gap)
        inside = None
        for at in (c + (-w / 2.0, cross + below), c + (-w / 2.0, -cross - h + below),
                   c + (cross, below - 0.5 * h), c + (-cross - w, below - 0.5 * h)):
            box = label_box(fig, void.id, at, size)
            if core.covers(box) and labels.clear(box, own=void.id, within=inner):
                inside = at
                break
        if inside is not None:
            labels.take(box)
            out.append((inside, None))
            continue
        placed = None
        reach = 0.5 * float(max(void.length_mm, void.size_mm)) + gap
        # First with leaders that cross nothing; where a crowd leaves no such spot, a leader may cross another
        # void's outline (never a label), and the search goes further out, in finer steps.
        for rings, steps, strict in (((1.0, 2.0, 3.5, 5.0, 7.0, 9.0), dirs, True),
                                     ((2.0, 3.5, 5.0, 7.0, 9.0, 12.0, 15.0), fine, False)):
            for ring in rings:
                for dx, dy in steps:
                    # the box's nearest corner (or edge middle) in the direction faces the void
                    ox = 0.0 if dx > 0.3 else (-w if dx < -0.3 else -w / 2.0)
                    oy = below if dy > 0.3 else (below - h if dy < -0.3 else below - 0.5 * h)
                    point = c + reach * ring * np.array([dx, dy])
                    at = point + (ox, oy)
                    box = label_box(fig, void.id, at, size)
                    leader = None if ring == 1.0 else (_towards(void.shape, point), point)
                    line = None if leader is None else shapely.LineString(leader)
                    # a leader may touch its own void only at its foot
                    if line is not None and line.length > 0 and line.interpolate(gap).within(void.shape):
                        continue
                    clear_line = None if line is None else line.difference(void.shape.buffer(gap))
                    if not labels.clear(box, within=inner, leader=clear_line if strict else None):
                        continue
                    if not strict and any(clear_line.intersects(t) for t in labels.taken):
                        continue
                    if leader is None and len(others) and \
                            box.distance(void.shape) > LABEL_NEARER * float(shapely.distance(box, others).min()):
                        continue  # about as near another void or an opening, with nothing pointing home
                    placed = (at, leader)
                    break
                if placed is not None:
                    break
            if placed is not None:
                break
        if placed is None:  # nowhere clear: the first spot outside, as before
            at = _void_label_anchor(void) + p(0.6)
            placed = (at, None)
        labels.take(label_box(fig, void.id, placed[0], size))
        out.append(placed)
    return out


def _towards(shape, point) -> np.ndarray:
    """The point of ``shape``'s outline nearest ``point`` (a leader's foot)."""
    line = shapely.shortest_line(shape.boundary, shapely.Point(point))
    return shapely.get_coordinates(line)[0]


def _looks() -> dict[str, str]:
    return {name: palette.rgb_to_hex(np.asarray(look.rgb) / 255.0) for name, look in _LOOK.items()}


def _result_groups(fig: Figure) -> dict:
    """The CONTRACT.md output layers, each a group (present even when empty, so a viewer can toggle it), stacked
    in the contract's order."""
    p = fig.paper
    looks = _looks()
    bold, thin = fmt(p(0.6), 4), fmt(p(0.25), 4)
    g = {}
    for name in RESULT_LAYERS:
        look = _LOOK[name]
        if name == "lacuna-freeform":
            attrs = dict(fill="none", stroke=looks[name], stroke_width=thin, stroke_linejoin="round",
                         stroke_dasharray=f"{fmt(p(1.6), 4)} {fmt(p(0.8), 4)}")
        elif name in _VOID_GROUP.values():
            attrs = dict(fill=VOID_FILL, stroke=looks[name], stroke_width=bold, stroke_linejoin="round")
        elif name == "lacuna-centre":
            attrs = dict(fill="none", stroke=looks[name], stroke_width=fmt(p(0.18), 4))
        elif name == "lacuna-check":
            attrs = dict(fill="none", stroke=looks[name], stroke_width=fmt(p(0.35), 4))
        elif name == _DIM_GROUP:
            attrs = dict(fill="none", stroke=looks[name], stroke_width=fmt(p(0.15), 4))
        else:
            attrs = {}
        g[name] = fig.layer(name, **attrs, **{"data-layer": look.name})
    return g


def _draw_result_layers(fig: Figure, g: dict, voids: Sequence[Void], freeform, markers, labels: Labels) -> None:
    """The voids to make, freeform outlines, centre crosses, void ids (clear of what ``labels`` holds) and rule
    markers into the output layers' groups ``g``."""
    p = fig.paper
    looks = _looks()
    for ring in shapes.freeform_rings(freeform):
        g["lacuna-freeform"].add(fig.dwg.path(d=polygon_path(ring)))
    for void in voids:
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
            d=f"M{fmt(cx - half)} {fmt(cy)}h{fmt(2 * half)}M{fmt(cx)} {fmt(cy - half)}v{fmt(2 * half)}", **tag))
    spots = _label_spots(fig, voids, LABEL_SIZE, labels)
    for void, (at, leader) in zip(voids, spots):
        if leader is not None:
            g["lacuna-note"].add(fig.dwg.line(start=(fmt(leader[0][0]), fmt(leader[0][1])),
                                              end=(fmt(leader[1][0]), fmt(leader[1][1])),
                                              stroke=looks["lacuna-note"], stroke_width=fmt(p(0.15), 4),
                                              **{"data-void-id": void.id, "data-leader": "1"}))
        label = cased_text(fig, g["lacuna-note"], void.id, (at[0], at[1]), LABEL_SIZE, weight="bold",
                            fill=looks["lacuna-note"], local=True)
        label.attribs["data-void-id"] = void.id
    for m, (r, at, anchor) in zip(markers, _marker_spots(fig, markers, labels)):
        x, y = m.where
        g["lacuna-check"].add(fig.dwg.circle(center=(fmt(x), fmt(y)), r=fmt(r, 4)))
        cased_text(fig, g["lacuna-check"], m.label, (at[0], at[1]), MARKER_SIZE, casing=0.4, anchor=anchor,
                    fill=looks["lacuna-check"], local=True)


MARKER_SIZE = 1.8  # paper mm: a rule marker's label, smaller than a void id


def _marker_spots(fig: Figure, markers, labels: Labels) -> list:
    """(ring radius, baseline anchor point, text-anchor) of each rule marker's label (local mm), by the sheet's one
    label placer: every ring kept clear first, then each label beside its ring, up-right where that is clear of
    the void ids, load figures, voids and the other markers' rings and labels, else down-right, up-left,
    down-left, right, left, above or below; where none is, the first of those clear of the other labels (a marker
    stands on a void's edge, so its label may have to cross an outline); up-right when none is."""
    p = fig.paper
    rings = []
    for m in markers:
        r = m.radius_mm if m.radius_mm is not None else p(2.5)
        rings.append(r)
        labels.block(shapely.Point(m.where).buffer(r, quad_segs=8))
    h = p(MARKER_SIZE) * 0.7
    out = []
    for m, r in zip(markers, rings):
        x, y = m.where
        d, gap = r * math.sqrt(0.5) + p(0.5), r + p(0.5)
        spots = [((x + d, y + d), "start"), ((x + d, y - d - h), "start"), ((x - d, y + d), "end"),
                 ((x - d, y - d - h), "end"), ((x + gap, y - h / 2), "start"), ((x - gap, y - h / 2), "end"),
                 ((x, y + gap), "middle"), ((x, y - gap - h), "middle")]
        at, anchor = labels.place(m.label, MARKER_SIZE, spots, loose=True)
        out.append((r, at, anchor))
    return out


def _layer_key_rows(leave_out: tuple[str, ...] = ()) -> list:
    """The line key of the result sheets: the panel's lines and each output layer (less ``leave_out``: layers
    with nothing on the sheet; "keep" for a panel with no zone kept solid)."""
    looks = _looks()
    rows = [("line", dict(stroke=INK, stroke_width="0.4"), "panel and openings as drawn")]
    if "keep" not in leave_out:
        rows.append(("line", dict(stroke=INK, stroke_width="0.3", stroke_dasharray="2 1"), "zone kept solid"))
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
        elif name == _DIM_GROUP:
            sample = ("line", dict(stroke=colour, stroke_width="0.15"))
        else:
            sample = ("ring", dict(stroke=colour, stroke_width="0.35"))
        rows.append((*sample, f"{look.description} \u2014 layer {look.name}"))
    return rows


_RESULT_LEGEND = 44.0

# Paper room (mm) under the panel for the x ordinates, below the support symbols.
_ORDINATE_BAND = 16.0
_ORDINATE_SIZE = 2.0


def _ordinate_run(values: np.ndarray, low: float, high: float, pitch: float) -> tuple[np.ndarray, float]:
    """Where the lettering of a run of ordinates stands, between ``low`` and ``high`` (local mm), and its size
    (paper mm): ``_ORDINATE_SIZE`` ``pitch`` apart, smaller and closer where the room cannot hold them all."""
    size = _ORDINATE_SIZE
    if len(values) > 1 and (len(values) - 1) * pitch > high - low:
        size *= (high - low) / ((len(values) - 1) * pitch)
    return spread(values, pitch, low=low, high=high), size


def _draw_ordinates(fig: Figure, g, voids: Sequence[Void], labels: Labels) -> None:
    """Ordinate dimensions of every void's centre from the datum (the panel's lower-left corner, local 0, 0) into
    the group ``g`` (layer LACUNA-DIM): x values along a line under the panel, y values up a line left of it, each
    with a tick at the true position and a jogged leader to its lettering where neighbours crowd it. Values in
    the drawing's unit as the drawing copy states them (:mod:`.ordinates`); a centre shared by several voids is
    written once. The lettering keeps to the sheet's room beside the panel (a long run is set smaller rather than
    into the heading or off the sheet). The lines and lettering are added to ``labels``."""
    if not voids:
        return
    p = fig.paper
    f = fig.panel.frame
    colour = _looks()[_DIM_GROUP]
    s = fig.scale
    pitch = p(_ORDINATE_SIZE * 1.25)
    # x ordinates: a datum line below the support symbols, values written upright-turned (reading up), from the
    # datum to the room right of the panel.
    base = -p(ROOM_BELOW - 2.0)
    xs = np.array([value for value, _ in ordinate_features(voids, 0, f)])
    where, size = _ordinate_run(xs, 0.0, fig.panel.width_mm + p(ROOM - 4.0), pitch)
    g.add(fig.dwg.line(start=(fmt(0), fmt(base)), end=(fmt(fig.panel.width_mm), fmt(base))))
    longest = 0.0
    for x, at in zip(xs, where):
        label = ordinate_text(f, x)
        g.add(fig.dwg.path(d=f"M{fmt(x)} {fmt(base)}v{fmt(-p(1.2))}L{fmt(at)} {fmt(base - p(3.0))}"
                           f"v{fmt(-p(0.6))}", **{"data-ordinate": f"x {label}"}))
        g.add(lettering(fig.dwg, label, (0, 0), size, anchor="end", fill=colour,
                         transform=f"matrix(0 {fmt(s, 6)} {fmt(s, 6)} 0 {fmt(at + 0.35 * p(size))} "
                                   f"{fmt(base - p(4.0))})"))
        longest = max(longest, text_box(fig, label, (0.0, 0.0), size).bounds[2])
    # The band the x ordinates fill, from the datum line down past the longest value.
    labels.block(shapely.box(min(0.0, where[0]) - p(1.0), base - p(4.0) - longest - p(0.5),
                             max(fig.panel.width_mm, where[-1]) + p(1.0), base + p(0.2)))
    # y ordinates: a datum line left of the panel, beyond the support symbols, values written level, from the
    # foot of the x ordinates' band to under the heading.
    side = -p(ROOM - 6.0)
    ys = np.array([value for value, _ in ordinate_features(voids, 1, f)])
    where, size = _ordinate_run(ys, -p(ROOM_BELOW + _ORDINATE_BAND - 4.0), fig.panel.height_mm + p(ROOM - 3.0),
                                pitch)
    g.add(fig.dwg.line(start=(fmt(side), fmt(0)), end=(fmt(side), fmt(fig.panel.height_mm))))
    longest = 0.0
    for y, at in zip(ys, where):
        label = ordinate_text(f, y)
        g.add(fig.dwg.path(d=f"M{fmt(side)} {fmt(y)}h{fmt(-p(1.2))}L{fmt(side - p(3.0))} {fmt(at)}"
                           f"h{fmt(-p(0.6))}", **{"data-ordinate": f"y {label}"}))
        fig.text(g, label, (side - p(4.2), at - 0.35 * p(size)), size, anchor="end", fill=colour, local=True)
        longest = max(longest, text_box(fig, label, (0.0, 0.0), size).bounds[2])
    labels.block(shapely.box(side - p(4.2) - longest - p(0.5), min(0.0, where[0]) - p(1.2),
                             side + p(0.2), max(fig.panel.height_mm, where[-1]) + p(1.2)))
    # The datum: a circle with a cross at the corner.
    r = p(1.2)
    g.add(fig.dwg.circle(center=(0, 0), r=fmt(r), **{"data-datum": "1"}))
    g.add(fig.dwg.path(d=f"M{fmt(-r)} 0h{fmt(2 * r)}M0 {fmt(-r)}v{fmt(2 * r)}"))


def _draw_result_legend(fig: Figure, underlay: str, stress_range, empty: tuple[str, ...] = ()) -> None:
    g = fig.sheet_group("legend")
    x0, top = MARGIN, fig.legend_top
    if underlay == "density":
        draw_density_bar(fig, g, x0, top)
    elif underlay == "stress":
        draw_stress_bar(fig, g, x0, top, *stress_range)
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
    draw_scale_bar(fig, x0, top + 29.0)
    # The sheet a shop makes from shows no freeform outlines, the others no ordinates: a key lists what is drawn.
    leave_out = ("lacuna-freeform",) if underlay == "made" else (_DIM_GROUP,)
    draw_key(fig, g, x0 + 132.0, top, _layer_key_rows(leave_out + empty), pitch=4.3)


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
    (rule checks: Violation values, check-JSON mappings or Markers of write.shapes) ringed. ``underlay`` is "density"
    (the optimised material state of ``densities`` (ne,) in greys; nothing when no densities are given),
    "stress" (``stress`` (ne, 3) sx, sy, txy in MPa, drawn as on the analysis figure) or "none". The title block
    names the panel, profile, the volume removed and the date, over the caution.
    """
    if underlay not in _UNDERLAYS:
        raise LacunaError(f"unknown underlay {underlay!r}.", where="result figure",
                          hint=f"Use one of: {', '.join(_UNDERLAYS)}.")
    voids = list(voids)
    for void in voids:
        shapes.check_void(void)
    markers = [_as_marker(m, k) for k, m in enumerate(violations)]
    ne = grid.nx * grid.ny
    check_grid(panel, grid, "result figure")
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
        stress = checked_array(stress, (ne, 3), "stress", grid)
        # The stress belongs to the panel with the voids to make cut: draw that material, not the optimiser's.
        if voids:
            solid = shapely.difference(solid, shapely.union_all([v.shape for v in voids]))
        drawn = solid_fractions(grid, solid) > 0.0
        dominant = dominant_principal(stress)
        shown = dominant[drawn]
        vmax = stress_limit(shown)
        stress_range = (vmax, float(shown.max()) if shown.size else 0.0, float(shown.min()) if shown.size else 0.0)

    fig = Figure(panel, legend_height=_RESULT_LEGEND,
                 room_below=ROOM_BELOW + (_ORDINATE_BAND if underlay == "made" else 0.0))
    what = {"density": "under them the optimised layout", "stress": "under them the stress with the voids cut",
            "none": "over the panel as drawn",
            "made": "cut through the panel"}[underlay]
    draw_heading(fig, title or f"{panel.name}: voids to make",
                  f"Scale 1:{fig.scale}; lengths in {panel.frame.unit}; voids to make {what}.")
    if underlay == "made":
        made = shapely.difference(solid, shapely.union_all([v.shape for v in voids])) if voids else solid
        g = fig.layer("made", fill=MADE_FILL, stroke="none")
        for poly in polygons(made):
            g.add(fig.dwg.path(d=area_path(poly), fill_rule="evenodd"))
    elif underlay == "density":
        draw_cells(fig, "density", grid, density_classes(state), state >= SHOWN, density_colours(), solid)
    elif underlay == "stress":
        draw_stress(fig, grid, drawn, dominant, stress_range[0], solid)
        fig.drawing.attribs["data-stress-limit-MPa"] = f"{stress_range[0]:g}"
    draw_outlines(fig, panel)
    groups = _result_groups(fig)
    # One placer for every label: the loads' figures keep off the voids, ordinates and supports; the void ids
    # then keep off all of that and the loads' arrows and figures.
    labels = _drawn_blocked(fig, voids)
    if underlay == "made":
        _draw_ordinates(fig, groups[_DIM_GROUP], voids, labels)
    draw_supports(fig, panel, labels)
    for case in panel.cases:
        draw_loads(fig, panel, case, labels)
    _draw_result_layers(fig, groups, voids, freeform, markers, labels)
    # The key lists what the sheet shows: a layer with nothing on it (no slots, no rule markers) keeps its group,
    # so a viewer can still toggle it, but gets no row.
    empty = tuple(n for n, grp in groups.items() if not grp.elements) + (() if panel.keep else ("keep",))
    _draw_result_legend(fig, underlay, stress_range, empty=empty)
    removed = "volume removed: not stated"
    if volume_removed_percent is not None:
        removed = f"volume removed {volume_removed_percent:.1f} %"
        if mass_removed_kg is not None:
            removed += f" ({kilograms(mass_removed_kg)})"
    draw_title_block(fig, [
        (0.3, "PANEL", [panel.name, f"profile: {profile}" if profile else "profile: not stated"]),
        (0.3, "VOIDS", [_void_count_text(voids), removed]),
        (0.2, "SECTION", section_lines(panel)),
        (0.2, "FIGURE", [f"date {date_text(date)}",
                         f"1:{fig.scale}, {len(markers)} rule marker{'' if len(markers) == 1 else 's'}"]),
    ])
    fig.drawing.attribs["data-underlay"] = underlay
    return fig.tostring()
