"""Lettering set clear of everything else on a sheet: one placer the load figures and the void ids share, so that
no label covers another label, an arrow, a support, an ordinate or a void outline (docs/figures.md).

A label's box is estimated from the font's proportions (:func:`text_box`); each label is tried at its candidate
spots in order and goes to the first one whose box, with a little air round it, is clear.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import shapely

from .sheet import HEADING, MARGIN, Figure

# Advance widths in em of DejaVu Sans (the sheets' first font), book and bold, as upper bounds per kind of
# character, measured from the font files (DejaVu 2.37; our measurement): digits, most capitals, most small letters,
# the wide ones (M W m w % @), anything else (signs such as the minus and the times sign).
_EM_WIDTH = {
    False: {"digit": 0.64, "upper": 0.79, "lower": 0.64, "wide": 1.0, "space": 0.32, "other": 0.84},
    True: {"digit": 0.70, "upper": 0.85, "lower": 0.72, "wide": 1.11, "space": 0.38, "other": 0.88},
}
# Capitals and digits stand 0.73 em above the baseline (a little more for accents), descenders reach 0.24 em.
ASCENT, DESCENT = 0.76, 0.24


def _kind(c: str) -> str:
    if c.isdigit():
        return "digit"
    if c in "MWmw%@":
        return "wide"
    if c in " .,:;'|!il":
        return "space"
    if c.isupper():
        return "upper"
    if c.islower():
        return "lower"
    return "other"


def text_width(text: str, size: float, bold: bool = False) -> float:
    """The width (in the units of ``size``) that a line of ``text`` set in DejaVu Sans at ``size`` takes at most."""
    em = _EM_WIDTH[bool(bold)]
    return size * sum(em[_kind(c)] for c in text)


def text_box(fig: Figure, text: str, at, size: float, *, anchor: str = "start", bold: bool = False):
    """The box (local mm) that upright lettering of ``size`` paper mm with its baseline's anchor at ``at`` (local mm)
    covers; ``anchor`` as SVG's text-anchor."""
    s = fig.scale
    w = text_width(text, size, bold) * s
    x0 = at[0] - {"start": 0.0, "middle": 0.5, "end": 1.0}[anchor] * w
    return shapely.box(x0, at[1] - DESCENT * size * s, x0 + w, at[1] + ASCENT * size * s)


class Labels:
    """The labels placed on one sheet so far and what they must keep clear of (local mm).

    ``block(geom, owner)`` adds something lettering must not cover (an arrow, a void outline, an ordinate);
    ``owner`` names it so that its own label may stand on it when asked (a void's id inside the void).
    ``place`` tries candidate spots and takes the first clear one.
    """

    def __init__(self, fig: Figure, *, air: float = 0.5, gap: float = 0.6):
        self.fig = fig
        self.air = fig.paper(air)  # between two labels (paper mm)
        self.gap = fig.paper(gap)  # between a label and what is drawn
        self.taken: list = []
        self._blocked: list = []
        self._owners: list = []
        self._tree = None
        # The sheet's drawing area: between the heading and the legend, inside the margins.
        p0 = fig.to_local((MARGIN, MARGIN + HEADING))
        p1 = fig.to_local((fig.width - MARGIN, fig.legend_top))
        self.sheet = shapely.box(min(p0[0], p1[0]), min(p0[1], p1[1]), max(p0[0], p1[0]), max(p0[1], p1[1]))

    def block(self, geom, owner: str | None = None) -> None:
        """Keep lettering off ``geom`` (local mm)."""
        if geom is None or geom.is_empty:
            return
        self._blocked.append(geom)
        self._owners.append(owner)
        self._tree = None

    def take(self, box) -> None:
        """Mark ``box`` as lettered."""
        self.taken.append(box)

    def clear(self, box, *, own: str | None = None, within=None, leader=None, blocked: bool = True) -> bool:
        """Whether ``box`` (and its ``leader`` segment, when given) is clear of every label and everything blocked
        (but what ``own`` owns), and inside ``within`` (default: the sheet's drawing area). ``blocked`` False: of
        the other labels alone (cased lettering reads over a line)."""
        if not (within if within is not None else self.sheet).covers(box):
            return False
        spaced = box.buffer(self.air)
        if any(spaced.intersects(t) for t in self.taken):
            return False
        if leader is not None and any(leader.intersects(t) for t in self.taken):
            return False
        if blocked and self._blocked:
            if self._tree is None:
                self._tree = shapely.STRtree(self._blocked)
            for k in self._tree.query(box.buffer(self.gap), predicate="intersects"):
                if own is None or self._owners[k] != own:
                    return False
            if leader is not None:
                for k in self._tree.query(leader, predicate="intersects"):
                    if own is None or self._owners[k] != own:
                        return False
        return True

    def place(self, text: str, size: float, spots: Sequence[tuple[Sequence[float], str]], *, bold: bool = False,
              prefer=None, loose: bool = False) -> tuple[np.ndarray, str]:
        """The first of ``spots`` ((baseline anchor point, text-anchor), local mm) where the label is clear, those
        inside ``prefer`` (a region) first; the first spot when none is. With ``loose``, when none is clear, the
        first clear of the other labels (it may cross a line: cased lettering reads over one) comes before that.
        The chosen box is taken."""
        boxes = [text_box(self.fig, text, at, size, anchor=anchor, bold=bold) for at, anchor in spots]
        order = list(range(len(spots)))
        if prefer is not None:
            order.sort(key=lambda k: not prefer.covers(boxes[k]))
        chosen = next((k for k in order if self.clear(boxes[k])), None)
        if chosen is None and loose:
            chosen = next((k for k in order if self.clear(boxes[k], blocked=False)), None)
        chosen = 0 if chosen is None else chosen
        self.take(boxes[chosen])
        at, anchor = spots[chosen]
        return np.asarray(at, dtype=float), anchor
