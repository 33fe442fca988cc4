"""Charts written directly as SVG text: lines, markers, bands, error bars, bars and
reference lines on linear, logarithmic or date axes, with ticks, grid, titles and a
legend.

The HTML reports embed their figures as SVG data URIs drawn here, without a plotting
library: a report is drawn once, as text, in a few milliseconds (a plotting library
costs about a second to import and draw on this machine, longer than the comparison
itself). Pure: numbers in, SVG text out; nothing is recomputed, the caller passes the
result objects' arrays.

Notes
-----
**Ticks.** Linear axes take the smallest step :math:`s \\in \\{1, 2, 2.5, 5\\} \\times
10^k` that puts at most ``max_ticks`` ticks in the range (the "nice numbers" of axis
labelling; Heckbert, "Nice numbers for graph labels", *Graphics Gems*, 1990);
logarithmic axes take the decades and, over less than three decades, their 2x and 5x
multiples; date axes take the first day of each year (or of every 1, 2, 3 or 6 months
over short spans).

**Gaps.** A non-finite value breaks a line or a band (no segment is drawn across it).
"""
from __future__ import annotations

import base64
import html as _html
import math

import numpy as np

#: series colours, in order of use within one panel
PALETTE = ("#2f6db3", "#d9772b", "#3c9a4f", "#b8403a", "#7d5ab0", "#8a6a45",
           "#c764a8", "#6f7a86")
FONT = "system-ui,-apple-system,'Segoe UI',Helvetica,Arial,sans-serif"
#: average glyph width as a share of the font size (to size legends and margins)
CHAR_WIDTH = 0.58


def _esc(text) -> str:
    return _html.escape(str(text), quote=True)


def _num(x: float) -> str:
    """A coordinate with one decimal (sub-pixel), without a trailing '.0'."""
    s = f"{x:.1f}"
    return s[:-2] if s.endswith(".0") else s


def nice_step(lo: float, hi: float, max_ticks: int = 6) -> float:
    """The smallest step in {1, 2, 2.5, 5} x 10^k that puts at most ``max_ticks`` ticks
    in [lo, hi]."""
    span = hi - lo
    if not (span > 0 and math.isfinite(span)):
        return 1.0
    mag = 10.0 ** math.floor(math.log10(span / max(max_ticks, 1)))
    for scale in (1.0, 10.0, 100.0):
        for m in (1.0, 2.0, 2.5, 5.0):
            step = m * mag * scale
            if math.floor(hi / step + 1e-9) - math.ceil(lo / step - 1e-9) + 1 <= max_ticks:
                return step
    return 1000.0 * mag


def linear_ticks(lo: float, hi: float, max_ticks: int = 6) -> tuple[np.ndarray, int]:
    """Tick values inside [lo, hi] and the decimals that label them."""
    step = nice_step(lo, hi, max_ticks)
    first = math.ceil(lo / step - 1e-9) * step
    ticks = np.arange(first, hi + step * 1e-9, step)
    ticks[np.abs(ticks) < step * 1e-9] = 0.0
    decimals = max(0, -math.floor(math.log10(step) + 1e-9)) if step < 1 else 0
    if step < 1 and abs(step * 10 ** decimals - round(step * 10 ** decimals)) > 1e-9:
        decimals += 1       # 0.25 -> two decimals
    return ticks, decimals


def log_ticks(lo: float, hi: float) -> np.ndarray:
    """Decades in [lo, hi] (lo > 0), with 2x and 5x between them over short ranges."""
    a, b = math.floor(math.log10(lo)), math.ceil(math.log10(hi))
    mults = (1.0,) if b - a > 3 else (1.0, 2.0, 5.0)
    vals = np.array([m * 10.0 ** e for e in range(a, b + 1) for m in mults])
    return vals[(vals >= lo * (1 - 1e-9)) & (vals <= hi * (1 + 1e-9))]


def date_ticks(lo: float, hi: float) -> tuple[np.ndarray, str]:
    """Tick positions (days since 1970-01-01) on the first of a year or month, and the
    label format (``%Y`` or ``%Y-%m``)."""
    d0 = np.datetime64(int(math.floor(lo)), "D")
    d1 = np.datetime64(int(math.ceil(hi)), "D")
    years = (d1 - d0).astype(int) / 365.25
    if years >= 3:
        every = max(1, math.ceil(years / 8))
        y = np.arange(d0.astype("datetime64[Y]") + 1, d1.astype("datetime64[Y]") + 1, every)
        return y.astype("datetime64[D]").astype(float), "%Y"
    months = (d1.astype("datetime64[M]") - d0.astype("datetime64[M]")).astype(int)
    every = next(m for m in (1, 2, 3, 6, 12) if months / m <= 8)
    m = np.arange(d0.astype("datetime64[M]") + 1, d1.astype("datetime64[M]") + 1)
    m = m[(m.astype(int) % every) == 0]
    return m.astype("datetime64[D]").astype(float), "%Y-%m"


