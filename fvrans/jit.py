"""Watching numba compile the kernels: whether a run compiles at all, and how long it takes.

The kernels are compiled on their first call and cached on disk (``@njit(cache=True)``); a
kernel loaded from the cache is not compiled again. numba announces each real compilation with
its ``numba:compile`` event (``numba.core.event``; loads from the cache raise none), so
:class:`CompileWatch` knows for certain that this run compiles (a cold cache: first run, new
fvrans version, new numba) and adds up the seconds the outermost compilations take.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable
from typing import Any

#: what a run says once when it starts compiling (the terminal would otherwise sit silent)
COMPILE_MESSAGE = ("compiling the numerical kernels: this run is the first (or the first since fvrans or numba "
                   "changed); they are cached for later runs, and the compile time is kept out of the solve time")


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


__all__ = ["COMPILE_MESSAGE", "CompileWatch"]
