"""Forecast term structure and its band.

References: the arch library's analytic multi-step variance forecasts
(ARCHModelResult.forecast) and its simulation forecasts for EGARCH; Hull,
*Options, Futures, and Other Derivatives*, chapter "Estimating volatilities and
correlations", the S&P 500 GARCH(1,1) volatility term-structure example.
"""
from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from arch import arch_model
from arch.data import sp500

from optbench.volatility.forecast import (hull_term_structure, linear_average_variance,
                                          linear_forecast_variance)
from optbench.volatility.garch import fit_garch, fix_garch

HORIZONS = np.array([1, 5, 10, 21, 63, 126, 252])


@pytest.fixture(scope="module")
def pct_returns():
    # arch.data.sp500: daily S&P 500 prices bundled with the arch package
    return 100.0 * sp500.load()["Adj Close"].pct_change().dropna()


def _arch_variances(pct_returns, fit, vol_kw, horizon, **fkw):
    am = arch_model(pct_returns, mean="Constant", rescale=False, **vol_kw)
    p = dict(fit.params)
    pct = [100 * p["mu"]]
    if fit.model == "egarch":
        pct.append(p["omega"] + math.log(1e4) * (1 - p["beta"]))
    else:
        pct.append(1e4 * p["omega"])
    pct += [p[k] for k in ("alpha", "gamma", "beta", "nu") if k in p]
    res = am.fix(pct)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        f = res.forecast(horizon=horizon, reindex=False, **fkw)
    return f.variance.to_numpy()[-1] / 1e4


@pytest.mark.parametrize("model,dist,kw", [
    ("garch", "normal", dict(vol="GARCH", p=1, q=1, dist="normal")),
    ("gjr", "t", dict(vol="GARCH", p=1, o=1, q=1, dist="studentst")),
])
def test_term_structure_equals_arch_average(pct_returns, model, dist, kw):
    """forecast_vol(T) = sqrt(252 * mean of arch's per-step variance forecasts 1..T)."""
    y = pct_returns.to_numpy() / 100
    fit = fit_garch(y, model, dist)
    ref = _arch_variances(pct_returns, fit, kw, 252)
    np.testing.assert_allclose(fit.forecast_variance(252), ref, rtol=1e-9)
    assert fit.last_variance == pytest.approx(ref[0], rel=1e-9)
    expected = np.sqrt(252 * np.cumsum(ref)[HORIZONS - 1] / HORIZONS)
    np.testing.assert_allclose(fit.forecast_vol(HORIZONS), expected, rtol=1e-9)
    assert isinstance(fit.forecast_vol(21), float)
    # the far end of the term structure tends to the long-run vol
    assert fit.forecast_vol(100_000) == pytest.approx(fit.long_run_vol, rel=2e-3)


def test_egarch_exact_recursion_against_arch_simulation(pct_returns):
    """EGARCH-normal: the exact log-normal recursion against arch's simulation
    forecast (20,000 paths, fixed seed; Monte Carlo tolerance)."""
    y = pct_returns.to_numpy() / 100
    fit = fix_garch(y, dict(mu=2e-4, omega=-0.25, alpha=0.13, gamma=-0.15, beta=0.97),
                    "egarch", "normal")
    kw = dict(vol="EGARCH", p=1, o=1, q=1, dist="normal")
    ref = _arch_variances(pct_returns, fit, kw, 63, method="simulation",
                          simulations=20_000, random_state=np.random.RandomState(7))
    ours = fit.forecast_variance(63)
    assert ours[0] == pytest.approx(ref[0], rel=1e-9)   # one step ahead is exact
    np.testing.assert_allclose(ours, ref, rtol=0.03)
    avg = np.cumsum(ours) / np.arange(1, 64)
    np.testing.assert_allclose(np.cumsum(ref) / np.arange(1, 64), avg, rtol=0.02)


def test_egarch_forecast_against_own_simulation(pct_returns):
    """EGARCH-normal expected variances equal the mean simulated variance per day."""
    y = pct_returns.to_numpy() / 100
    fit = fix_garch(y, dict(mu=2e-4, omega=-0.25, alpha=0.13, gamma=-0.15, beta=0.97),
                    "egarch", "normal")
    paths = fit.simulate(21, 100_000, seed=3)
    np.testing.assert_allclose(paths.variances.mean(axis=0), fit.forecast_variance(21),
                               rtol=0.01)


# Hull, Options, Futures, and Other Derivatives, "Estimating volatilities and
# correlations": GARCH(1,1) on the S&P 500 with omega = 0.0000013465,
# alpha = 0.083394, beta = 0.910116, so V_L = 0.0002075 (1.4404% a day); with a
# current variance of 0.0003 a day the table of option lives 10, 30, 50, 100, 500
# days gives 27.36, 27.10, 26.87, 26.35, 24.32 % a year (table digits from memory).
HULL = dict(omega=0.0000013465, alpha=0.083394, beta=0.910116)
HULL_DAYS = np.array([10, 30, 50, 100, 500])
HULL_VOLS_PCT = np.array([27.36, 27.10, 26.87, 26.35, 24.32])


def test_hull_term_structure_formula():
    vl = HULL["omega"] / (1 - HULL["alpha"] - HULL["beta"])
    assert vl == pytest.approx(0.0002075, abs=5e-8)          # Hull: V_L = 0.0002075
    vols = hull_term_structure(HULL_DAYS, current_variance=0.0003, **HULL)
    np.testing.assert_allclose(100 * vols, HULL_VOLS_PCT, atol=0.011)


