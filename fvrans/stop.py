"""Stop requests (SIGINT / Ctrl-C, SIGTERM) of a command, by phase of its work.

A command installs one :class:`StopRequest` for its whole life and moves it through phases:

* ``"start-up"`` (reading the case, building the mesh): a signal stops at once with
  :class:`Stopped` (nothing has been written; exit status 128 + signal number);
* ``"solving"``: the first signal asks the run to stop at the end of the current iteration (the
  loop asks :meth:`StopRequest.__call__`); a second one stops at once with :class:`Stopped`;
* ``"writing"`` (the outputs of a run): signals are only recorded, so that the outputs are
  written whole; :func:`holding_stops` enters this phase for a block of code;
* ``"plotting"``: recorded too; the plotting loop asks :meth:`StopRequest.requested` between
  figures and skips the rest.

Temporary files are removed on every exit path by the writers' own clean-up
(:func:`fvrans.post.writers.atomic_path`), which :class:`Stopped` runs through like any exception.
"""

from __future__ import annotations

import contextlib
import logging
import signal
from collections.abc import Iterator
from typing import Any

log = logging.getLogger(__name__)

PHASES = ("start-up", "solving", "writing", "plotting")
#: phases in which a (first) signal is only recorded
_DEFERRING = ("writing", "plotting")


class Stopped(BaseException):  # noqa: N818 - like KeyboardInterrupt, not an error of the program
    """A stop request that ends the command at once (start-up, or a second request while solving)."""

    def __init__(self, signal_name: str, phase: str):
        super().__init__(f"stopped by {signal_name} during {phase}")
        self.signal_name = signal_name
        self.phase = phase

    @property
    def exit_status(self) -> int:
        """128 + the signal number, as a shell reports a process ended by that signal."""
        return 128 + int(signal.Signals[self.signal_name])


_active: StopRequest | None = None


class StopRequest:
    """SIGINT and SIGTERM handling of a command (see the module docstring for the phases)."""

    SIGNALS = (signal.SIGINT, signal.SIGTERM)

    def __init__(self, phase: str = "start-up") -> None:
        self.phase = phase
        #: the first signal received (its name), None before any
        self.signal_name: str | None = None
        #: the phase in which the first signal arrived
        self.signal_phase: str | None = None
        self.count = 0
        self._old: dict[int, Any] = {}

    # -- installing -------------------------------------------------------------------------
    def install(self) -> StopRequest:
        global _active
        try:
            for sig in self.SIGNALS:
                self._old[sig] = signal.signal(sig, self._handler)
        except ValueError:  # not the main thread: keep the default handlers
            self.restore()
            return self
        _active = self
        return self

    def restore(self) -> None:
        global _active
        for sig, old in self._old.items():
            signal.signal(sig, old)
        self._old = {}
        if _active is self:
            _active = None

    def __enter__(self) -> StopRequest:
        return self.install()

    def __exit__(self, *exc: Any) -> None:
        self.restore()

    # -- the handler --------------------------------------------------------------------------
    def _handler(self, signum: int, frame: Any) -> None:
        name = signal.Signals(signum).name
        self.count += 1
        first = self.signal_name is None
        if first:
            self.signal_name, self.signal_phase = name, self.phase
        if self.phase == "start-up" or (self.phase == "solving" and not first):
            raise Stopped(name, self.phase)
        if self.phase == "solving":
            log.warning("%s received: stopping after this iteration and saving the state (send it again to "
                        "stop at once without saving)", name)
        elif first:
            log.warning("%s received while %s: finishing the files being written first", name, self.phase)

    # -- asked by the loops ---------------------------------------------------------------------
    def requested(self) -> bool:
        """True once a stop was requested."""
        return self.signal_name is not None

    def __call__(self, it: int, res: list[float]) -> bool:
        """The solver callback: True (stop) once a stop was requested."""
        return self.requested()

    def enter(self, phase: str) -> None:
        if phase not in PHASES:
            raise ValueError(f"unknown phase {phase!r}; one of {PHASES}")
        self.phase = phase


def active() -> StopRequest | None:
    """The StopRequest installed by the running command, if any."""
    return _active


@contextlib.contextmanager
def holding_stops() -> Iterator[None]:
    """Record stop requests without acting on them while the block runs (a set of output files
    being put in place); the phase before is restored afterwards."""
    req = _active
    if req is None or req.phase in _DEFERRING:
        yield
        return
    before = req.phase
    req.phase = "writing"
    try:
        yield
    finally:
        req.phase = before
    if req.requested() and before == "start-up":
        raise Stopped(req.signal_name or "SIGINT", before)


__all__ = ["PHASES", "StopRequest", "Stopped", "active", "holding_stops"]
