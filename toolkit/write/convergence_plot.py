"""The convergence plot: compliance and the volume fraction of the design region at each iteration."""

from __future__ import annotations

import math

import numpy as np

from ..errors import LacunaError
from . import palette
from .sheet import (CAUTION, DEFLECTED_INK, INK, MARGIN, SUPERSCRIPT, fit, fmt, nice_ticks, plot_sheet,
                    tick_labels)


VOLUME_INK = palette.STOPS[1][1]  # the stress scale's second teal: apart from the black compliance line
TARGET_INK = DEFLECTED_INK
TARGET_TOLERANCE = 0.005  # volume fraction within half a percentage point of the target counts as reached


# Share of a value axis's tick span left clear beyond each end tick of the convergence plot.
_AXIS_PAD = 0.05


def target_reached(volume_fraction, target: float, tolerance: float = TARGET_TOLERANCE) -> int | None:
    """Index of the first iteration whose volume fraction is within ``tolerance`` of the target or past it."""
    v = np.asarray(volume_fraction, dtype=float)
    if v.size == 0:
        return None
    side = np.sign(v[0] - target)
    hits = np.flatnonzero((np.abs(v - target) <= tolerance) | (np.sign(v - target) != side))
    return int(hits[0]) if hits.size else None


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
    dwg, group, text = plot_sheet(width, height)

    heading = group("heading")
    line, size = fit(title or "Convergence", width - 2 * MARGIN, 4.5)
    text(heading, line, (MARGIN, MARGIN + 4.5), size, weight="bold")
    text(heading, "Convergence: compliance and volume fraction of the design region at each iteration.",
         (MARGIN, MARGIN + 10.0), 2.6)

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
    grid_lines = "".join(f"M{fmt(x0)} {fmt(float(pc(t)), 3)}H{fmt(x1)}" for t in ct)
    grid_lines += "".join(f"M{fmt(float(px(t)), 3)} {fmt(y0)}V{fmt(y1)}" for t in xt[1:-1])
    axes.add(dwg.path(d=grid_lines, stroke="#d9d9d9", stroke_width="0.15"))
    axes.add(dwg.rect((fmt(x0), fmt(y0)), (fmt(x1 - x0), fmt(y1 - y0))))
    power = 3 * math.floor(math.log10(max(abs(ct[0]), abs(ct[-1]))) / 3) if max(abs(ct[0]), abs(ct[-1])) >= 1e4 else 0
    labels = group("tick-labels")
    for t, label in zip(ct, tick_labels(ct, power)):
        y = float(pc(t))
        axes.add(dwg.line(start=(fmt(x0 - 1.2), fmt(y, 3)), end=(fmt(x0), fmt(y, 3))))
        text(labels, label, (x0 - 2.0, y + 0.9), 2.5, anchor="end")
    for t, label in zip(vt, tick_labels(vt)):
        y = float(pv(t))
        axes.add(dwg.line(start=(fmt(x1), fmt(y, 3)), end=(fmt(x1 + 1.2), fmt(y, 3)), stroke=VOLUME_INK))
        text(labels, label, (x1 + 2.0, y + 0.9), 2.5, fill=VOLUME_INK)
    for t, label in zip(xt, tick_labels(xt)):
        x = float(px(t))
        axes.add(dwg.line(start=(fmt(x, 3), fmt(y1)), end=(fmt(x, 3), fmt(y1 + 1.2))))
        text(labels, label, (x, y1 + 4.2), 2.5, anchor="middle")
    text(labels, "iteration", ((x0 + x1) / 2, y1 + 9.0), 2.8, anchor="middle")
    unit = "N mm" if power == 0 else f"10{str(power).translate(SUPERSCRIPT)} N mm"
    mid = (y0 + y1) / 2
    text(labels, f"compliance, {unit}", (0, 0), 2.8, anchor="middle",
         transform=f"translate({fmt(x0 - 15.0)} {fmt(mid)}) rotate(-90)")
    text(labels, "volume fraction of the design region", (0, 0), 2.8, anchor="middle", fill=VOLUME_INK,
         transform=f"translate({fmt(x1 + 15.0)} {fmt(mid)}) rotate(90)")

    def polyline(name, ys, **style):
        pts = [(round(float(x), 3), round(float(y), 3)) for x, y in zip(px(iters), ys)]
        g = group(name, fill="none", stroke_linejoin="round", **style)
        g.add(dwg.polyline(points=pts, id=f"{name}-line", **{"data-iterations": str(n)}))
        if n == 1:  # a lone point draws no line: mark it
            g.add(dwg.circle(center=(fmt(float(px(1)), 3), fmt(float(ys[0]), 3)), r="0.6", fill=style["stroke"]))
        return g

    polyline("compliance", pc(c), stroke=INK, stroke_width="0.5")
    polyline("volume", pv(v), stroke=VOLUME_INK, stroke_width="0.45", stroke_dasharray="2.2 1")

    legend = group("legend")
    ly = y0 - 5.0
    legend.add(dwg.line(start=(fmt(x0), fmt(ly - 0.9)), end=(fmt(x0 + 8), fmt(ly - 0.9)), stroke=INK,
                        stroke_width="0.5"))
    text(legend, "compliance (left axis)", (x0 + 10.0, ly), 2.5)
    legend.add(dwg.line(start=(fmt(x0 + 48), fmt(ly - 0.9)), end=(fmt(x0 + 56), fmt(ly - 0.9)),
                        stroke=VOLUME_INK, stroke_width="0.45", stroke_dasharray="2.2 1"))
    text(legend, "volume fraction (right axis)", (x0 + 58.0, ly), 2.5, fill=VOLUME_INK)

    mark = group("target")
    k = target_reached(v, target) if target is not None else None
    if target is not None:
        yt = float(pv(target))
        mark.add(dwg.line(start=(fmt(x0), fmt(yt, 3)), end=(fmt(x1), fmt(yt, 3)), stroke=VOLUME_INK,
                          stroke_width="0.2", stroke_dasharray="0.6 0.8"))
        legend.add(dwg.circle(center=(fmt(x0 + 106), fmt(ly - 0.9)), r="1.1", fill="#ffffff", stroke=TARGET_INK,
                              stroke_width="0.35"))
        text(legend, f"target {target:g} reached" if k is not None else f"target {target:g} not reached",
             (x0 + 109.0, ly), 2.5, fill=TARGET_INK)
    if k is not None:
        xk, yk = float(px(k + 1)), float(pv(v[k]))
        mark.add(dwg.line(start=(fmt(xk, 3), fmt(y0)), end=(fmt(xk, 3), fmt(y1)), stroke=TARGET_INK,
                          stroke_width="0.2", stroke_dasharray="0.6 0.8"))
        mark.add(dwg.circle(center=(fmt(xk, 3), fmt(yk, 3)), r="1.1", fill="#ffffff", stroke=TARGET_INK,
                            stroke_width="0.35"))
        right = xk > (x0 + x1) / 2
        text(mark, f"iteration {k + 1}", (xk + (-1.2 if right else 1.2), y0 + 3.5), 2.4,
             anchor="end" if right else "start", fill=TARGET_INK)
        mark.attribs["data-iteration"] = str(k + 1)

    foot = group("caution")
    note, size = fit(CAUTION, width - 2 * MARGIN, 2.4)
    text(foot, note, (MARGIN, height - MARGIN + 2.0), size, style="italic", fill="#555555")
    return dwg.tostring()
