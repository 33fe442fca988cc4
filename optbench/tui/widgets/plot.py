"""A character-cell plot: lines in braille dots, points as marks, bands as shading.

The widget only draws what it is given; every number comes from the core's result
objects. Lines use the braille block (2 x 4 dots per cell) so a 100-column plot
has 200 horizontal positions; points are drawn as a mark character; a band fills
the cells between a low and a high curve with a background colour.
"""
from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field

import numpy as np
from rich.style import Style
from rich.text import Text
from textual.widget import Widget

_BRAILLE_BASE = 0x2800
# dot bit for (row 0..3, column 0..1) inside one braille cell
_DOT_BITS = np.array([[0x01, 0x08], [0x02, 0x10], [0x04, 0x20], [0x40, 0x80]], dtype=np.uint8)


@dataclass(frozen=True)
class Series:
    """One thing to draw.

    kind is "line" (joined braille dots), "points" (a mark per point) or "band"
    (shaded cells between ``y`` and ``y2``).
    """

    label: str
    x: np.ndarray
    y: np.ndarray
    kind: str = "line"
    color: str = "white"
    y2: np.ndarray | None = None
    marker: str = "o"

    def __post_init__(self) -> None:
        object.__setattr__(self, "x", np.asarray(self.x, dtype=float))
        object.__setattr__(self, "y", np.asarray(self.y, dtype=float))
        if self.y2 is not None:
            object.__setattr__(self, "y2", np.asarray(self.y2, dtype=float))


@dataclass(frozen=True)
class PlotSpec:
    """Everything the plot needs: series, axis formatting and a title."""

    series: tuple[Series, ...] = ()
    title: str = ""
    y_format: str = "{:.1f}"
    x_format: str = "{:.0f}"
    x_is_date: bool = False
    empty_text: str = "nothing to plot yet"
    y_range: tuple[float, float] | None = None
    extra_legend: tuple[tuple[str, str], ...] = field(default_factory=tuple)


def _finite_range(values: list[np.ndarray], pad_share: float = 0.05) -> tuple[float, float] | None:
    stacked = [v[np.isfinite(v)] for v in values if v is not None and v.size]
    stacked = [v for v in stacked if v.size]
    if not stacked:
        return None
    lo = float(min(v.min() for v in stacked))
    hi = float(max(v.max() for v in stacked))
    if hi <= lo:
        pad = abs(lo) * 0.05 or 1.0
        return lo - pad, hi + pad
    pad = (hi - lo) * pad_share
    return lo - pad, hi + pad


