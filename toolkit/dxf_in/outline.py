"""The panel outline: one closed rectangle at any rotation, and the local frame it defines."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..arcs import sagitta
from ..errors import LacunaError
from .pieces import Piece

# A vertex where the outline turns by less than this is a point along a straight side, not a corner;
# a corner must be a right angle within the same tolerance.
ANGLE_TOL_DEG = 0.1


@dataclass(frozen=True)
class Rectangle:
    """A rectangle found in the drawing: local x at ``angle_deg`` from drawing x, corners relative to ref."""

    angle_deg: float
    corners: np.ndarray  # (4, 2) drawing units, relative to the reference point, in loop order


def rectangle(loop: Piece, straight_tol: float, mm_per_unit: float, where: str, fmt) -> Rectangle:
    """Check that ``loop`` is a rectangle and return its orientation.

    Sides must be straight (no arc bowing more than ``straight_tol`` from its chord, no vertex further than
    that from the line between two corners); the turn at every corner must be 90 degrees within
    ``ANGLE_TOL_DEG``; collinear extra vertices are allowed.
    """
    hint = "Draw the panel outline as one closed rectangle (four straight sides at right angles)."
    if loop.curved:
        raise LacunaError(
            f"the outline is not a rectangle: it has a curved side ({loop.label}).", where=where, hint=hint
        )
    pts, bulges = loop.points, loop.bulges
    n = len(pts)
    for i in range(n):
        p0, p1 = pts[i], pts[(i + 1) % n]
        if sagitta(p0, p1, float(bulges[i])) > straight_tol:
            raise LacunaError(
                f"the outline is not a rectangle: it has a curved side (an arc from {fmt(p0)} to {fmt(p1)}).",
                where=where,
                hint=hint,
            )
    seg = np.roll(pts, -1, axis=0) - pts
    length = np.hypot(seg[:, 0], seg[:, 1])
    keep = length > 0
    pts, seg = pts[keep], seg[keep]
    heading = np.degrees(np.arctan2(seg[:, 1], seg[:, 0]))
    turn = _wrap(heading - np.roll(heading, 1))  # turn at vertex i, from segment i - 1 to segment i
    corner_idx = np.flatnonzero(np.abs(turn) > ANGLE_TOL_DEG)
    if len(corner_idx) != 4:
        raise LacunaError(
            f"the outline is not a rectangle: it has {len(corner_idx)} sides, not 4 "
            f"(vertices where it turns by more than {ANGLE_TOL_DEG} degrees count as corners).",
            where=where,
            hint=hint,
        )
    corners = pts[corner_idx]
    for k in range(4):
        a, b = corners[k], corners[(k + 1) % 4]
        lo, hi = corner_idx[k], corner_idx[(k + 1) % 4]
        between = pts[lo + 1 : hi] if hi > lo else np.concatenate([pts[lo + 1 :], pts[:hi]])
        if len(between):
            off = _distance_to_line(between, a, b)
            if off.max() > straight_tol:
                raise LacunaError(
                    f"the outline is not a rectangle: its side from {fmt(a)} to {fmt(b)} is not straight "
                    f"(a vertex lies {off.max() * mm_per_unit:.4g} mm off it).",
                    where=where,
                    hint=hint,
                )
    side = np.roll(corners, -1, axis=0) - corners
    side_heading = np.degrees(np.arctan2(side[:, 1], side[:, 0]))
    corner_turn = _wrap(side_heading - np.roll(side_heading, 1))
    for k in range(4):
        if abs(abs(corner_turn[k]) - 90.0) > ANGLE_TOL_DEG or np.sign(corner_turn[k]) != np.sign(corner_turn[0]):
            inside = 180.0 - abs(corner_turn[k])
            raise LacunaError(
                f"the outline is not a rectangle: its corner at {fmt(corners[k])} is {inside:.3f} degrees, "
                f"not 90 (tolerance {ANGLE_TOL_DEG} degrees).",
                where=where,
                hint=hint,
            )
    # Directions of a rectangle's sides agree modulo 90 degrees: average them as angles times four, which
    # also picks the one direction in (-45, 45] for local x.
    weights = np.hypot(side[:, 0], side[:, 1])
    four = np.radians(np.mod(4.0 * side_heading, 360.0))  # mod first: 4 x 180 is exactly 0
    angle = math.degrees(math.atan2(weights @ np.sin(four), weights @ np.cos(four))) / 4.0
    return Rectangle(angle, corners)


def _wrap(deg: np.ndarray) -> np.ndarray:
    return (deg + 180.0) % 360.0 - 180.0


def _distance_to_line(p: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    d = b - a
    rel = p - a
    return np.abs(rel[:, 0] * d[1] - rel[:, 1] * d[0]) / math.hypot(d[0], d[1])
