"""The panel's own line work on a sheet: its outline, openings and keep zones as drawn, and our symbols for
supports and loads, sized on paper."""

from __future__ import annotations

import numpy as np
import shapely

from ..model import LineLoad, Panel, PointLoad, Support
from .labels import Labels
from .sheet import INK, Figure, area_path, fmt, polygon_path


def draw_outlines(fig: Figure, panel: Panel) -> None:
    """The panel, its openings and its keep zones (dashed) as drawn."""
    width = fmt(fig.paper(0.4), 4)
    g = fig.layer("panel", fill="none", stroke=INK, stroke_width=width, stroke_linejoin="miter")
    g.add(fig.dwg.rect((0, 0), (fmt(panel.width_mm), fmt(panel.height_mm))))
    g = fig.layer("openings", fill="none", stroke=INK, stroke_width=width)
    for region in panel.openings:
        g.add(fig.dwg.path(d=area_path(region.shape), fill_rule="evenodd"))
    dash = f"{fmt(fig.paper(2.0), 4)} {fmt(fig.paper(1.0), 4)}"
    g = fig.layer("keep", fill="none", stroke=INK, stroke_width=fmt(fig.paper(0.3), 4), stroke_dasharray=dash)
    for region in panel.keep:
        g.add(fig.dwg.path(d=area_path(region.shape)))


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


def draw_supports(fig: Figure, panel: Panel, labels: Labels | None = None) -> None:
    """Pin ("xy"): a solid wedge on a hatched ground line. Roller ("x" or "y"): an open wedge on two wheels,
    free to roll across the restrained direction. Wedges point at the panel along the restrained direction; a
    supported segment carries a row of them on one ground line. ``labels``: lettering placed later keeps off
    the symbols."""
    p = fig.paper
    group = fig.layer("supports", stroke=INK, stroke_width=fmt(p(0.3), 4), stroke_linejoin="round")
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
            g.add(fig.dwg.path(d=polygon_path(wedge), fill=INK if pin else "#ffffff"))
            if not pin:
                for side in (-0.55, 0.55):
                    c = a + d * (h + p(0.75)) + t * side * w
                    g.add(fig.dwg.circle(center=(fmt(c[0]), fmt(c[1])), r=fmt(p(0.7), 4), fill="#ffffff"))
        ends = anchors[[0, -1]]
        ground = [ends[0] + d * base - t * p(2.6), ends[1] + d * base + t * p(2.6)]
        if np.dot(ground[1] - ground[0], t) < 0:
            ground = ground[::-1]
        if labels is not None:  # the wedges, wheels, ground line and hatching: all within this band
            labels.block(shapely.MultiPoint([*(anchors - t * w), *(anchors + t * w), ground[0], ground[1],
                                             ground[0] + d * p(1.2), ground[1] + d * p(1.2)]).convex_hull)
        g.add(fig.dwg.line(start=(fmt(ground[0][0]), fmt(ground[0][1])),
                           end=(fmt(ground[1][0]), fmt(ground[1][1])), stroke_width=fmt(p(0.45), 4)))
        if pin:
            length = np.linalg.norm(ground[1] - ground[0])
            hatch = []
            for s in np.arange(p(0.6), length, p(1.3)):
                q = ground[0] + t * s
                e = q + d * p(1.2) - t * p(1.0)
                hatch.append(f"M{fmt(q[0])} {fmt(q[1])}L{fmt(e[0])} {fmt(e[1])}")
            g.add(fig.dwg.path(d="".join(hatch), fill="none"))


def _arrow(fig: Figure, group, tip, direction, length: float, heavy: bool = False):
    """An arrow of ``length`` (local) ending at ``tip`` along unit ``direction``; returns its tail and its outline
    (shaft and head, local mm).

    Point loads are drawn heavy so they stand out of a row of line-load arrows."""
    p = fig.paper
    tail = tip - direction * length
    n = np.array([-direction[1], direction[0]])
    neck = tip - direction * p(3.0 if heavy else 2.0)
    width = p(0.6 if heavy else 0.25)
    group.add(fig.dwg.line(start=(fmt(tail[0]), fmt(tail[1])), end=(fmt(neck[0]), fmt(neck[1])),
                           stroke_width=fmt(width, 4)))
    half = p(1.1 if heavy else 0.7)
    head = [tip, neck + n * half, neck - n * half]
    group.add(fig.dwg.path(d=polygon_path(head), fill=INK, stroke="none"))
    outline = shapely.union(shapely.LineString([tail, neck]).buffer(width / 2.0), shapely.Polygon(head))
    return tail, outline


# A load's figure: lettering of this size (paper mm), set off the arrow by this much.
LOAD_SIZE = 2.6


