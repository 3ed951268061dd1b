"""One frame of the evolving layout (``--frames``): the panel's material state in greys under a one-line caption."""

from __future__ import annotations

import math

import numpy as np

from ..errors import LacunaError
from ..model import Panel
from .fields import SHOWN, density_classes, density_colours, draw_cells, material_state
from .sheet import CAUTION, MARGIN, Figure, check_grid, fit, fmt_value
from .symbols import draw_outlines


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
    check_grid(panel, grid, where)
    state, _ = material_state(panel, grid, densities)
    fig = Figure(panel, legend_height=0.0, title_block=0.0, heading=7.0, room=4.0, room_below=6.0, width=None)
    caption = (f"{panel.name} \u00b7 iteration {iteration} \u00b7 compliance {fmt_value(compliance_Nmm)} N mm "
               f"\u00b7 volume fraction {volume_fraction:.3f} (design region)")
    caption, size = fit(caption, fig.width - 2 * MARGIN, 3.0)
    fig.text(fig.sheet_group("heading"), caption, (MARGIN, MARGIN + 4.0), size)
    draw_cells(fig, "density", grid, density_classes(state), state >= SHOWN, density_colours(), panel.solid)
    draw_outlines(fig, panel)
    note, size = fit(CAUTION, fig.width - 2 * MARGIN, 2.0, smallest=1.5)
    fig.text(fig.sheet_group("caution"), note, (MARGIN, fig.origin[1] + 4.5), size, style="italic", fill="#555555")
    fig.drawing.attribs["data-iteration"] = str(int(iteration))
    return fig.tostring()
