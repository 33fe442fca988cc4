"""Smile fits per expiry: raw SVI (Gatheral 2004) and the smile's standard points.

Outside references are named beside each check: vollib (Black-Scholes-Merton prices,
implied vols and analytical deltas), scipy.optimize.least_squares (an independent
general-purpose fit of the same objective), and published SVI parameter sets.
"""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy.optimize import least_squares

from vollib.black_scholes_merton import black_scholes_merton as vl_price
from vollib.black_scholes_merton.greeks.analytical import delta as vl_delta
from vollib.black_scholes_merton.greeks.analytical import vega as vl_vega
from vollib.black_scholes_merton.implied_volatility import implied_volatility as vl_iv

from optbench.analysis.smile import MONEYNESS, SviFit, fit_svi, smile_points
from optbench.errors import InputError


def svi_w(k, a, b, rho, m, sigma):
    """Raw SVI total variance, written out from Gatheral (2004), eq. for w(k)."""
    return a + b * (rho * (k - m) + np.sqrt((k - m) ** 2 + sigma ** 2))


# Gatheral & Jacquier, "Arbitrage-free SVI volatility surfaces" (2014), §5: the
# parameter set (a, b, rho, m, sigma) = (-0.0410, 0.1331, 0.3060, 0.3586, 0.4153),
# t = 1 (quoted from memory); a negative a with a positive minimum variance.
GJ_2014 = (-0.0410, 0.1331, 0.3060, 0.3586, 0.4153)
# an equity-index-like downward skew (invented for the test)
SKEW = (0.01, 0.08, -0.6, 0.02, 0.15)


@pytest.mark.parametrize("params", [GJ_2014, SKEW, (0.002, 0.05, -0.9, 0.05, 0.05)])
def test_svi_recovers_the_parameters_that_generated_the_smile(params):
    # Gatheral (2004): raw SVI is identified from a smile it generated.
    k = np.linspace(-0.8, 0.5, 40)
    fit = fit_svi(k, svi_w(k, *params), t=1.0)
    got = (fit.a, fit.b, fit.rho, fit.m, fit.sigma)
    np.testing.assert_allclose(got, params, rtol=1e-7, atol=1e-9)
    assert fit.converged and fit.method == "svi" and fit.n_points == 40
    assert fit.rmse_iv < 1e-8


@pytest.mark.parametrize("params, k_lo, k_hi, t, noise, seed", [
    (SKEW, -0.6, 0.4, 0.5, 0.02, 7),
    # a long-dated skew whose minimum lies inside a narrow valley of (m, sigma)
    ((0.0199, 0.129, -0.70, 0.21, 0.214), -0.7, 0.27, 2.0, 0.002, 3),
    # a one-week smile: rho near -1, small sigma
    ((7e-5, 0.0047, -0.9, 0.0126, 0.0138), -0.087, 0.017, 0.02, 0.002, 5),
])
def test_noisy_fit_is_at_least_as_good_as_a_general_least_squares_fit(
        params, k_lo, k_hi, t, noise, seed):
    # Reference: scipy.optimize.least_squares on the same five raw SVI parameters
    # from six random starts (and the true values), with SVI's box constraints; the
    # best feasible result (non-negative minimum variance) is the bar to meet.
    rng = np.random.default_rng(seed)
    k = np.linspace(k_lo, k_hi, 30)
    w = svi_w(k, *params) * (1 + noise * rng.standard_normal(k.size))
    fit = fit_svi(k, w, t=t)
    starts = [params] + [(w.min() * 0.5, rng.uniform(0.01, 0.5), rng.uniform(-0.9, 0.9),
                          rng.uniform(-0.3, 0.3), rng.uniform(0.01, 0.5)) for _ in range(6)]
    theirs = np.inf
    for x0 in starts:
        ref = least_squares(lambda p: svi_w(k, *p) - w, x0=x0,
                            bounds=([-1, 0, -0.999, -3, 1e-4], [1, 10, 0.999, 3, 5]))
        a, b, rho, m, s = ref.x
        if a + b * s * np.sqrt(1 - rho ** 2) >= 0:
            theirs = min(theirs, float(np.sum(ref.fun ** 2)))
    ours = np.sum((fit.total_variance(k) - w) ** 2)
    assert ours <= theirs * (1 + 1e-6)
    assert fit.min_total_variance >= 0
    # rmse_iv is in decimal vol: recompute it from the fitted and quoted vols
    iv_q = np.sqrt(w / t)
    assert fit.rmse_iv == pytest.approx(np.sqrt(np.mean((fit.iv(k) - iv_q) ** 2)), rel=1e-12)