def _segment_dots(px: np.ndarray, py: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """All dot positions on the straight segments joining consecutive points."""
    ok = np.isfinite(px) & np.isfinite(py)
    if ok.sum() == 0:
        return np.empty(0, int), np.empty(0, int)
    # break the line where data is missing: only join consecutive finite points
    joined = ok[:-1] & ok[1:]
    x0, y0, x1, y1 = px[:-1][joined], py[:-1][joined], px[1:][joined], py[1:][joined]
    single_x, single_y = px[ok], py[ok]
    if x0.size == 0:
        return np.rint(single_x).astype(int), np.rint(single_y).astype(int)
    steps = np.maximum(np.abs(x1 - x0), np.abs(y1 - y0)).astype(int) + 1
    seg = np.repeat(np.arange(x0.size), steps)
    starts = np.cumsum(steps) - steps
    frac = (np.arange(seg.size) - starts[seg]) / steps[seg]
    xs = x0[seg] + (x1 - x0)[seg] * frac
    ys = y0[seg] + (y1 - y0)[seg] * frac
    xs = np.concatenate([xs, single_x])
    ys = np.concatenate([ys, single_y])
    return np.rint(xs).astype(int), np.rint(ys).astype(int)


def _clean(label: str) -> str:
    """'-0.0' -> '0.0': a rounded zero has no sign."""
    return label[1:] if label.startswith("-") and not label.strip("-0.,") else label


def _date_label(value: float) -> str:
    return str(np.datetime64(int(round(value)), "D"))


def render_plot(spec: PlotSpec, width: int, height: int) -> Text:
    """Draw ``spec`` into ``width`` x ``height`` cells and return rich Text."""
    width, height = max(width, 20), max(height, 5)
    series = [s for s in spec.series if s.x.size]
    xr = _finite_range([s.x for s in series], pad_share=0.0)
    yr = spec.y_range or _finite_range([s.y for s in series] + [s.y2 for s in series if s.y2 is not None])
    text = Text(no_wrap=True, overflow="crop")
    title = wrap_lines(spec.title, width) if spec.title else []
    for line in title:
        text.append(line + "\n", style="bold")
    if xr is None or yr is None:
        text.append(spec.empty_text, style="dim italic")
        return text
    legend = legend_lines(series, spec.extra_legend, width)
    plot_h = height - len(title) - len(legend) - 2  # x axis line and labels
    if plot_h < 2:
        plot_h = 2
    y_labels = [_clean(spec.y_format.format(v)) for v in np.linspace(yr[1], yr[0], plot_h)]
    margin = max(len(s) for s in y_labels) + 1
    plot_w = max(width - margin - 1, 10)
    x0, x1 = xr
    y0, y1 = yr
    if spec.x_is_date or x1 <= x0:
        pass
    dots_w, dots_h = plot_w * 2, plot_h * 4

    def to_px(x: np.ndarray) -> np.ndarray:
        return (x - x0) / (x1 - x0) * (dots_w - 1)

    def to_py(y: np.ndarray) -> np.ndarray:
        return (y1 - y) / (y1 - y0) * (dots_h - 1)

    bits = np.zeros((plot_h, plot_w), dtype=np.uint8)
    dot_owner = np.full((plot_h, plot_w), -1, dtype=int)
    marks = np.full((plot_h, plot_w), "", dtype=object)
    mark_owner = np.full((plot_h, plot_w), -1, dtype=int)
    band_owner = np.full((plot_h, plot_w), -1, dtype=int)
    for idx, s in enumerate(series):
        if s.kind == "band" and s.y2 is not None:
            order = np.argsort(s.x)
            xs, lo, hi = s.x[order], np.fmin(s.y, s.y2)[order], np.fmax(s.y, s.y2)[order]
            ok = np.isfinite(xs) & np.isfinite(lo) & np.isfinite(hi)
            if ok.sum() < 1:
                continue
            xs, lo, hi = xs[ok], lo[ok], hi[ok]
            centers = x0 + (np.arange(plot_w) + 0.5) / plot_w * (x1 - x0)
            inside = (centers >= xs[0] - (x1 - x0) / plot_w) & (centers <= xs[-1] + (x1 - x0) / plot_w)
            lo_c = np.interp(centers, xs, lo)
            hi_c = np.interp(centers, xs, hi)
            row_top = y1 - (np.arange(plot_h)) / plot_h * (y1 - y0)
            row_bot = y1 - (np.arange(plot_h) + 1) / plot_h * (y1 - y0)
            cover = (row_bot[:, None] <= hi_c[None, :]) & (row_top[:, None] >= lo_c[None, :])
            cover &= inside[None, :]
            band_owner[cover] = idx
        elif s.kind == "points":
            px, py = to_px(s.x), to_py(s.y)
            ok = np.isfinite(px) & np.isfinite(py)
            cx = np.clip((px[ok] / 2).astype(int), 0, plot_w - 1)
            cy = np.clip((py[ok] / 4).astype(int), 0, plot_h - 1)
            marks[cy, cx] = s.marker
            mark_owner[cy, cx] = idx
        else:
            order = np.argsort(s.x, kind="stable")
            dx, dy = _segment_dots(to_px(s.x[order]), to_py(s.y[order]))
            keep = (dx >= 0) & (dx < dots_w) & (dy >= 0) & (dy < dots_h)
            dx, dy = dx[keep], dy[keep]
            cx, cy = dx // 2, dy // 4
            np.bitwise_or.at(bits, (cy, cx), _DOT_BITS[dy % 4, dx % 2])
            dot_owner[cy, cx] = idx

    styles = [Style.parse(s.color) for s in series]
    band_styles = [Style(bgcolor=Style.parse(s.color).color) for s in series]
    axis_style = Style(dim=True)
    for r in range(plot_h):
        label = y_labels[r] if (r % 2 == 0 or plot_h <= 8) else ""
        text.append(label.rjust(margin - 1) + " ", style=axis_style)
        text.append("┤" if label else "│", style=axis_style)
        for c in range(plot_w):
            bg = band_styles[band_owner[r, c]] if band_owner[r, c] >= 0 else None
            if mark_owner[r, c] >= 0:
                ch, st = marks[r, c], styles[mark_owner[r, c]]
            elif bits[r, c]:
                ch, st = chr(_BRAILLE_BASE + int(bits[r, c])), styles[dot_owner[r, c]]
            else:
                ch, st = " ", Style()
            text.append(ch, style=(st + bg) if bg is not None else st)
        text.append("\n")
    # x axis with about one label per 14 columns
    text.append(" " * margin + "└" + "─" * plot_w + "\n", style=axis_style)
    n_labels = max(2, plot_w // 14)
    axis = [" "] * (plot_w + margin + 1)
    for i, v in enumerate(np.linspace(x0, x1, n_labels)):
        lab = _date_label(v) if spec.x_is_date else _clean(spec.x_format.format(v))
        pos = margin + 1 + int(round(i / (n_labels - 1) * (plot_w - 1)))
        start = min(max(pos - len(lab) // 2, margin + 1), len(axis) - len(lab))
        if all(ch == " " for ch in axis[max(start - 1, 0):start + len(lab) + 1]):
            axis[start:start + len(lab)] = list(lab)
    text.append("".join(axis).rstrip() + "\n", style=axis_style)
    for i, line in enumerate(legend):
        text.append_text(line)
        if i < len(legend) - 1:
            text.append("\n")
    return text


def wrap_lines(text: str, width: int) -> list[str]:
    """``text`` broken at spaces into lines of at most ``width`` cells."""
    import textwrap
    return textwrap.wrap(text, width=max(width, 10), break_long_words=True) or [""]


def legend_lines(series, extra: tuple[tuple[str, str], ...], width: int) -> list[Text]:
    """The legend's entries packed into as many lines as ``width`` needs; a label drawn
    twice (a line and its points) is listed once with both marks."""
    entries: dict[str, Text] = {}
    for s in series:
        mark = {"band": "█", "points": s.marker}.get(s.kind, "⠒")
        entry = entries.setdefault(s.label, Text())
        entry.append(mark, style=s.color)
    items = [entry + Text(f" {label}") for label, entry in entries.items()]
    items += [Text(f"{mark} {label}", style="dim") for mark, label in extra]
    lines: list[Text] = []
    line = Text("  ")
    for item in items:
        if line.cell_len > 2 and line.cell_len + item.cell_len > width:
            lines.append(line)
            line = Text("  ")
        line.append_text(item)
        line.append("   ")
    lines.append(line)
    return lines


class CellPlot(Widget):
    """A plot widget drawing a :class:`PlotSpec` to fit its size."""

    DEFAULT_CSS = """
    CellPlot { height: 1fr; min-height: 10; width: 1fr; }
    """

    def __init__(self, spec: PlotSpec | None = None, **kwargs) -> None:
        super().__init__(**kwargs)
        self._spec = spec or PlotSpec()

    @property
    def spec(self) -> PlotSpec:
        return self._spec

    def show(self, spec: PlotSpec) -> None:
        self._spec = spec
        self.refresh()

    def render(self) -> Text:
        return render_plot(self._spec, self.size.width, self.size.height)


def bar_chart(edges: np.ndarray, counts: np.ndarray, width: int, height: int, *,
              expected: np.ndarray | None = None, title: str = "",
              x_format: str = "{:.1f}") -> Text:
    """Vertical bars of ``counts`` over bins ``edges``; ``expected`` as a mark per bin."""
    edges, counts = np.asarray(edges, float), np.asarray(counts, float)
    text = Text(no_wrap=True, overflow="crop")
    title_lines = wrap_lines(title, width) if title else []
    for line in title_lines:
        text.append(line + "\n", style="bold")
    if counts.size == 0:
        text.append("nothing to plot yet", style="dim italic")
        return text
    rows = max(height - len(title_lines) - 3, 3)
    top = float(max(counts.max(), 0 if expected is None else np.nanmax(expected), 1))
    margin = len(f"{top:.0f}") + 1
    bar_w = max(1, min(3, (width - margin - 1) // counts.size))
    blocks = " ▁▂▃▄▅▆▇█"
    level = counts / top * rows
    exp_level = None if expected is None else np.asarray(expected, float) / top * rows
    for r in range(rows):
        floor = rows - r - 1
        label = f"{top * (rows - r) / rows:.0f}" if r % 2 == 0 else ""
        text.append(label.rjust(margin - 1) + " │", style="dim")
        for i in range(counts.size):
            fill = level[i] - floor
            ch = blocks[int(np.clip(round(fill * 8), 0, 8))] if fill > 0 else " "
            exp_here = exp_level is not None and floor <= exp_level[i] < floor + 1
            if exp_here and ch == " ":
                text.append("─" * bar_w, style="yellow")
            else:
                text.append(ch * bar_w, style="cyan" if not exp_here else "cyan on grey23")
        text.append("\n")
    text.append(" " * margin + "└" + "─" * (bar_w * counts.size) + "\n", style="dim")
    left, mid, right = (x_format.format(edges[0]), x_format.format(0.5 * (edges[0] + edges[-1])),
                        x_format.format(edges[-1]))
    span = bar_w * counts.size
    axis = left + mid.center(max(span - len(left) - len(right), len(mid) + 2)) + right
    text.append(" " * (margin + 1) + axis + "\n", style="dim")
    text.append("  █ observed", style="cyan")
    if expected is not None:
        text.append("   ─ expected under the model's distribution", style="yellow")
    return text


class BarChart(Widget):
    """A histogram widget; bins and counts come from the core."""

    DEFAULT_CSS = """
    BarChart { height: 1fr; min-height: 8; width: 1fr; }
    """

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self._data: tuple = (np.empty(0), np.empty(0), None, "", "{:.1f}")

    def show(self, edges, counts, *, expected=None, title: str = "",
             x_format: str = "{:.1f}") -> None:
        self._data = (np.asarray(edges, float), np.asarray(counts, float), expected, title,
                      x_format)
        self.refresh()

    def render(self) -> Text:
        edges, counts, expected, title, fmt = self._data
        return bar_chart(edges, counts, self.size.width, self.size.height,
                         expected=expected, title=title, x_format=fmt)


def to_day_number(dates) -> np.ndarray:
    """Dates (datetime64, date objects or ISO strings) as day numbers for the x axis."""
    arr = np.asarray(dates)
    if arr.dtype.kind == "M":
        return arr.astype("datetime64[D]").astype(np.int64).astype(float)
    return np.array([np.datetime64(d if not isinstance(d, _dt.datetime) else d.date(), "D")
                     .astype(np.int64) for d in arr], dtype=float)
