"""Joint simulation, the loss distribution and the protection menu."""
from __future__ import annotations

import math

import numpy as np
import pytest

from optbench.analysis.hedge import hedge_from_comparison, leg_payoff
from optbench.analysis.portfolio import portfolio_hedge, simulate_joint
from optbench.analysis.portfolio.joint import ewma_standardise
from optbench.analysis.portfolio.menu import FLOORS, efficient_mask
from optbench.analysis.results import CAUTION, HedgeRequest


def test_ewma_matches_the_riskmetrics_recursion():
    # reference: RiskMetrics Technical Document (1996), eq. 5.3, run as a plain loop
    e = np.random.default_rng(2).standard_normal(300) * 0.01
    lam = 0.94
    s2 = [float(e @ e) / e.size]
    for x in e:
        s2.append(lam * s2[-1] + (1 - lam) * x * x)
    s2 = np.array(s2)
    z, today = ewma_standardise(e, lam)
    ref = e / np.sqrt(s2[:-1])
    np.testing.assert_allclose(z, ref / np.sqrt(np.mean(ref ** 2)), rtol=1e-9)
    assert today == pytest.approx(math.sqrt(s2[-1]), rel=1e-9)


def test_drift_and_residual_variance(comparison, demo_fit):
    td, t = np.array([21, 63]), np.array([30 / 365, 91 / 365])
    r, q = np.array([0.04, 0.041]), np.array([0.015, 0.014])
    j = simulate_joint(comparison.fit, demo_fit.beta.residuals, demo_fit.beta.beta, td, t,
                       rates=r, carries=q, n_paths=20000, seed=5)
    # by hand from the same simulated days: X = (r - q) tau + sum(sigma z) - sum(sigma^2)/2
    # (Glasserman, Monte Carlo Methods in Financial Engineering, 2003, §3.2)
    sim = comparison.fit.simulate(63, n_paths=20000, seed=5)
    mu = comparison.fit.params.get("mu", 0.0)
    shock = np.cumsum(sim.returns - mu, axis=1)[:, td - 1]
    var = np.cumsum(sim.variances, axis=1)[:, td - 1]
    np.testing.assert_allclose(j.index, (r - q) * t + shock - 0.5 * var, atol=1e-12)
    # E[S_T/S] = exp((r - q) tau) up to Monte Carlo error (t shocks: approximately)
    np.testing.assert_allclose(np.exp(j.index).mean(axis=0), np.exp((r - q) * t), rtol=5e-3)
    # the fitted-mean rule: sum of the simulated returns less the carry
    jf = simulate_joint(comparison.fit, None, 1.0, td, t, rates=r, carries=q, drift=None,
                        n_paths=20000, seed=5)
    np.testing.assert_allclose(jf.index, np.cumsum(sim.returns, axis=1)[:, td - 1] - q * t,
                               atol=1e-12)
    # i.i.d. bootstrap of unit-variance draws: Var(sum of h) = h s_today^2
    s_day = j.residual_vol_today / math.sqrt(252)
    np.testing.assert_allclose(j.residual.var(axis=0), td * s_day ** 2, rtol=0.05)
    # independent of the underlying's shocks
    assert abs(np.corrcoef(j.index[:, 1], j.residual[:, 1])[0, 1]) < 0.03


def test_loss_distribution_definitions(comparison, demo_fit):
    ph = portfolio_hedge(comparison, HedgeRequest(1.0, floor=0.9, days=90),
                         portfolio=demo_fit, n_paths=5000, seed=9, loss_level=1e6)
    L = ph.loss
    assert L.caution == CAUTION and ph.caution == CAUTION
    assert sum(L.histogram["unhedged"]) == sum(L.histogram["hedged"]) == 5000
    for side in (L.unhedged, L.hedged):
        assert side["es_99"] >= side["var_99"] >= side["var_95"]
        assert side["es_95"] >= side["var_95"]
    # the put caps the loss: hedged ES below unhedged ES
    assert L.hedged["es_99"] < L.unhedged["es_99"]
    assert 0 < L.unhedged["prob_loss_over"] < 1
    assert any("12.5% of the value" in w for w in ph.warnings)


def test_efficient_mask_against_brute_force():
    rng = np.random.default_rng(0)
    cost, prot = rng.normal(size=60), rng.normal(size=60)
    cost[5], prot[5] = cost[6], prot[6]            # a tie: neither beats the other
    got = efficient_mask(cost, prot)
    for i in range(60):
        beaten = any(cost[j] <= cost[i] and prot[j] >= prot[i]
                     and (cost[j] < cost[i] or prot[j] > prot[i]) for j in range(60))
        assert got[i] == (not beaten)


@pytest.fixture(scope="module")
def menu_result(comparison, demo_fit):
    return portfolio_hedge(comparison, HedgeRequest(1.0, floor=0.9, days=90),
                           portfolio=demo_fit, menu=True, n_paths=6000, seed=4)


def test_menu_covers_expiries_floors_structures(comparison, menu_result):
    m = menu_result.menu
    exp = [r.expiry for r in comparison.expiries if 30 <= r.calendar_days <= 366]
    assert sorted(set(m.frame["expiry"])) == exp
    assert len(m.frame) + len(m.unavailable) == len(exp) * len(FLOORS) * 3
    assert m.frame["efficient"].any()
    assert (m.frame["efficient"] <= m.frame["efficient_in_expiry"]).all()
    assert m.caution == CAUTION


def test_menu_rows_are_the_single_hedges(comparison, demo_fit, menu_result):
    m = menu_result.menu.frame
    for structure, floor, i in (("put", 0.85, 1), ("put_spread", 0.95, 2), ("collar", 0.9, 0)):
        row = m[(m["structure"] == structure) & (m["floor"] == floor)].iloc[i]
        one = hedge_from_comparison(comparison, HedgeRequest(
            demo_fit.value, beta=demo_fit.beta.beta, floor=floor, expiry=row["expiry"],
            structure=structure), n_paths=500)
        assert row["premium_paid"] == pytest.approx(one.premium_paid, abs=1e-6)
        assert row["put_strike"] == one.strike
        assert row["contracts"] == one.contracts


def test_menu_payoff_agrees_with_leg_payoff(comparison, demo_fit):
    # the menu's vectorised payoff against hedge.leg_payoff on the same paths
    ph = portfolio_hedge(comparison, HedgeRequest(1.0, floor=0.9, days=90,
                                                  structure="collar"),
                         portfolio=demo_fit, menu=True, n_paths=3000, seed=4,
                         menu_days=(80, 90))
    e = ph.estimate
    menu_row = ph.menu.frame[(ph.menu.frame["structure"] == "collar")
                             & (ph.menu.frame["floor"] == 0.9)].iloc[0]
    td = np.array([e.trading_days])
    row = comparison.expiry_row(e.expiry)
    j = simulate_joint(comparison.fit, demo_fit.beta.residuals, demo_fit.beta.beta, td,
                       [row.t], rates=[row.rate], carries=[row.carry], n_paths=3000, seed=4)
    s_t = e.spot * np.exp(j.index[:, 0])
    k = np.array([leg.strike for leg in e.legs])
    c = np.array([leg.type == "C" for leg in e.legs])
    s = np.array([1.0 if leg.side == "buy" else -1.0 for leg in e.legs])
    pay = leg_payoff(s_t, k, c, s) * e.contracts * e.multiplier
    assert menu_row["expected_payoff"] == pytest.approx(
        math.exp(-row.rate * row.t) * pay.mean(), rel=1e-9)