def test_weights_leave_a_zero_weight_outlier_out():
    k = np.linspace(-0.5, 0.5, 21)
    w = svi_w(k, *SKEW)
    w_bad = w.copy()
    w_bad[3] *= 3.0
    weights = np.ones_like(k)
    weights[3] = 0.0
    fit = fit_svi(k, w_bad, weights, t=1.0)
    np.testing.assert_allclose([fit.a, fit.b, fit.rho, fit.m, fit.sigma], SKEW,
                               rtol=1e-6, atol=1e-8)
    assert fit.n_points == 20
    # with the outlier weighted in, the fit moves
    fit_all = fit_svi(k, w_bad, t=1.0)
    assert abs(fit_all.a - SKEW[0]) > 1e-4


def test_flat_vol_chain_priced_by_vollib_gives_flat_smile_points():
    # Reference: vollib prices a flat 23% vol chain and backs out its implied vols;
    # the fitted smile must then be flat at 23% at every point.
    S, r, q, t, vol = 100.0, 0.04, 0.015, 0.35, 0.23
    F = S * np.exp((r - q) * t)
    K = np.linspace(70, 135, 27)
    iv = np.array([vl_iv(vl_price("p" if x < F else "c", S, x, t, r, vol, q), S, x, t, r,
                         q, "p" if x < F else "c") for x in K])
    # vega-weighted, with vollib's analytical BSM vega as the weights
    vega_w = np.array([vl_vega("c", S, x, t, r, vol, q) for x in K])
    fit = fit_svi(np.log(K / F), iv ** 2 * t, vega_w, t=t)
    pts = smile_points(fit, F, t, r, q, S)
    np.testing.assert_allclose(pts.iv_moneyness, vol, atol=1e-9)
    assert pts.iv_atm == pytest.approx(vol, abs=1e-9)
    assert pts.iv_25d_put == pytest.approx(vol, abs=1e-9)
    assert pts.iv_25d_call == pytest.approx(vol, abs=1e-9)
    assert abs(pts.rr_25d) < 1e-9 and abs(pts.bf_25d) < 1e-9
    # vollib's analytical spot delta at the solved strikes is -0.25 and +0.25
    assert vl_delta("p", S, pts.strike_25d_put, t, r, vol, q) == pytest.approx(-0.25, abs=1e-9)
    assert vl_delta("c", S, pts.strike_25d_call, t, r, vol, q) == pytest.approx(0.25, abs=1e-9)


@pytest.mark.parametrize("delta", ["spot", "forward"])
def test_25_delta_strikes_on_a_skew_match_vollib_deltas(delta):
    # Reference: vollib's analytical BSM delta e^{-qt} N(d1) (spot) evaluated at the
    # solved strike with the smile's own vol there; forward delta is that times e^{qt}.
    S, r, q, t = 100.0, 0.03, 0.02, 0.75
    F = S * np.exp((r - q) * t)
    k = np.linspace(-0.9, 0.5, 30)
    fit = fit_svi(k, svi_w(k, 0.02, 0.1, -0.7, 0.05, 0.2), t=t)
    pts = smile_points(fit, F, t, r, q, S, delta=delta)
    scale = 1.0 if delta == "spot" else np.exp(q * t)
    d_put = vl_delta("p", S, pts.strike_25d_put, t, r, pts.iv_25d_put, q) * scale
    d_call = vl_delta("c", S, pts.strike_25d_call, t, r, pts.iv_25d_call, q) * scale
    assert d_put == pytest.approx(-0.25, abs=1e-9)
    assert d_call == pytest.approx(0.25, abs=1e-9)
    # a downward skew (rho < 0) makes the 25-delta put dearer than the call
    assert pts.rr_25d < 0 and pts.iv_25d_put > pts.iv_atm > pts.iv_25d_call
    assert pts.delta_convention == delta and pts.atm_convention == "forward"
    np.testing.assert_allclose(pts.iv_moneyness, fit.iv(np.log(np.array(MONEYNESS))))


