"""Random corruption of cells never crashes the loader and never loses a row:
every input line ends up used or rejected, exactly once."""
from __future__ import annotations

import csv

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from optbench.data.chain import load_chain
from optbench.data.validate import REASONS, WARNINGS

from conftest import long_frame, random_quotes

JUNK = ["", " ", "abc", "-1", "0", "1e999", "nan", "NaN", "N/A", "???", "2026-13-45",
        "31/31/2031", "C", "X", "put", ";", '"', "1,5", "$12", "12%", "ZPHX  261218P0500000",
        "\t", "-", "None", "100000000000", "0x10", "é"]


@settings(max_examples=25, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(seed=st.integers(0, 2**31), hits=st.lists(
    st.tuples(st.integers(0, 10_000), st.integers(0, 10_000), st.sampled_from(JUNK)),
    min_size=1, max_size=30))
def test_corrupted_cells_never_crash_nor_lose_rows(tmp_path_factory, seed, hits):
    quotes = random_quotes(np.random.default_rng(seed), n_exp=3, n_k=4)
    frame = long_frame(quotes, 100.0).astype(object)
    for r, c, junk in hits:
        frame.iat[r % len(frame), c % frame.shape[1]] = junk
    path = tmp_path_factory.mktemp("junk") / "chain.csv"
    with path.open("w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(frame.columns)
        w.writerows(frame.itertuples(index=False))  # fixture writer only
    # spot and as-of given, so no corruption can leave the chain without them
    chain = load_chain(path, spot=100.0, asof="2026-11-27")
    q = chain.quality
    all_lines = set(range(2, 2 + len(frame)))
    used, rejected = list(chain.quotes["line"]), list(chain.rejected["line"])
    assert q.rows_in == len(frame)
    assert q.rows_in == q.rows_used + sum(q.rejected.values())
    assert len(used) + len(rejected) == len(frame)
    assert set(used) | set(rejected) == all_lines and not set(used) & set(rejected)
    assert set(chain.rejected["reason"]) <= set(REASONS)
    flags = {f for w in chain.quotes["warnings"] if w for f in w.split(",")}
    assert flags <= set(WARNINGS)
    # what is kept is clean
    kept = chain.quotes
    assert kept["bid"].gt(0).all() and (kept["ask"] >= kept["bid"]).all()
    assert kept["strike"].gt(0).all() and kept["calendar_days"].gt(0).all()
