"""Resource limits: the memory a grid will need, estimated before any of it is allocated, against what is free.

A grid too fine for the machine would otherwise run for minutes and then die in the middle of a factorisation
(or take the machine's swap with it). The estimate is a law fitted to the peak resident memory measured by
``benchmarks/bench_load.py memory`` with the solver toolkit.fe.solve chooses by default:

    bytes per element = a + b log2(ne)        (the factor's fill grows like n log n)

taken as the envelope of grids of 5,000 to 270,000 elements (every measured size at or under it), and
:data:`SAFETY` on top for the allocator's slack and the machine's other work. The coefficients belong to the
solver: when toolkit/fe/solve.py changes, run the benchmark again (docs/robustness-limits.md).
"""

from __future__ import annotations

import math
import os
from pathlib import Path

from .errors import LacunaError
from .fe.grid import Grid, grid_shape, make_grid

# Above this many element-node pairs per element the optimiser's filter (toolkit/optimize/filters.py) runs as an
# FFT convolution instead of a sparse matrix: with a radius of 24 elements on a 600 x 200 grid the matrix would
# hold some 200 million entries. Below it the matrix's weights count in the memory estimate.
FILTER_SPARSE_LIMIT = 200
# kB (1024 bytes) per element = a + b * log2(ne); benchmarks/bench_load.py memory, 2 cores, Python 3.11, the
# default ("auto") solver: multifrontal nested dissection from 20,000 dofs, SuperLU below. "analysis": one solid
# analysis. "optimize": the solid analysis kept while BESO runs. (With SuperLU alone at every size the same
# benchmark measured about twice these figures: 7.3 to 9.4 kB per element for an analysis.)
LAW_KB = {"analysis": (3.582, 0.0898), "optimize": (3.109, 0.2901)}
# Each load case beyond the first: its displacements, forces, reactions, stresses and element energies in the
# solid, freeform and made analyses and in the optimiser (benchmarks/bench_cases.py, a whole optimisation at
# 200 x 60 elements with 2, 21 and 81 cases: +0.37 and +0.39 kB per element per case; an earlier +0.2 kB for two
# more cases at 400 x 130 measured less of the run). Rounded up to stay on the safe side.
PER_EXTRA_CASE_KB = 0.45
# Each filter weight beyond the default radius's 32 per element, while the filter is one sparse matrix
# (measured: +1.5 kB per element going from 32 to 156 weights); above optimize.filters' limit it runs by FFT
# and costs no more than the default.
PER_FILTER_WEIGHT_KB = 0.0122
DEFAULT_FILTER_WEIGHTS = 32
SAFETY = 1.25
# Added to every estimate: below 20,000 dofs the default solver is SuperLU, at up to 12.5 kB per element for an
# optimisation (measured at 100 x 50 elements, 61 MB in all); this allowance covers those small grids, whose law
# the one above is not.
FIXED_BYTES = 64 * 2**20
# Where the free memory cannot be read (not Linux): assume this much.
FALLBACK_BYTES = 4 * 10**9

STAGES = ("analysis", "optimize")


def _filter_weights(dx: float, dy: float, radius_mm: float | None) -> int:
    """Weights per element of the BESO filter at this radius (default: three element sizes)."""
    import numpy as np

    r = 3.0 * max(dx, dy) if radius_mm is None else float(radius_mm)
    if r * r > 1000.0 * dx * dy:
        return int(math.pi * r * r / (dx * dy))  # far past the sparse filter's limit: no need to count exactly
    kx, ky = int(math.ceil(r / dx)), int(math.ceil(r / dy))
    ox = np.arange(-kx, kx + 2)
    oy = np.arange(-ky, ky + 2)
    # The same kernel as optimize.filters.SensitivityFilter: nodes within the radius of the element's centre.
    dist = np.hypot((ox[None, :] - 0.5) * dx, (oy[:, None] - 0.5) * dy)
    return int(np.count_nonzero(dist < r))


def peak_memory_bytes(nx: int, ny: int, dx: float = 1.0, dy: float = 1.0, *, stage: str = "analysis",
                      cases: int = 1, filter_radius_mm: float | None = None) -> float:
    """Estimated peak memory, bytes, of analysing (``stage="analysis"``) or optimising an nx x ny grid.

    ``dx``, ``dy`` (mm) and ``filter_radius_mm`` matter only for the optimiser's filter; safety margin included.
    """
    if stage not in STAGES:
        raise ValueError(f"stage must be one of {STAGES}, got {stage!r}")
    ne = float(nx) * float(ny)
    a, b = LAW_KB[stage]
    per_element = a + b * math.log2(max(ne, 2.0)) + PER_EXTRA_CASE_KB * max(int(cases) - 1, 0)
    if stage == "optimize":
        weights = _filter_weights(dx, dy, filter_radius_mm)
        if weights <= FILTER_SPARSE_LIMIT:
            per_element += PER_FILTER_WEIGHT_KB * max(weights - DEFAULT_FILTER_WEIGHTS, 0)
    return SAFETY * 1024.0 * per_element * ne + FIXED_BYTES


