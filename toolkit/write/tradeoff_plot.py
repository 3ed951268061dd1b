"""The trade-off plot of a sweep: compliance and largest deflection against the made mass, a line per profile."""

from __future__ import annotations

import math

import numpy as np

from .sheet import CAUTION, INK, MARGIN, SUPERSCRIPT, fit, fmt, nice_ticks, plot_sheet, tick_labels


# Colour-blind-safe line colours, one per profile: the qualitative set of Okabe and Ito ("Color universal design",
# 2008), which stays apart under the common colour-vision deficiencies; each line also has its own marker shape.
PROFILE_INKS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9")
_MARKERS = ("circle", "square", "triangle", "diamond", "circle", "square")


def _marker(dwg, shape: str, x: float, y: float, r: float, **style):
    if shape == "circle":
        return dwg.circle(center=(fmt(x, 3), fmt(y, 3)), r=fmt(r, 3), **style)
    if shape == "square":
        return dwg.rect((fmt(x - r * 0.9, 3), fmt(y - r * 0.9, 3)), (fmt(1.8 * r, 3), fmt(1.8 * r, 3)), **style)
    if shape == "triangle":
        pts = [(x, y - 1.2 * r), (x + 1.05 * r, y + 0.7 * r), (x - 1.05 * r, y + 0.7 * r)]
    else:
        pts = [(x, y - 1.2 * r), (x + 1.2 * r, y), (x, y + 1.2 * r), (x - 1.2 * r, y)]
    return dwg.polygon(points=[(round(a, 3), round(b, 3)) for a, b in pts], **style)


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
    dwg, group, text = plot_sheet(width, height)

    heading = group("heading")
    line, size = fit(title, width - 2 * MARGIN, 4.5)
    text(heading, line, (MARGIN, MARGIN + 4.5), size, weight="bold")
    text(heading, "Each point a whole job at one volume fraction (voids to make, rules proved); the knee ringed.",
         (MARGIN, MARGIN + 10.0), 2.6)
    legend = group("legend")
    lx = x0
    for i, name in enumerate(profiles):
        ink, shape = PROFILE_INKS[i % len(PROFILE_INKS)], _MARKERS[i % len(_MARKERS)]
        legend.add(dwg.line(start=(fmt(lx), fmt(MARGIN + 15.1)), end=(fmt(lx + 8), fmt(MARGIN + 15.1)),
                            stroke=ink, stroke_width="0.5"))
        legend.add(_marker(dwg, shape, lx + 4, MARGIN + 15.1, 0.9, fill=ink))
        label, _ = fit(name, 40.0, 2.5)
        text(legend, label, (lx + 10.0, MARGIN + 16.0), 2.5)
        lx += 12.0 + 0.6 * 2.5 * len(label) + 6.0
    legend.add(dwg.circle(center=(fmt(lx + 2), fmt(MARGIN + 15.1)), r="1.8", fill="none", stroke=INK,
                          stroke_width="0.35"))
    text(legend, "knee", (lx + 5.0, MARGIN + 16.0), 2.5)
    if any(r.get("dominated_by") is not None for r in rows):
        lx += 16.0
        legend.add(dwg.circle(center=(fmt(lx + 2), fmt(MARGIN + 15.1)), r="0.9", fill="white", stroke=INK,
                              stroke_width="0.35"))
        text(legend, "heavier and of more compliance than another point", (lx + 5.0, MARGIN + 16.0), 2.5)

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
        grid_lines = "".join(f"M{fmt(x0)} {fmt(py(t), 3)}H{fmt(x1)}" for t in yt[1:-1])
        grid_lines += "".join(f"M{fmt(px(t), 3)} {fmt(y0)}V{fmt(y1)}" for t in mt[1:-1])
        axes.add(dwg.path(d=grid_lines, stroke="#d9d9d9", stroke_width="0.15"))
        axes.add(dwg.rect((fmt(x0), fmt(y0)), (fmt(x1 - x0), fmt(y1 - y0))))
        labels = group(f"{name}-tick-labels")
        for t, label in zip(yt, tick_labels(yt, power)):
            axes.add(dwg.line(start=(fmt(x0 - 1.2), fmt(py(t), 3)), end=(fmt(x0), fmt(py(t), 3))))
            text(labels, label, (x0 - 2.0, py(t) + 0.9), 2.5, anchor="end")
        for t, label in zip(mt, tick_labels(mt)):
            axes.add(dwg.line(start=(fmt(px(t), 3), fmt(y1)), end=(fmt(px(t), 3), fmt(y1 + 1.2))))
            text(labels, label, (px(t), y1 + 4.2), 2.5, anchor="middle")
        text(labels, "made mass, kg" if mass_unit == "kg" else "made mass, % of the solid panel",
             ((x0 + x1) / 2, y1 + 9.0), 2.8, anchor="middle")
        shown = unit if power == 0 else f"10{str(power).translate(SUPERSCRIPT)} {unit}"
        text(labels, f"{words}, {shown}", (0, 0), 2.8, anchor="middle",
             transform=f"translate({fmt(x0 - 17.0)} {fmt((y0 + y1) / 2)}) rotate(-90)")
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
                # a point another beats on both counts (toolkit.sweep.dominated_by) drawn hollow
                look = {"fill": "white", "stroke": ink, "stroke_width": "0.35"} \
                    if r.get("dominated_by") is not None else {"fill": ink, "stroke": "none"}
                g.add(_marker(dwg, shape, x, y, 0.9, **look, **{"data-volume-fraction": f"{r['volume_fraction']:g}"}))
                # three figures, as the printed table gives them (0.9:0.4:4 runs 0.7333..., labelled 0.733)
                text(g, f"{float(r['volume_fraction']):.3g}", (x + 1.6, y - 1.4), 2.0, fill=ink)
                if r.get("knee"):
                    g.add(dwg.circle(center=(fmt(x, 3), fmt(y, 3)), r="1.8", fill="none", stroke=INK,
                                     stroke_width="0.35", id=f"{name}-knee-{i + 1}",
                                     **{"data-volume-fraction": f"{r['volume_fraction']:g}"}))

    foot = group("caution")
    missing = len(rows) - len(drawn)
    if missing:
        text(foot, f"{missing} of {len(rows)} points gave no figures (refused or failed): see the CSV.",
             (MARGIN, height - MARGIN - 3.0), 2.4, fill="#555555")
    note, size = fit(CAUTION, width - 2 * MARGIN, 2.4)
    text(foot, note, (MARGIN, height - MARGIN + 2.0), size, style="italic", fill="#555555")
    return dwg.tostring()
