"""Implied volatility: accuracy on the stated domain, deep out-of-the-money prices,
agreement with vollib (the scalar reference of the same method), reason codes."""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from optbench.pricing import implied as iv_mod
from optbench.pricing.bsm import black_price, bsm_price
from optbench.pricing.implied import (ABOVE_MAX, BAD_INPUT, BELOW_INTRINSIC, EXPIRED,
                                      FALLBACK, OK, STATUS_NAMES,
                                      black_implied_vol_with_status, implied_vol,
                                      implied_vol_with_status, status_name)
from optbench.pricing.lets_be_rational import (normalised_black_call, normalised_black_otm,
                                               normalised_implied_vol_otm)


def _grid():
    # strikes 0.5-2x forward, expiries 1 day - 3 years, vols 5%-150% (issue 3, item 2)
    k = np.exp(np.linspace(np.log(0.5), np.log(2.0), 25))
    t = np.array([1, 2, 7, 14, 30, 61, 91, 182, 365, 730, 1095]) / 365.0
    v = np.array([0.05, 0.08, 0.12, 0.2, 0.3, 0.45, 0.7, 1.0, 1.5])
    K, T, V = (a.ravel() for a in np.meshgrid(k * 100.0, t, v, indexing="ij"))
    return 100.0, K, T, V


def test_grid_accuracy_out_of_the_money():
    F, K, T, V = _grid()
    call = K >= F
    p = black_price(F, K, T, 0.97, V, call)
    vol, status = black_implied_vol_with_status(p, F, K, T, 0.97, call)
    # prices that underflow to zero (1-day 5% vol at half the forward) carry no
    # information; every other element must be exact
    live = p > 0
    assert np.all(status[~live] == BELOW_INTRINSIC)
    assert np.all(status[live] == OK)
    assert np.max(np.abs(vol[live] - V[live])) <= 1e-12


def test_grid_accuracy_with_scipy_special_ufuncs(monkeypatch):
    # the same grid with scipy.special's compiled ndtr/erfcx/ndtri (used once a
    # process has imported scipy.special): vols exact to 1e-12 as well
    from optbench.pricing import special
    monkeypatch.setattr(special, "PREFER_COMPILED", True)
    import scipy.special  # noqa: F401  (the reference library, imported here)
    F, K, T, V = _grid()
    call = K >= F
    p = black_price(F, K, T, 0.97, V, call)
    vol, status = black_implied_vol_with_status(p, F, K, T, 0.97, call)
    live = p > 0
    assert np.all(status[live] == OK)
    assert np.max(np.abs(vol[live] - V[live])) <= 1e-12


def test_grid_accuracy_in_the_money_where_well_posed():
    # in the money the time value is price - intrinsic; it is well posed where the
    # rounding of the price (eps * price) moves the vol by less than 1e-13
    F, K, T, V = _grid()
    call = K < F
    p = black_price(F, K, T, 1.0, V, call)
    vega = F * np.exp(-0.5 * (np.log(F / K) / (V * np.sqrt(T)) + 0.5 * V * np.sqrt(T)) ** 2) \
        * np.sqrt(T) / np.sqrt(2 * np.pi)
    well = np.finfo(float).eps * p * 4 < 1e-13 * vega
    vol, status = black_implied_vol_with_status(p, F, K, T, 1.0, call)
    assert well.sum() > 500
    assert np.all(status[well] == OK)
    assert np.max(np.abs(vol[well] - V[well])) <= 1e-12


def test_deep_out_of_the_money_relative_accuracy_down_to_1e_300():
    # normalised prices from 1e-300 upwards: the vol is recovered to ~1e-14 relative
    x = -np.linspace(0.05, 60.0, 400)
    s = np.linspace(0.02, 4.0, 400)
    X, S = (a.ravel() for a in np.meshgrid(x, s))
    b = normalised_black_otm(X, S)
    keep = b >= 1e-300
    assert b[keep].min() < 1e-250
    s_hat, conv = normalised_implied_vol_otm(b[keep], X[keep])
    assert conv.all()
    assert np.max(np.abs(s_hat / S[keep] - 1)) <= 5e-14


