"""Beta, its standard error and R² against statsmodels' OLS on the same returns."""
from __future__ import annotations

import numpy as np
import pytest

from optbench.analysis.portfolio.beta import masked_ols_columns, ols_beta


def _sm(y, x):
    import statsmodels.api as sm
    return sm.OLS(y, sm.add_constant(x)).fit()


def test_ols_beta_matches_statsmodels():
    # reference: statsmodels.regression.linear_model.OLS (Seabold & Perktold 2010)
    rng = np.random.default_rng(3)
    x = rng.standard_t(5, 252) * 0.011
    y = 0.0002 + 1.27 * x + rng.standard_normal(252) * 0.006
    ours = ols_beta(y, x)
    ref = _sm(y, x)
    assert ours.beta == pytest.approx(ref.params[1], rel=1e-12), "statsmodels OLS beta"
    assert ours.alpha == pytest.approx(ref.params[0], rel=1e-10), "statsmodels OLS const"
    assert ours.beta_se == pytest.approx(ref.bse[1], rel=1e-10), "statsmodels OLS bse"
    assert ours.alpha_se == pytest.approx(ref.bse[0], rel=1e-10), "statsmodels OLS bse"
    assert ours.r_squared == pytest.approx(ref.rsquared, rel=1e-10), "statsmodels rsquared"
    assert ours.residual_vol == pytest.approx(np.sqrt(ref.mse_resid * 252), rel=1e-10)
    np.testing.assert_allclose(ours.residuals, ref.resid, atol=1e-14)


def test_masked_columns_match_statsmodels_on_each_columns_own_rows():
    rng = np.random.default_rng(5)
    x = rng.standard_normal(200) * 0.01
    Y = x[:, None] * np.array([0.7, 1.4, 1.0]) + rng.standard_normal((200, 3)) * 0.005
    Y[:50, 1] = np.nan                 # a short history
    Y[[10, 90, 150], 2] = np.nan       # gaps
    out = masked_ols_columns(Y, x)
    for j in range(3):
        ok = np.isfinite(Y[:, j])
        ref = _sm(Y[ok, j], x[ok])     # reference: statsmodels OLS per column
        assert out["beta"][j] == pytest.approx(ref.params[1], rel=1e-10)
        assert out["beta_se"][j] == pytest.approx(ref.bse[1], rel=1e-8)
        assert out["r_squared"][j] == pytest.approx(ref.rsquared, rel=1e-8)
        assert out["n_obs"][j] == ok.sum()


def test_demo_portfolio_beta_matches_statsmodels_on_its_returns(demo_fit):
    # the portfolio's own return series, regressed again by statsmodels
    b = demo_fit.beta
    ref = _sm(b.portfolio_returns, b.index_returns)
    assert b.beta == pytest.approx(ref.params[1], rel=1e-10), "statsmodels OLS"
    assert b.beta_se == pytest.approx(ref.bse[1], rel=1e-8), "statsmodels OLS"
    assert b.n_obs == 244     # 252 returns less the 8 dates a used holding lacks
    assert 0.8 < b.beta < 1.3 and 0.02 < b.beta_se < 0.08
    assert demo_fit.hedge_ratio == b.beta and demo_fit.ratio_source == "estimated beta"


def test_demo_portfolio_reports_each_problem_holding(demo_fit):
    rows = demo_fit.holdings.set_index("symbol")
    assert rows.loc["ZH07", "status"] == "left out" and "119 of 252" in rows.loc["ZH07", "note"]
    assert rows.loc["ZH12", "status"] == "left out" and "no column ZH12" in rows.loc["ZH12", "note"]
    assert "no close on 4" in rows.loc["ZH11", "note"]
    assert rows["weight_in_fit"].sum() == pytest.approx(1.0)
    assert any("ZH13" in w for w in demo_fit.warnings)          # column with no holding
    assert any("12.5% of the value" in w for w in demo_fit.warnings)
    # the value is quantity x price, ZH05's price from its last close
    assert demo_fit.value == pytest.approx((rows["quantity"] * rows["price"]).sum())


def test_exact_beta_portfolio_has_that_beta_and_no_residual(comparison):
    from optbench.analysis.portfolio import fit_portfolio
    from optbench.data.holdings import PricePanel
    import pandas as pd
    d = comparison.history["date"].to_numpy()
    r = comparison.history["ret"].to_numpy()
    value = 1e7 * np.exp(1.3 * np.cumsum(r))
    panel = PricePanel(source="v", closes=pd.DataFrame({"PORTFOLIO": value},
                                                       index=pd.DatetimeIndex(d)))
    fit = fit_portfolio(d, r, value_history=panel, portfolio_value=25e6)
    assert fit.beta.beta == pytest.approx(1.3, abs=1e-12)
    assert fit.beta.beta_se < 1e-12 and fit.beta.r_squared == pytest.approx(1.0)
    assert fit.value == 25e6


def test_net_short_holdings_are_a_one_line_error(comparison):
    from optbench.analysis.portfolio import fit_portfolio
    from optbench.data.holdings import Holdings, PricePanel
    from optbench.errors import InputError
    import pandas as pd
    d = comparison.history["date"].to_numpy()
    r = comparison.history["ret"].to_numpy()
    closes = pd.DataFrame({"A": 50 * np.exp(np.cumsum(r)), "B": 80 * np.exp(np.cumsum(r))},
                          index=pd.DatetimeIndex(d))
    table = pd.DataFrame({"symbol": ["A", "B"], "quantity": [10.0, -20.0],
                          "weight": [np.nan] * 2, "price": [np.nan] * 2, "lines": ["2", "3"]})
    h = Holdings("short.csv", table, "quantity", pd.DataFrame(), (), 2)
    with pytest.raises(InputError, match="short.csv: .*not net long"):
        fit_portfolio(d, r, holdings=h, panel=PricePanel("c.csv", closes))
