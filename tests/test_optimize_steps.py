"""The pure pieces of the optimiser on small arrays: filter, mirror orbits, design update, convergence."""

import numpy as np
import pytest

from toolkit.errors import LacunaError
from toolkit.fe.grid import Grid
from toolkit import limits
from toolkit.optimize import filters
from toolkit.optimize.filters import SensitivityFilter
from toolkit.optimize.settings import OptimizeSettings, ZoneSettings
from toolkit.optimize.symmetry import mirror_map, symmetry_orbits
from toolkit.optimize.update import has_converged, next_volume, update_design


# --- filter -------------------------------------------------------------------------------------------------

def test_filter_value_worked_by_hand():
    # Two unit elements side by side, radius 1: element 0's centre sees only its own four nodes (distance
    # 0.707 each, weight 0.293 each); two of them are shared with element 1 and carry (a0 + a1) / 2.
    # So element 0 gets (a0 + a0 + (a0+a1)/2 + (a0+a1)/2) / 4 = (3 a0 + a1) / 4 = 0.75 for a = (1, 0).
    # Worked by hand from the scheme of Huang & Xie 2007 (Finite Elem Anal Des 43:1039-1049).
    f = SensitivityFilter(Grid(2, 1, 1.0, 1.0), 1.0)
    assert f(np.array([1.0, 0.0])) == pytest.approx([0.75, 0.25], abs=1e-15)


def test_filter_keeps_a_uniform_field_and_commutes_with_mirrors():
    # The filter is a weighted mean (weights normalised per element) that depends on distance only
    # (Huang & Xie 2007): a constant passes unchanged; mirroring before or after filtering is the same.
    g = Grid(13, 7, 1.0, 1.4)
    f = SensitivityFilter(g, 3.1)
    assert np.allclose(f(np.full(g.n_elements, 2.5)), 2.5, rtol=0, atol=1e-13)
    a = np.random.default_rng(3).random(g.n_elements)
    for axis in ("x", "y"):
        m = mirror_map(g, axis)
        assert np.allclose(f(a[m]), f(a)[m], rtol=0, atol=1e-13)


def test_filter_fft_path_equals_sparse_path(monkeypatch):
    # Two implementations of one linear operator must agree to rounding (self-consistency; no outside value).
    g = Grid(17, 9, 1.0, 1.2)
    a = np.random.default_rng(4).random(g.n_elements)
    sparse = SensitivityFilter(g, 3.3)
    monkeypatch.setattr(limits, "FILTER_SPARSE_LIMIT", -1)
    fft = SensitivityFilter(g, 3.3)
    assert sparse.matrix is not None and fft.matrix is None
    assert np.allclose(sparse(a), fft(a), rtol=0, atol=1e-13)
    # Large grids keep the filter's two factors apart instead of their product: the same operator again.
    monkeypatch.setattr(limits, "FILTER_SPARSE_LIMIT", 200)
    monkeypatch.setattr(filters, "_PRODUCT_LIMIT", 0)
    apart = SensitivityFilter(g, 3.3)
    assert apart.matrix is None and apart._W is not None
    assert np.allclose(sparse(a), apart(a), rtol=0, atol=1e-13)


# --- mirror orbits ------------------------------------------------------------------------------------------

def test_mirror_map_and_orbits_on_a_small_grid():
    # 3 x 2 grid, elements numbered row by row from the bottom (toolkit.fe.grid): mirroring about the vertical
    # mid-line swaps columns 0 and 2; about the horizontal one swaps the rows. Counted by hand.
    g = Grid(3, 2, 1.0, 1.0)
    assert mirror_map(g, "x").tolist() == [2, 1, 0, 5, 4, 3]
    assert mirror_map(g, "y").tolist() == [3, 4, 5, 0, 1, 2]
    assert symmetry_orbits(g, "none").tolist() == [0, 1, 2, 3, 4, 5]
    assert symmetry_orbits(g, "x").tolist() == [0, 1, 0, 2, 3, 2]
    assert symmetry_orbits(g, "y").tolist() == [0, 1, 2, 0, 1, 2]
    assert symmetry_orbits(g, "xy").tolist() == [0, 1, 0, 0, 1, 0]


# --- design update ------------------------------------------------------------------------------------------