def test_normalised_black_matches_reference_implementation():
    # vollib's lets_be_rational (Jäckel's reference code) normalised_black_call
    from lets_be_rational import normalised_black_call as ref

    rng = np.random.default_rng(3)
    x = rng.uniform(-40, 5, 3000)
    s = rng.uniform(0.01, 4, 3000)
    mine = normalised_black_call(x, s)
    expect = np.array([ref(a, b) for a, b in zip(x, s)])
    ok = expect > 1e-300
    np.testing.assert_allclose(mine[ok], expect[ok], rtol=1e-13)


def test_agrees_with_vollib_implied_volatility():
    # vollib.black_scholes_merton.implied_volatility, option by option
    from vollib.black_scholes_merton.implied_volatility import implied_volatility as ref

    rng = np.random.default_rng(11)
    n = 300
    S = 100.0
    K = S * np.exp(rng.uniform(np.log(0.5), np.log(2.0), n))
    t = rng.uniform(1 / 365, 3, n)
    r = rng.uniform(0.0, 0.08, n)
    q = rng.uniform(0.0, 0.04, n)
    v = rng.uniform(0.05, 1.5, n)
    c = rng.random(n) < 0.5
    p = bsm_price(S, K, t, r, q, v, c)
    mine = implied_vol(p, S, K, t, r, q, c)
    for i in range(n):
        try:
            expect = ref(float(p[i]), S, K[i], t[i], r[i], q[i], "c" if c[i] else "p")
        except Exception:
            continue  # vollib raises where the price carries no vol (checked below)
        assert mine[i] == pytest.approx(expect, abs=1e-11)


def test_hull_example_round_trip_and_scalar_out():
    # Hull, Example 15.6: c = 4.7594 at sigma = 20%
    p = float(bsm_price(42, 40, 0.5, 0.10, 0.0, 0.20, True))
    v = implied_vol(p, 42, 40, 0.5, 0.10, 0.0, True)
    assert isinstance(v, float)
    assert v == pytest.approx(0.20, abs=1e-13)
    v2, code = implied_vol_with_status(p, 42, 40, 0.5, 0.10, 0.0, True)
    assert (v2, code) == (v, OK)


def test_reason_codes():
    S, K, t, r, q = 100.0, 100.0, 0.5, 0.05, 0.0
    F = S * np.exp(r * t)
    D = np.exp(-r * t)
    prices = np.array([
        0.5 * D * (F - 90.0),     # call K=90 below its intrinsic value
        S * 1.01,                 # call above the spot (its maximum)
        np.nan,                   # non-finite price
        5.0,                      # expired
        5.0,                      # negative spot
        -1.0,                     # negative price
        6.0,                      # fine
    ])
    strikes = np.array([90.0, 100.0, 100.0, 100.0, 100.0, 100.0, 100.0])
    times = np.array([t, t, t, 0.0, t, t, t])
    spots = np.array([S, S, S, S, -S, S, S])
    vol, status = implied_vol_with_status(prices, spots, strikes, times, r, q, True)
    assert list(status) == [BELOW_INTRINSIC, ABOVE_MAX, BAD_INPUT, EXPIRED, BAD_INPUT,
                            BAD_INPUT, OK]
    assert np.all(np.isnan(vol[:6])) and np.isfinite(vol[6])
    assert list(status_name(status)[:2]) == ["below_intrinsic", "above_max"]
    assert status_name(np.int8(EXPIRED)) == "expired"
    assert set(STATUS_NAMES.values()) >= {"ok", "below_intrinsic", "above_max", "bad_input",
                                          "expired", "fallback", "not_converged"}


def test_put_above_strike_is_above_max():
    # a European put is worth at most K e^{-rT} (Hull ch. 11)
    v, code = implied_vol_with_status(100.0, 100.0, 100.0, 1.0, 0.05, 0.0, False)
    assert np.isnan(v) and code == ABOVE_MAX


