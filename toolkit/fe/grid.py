"""The structured grid of rectangular elements laid over the panel envelope."""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from ..errors import LacunaError


@dataclass(frozen=True)
class Grid:
    """nx x ny rectangular elements of dx x dy mm, lower-left corner at the local origin.

    Element e = iy * nx + ix (x fastest, row 0 at the bottom); node n = j * (nx + 1) + i; dofs 2n (x), 2n + 1 (y).
    """

    nx: int
    ny: int
    dx: float
    dy: float

    def __post_init__(self):
        if self.nx < 1 or self.ny < 1 or not (self.dx > 0 and self.dy > 0):
            raise LacunaError(f"a grid needs at least one element of positive size, got {self}.")

    @property
    def n_elements(self) -> int:
        return self.nx * self.ny

    @property
    def n_nodes(self) -> int:
        return (self.nx + 1) * (self.ny + 1)

    @property
    def n_dofs(self) -> int:
        return 2 * self.n_nodes

    @property
    def width_mm(self) -> float:
        return self.nx * self.dx

    @property
    def height_mm(self) -> float:
        return self.ny * self.dy

    @property
    def element_area(self) -> float:
        return self.dx * self.dy

    @cached_property
    def enodes(self) -> np.ndarray:
        """(ne, 4) node numbers of each element, counter-clockwise from its lower-left node."""
        ix, iy = np.meshgrid(np.arange(self.nx), np.arange(self.ny))
        n0 = (iy * (self.nx + 1) + ix).ravel()
        return np.stack([n0, n0 + 1, n0 + self.nx + 2, n0 + self.nx + 1], axis=1)

    @cached_property
    def edof(self) -> np.ndarray:
        """(ne, 8) dofs of each element: x and y of its four nodes, counter-clockwise from the lower left."""
        n = self.enodes
        return np.stack([2 * n, 2 * n + 1], axis=2).reshape(-1, 8)

    @cached_property
    def iK(self) -> np.ndarray:
        """Row index of each of the ne * 64 element-matrix entries, in ``ke.ravel()`` order per element."""
        return np.repeat(self.edof, 8, axis=1).ravel()

    @cached_property
    def jK(self) -> np.ndarray:
        """Column index of each of the ne * 64 element-matrix entries."""
        return np.tile(self.edof, (1, 8)).ravel()

    @cached_property
    def node_xy(self) -> np.ndarray:
        """(n_nodes, 2) node positions, mm."""
        x, y = np.meshgrid(np.arange(self.nx + 1) * self.dx, np.arange(self.ny + 1) * self.dy)
        return np.column_stack([x.ravel(), y.ravel()])

    @cached_property
    def element_centres(self) -> np.ndarray:
        """(ne, 2) element centre positions, mm."""
        x, y = np.meshgrid((np.arange(self.nx) + 0.5) * self.dx, (np.arange(self.ny) + 0.5) * self.dy)
        return np.column_stack([x.ravel(), y.ravel()])

    def element_at(self, x: float, y: float) -> int:
        """The element holding a point (points on the envelope's edge go to the element inside)."""
        ix = min(max(math.floor(x / self.dx), 0), self.nx - 1)
        iy = min(max(math.floor(y / self.dy), 0), self.ny - 1)
        return iy * self.nx + ix

    def node_dofs(self, nodes) -> np.ndarray:
        """The x and y dofs of the given nodes, (k, 2)."""
        nodes = np.asarray(nodes, dtype=np.int64)
        return np.stack([2 * nodes, 2 * nodes + 1], axis=-1)

    def active_nodes(self, active_elements: np.ndarray) -> np.ndarray:
        """(n_nodes,) True for nodes that belong to at least one active element."""
        mask = np.zeros(self.n_nodes, dtype=bool)
        mask[self.enodes[np.asarray(active_elements, dtype=bool)].ravel()] = True
        return mask

    def active_dofs(self, active_elements: np.ndarray) -> np.ndarray:
        """(n_dofs,) True for dofs of nodes that belong to at least one active element."""
        return np.repeat(self.active_nodes(active_elements), 2)


def grid_shape(
    width_mm: float, height_mm: float, element_size_mm: float | None = None, target_elements: int = 20000
) -> tuple[int, int]:
    """(nx, ny) of the grid :func:`make_grid` lays over width x height; allocates nothing."""
    if not (width_mm > 0 and height_mm > 0):
        raise LacunaError(f"panel envelope {width_mm} x {height_mm} mm has no area.")
    if element_size_mm is None:
        if target_elements < 1:
            raise LacunaError(f"the element count must be positive, got {target_elements}.")
        element_size_mm = math.sqrt(width_mm * height_mm / target_elements)
    elif not element_size_mm > 0:
        raise LacunaError(
            f"element size must be positive, got {element_size_mm} mm.", where="[panel] element_size"
        )
    return max(1, round(width_mm / element_size_mm)), max(1, round(height_mm / element_size_mm))


def make_grid(
    width_mm: float, height_mm: float, element_size_mm: float | None = None, target_elements: int = 20000
) -> Grid:
    """A grid covering width x height exactly, elements near ``element_size_mm`` (or about ``target_elements``).

    Only the absolute cap is checked here; the stages check the grid against the free memory first
    (:func:`toolkit.limits.grid_within_memory`).
    """
    nx, ny = grid_shape(width_mm, height_mm, element_size_mm, target_elements)
    if nx * ny > 5_000_000:
        raise LacunaError(
            f"the element size gives {nx} x {ny} elements, too many to solve here.",
            where="[panel] element_size",
            hint="Use a larger element size (a few hundred thousand elements at most).",
        )
    return Grid(nx=nx, ny=ny, dx=width_mm / nx, dy=height_mm / ny)
