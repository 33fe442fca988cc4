"""Track-record statistics against their definitions and a reference library."""
from __future__ import annotations

import numpy as np
import pytest

from optbench.track import stats


@pytest.mark.parametrize("lags", [0, 1, 5, 21])
def test_newey_west_matches_statsmodels_hac(lags):
    """Reference: statsmodels OLS(...).fit(cov_type="HAC", cov_kwds={"maxlags": L})
    (Bartlett kernel, its default: no small-sample correction) on the same regression."""
    sm = pytest.importorskip("statsmodels.api")
    rng = np.random.default_rng(3)
    n = 600
    x1 = rng.standard_normal(n).cumsum() * 0.01 + 0.2
    x2 = x1 + rng.standard_normal(n) * 0.02
    e = np.convolve(rng.standard_normal(n + 20), np.ones(21) / 21, "valid")[:n] * 0.05
    y = 0.01 + 0.8 * x1 + 0.1 * x2 + e
    ours = stats.ols_newey_west(y, {"atm_iv": x1, "forecast_vol": x2}, lags)
    ref = sm.OLS(y, sm.add_constant(np.column_stack([x1, x2]))).fit(
        cov_type="HAC", cov_kwds={"maxlags": lags})
    np.testing.assert_allclose(ours.coef, ref.params, rtol=1e-10)
    np.testing.assert_allclose(ours.std_error, ref.bse, rtol=1e-10)
    assert ours.r_squared == pytest.approx(ref.rsquared, rel=1e-12)


def test_brier_score_from_its_definition_on_hand_cases():
    """Brier (1950): BS = (1/N) sum (p_i - o_i)^2, worked by hand."""
    assert stats.brier_score([1.0, 0.0], [1, 0]) == 0.0                 # perfect
    assert stats.brier_score([0.5, 0.5, 0.5, 0.5], [1, 0, 1, 1]) == 0.25  # always one half
    # (0.7-1)^2 + (0.2-0)^2 + (0.9-0)^2 = 0.09 + 0.04 + 0.81 = 0.94; / 3
    assert stats.brier_score([0.7, 0.2, 0.9], [1, 0, 0]) == pytest.approx(0.94 / 3)
    assert stats.brier_score([0.0], [1]) == 1.0                           # worst
    assert np.isnan(stats.brier_score([np.nan], [1]))


def test_reliability_table_by_hand():
    p = [0.05, 0.15, 0.45, 0.55, 0.95, 1.0]
    o = [0, 1, 0, 1, 1, 1]
    tab = stats.reliability_table(p, o, buckets=2)
    assert [b["n"] for b in tab] == [3, 3]
    assert tab[0]["mean_prob"] == pytest.approx((0.05 + 0.15 + 0.45) / 3)
    assert tab[0]["observed"] == pytest.approx(1 / 3)
    assert tab[1]["observed"] == 1.0
    empty = stats.reliability_table([0.1], [1], buckets=4)
    assert empty[1]["n"] == 0 and np.isnan(empty[1]["observed"])


def test_percentile_rank_and_summary():
    assert stats.percentile_rank([1, 2, 3, 4], 2.5) == 0.5
    assert stats.percentile_rank([1, 2, 3, 4], 2) == pytest.approx(1.5 / 4)
    s = stats.summary(np.arange(11.0))
    assert s["n"] == 11 and s["mean"] == 5 and s["p10"] == 1 and s["p90"] == 9