def _date_label(day: float, fmt: str) -> str:
    text = str(np.datetime64(int(round(day)), "D"))
    return text[:4] if fmt == "%Y" else text[:7]


def _finite_runs(*arrays) -> list[np.ndarray]:
    """Index runs where every array is finite (each run becomes its own path)."""
    ok = np.ones(len(arrays[0]), bool)
    for a in arrays:
        ok &= np.isfinite(a)
    idx = np.flatnonzero(ok)
    if idx.size == 0:
        return []
    breaks = np.flatnonzero(np.diff(idx) > 1) + 1
    return np.split(idx, breaks)


def _points(px: np.ndarray, py: np.ndarray) -> str:
    return " ".join(f"{_num(a)},{_num(b)}" for a, b in zip(px.tolist(), py.tolist()))


_MARKERS = {
    # outline of a marker of radius r centred on (0, 0), as SVG path commands
    "o": lambda r: (f"m{_num(-r)},0a{_num(r)},{_num(r)} 0 1,0 {_num(2 * r)},0"
                    f"a{_num(r)},{_num(r)} 0 1,0 {_num(-2 * r)},0"),
    "s": lambda r: f"m{_num(-r)},{_num(-r)}h{_num(2 * r)}v{_num(2 * r)}h{_num(-2 * r)}z",
    "^": lambda r: f"m0,{_num(-r)}l{_num(r)},{_num(1.7 * r)}h{_num(-2 * r)}z",
    "v": lambda r: f"m0,{_num(r)}l{_num(r)},{_num(-1.7 * r)}h{_num(-2 * r)}z",
    "x": lambda r: (f"m{_num(-r)},{_num(-r)}l{_num(2 * r)},{_num(2 * r)}"
                    f"m0,{_num(-2 * r)}l{_num(-2 * r)},{_num(2 * r)}"),
}
_DASHES = {"-": "", "--": "6,3", ":": "1.5,2.5", "-.": "6,2,1.5,2"}


