"""The same quotes written in every supported layout load to the same canonical table,
and the same rejections."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from optbench.data.chain import QUOTE_COLUMNS, load_chain

from conftest import random_quotes, write_layouts

COMPARED = [c for c in QUOTE_COLUMNS if c != "line"]


def _canonical(chain) -> pd.DataFrame:
    return chain.quotes[COMPARED].sort_values(["expiry", "is_call", "strike"]) \
        .reset_index(drop=True)


def _check_same(paths):
    chains = {name: load_chain(p) for name, p in paths.items()}
    ref = chains["long"]
    assert ref.layout == "long" and chains["wide"].layout == "wide"
    for name, chain in chains.items():
        pd.testing.assert_frame_equal(_canonical(chain), _canonical(ref), obj=name)
        assert chain.quality == ref.quality, name
        assert chain.spot == ref.spot and chain.asof == ref.asof, name
        assert sorted(chain.rejected["reason"]) == sorted(ref.rejected["reason"]), name
    return ref


def test_layouts_agree_seeded(tmp_path):
    rng = np.random.default_rng(7)
    quotes = random_quotes(rng, n_exp=4, n_k=8)
    ref = _check_same(write_layouts(quotes, 100.0, tmp_path))
    assert ref.quality.rows_in == len(quotes)
    assert ref.quality.rows_used > 0
    # the OCC symbols carry the root; the long file names the underlying
    assert load_chain(tmp_path / "occ.csv").underlying == "ZPHX"


@settings(max_examples=8, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(seed=st.integers(0, 2**32 - 1), n_exp=st.integers(1, 4), n_k=st.integers(1, 7),
       spot=st.sampled_from([60.0, 100.0, 137.5]))
def test_layouts_agree_property(tmp_path_factory, seed, n_exp, n_k, spot):
    folder = tmp_path_factory.mktemp("layouts")
    quotes = random_quotes(np.random.default_rng(seed), spot=spot, n_exp=n_exp, n_k=n_k)
    _check_same(write_layouts(quotes, spot, folder))


def test_wide_layout_keeps_input_line_numbers(tmp_path):
    quotes = random_quotes(np.random.default_rng(3), n_exp=2, n_k=3)
    paths = write_layouts(quotes, 100.0, tmp_path)
    chain = load_chain(paths["wide"])
    lines = set(chain.quotes["line"]) | set(chain.rejected["line"])
    assert lines == set(range(2, 2 + 6))  # six strike rows under the header
    # every line carries a call and a put
    counts = pd.concat([chain.quotes["line"], chain.rejected["line"]]).value_counts()
    assert (counts == 2).all()


def test_variant_layout_skips_title_line(tmp_path):
    quotes = random_quotes(np.random.default_rng(4), n_exp=1, n_k=2)
    chain = load_chain(write_layouts(quotes, 100.0, tmp_path)["variant"])
    # title on line 1, blank line 2, header line 3: the first quote is line 4
    assert min(set(chain.quotes["line"]) | set(chain.rejected["line"])) == 4


@pytest.mark.parametrize("iv_cells, expected", [
    (["21.5", "30"], [0.215, 0.30]),       # percent points (median > 3)
    (["0.215", "0.3"], [0.215, 0.30]),     # decimals
    (["21.5%", "30%"], [0.215, 0.30]),     # percent signs
])
def test_iv_column_percent_or_decimal(tmp_path, iv_cells, expected):
    path = tmp_path / "iv.csv"
    path.write_text("quote_date,underlying_price,expiry,strike,type,bid,ask,Implied Volatility\n"
                    f"2026-11-27,100,2027-01-15,100,C,4.0,4.2,\"{iv_cells[0]}\"\n"
                    f"2026-11-27,100,2027-01-15,100,P,3.9,4.1,\"{iv_cells[1]}\"\n")
    chain = load_chain(path)
    got = chain.quotes.sort_values("is_call", ascending=False)["iv_file"].to_numpy()
    np.testing.assert_allclose(got, expected)
