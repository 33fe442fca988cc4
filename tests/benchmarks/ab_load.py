"""Loading a scenario and the comparison's first steps, the code of this checkout
against another checkout's (the reference), alternated per underlying in one process:
CPU time (``time.process_time``) of ``load_scenario``, of the load with the steps that
follow it in a comparison (the usable quotes of the screen's expiries, the implied
forwards, the per-quote vols) and, with ``--rows``, of a whole lean screen row; the
medians of old, new, the per-row ratios and the milliseconds saved; and whether every
output is the same (the loaded scenario field by field, frames with exact dtypes, the
forwards frame, the vol arrays, the screen rows). A development tool: it is named
``ab_*`` so that ``run_all.py`` leaves it out (it needs a second checkout).

The reference is a copy of another checkout's ``optbench`` package renamed
``optbench_old`` (``git archive REV optbench | tar -x -C /tmp/ref``, then
``mv /tmp/ref/optbench /tmp/ref/optbench_old`` and the imports rewritten to
``optbench_old``); give its parent folder with ``--ref``. Each folder's files are read
once before timing, so neither side pays for the disk.

Run: .venv/bin/python tests/benchmarks/ab_load.py --ref /tmp/ref [--universe DIR]
     [--n 100] [--rows]
"""
from __future__ import annotations

import argparse
import dataclasses
import importlib
import math
import statistics
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

UNIVERSE = "/tmp/optbench-bench-universe/n5000-q2000-d2500-s20261201"


def _same(a, b, where: str) -> None:
    if isinstance(a, pd.DataFrame):
        pd.testing.assert_frame_equal(a, b, check_exact=True, check_dtype=True,
                                      check_column_type=True, obj=where)
    elif isinstance(a, np.ndarray):
        assert a.dtype == b.dtype and a.shape == b.shape and (
            a.tobytes() == b.tobytes() or a.tolist() == b.tolist()), where
    elif dataclasses.is_dataclass(a) and not isinstance(a, type):
        for f in dataclasses.fields(a):
            _same(getattr(a, f.name), getattr(b, f.name), f"{where}.{f.name}")
    elif type(a).__module__.startswith("optbench"):
        _same(vars(a), vars(b), where)
    elif isinstance(a, dict):
        assert list(a) == list(b), where
        for k in a:
            _same(a[k], b[k], f"{where}[{k}]")
    elif isinstance(a, (list, tuple)):
        assert len(a) == len(b), where
        for i, (x, y) in enumerate(zip(a, b)):
            _same(x, y, f"{where}[{i}]")
    elif isinstance(a, float) and math.isnan(a):
        assert isinstance(b, float) and math.isnan(b), where
    else:
        assert a == b, (where, a, b)


def _modules(prefix: str):
    return tuple(importlib.import_module(f"{prefix}.{m}") for m in (
        "data.scenario", "analysis.compare", "pricing.forwards", "screening.rows"))


def _steps(mods, folder):
    scenario, compare, forwards, rows = mods
    sc = scenario.load_scenario(folder)
    listed = rows.nearest_expiries(sc.chain.quotes, rows.DEFAULT_TENORS)
    q = compare._usable_quotes(sc.chain.quotes, sorted(set(listed.values())), folder)
    fwd = forwards.implied_forwards(q, sc.chain.spot, sc.chain.rate, sc.chain.div_yield)
    return sc, q, fwd, compare._quote_vols(q, fwd, sc.chain.spot)


def _cpu(fn):
    start = time.process_time()
    out = fn()
    return time.process_time() - start, out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--ref", required=True)
    ap.add_argument("--universe", default=UNIVERSE)
    ap.add_argument("--n", type=int, default=100)
    ap.add_argument("--rows", action="store_true", help="also time a whole lean row")
    a = ap.parse_args()
    sys.path.insert(0, a.ref)
    sides = (_modules("optbench_old"), _modules("optbench"))
    names = sorted(p.name for p in Path(a.universe).iterdir() if p.is_dir())
    picks = np.linspace(0, len(names) - 1, min(a.n, len(names))).astype(int)
    folders = [Path(a.universe) / names[i] for i in picks]
    for f in folders[:3]:                      # warm both sides' imports and tables
        for mods in sides:
            _steps(mods, f)
    times: dict[str, list[tuple[float, float]]] = {"load": [], "load + steps": [],
                                                   "lean row": []}
    for i, folder in enumerate(folders):
        for name in ("chain.csv", "history.csv", "meta.toml"):
            if (folder / name).is_file():
                (folder / name).read_bytes()   # in the page cache for both sides
        got: dict = {}
        for side in ((0, 1) if i % 2 == 0 else (1, 0)):
            mods = sides[side]
            got["load", side], _ = _cpu(lambda: mods[0].load_scenario(folder))
            got["load + steps", side], got["out", side] = _cpu(lambda: _steps(mods, folder))
            if a.rows:
                task = mods[3].ScreenTask(folder=folder)
                got["lean row", side], got["rows", side] = _cpu(
                    lambda: mods[3].screen_one(task))
        (sc0, q0, f0, v0), (sc1, q1, f1, v1) = got["out", 0], got["out", 1]
        for field in ("name", "code", "holidays", "meta"):
            _same(getattr(sc0, field), getattr(sc1, field), f"{folder}.{field}")
        _same(sc0.chain, sc1.chain, f"{folder}.chain")
        _same(sc0.history, sc1.history, f"{folder}.history")
        _same(q0, q1, f"{folder} usable quotes")
        _same(f0, f1, f"{folder} forwards")
        _same(list(v0), list(v1), f"{folder} quote vols")
        if a.rows:
            _same(got["rows", 0], got["rows", 1], f"{folder} screen rows")
        for key in times:
            if (key, 0) in got:
                times[key].append((got[key, 0], got[key, 1]))
    print(f"CPU ms per underlying, {len(folders)} folders of {a.universe}, old and new "
          "alternated; every output identical")
    print(f"  {'stage':14s} {'old':>8s} {'new':>8s} {'ratio':>7s} {'saved':>7s}")
    for key, pairs in times.items():
        if not pairs:
            continue
        old = statistics.median(p[0] for p in pairs) * 1e3
        new = statistics.median(p[1] for p in pairs) * 1e3
        ratio = statistics.median(p[1] / p[0] for p in pairs)
        saved = statistics.median(p[0] - p[1] for p in pairs) * 1e3
        print(f"  {key:14s} {old:8.2f} {new:8.2f} {ratio:7.3f} {saved:7.2f}")


if __name__ == "__main__":
    main()
