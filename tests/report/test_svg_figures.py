"""The report figures drawn directly as SVG (optbench.report.svg).

References: the SVG 1.1 specification (W3C) — every figure must be well-formed XML in
the SVG namespace, checked with the standard library's XML parser; the "nice numbers"
tick steps 1, 2, 5 x 10^k of Heckbert, "Nice numbers for graph labels", *Graphics
Gems* (1990) (from memory); calendar facts (first days of years and months) from
numpy's datetime64.
"""
from __future__ import annotations

import base64
import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

from optbench.report.svg import Figure, date_ticks, linear_ticks, log_ticks

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "chains" / "ZPHX"
SVG = "{http://www.w3.org/2000/svg}"


@pytest.fixture(scope="module")
def comparison():
    from optbench.analysis.compare import compare
    return compare(DEMO, model="gjr", n_paths=500, backtest=True)


def _svg_of(uri: str) -> ET.Element:
    assert uri.startswith("data:image/svg+xml;base64,")
    return ET.fromstring(base64.b64decode(uri.split(",", 1)[1]))


def test_linear_ticks_are_nice_numbers():
    # Heckbert (1990): steps of 1, 2 or 5 times a power of ten (2.5 also allowed here)
    ticks, dec = linear_ticks(0.0, 100.0)
    np.testing.assert_allclose(ticks, [0, 20, 40, 60, 80, 100])
    assert dec == 0
    ticks, dec = linear_ticks(-355_000.0, 155_000.0)
    np.testing.assert_allclose(ticks, [-300_000, -200_000, -100_000, 0, 100_000])
    ticks, dec = linear_ticks(0.91, 1.02)
    np.testing.assert_allclose(ticks, [0.92, 0.94, 0.96, 0.98, 1.0, 1.02], atol=1e-12)
    assert dec == 2
    assert len(linear_ticks(8.3, 8.3 + 1e-7)[0]) <= 6


def test_log_ticks_decades_and_their_multiples():
    np.testing.assert_allclose(log_ticks(4.0, 800.0), [5, 10, 20, 50, 100, 200, 500])
    np.testing.assert_allclose(log_ticks(1.0, 1e6), [1, 10, 100, 1e3, 1e4, 1e5, 1e6])


def test_date_ticks_first_of_year_or_month():
    lo = float(np.datetime64("2020-11-20", "D").astype(int))
    hi = float(np.datetime64("2026-11-27", "D").astype(int))
    ticks, fmt = date_ticks(lo, hi)
    days = ticks.astype(int).astype("datetime64[D]").astype(str)
    assert fmt == "%Y" and list(days) == [f"{y}-01-01" for y in range(2021, 2027)]
    ticks, fmt = date_ticks(lo, lo + 200)
    days = ticks.astype(int).astype("datetime64[D]").astype(str)
    assert fmt == "%Y-%m" and all(d.endswith("-01") for d in days) and len(days) >= 3


def test_a_figure_is_well_formed_svg_and_places_points_on_their_axes():
    fig = Figure(400, 300)
    ax = fig.panel(0, title="t", xlabel="x", ylabel="y", legend="upper left")
    ax.line([0.0, 1.0, np.nan, 3.0, 4.0], [0.0, 1.0, 2.0, 3.0, 4.0], label="a")
    ax.band([0, 4], [0, 1], [1, 2], label="b")
    ax.error_bars([1, 2], [1, 2], [0.5, 1.5], [1.5, 2.5], marker="v", label="c")
    root = _svg_of(fig.data_uri())
    assert root.tag == SVG + "svg"
    # the NaN breaks the line in two polylines of two points each
    lines = root.findall(f".//{SVG}polyline")
    assert [len(pl.get("points").split()) for pl in lines] == [2, 2]
    (x0, y0), (x1, y1) = (tuple(map(float, p.split(","))) for p in
                          lines[0].get("points").split())
    (x3, y3), (x4, y4) = (tuple(map(float, p.split(","))) for p in
                          lines[1].get("points").split())
    # equal steps in the data are equal steps on the page (linear axes); y grows upwards
    assert x1 - x0 == pytest.approx(x4 - x3, abs=0.11) and y1 < y0
    assert (x3 - x1) == pytest.approx(2 * (x1 - x0), abs=0.2)
    texts = [t.text for t in root.iter(SVG + "text")]
    assert {"t", "x", "y", "a", "b", "c"} <= set(texts)


def test_report_figures_from_a_comparison(comparison):
    from optbench.report.html import figure_history, figure_smiles, figure_term_structure
    term = _svg_of(figure_term_structure(comparison))
    points = [pl.get("points").split() for pl in term.iter(SVG + "polyline")]
    n = len(comparison.expiries)
    # forecast, ATM, model-free and realized vol lines over the expiries (finite ones)
    assert len(points) >= 4 and max(len(p) for p in points) == n
    smiles = _svg_of(figure_smiles(comparison))
    titles = [t.text for t in smiles.iter(SVG + "text") if t.text and " d) · " in t.text]
    assert len(titles) == n
    assert all(f"· {row.verdict}" in title for row, title in zip(comparison.expiries, titles))
    hist = _svg_of(figure_history(comparison))
    close = max((pl.get("points").split() for pl in hist.iter(SVG + "polyline")), key=len)
    assert len(close) == len(comparison.history)


def test_the_html_report_needs_no_plotting_library(tmp_path):
    out = tmp_path / "r.html"
    code = ("import sys; from optbench.cli import main; "
            f"rc = main(['compare', r'{DEMO}', '--format', 'html', '-o', r'{out}']); "
            "assert rc == 0; assert 'matplotlib' not in sys.modules, 'matplotlib imported'")
    subprocess.run([sys.executable, "-c", code], check=True, cwd=ROOT,
                   capture_output=True)
    page = out.read_text(encoding="utf-8")
    uris = re.findall(r'src="(data:image/svg\+xml;base64,[^"]+)"', page)
    assert len(uris) == 3
    for uri in uris:
        assert _svg_of(uri).tag == SVG + "svg"
