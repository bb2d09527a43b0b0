"""Watching numba compile the kernels (whether a run compiles at all, and how long it takes), and
the number of threads the kernels run on.

The kernels are compiled on their first call and cached on disk (``@njit(cache=True)``); a
kernel loaded from the cache is not compiled again. numba announces each real compilation with
its ``numba:compile`` event (``numba.core.event``; loads from the cache raise none), so
:class:`CompileWatch` knows for certain that this run compiles (a cold cache: first run, new
fvrans version, new numba) and adds up the seconds the outermost compilations take.

Threads: the kernels marked ``parallel=True`` spread their large loops over ``threads()`` threads;
:func:`set_threads` chooses how many: the ``[solver] threads`` key of a case, else the environment
variable ``FVRANS_THREADS``, else every core that other processes leave idle (see
:func:`idle_cores`), at most the cores numba sees (``NUMBA_NUM_THREADS``).
"""

from __future__ import annotations

import math
import os
import threading
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any

#: the OpenMP threads of numba's parallel loops (its "omp" threading layer) wait for work asleep, not
#: spinning, unless the environment says otherwise: set here, before numba starts them. Spinning after each of
#: the hundreds of parallel loops of an iteration, the second thread took the core that the first (or another
#: process) needed: cavity 128^2, simultaneous path, 2 threads on the shared machine (load 4): 1.70 s per outer
#: iteration and 1.04 CPU s spinning, 0.25 s and 0.18 CPU s asleep, 0.31 s and 0.17 CPU s on one thread
OMP_WAIT_POLICY = os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")
#: ... but first they spin this many times (GNU OpenMP's ``GOMP_SPINCOUNT``, a few tens of microseconds),
#: unless the environment says otherwise: asleep at once, each of the hundreds of short parallel loops of an
#: iteration waited for the kernel to wake the second thread, and two threads gained little over one. Idle
#: machine, simultaneous path, iterative solve, whole runs, 1 thread / 2 asleep at once / 2 with this spin:
#: cavity 256^2 6.1-6.6 / 5.1-5.6 / 4.5-5.2 s, fine plate 13.0-14.4 / 12.4 / 10.3-11.7 s (2026-12-03). Beside a
#: process that keeps the other core busy the spin cost 27 % (cavity 256^2 8.5 s against 6.7 on one thread):
#: a run that finds its second thread without a core goes on with one (``SimpleSolver``: ``SHARED_CORE_USE``)
THREAD_SPIN = os.environ.setdefault("GOMP_SPINCOUNT", "3000")

#: what a run says once when it starts compiling (the terminal would otherwise sit silent)
COMPILE_MESSAGE = ("compiling the numerical kernels: this run is the first (or the first since fvrans or numba "
                   "changed); they are cached for later runs, and the compile time is kept out of the solve time")


#: the environment variable that sets the number of threads when the case does not
THREADS_VARIABLE = "FVRANS_THREADS"
#: loops over fewer cells (rows, faces) than this run on one thread: starting the threads of a
#: parallel loop costs ~5-20 us on an idle core and up to milliseconds when another process holds
#: it, a memory-bound cell ~5-20 ns (numba freezes these into the cached kernels: clear the cache,
#: or touch the kernel modules, after changing them)
PARALLEL_MIN_CELLS = 16384
#: the same for loops with much work per cell (model sources with exp / pow, ~100 ns per cell)
PARALLEL_MIN_HEAVY = 2048


def available_threads() -> int:
    """The most threads the kernels can use: the cores numba found (``NUMBA_NUM_THREADS``)."""
    import numba

    return int(numba.config.NUMBA_NUM_THREADS)


def threads() -> int:
    """The number of threads the parallel kernels use now (in the calling thread)."""
    import numba

    return int(numba.get_num_threads())


def idle_cores() -> int:
    """Cores not busy with other processes: the cores numba sees less the 1-minute load average
    that is not this process's own (its CPU share since fvrans was imported, at most 1, times the
    part of the minute it has been running), at least 1.

    A parallel loop waits for its slowest thread: where another process holds a core, each of the
    hundreds of loops of an iteration waits for the scheduler to hand the core back (a few ms), and
    two threads ran 6-8 times slower than one (channel of 17k cells, load average 5 on 2 cores);
    on an idle core the wait is ~10 us."""
    most = available_threads()
    try:
        load = os.getloadavg()[0]
    except (AttributeError, OSError):  # pragma: no cover - not on this platform
        return most
    elapsed = max(time.perf_counter() - _STARTED, 1e-9)
    own = min(1.0, (time.process_time() - _STARTED_CPU) / elapsed) * (1.0 - math.exp(-elapsed / 60.0))
    return max(1, min(most, int(most - max(load - own, 0.0) + 0.5)))


