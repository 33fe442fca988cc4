"""Out-of-sample statistics against published tables, worked numbers and scipy."""
from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.stats as st
from hypothesis import given, settings
from hypothesis import strategies as hs

from optbench.volatility import evaluation as ev

CHI2_1_95 = st.chi2.ppf(0.95, 1)  # scipy.stats: 3.841...


# ------------------------------------------------------------- Kupiec
@pytest.mark.parametrize("x,n,p", [(8, 250, 0.01), (0, 250, 0.01), (2, 500, 0.025),
                                   (30, 1000, 0.025), (250, 250, 0.01)])
def test_kupiec_matches_direct_likelihood_ratio_and_scipy_chi2(x, n, p):
    # Kupiec (1995) LR_pof written out with math.log; p-value from scipy.stats.chi2
    def ll(q):
        a = (n - x) * math.log(1 - q) if n - x else 0.0
        b = x * math.log(q) if x else 0.0
        return a + b
    lr = -2 * (ll(p) - (ll(x / n) if 0 < x < n else 0.0))
    res = ev.kupiec_pof(x, n, p)
    assert res.statistic == pytest.approx(lr, rel=1e-12, abs=1e-12)
    assert res.p_value == pytest.approx(st.chi2.sf(lr, 1), rel=1e-10, abs=1e-14)
    assert res.df == 1


def test_kupiec_worked_number_8_in_250():
    # worked by hand: -2 ln(0.99^242 0.01^8) + 2 ln(0.968^242 0.032^8) = 10.6207...
    # (exact arithmetic; p-value checked with scipy.stats.chi2 in the test above)
    assert ev.kupiec_pof(8, 250, 0.01).statistic == pytest.approx(
        -2 * (242 * math.log(0.99) + 8 * math.log(0.01))
        + 2 * (242 * math.log(0.968) + 8 * math.log(0.032)), rel=1e-12)
    assert ev.kupiec_pof(8, 250, 0.01).p_value < 0.01


# Kupiec (1995) non-rejection regions at 95% confidence, as tabulated in Jorion,
# *Value at Risk* (3rd ed., table "Model backtesting, 95% nonrejection test
# confidence regions") — from memory: (p, T, lowest accepted, highest accepted).
# For p = 1% and T = 255 the table prints "N < 7" without a lower bound.
KUPIEC_REGIONS = [
    (0.01, 255, None, 6), (0.01, 510, 2, 10), (0.01, 1000, 5, 16),
    (0.025, 255, 3, 11), (0.025, 510, 7, 20), (0.025, 1000, 16, 35),
    (0.05, 255, 7, 20), (0.05, 510, 17, 35), (0.05, 1000, 38, 64),
]


