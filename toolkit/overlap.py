"""Independent work of one job run side by side on two threads: the checks after the voids are made.

Once the voids to make are fixed, three pieces of work need nothing from each other: the limiting rule's refit
(shapely and numpy), the re-analyses (PARDISO or SuperLU, which release the GIL), and the local model of each
void (meshing, a sparse solve). The pipeline puts the refit and the local models on two worker threads and makes
the re-analyses on its own thread meanwhile, one after the other (one factorisation of the grid in memory at a
time). Measured on the 300 x 100-element bench plate, the 28 local models take 2.0 s in sequence and 1.3-1.4 s
on two threads; the checks as a whole went from 4.1 to 1.8 s (the refit also got cheaper, pipeline.py).
Threads, not processes, so that nothing is forked under a CAD host and nothing is pickled; every result is the
same as in sequence (each piece computes alone, in the same order of operations).

While the pool runs, BLAS and MKL are held to one thread (threadpoolctl): each solver holds them so for its own
calls, and the pool holds the limit around them all, so that one thread leaving its limit cannot lift another's
and the count the caller had is the one restored at the end. MKL keeps its count per calling thread, so each of
the pool's threads holds its own for its life.

``LACUNA_THREADS=1`` in the environment runs everything in sequence (as does a machine with one core).

Geometry is never shared between the threads: each piece of work takes its own copy (``own``). A shapely
geometry is not safe to use from two threads at once: a prepared one builds its search structures on first use,
and two local models doing so at once on a neighbour's outline crashed the process (a segmentation fault in
GEOS, seen in the test run of 2026-12-02).
"""

from __future__ import annotations

import copy
import os
from concurrent.futures import Future, ThreadPoolExecutor
from typing import Callable, Iterable, TypeVar

T = TypeVar("T")

THREADS_ENV = "LACUNA_THREADS"
# Two threads: the work is partly Python under the GIL, so a third adds little and a fourth takes cores from the
# other jobs of a batch.
MOST_THREADS = 2


def side_threads() -> int:
    """Threads for side-by-side work: two, unless the machine (or the process's CPU set) has one core, or
    ``LACUNA_THREADS`` says fewer."""
    try:
        cores = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):  # not on Linux
        cores = os.cpu_count() or 1
    wanted = os.environ.get(THREADS_ENV, "").strip()
    if wanted:
        try:
            cores = min(cores, max(1, int(wanted)))
        except ValueError:
            pass  # not a number: the environment is not ours to refuse; take the machine's count
    return max(1, min(MOST_THREADS, cores))


def own(value: T) -> T:
    """A deep copy of ``value`` for one thread's work: its shapely geometries new GEOS objects (from their WKB),
    shared with no other thread."""
    return copy.deepcopy(value)


def _one_blas_thread() -> None:
    # MKL keeps its thread count per calling thread (a new thread starts at the machine's count), OpenBLAS one for
    # the process: each worker holds its own to one for its life; the process-wide count is the pool's to restore.
    from threadpoolctl import ThreadpoolController

    ThreadpoolController().limit(limits=1, user_api="blas")


class Overlap:
    """``with Overlap() as work:`` ``work.submit(fn, ...)`` -> a Future, ``work.map(fn, items)`` -> a list; on
    one thread each piece runs when submitted (exceptions come out of ``result()`` as they would from a pool).
    Leaving the block waits for what runs and cancels what has not started."""

    def __init__(self, threads: int | None = None):
        self.threads = side_threads() if threads is None else max(1, int(threads))
        self._pool: ThreadPoolExecutor | None = None
        self._limit = None

    def __enter__(self) -> Overlap:
        if self.threads > 1:
            from threadpoolctl import ThreadpoolController

            self._limit = ThreadpoolController().limit(limits=1, user_api="blas")
            self._pool = ThreadPoolExecutor(self.threads, thread_name_prefix="lacuna", initializer=_one_blas_thread)
        return self

    def __exit__(self, kind, error, trace) -> None:
        try:
            if self._pool is not None:
                self._pool.shutdown(wait=True, cancel_futures=error is not None)
        finally:
            self._pool = None
            if self._limit is not None:
                self._limit.restore_original_limits()
                self._limit = None

    def submit(self, fn: Callable[..., T], *args, **kwargs) -> Future:
        if self._pool is not None:
            return self._pool.submit(fn, *args, **kwargs)
        done: Future = Future()
        try:
            done.set_result(fn(*args, **kwargs))
        except Exception as exc:  # noqa: BLE001 - handed to the caller through result(), as a pool would
            done.set_exception(exc)
        return done

    def map(self, fn: Callable[..., T], items: Iterable) -> list[T]:
        """``[fn(item) for item in items]``, in that order, the items shared among the threads."""
        futures = [self.submit(fn, item) for item in items]
        return [f.result() for f in futures]
