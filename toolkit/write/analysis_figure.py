"""The analysis figure of one load case: the dominant principal stress, the principal directions, the deflected
shape, openings, supports and loads, with its legend, scale bar and title block, drawn at 1:N.

Inputs are plain arrays so the figure depends on no result type: displacements (ndof,) in mm, element-centre
stresses (ne, 3) = sx, sy, txy in MPa, solid area fractions (ne,).
"""

from __future__ import annotations

import datetime as _dt
import math

import numpy as np
import shapely

from ..errors import LacunaError
from ..fe.stress import principal_stresses
from ..model import Panel
from . import palette
from .fields import dominant_principal, draw_stress, draw_stress_bar, stress_limit
from .labels import Labels
from .sheet import (DEFLECTED_INK, INK, MARGIN, SHEET_WIDTH_MM, Figure, check_grid, checked_array, date_text,
                    draw_heading, draw_key, draw_scale_bar, draw_title_block, fmt, fmt_value, nice_125, polygon_path,
                    polygons, section_lines)
from .symbols import draw_loads, draw_outlines, draw_supports


_DEFLECTION_TARGET = 0.04  # largest drawn deflection as a share of the panel's smaller side


def deflection_scale_for(max_deflection_mm: float, width_mm: float, height_mm: float) -> float | None:
    """Magnification that draws the largest deflection as about 4 % of the panel's smaller side, on the 1-2-5
    series; None when there is nothing to magnify."""
    if not (max_deflection_mm > 0 and math.isfinite(max_deflection_mm)):
        return None
    return nice_125(_DEFLECTION_TARGET * min(width_mm, height_mm) / max_deflection_mm)


def _check_inputs(panel: Panel, grid, fractions, displacement, stress, case: str):
    ne = grid.nx * grid.ny
    ndof = 2 * (grid.nx + 1) * (grid.ny + 1)
    fractions = checked_array(fractions, (ne,), "fractions", grid, "analysis figure")
    displacement = checked_array(displacement, (ndof,), "displacement", grid, "analysis figure")
    stress = checked_array(stress, (ne, 3), "stress", grid, "analysis figure")
    check_grid(panel, grid, "analysis figure")
    if case not in panel.cases:
        raise LacunaError(
            f"load case {case!r} is not in this panel.",
            where="analysis figure",
            hint=f"Use one of: {', '.join(panel.cases)}.",
        )
    return fractions, displacement, stress


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
                f"M{fmt(cx[i] - dx[i])} {fmt(cy[i] - dy[i])}L{fmt(cx[i] + dx[i])} {fmt(cy[i] + dy[i])}"
            )
    group = fig.layer("directions", fill="none", stroke_linecap="round")
    for side, ink in ((palette.TENSION_NAME, palette.TENSION_INK), (palette.COMPRESSION_NAME, palette.COMPRESSION_INK)):
        if strokes[side]:
            d = "".join(strokes[side])
            # A pale casing keeps a tick legible on the dark fills at either end of the scale.
            group.add(fig.dwg.path(d=d, stroke="#ffffff", stroke_opacity="0.75", stroke_width=fmt(fig.paper(0.75), 4)))
            group.add(fig.dwg.path(d=d, stroke=ink, stroke_width=fmt(fig.paper(0.35), 4), **{"data-sign": side}))


def _draw_deflected(fig: Figure, grid, solid, displacement, magnification: float | None) -> None:
    g = fig.layer("deflected", fill="none", stroke=DEFLECTED_INK, stroke_width=fmt(fig.paper(0.45), 4),
                  stroke_linejoin="round")
    if magnification is None:
        return
    step = min(grid.dx, grid.dy)
    for poly in polygons(shapely.segmentize(solid, step)):
        for ring, kind in [(poly.exterior, "outline")] + [(r, "opening") for r in poly.interiors]:
            xy = np.asarray(ring.coords)
            moved = xy + magnification * interpolate_displacement(grid, displacement, xy)
            g.add(fig.dwg.path(d=polygon_path(moved[:-1]), **{"data-ring": kind}))


def _draw_legend(fig: Figure, vmax: float, peak_t: float, peak_c: float, magnification, umax: float) -> None:
    g = fig.sheet_group("legend")
    x0, top = MARGIN, fig.legend_top
    draw_stress_bar(fig, g, x0, top, vmax, peak_t, peak_c)
    # Line key and scale bar on the right of the band.
    kx = x0 + 120.0 + 12.0
    rows = [
        ("line", dict(stroke=INK, stroke_width="0.4"), "panel and openings as drawn"),
        ("line", dict(stroke=DEFLECTED_INK, stroke_width="0.45"),
         f"deflected shape drawn \u00d7 {magnification:g} (largest deflection {fmt_value(umax)} mm)"
         if magnification else "no deflection to draw"),
        ("line", dict(stroke=INK, stroke_width="0.3", stroke_dasharray="2 1"), "zone kept solid"),
        ("ticks", None, "principal directions, length by magnitude"),
    ]
    draw_key(fig, g, kx, top, rows)
    draw_scale_bar(fig, kx, top + 22.5)


def _material_lines(panel: Panel) -> list[str]:
    m = panel.material
    return [f"E = {m.E_MPa:g} MPa, \u03bd = {m.nu:g}", m.name]


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

    shown_date = date_text(date)

    fig = Figure(panel)
    solid = panel.solid
    draw_heading(fig, title or f"{panel.name}: stress and deflection, load case {case}",
                  f"Scale 1:{fig.scale} on a {SHEET_WIDTH_MM:g} mm wide sheet; lengths in {panel.frame.unit}.")
    draw_stress(fig, grid, drawn, dominant, vmax, solid)
    _draw_directions(fig, grid, fractions, stress, vmax)
    draw_outlines(fig, panel)
    _draw_deflected(fig, grid, solid, displacement, magnification)
    labels = Labels(fig)
    draw_supports(fig, panel, labels)
    draw_loads(fig, panel, case, labels)
    _draw_legend(fig, vmax, peak_t, peak_c, magnification, umax)
    draw_title_block(fig, [
        (0.34, "PANEL", [panel.name, f"load case: {case}"]),
        (0.26, "MATERIAL", _material_lines(panel)),
        (0.2, "SECTION", section_lines(panel)),
        (0.2, "FIGURE", [f"date {shown_date}", f"1:{fig.scale}, {int(drawn.sum())} elements"]),
    ])
    fig.drawing.attribs["data-stress-limit-MPa"] = f"{vmax:g}"
    if magnification:
        fig.drawing.attribs["data-deflection-scale"] = f"{magnification:g}"
    return fig.tostring()
