"""The most material any layout of one void family can open, from the spacing rules and stock sizes alone.

Between two voids the rules ask a web of at least g = max(min_web, web_ratio x the larger void's extent), the
extent being the diameter of the void's smallest enclosing circle. Grow every void by half the web its own extent
asks, g(D) / 2 all round: two grown voids cannot overlap, since g(D) / 2 + g(D') / 2 <= g(max(D, D')), which the
web between them is at least. So whatever the layout, its voids open at most the largest share any one void has of
its grown self, of the ground their grown selves cover (each void with a band of half its web round it).

That share, for a convex void of area A, perimeter P and extent D grown by t (Steiner's formula for the grown
area, A + P t + pi t^2; the isoperimetric inequality, P >= 2 sqrt(pi A); the isodiametric one, A <= pi D^2 / 4):

    A / (A + P t + pi t^2) <= 1 / (1 + sqrt(pi) t / sqrt(A))^2 <= 1 / (1 + 2 t / D)^2 = 1 / (1 + g(D) / D)^2

- any convex void (n-gons): at most 1 / (1 + web_ratio)^2, whatever its size; no bound without a web ratio,
  where a void large against the minimum web loses little to it;
- a bore of stock diameter d (a circle, where both inequalities are equalities): (d / (d + g(d)))^2;
- a slot of stock width w and length L (a stadium, extent L): grown by t it is the stadium of width w + 2t and
  length L + 2t, and its share is at most w / (w + 2t) = w / (w + g(L)) <= w / (w + max(min_web, web_ratio w)),
  however long it is; and at most the convex bound.

The largest share over the stock list (and over the families of a ``mixed`` job) is the ceiling. Corners eased or
rounded only take area off a void, so they keep under it. A layout kept within the freeform voids' outlines can
therefore keep about that share of the freeform saving at most; more needs voids reaching into material the
optimiser kept.
"""

from __future__ import annotations

from dataclasses import dataclass

@dataclass(frozen=True)
class Ceiling:
    """The most a family's voids can open of the ground they stand on (``share``, 0-1), and why, in words."""

    share: float
    why: str


def _convex(web_ratio: float) -> float:
    return 1.0 / (1.0 + web_ratio) ** 2


def _web(min_web_mm: float, web_ratio: float, extent_mm: float) -> float:
    return max(min_web_mm, web_ratio * extent_mm)


def family_ceiling(family: str, *, min_web_mm: float, web_ratio: float = 0.0, slot_widths_mm=(),
                   bore_diameters_mm=(), min_void_mm: float = 0.0) -> Ceiling | None:
    """The ceiling of one family ("polygon", "slot" or "bore") under the rules (None: the rules set none, as
    n-gons without a web ratio, or slots and bores without a stock size the least void admits)."""
    if family == "polygon":
        if web_ratio <= 0:
            return None
        return Ceiling(_convex(web_ratio), f"n-gons with webs of {web_ratio:g} x the larger void's size between them")
    if family not in ("bore", "slot"):
        raise ValueError(f"no void family {family!r}")
    stock = [s for s in (bore_diameters_mm if family == "bore" else slot_widths_mm) if s >= min_void_mm and s > 0]
    if not stock:
        return None
    # a bore's share of its grown self is (d / (d + g))^2, a slot's at most w / (w + g): both rise with size / web
    size = max(stock, key=lambda s: (round(s / (s + _web(min_web_mm, web_ratio, s)), 12), s))
    web = _web(min_web_mm, web_ratio, size)
    share = size / (size + web)
    if family == "bore":
        return Ceiling(share ** 2, f"bores of the stock diameters (at best {size:g} mm across, with a web of at "
                       f"least {web:g} mm between them)")
    if web_ratio > 0 and _convex(web_ratio) < share:  # a slot's extent is its length, not its width
        return Ceiling(_convex(web_ratio), f"slots with webs of {web_ratio:g} x the larger slot's length between them")
    return Ceiling(share, f"slots of the stock widths (at best {size:g} mm wide, with a web of at least {web:g} mm "
                   "between them)")


def ceiling(families, **rules) -> Ceiling | None:
    """The largest of ``families``' ceilings (None where any family has none: nothing bounds the layout)."""
    found = [family_ceiling(f, **rules) for f in families]
    if not found or any(c is None for c in found):
        return None
    return max(found, key=lambda c: c.share)


def ceiling_sentence(c: Ceiling) -> str:
    """The ceiling in words, for the report and the command's lines."""
    return (f"whatever their layout, {c.why} open at most {100 * c.share:.0f} % of the ground they stand on "
            "(each void with a band of half its web round it). Voids kept within the freeform voids' outlines can "
            "keep about that share of the freeform saving at most; more needs voids reaching into material the "
            "optimiser kept, where the stiffness of the freeform layout allows.")