_STARTED = time.perf_counter()
_STARTED_CPU = time.process_time()


def _given_threads(n: int | None) -> int:
    """The thread count the user gave: ``n`` when positive, else ``FVRANS_THREADS`` when set, else 0. A
    ``FVRANS_THREADS`` that is not a whole number is refused (CaseError naming the variable: it is part of
    the run's input)."""
    if n is not None and int(n) > 0:
        return int(n)
    text = os.environ.get(THREADS_VARIABLE, "").strip()
    if not text:
        return 0
    try:
        return int(text)
    except ValueError:
        from fvrans.errors import CaseError

        raise CaseError(
            f"environment variable {THREADS_VARIABLE}={text!r} is not a whole number: give the number of "
            f"threads (1 to {available_threads()}) or leave it unset to use every core"
        ) from None


def requested_threads(n: int | None = None) -> int:
    """The thread count asked for: ``n`` when positive, else ``FVRANS_THREADS`` when set and
    positive, else :func:`idle_cores`; capped at :func:`available_threads`. A ``FVRANS_THREADS`` that is not
    a whole number is refused (CaseError naming the variable: it is part of the run's input)."""
    k = _given_threads(n)
    return idle_cores() if k <= 0 else min(k, available_threads())


def threads_from_idle_cores(n: int | None = None) -> bool:
    """Whether :func:`requested_threads` takes the idle cores: neither ``n`` nor ``FVRANS_THREADS`` gives a
    positive count (a count the user gave is kept for the whole run; the idle cores' is watched)."""
    return _given_threads(n) <= 0


def set_threads(n: int | None = None) -> int:
    """Make the parallel kernels use ``requested_threads(n)`` threads (in the calling thread, as
    ``numba.set_num_threads``); returns that number."""
    import numba

    k = requested_threads(n)
    numba.set_num_threads(k)
    return k


@contextmanager
def one_blas_thread() -> Iterator[None]:
    """Inside: the BLAS library under numpy and scipy (OpenBLAS, MKL) on one thread, restored after
    (``threadpoolctl``). The solvers' threads are their kernels' (``set_threads``); a BLAS pool of its
    own beside them spins on the cores those need: on two idle cores the simultaneous path ran a
    13k-cell plate iteration in 0.094 s on one kernel thread and 0.130 s on two, with 1.8 cores busy
    either way; with BLAS on one thread 0.098 and 0.099 s (benchmarks/bench_coupled.py --cost)."""
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=1, user_api="blas"):
        yield


class CompileWatch:
    """Context manager: ``seconds`` spent compiling kernels inside it and ``count`` of kernels
    compiled; ``on_first()`` is called when the first compilation starts (once)."""

    def __init__(self, on_first: Callable[[], None] | None = None):
        self.on_first = on_first
        self.seconds = 0.0
        self.count = 0
        self._depth = 0
        self._t0 = 0.0
        self._listener: Any = None
        self._thread = threading.get_ident()

    def _start(self, event: Any) -> None:
        if threading.get_ident() != self._thread:
            return
        if self._depth == 0:
            self._t0 = time.perf_counter()
            if self.count == 0 and self.on_first is not None:
                self.on_first()
        self._depth += 1
        self.count += 1

    def _end(self, event: Any) -> None:
        if threading.get_ident() != self._thread or self._depth == 0:
            return
        self._depth -= 1
        if self._depth == 0:
            self.seconds += time.perf_counter() - self._t0

    def __enter__(self) -> CompileWatch:
        try:
            from numba.core import event as ev
        except ImportError:  # pragma: no cover - numba is a dependency
            return self
        watch = self

        class _Listener(ev.Listener):
            def on_start(self, event: Any) -> None:
                watch._start(event)

            def on_end(self, event: Any) -> None:
                watch._end(event)

        self._listener = _Listener()
        ev.register("numba:compile", self._listener)
        return self

    def __exit__(self, *exc: Any) -> None:
        if self._listener is not None:
            from numba.core import event as ev

            ev.unregister("numba:compile", self._listener)
            self._listener = None


__all__ = ["COMPILE_MESSAGE", "OMP_WAIT_POLICY", "PARALLEL_MIN_CELLS", "PARALLEL_MIN_HEAVY", "THREADS_VARIABLE",
           "THREAD_SPIN", "CompileWatch", "available_threads", "idle_cores", "one_blas_thread", "requested_threads",
           "set_threads", "threads", "threads_from_idle_cores"]
