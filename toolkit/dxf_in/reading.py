"""What one reading of a drawing carries along: the file, its unit, tolerances, the reference point, the frame."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..model import Frame


@dataclass
class Reading:
    """State of one reading. Points inside the reader are drawing units relative to ``ref``.

    Subtracting ``ref`` (a point of the outline) first keeps site coordinates millions of mm from zero exact
    through every later step, shapely's included.
    """

    path: str
    unit: str
    mm_per_unit: float
    ref: np.ndarray
    join_mm: float
    chord_mm: float
    warnings: list[str] = field(default_factory=list)
    angle_deg: float = 0.0
    local_min: np.ndarray = field(default_factory=lambda: np.zeros(2))

    # Gaps, offsets and overlaps below this are floating-point noise, not drafting.
    exact_mm: float = 1e-6

    @property
    def join_tol(self) -> float:
        return self.join_mm / self.mm_per_unit

    @property
    def chord_tol(self) -> float:
        return self.chord_mm / self.mm_per_unit

    @property
    def exact(self) -> float:
        return self.exact_mm / self.mm_per_unit

    def _rotation(self) -> np.ndarray:
        a = math.radians(self.angle_deg)
        c, s = math.cos(a), math.sin(a)
        return np.array([[c, -s], [s, c]])  # the same matrix as Frame's

    def to_local(self, q) -> np.ndarray:
        """Relative drawing points -> local mm."""
        return (np.asarray(q, dtype=float) * self.mm_per_unit) @ self._rotation() - self.local_min

    def to_relative(self, local) -> np.ndarray:
        """Local mm -> drawing units relative to ``ref``."""
        return ((np.asarray(local, dtype=float) + self.local_min) @ self._rotation().T) / self.mm_per_unit

    def vector_to_local(self, v) -> np.ndarray:
        return np.asarray(v, dtype=float) @ self._rotation()

    def frame(self) -> Frame:
        origin = self.ref + self.to_relative(np.zeros(2))
        return Frame(
            origin=(float(origin[0]), float(origin[1])),
            angle_deg=float(self.angle_deg),
            mm_per_unit=self.mm_per_unit,
            unit=self.unit,
        )

    def fmt(self, q) -> str:
        """A relative point printed in absolute drawing coordinates, with its unit."""
        x, y = np.asarray(q, dtype=float) + self.ref
        return f"({_num(x)}, {_num(y)}) {self.unit}"

    def fmt_local(self, local) -> str:
        return self.fmt(self.to_relative(local))

    def where(self, layer: str, labels=()) -> str:
        text = f"{self.path}, layer {layer}"
        if labels:
            text += ", " + "; ".join(labels)
        return text


def _num(v: float) -> str:
    text = f"{v:.4f}".rstrip("0").rstrip(".")
    return "0" if text == "-0" else text
