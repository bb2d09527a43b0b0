"""Progress of a run on the terminal: a live bar (rich) on a terminal, a plain line every few
seconds otherwise (log files, CI), nothing with ``quiet``; and :class:`StopRequest`, which turns
SIGINT / SIGTERM into a stop at the end of the current iteration.

The time left is estimated from the recent decay of the largest normalised imbalance: with the
least-squares slope s of log10(residual) per iteration over the last iterations, the run needs
about (log10(tolerance) - log10(residual)) / s more iterations (when s < 0), never more than the
iteration limit allows; times the mean seconds per iteration of the recent iterations.
"""

from __future__ import annotations

import logging
import math
import signal
import sys
import time
from collections import deque
from collections.abc import Callable, Sequence
from typing import IO, Any

log = logging.getLogger(__name__)

#: iterations used for the decay rate and the seconds per iteration
WINDOW = 50
#: columns of a terminal line; the monitored quantity is shown only where it fits
LINE_WIDTH = 80


def format_seconds(s: float) -> str:
    """``"42 s"``, ``"3 min 05 s"``, ``"2 h 07 min"``.

    >>> format_seconds(42.4), format_seconds(185), format_seconds(7620)
    ('42 s', '3 min 05 s', '2 h 07 min')
    """
    s = max(float(s), 0.0)
    if s < 60:
        return f"{s:.0f} s"
    if s < 3600:
        m, r = divmod(int(round(s)), 60)
        return f"{m} min {r:02d} s"
    h, r = divmod(int(round(s)), 3600)
    return f"{h} h {r // 60:02d} min"


class Estimate:
    """Iterations and seconds left, from the recent residual decay and iteration times."""

    def __init__(self, tolerance: float, last_iteration: int):
        self.log_tol = math.log10(tolerance)
        self.last_iteration = int(last_iteration)
        self.points: deque[tuple[int, float]] = deque(maxlen=WINDOW)
        self.times: deque[float] = deque(maxlen=WINDOW)

    def add(self, iteration: int, residuals: Sequence[float], seconds: float | None) -> None:
        worst = max((float(r) for r in residuals), default=float("nan"))
        if math.isfinite(worst) and worst > 0:
            self.points.append((iteration, math.log10(worst)))
        if seconds is not None and seconds >= 0:
            self.times.append(seconds)

    def iterations_left(self, iteration: int) -> tuple[int, bool]:
        """(iterations left, True if it is the iteration limit rather than the residual trend)."""
        limit = max(self.last_iteration - iteration, 0)
        pts = list(self.points)
        if len(pts) >= 5:
            n = len(pts)
            mx = sum(p[0] for p in pts) / n
            my = sum(p[1] for p in pts) / n
            sxx = sum((p[0] - mx) ** 2 for p in pts)
            slope = sum((p[0] - mx) * (p[1] - my) for p in pts) / sxx if sxx > 0 else 0.0
            if slope < 0:
                need = (self.log_tol - pts[-1][1]) / slope
                if need < limit:
                    return max(int(math.ceil(need)), 0), False
        return limit, True

    def seconds_per_iteration(self) -> float | None:
        return sum(self.times) / len(self.times) if self.times else None

    def text(self, iteration: int) -> str:
        left, at_limit = self.iterations_left(iteration)
        rate = self.seconds_per_iteration()
        if rate is None:
            return ""
        when = format_seconds(left * rate)
        return f"at most {when} left (iteration limit)" if at_limit else f"about {when} left"


