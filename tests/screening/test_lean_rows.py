"""The lean screen row against the full-cost row.

The default row reads the floor put's protection figures from the comparison (its
simulation, once to the longest expiry) instead of simulating the hedge again per
tenor. Stated tolerance: every number within 1e-9 relative of the full-cost row
(``full=True``: ``hedge_from_comparison`` per tenor, as ``optbench hedge`` computes
it), every text column identical. Reference: the full-cost row of this project, run
in the same test; outside check: the protection cost recomputed by hand from the chain
file's ask (see test_screen.py).
"""
from __future__ import annotations

import math
import shutil
from pathlib import Path

import pytest

from optbench.demo_universe import write_universe
from optbench.screening import rows as rows_module
from optbench.screening.screen import screen

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"
PATHS = 500
REL = 1e-9


@pytest.fixture(scope="module")
def universe(tmp_path_factory) -> Path:
    root = tmp_path_factory.mktemp("lean")
    write_universe(root, 6)                       # invented members, one broken
    shutil.copytree(DEMO, root / "ZPHX")
    return root


def _key(row):
    return row["code"], row["tenor_days"]


def assert_same_rows(lean_rows, full_rows):
    lean = {_key(r): r for r in lean_rows}
    full = {_key(r): r for r in full_rows}
    assert lean.keys() == full.keys()
    for key, ref in full.items():
        got = lean[key]
        assert got.keys() == ref.keys()
        for col, want in ref.items():
            have = got[col]
            if isinstance(want, float) and isinstance(have, float):
                assert have == pytest.approx(want, rel=REL, abs=1e-12), (key, col)
            else:
                assert have == want, (key, col)


@pytest.mark.parametrize("floor", [0.90, 0.75])
def test_lean_rows_match_the_full_cost_rows(universe, floor):
    lean = screen(universe, workers=1, n_paths=PATHS, floor=floor)
    full = screen(universe, workers=1, n_paths=PATHS, floor=floor, full=True)
    assert [f["code"] for f in lean.failures] == [f["code"] for f in full.failures]
    assert_same_rows(lean.rows, full.rows)
    shown = [r for r in lean.rows if r["protection_cost"] is not None]
    assert len(shown) >= 9 and all(math.isfinite(r["protection_expected_payoff"])
                                   for r in shown)


def test_lean_row_runs_the_hedge_only_where_it_would_add_a_note(universe, monkeypatch):
    """Counted calls: none at the default floor on the invented universe; a floor far
    from every listed strike sends the row through the hedge (whose error it shows)."""
    from optbench.analysis import hedge

    calls = []
    real = hedge.hedge_from_comparison

    def counted(*args, **kwargs):
        calls.append(1)
        return real(*args, **kwargs)

    monkeypatch.setattr(hedge, "hedge_from_comparison", counted)
    folder = str(universe / "ZPHX")
    rows_module.screen_one(rows_module.ScreenTask(folder=folder, n_paths=PATHS))
    assert calls == []
    far = rows_module.screen_one(rows_module.ScreenTask(folder=folder, n_paths=PATHS,
                                                        floor=0.05))
    full = rows_module.screen_one(rows_module.ScreenTask(folder=folder, n_paths=PATHS,
                                                         floor=0.05, full=True))
    assert len(calls) == 6
    assert_same_rows(far, full)
    assert all(r["error"] and r["error"].startswith("hedge: ") for r in far)


def test_parity_pairs_match_a_pandas_merge(universe):
    """The vectorised pairing of calls and puts against pandas' own merge of the
    two sides on (expiry, strike), tightest quote of each side kept (reference:
    pandas.DataFrame.merge), duplicates added to check the tightest is used."""
    import numpy as np
    import pandas as pd

    from optbench.data.scenario import load_scenario
    from optbench.pricing.forwards import parity_pairs

    q = load_scenario(universe / "ZPHX").chain.quotes
    q = pd.concat([q, q.iloc[::5].assign(ask=lambda d: d["ask"] + 0.4)],
                  ignore_index=True)
    got = parity_pairs(q)
    ok = (q["bid"] > 0) & (q["ask"] >= q["bid"]) & np.isfinite(q["ask"])
    side = q[ok].assign(mid=lambda d: (d["bid"] + d["ask"]) / 2,
                        spread=lambda d: d["ask"] - d["bid"])
    side = side.sort_values("spread", kind="stable").drop_duplicates(
        ["expiry", "strike", "is_call"])
    calls = side[side["is_call"]][["expiry", "t", "strike", "mid", "spread"]]
    puts = side[~side["is_call"]][["expiry", "strike", "mid", "spread"]]
    want = calls.merge(puts, on=["expiry", "strike"], suffixes=("_c", "_p"))
    key = ["expiry", "strike"]
    got = got.sort_values(key).reset_index(drop=True)
    want = want.sort_values(key).reset_index(drop=True)
    assert len(got) == len(want) > 50
    for a, b in (("c_mid", "mid_c"), ("p_mid", "mid_p"), ("c_spread", "spread_c"),
                 ("p_spread", "spread_p"), ("strike", "strike"), ("t", "t")):
        np.testing.assert_allclose(got[a].to_numpy(), want[b].to_numpy(), rtol=1e-15)
    assert (got["expiry"].to_numpy() == want["expiry"].to_numpy()).all()