def available_memory_bytes(meminfo: str | os.PathLike = "/proc/meminfo",
                           cgroup: str | os.PathLike = "/sys/fs/cgroup") -> int:
    """Memory this process may still take, bytes: the kernel's MemAvailable, lowered to what is left under a
    control-group limit (containers) where there is one; :data:`FALLBACK_BYTES` where neither can be read."""
    found = []
    try:
        for line in Path(meminfo).read_text().splitlines():
            if line.startswith("MemAvailable:"):
                found.append(int(line.split()[1]) * 1024)
                break
    except (OSError, ValueError, IndexError):
        pass
    try:
        limit = Path(cgroup, "memory.max").read_text().strip()
        if limit != "max":
            used = int(Path(cgroup, "memory.current").read_text().strip())
            found.append(max(int(limit) - used, 0))
    except (OSError, ValueError):
        pass
    return min(found) if found else FALLBACK_BYTES


def _fits(width_mm, height_mm, size_mm, budget, stage, cases, filter_radius_mm) -> bool:
    nx, ny = grid_shape(width_mm, height_mm, size_mm)
    return peak_memory_bytes(nx, ny, width_mm / nx, height_mm / ny, stage=stage, cases=cases,
                             filter_radius_mm=filter_radius_mm) <= budget


def _round_up(value: float) -> float:
    """Up to two significant figures: a size a drafter can type (4.1 -> 4.1, 4.13 -> 4.2, 312 -> 320)."""
    step = 10.0 ** (math.floor(math.log10(value)) - 1)
    return round(math.ceil(value / step - 1e-9) * step, 12)


def smallest_element_size(width_mm: float, height_mm: float, budget_bytes: float, *, stage: str = "analysis",
                          cases: int = 1, filter_radius_mm: float | None = None) -> float | None:
    """The smallest element size (mm, two significant figures) whose grid fits ``budget_bytes``; None if not
    even one element does."""
    args = (budget_bytes, stage, cases, filter_radius_mm)
    hi = max(width_mm, height_mm)
    if not _fits(width_mm, height_mm, hi, *args):
        return None
    lo = hi * 1e-6  # a million elements along the longer side: far beyond any machine's memory
    if _fits(width_mm, height_mm, lo, *args):
        return _round_up(lo)
    # Fewer elements never need more memory, so bisect on the size (in ratio), then check the rounded size.
    while hi / lo > 1.001:
        mid = math.sqrt(lo * hi)
        if _fits(width_mm, height_mm, mid, *args):
            hi = mid
        else:
            lo = mid
    size = _round_up(hi)
    while not _fits(width_mm, height_mm, size, *args):  # the grid's rounding can make a size a hair short
        size = _round_up(size * 1.01)
    return size


def amount_text(n_bytes: float) -> str:
    """A memory amount for a message: MB, GB or TB with the digits that matter."""
    if n_bytes >= 1e12:
        return f"{n_bytes / 1e12:,.0f} TB" if n_bytes >= 100e12 else f"{n_bytes / 1e12:.2g} TB"
    if n_bytes >= 10e9:
        return f"{n_bytes / 1e9:.0f} GB"
    if n_bytes >= 1e9:
        return f"{n_bytes / 1e9:.1f} GB"
    return f"{max(n_bytes / 1e6, 1):.0f} MB"


def check_memory(nx: int, ny: int, dx: float, dy: float, *, stage: str = "analysis", cases: int = 1,
                 filter_radius_mm: float | None = None, budget_bytes: float | None = None) -> None:
    """LacunaError (where ``[panel] element_size``) when the grid's estimated peak memory exceeds the budget
    (default: :func:`available_memory_bytes`), naming the element size that would fit."""
    need = peak_memory_bytes(nx, ny, dx, dy, stage=stage, cases=cases, filter_radius_mm=filter_radius_mm)
    budget = available_memory_bytes() if budget_bytes is None else budget_bytes
    if need <= budget:
        return
    width, height = nx * dx, ny * dy
    verb = "analyse" if stage == "analysis" else "optimise"
    fit = smallest_element_size(width, height, budget, stage=stage, cases=cases, filter_radius_mm=filter_radius_mm)
    if fit is None:
        hint = "Close other programs or run on a machine with more memory."
    else:
        fx, fy = grid_shape(width, height, fit)
        hint = (f"Raise element_size to at least {fit:g} mm ({fx} x {fy} elements), or run on a machine with "
                "more memory.")
    raise LacunaError(
        f"this grid ({nx} x {ny} elements of {dx:.4g} x {dy:.4g} mm) needs about {amount_text(need)} of memory to "
        f"{verb}, and about {amount_text(budget)} is free.",
        where="[panel] element_size",
        hint=hint,
    )


def grid_within_memory(width_mm: float, height_mm: float, element_size_mm: float | None = None,
                       target_elements: int = 20000) -> Grid:
    """:func:`toolkit.fe.grid.make_grid`, refused before anything is allocated when the grid's analysis would not
    fit in the free memory (:func:`check_memory`, naming the element size that would fit)."""
    nx, ny = grid_shape(width_mm, height_mm, element_size_mm, target_elements)
    check_memory(nx, ny, width_mm / nx, height_mm / ny, stage="analysis")
    return make_grid(width_mm, height_mm, element_size_mm, target_elements)
