"""A second process for the void stage's fits, where the machine has a second core and the caller allows one.

Fitting voids is Python and GEOS work, most of it under the GIL: two threads on the candidates of the 3000 x
1000 bench plate took 3.2 s against 3.4 s on one (2026-12-02), so threads (overlap.py) do not serve here. Each
freeform void's candidates are a pure function of picklable inputs (its room, the settings, the worth of a
layout), so a second process can take some of them while this one takes the rest: ``share_out`` hands the
heaviest first to this process and the lightest to the helper, each taking the next when it is free, and every
answer is the one this process would have computed (the same code on the same coordinates: shapely pickles a
geometry as its WKB, to the bit).

When a helper is started:

- only when the caller asks (``pipeline.optimize_panel(helper=True)``; the ``lacuna`` commands do). A process
  is started with ``spawn``, which runs the caller's main script again in the child unless it keeps its work
  under ``if __name__ == "__main__":``; a CAD host's script cannot be assumed to, so the API leaves it off;
- not with one core, nor with ``LACUNA_THREADS=1`` in the environment (overlap.py), nor inside a daemonic
  process (a Dask worker of ``lacuna batch`` or ``sweep``, which keep the cores busy already), nor where
  ``sys.executable`` is not a Python interpreter (a frozen program or a host embedding Python);
- not for a small grid (``pipeline.HELPER_MIN_ELEMENTS``), where its start costs about what it saves.

The helper starts at the beginning of the job, so that its imports (about a second of CPU) run on the second
core while the optimiser runs on the first; work goes to it only once it answered its first call, so a short job
never waits for it; one still starting when the job is done is stopped. It ignores Ctrl-C (the job's own
process stops and drops it); it holds BLAS to one thread.
Any failure in it (a broken process, an answer that cannot be pickled) only means that piece is computed here.
"""

from __future__ import annotations

import multiprocessing
import os
import re
import sys
import threading
from concurrent.futures import Future
from typing import Callable, Hashable

from .overlap import side_threads

_PYTHON = re.compile(r"python(w)?(\d+(\.\d+)*)?(\.exe)?", re.IGNORECASE)


def _start_worker(modules: tuple[str, ...]) -> None:
    """Run in the helper as it starts: Ctrl-C is the job's to handle; BLAS on one thread; the code it will run
    (``modules``, named by the caller) imported now, while the job's own process runs the optimiser."""
    import importlib
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    from threadpoolctl import ThreadpoolController

    ThreadpoolController().limit(limits=1, user_api="blas")
    for name in modules:
        importlib.import_module(name)


def _ping() -> bool:
    return True


def may_start() -> str:
    """"" when a helper process may be started here, else why not (in words)."""
    if side_threads() < 2:
        return "one core (or LACUNA_THREADS=1)"
    if multiprocessing.current_process().daemon:
        return "inside a daemonic process"
    if getattr(sys, "frozen", False) or not _PYTHON.fullmatch(os.path.basename(sys.executable or "")):
        return "sys.executable is not a Python interpreter"
    return ""


class Helper:
    """``with Helper(wanted) as helper:`` one helper process for the block (``helper.ready`` False and nothing
    started when it is not wanted or may not start here). Leaving the block drops it without waiting for work
    it has not begun."""

    def __init__(self, wanted: bool = True, modules: tuple[str, ...] = ()):
        """``modules``: what the work handed over will need, imported as the process starts."""
        self.modules = tuple(modules)
        self._pool = None
        self._first: Future | None = None
        self._pending: set = set()  # work handed over and not yet done
        self.sent = 0  # pieces of work handed to the process
        self.why_not = "not asked for" if not wanted else may_start()

    def __enter__(self) -> Helper:
        if not self.why_not:
            from concurrent.futures import ProcessPoolExecutor

            try:
                self._pool = ProcessPoolExecutor(1, mp_context=multiprocessing.get_context("spawn"),
                                                 initializer=_start_worker, initargs=(self.modules,))
                self._first = self._pool.submit(_ping)
            except (OSError, RuntimeError, ValueError) as error:  # no process could be made: work here alone
                self.why_not = f"could not start: {error}"
                self._pool = None
        return self

    def __exit__(self, kind, error, trace) -> None:
        # Waited for when it is answering and the block ended well (it is idle: everything handed over was
        # collected). One still starting (a short job) or busy (an error here) is stopped: nothing it could still
        # do is wanted, and the interpreter would otherwise wait for it at exit.
        pool, self._pool = self._pool, None
        if pool is None:
            return
        if error is None and self._first is not None and self._first.done():
            pool.shutdown(wait=True, cancel_futures=True)
            return
        # ProcessPoolExecutor names no public way to stop its workers before Python 3.14's terminate_workers
        stop = getattr(pool, "terminate_workers", None)
        if stop is not None:
            stop()
            return
        for process in list((getattr(pool, "_processes", None) or {}).values()):
            process.terminate()
        pool.shutdown(wait=False, cancel_futures=True)

    @property
    def ready(self) -> bool:
        """Started and answering (its imports done)."""
        first = self._first
        return self._pool is not None and first is not None and first.done() and first.exception() is None

    @property
    def idle(self) -> bool:
        """Ready, with nothing handed over still to do: work given now starts at once, not behind other work (the
        process takes one piece at a time, in the order given)."""
        return self.ready and not self._pending

    def submit(self, fn: Callable, *args, **kwargs) -> Future:
        if self._pool is None:
            raise RuntimeError("the helper process is not running")
        future = self._pool.submit(fn, *args, **kwargs)
        self.sent += 1
        self._pending.add(future)
        future.add_done_callback(self._pending.discard)
        return future


