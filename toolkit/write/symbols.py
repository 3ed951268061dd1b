"""The panel's own line work on a sheet: its outline, openings and keep zones as drawn, and our symbols for
supports and loads, sized on paper."""

from __future__ import annotations

import numpy as np

from ..model import LineLoad, Panel, PointLoad, Support
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


def draw_supports(fig: Figure, panel: Panel) -> None:
    """Pin ("xy"): a solid wedge on a hatched ground line. Roller ("x" or "y"): an open wedge on two wheels,
    free to roll across the restrained direction. Wedges point at the panel along the restrained direction; a
    supported segment carries a row of them on one ground line."""
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


def _arrow(fig: Figure, group, tip, direction, length: float, heavy: bool = False) -> np.ndarray:
    """An arrow of ``length`` (local) ending at ``tip`` along unit ``direction``; returns its tail.

    Point loads are drawn heavy so they stand out of a row of line-load arrows."""
    p = fig.paper
    tail = tip - direction * length
    n = np.array([-direction[1], direction[0]])
    neck = tip - direction * p(3.0 if heavy else 2.0)
    extra = {"stroke_width": fmt(p(0.6), 4)} if heavy else {"stroke_width": fmt(p(0.25), 4)}
    group.add(fig.dwg.line(start=(fmt(tail[0]), fmt(tail[1])), end=(fmt(neck[0]), fmt(neck[1])), **extra))
    half = p(1.1 if heavy else 0.7)
    head = [tip, neck + n * half, neck - n * half]
    group.add(fig.dwg.path(d=polygon_path(head), fill=INK, stroke="none"))
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


def draw_loads(fig: Figure, panel: Panel, case: str) -> None:
    """The loads of one case: a heavy arrow and its figure for a point load, a row of arrows for a line load."""
    p = fig.paper
    g = fig.layer("loads", stroke=INK, stroke_width=fmt(p(0.35), 4))
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
            g.add(fig.dwg.line(start=(fmt(tails[0][0]), fmt(tails[0][1])),
                               end=(fmt(tails[-1][0]), fmt(tails[-1][1]))))
            # Beyond the left end of a lying row, or the top end of a standing one: clear of point loads arriving
            # mid-span and of supports at the foot of a wall.
            row = tails[-1] - tails[0]
            key = (lambda q: q[0]) if abs(row[0]) >= abs(row[1]) else (lambda q: -q[1])
            end, other = (tails[0], tails[-1]) if key(tails[0]) <= key(tails[-1]) else (tails[-1], tails[0])
            along = (end - other) / max(float(np.linalg.norm(end - other)), 1e-12)
            _label_at(fig, g, f"{size:.3g} kN/m", end + along * p(1.0), -along, gap=0.0)
