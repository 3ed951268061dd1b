"""Mirror maps of the structured grid and the orbits of elements that must share one state."""

from __future__ import annotations

import numpy as np

from ..errors import LacunaError
from ..fe.grid import Grid


def mirror_map(grid: Grid, axis: str) -> np.ndarray:
    """(ne,) index of each element's mirror image.

    ``axis`` "x" mirrors about the vertical mid-line (x -> width - x), "y" about the horizontal one, following
    CONTRACT.md's ``symmetry`` option. The grid covers the envelope exactly, so every image is an element.
    """
    ix, iy = np.meshgrid(np.arange(grid.nx), np.arange(grid.ny))
    if axis == "x":
        ix = grid.nx - 1 - ix
    elif axis == "y":
        iy = grid.ny - 1 - iy
    else:
        raise LacunaError(f'a mirror axis is "x" or "y", got {axis!r}.', where="[optimize] symmetry")
    return (iy * grid.nx + ix).ravel()


def symmetry_orbits(grid: Grid, symmetry: str) -> np.ndarray:
    """(ne,) orbit label of each element: elements mapped onto each other by the chosen mirrors share a label.

    Labels are 0..n_orbits-1, numbered by each orbit's lowest element index (so the result is deterministic).
    An orbit holds 1, 2 or 4 elements ("xy" on a grid with an odd count gives orbits of 1 and 2 on the
    mid-lines).
    """
    ne = grid.n_elements
    label = np.arange(ne)
    if symmetry == "none":
        return label
    axes = {"x": ("x",), "y": ("y",), "xy": ("x", "y")}.get(symmetry)
    if axes is None:
        raise LacunaError(
            f"unknown symmetry {symmetry!r}.",
            where="[optimize] symmetry",
            hint='Use "none", "x", "y" or "xy".',
        )
    for axis in axes:
        label = np.minimum(label, label[mirror_map(grid, axis)])
    # After the x then y pass an element's label is the lowest index of its whole orbit (the x-images of the
    # y-images are reached because the x pass already folded each row pair's x-orbit to its minimum).
    _, label = np.unique(label, return_inverse=True)
    return label.ravel()