def test_carry_implied_from_spot_and_forward_gives_the_same_points():
    # Spot delta needs e^{-qt}; q implied from F = S e^{(r-q)t} must agree with q given.
    S, r, q, t = 100.0, 0.05, 0.03, 0.5
    F = S * np.exp((r - q) * t)
    k = np.linspace(-0.5, 0.4, 25)
    fit = fit_svi(k, svi_w(k, *SKEW) * t, t=t)
    a = smile_points(fit, F, t, r, q, S)
    b = smile_points(fit, F, t, r, None, S)
    assert a.strike_25d_put == pytest.approx(b.strike_25d_put, rel=1e-12)
    with pytest.raises(InputError):
        smile_points(fit, F, t, r)          # spot delta without q or S


def test_few_points_are_fitted_simply_and_flagged():
    fit1 = fit_svi([0.0], [0.04], t=1.0)
    assert fit1.method == "flat" and not fit1.converged and fit1.iv(0.3) == pytest.approx(0.2)
    k = np.array([-0.2, -0.05, 0.0, 0.15])
    w = svi_w(k, *SKEW)
    fit4 = fit_svi(k, w, t=1.0)
    assert fit4.method == "svi-fixed-m-sigma" and not fit4.converged
    assert fit4.min_total_variance >= 0 and np.isfinite(fit4.rmse_iv)
    # three free linear unknowns through three points: an exact fit
    fit3 = fit_svi(k[:3], w[:3], t=1.0)
    assert fit3.rmse_iv < 1e-6


@pytest.mark.parametrize("args, kwargs", [
    (([0.1, 0.2], [0.04]), {"t": 1.0}),                 # mismatched shapes
    (([], []), {"t": 1.0}),                             # empty
    (([0.1, 0.2], [0.04, 0.05]), {"t": -0.5}),          # negative time
    ((["a", "b"], [0.04, 0.05]), {"t": 1.0}),           # strings
    (([0.1, 0.2], [np.nan, np.nan]), {"t": 1.0}),       # nothing finite
])
def test_bad_input_is_a_clear_error(args, kwargs):
    with pytest.raises(InputError, match="fit_svi"):
        fit_svi(*args, **kwargs)


@settings(max_examples=25, deadline=None)
@given(a=st.floats(0.0, 0.05), b=st.floats(0.02, 0.4), rho=st.floats(-0.9, 0.9),
       m=st.floats(-0.2, 0.2), sigma=st.floats(0.03, 0.5))
def test_property_fit_reproduces_any_svi_smile(a, b, rho, m, sigma):
    # Gatheral (2004): every raw SVI smile satisfying the constraints is reachable,
    # so the fit must reproduce its total variance on the strikes it saw.
    k = np.linspace(-0.7, 0.5, 30)
    w = svi_w(k, a, b, rho, m, sigma)
    fit = fit_svi(k, w, t=1.0)
    assert isinstance(fit, SviFit)
    np.testing.assert_allclose(fit.total_variance(k), w, atol=1e-7)
    assert fit.b >= 0 and abs(fit.rho) <= 1 and fit.sigma > 0
    assert fit.min_total_variance >= -1e-15


@settings(max_examples=20, deadline=None)
@given(rho=st.floats(-0.9, 0.3), b=st.floats(0.05, 0.3), t=st.floats(0.05, 2.0),
       r=st.floats(0.0, 0.06), q=st.floats(0.0, 0.04))
def test_property_25_delta_strikes_have_delta_025_by_vollib(rho, b, t, r, q):
    # vollib's analytical spot delta, at the solved strike with the smile's vol there,
    # is -0.25 / +0.25 for any smile (here SVI with total variance scaled by t).
    S = 100.0
    F = S * np.exp((r - q) * t)
    k = np.linspace(-1.0, 0.6, 25)
    fit = fit_svi(k, t * svi_w(k, 0.02, b, rho, 0.0, 0.2), t=t)
    pts = smile_points(fit, F, t, r, q, S)
    assert vl_delta("p", S, pts.strike_25d_put, t, r, pts.iv_25d_put, q) == pytest.approx(
        -0.25, abs=1e-8)
    assert vl_delta("c", S, pts.strike_25d_call, t, r, pts.iv_25d_call, q) == pytest.approx(
        0.25, abs=1e-8)


