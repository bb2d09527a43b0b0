"""User text on plots is capped (issue 13, item 10): a 100 000-character title (which took about a
minute to lay out) or patch name is drawn cut to a few hundred characters."""

from __future__ import annotations

import numpy as np

from fvrans.post._plot_data import MAX_NAME_CHARS, MAX_TITLE_CHARS, cap_text
from fvrans.post.plots import probe_figure, residual_figure, wall_figure


def _drawn(fig) -> list[str]:
    ax = fig.axes[0]
    texts = [ax.get_title(), ax.get_xlabel(), ax.get_ylabel()]
    legend = ax.get_legend()
    if legend is not None:
        texts += [t.get_text() for t in legend.get_texts()]
    return texts


def test_long_titles_and_names_are_cut():
    title, name = "T" * 100_000, "n" * 10_000
    figs = [
        residual_figure({"iteration": np.arange(1, 4), name: np.array([1.0, 0.1, 0.01])}, title=title),
        wall_figure({"x": np.linspace(0, 1, 5), "cf": np.full(5, 0.01)}, "cf", title=title, patch=name),
        probe_figure({"s": np.linspace(0, 1, 5), "x": np.zeros(5), "y": np.linspace(0, 1, 5), "u": np.ones(5),
                      "v": np.zeros(5)}, name=name, title=title),
    ]
    for fig in figs:
        texts = _drawn(fig)
        assert max(len(t) for t in texts) <= MAX_TITLE_CHARS + 3 * MAX_NAME_CHARS + 80, [len(t) for t in texts]
        assert sum(len(t) for t in texts) < 2000


def test_cap_text_keeps_short_text_and_one_line():
    assert cap_text("lower wall") == "lower wall"
    assert cap_text("a\nb\tc") == "a b c"
    assert len(cap_text("x" * 1000)) == MAX_NAME_CHARS
