"""Volatility cone (Burghardt & Lane 1990) against pandas rolling statistics and
numpy percentiles, and its percentile ranks."""
from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from optbench.volatility.cone import vol_cone


def _history(n=1500, sigma=0.20, seed=4):
    rng = np.random.default_rng(seed)
    close = 100 * np.exp(np.cumsum(rng.normal(0, sigma / math.sqrt(252), n)))
    return SimpleNamespace(source="sim", close=close, open=None, high=None, low=None)


def test_cone_percentiles_match_pandas_rolling_std():
    hist = _history()
    cone = vol_cone(hist, windows=(10, 21, 63), quantiles=(0.0, 0.25, 0.5, 0.75, 1.0))
    logret = pd.Series(np.log(hist.close)).diff()
    for i, w in enumerate((10, 21, 63)):
        # pandas rolling sample std, annualised, then numpy percentiles (references)
        roll = (logret.rolling(w).std() * math.sqrt(252)).dropna().to_numpy()
        np.testing.assert_allclose(cone.values[i], np.percentile(roll, [0, 25, 50, 75, 100]),
                                   rtol=1e-10)
        assert cone.n_obs[i] == roll.size
        assert cone.latest[i] == pytest.approx(roll[-1], rel=1e-12)


def test_cone_narrows_with_window_and_centres_on_true_sigma():
    # Burghardt & Lane (1990): the spread of realized vol shrinks as the window grows;
    # for a constant-volatility series the median sits near the true sigma.
    cone = vol_cone(_history())
    spread = cone.values[:, -2] - cone.values[:, 1]   # 90th - 10th percentile
    assert np.all(np.diff(spread) < 0)
    assert cone.values[-1, 3] == pytest.approx(0.20, rel=0.06)


def test_percentile_rank_of_given_vols():
    cone = vol_cone(_history(), windows=(21, 63))
    med21 = cone.values[0, 3]
    assert cone.percentile_rank(med21, 21) == pytest.approx(0.5, abs=0.01)
    ranks = cone.percentile_rank([0.0, 10.0, med21], [20, 21, 25])  # 20, 25 -> window 21
    assert ranks[0] == 0.0 and ranks[1] == 1.0 and ranks[2] == pytest.approx(0.5, abs=0.01)
    # a 70-day horizon uses the 63-day row; the maximum ranks just under 1
    assert cone.percentile_rank(cone.values[1, -1], 70) == pytest.approx(
        1 - 0.5 / cone.n_obs[1])
    assert np.isnan(cone.percentile_rank(np.nan, 21))


def test_cone_drops_windows_the_history_cannot_fill_and_serialises():
    hist = _history(n=100)
    cone = vol_cone(hist, windows=(5, 21, 252))
    assert cone.windows.tolist() == [5, 21]
    d = cone.to_dict()
    assert [row["trading_days"] for row in d["windows"]] == [5, 21]
    assert set(d["windows"][0]["percentiles"]) == {"0", "0.1", "0.25", "0.5", "0.75", "0.9", "1"}