def test_durrleman_g_matches_breeden_litzenberger_on_vollib_prices():
    # Breeden & Litzenberger (1978): d2C/dK2 = D * density(K). Prices are vollib's
    # Black-76 prices at the smile's vols; the density from g(k) (Gatheral & Jacquier
    # 2014, Lemma 2.2) must match their second difference in strike, sign included.
    from vollib.black import black as vl_black
    t, F = 1.0, 100.0
    fit = SviFit(*GJ_2014, t=t, rmse_iv=0.0, n_points=0, converged=True, message="")
    K = np.linspace(40.0, 300.0, 27)
    h = 0.05
    def call(x):
        return vl_black("c", F, x, t, 0.0, float(fit.iv(np.log(x / F))))
    d2c = np.array([(call(x + h) - 2 * call(x) + call(x - h)) / h ** 2 for x in K])
    k = np.log(K / F)
    w = fit.total_variance(k)
    d2 = -k / np.sqrt(w) - np.sqrt(w) / 2
    density_k = fit.density_g(k) * np.exp(-d2 ** 2 / 2) / np.sqrt(2 * np.pi * w)
    np.testing.assert_allclose(d2c, density_k / K, rtol=2e-3, atol=1e-7)
    # this parameter set is the one Gatheral & Jacquier (2014) use to show butterfly
    # arbitrage in a raw SVI smile (from memory): g < 0 somewhere on the right wing
    assert fit.density_g(np.linspace(0.0, 1.5, 151)).min() < 0
    assert fit.density_g(np.linspace(-1.5, 0.0, 151)).min() > 0


def _random_smile(rng):
    """An invented noisy SVI smile: (k, w, weights or None, t)."""
    t = rng.uniform(0.02, 2.0)
    params = (rng.uniform(0, 0.03) * t, rng.uniform(0.02, 0.4) * np.sqrt(t),
              rng.uniform(-0.95, 0.5), rng.uniform(-0.2, 0.2) * np.sqrt(t),
              rng.uniform(0.02, 0.4) * np.sqrt(t))
    sd = 0.25 * np.sqrt(t)
    k = np.linspace(rng.uniform(-4, -1.5) * sd, rng.uniform(0.5, 2.5) * sd, 30)
    w = np.maximum(svi_w(k, *params) * (1 + rng.uniform(0.001, 0.03)
                                        * rng.standard_normal(k.size)), 1e-8)
    weights = None if rng.uniform() < 0.5 else np.exp(-0.5 * (k / sd) ** 2) + 0.02
    return k, w, weights, t


@pytest.mark.parametrize("seed", range(8))
def test_random_noisy_smiles_match_multi_start_least_squares(seed):
    # Reference: scipy.optimize.least_squares on the five raw SVI parameters with the
    # same weights, from 16 starts spread over the parameter box (Gatheral 2004's
    # constraints as bounds; results with a negative minimum variance discarded).
    # The deterministic search must reach the best of them (or better).
    rng = np.random.default_rng(100 + seed)
    k, w, weights, t = _random_smile(rng)
    sw = np.ones_like(k) if weights is None else np.sqrt(weights)
    fit = fit_svi(k, w, weights, t=t)
    theirs = np.inf
    for _ in range(16):
        x0 = (w.min() * rng.uniform(0, 0.9), rng.uniform(0.01, 0.5), rng.uniform(-0.9, 0.9),
              rng.uniform(-0.3, 0.3), rng.uniform(0.01, 0.5))
        ref = least_squares(lambda p: sw * (svi_w(k, *p) - w), x0=x0,
                            bounds=([-1, 0, -0.999, -3, 1e-4], [1, 10, 0.999, 3, 5]))
        a, b, rho, m, s = ref.x
        if a + b * s * np.sqrt(1 - rho ** 2) >= 0:
            theirs = min(theirs, float(np.sum(ref.fun ** 2)))
    ours = float(np.sum((sw * (fit.total_variance(k) - w)) ** 2))
    assert ours <= theirs * (1 + 1e-6)
    assert fit.min_total_variance >= -1e-15 and fit.b >= 0 and abs(fit.rho) <= 1