class Panel:
    """One plotting area: series are added, then :meth:`svg` lays them out.

    ``xscale`` is ``"linear"``, ``"log"`` or ``"date"`` (x values as ``datetime64``).
    """

    def __init__(self, *, xscale: str = "linear", title: str = "", xlabel: str = "",
                 ylabel: str = "", font_size: float = 11.0, legend: str | None = None,
                 legend_columns: int = 1):
        self.xscale = xscale
        self.title, self.xlabel, self.ylabel = title, xlabel, ylabel
        self.font_size = float(font_size)
        self.legend_loc = legend
        self.legend_columns = max(1, int(legend_columns))
        self.items: list[tuple] = []        # (kind, data, style)
        self.legend_entries: list[tuple] = []
        self._colour = 0
        self.xlim: tuple[float, float] | None = None

    # ------------------------------------------------------------------ data in
    def _x(self, x) -> np.ndarray:
        if self.xscale == "date":
            return np.asarray(x, dtype="datetime64[D]").astype("int64").astype(float)
        return np.asarray(x, dtype=float)

    def next_colour(self) -> str:
        c = PALETTE[self._colour % len(PALETTE)]
        self._colour += 1
        return c

    def _style(self, colour, label, **style) -> dict:
        style["colour"] = colour or self.next_colour()
        if label:
            self.legend_entries.append((label, style))
        return style

    def line(self, x, y, *, colour=None, width=1.5, dash="-", marker=None, size=3.0,
             label=None):
        """A line through (x, y), broken at non-finite values; optional markers."""
        s = self._style(colour, label, kind="line", width=width, dash=dash, marker=marker,
                        size=size)
        self.items.append(("line", (self._x(x), np.asarray(y, float)), s))

    def markers(self, x, y, *, marker="o", size=3.0, colour=None, label=None):
        s = self._style(colour, label, kind="markers", marker=marker, size=size)
        self.items.append(("markers", (self._x(x), np.asarray(y, float)), s))

    def band(self, x, low, high, *, colour=None, opacity=0.25, label=None):
        """The area between ``low`` and ``high`` over x."""
        s = self._style(colour, label, kind="band", opacity=opacity)
        self.items.append(("band", (self._x(x), np.asarray(low, float),
                                    np.asarray(high, float)), s))

    def error_bars(self, x, y, low, high, *, marker="o", size=2.5, colour=None,
                   width=0.7, label=None):
        """Markers at (x, y) with vertical bars from ``low`` to ``high``."""
        s = self._style(colour, label, kind="errorbar", marker=marker, size=size,
                        width=width)
        self.items.append(("errorbar", (self._x(x), np.asarray(y, float),
                                        np.asarray(low, float), np.asarray(high, float)), s))

    def bars(self, left, heights, width, *, colour=None, opacity=0.5, label=None):
        """Bars from 0 to ``heights`` on [left, left + width)."""
        s = self._style(colour, label, kind="bars", opacity=opacity)
        self.items.append(("bars", (self._x(left), np.asarray(heights, float),
                                    float(width)), s))

    def hspan(self, y0, y1, *, colour=None, opacity=0.2, label=None):
        s = self._style(colour, label, kind="band", opacity=opacity)
        self.items.append(("hspan", (float(y0), float(y1)), s))

    def hline(self, y, *, colour="#666666", width=1.0, dash="-", label=None):
        s = self._style(colour, label, kind="line", width=width, dash=dash, marker=None,
                        size=0)
        self.items.append(("hline", float(y), s))

    def vline(self, x, *, colour="#444444", width=0.9, dash="--", label=None):
        s = self._style(colour, label, kind="line", width=width, dash=dash, marker=None,
                        size=0)
        self.items.append(("vline", float(self._x([x])[0]), s))

    # ------------------------------------------------------------------ limits
    def _limits(self):
        xs, ys = [], []
        for kind, d, _ in self.items:
            if kind in ("line", "markers"):
                xs.append(d[0])
                ys.append(d[1])
            elif kind == "band":
                xs.append(d[0])
                ys += [d[1], d[2]]
            elif kind == "errorbar":
                xs.append(d[0])
                ys += [d[1], d[2], d[3]]
            elif kind == "bars":
                xs += [d[0], d[0] + d[2]]
                ys += [d[1], np.zeros(1)]
            elif kind == "hspan":
                ys.append(np.array(d))
            elif kind == "hline":
                ys.append(np.array([d]))
        x = np.concatenate(xs) if xs else np.array([0.0, 1.0])
        y = np.concatenate(ys) if ys else np.array([0.0, 1.0])
        if self.xscale == "log":
            x = x[x > 0]
        x, y = x[np.isfinite(x)], y[np.isfinite(y)]
        if not x.size:
            x = np.array([1.0, 10.0]) if self.xscale == "log" else np.array([0.0, 1.0])
        if not y.size:
            y = np.array([0.0, 1.0])
        x0, x1 = (float(x.min()), float(x.max())) if self.xlim is None else self.xlim
        y0, y1 = float(y.min()), float(y.max())
        if y1 - y0 < 1e-12:
            y0, y1 = y0 - 0.5 * max(abs(y0), 1.0), y1 + 0.5 * max(abs(y1), 1.0)
        pad = 0.05 * (y1 - y0)
        y0, y1 = y0 - pad, y1 + pad
        if self.xscale == "log":
            lx0, lx1 = math.log10(x0), math.log10(x1)
            if lx1 - lx0 < 1e-12:
                lx0, lx1 = lx0 - 0.5, lx1 + 0.5
            m = 0.04 * (lx1 - lx0)
            x0, x1 = 10 ** (lx0 - m), 10 ** (lx1 + m)
        else:
            if x1 - x0 < 1e-12:
                x0, x1 = x0 - 0.5 * max(abs(x0), 1.0), x1 + 0.5 * max(abs(x1), 1.0)
            m = 0.02 * (x1 - x0) if self.xscale == "date" else 0.04 * (x1 - x0)
            x0, x1 = x0 - m, x1 + m
        return x0, x1, y0, y1

    # ------------------------------------------------------------------ drawing
    def svg(self, left: float, top: float, width: float, height: float) -> str:
        """The panel in the box (left, top, width, height) of the figure, margins for
        ticks and labels included."""
        fs = self.font_size
        x0, x1, y0, y1 = self._limits()
        yt, ydec = linear_ticks(y0, y1)
        ylabels = [f"{v:,.{ydec}f}" for v in yt]
        ml = 8 + CHAR_WIDTH * fs * max((len(t) for t in ylabels), default=2) \
            + (fs * 1.5 if self.ylabel else 0)
        mt = fs * 1.7 if self.title else fs * 0.6
        mb = fs * 1.8 + (fs * 1.4 if self.xlabel else 0)
        ax_l, ax_t = left + ml, top + mt
        ax_w, ax_h = max(width - ml - 10, 10), max(height - mt - mb, 10)

        if self.xscale == "log":
            lx0, lx1 = math.log10(x0), math.log10(x1)

            def X(v):
                return ax_l + (np.log10(np.asarray(v, float)) - lx0) / (lx1 - lx0) * ax_w
        else:
            def X(v):
                return ax_l + (np.asarray(v, float) - x0) / (x1 - x0) * ax_w

        def Y(v):
            return ax_t + (y1 - np.asarray(v, float)) / (y1 - y0) * ax_h

        if self.xscale == "log":
            xt = log_ticks(x0, x1)
            xlabels = [f"{v:,.{0 if v >= 1 else 2}f}" for v in xt]
        elif self.xscale == "date":
            xt, dfmt = date_ticks(x0, x1)
            xlabels = [_date_label(v, dfmt) for v in xt]
        else:
            xt, xdec = linear_ticks(x0, x1, 7)
            xlabels = [f"{v:,.{xdec}f}" for v in xt]

        clip = f"c{abs(hash((left, top))) % 10 ** 8}"
        out = [f'<clipPath id="{clip}"><rect x="{_num(ax_l)}" y="{_num(ax_t)}" '
               f'width="{_num(ax_w)}" height="{_num(ax_h)}"/></clipPath>',
               f'<rect x="{_num(ax_l)}" y="{_num(ax_t)}" width="{_num(ax_w)}" '
               f'height="{_num(ax_h)}" fill="#ffffff" stroke="#9aa3ad" stroke-width="0.8"/>']
        # grid and ticks
        grid = []
        tick_text = []
        for v, t in zip(X(xt).tolist(), xlabels):
            grid.append(f"M{_num(v)},{_num(ax_t)}V{_num(ax_t + ax_h + 3)}")
            tick_text.append(f'<text x="{_num(v)}" y="{_num(ax_t + ax_h + fs + 2)}" '
                             f'text-anchor="middle">{_esc(t)}</text>')
        for v, t in zip(Y(yt).tolist(), ylabels):
            grid.append(f"M{_num(ax_l - 3)},{_num(v)}H{_num(ax_l + ax_w)}")
            tick_text.append(f'<text x="{_num(ax_l - 5)}" y="{_num(v + fs * 0.35)}" '
                             f'text-anchor="end">{_esc(t)}</text>')
        out.append(f'<path d="{"".join(grid)}" stroke="#d5dae1" stroke-width="0.7" '
                   'fill="none"/>')
        out.append(f'<g font-size="{_num(fs * 0.9)}" fill="#3a414b">{"".join(tick_text)}</g>')
        # data, clipped to the axes
        body = []
        for kind, d, s in self.items:
            body.append(self._item(kind, d, s, X, Y, ax_l, ax_t, ax_w, ax_h))
        out.append(f'<g clip-path="url(#{clip})">{"".join(body)}</g>')
        # labels
        if self.title:
            out.append(f'<text x="{_num(ax_l + ax_w / 2)}" y="{_num(top + fs * 1.15)}" '
                       f'text-anchor="middle" font-size="{_num(fs * 1.1)}" '
                       f'fill="#1d2330">{_esc(self.title)}</text>')
        if self.xlabel:
            out.append(f'<text x="{_num(ax_l + ax_w / 2)}" '
                       f'y="{_num(ax_t + ax_h + fs * 3.0)}" text-anchor="middle" '
                       f'fill="#1d2330">{_esc(self.xlabel)}</text>')
        if self.ylabel:
            cx, cy = left + fs * 0.9, ax_t + ax_h / 2
            out.append(f'<text x="{_num(cx)}" y="{_num(cy)}" text-anchor="middle" '
                       f'transform="rotate(-90 {_num(cx)} {_num(cy)})" '
                       f'fill="#1d2330">{_esc(self.ylabel)}</text>')
        if self.legend_loc and self.legend_entries:
            out.append(self._legend(ax_l, ax_t, ax_w, ax_h))
        return "".join(out)

    def _item(self, kind, d, s, X, Y, ax_l, ax_t, ax_w, ax_h) -> str:
        c = s["colour"]
        if kind == "line":
            x, y = d
            if self.xscale == "log":
                y = np.where(x > 0, y, np.nan)
            px, py = X(np.where(x > 0, x, np.nan) if self.xscale == "log" else x), Y(y)
            dash = _DASHES.get(s["dash"], "")
            dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
            parts = [f'<polyline points="{_points(px[r], py[r])}" fill="none" stroke="{c}" '
                     f'stroke-width="{s["width"]}" stroke-linejoin="round"{dash_attr}/>'
                     for r in _finite_runs(px, py) if r.size > 1]
            if s.get("marker"):
                parts.append(self._marker_path(px, py, s["marker"], s["size"], c))
            return "".join(parts)
        if kind == "markers":
            x, y = d
            return self._marker_path(X(x), Y(y), s["marker"], s["size"], c)
        if kind == "band":
            x, lo, hi = d
            px, plo, phi = X(x), Y(lo), Y(hi)
            parts = []
            for r in _finite_runs(px, plo, phi):
                pts = _points(np.concatenate([px[r], px[r][::-1]]),
                              np.concatenate([phi[r], plo[r][::-1]]))
                parts.append(f'<polygon points="{pts}" fill="{c}" '
                             f'fill-opacity="{s["opacity"]}" stroke="none"/>')
            return "".join(parts)
        if kind == "errorbar":
            x, y, lo, hi = d
            px, py, plo, phi = X(x), Y(y), Y(lo), Y(hi)
            ok = np.isfinite(px) & np.isfinite(plo) & np.isfinite(phi)
            bars = "".join(f"M{_num(a)},{_num(b)}V{_num(e)}"
                           for a, b, e in zip(px[ok].tolist(), plo[ok].tolist(),
                                              phi[ok].tolist()))
            return (f'<path d="{bars}" stroke="{c}" stroke-width="{s["width"]}" '
                    'fill="none"/>' + self._marker_path(px, py, s["marker"], s["size"], c))
        if kind == "bars":
            left, h, w = d
            pl, pr, ph, p0 = X(left), X(left + w), Y(h), float(Y(0.0))
            ok = np.isfinite(pl) & np.isfinite(ph)
            rects = "".join(f"M{_num(a)},{_num(p0)}V{_num(b)}H{_num(e)}V{_num(p0)}z"
                            for a, b, e in zip(pl[ok].tolist(), ph[ok].tolist(),
                                               pr[ok].tolist()))
            return f'<path d="{rects}" fill="{c}" fill-opacity="{s["opacity"]}"/>'
        if kind == "hspan":
            a, b = float(Y(d[1])), float(Y(d[0]))
            if not (math.isfinite(a) and math.isfinite(b)):
                return ""
            return (f'<rect x="{_num(ax_l)}" y="{_num(a)}" width="{_num(ax_w)}" '
                    f'height="{_num(max(b - a, 0.0))}" fill="{c}" '
                    f'fill-opacity="{s["opacity"]}"/>')
        if kind in ("hline", "vline"):
            v = float(Y(d)) if kind == "hline" else float(X(d))
            if not math.isfinite(v):
                return ""
            dash = _DASHES.get(s["dash"], "")
            dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
            path = (f"M{_num(ax_l)},{_num(v)}H{_num(ax_l + ax_w)}" if kind == "hline"
                    else f"M{_num(v)},{_num(ax_t)}V{_num(ax_t + ax_h)}")
            return (f'<path d="{path}" stroke="{c}" stroke-width="{s["width"]}"'
                    f'{dash_attr} fill="none"/>')
        return ""

    @staticmethod
    def _marker_path(px, py, marker, size, colour) -> str:
        ok = np.isfinite(px) & np.isfinite(py)
        if not ok.any():
            return ""
        shape = _MARKERS.get(marker, _MARKERS["o"])(float(size))
        d = "".join(f"M{_num(a)},{_num(b)}{shape}" for a, b in zip(px[ok].tolist(),
                                                                     py[ok].tolist()))
        if marker == "x":
            return f'<path d="{d}" stroke="{colour}" stroke-width="1.3" fill="none"/>'
        return f'<path d="{d}" fill="{colour}" stroke="none"/>'

    def _legend(self, ax_l, ax_t, ax_w, ax_h) -> str:
        fs = self.font_size * 0.85
        cols = self.legend_columns
        entries = self.legend_entries
        col_w = 30 + CHAR_WIDTH * fs * max(len(e[0]) for e in entries)
        rows = math.ceil(len(entries) / cols)
        w, h = col_w * min(cols, len(entries)) + 6, rows * fs * 1.45 + 6
        loc = self.legend_loc
        x = ax_l + 6 if "left" in loc else ax_l + ax_w - w - 6
        y = ax_t + 6 if "upper" in loc else ax_t + ax_h - h - 6
        out = [f'<rect x="{_num(x)}" y="{_num(y)}" width="{_num(w)}" height="{_num(h)}" '
               'fill="#ffffff" fill-opacity="0.85" stroke="#c5cbd3" stroke-width="0.6"/>']
        for i, (label, s) in enumerate(entries):
            cx = x + 4 + (i % cols) * col_w
            cy = y + 3 + (i // cols) * fs * 1.45 + fs * 0.75
            c = s["colour"]
            if s["kind"] in ("band", "bars"):
                out.append(f'<rect x="{_num(cx)}" y="{_num(cy - fs * 0.4)}" width="20" '
                           f'height="{_num(fs * 0.8)}" fill="{c}" '
                           f'fill-opacity="{s.get("opacity", 0.3)}"/>')
            if s["kind"] == "line":
                dash = _DASHES.get(s["dash"], "")
                dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
                out.append(f'<path d="M{_num(cx)},{_num(cy)}h20" stroke="{c}" '
                           f'stroke-width="{s["width"]}"{dash_attr}/>')
            if s["kind"] == "errorbar":
                out.append(f'<path d="M{_num(cx + 10)},{_num(cy - fs * 0.45)}'
                           f'v{_num(fs * 0.9)}" stroke="{c}" stroke-width="{s["width"]}"/>')
            if s.get("marker") and s["kind"] in ("line", "markers", "errorbar"):
                out.append(self._marker_path(np.array([cx + 10]), np.array([cy]),
                                             s["marker"], s["size"], c))
            out.append(f'<text x="{_num(cx + 25)}" y="{_num(cy + fs * 0.35)}" '
                       f'font-size="{_num(fs)}" fill="#1d2330">{_esc(label)}</text>')
        return "".join(out)


class Figure:
    """A figure of ``rows`` x ``cols`` panels, ``width`` x ``height`` pixels."""

    def __init__(self, width: float, height: float, rows: int = 1, cols: int = 1, *,
                 height_ratios=None, title: str = ""):
        self.width, self.height = float(width), float(height)
        self.rows, self.cols = int(rows), int(cols)
        self.height_ratios = list(height_ratios or [1] * self.rows)
        self.title = title
        self.panels: list[Panel | None] = [None] * (self.rows * self.cols)

    def panel(self, index: int = 0, **options) -> Panel:
        p = Panel(**options)
        self.panels[index] = p
        return p

    def svg(self) -> str:
        """The whole figure as an SVG document."""
        w, h = self.width, self.height
        out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{_num(w)}" '
               f'height="{_num(h)}" viewBox="0 0 {_num(w)} {_num(h)}" '
               f'font-family="{_esc(FONT)}" font-size="11">'
               f'<rect width="100%" height="100%" fill="#ffffff"/>']
        top0 = 0.0
        if self.title:
            out.append(f'<text x="{_num(w / 2)}" y="16" text-anchor="middle" '
                       f'font-size="13" fill="#1d2330">{_esc(self.title)}</text>')
            top0 = 22.0
        ratios = np.asarray(self.height_ratios, float)
        tops = top0 + np.concatenate([[0.0], np.cumsum(ratios)]) / ratios.sum() * (h - top0)
        cw = w / self.cols
        for i, p in enumerate(self.panels):
            if p is None:
                continue
            r, c = divmod(i, self.cols)
            out.append(p.svg(c * cw, float(tops[r]), cw, float(tops[r + 1] - tops[r])))
        out.append("</svg>")
        return "".join(out)

    def data_uri(self) -> str:
        """The figure as a ``data:image/svg+xml;base64,...`` URI for an ``<img>``."""
        return ("data:image/svg+xml;base64,"
                + base64.b64encode(self.svg().encode("utf-8")).decode("ascii"))