class RunProgress:
    """Called after every outer iteration as ``progress(iteration, residuals)``.

    ``names``: residual names; ``first_iteration``: the iteration count a restarted run starts
    from; ``max_iterations``: iterations allowed to this run. ``stream``: default stderr. On a
    terminal a rich progress bar (iteration, bar, residuals, time left); elsewhere a plain line
    at the first iteration and then every ``every_s`` seconds; nothing when ``quiet``.
    ``watch()``: a short text of a monitored quantity (e.g. ``"plate.Cd 0.0028712"``), shown where
    the line has room for it within :data:`LINE_WIDTH` columns, in place of the seconds per
    iteration if need be.
    """

    def __init__(
        self,
        names: Sequence[str],
        max_iterations: int,
        tolerance: float,
        first_iteration: int = 0,
        quiet: bool = False,
        stream: IO[str] | None = None,
        every_s: float = 5.0,
        clock: Callable[[], float] = time.perf_counter,
        force_terminal: bool | None = None,
        watch: Callable[[], str] | None = None,
    ):
        self.names = list(names)
        self.watch = watch
        self.quiet = quiet
        self.stream = stream if stream is not None else sys.stderr
        self.first = int(first_iteration)
        self.total = self.first + int(max_iterations)
        self.every_s = float(every_s)
        self.clock = clock
        self.estimate = Estimate(tolerance, self.total)
        tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.tty = tty if force_terminal is None else force_terminal
        self.t_prev = clock()
        self.t_last_line = -math.inf
        self.last: tuple[int, list[float]] | None = None
        self.last_printed = -1
        self._bar: Any = None
        self._task: Any = None
        if not quiet and self.tty:
            self._start_bar()

    def _start_bar(self) -> None:
        from rich.console import Console
        from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

        console = Console(file=self.stream, force_terminal=True, highlight=False)
        self._bar = Progress(
            TextColumn("iteration"), MofNCompleteColumn(), BarColumn(bar_width=24), TextColumn("{task.fields[res]}"),
            TimeElapsedColumn(), TextColumn("{task.fields[eta]}"),
            console=console, transient=False, refresh_per_second=4, redirect_stdout=False, redirect_stderr=False,
        )
        self._task = self._bar.add_task("run", total=self.total, completed=self.first, res="", eta="")
        self._bar.start()

    def residual_text(self, residuals: Sequence[float]) -> str:
        return "  ".join(f"{n} {r:8.2e}" for n, r in zip(self.names, residuals))

    def line(self, iteration: int, residuals: Sequence[float]) -> str:
        """The plain progress line."""
        rate = self.estimate.seconds_per_iteration()
        parts = [f"iteration {iteration:6d}/{self.total}", self.residual_text(residuals)]
        if rate is not None:
            parts.append(f"{rate:.4f} s/iteration")
        eta = self.estimate.text(iteration)
        if eta:
            parts.append(eta)
        watched = self.watch() if self.watch is not None else ""
        if watched:
            # the monitored quantity goes where it fits, in place of the seconds per iteration if need be
            if len("  ".join(parts + [watched])) > LINE_WIDTH and rate is not None:
                parts.pop(2)
            if len("  ".join(parts + [watched])) <= LINE_WIDTH:
                parts.append(watched)
        return "  ".join(parts)

    def __call__(self, iteration: int, residuals: Sequence[float]) -> None:
        now = self.clock()
        dt = now - self.t_prev
        self.t_prev = now
        self.estimate.add(iteration, residuals, dt if iteration > self.first + 1 else None)
        self.last = (iteration, list(residuals))
        if self.quiet:
            return
        if self._bar is not None:
            res = self.residual_text(residuals)
            eta = self.estimate.text(iteration)
            watched = self.watch() if self.watch is not None else ""
            # the bar's other columns: "iteration n/N" (~20), the bar (24), elapsed time (~10)
            if watched and 54 + len(res) + len(eta) + 2 + len(watched) <= LINE_WIDTH:
                res = f"{res}  {watched}"
            self._bar.update(self._task, completed=iteration, res=res, eta=eta)
            return
        if iteration == self.first + 1 or now - self.t_last_line >= self.every_s:
            self._write_line(iteration, residuals)
            self.t_last_line = now

    def _write_line(self, iteration: int, residuals: Sequence[float]) -> None:
        self.stream.write(self.line(iteration, residuals) + "\n")
        self.stream.flush()
        self.last_printed = iteration

    def close(self) -> None:
        """End the display: the bar is filled to the last iteration; in plain mode the last
        iteration's line is written if it was not yet."""
        if self._bar is not None:
            if self.last is not None:
                self._bar.update(self._task, total=self.last[0], completed=self.last[0])
            self._bar.stop()
            self._bar = None
        elif not self.quiet and self.last is not None and self.last[0] != self.last_printed:
            self._write_line(*self.last)


class StopRequest:
    """SIGINT (Ctrl-C) and SIGTERM ask the run to stop at the end of the current iteration; a
    second signal aborts at once (KeyboardInterrupt, nothing more is written)."""

    SIGNALS = (signal.SIGINT, signal.SIGTERM)

    def __init__(self) -> None:
        self.signal_name: str | None = None
        self._old: dict[int, Any] = {}

    def install(self) -> None:
        try:
            for sig in self.SIGNALS:
                self._old[sig] = signal.signal(sig, self._handler)
        except ValueError:  # not the main thread: keep the default handlers
            self.restore()

    def restore(self) -> None:
        for sig, old in self._old.items():
            signal.signal(sig, old)
        self._old = {}

    def _handler(self, signum: int, frame: Any) -> None:
        if self.signal_name is not None:
            self.restore()
            raise KeyboardInterrupt
        self.signal_name = signal.Signals(signum).name
        log.warning("%s received: stopping after this iteration and saving the state (send it again to abort "
                    "without saving)", self.signal_name)

    def __call__(self, it: int, res: list[float]) -> bool:
        return self.signal_name is not None


__all__ = ["Estimate", "RunProgress", "StopRequest", "format_seconds"]