def test_bad_shapes_types_and_empty_input():
    with pytest.raises(ValueError, match="broadcast"):
        implied_vol(np.ones(3), 100.0, np.ones(4) * 100, 1.0, 0.0, 0.0, True)
    with pytest.raises(TypeError):
        implied_vol("5.0", 100.0, 100.0, 1.0, 0.0, 0.0, True)
    with pytest.raises(TypeError):
        implied_vol(5.0, 100.0, 100.0, 1.0, 0.0, 0.0, "call")
    with pytest.raises(ValueError):
        implied_vol(5.0, 100.0, 100.0, 1.0, 0.0, 0.0, True, style="bermudan")
    out = implied_vol(np.array([]), 100.0, np.array([]), 1.0, 0.0, 0.0, True)
    assert out.shape == (0,)


def test_unconverged_elements_fall_back_to_the_reference(monkeypatch):
    # force the vectorised solver to flag everything: vollib's scalar solver takes over
    real = iv_mod.normalised_implied_vol_otm

    def flag_all(beta, x):
        s, _ = real(beta, x)
        return s, np.zeros(s.shape, dtype=bool)

    monkeypatch.setattr(iv_mod, "normalised_implied_vol_otm", flag_all)
    K = np.array([80.0, 100.0, 130.0])
    p = bsm_price(100.0, K, 0.7, 0.02, 0.01, 0.33, True)
    vol, status = implied_vol_with_status(p, 100.0, K, 0.7, 0.02, 0.01, True)
    assert np.all(status == FALLBACK)
    np.testing.assert_allclose(vol, 0.33, atol=1e-12)


def test_large_input_in_chunks_shape_preserved():
    rng = np.random.default_rng(5)
    K = rng.uniform(60, 160, (300, 250))
    v = rng.uniform(0.1, 0.9, K.shape)
    p = bsm_price(100.0, K, 0.4, 0.03, 0.0, v, K > 100)
    out = implied_vol(p, 100.0, K, 0.4, 0.03, 0.0, K > 100)
    assert out.shape == K.shape
    assert np.nanmax(np.abs(out - v)) <= 1e-12


@settings(max_examples=300, deadline=None)
@given(k=st.floats(0.5, 2.0), t=st.floats(1 / 365, 3.0), v=st.floats(0.05, 1.5),
       r=st.floats(-0.01, 0.1), q=st.floats(0.0, 0.06))
def test_round_trip_property(k, t, v, r, q):
    # implied_vol(bsm_price(sigma)) == sigma on out-of-the-money options (issue 3 domain)
    S = 100.0
    F = S * np.exp((r - q) * t)
    K = F * k
    call = K >= F
    p = float(bsm_price(S, K, t, r, q, v, call))
    if p <= 0:  # underflow: no information left in the price
        return
    vol, code = implied_vol_with_status(p, S, K, t, r, q, call)
    if p / np.exp(-r * t) / np.sqrt(F * K) < np.finfo(float).tiny:
        # a subnormal normalised price (below 2.2e-308, outside the 1e-300 domain of
        # issue 3) carries no usable digits: documented as a time value of zero
        assert code == BELOW_INTRINSIC and np.isnan(vol)
        return
    assert code == OK
    assert abs(vol - v) <= 1e-12


def test_extreme_inputs_finish_with_a_status_and_never_a_silent_nan():
    # far outside the stated domain: log-moneyness to ±30, s = sigma sqrt(t) to ~300;
    # every element gets a status, 'ok' elements are finite, and where the price still
    # determines the vol (s < 5) the normalised prices invert to ~1e-13
    rng = np.random.default_rng(9)
    n = 50_000
    F = np.exp(rng.uniform(-5, 10, n))
    K = F * np.exp(rng.uniform(-30, 30, n))
    t = 10 ** rng.uniform(-6, 1.5, n)
    v = 10 ** rng.uniform(-3, 1, n)
    s = v * np.sqrt(t)
    x = -np.abs(np.log(F / K))
    call = np.log(F / K) < 0
    p = np.sqrt(F * K) * normalised_black_otm(x, s)
    vol, status = black_implied_vol_with_status(p, F, K, t, 1.0, call)
    assert set(np.unique(status)) <= set(STATUS_NAMES)
    solved = (status == OK) | (status == FALLBACK)
    assert np.all(np.isfinite(vol[solved])) and np.all(np.isnan(vol[~solved]))
    well = solved & (s < 5)
    assert well.sum() > 5_000
    assert np.max(np.abs(vol[well] / v[well] - 1)) <= 1e-13