def _beyond(fig: Figure, tail, direction, gap: float = 1.2) -> tuple[np.ndarray, str]:
    """The spot beyond an arrow's tail (paper ``gap``), set so the figure does not run back over the arrow:
    (baseline anchor point, text-anchor)."""
    p = fig.paper
    at = tail - direction * p(gap)
    anchor = "middle"
    if abs(direction[0]) > 0.5:
        anchor = "end" if direction[0] > 0 else "start"
    # Paper y grows downwards: lift the baseline for arrows pointing down onto the panel.
    shift = p(0.9) if direction[1] < -0.5 else (-p(2.6) if direction[1] > 0.5 else -p(0.9))
    return np.array([at[0], at[1] + shift]), anchor


def _load_spots(fig: Figure, tail, tip, direction, gap: float = 1.2) -> list[tuple[np.ndarray, str]]:
    """Where a load's figure may stand, best first: beyond the tail; beside the shaft near the tail, half way and
    near the head, either side; further beyond the tail."""
    p = fig.paper
    spots = [_beyond(fig, tail, direction, gap)]
    standing = abs(direction[1]) >= abs(direction[0])
    for t in (0.1, 0.5, 0.8):
        q = tail + (np.asarray(tip) - tail) * t
        if standing:  # level lettering left or right of the shaft, its middle on the shaft's point
            y = q[1] - 0.5 * (0.76 - 0.24) * p(LOAD_SIZE)
            spots += [(np.array([q[0] + p(1.5), y]), "start"), (np.array([q[0] - p(1.5), y]), "end")]
        else:  # above or below the shaft
            spots += [(np.array([q[0], q[1] + p(1.3)]), "middle"),
                      (np.array([q[0], q[1] - p(1.3) - 0.76 * p(LOAD_SIZE)]), "middle")]
    spots += [_beyond(fig, tail, direction, gap + step) for step in (3.0, 6.0)]
    return spots


def draw_loads(fig: Figure, panel: Panel, case: str, labels: Labels | None = None) -> None:
    """The loads of one case: a heavy arrow and its figure for a point load, a row of arrows for a line load.

    Each figure goes to the first spot, beyond the arrow's tail or beside it, where it covers no other label, no
    arrow, support or void that ``labels`` knows of, outside the panel where it can (its lettering is not cased);
    the arrows themselves are added to ``labels`` for the lettering placed after them."""
    p = fig.paper
    g = fig.layer("loads", stroke=INK, stroke_width=fmt(p(0.35), 4))
    labels = labels if labels is not None else Labels(fig)
    outside = labels.sheet.difference(shapely.box(0.0, 0.0, panel.width_mm, panel.height_mm))
    figures = []
    for load in panel.loads:
        if load.case != case:
            continue
        if isinstance(load, PointLoad):
            f = np.asarray(load.force_N, dtype=float)
            size = float(np.hypot(*f))
            if size == 0:
                continue
            tip = np.asarray(load.at, dtype=float)
            tail, outline = _arrow(fig, g, tip, f / size, p(17.0), heavy=True)
            labels.block(outline)
            figures.append((f"{size / 1000.0:.3g} kN", _load_spots(fig, tail, tip, f / size)))
        elif isinstance(load, LineLoad):
            w = np.asarray(load.intensity_N_per_mm, dtype=float)  # N/mm is kN/m
            size = float(np.hypot(*w))
            if size == 0:
                continue
            d = w / size
            a, b = np.asarray(load.start, dtype=float), np.asarray(load.end, dtype=float)
            n = max(2, int(round(np.linalg.norm(b - a) / p(7.0))) + 1)
            arrows = [_arrow(fig, g, a + s * (b - a), d, p(7.0)) for s in np.linspace(0.0, 1.0, n)]
            tails = [tail for tail, _ in arrows]
            for _, outline in arrows:
                labels.block(outline)
            g.add(fig.dwg.line(start=(fmt(tails[0][0]), fmt(tails[0][1])),
                               end=(fmt(tails[-1][0]), fmt(tails[-1][1]))))
            labels.block(shapely.LineString([tails[0], tails[-1]]).buffer(p(0.2)))
            # Beyond the left end of a lying row, or the top end of a standing one: clear of point loads arriving
            # mid-span and of supports at the foot of a wall; else beyond the other end, or over the row's middle.
            row = tails[-1] - tails[0]
            key = (lambda q: q[0]) if abs(row[0]) >= abs(row[1]) else (lambda q: -q[1])
            end, other = (tails[0], tails[-1]) if key(tails[0]) <= key(tails[-1]) else (tails[-1], tails[0])
            along = (end - other) / max(float(np.linalg.norm(end - other)), 1e-12)
            middle = (end + other) / 2.0
            figures.append((f"{size:.3g} kN/m", [_beyond(fig, end + along * p(1.0), -along, gap=0.0),
                                                  _beyond(fig, other - along * p(1.0), along, gap=0.0),
                                                  _beyond(fig, middle, d, gap=1.0),
                                                  _beyond(fig, middle, d, gap=4.0)]))
    # Placed once every arrow of the case is known, so no figure lands on an arrow drawn after it.
    for text, spots in figures:
        at, anchor = labels.place(text, LOAD_SIZE, spots, prefer=outside)
        fig.text(g, text, (at[0], at[1]), LOAD_SIZE, anchor=anchor, local=True)