def test_inner_solve_matches_bounded_linear_least_squares():
    # Reference: scipy.optimize.lsq_linear (bounded-variable least squares) on the
    # quasi-explicit linear problem of De Marco & Martini (2009): for fixed (m, sigma)
    # w = a + u P + v Q with u, v >= 0. Wherever its solution keeps the minimum
    # variance a + sqrt(u v) non-negative, the exact active-set solve must reach
    # its objective; the batched few-candidate solve must agree with the closed forms.
    from scipy.optimize import lsq_linear
    from optbench.analysis.smile import _inner, _inner_few
    rng = np.random.default_rng(3)
    k = np.linspace(-0.6, 0.4, 35)
    w = svi_w(k, *SKEW) * (1 + 0.02 * rng.standard_normal(k.size))
    wt = rng.uniform(0.2, 2.0, k.size)
    m = rng.uniform(-0.8, 0.6, 40)
    s = np.exp(rng.uniform(np.log(0.01), np.log(1.5), 40))
    coef, obj, sets = _inner(k, w, wt, m, s, exact=True)
    coef_f, obj_f, sets_f, _, _ = _inner_few(k, w, wt, m, s)
    np.testing.assert_allclose(obj_f, obj, rtol=1e-9, atol=1e-18)
    np.testing.assert_array_equal(sets_f, sets)
    sw = np.sqrt(wt)
    checked = 0
    for i in range(m.size):
        y = (k - m[i]) / s[i]
        r = np.sqrt(y * y + 1)
        X = np.stack([np.ones_like(k), (r + y) / 2, (r - y) / 2], axis=1) * sw[:, None]
        ref = lsq_linear(X, sw * w, bounds=([-np.inf, 0, 0], [np.inf, np.inf, np.inf]),
                         method="bvls")
        a, u, v = ref.x
        if a + np.sqrt(max(u * v, 0.0)) >= 0:
            checked += 1
            assert obj[i] <= float(np.sum((X @ ref.x - sw * w) ** 2)) * (1 + 1e-9) + 1e-18
    assert checked >= 20


def test_straight_smile_is_flagged_degenerate_but_fitted_closely():
    # A total variance linear in k is SVI's limit of a vanishing sigma or a far m
    # (Gatheral 2004: the wings are straight lines); the fit follows it and says so.
    k = np.linspace(-0.4, 0.3, 40)
    w = 0.04 * (1 - 0.5 * k)
    fit = fit_svi(k, w, t=1.0)
    assert not fit.converged and "degenerate" in fit.message
    assert fit.rmse_iv < 1e-6 and fit.min_total_variance >= 0


def _smile_problems(seed: int, count: int, n_quotes: int | None = None) -> list:
    """Noisy SVI smiles of several expiries with different quote counts, or
    ``n_quotes`` each (invented)."""
    rng = np.random.default_rng(seed)
    out = []
    for i in range(count):
        n = int(rng.integers(5, 160)) if n_quotes is None else n_quotes
        k = np.sort(rng.uniform(-0.7, 0.4, n))
        a, b = rng.uniform(0.002, 0.05), rng.uniform(0.02, 0.4)
        rho, m, s = rng.uniform(-0.95, 0.6), rng.uniform(-0.2, 0.2), rng.uniform(0.01, 0.5)
        w = np.abs(svi_w(k, a, b, rho, m, s) * (1 + rng.normal(0, 0.03, n)))
        weights = rng.uniform(0.05, 3.0, n) if i % 2 else None
        out.append((k, w, weights, float(rng.uniform(0.02, 2.0))))
    return out


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_fits_of_several_expiries_at_once_equal_the_fits_one_at_a_time(seed):
    # reference: fit_svi one expiry at a time (its own polish); the batched polish of
    # every expiry together must give the same fits bit for bit
    from optbench.analysis.smile import fit_svi_many
    problems = _smile_problems(seed, 9)
    problems += [(np.array([-0.1, 0.0, 0.1]), np.array([0.05, 0.04, 0.045]), None, 0.5),
                 (np.array([0.0]), np.array([0.04]), None, 0.25)]
    problems.insert(4, (np.array([0.0, 0.1]), np.array([0.04, 0.05]), [0.0, 0.0], 0.5))
    one_by_one = []
    for k, w, wt, t in problems:
        try:
            one_by_one.append(fit_svi(k, w, wt, t=t))
        except InputError as err:
            one_by_one.append(err.problem)
    together = fit_svi_many(problems, errors="return")
    assert [f.problem if isinstance(f, InputError) else f for f in together] == one_by_one
    assert isinstance(together[4], InputError)
    with pytest.raises(InputError, match="fit_svi"):
        fit_svi_many(problems)


