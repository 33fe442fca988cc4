"""Realized-vol estimators: direct formula evaluation on hand-made OHLC data,
pandas' rolling standard deviation, and the true sigma of simulated Brownian OHLC."""
from __future__ import annotations

import functools
import math
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from optbench.errors import InputError
from optbench.volatility import realized as rv

# hand-made OHLC for 7 days (invented numbers)
O = np.array([100.0, 101.2, 100.4, 102.0, 101.1, 103.0, 102.2])
H = np.array([101.5, 102.0, 102.3, 102.9, 103.4, 103.8, 103.0])
L = np.array([99.2, 100.1, 99.8, 100.6, 100.7, 101.9, 101.0])
C = np.array([101.0, 100.5, 101.9, 101.2, 102.8, 102.4, 101.5])
W = 5


def test_parkinson_constant():
    # Parkinson (1980): E[(ln H/L)^2] = 4 ln 2 sigma^2, so the scale is 1/(4 ln 2) = 0.3607
    assert rv.PARKINSON_CONSTANT == pytest.approx(1 / (4 * math.log(2)))
    assert rv.PARKINSON_CONSTANT == pytest.approx(0.360674, abs=1e-6)


def test_close_to_close_direct_formula_and_pandas():
    out = rv.close_to_close(C, W)
    assert np.isnan(out[:W]).all()
    r = [math.log(C[i] / C[i - 1]) for i in range(1, 7)]
    for end in (W, W + 1):  # windows of 5 returns ending on day 5 and 6
        win = r[end - W:end]
        m = sum(win) / W
        var = sum((x - m) ** 2 for x in win) / (W - 1)
        assert out[end] == pytest.approx(math.sqrt(252 * var), rel=1e-12)
    # pandas rolling sample standard deviation, annualised (reference library)
    ref = pd.Series(np.log(C)).diff().rolling(W).std().to_numpy() * math.sqrt(252)
    np.testing.assert_allclose(out, ref, rtol=1e-12, equal_nan=True)
    # zero-mean version: mean of squared returns
    z = rv.close_to_close(C, W, demean=False)
    assert z[-1] == pytest.approx(math.sqrt(252 * sum(x * x for x in r[-W:]) / W), rel=1e-12)


def test_parkinson_direct_formula():
    out = rv.parkinson(H, L, W)
    assert np.isnan(out[:W - 1]).all()
    for end in range(W - 1, 7):
        s = sum(math.log(H[i] / L[i]) ** 2 for i in range(end - W + 1, end + 1))
        assert out[end] == pytest.approx(math.sqrt(252 * s / (4 * W * math.log(2))), rel=1e-12)


def test_garman_klass_direct_formula():
    out = rv.garman_klass(O, H, L, C, W)
    for end in range(W - 1, 7):
        s = sum(0.5 * math.log(H[i] / L[i]) ** 2
                - (2 * math.log(2) - 1) * math.log(C[i] / O[i]) ** 2
                for i in range(end - W + 1, end + 1))
        assert out[end] == pytest.approx(math.sqrt(252 * s / W), rel=1e-12)


def test_rogers_satchell_direct_formula():
    out = rv.rogers_satchell(O, H, L, C, W)
    for end in range(W - 1, 7):
        s = sum(math.log(H[i] / C[i]) * math.log(H[i] / O[i])
                + math.log(L[i] / C[i]) * math.log(L[i] / O[i])
                for i in range(end - W + 1, end + 1))
        assert out[end] == pytest.approx(math.sqrt(252 * s / W), rel=1e-12)


def test_yang_zhang_direct_formula():
    out = rv.yang_zhang(O, H, L, C, W)
    assert np.isnan(out[:W]).all()
    for end in (W, W + 1):
        days = range(end - W + 1, end + 1)
        ov = [math.log(O[i] / C[i - 1]) for i in days]
        oc = [math.log(C[i] / O[i]) for i in days]
        rs = [math.log(H[i] / C[i]) * math.log(H[i] / O[i])
              + math.log(L[i] / C[i]) * math.log(L[i] / O[i]) for i in days]

        def svar(x):
            m = sum(x) / len(x)
            return sum((v - m) ** 2 for v in x) / (len(x) - 1)
        k = 0.34 / (1.34 + (W + 1) / (W - 1))  # Yang & Zhang (2000), eq. for k
        var = svar(ov) + k * svar(oc) + (1 - k) * sum(rs) / W
        assert out[end] == pytest.approx(math.sqrt(252 * var), rel=1e-12)


@functools.lru_cache(maxsize=4)
def _brownian_ohlc(n_days, sigma_annual, drift_annual=0.0, overnight_share=0.0,
                   steps=800, seed=0):
    """OHLC of a geometric Brownian motion sampled `steps` times a day; a share of
    each day's variance can fall overnight (a jump from the previous close)."""
    rng = np.random.default_rng(seed)
    s2 = sigma_annual ** 2 / 252
    dt_var = s2 * (1 - overnight_share) / steps
    mu = drift_annual / 252 / steps
    paths = np.cumsum(mu + math.sqrt(dt_var) * rng.standard_normal((n_days, steps)), axis=1)
    gaps = math.sqrt(s2 * overnight_share) * rng.standard_normal(n_days)
    log_close = np.cumsum(gaps + paths[:, -1])
    log_open = np.concatenate([[0.0], log_close[:-1]]) + gaps
    hi = log_open + np.maximum(paths.max(axis=1), 0.0)
    lo = log_open + np.minimum(paths.min(axis=1), 0.0)
    return tuple(100 * np.exp(x) for x in (log_open, hi, lo, log_close))


