"""Fits on degenerate histories: stale closes, a wild jump, too few moving days.

The history is the last 1,500 daily returns of arch's bundled ``arch.data.nasdaq``
(the arch library's sample data), damaged on purpose. A fit must never hand back an
absurd forecast: it falls back with the reason, or refuses with a one-line error.
"""
from __future__ import annotations

import numpy as np
import pytest
from arch.data import nasdaq

from optbench.errors import InputError
from optbench.volatility.garch import fit_garch


@pytest.fixture(scope="module")
def returns():
    prices = nasdaq.load()["Adj Close"].dropna().to_numpy(dtype=float)
    return np.diff(np.log(prices))[-1500:]


def _sample_vol(y):
    return float(np.std(y)) * np.sqrt(252)


@pytest.mark.parametrize("model", ["garch", "gjr", "egarch", "auto"])
def test_stale_closes_at_the_end_fall_back_with_the_reason(returns, model):
    y = returns.copy()
    y[-300:] = 0.0          # the last 300 closes unchanged
    fit = fit_garch(y, model, "t")
    assert fit.model == "ewma"
    assert "300 returns in a row are exactly zero (the last 300 of 1500)" in \
        fit.fallback_reason
    assert np.all(np.isfinite(fit.forecast_vol([1, 21, 252])))


@pytest.mark.parametrize("model", ["garch", "gjr", "egarch"])
@pytest.mark.parametrize("dist", ["normal", "t"])
@pytest.mark.parametrize("jump", [2.0, -5.0])
def test_one_huge_jump_gives_no_absurd_forecast(returns, model, dist, jump):
    y = returns.copy()
    y[700] = jump           # one log return of +200% or -500%
    fit = fit_garch(y, model, dist)
    fv = fit.forecast_vol(np.array([1, 21, 63, 252]))
    assert np.all(np.isfinite(fv))
    # never beyond 100 times the history's own vol (which the jump already inflates)
    assert np.all(fv <= 100 * _sample_vol(y))
    if fit.model != model:
        assert fit.fallback_reason
    if fit.converged and fit.model != "ewma":
        assert fit.optimality["passed"]


def test_too_few_moving_days_is_a_clear_error():
    y = np.zeros(400)
    y[::40] = 0.01
    with pytest.raises(InputError, match="only 10 of 400 returns are non-zero"):
        fit_garch(y, "garch", "normal")