def test_every_segment_of_the_initial_guess_agrees_with_the_reference():
    # vollib's lets_be_rational (Jäckel's reference code): normalised_black prices the
    # out-of-the-money calls (q = +1) and
    # normalised_implied_volatility_from_a_transformed_rational_guess inverts them.
    # s from 0.05 s_c to 6 s_c, s_c = sqrt(2|x|), spans the lowest segment, both middle
    # segments and the highest one (Jäckel 2015, section 3)
    from lets_be_rational import normalised_black as ref_black
    from lets_be_rational import (
        normalised_implied_volatility_from_a_transformed_rational_guess as ref_iv)

    from optbench.pricing.lets_be_rational import _initial_guess

    X, M = (a.ravel() for a in np.meshgrid(-np.geomspace(1e-3, 30.0, 30),
                                           np.geomspace(0.05, 6.0, 30)))
    S = M * np.sqrt(2 * np.abs(X))
    beta = np.array([ref_black(x, s, 1.0) for x, s in zip(X, S)])
    keep = (beta > 1e-300) & (S < 5)
    X, S, beta = X[keep], S[keep], beta[keep]
    # each segment and each objective is represented
    b_c = np.array([ref_black(x, np.sqrt(2 * abs(x)), 1.0) for x in X])
    with np.errstate(all="ignore"):
        _, i_low, i_up = _initial_guess(beta, X, np.exp(0.5 * X))
    assert i_low.size > 20 and i_up.size > 20
    assert (beta < b_c).sum() - i_low.size > 20 and (beta > b_c).sum() > i_up.size + 20
    s_hat, conv = normalised_implied_vol_otm(beta, X)
    assert conv.all()
    expect = np.array([ref_iv(b, x, 1.0) for b, x in zip(beta, X)])
    np.testing.assert_allclose(s_hat, expect, rtol=1e-13)
    assert np.max(np.abs(s_hat / S - 1)) <= 1e-13


def test_chunk_boundaries_keep_codes_vols_and_fallbacks_on_their_options(monkeypatch):
    # chunks of 4 options: reason codes, solved vols and the indices handed to the
    # fallback must land on the right options across chunk boundaries; reference:
    # vollib.black_scholes_merton.implied_volatility, option by option
    from vollib.black_scholes_merton.implied_volatility import implied_volatility as ref

    S, r, q = 100.0, 0.03, 0.01
    K = np.linspace(70.0, 140.0, 23)
    t = np.full(K.shape, 0.6)
    call = K >= 100.0
    v = np.linspace(0.12, 0.8, K.size)
    p = bsm_price(S, K, t, r, q, v, call)
    p[5], p[10], t[13] = np.nan, -1.0, 0.0
    whole, whole_status = implied_vol_with_status(p, S, K, t, r, q, call)

    real = iv_mod.normalised_implied_vol_otm

    def flag_every_third(beta, x):
        s, conv = real(beta, x)
        conv = conv.copy()
        conv[::3] = False
        return s, conv

    monkeypatch.setattr(iv_mod, "CHUNK", 4)
    monkeypatch.setattr(iv_mod, "normalised_implied_vol_otm", flag_every_third)
    vol, status = implied_vol_with_status(p, S, K, t, r, q, call)
    assert status[5] == BAD_INPUT and status[10] == BAD_INPUT and status[13] == EXPIRED
    solved = (status == OK) | (status == FALLBACK)
    assert solved.sum() == K.size - 3
    assert (status == FALLBACK).sum() >= 5 and (status == OK).sum() >= 5
    np.testing.assert_array_equal(solved, whole_status == OK)
    np.testing.assert_allclose(vol[solved], whole[solved], rtol=1e-13)
    for i in np.flatnonzero(solved):
        expect = ref(float(p[i]), S, K[i], t[i], r, q, "c" if call[i] else "p")
        assert vol[i] == pytest.approx(expect, abs=1e-11)
        assert vol[i] == pytest.approx(v[i], abs=1e-12)