@pytest.mark.parametrize("estimator", ["close", "parkinson", "garman_klass",
                                       "rogers_satchell", "yang_zhang"])
def test_estimators_recover_true_sigma_of_simulated_gbm(estimator):
    # Brownian motion with sigma = 25% a year, no overnight gap: every estimator is
    # consistent for sigma (Parkinson 1980; Garman & Klass 1980; Rogers & Satchell
    # 1991; Yang & Zhang 2000). Discrete sampling biases the range estimators a
    # little low; the close-to-close standard error is 0.25/sqrt(2*1499) = 1.8%.
    o, h, l, c = _brownian_ohlc(1500, 0.25, steps=1500, seed=0)
    hist = SimpleNamespace(source="sim", open=o, high=h, low=l, close=c)
    est = rv.realized_vol(hist, 1499, estimator)[-1]
    assert est == pytest.approx(0.25, rel=0.05)


def test_drift_independent_estimators_with_strong_drift_and_overnight_gaps():
    # Rogers & Satchell (1991) and Yang & Zhang (2000) are drift-independent;
    # Yang-Zhang also counts the overnight variance, which range-only estimators miss.
    o, h, l, c = _brownian_ohlc(1500, 0.30, drift_annual=3.0, overnight_share=0.3, seed=2)
    hist = SimpleNamespace(source="sim", open=o, high=h, low=l, close=c)
    yz = rv.realized_vol(hist, 1499, "yang_zhang")[-1]
    rs = rv.realized_vol(hist, 1499, "rogers_satchell")[-1]
    assert yz == pytest.approx(0.30, rel=0.05)
    assert rs == pytest.approx(0.30 * math.sqrt(0.7), rel=0.05)  # intraday share only


def test_trailing_realized_vol_per_window():
    hist = SimpleNamespace(source="h", close=C, open=O, high=H, low=L)
    out = rv.trailing_realized_vol(hist, [3, 5, 5, 40], "close")
    assert out[1] == out[2] == pytest.approx(rv.close_to_close(C, 5)[-1])
    assert out[0] == pytest.approx(rv.close_to_close(C, 3)[-1])
    assert np.isnan(out[3])


def test_range_estimator_without_ohlc_is_an_input_error():
    hist = SimpleNamespace(source="history.csv", close=C, open=None, high=None, low=None)
    with pytest.raises(InputError, match="history.csv: .*needs columns open, high, low"):
        rv.realized_vol(hist, 5, "yang_zhang")
    with pytest.raises(InputError, match="unknown realized-vol estimator"):
        rv.realized_vol(hist, 5, "range")
    bad = SimpleNamespace(source="h.csv", close=np.array([1.0, -2.0, 3.0]))
    with pytest.raises(InputError, match="positive"):
        rv.realized_vol(bad, 2, "close")


def test_rolling_sums_stay_accurate_on_long_series():
    # 20,000 days with vol moving 5%..80% a year: the cumulative-sum windows agree
    # with a direct per-window numpy variance (numpy reference) to 1e-8 (round-off
    # of the cumulative sums grows with the length of the series)
    from numpy.lib.stride_tricks import sliding_window_view
    rng = np.random.default_rng(9)
    vol = 0.05 + 0.75 * (0.5 + 0.5 * np.sin(np.arange(20_000) / 700.0))
    r = rng.normal(0.0004, vol / math.sqrt(252))
    close = 50 * np.exp(np.cumsum(np.concatenate([[0.0], r])))
    for w in (5, 63):
        ours = rv.close_to_close(close, w)[w:]
        ref = np.sqrt(252 * sliding_window_view(r, w).var(axis=1, ddof=1))
        np.testing.assert_allclose(ours, ref, rtol=1e-8)


def test_missing_bar_spoils_only_the_windows_that_hold_it():
    # a NaN high/low (the loader's mark for an inconsistent row) must not leak into
    # windows that do not contain it; direct per-window evaluation as reference
    h, l = H.copy(), L.copy()
    h[2] = np.nan
    out = rv.parkinson(h, l, 2)
    for end in range(1, 7):
        if end in (2, 3):
            assert np.isnan(out[end])
        else:
            s = sum(math.log(h[i] / l[i]) ** 2 for i in (end - 1, end))
            assert out[end] == pytest.approx(math.sqrt(252 * s / (8 * math.log(2))), rel=1e-12)
    c = C.copy()
    c[1] = np.nan   # returns 1 and 2 are missing
    cc = rv.close_to_close(c, 2)
    assert np.isnan(cc[:4]).all() and np.isfinite(cc[4:]).all()