def test_update_keeps_the_most_sensitive():
    # BESO threshold rule (Huang & Xie 2009, Comput Mech 43:393-401): the n_target highest sensitivities stay.
    new = update_design(np.array([1.0, 5.0, 3.0, 2.0, 4.0]), np.ones(5, bool), np.ones(5, int), 3, 100)
    assert new.tolist() == [False, True, True, False, True]


def test_update_admission_cap():
    # Unconstrained, elements 0 and 1 (void) would both enter; a cap of one admits only the best of them
    # (element 0) and the removal threshold moves so the two best solid ones (2, 3) stay: 3 solid in all.
    # Admission-ratio rule of Huang & Xie 2009; worked by hand.
    alpha = np.array([5.0, 4.0, 3.0, 2.0, 1.0])
    solid = np.array([False, False, True, True, True])
    new = update_design(alpha, solid, np.ones(5, int), 3, 1)
    assert new.tolist() == [True, False, True, True, False]


def test_update_orbits_and_ties_are_deterministic():
    # Orbits of 2, 1 and 2 elements, target 3 elements: the best orbit (1 element) and the next (2) make 3.
    new = update_design(np.array([1.0, 3.0, 2.0]), np.ones(3, bool), np.array([2, 1, 2]), 3, 10)
    assert new.tolist() == [False, True, True]
    # Target 2 from orbits of 1 then 2: 1 and 3 are equally near; the smaller volume is taken.
    new = update_design(np.array([3.0, 2.0]), np.ones(2, bool), np.array([1, 2]), 2, 10)
    assert new.tolist() == [True, False]
    # Equal sensitivities: the lower index wins, so repeated runs agree.
    tie = update_design(np.ones(4), np.ones(4, bool), np.ones(4, int), 2, 10)
    assert tie.tolist() == [True, True, False, False]


def test_next_volume_and_convergence():
    # V_{k+1} = max(V*, V_k (1 - ER)) (Huang & Xie 2009).
    assert next_volume(1.0, 0.5, 0.02) == pytest.approx(0.98)
    assert next_volume(0.505, 0.5, 0.02) == 0.5
    assert next_volume(0.4, 0.5, 0.02) == pytest.approx(0.408)
    # Converged when |sum of last N - sum of N before| <= tol * sum of last N (Huang & Xie 2007).
    assert has_converged([10.0, 10.0, 10.0, 10.0], 2, 1e-3)
    assert not has_converged([10.0, 10.0, 10.0, 10.1], 2, 1e-3)  # 0.5 % change
    assert not has_converged([10.0, 10.0, 10.0], 2, 1e-3)  # too short a history


# --- settings -----------------------------------------------------------------------------------------------

def test_settings_defaults_are_the_published_ones():
    # Huang & Xie 2009/2010 (from memory, see docs/references.md): p = 3, x_min = 0.001, ER = AR = 2 %,
    # convergence 0.1 % over windows of 5.
    s = OptimizeSettings()
    assert (s.penalty, s.void_density, s.evolution_rate, s.admission_ratio) == (3.0, 1e-3, 0.02, 0.02)
    assert (s.convergence_tolerance, s.convergence_window) == (0.001, 5)


@pytest.mark.parametrize("bad", [0.0, -0.1, 1.01, float("nan"), "half"])
def test_volume_fraction_outside_0_1(bad):
    with pytest.raises(LacunaError) as e:
        OptimizeSettings(volume_fraction=bad)
    assert e.value.where == "[optimize] volume_fraction" and e.value.hint


@pytest.mark.parametrize(
    "key, bad",
    [("evolution_rate", 0.0), ("evolution_rate", 1.0), ("filter_radius_mm", -3.0), ("symmetry", "z"),
     ("max_iterations", 0), ("max_iterations", 2.5), ("penalty", 0.5), ("void_density", 0.0),
     ("admission_ratio", 0.0), ("convergence_tolerance", -1.0), ("convergence_window", 0)],
)
def test_other_bad_settings(key, bad):
    with pytest.raises(LacunaError) as e:
        OptimizeSettings(**{key: bad})
    assert e.value.where.startswith("[optimize]") and e.value.hint


def test_bad_zone_widths():
    with pytest.raises(LacunaError) as e:
        ZoneSettings(edge_cover_mm=-1.0)
    assert e.value.where == "[rules] edge_cover"
