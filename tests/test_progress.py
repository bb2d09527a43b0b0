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
                    clock=clock, width=120)
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


NAMES = ["u", "v", "continuity", "nu_tilde"]


def test_lines_fit_80_columns_dropping_fields_by_priority():
    """Issue #12 item 12: every progress line fits 80 columns, plain or with the bar; fields go in
    the order: seconds per iteration, long words, time left, all residuals but the largest."""
    clock, stream = Clock(), io.StringIO()
    p = RunProgress(NAMES, max_iterations=99999, tolerance=1e-12, stream=stream, clock=clock, every_s=0.0)
    assert p.width == 80  # not a terminal: 80 columns
    for it in range(1, 60):
        clock.t += 12.3
        p(it, [1.234e-3 * 0.99**it, 2e-4, 3.3e-5, 4.4e-7])
    p.close()
    lines = stream.getvalue().splitlines()
    assert lines and max(len(ln) for ln in lines) <= 80
    last = lines[-1]
    # the residuals and the time left stay; the seconds per iteration went first
    assert "s/iteration" not in last and all(n[:4] in last for n in NAMES) and "left" in last
    # narrower: the time left goes, then all residuals but the largest
    assert p.line(59, [1e-3, 2e-4, 3e-5, 4e-7], 70) == "it 59/99999  u 1.0e-03  v 2.0e-04  cont 3.0e-05  nu_t 4.0e-07"
    assert p.line(59, [1e-3, 2e-4, 3e-5, 4e-7], 30) == "it 59/99999  max u 1.0e-03"


def test_bar_lines_fit_80_columns():
    clock, stream = Clock(), io.StringIO()
    p = RunProgress(NAMES, max_iterations=99999, tolerance=1e-12, stream=stream, clock=clock, force_terminal=True,
                    width=80)
    for it in range(1, 30):
        clock.t += 12.3
        p(it, [1.234e-3, 2e-4, 3.3e-5, 4.4e-7])
    p.close()
    import re

    visible = re.sub(r"\x1b\[[0-9;?]*[A-Za-z]", "", stream.getvalue())
    lines = [ln for chunk in visible.split("\r") for ln in chunk.split("\n") if ln.strip()]
    assert lines and max(len(ln) for ln in lines) <= 80, max(lines, key=len)
    assert any("nu_t" in ln for ln in lines)


def test_a_monitored_quantity_shows_where_it_fits():
    """The monitored quantity goes after the seconds per iteration and the long words, before the
    time left; every line still fits 80 columns."""
    clock, stream = Clock(), io.StringIO()
    p = RunProgress(["u", "continuity"], max_iterations=1000, tolerance=1e-6, stream=stream, clock=clock,
                    watch=lambda: "plate.Cd 0.0028712")
    _drive(p, clock, 30)
    line = p.line(30, [1e-3, 1e-4])
    assert "plate.Cd 0.0028712" in line and len(line) <= 80 and "left" in line
    p = RunProgress(NAMES, max_iterations=99999, tolerance=1e-12, stream=stream, clock=clock,
                    watch=lambda: "plate.Cd 0.0028712")
    _drive(p, clock, 30)
    line = p.line(30, [1e-3, 1e-3, 1e-4, 1e-4])
    assert len(line) <= 80 and all(n[:4] in line for n in NAMES)
    assert "plate.Cd" not in line  # four residuals and the time left leave no room
