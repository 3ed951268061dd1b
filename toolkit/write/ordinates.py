"""Ordinate dimensions of the voids to make: one datum, the panel's lower-left corner (local 0, 0), and each
void's centre measured from it along the panel's x and y, in the drawing's unit.

The result sheet (:mod:`.result_sheet`) and the drawing copy (:mod:`.dxf_copy`) both set their ordinates out from
here, so the two state the same values to the same digits (docs/layers.md, docs/figures.md).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from ..model import Frame, Void

# Decimals of an ordinate by unit: to the millimetre, or the nearest thing to it in the unit (a shop sets out a
# void's centre to the millimetre; the schedule CSV keeps the exact figures).
_DECIMALS = {"mm": 0, "cm": 1, "m": 3, "in": 2, "ft": 3}


def decimals(unit: str) -> int:
    """Decimals of an ordinate in ``unit``."""
    return _DECIMALS.get(unit, 3)


def ordinate_text(frame: Frame, value_mm: float) -> str:
    """An ordinate (local mm) as the drawing states it: in the drawing's unit, to :func:`decimals`."""
    return f"{frame.length_to_drawing(value_mm) + 0.0:.{decimals(frame.unit)}f}"


def ordinate_features(voids: Sequence[Void], axis: int, frame: Frame) -> list[tuple[float, tuple[float, float]]]:
    """The ordinates along ``axis`` (0: x, 1: y) to dimension, ascending: (value in local mm, the feature it is
    measured to). The datum (0, at the corner) first, then each void centre's x (or y); centres whose ordinates
    read the same in ``frame``'s unit (:func:`ordinate_text`) once, measured to the centre nearest the edge its
    leader runs out over (the bottom edge for x, the left edge for y)."""
    nearest: dict[str, tuple[float, float]] = {ordinate_text(frame, 0.0): (0.0, 0.0)}
    for v in sorted(voids, key=lambda v: (v.centre[1 - axis], v.centre[axis])):
        c = (float(v.centre[0]), float(v.centre[1]))
        nearest.setdefault(ordinate_text(frame, c[axis]), c)
    features = sorted(nearest.values(), key=lambda c: c[axis])
    datum = features.index((0.0, 0.0))
    return [(0.0, (0.0, 0.0))] + [(c[axis], c) for k, c in enumerate(features) if k != datum]


def spread(values: np.ndarray, pitch: float, low: float | None = None, high: float | None = None) -> np.ndarray:
    """Positions for the lettering of ordinates at ``values`` (ascending) at least ``pitch`` apart, each as near its
    value as the others let it (least squares: the crowded ones share the shift both ways), within [``low``,
    ``high``] (default: from the first value, the datum's lettering staying at the datum or after it, with no end).
    A jogged leader joins a moved one to its value. Where ``high`` - ``low`` cannot hold them all ``pitch`` apart,
    they are set evenly over it, closer.

    With p_k = q_k + k * pitch the spacing asks for a non-decreasing q; the q nearest v_k - k * pitch is its
    isotonic fit, found by pooling adjacent values that break the order into their mean; the bounds clip it."""
    v = np.asarray(values, dtype=float)
    if len(v) == 0:
        return v.copy()
    low = float(v[0]) if low is None else float(low)
    if high is not None and len(v) > 1:
        pitch = min(pitch, (float(high) - low) / (len(v) - 1))
    steps = pitch * np.arange(len(v))
    pools: list[list[float]] = []  # [sum, count] of each run of pooled values
    for q in v - steps:
        pools.append([q, 1.0])
        while len(pools) > 1 and pools[-2][0] / pools[-2][1] > pools[-1][0] / pools[-1][1]:
            total, count = pools.pop()
            pools[-1][0] += total
            pools[-1][1] += count
    fit = np.concatenate([np.full(int(count), total / count) for total, count in pools])
    fit = np.maximum(fit, low)
    if high is not None:
        fit = np.minimum(fit, float(high) - steps[-1])
    return fit + steps