@pytest.mark.parametrize("seed", [4, 5, 6, 8])
def test_fits_of_expiries_with_equally_many_quotes_equal_the_fits_one_at_a_time(seed):
    # reference: fit_svi one expiry at a time. Expiries with the same number of
    # quotes (as a screen's capped smiles have) take the stacked products of the
    # batched polish; the fits must still be the same bit for bit
    from optbench.analysis.smile import fit_svi_many
    problems = _smile_problems(seed, 4, n_quotes=100)
    assert fit_svi_many(problems) == [fit_svi(k, w, wt, t=t) for k, w, wt, t in problems]


@pytest.mark.parametrize("n_quotes", [None, 60])
def test_batched_fits_that_fall_back_to_one_solve_per_expiry_are_unchanged(monkeypatch,
                                                                            n_quotes):
    # a batch whose solve fails is solved again expiry by expiry (as a singular
    # expiry alone would be): forced here by failing every solve larger than one
    # expiry's, the fits must still equal fit_svi one at a time
    from optbench.analysis.smile import fit_svi_many
    problems = _smile_problems(7, 5, n_quotes)
    reference = [fit_svi(k, w, wt, t=t) for k, w, wt, t in problems]
    solve = np.linalg.solve
    calls = {"failed": 0}

    def fail_large(a, b):
        # one expiry alone solves at most 7 sets x 3 starts x 4 dampings of 3 x 3
        # systems and 3 starts x 4 dampings of 5 x 5 ones
        a = np.asarray(a)
        if a[..., 0, 0].size > (84 if a.shape[-1] == 3 else 12):
            calls["failed"] += 1
            raise np.linalg.LinAlgError("forced")
        return solve(a, b)
    monkeypatch.setattr(np.linalg, "solve", fail_large)
    assert fit_svi_many(problems) == reference
    assert calls["failed"] > 2


def test_strikes_for_delta_in_python_floats_equal_the_numpy_iteration():
    # reference: the fixed point of _strike_for_d1 iterated on numpy arrays (taken
    # for targets of two or more dimensions); the Python-float iteration for a row
    # of targets must give the same strikes bit for bit (invented smiles)
    from optbench.analysis.smile import _strike_for_d1
    rng = np.random.default_rng(11)
    for _ in range(300):
        fit = SviFit(float(rng.uniform(-0.01, 0.05)), float(rng.uniform(0.0, 1.5)),
                     float(rng.uniform(-0.999, 0.999)), float(rng.uniform(-0.5, 0.5)),
                     float(10 ** rng.uniform(-4, 0)), float(rng.uniform(0.01, 3.0)), 0.0,
                     10, True, "", "svi")
        z = float(rng.uniform(0.1, 2.5))
        d1 = np.array([-z, z])
        np.testing.assert_array_equal(_strike_for_d1(fit, d1),
                                      _strike_for_d1(fit, d1[None, :])[0])


def test_three_term_sums_written_out_equal_numpy_sum_over_the_last_axis():
    # the inner solve of the batched polish writes (7, p, 3).sum(-1) as x0 + x1 + x2
    # so as to skip numpy's reduction machinery; reference: numpy.sum itself, which
    # must add the three terms in that order for the fits to stay unchanged
    rng = np.random.default_rng(12)
    for p in range(1, 120):
        x = rng.normal(size=(7, p, 3)) * 10.0 ** rng.uniform(-8, 8, size=(7, p, 3))
        np.testing.assert_array_equal(x.sum(-1), x[..., 0] + x[..., 1] + x[..., 2])