# Analyses handed to the helper (the freeform layout's re-analysis, the honeycomb's cut-down to the stiffness cap)
# make it hold a factor of the grid beside the job's own: at 600 x 200 elements 0.3 GB against the job's 0.9 GB
# peak, at a million elements gigabytes more. So only on grids of at most this many elements, and only where the
# memory free when one would be sent holds it.
ANALYSIS_MAX_ELEMENTS = 300_000


def room_for_analysis_elsewhere(grid) -> bool:
    """Whether the memory free now (this process's own already taken) holds the helper's analysis of ``grid``
    (``limits.peak_memory_bytes``, an analysis; the job's own check counted this process alone)."""
    from .limits import available_memory_bytes, peak_memory_bytes

    return available_memory_bytes() >= peak_memory_bytes(grid.nx, grid.ny, grid.dx, grid.dy, stage="analysis")


def analysis_fits_elsewhere(grid) -> bool:
    """Whether an analysis of ``grid`` may be handed to the helper process (size and free memory, above)."""
    return grid.n_elements <= ANALYSIS_MAX_ELEMENTS and room_for_analysis_elsewhere(grid)


def share_out(helper: Helper | None, fn: Callable, tasks: dict[Hashable, tuple],
              cost: Callable[[Hashable], float] | None = None, busy_ok: bool = False) -> dict:
    """``{key: fn(*tasks[key])}``, in the order of ``tasks``. With an idle ``helper`` the tasks are shared: this
    process takes them from the costliest down (by ``cost``), the helper from the cheapest up, two at a time in
    flight so that it never waits for the next, one once no more than two are left (a task queued there cannot
    be taken back once this process runs out); a task the helper could not do is done here. ``fn`` must be a
    module-level function and the tasks picklable. ``busy_ok``: share with a ready helper that still has work
    (given by the caller, who knows it is short): its tasks wait behind that work, and those it has not begun
    when this process runs out are done here."""
    keys = list(tasks)
    if helper is None or not (helper.ready if busy_ok else helper.idle) or len(keys) < 2:
        return {k: fn(*tasks[k]) for k in keys}
    order = sorted(keys, key=lambda k: -cost(k)) if cost is not None else keys
    lock = threading.Lock()
    state = {"front": 0, "back": len(order) - 1, "stop": False, "flying": 0}
    remote: dict = {}

    def landed(_) -> None:
        with lock:
            state["flying"] -= 1
        send()

    def send() -> None:
        with lock:
            left = state["back"] - state["front"] + 1
            if state["stop"] or left <= 0 or (state["flying"] >= 1 and left <= 2):
                return
            k = order[state["back"]]
            try:
                future = helper.submit(fn, *tasks[k])
            except Exception:  # noqa: BLE001 - a broken or closed helper: the rest is done here
                state["stop"] = True
                return
            state["back"] -= 1
            state["flying"] += 1
            remote[k] = future
        future.add_done_callback(landed)

    send()
    send()
    out = {}
    while True:
        with lock:
            if state["front"] > state["back"]:
                state["stop"] = True
                break
            k = order[state["front"]]
            state["front"] += 1
        out[k] = fn(*tasks[k])
    with lock:
        sent = dict(remote)
    for k, future in sent.items():
        if future.cancel():  # not begun there: done here at once rather than waited for
            out[k] = fn(*tasks[k])
            continue
        try:
            out[k] = future.result()
        except Exception:  # noqa: BLE001 - anything the helper could not do (pickling, a lost process) is done here
            out[k] = fn(*tasks[k])
    return {k: out[k] for k in keys}


def result_or(future: Future | None, fn: Callable, *args, **kwargs):
    """``future``'s result, or ``fn(*args, **kwargs)`` here when there is no future or the helper failed."""
    if future is not None:
        try:
            return future.result()
        except Exception:  # noqa: BLE001 - done here instead
            pass
    return fn(*args, **kwargs)