def test_exact_discrete_average_is_close_to_hull():
    """optbench averages the discrete daily forecasts; Hull integrates them. For
    these parameters the two differ by less than 0.02 vol points (the discrete
    factor is about (1 + a/2) times the continuous one, a = ln(1/(alpha+beta)))."""
    p = HULL["alpha"] + HULL["beta"]
    vl = HULL["omega"] / (1 - p)
    exact = np.sqrt(252 * linear_average_variance(0.0003, vl, p, HULL_DAYS))
    hull = hull_term_structure(HULL_DAYS, current_variance=0.0003, **HULL)
    assert np.all(np.abs(exact - hull) < 0.0002)
    assert np.all(exact > hull)   # V(0) > V_L: the discrete sum decays more slowly
    # closed form = brute-force mean of the per-day forecasts
    daily = linear_forecast_variance(0.0003, vl, p, 500)
    brute = np.sqrt(252 * np.cumsum(daily)[HULL_DAYS - 1] / HULL_DAYS)
    np.testing.assert_allclose(exact, brute, rtol=1e-12)


def test_band_brackets_the_forecast_and_narrows_with_data(pct_returns):
    y = pct_returns.to_numpy() / 100
    long_fit = fit_garch(y, "gjr", "t")
    lo, hi = long_fit.forecast_band(HORIZONS, seed=1)
    mid = long_fit.forecast_vol(HORIZONS)
    assert np.all(lo < mid) and np.all(mid < hi)
    # parameter uncertainty: a few vol points up to a month; the far end widens
    # (the long-run level of a persistent model is poorly pinned down)
    assert np.all((hi - lo)[:4] < 0.05) and np.all(np.diff(hi - lo) > 0)
    short_fit = fit_garch(y[-750:], "gjr", "t")
    slo, shi = short_fit.forecast_band(HORIZONS, seed=1)
    # three years of data leave more parameter uncertainty than twenty (far end)
    assert (shi - slo)[-1] > (hi - lo)[-1]
    # reproducible with a seed; scalar in -> floats out
    assert long_fit.forecast_band(HORIZONS, seed=1)[0] == pytest.approx(lo)
    a, b = long_fit.forecast_band(21, seed=1)
    assert isinstance(a, float) and a < b


def test_band_matches_draw_spread_in_closed_form(pct_returns):
    """With many draws the band quantiles approach the delta-method interval of the
    long-horizon vol (normal approximation, 5%-95% = +-1.645 sd)."""
    y = pct_returns.to_numpy() / 100
    fit = fit_garch(y, "garch", "normal")
    lo, hi = fit.forecast_band([2000], n_draws=4000, seed=2)
    # delta method on sqrt(252 omega / (1 - alpha - beta)) with the robust covariance
    names = list(fit.param_names)
    o, a, b = (fit.params[k] for k in ("omega", "alpha", "beta"))
    lr = math.sqrt(252 * o / (1 - a - b))
    grad = np.zeros(len(names))
    grad[names.index("omega")] = lr / (2 * o)
    grad[names.index("alpha")] = lr / (2 * (1 - a - b))
    grad[names.index("beta")] = lr / (2 * (1 - a - b))
    sd = math.sqrt(grad @ fit.cov @ grad)
    assert (hi[0] - lo[0]) == pytest.approx(2 * 1.645 * sd, rel=0.35)


@pytest.mark.parametrize("dist", ["normal", "t"])
def test_egarch_band_brackets_the_forecast(pct_returns, dist):
    y = pct_returns.to_numpy()[-2500:] / 100
    fit = fit_garch(y, "egarch", dist)
    assert fit.model == "egarch"
    lo, hi = fit.forecast_band([5, 21, 126], seed=3)
    mid = fit.forecast_vol([5, 21, 126])
    assert np.all(lo < mid) and np.all(mid < hi)


def _exact_average_variance(s1: float, omega: float, p: float, T: int):
    """The direct sum ``(1/T) sum_{k<T} [omega sum_{j<k} p^j + p^k s1]`` in exact
    rational arithmetic (Python's fractions) at the given doubles: the definition of
    the GARCH(1,1) multi-step forecast (Bollerslev 1986) summed term by term."""
    from fractions import Fraction

    s1, omega, p = Fraction(s1), Fraction(omega), Fraction(p)
    total, geo, pk = Fraction(0), Fraction(0), Fraction(1)
    for _ in range(T):
        total += omega * geo + pk * s1
        geo += pk
        pk *= p
    return total / T


@pytest.mark.parametrize("gap", [0.9, 0.5, 1e-3, 1e-6, 1e-9, 1e-10, 1e-11, 1e-13, 1e-15, 0.0])
def test_forecast_vol_near_unit_persistence_matches_the_direct_sum(pct_returns, gap):
    """forecast_vol stays exact (1e-12 relative) as the persistence approaches one,
    and at exactly one, against the exact direct sum of the daily forecasts."""
    y = pct_returns.to_numpy()[-1000:] / 100
    beta = 0.9 - gap
    fit = fix_garch(y, {"mu": 0.0, "omega": 2e-6, "alpha": 0.1, "beta": beta},
                    "garch", "normal")
    p = fit.persistence
    days = np.array([1, 2, 5, 21, 63, 252])
    got = fit.forecast_vol(days)
    for T, v in zip(days, got):
        ref = math.sqrt(252 * float(_exact_average_variance(fit.last_variance, 2e-6, p,
                                                            int(T))))
        assert abs(v / ref - 1) < 1e-12, (gap, T, v, ref)
    daily = fit.forecast_variance(252)
    ref_last = 252 * _exact_average_variance(fit.last_variance, 2e-6, p, 252) \
        - 251 * _exact_average_variance(fit.last_variance, 2e-6, p, 251)
    assert abs(daily[-1] / float(ref_last) - 1) < 1e-12
