"""The character-cell plot draws what it is given where it belongs."""
from __future__ import annotations

import numpy as np

from optbench.tui.widgets.plot import PlotSpec, Series, bar_chart, render_plot


def _grid(text) -> list[str]:
    return text.plain.splitlines()


def test_diagonal_line_goes_from_bottom_left_to_top_right():
    spec = PlotSpec(series=(Series("up", [0.0, 1.0], [0.0, 1.0]),), y_range=(0.0, 1.0))
    rows = _grid(render_plot(spec, 40, 12))
    plot_rows = [r for r in rows if "│" in r or "┤" in r]
    cells = [r.split("┤" if "┤" in r else "│", 1)[1] for r in plot_rows]
    # braille cells (U+2800..U+28FF) mark the line; first row's mark is right of last row's
    first = [i for i, ch in enumerate(cells[0]) if 0x2800 < ord(ch) <= 0x28FF]
    last = [i for i, ch in enumerate(cells[-1]) if 0x2800 < ord(ch) <= 0x28FF]
    assert first and last and min(first) > max(last)
    # every row of the plot has part of the line: the diagonal is unbroken
    assert all(any(0x2800 < ord(ch) <= 0x28FF for ch in c) for c in cells)


def test_points_and_band_and_missing_values():
    x = np.array([0.0, 1.0, 2.0, 3.0])
    y = np.array([1.0, np.nan, 3.0, 2.0])
    spec = PlotSpec(series=(
        Series("band", x, y - 0.5, kind="band", y2=y + 0.5, color="grey30"),
        Series("pts", x, y, kind="points", marker="●", color="red")))
    text = render_plot(spec, 50, 14)
    # three finite points -> three marks (the NaN one is skipped, not drawn at 0)
    assert text.plain.count("●") == 3 + 1  # three on the plot, one in the legend
    assert "band" in text.plain.splitlines()[-1]


def test_empty_plot_says_so():
    assert "nothing to plot" in render_plot(PlotSpec(), 40, 10).plain


def test_histogram_bar_heights_follow_counts():
    edges = np.array([0.0, 1.0, 2.0, 3.0])
    counts = np.array([1, 4, 2])
    rows = bar_chart(edges, counts, 40, 12).plain.splitlines()
    body = [r.split("│", 1)[1] for r in rows if "│" in r]
    # columns of full blocks: the tallest bin (4) fills every row, the smallest does not
    filled = [sum(1 for r in body if len(r) > i * 3 and r[i * 3] == "█") for i in range(3)]
    assert filled[1] == len(body) and filled[1] > filled[2] > filled[0]
