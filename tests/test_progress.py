"""Progress output: plain lines when stderr is not a terminal (throttled, with residuals and
time left), a rich bar on a terminal, nothing when quiet."""

from __future__ import annotations

import io

from fvrans.progress import Estimate, RunProgress


class Clock:
    def __init__(self) -> None:
        self.t = 0.0

    def __call__(self) -> float:
        return self.t


def _drive(progress: RunProgress, clock: Clock, n: int, rate: float = 0.9, dt: float = 0.5) -> None:
    for it in range(1, n + 1):
        clock.t += dt
        progress(it, [rate**it, 0.5 * rate**it, 0.1 * rate**it])


def test_plain_lines_every_few_seconds_with_residuals_and_time_left():
    clock, stream = Clock(), io.StringIO()
    p = RunProgress(["u", "v", "continuity"], max_iterations=1000, tolerance=1e-6, stream=stream, every_s=5.0,
                    clock=clock)
    assert not p.tty
    _drive(p, clock, 40)  # 0.5 s per iteration: a line at iteration 1, then every 10 iterations
    lines = stream.getvalue().splitlines()
    assert [ln.split()[1] for ln in lines] == ["1/1000", "11/1000", "21/1000", "31/1000"]
    p.close()  # and the last iteration when the run ends
    assert stream.getvalue().splitlines()[-1].split()[1] == "40/1000"
    last = lines[-1]
    assert "u 3.82e-02" in last and "continuity 3.82e-03" in last  # 0.9**31 = 0.0382
    assert "0.5000 s/iteration" in last
    # residual falls by 0.9 per iteration: log10(1e-6 / 0.9**31) / log10(0.9) = 100.1 iterations left
    assert "about 50 s left" in last


def test_time_left_is_the_iteration_limit_when_residuals_do_not_fall():
    e = Estimate(tolerance=1e-6, last_iteration=300)
    for it in range(1, 101):
        e.add(it, [1e-3], 2.0)
    assert e.iterations_left(100) == (200, True)
    assert e.text(100) == "at most 6 min 40 s left (iteration limit)"


def test_quiet_writes_nothing_and_a_terminal_gets_a_bar():
    clock, stream = Clock(), io.StringIO()
    p = RunProgress(["u"], 100, 1e-6, quiet=True, stream=stream, clock=clock)
    _drive(p, clock, 20)
    p.close()
    assert stream.getvalue() == ""
    stream = io.StringIO()
    p = RunProgress(["u", "v"], 100, 1e-6, first_iteration=40, stream=stream, clock=clock, force_terminal=True)
    _drive(p, clock, 5)
    p.close()
    text = stream.getvalue()
    assert "iteration" in text and "/140" in text and "\x1b[" in text  # rich's live display


def test_a_monitored_quantity_fits_in_80_columns_or_stays_out():
    clock, stream = Clock(), io.StringIO()
    p = RunProgress(["u"], max_iterations=1000, tolerance=1e-6, stream=stream, clock=clock,
                    watch=lambda: "plate.Cd 0.0028712")
    _drive(p, clock, 30)
    line = p.line(30, [1e-3])
    assert "plate.Cd 0.0028712" in line and len(line) <= 80 and "left" in line
    assert "s/iteration" not in line  # it took the place of the seconds per iteration
    p = RunProgress(["u", "v", "continuity", "nu_tilde"], max_iterations=1000, tolerance=1e-6, stream=stream,
                    clock=clock, watch=lambda: "plate.Cd 0.0028712")
    _drive(p, clock, 30)
    line = p.line(30, [1e-3, 1e-3, 1e-4, 1e-4])
    assert "plate.Cd" not in line  # four residuals leave no room
