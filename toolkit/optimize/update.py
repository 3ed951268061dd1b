"""One BESO design update and the convergence test: small pure functions over arrays.

Design variables live on *orbits* (groups of elements that must share one state, see symmetry.py; without
symmetry every orbit is one element). Volumes are counted in elements: every design element is a whole
element of the same area, so a count is an exact volume.
"""

from __future__ import annotations

import numpy as np


def next_volume(current: float, target: float, evolution_rate: float) -> float:
    """The volume fraction for the next iteration: V_{k+1} = max(V*, V_k (1 - ER)) on the way down
    (min(V*, V_k (1 + ER)) on the way up), Huang & Xie 2009, Comput Mech 43:393-401."""
    if current > target:
        return max(target, current * (1.0 - evolution_rate))
    return min(target, current * (1.0 + evolution_rate))


def _take_best(order: np.ndarray, size: np.ndarray, count: float) -> np.ndarray:
    """The leading orbits of ``order`` whose summed size comes nearest to ``count`` (ties: fewer elements)."""
    if order.size == 0 or count <= 0:
        return order[:0]
    cum = np.cumsum(size[order])
    k = int(np.searchsorted(cum, count, side="left"))  # first prefix reaching the count
    if k >= order.size:
        return order
    below = cum[k - 1] if k > 0 else 0
    if cum[k] - count < count - below:
        k += 1
    return order[:k]


def _descending(alpha: np.ndarray, candidates: np.ndarray) -> np.ndarray:
    """Indices in ``candidates`` by falling sensitivity; equal values by rising index, so runs repeat exactly."""
    return candidates[np.lexsort((candidates, -alpha[candidates]))]


def update_design(
    alpha: np.ndarray, solid: np.ndarray, size: np.ndarray, n_target: float, n_admit_max: float
) -> np.ndarray:
    """New solid/void state of each orbit.

    ``alpha`` (n,) sensitivities, ``solid`` (n,) bool current state, ``size`` (n,) elements per orbit,
    ``n_target`` elements to keep solid, ``n_admit_max`` most elements that may turn from void to solid.

    The BESO threshold rule (Huang & Xie 2009): orbits above a threshold sensitivity are solid, the rest
    void, the threshold placed so the solid count meets the target. Sorting finds the exact threshold that
    a bisection on the sensitivity value converges to, with no tolerance and no iteration count. If more
    void orbits would be admitted than ``n_admit_max`` allows, only the most sensitive void orbits within
    the cap are admitted and the threshold for removal among the solid ones is moved so the target volume is
    still met (the admission-ratio rule of the same paper).
    """
    alpha = np.asarray(alpha, dtype=float)
    solid = np.asarray(solid, dtype=bool)
    size = np.asarray(size, dtype=np.int64)
    everything = np.arange(alpha.size)
    chosen = _take_best(_descending(alpha, everything), size, n_target)
    new = np.zeros(alpha.size, dtype=bool)
    new[chosen] = True
    added = new & ~solid
    if size[added].sum() <= n_admit_max:
        return new
    void_order = _descending(alpha, np.flatnonzero(~solid))
    cum = np.cumsum(size[void_order])
    admitted = void_order[: int(np.searchsorted(cum, n_admit_max, side="right"))]
    room = n_target - size[admitted].sum()
    kept = _take_best(_descending(alpha, np.flatnonzero(solid)), size, room)
    new[:] = False
    new[admitted] = True
    new[kept] = True
    return new


def has_converged(compliance: np.ndarray, window: int, tolerance: float) -> bool:
    """True when the last ``window`` compliances, summed, differ from the ``window`` before by at most
    ``tolerance`` relative to the last sum (Huang & Xie 2007, Finite Elem Anal Des 43:1039-1049, eq. for the
    convergence criterion). The caller also requires the target volume to have been reached."""
    c = np.asarray(compliance, dtype=float)
    if c.size < 2 * window:
        return False
    last = c[-window:].sum()
    before = c[-2 * window : -window].sum()
    return abs(last - before) <= tolerance * abs(last)
