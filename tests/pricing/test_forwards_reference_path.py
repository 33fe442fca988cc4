"""The vectorised implied forwards (integer pairing keys, one numpy pass per chain)
give bit for bit what the straightforward pandas path gives (reference:
``reference_forwards.py`` beside this file, the per-expiry ``groupby`` path), on
chains priced by vollib (the outside reference for the prices) and on the demo,
with the awkward cases a chain can hold."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from optbench.pricing.forwards import implied_forwards, parity_pairs

from .reference_forwards import reference_implied_forwards, reference_parity_pairs
from .test_forwards_quotes import RATE, SPOT, YIELD, _chain

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"


def assert_bit_identical(got: pd.DataFrame, want: pd.DataFrame) -> None:
    pd.testing.assert_frame_equal(got, want, check_exact=True)
    for c in got.columns:
        if got[c].dtype.kind == "f":
            assert np.array_equal(got[c].to_numpy().view(np.int64),
                                  want[c].to_numpy().view(np.int64)), c


def _awkward(seed: int) -> pd.DataFrame:
    """A vollib-priced chain with duplicated quotes (one wider), crossed and
    zero-bid quotes, a missing expiry, a NaN strike, an American expiry, a NaN t."""
    rng = np.random.default_rng(seed)
    q = _chain()
    noise = rng.uniform(0.0, 0.3, len(q))
    q["bid"] = np.maximum(q["bid"] - noise, 0.0)
    q["ask"] = q["ask"] + noise[::-1]
    dup = q.sample(25, random_state=seed).assign(ask=lambda d: d["ask"] + 0.5)
    tight = q.sample(10, random_state=seed + 1).assign(ask=lambda d: d["ask"] - 0.01)
    q = pd.concat([q, dup, tight], ignore_index=True).sample(frac=1.0, random_state=seed)
    q = q.reset_index(drop=True)
    q.loc[rng.choice(len(q), 5, replace=False), "bid"] = 0.0
    q.loc[rng.choice(len(q), 5, replace=False), "ask"] = 0.1
    q.loc[3, "expiry"] = pd.NaT
    q.loc[4, "strike"] = np.nan
    last = q["expiry"] == q["expiry"].max()
    q.loc[last, "style"] = "american"
    q.loc[q.index[last][0], "t"] = np.nan
    return q


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_awkward_chains_match_the_reference_path(seed):
    q = _awkward(seed)
    assert_bit_identical(parity_pairs(q), reference_parity_pairs(q))
    for kw in ({}, {"american": "parity"}, {"n_near": 3, "min_pairs": 2},
               {"dividends": (np.array([0.1, 0.6]), np.array([4.0, 5.0]))}):
        assert_bit_identical(implied_forwards(q, SPOT, RATE, YIELD, **kw),
                             reference_implied_forwards(q, SPOT, RATE, YIELD, **kw))


def test_demo_and_categorical_style_match_the_reference_path():
    from optbench.data.scenario import load_scenario

    ch = load_scenario(DEMO).chain
    q = ch.quotes[ch.quotes["t"] > 0].reset_index(drop=True)
    assert isinstance(q["style"].dtype, pd.CategoricalDtype)
    for frame in (q, q.assign(style=q["style"].astype(str)), q.drop(columns="style")):
        assert_bit_identical(implied_forwards(frame, ch.spot, ch.rate, ch.div_yield),
                             reference_implied_forwards(frame, ch.spot, ch.rate,
                                                        ch.div_yield))
    am = q.assign(style=pd.Categorical(np.where(q["strike"] > 0, "american", "european"),
                                       categories=["european", "american"]))
    assert_bit_identical(implied_forwards(am, ch.spot, ch.rate, ch.div_yield),
                         reference_implied_forwards(am, ch.spot, ch.rate, ch.div_yield))


def test_no_quotes_match_the_reference_path():
    q = _chain().iloc[:0]
    assert_bit_identical(implied_forwards(q, SPOT, RATE, YIELD),
                         reference_implied_forwards(q, SPOT, RATE, YIELD))
    assert_bit_identical(parity_pairs(q), reference_parity_pairs(q))


def _assert_same_arrays(got, want) -> None:
    assert len(got) == len(want)
    for g, w in zip(got, want):
        g, w = np.ascontiguousarray(g), np.ascontiguousarray(w)
        assert g.dtype == w.dtype and g.shape == w.shape
        assert np.array_equal(g.view(np.uint8), w.view(np.uint8))


@pytest.mark.parametrize("seed", [1, 2])
def test_quote_vols_match_the_reference_path(seed):
    """bid/mid/ask vols (American quotes by the tree, with and without cash
    dividends) from the arrays equal the frame path's, bit for bit."""
    from optbench.analysis.compare import _quote_vols
    from optbench.pricing.quotes import quote_implied_vols

    from .reference_quotes import (reference_compare_quote_vols,
                                   reference_quote_implied_vols)

    q = _awkward(seed)
    q = q[q["expiry"].notna()].reset_index(drop=True)
    q["t"] = q["t"].fillna(q["t"].max())
    for divs in (None, (np.array([0.1, 0.6]), np.array([4.0, 5.0]))):
        fw = implied_forwards(q, SPOT, RATE, YIELD, dividends=divs)
        assert_bit_identical(quote_implied_vols(q, fw, SPOT, dividends=divs),
                             reference_quote_implied_vols(q, fw, SPOT, dividends=divs))
        _assert_same_arrays(_quote_vols(q, fw, SPOT, divs),
                            reference_compare_quote_vols(q, fw, SPOT, divs))
    european = q.drop(columns="style")
    fw = implied_forwards(european, SPOT, RATE, YIELD)
    assert_bit_identical(quote_implied_vols(european, fw),
                         reference_quote_implied_vols(european, fw))
    with pytest.raises(ValueError, match="no forward for expiry"):
        quote_implied_vols(q, fw.iloc[1:], SPOT)


def test_short_median_is_numpys():
    """The parity fit's median of absolute residuals equals ``numpy.median`` bit for
    bit (odd and even sizes, magnitudes from subnormal to huge)."""
    from optbench.pricing.forwards import _median
    rng = np.random.default_rng(20261204)
    for _ in range(3000):
        x = np.abs(rng.standard_normal(int(rng.integers(1, 25)))
                   * 10.0 ** rng.uniform(-300, 300))
        assert _median(x) == np.median(x)
    for x in ([5e-324, 1.5e-323], [1.0, 2.0, 2.0, 1e308, 1e308], [0.0, 0.0]):
        assert _median(np.array(x)) == np.median(np.array(x))
