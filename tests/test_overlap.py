"""Side-by-side work (toolkit/overlap.py): the same results as in sequence, errors handed back, BLAS's thread
count restored, and LACUNA_THREADS=1 runs everything in sequence."""

from __future__ import annotations

import threading

import numpy as np
import pytest
import scipy.sparse as sp
from threadpoolctl import threadpool_info

from toolkit.fe.solve import solve_spd
from toolkit.overlap import MOST_THREADS, THREADS_ENV, Overlap, side_threads


def _blas_threads() -> list[int]:
    return [lib["num_threads"] for lib in threadpool_info() if lib["user_api"] == "blas"]


def test_map_keeps_the_order_and_runs_on_the_pool_threads():
    seen = set()

    def square(k):
        seen.add(threading.current_thread().name)
        return k * k

    with Overlap(threads=2) as work:
        assert work.map(square, range(40)) == [k * k for k in range(40)]
    assert all(name.startswith("lacuna") for name in seen)


def test_one_thread_runs_each_piece_in_the_callers_thread():
    seen = []
    with Overlap(threads=1) as work:
        got = work.map(lambda k: seen.append(threading.current_thread()) or k + 1, [1, 2, 3])
    assert got == [2, 3, 4]
    assert seen == [threading.current_thread()] * 3


@pytest.mark.parametrize("threads", [1, 2])
def test_an_error_comes_out_of_result(threads):
    def fails():
        raise ValueError("no room")

    with Overlap(threads=threads) as work:
        job = work.submit(fails)
        with pytest.raises(ValueError, match="no room"):
            job.result()


def test_blas_is_held_to_one_thread_inside_and_given_back_after():
    # A small solve first, so that MKL (PARDISO's library, where it installs) is loaded and counted too: it keeps
    # its thread count per calling thread, OpenBLAS one for the process.
    solve_spd(sp.identity(3, format="csc") * 2.0, np.ones(3))
    before = _blas_threads()
    if not before:
        pytest.skip("no BLAS library that threadpoolctl can see")
    with Overlap(threads=2) as work:
        inside = work.map(lambda _: _blas_threads(), range(4))
    assert all(n == 1 for counts in inside for n in counts)
    assert _blas_threads() == before


def test_the_environment_can_ask_for_sequence(monkeypatch):
    monkeypatch.setenv(THREADS_ENV, "1")
    assert side_threads() == 1
    assert Overlap().threads == 1
    monkeypatch.setenv(THREADS_ENV, "not a number")
    assert 1 <= side_threads() <= MOST_THREADS
    monkeypatch.delenv(THREADS_ENV)
    assert 1 <= side_threads() <= MOST_THREADS


def test_own_gives_each_thread_geometry_of_its_own():
    # Shapely geometries must not be used by two threads at once (a prepared one builds its search structures on
    # first use): each piece of side work takes a deep copy, equal in value, a different GEOS object.
    import shapely
    from shapely.geometry import Polygon

    from toolkit.overlap import own

    shape = Polygon([(0, 0), (4, 0), (4, 3)])
    shapely.prepare(shape)
    value = {"voids": (shape,), "n": 3}
    copied = own(value)
    assert copied == value and copied["voids"][0] is not shape
    assert copied["voids"][0].equals(shape) and not shapely.is_prepared(copied["voids"][0])
