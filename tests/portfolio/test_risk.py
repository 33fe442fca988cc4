"""VaR and expected shortfall of simulated P&L against their definitions and, for
normal P&L, the closed forms of Hull, *Risk Management and Financial Institutions*
(chapter "Value at Risk and Expected Shortfall": VaR = -mu + sigma z,
ES = -mu + sigma phi(z) / (1 - X); the formulas as remembered, not copied from a page)."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import norm

from optbench.analysis.portfolio.risk import var_es


@pytest.mark.parametrize("level", [0.95, 0.99])
def test_normal_pnl_matches_hulls_closed_form(level):
    mu, sigma = 2.0e5, 3.0e6
    pnl = np.random.default_rng(11).normal(mu, sigma, 400_000)
    var, es = var_es(pnl, level)
    z = norm.ppf(level)
    assert float(var) == pytest.approx(-mu + sigma * z, rel=0.01), "Hull RMFI, normal VaR"
    assert float(es) == pytest.approx(-mu + sigma * norm.pdf(z) / (1 - level), rel=0.01), \
        "Hull RMFI, ES of a normal distribution"


def test_definitions_on_a_small_sample():
    # 100 outcomes -1..-100 and 0: the 99% VaR is the 1st worst, the 95% ES the mean of 5
    pnl = -np.arange(1.0, 101.0)
    v99, e99 = var_es(pnl, 0.99)
    v95, e95 = var_es(pnl, 0.95)
    assert (v99, e99) == (100.0, 100.0)
    assert v95 == 96.0 and e95 == pytest.approx(np.mean([96, 97, 98, 99, 100]))
    assert math.isclose(float(var_es(np.c_[pnl, 2 * pnl], 0.95)[1][1]), 2 * e95)