@pytest.mark.parametrize("p,T,lo,hi", KUPIEC_REGIONS)
def test_kupiec_non_rejection_regions(p, T, lo, hi):
    accepted = [x for x in range(T // 4) if ev.kupiec_pof(x, T, p).statistic < CHI2_1_95]
    assert max(accepted) == hi
    if lo is not None:
        assert min(accepted) == lo
    # the accepted counts form one interval
    assert accepted == list(range(min(accepted), max(accepted) + 1))


def test_kupiec_rejects_bad_input():
    with pytest.raises(ValueError):
        ev.kupiec_pof(5, 3, 0.01)
    with pytest.raises(ValueError):
        ev.kupiec_pof(1, 10, 0.0)


# ------------------------------------------------------------- Christoffersen
HITS = np.array([0, 0, 0, 1, 1, 1, 0, 0, 0, 0, 0, 1, 1, 0, 0, 0, 0, 0, 0, 0])


def test_transition_counts_hand_counted():
    # 19 transitions counted by hand: 0->0 twelve, 0->1 two, 1->0 two, 1->1 three
    assert ev.transition_counts(HITS) == (12, 2, 2, 3)


def test_christoffersen_independence_hand_worked():
    # Christoffersen (1998) LR_ind by hand from (n00, n01, n10, n11) = (12, 2, 2, 3):
    # pi01 = 2/14, pi11 = 3/5, pi = 5/19
    pi01, pi11, pi = 2 / 14, 3 / 5, 5 / 19
    l_unres = 12 * math.log(1 - pi01) + 2 * math.log(pi01) + 2 * math.log(1 - pi11) \
        + 3 * math.log(pi11)
    l_res = 14 * math.log(1 - pi) + 5 * math.log(pi)
    lr = -2 * (l_res - l_unres)
    res = ev.christoffersen_independence(HITS)
    assert res.statistic == pytest.approx(lr, rel=1e-12)
    # by hand: 2 * (10.95033 - 9.10668) = 3.6873
    assert res.statistic == pytest.approx(3.6873, abs=1e-4)
    assert res.p_value == pytest.approx(st.chi2.sf(lr, 1), rel=1e-10)


def test_christoffersen_independent_when_transition_rates_equal():
    # (n00, n01, n10, n11) = (4, 2, 2, 1): pi01 = pi11 = pi = 1/3, so LR_ind = 0
    res = ev.christoffersen_independence([0, 0, 1, 1, 0, 0, 0, 1, 0, 0])
    assert res.statistic == pytest.approx(0.0, abs=1e-12)
    assert res.p_value == pytest.approx(1.0)


def test_christoffersen_conditional_coverage_is_pof_plus_ind_chi2_2():
    p = 0.05
    cc = ev.christoffersen_conditional_coverage(HITS, p)
    pof = ev.kupiec_pof(int(HITS.sum()), HITS.size, p)
    ind = ev.christoffersen_independence(HITS)
    assert cc.statistic == pytest.approx(pof.statistic + ind.statistic)
    assert cc.df == 2
    assert cc.p_value == pytest.approx(st.chi2.sf(cc.statistic, 2), rel=1e-10)


def test_christoffersen_no_hits_and_isolated_hits():
    assert ev.christoffersen_independence(np.zeros(100)).statistic == pytest.approx(0.0)
    # hits never follow hits: pi11 = 0 is allowed (0 log 0 = 0)
    h = np.zeros(200)
    h[::20] = 1
    assert np.isfinite(ev.christoffersen_independence(h).statistic)


# ------------------------------------------------------------- Basel zones
# Basel Committee (1996), backtesting framework, Table 2 (99% VaR, 250 days):
# cumulative probability of that many or fewer exceptions — from memory.
BASEL_TABLE = {0: 0.0811, 1: 0.2858, 2: 0.5432, 3: 0.7581, 4: 0.8922, 5: 0.9588,
               6: 0.9863, 7: 0.9960, 8: 0.9989, 9: 0.9997, 10: 0.9999}


def test_basel_table_cumulative_probabilities():
    from scipy import special
    for x, cum in BASEL_TABLE.items():
        assert special.bdtr(x, 250, 0.01) == pytest.approx(cum, abs=6e-5)


def test_basel_99_250_zones():
    # Basel Committee (1996): green 0-4, yellow 5-9, red 10 or more
    assert ev.basel_zone_thresholds(250, 0.99) == (5, 10)
    zones = [ev.basel_zone(x, 250, 0.99) for x in range(15)]
    assert zones == ["green"] * 5 + ["yellow"] * 5 + ["red"] * 5


def test_basel_zones_other_levels_follow_binomial_rule():
    # same cumulative-probability rule (95% / 99.99%) checked with scipy.stats.binom
    for n, level in [(250, 0.975), (500, 0.99), (750, 0.99), (100, 0.95)]:
        yellow, red = ev.basel_zone_thresholds(n, level)
        b = st.binom(n, 1 - level)
        assert b.cdf(yellow - 1) < 0.95 <= b.cdf(yellow)
        assert b.cdf(red - 1) < 0.9999 <= b.cdf(red)


# ------------------------------------------------------------- losses and MZ
def test_qlike_and_mse_zero_at_perfect_forecast():
    rv = np.array([1e-4, 2e-4, 4e-4])
    assert ev.qlike_loss(rv, rv) == pytest.approx(0.0, abs=1e-15)
    assert ev.mse_loss(rv, rv) == 0.0
    assert ev.mse_loss(rv, 2 * rv) == pytest.approx(np.mean(rv ** 2))


def test_qlike_robust_to_noisy_proxy():
    # Patton (2011): with an unbiased noisy proxy (r^2 = sigma^2 * chi2(1)) the
    # expected QLIKE loss is minimised by the true variance
    rng = np.random.default_rng(7)
    sigma2 = 1e-4 * np.exp(rng.normal(0, 0.5, 200_000))
    rv = sigma2 * rng.chisquare(1, sigma2.size)
    scales = np.linspace(0.7, 1.3, 13)
    losses = [ev.qlike_loss(rv, s * sigma2) for s in scales]
    assert scales[int(np.argmin(losses))] == pytest.approx(1.0, abs=0.051)


def test_mincer_zarnowitz_matches_numpy_lstsq():
    rng = np.random.default_rng(3)
    h = rng.uniform(1e-4, 5e-4, 300)
    rv = 2e-5 + 0.9 * h + rng.normal(0, 5e-5, 300)
    res = ev.mincer_zarnowitz(rv, h)
    X = np.column_stack([np.ones_like(h), h])
    coef, ssr, *_ = np.linalg.lstsq(X, rv, rcond=None)  # numpy.linalg.lstsq reference
    assert res.alpha == pytest.approx(coef[0], rel=1e-9)
    assert res.beta == pytest.approx(coef[1], rel=1e-9)
    assert res.r2 == pytest.approx(1 - ssr[0] / np.sum((rv - rv.mean()) ** 2), rel=1e-9)
    assert res.n == 300


# ------------------------------------------------------------- residuals
def test_residual_stats_match_scipy_stats():
    z = np.random.default_rng(11).standard_t(5, 2000)
    res = ev.residual_stats(z)
    assert res.skew == pytest.approx(st.skew(z), rel=1e-10)
    assert res.excess_kurtosis == pytest.approx(st.kurtosis(z), rel=1e-10)
    jb = st.jarque_bera(z)
    assert res.jarque_bera == pytest.approx(jb.statistic, rel=1e-10)
    assert res.jarque_bera_p == pytest.approx(jb.pvalue, rel=1e-8, abs=1e-300)
    assert res.min == z.min() and res.max == z.max() and res.n == 2000


def test_histogram_counts_and_expected_counts():
    z = np.random.default_rng(5).normal(size=5000)
    h = ev.residual_histogram(z, "normal", bins=20, limit=4.0)
    assert h.counts.sum() + h.below + h.above == 5000
    assert h.expected_counts.sum() == pytest.approx(5000 * (st.norm.cdf(4) - st.norm.cdf(-4)))
    centres = 0.5 * (h.edges[1:] + h.edges[:-1])
    np.testing.assert_allclose(h.density, st.norm.pdf(centres), rtol=1e-12)


# ------------------------------------------------------------- innovations
@pytest.mark.parametrize("nu", [2.5, 4.0, 8.0, 30.0])
def test_standardised_t_against_scipy_stats_t(nu):
    # scipy.stats.t with scale sqrt((nu-2)/nu) has unit variance (Bollerslev 1987)
    scale = math.sqrt((nu - 2) / nu)
    ref = st.t(nu, scale=scale)
    z = np.linspace(-6, 6, 49)
    np.testing.assert_allclose(ev.innovation_cdf(z, "t", nu), ref.cdf(z), rtol=1e-10)
    np.testing.assert_allclose(ev.innovation_pdf(z, "t", nu), ref.pdf(z), rtol=1e-10)
    p = np.array([0.001, 0.01, 0.025, 0.5, 0.975])
    np.testing.assert_allclose(ev.innovation_ppf(p, "t", nu), ref.ppf(p), rtol=1e-8)
    assert ref.var() == pytest.approx(1.0)


def test_expected_outside_band_normal_3_sigma():
    # 2 * (1 - Phi(3)) = 0.0026998 (scipy.stats.norm)
    assert ev.expected_outside_band(1000, 3.0) == pytest.approx(2000 * st.norm.sf(3.0))
    assert ev.expected_outside_band(1000, 3.0) == pytest.approx(2.6998, abs=1e-4)
    # fatter tails put more days outside +-3 sigma
    assert ev.expected_outside_band(1000, 3.0, "t", 5.0) > ev.expected_outside_band(1000, 3.0)


def test_bad_distribution_arguments():
    with pytest.raises(ValueError):
        ev.innovation_cdf(0.0, "t", 2.0)
    with pytest.raises(ValueError):
        ev.innovation_cdf(0.0, "skewt", 5.0)


def test_out_of_sample_modules_stay_off_slow_imports():
    # start-up budget (DEVELOPERS.md): scipy.stats and scipy.signal are slow to import
    import subprocess
    import sys
    code = ("import sys\n"
            "import optbench.volatility.evaluation, optbench.volatility.realized\n"
            "import optbench.volatility.cone, optbench.volatility.backtest\n"
            "bad = [m for m in sys.modules if m.startswith(('scipy.stats', 'scipy.signal',"
            " 'rich', 'textual'))]\n"
            "print(','.join(bad))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == ""


# ------------------------------------------------------------- properties
@settings(max_examples=60, deadline=None)
@given(n=hs.integers(20, 2000), p=hs.floats(0.002, 0.2))
def test_kupiec_smallest_at_the_expected_count(n, p):
    # LR_pof is zero when x/n = p and grows either side (Kupiec 1995)
    xs = np.arange(n + 1)
    lr = np.array([ev.kupiec_pof(int(x), n, p).statistic for x in xs])
    assert np.all(lr >= 0)
    best = int(np.argmin(lr))
    assert best in (math.floor(n * p), math.ceil(n * p))
    assert np.all(np.diff(lr[best:]) > 0) and np.all(np.diff(lr[:best + 1]) < 0)


@settings(max_examples=60, deadline=None)
@given(hits=hs.lists(hs.booleans(), min_size=2, max_size=300))
def test_transition_counts_add_up(hits):
    n00, n01, n10, n11 = ev.transition_counts(hits)
    h = np.asarray(hits)
    assert n00 + n01 + n10 + n11 == h.size - 1
    assert n01 + n11 == int(h[1:].sum()) and n10 + n11 == int(h[:-1].sum())
    res = ev.christoffersen_independence(hits)
    assert res.statistic >= 0 and 0 <= res.p_value <= 1


@settings(max_examples=40, deadline=None)
@given(n=hs.integers(50, 1500), level=hs.sampled_from([0.95, 0.975, 0.99]))
def test_basel_zones_never_step_back(n, level):
    order = {"green": 0, "yellow": 1, "red": 2}
    zones = [order[ev.basel_zone(x, n, level)] for x in range(0, n // 5)]
    assert zones[0] == 0 and np.all(np.diff(zones) >= 0)
