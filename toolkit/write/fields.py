"""The coloured fields drawn under the line work, with their colour bars: the dominant principal stress on the
project's diverging scale (:mod:`.palette`), and the material state of the optimised layout in greys.

Both fill the grid's elements by class, a row's neighbours of one class merged into one run, clipped to the
panel's solid outline so openings are cut exactly.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from ..fe.fractions import solid_fractions
from ..fe.stress import principal_stresses
from ..model import Panel
from . import palette
from .sheet import INK, Figure, checked_array, fmt, fmt_value, nice_ceil, polygon_path


STRESS_CLASSES_PER_SIDE = 10


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


def draw_cells(fig: Figure, name: str, grid, classes, drawn, colours: Sequence[str], solid) -> None:
    """Elements filled by colour class, a row's neighbours of one class merged, clipped to the solid outline."""
    group = fig.layer(name, clip_path=fig.clip_path("panel-solid", solid))
    # Cells in element units: integer path data keeps a 20,000-element panel small.
    cells = fig.dwg.g(transform=f"scale({fmt(grid.dx, 6)} {fmt(grid.dy, 6)})", shape_rendering="crispEdges")
    group.add(cells)
    for c, runs in sorted(stress_runs(classes, drawn, grid.nx, grid.ny).items()):
        d = "".join(f"M{ix} {iy}h{n}v1h-{n}z" for ix, iy, n in runs)
        cells.add(fig.dwg.path(d=d, fill=colours[c], **{"data-class": str(c)}))


def draw_stress(fig: Figure, grid, drawn, dominant, vmax, solid) -> None:
    """The dominant principal stress of the drawn elements in the classes of the diverging scale."""
    classes = palette.classify(dominant, vmax, STRESS_CLASSES_PER_SIDE)
    draw_cells(fig, "stress", grid, classes, drawn, palette.class_colours(STRESS_CLASSES_PER_SIDE), solid)


def draw_stress_bar(fig: Figure, g, x0: float, top: float, vmax: float, peak_t: float, peak_c: float) -> None:
    """The stress colour bar with its heading, side labels, ticks and the peaks, 120 mm wide from (x0, top)."""
    bar_w, bar_h = 120.0, 5.0
    bar_y = top + 9.0
    fig.text(g, "Dominant principal stress, MPa (the principal of larger magnitude, with its sign)", (x0, top + 2.5),
             2.8, weight="bold")
    fig.text(g, "\u25c0 COMPRESSION (negative)", (x0, bar_y - 1.2), 2.6, fill=palette.COMPRESSION_INK,
             weight="bold")
    fig.text(g, "TENSION (positive) \u25b6", (x0 + bar_w, bar_y - 1.2), 2.6, anchor="end",
             fill=palette.TENSION_INK, weight="bold")
    n = 2 * STRESS_CLASSES_PER_SIDE
    colours = palette.class_colours(STRESS_CLASSES_PER_SIDE)
    cw = bar_w / n
    bar = fig.dwg.g(id="legend-bar")
    g.add(bar)
    for i, c in enumerate(colours):
        bar.add(fig.dwg.rect((fmt(x0 + i * cw, 3), fmt(bar_y, 3)), (fmt(cw + 0.02, 3), fmt(bar_h)), fill=c,
                             **{"data-from-MPa": fmt_value(-vmax + 2 * vmax * i / n)}))
    # End wedges say that values beyond the range take the end colours.
    beyond_c, beyond_t = peak_c < -vmax, peak_t > vmax
    if beyond_c:
        g.add(fig.dwg.path(d=polygon_path([(x0, bar_y), (x0 - 3.0, bar_y + bar_h / 2), (x0, bar_y + bar_h)]),
                              fill=colours[0]))
    if beyond_t:
        e = x0 + bar_w
        g.add(fig.dwg.path(d=polygon_path([(e, bar_y), (e + 3.0, bar_y + bar_h / 2), (e, bar_y + bar_h)]),
                              fill=colours[-1]))
    g.add(fig.dwg.rect((fmt(x0, 3), fmt(bar_y, 3)), (fmt(bar_w), fmt(bar_h)), fill="none", stroke=INK,
                       stroke_width="0.2"))
    for i in range(n + 1):
        x = x0 + i * cw
        major = i % (n // 4) == 0
        g.add(fig.dwg.line(start=(fmt(x, 3), fmt(bar_y + bar_h, 3)), end=(fmt(x, 3), fmt(bar_y + bar_h +
                           (1.4 if major else 0.7), 3)), stroke=INK, stroke_width="0.2"))
        if major:
            v = -vmax + 2 * vmax * i / n
            label = "0" if abs(v) < 1e-12 * vmax else (f"+{v:.4g}" if v > 0 else f"\u2212{-v:.4g}")
            fig.text(g, label, (x, bar_y + bar_h + 4.2), 2.5, anchor="middle")
    note = (f"Peak tension {'+' if peak_t > 0 else ''}{fmt_value(peak_t)} MPa, peak compression "
            f"{fmt_value(peak_c).replace('-', chr(0x2212))} MPa")
    if beyond_c or beyond_t:
        note += "; beyond the bar: its end colours"
    fig.text(g, note + ".", (x0, bar_y + bar_h + 8.5), 2.4)


# Material-state greys (our own): CIE L* from pale to dark in equal steps, so equal steps of density read as
# equal steps of grey; the first class (under 1/8 of an element's material) is left as paper, i.e. void.
DENSITY_CLASSES = 8
_DENSITY_L = (92.0, 50.0)  # L* of the palest drawn class's lower edge and of full material
_DENSITY_TINT = (0.0, 1.5)  # a* b*: a hair warm, to sit with the stress scale's paper-white middle
VOID_FILL = "#ffffff"  # voids to make are cut through: they show the paper
SHOWN = 1.0 / DENSITY_CLASSES  # material state below which an element is drawn as void


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
    densities = checked_array(densities, (grid.nx * grid.ny,), "densities", grid)
    state = np.divide(densities, fractions, out=np.zeros_like(densities), where=fractions > 0.0)
    return np.clip(state, 0.0, 1.0), fractions


def draw_density_bar(fig: Figure, g, x0: float, top: float) -> None:
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
        bar.add(fig.dwg.rect((fmt(x0 + i * cw, 3), fmt(bar_y, 3)), (fmt(cw + 0.02, 3), fmt(bar_h)), fill=c,
                             **{"data-from": fmt(i / DENSITY_CLASSES, 4)}))
    g.add(fig.dwg.rect((fmt(x0, 3), fmt(bar_y, 3)), (fmt(bar_w), fmt(bar_h)), fill="none", stroke=INK,
                       stroke_width="0.2"))
    for i in range(0, DENSITY_CLASSES + 1, 2):
        x = x0 + i * cw
        g.add(fig.dwg.line(start=(fmt(x, 3), fmt(bar_y + bar_h, 3)), end=(fmt(x, 3), fmt(bar_y + bar_h + 1.4, 3)),
                           stroke=INK, stroke_width="0.2"))
        fig.text(g, f"{i / DENSITY_CLASSES:g}", (x, bar_y + bar_h + 4.2), 2.5, anchor="middle")
    fig.text(g, "Share of each element kept (elements cut by an opening: of the part inside the panel).",
             (x0, bar_y + bar_h + 8.5), 2.4)
