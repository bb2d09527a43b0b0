"""Progress of a run on the terminal: a live bar (rich) on a terminal, a plain line every few
seconds otherwise (log files, CI), nothing with ``quiet``. (:class:`StopRequest`, which turns
SIGINT / SIGTERM into a stop at the end of the current iteration, lives in :mod:`fvrans.stop`.)

The time left is estimated from the recent decay of the largest normalised imbalance: with the
least-squares slope s of log10(residual) per iteration over the last iterations, the run needs
about (log10(tolerance) - log10(residual)) / s more iterations (when s < 0), never more than the
iteration limit allows; times the mean seconds per iteration of the recent iterations.
"""

from __future__ import annotations

import io
import logging
import math
import sys
import time
from collections import deque
from collections.abc import Callable, Sequence
from typing import IO, Any

from fvrans.stop import StopRequest

log = logging.getLogger(__name__)

#: iterations used for the decay rate and the seconds per iteration
WINDOW = 50


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


def fit_line(
    iteration: int, total: int, names: Sequence[str], residuals: Sequence[float], rate: float | None,
    eta: str, width: int, watched: str = "",
) -> str:
    """The progress text, fitted into ``width`` characters by dropping fields by priority.

    In order of what goes first: the seconds per iteration, then the long words (``iteration``
    becomes ``it``, residual names are cut to four letters, ``about``/``at most`` become ``~``/``<=``),
    then the monitored quantity ``watched`` (e.g. ``"plate.Cd 0.0028712"``), then the time left,
    then every residual but the largest; the iteration count stays.

    >>> fit_line(12, 500, ["u", "continuity"], [1e-3, 2e-4], 0.01, "about 5 s left", 100)
    'iteration     12/500  u 1.00e-03  continuity 2.00e-04  0.0100 s/iteration  about 5 s left'
    >>> fit_line(12, 500, ["u", "continuity"], [1e-3, 2e-4], 0.01, "about 5 s left", 40)
    'it 12/500  u 1.0e-03  cont 2.0e-04'
    >>> fit_line(12, 500, ["u", "continuity"], [1e-3, 2e-4], 0.01, "about 5 s left", 80, "wall.Cd 0.01234")
    'it 12/500  u 1.0e-03  cont 2.0e-04  ~5 s left  wall.Cd 0.01234'
    """
    width = max(int(width), 20)
    count = f"{iteration:6d}/{total}"
    full = "  ".join(f"{n} {r:8.2e}" for n, r in zip(names, residuals))
    short = "  ".join(f"{n[:4]} {r:.1e}" for n, r in zip(names, residuals))
    eta_short = eta.replace("about ", "~").replace("at most ", "<=").replace(" (iteration limit)", " (limit)")
    vals = [float(r) for r in residuals]
    worst = ""
    if vals:
        k = max(range(len(vals)), key=lambda i: vals[i] if math.isfinite(vals[i]) else math.inf)
        worst = f"max {names[k][:4]} {vals[k]:.1e}"
    rate_text = f"{rate:.4f} s/iteration" if rate is not None else ""
    candidates = (
        [f"iteration {count}", full, rate_text, eta, watched],
        [f"iteration {count}", full, eta, watched],
        [f"it {iteration}/{total}", short, eta_short, watched],
        [f"iteration {count}", full, rate_text, eta],
        [f"iteration {count}", full, eta],
        [f"it {iteration}/{total}", short, eta_short],
        [f"it {iteration}/{total}", short],
        [f"it {iteration}/{total}", worst, eta_short],
        [f"it {iteration}/{total}", worst],
    )
    for parts in candidates:
        text = "  ".join(p for p in parts if p)
        if len(text) <= width:
            return text
    return text[:width]


def terminal_width(stream: IO[str] | None = None, default: int = 80) -> int:
    """Columns of the terminal behind ``stream`` (``COLUMNS`` if set), else ``default``."""
    import os
    import shutil

    env = os.environ.get("COLUMNS", "")
    if env.isdigit() and int(env) > 0:
        return int(env)
    try:
        fd = stream.fileno() if stream is not None else sys.stderr.fileno()
        return os.get_terminal_size(fd).columns or default
    except (AttributeError, OSError, ValueError, io.UnsupportedOperation):
        return shutil.get_terminal_size((default, 24)).columns if stream is None else default


class RunProgress:
    """Called after every outer iteration as ``progress(iteration, residuals)``.

    ``names``: residual names; ``first_iteration``: the iteration count a restarted run starts
    from; ``max_iterations``: iterations allowed to this run. ``stream``: default stderr. On a
    terminal a rich progress bar with the fields of :func:`fit_line`; elsewhere a plain line at
    the first iteration and then every ``every_s`` seconds; nothing when ``quiet``. Every line
    fits ``width`` columns (default: the terminal's, or 80 when the stream is not a terminal).
    ``watch()``: a short text of a monitored quantity, shown where it fits (:func:`fit_line`).
    """

    #: columns of the bar on a terminal
    BAR_WIDTH = 16

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
        width: int | None = None,
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
        self.width = int(width) if width is not None else (terminal_width(self.stream) if tty else 80)
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
        from rich.progress import BarColumn, Progress, TextColumn

        console = Console(file=self.stream, force_terminal=True, highlight=False, width=self.width)
        self._bar = Progress(
            BarColumn(bar_width=self.BAR_WIDTH), TextColumn("{task.fields[text]}"),
            console=console, transient=False, refresh_per_second=4, redirect_stdout=False, redirect_stderr=False,
        )
        self._task = self._bar.add_task("run", total=self.total, completed=self.first,
                                        text=f"iteration {self.first}/{self.total}")
        self._bar.start()

    def line(self, iteration: int, residuals: Sequence[float], width: int | None = None) -> str:
        """The progress text (see :func:`fit_line`) within ``width`` columns (default: the line's)."""
        return fit_line(iteration, self.total, self.names, residuals, self.estimate.seconds_per_iteration(),
                        self.estimate.text(iteration), self.width if width is None else width,
                        self.watch() if self.watch is not None else "")

    def __call__(self, iteration: int, residuals: Sequence[float]) -> None:
        now = self.clock()
        dt = now - self.t_prev
        self.t_prev = now
        self.estimate.add(iteration, residuals, dt if iteration > self.first + 1 else None)
        self.last = (iteration, list(residuals))
        if self.quiet:
            return
        if self._bar is not None:
            self._bar.update(self._task, completed=iteration,
                             text=self.line(iteration, residuals, self.width - self.BAR_WIDTH - 2))
            return
        if iteration == self.first + 1 or now - self.t_last_line >= self.every_s:
            self._write_line(iteration, residuals)
            self.t_last_line = now

    def note(self, text: str) -> None:
        """A message between progress lines (above the bar on a terminal); nothing when quiet."""
        if self.quiet:
            return
        if self._bar is not None:
            self._bar.console.print(text, highlight=False, markup=False)
        else:
            self.stream.write(text + "\n")
            self.stream.flush()

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


__all__ = ["Estimate", "RunProgress", "StopRequest", "fit_line", "format_seconds", "terminal_width"]
