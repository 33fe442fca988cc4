"""The geometric sums behind the closed-form GARCH/GJR term structure and its band,
against the same formulas summed for every element (the series of the bracket taken
only where ``|T ln p| < 0.5`` must give the same floats), and against the sums
added term by term (the definitions ``S = sum_{k<T} p^k``, ``D = sum_{k<T} sum_{j<k}
p^j``)."""
from __future__ import annotations

import math

import numpy as np
import pytest

from optbench.volatility.forecast import _geometric_sums


def _all_elements(persistence, T):
    """The sums with the bracket's series evaluated for every element (the form
    _geometric_sums had before it picked the elements that need the series)."""
    p = np.asarray(persistence, dtype=float)
    T = np.asarray(T, dtype=float)
    d = 1.0 - p
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        lg = np.log1p(-np.minimum(d, 1.0))
        x = T * lg
        S = np.where(d == 0.0, T, -np.expm1(x) / d)
        direct = (np.expm1(x) - T * np.expm1(lg)) / (d * d)
        small = np.abs(x) < 0.5
        a = x.copy()
        b = lg * np.ones_like(x)
        acc = np.zeros(np.broadcast(x, T).shape)
        for m in range(2, 42):
            a = a * x / m
            b = b * lg / m
            acc = acc + (a - T * b)
        D = np.where(d == 0.0, 0.5 * T * (T - 1.0), np.where(small, acc / (d * d), direct))
        far = d >= 0.5
        if np.any(far):
            pT = p ** T
            S_plain = (1.0 - pT) / d
            S = np.where(far, S_plain, S)
            D = np.where(far, (T - S_plain) / d, D)
    return S, D


rng = np.random.default_rng(4)
CASES = [(rng.uniform(0.9, 1.0, (300, 1)), np.array([1, 5, 10, 21, 63, 130, 260, 504.0])),
         (np.array([0.0, 0.3, 0.5, 0.7, 0.99, 0.999999, 1.0]), np.array([1.0, 3, 20, 300])[:, None]),
         (0.98, 7.0), (np.array(1.0), np.arange(1, 30.0)), (np.array([0.95, 0.9999]), 1000.0)]


@pytest.mark.parametrize("p,T", CASES)
def test_geometric_sums_are_the_all_element_formulas(p, T):
    got, ref = _geometric_sums(p, T), _all_elements(p, T)
    for g, r in zip(got, ref):
        assert np.shape(g) == np.shape(r) and np.array_equal(g, r)


@pytest.mark.parametrize("p", [0.0, 0.5, 0.93, 0.995, 0.99999, 1.0])
@pytest.mark.parametrize("T", [1, 2, 7, 63, 400])
def test_geometric_sums_against_the_definitions(p, T):
    S = math.fsum(p ** k for k in range(T))
    D = math.fsum(math.fsum(p ** j for j in range(k)) for k in range(T))
    got_S, got_D = _geometric_sums(p, float(T))
    assert float(got_S) == pytest.approx(S, rel=1e-13, abs=1e-300)
    assert float(got_D) == pytest.approx(D, rel=1e-12, abs=1e-300)


@pytest.mark.parametrize("model", ["garch", "gjr", "egarch"])
@pytest.mark.parametrize("with_mu", [True, False])
@pytest.mark.parametrize("days", [1, 7, 8, 9, 15, 16, 17, 500])
def test_refilter_is_next_variance_day_by_day(model, with_mu, days):
    """The band's re-filter of recent returns with every parameter draw against the
    recursion stepped one day at a time by VolSpec.next_variance (Bollerslev 1986
    GARCH, Glosten-Jagannathan-Runkle 1993 GJR, Nelson 1991 EGARCH): the same floats."""
    from optbench.volatility.forecast import refilter_variance
    from optbench.volatility.specs import get_spec

    g = np.random.default_rng(days)
    n = 300
    if model == "egarch":
        P = dict(omega=g.uniform(-0.3, -0.1, n), alpha=g.uniform(0.05, 0.2, n),
                 gamma=g.uniform(-0.1, 0.0, n), beta=g.uniform(0.95, 0.99, n))
    else:
        P = dict(omega=g.uniform(1e-6, 3e-6, n), alpha=g.uniform(0.0, 0.08, n),
                 beta=g.uniform(0.85, 0.9, n))
        if model == "gjr":
            P["gamma"] = g.uniform(-0.02, 0.15, n)      # a negative gamma or two
    if with_mu:
        P["mu"] = g.normal(3e-4, 1e-4, n)
    y = g.standard_t(5, days) * 0.01
    s0 = np.full(n, 1.1e-4)
    spec, s2, mu = get_spec(model), s0, P.get("mu", 0.0)
    for t in range(days):
        s2 = spec.next_variance(y[t] - mu, s2, P)
    got = refilter_variance(model, y, P, s0)
    assert np.array_equal(got, s2) and np.all(s0 == 1.1e-4)    # input left alone


@pytest.mark.parametrize("model", ["garch", "gjr"])
def test_refilter_on_returns_among_the_drawn_means(model):
    """Returns between the smallest and largest drawn mean (the residual negative in
    some draws only), equal to one drawn mean (a zero residual), and all above or all
    below every mean: the band's re-filter against VolSpec.next_variance stepped day
    by day (Glosten-Jagannathan-Runkle 1993 GJR, Bollerslev 1986 GARCH), the same
    floats."""
    from optbench.volatility.forecast import refilter_variance
    from optbench.volatility.specs import get_spec

    g = np.random.default_rng(11)
    n = 200
    P = dict(omega=g.uniform(1e-6, 3e-6, n), alpha=g.uniform(0.0, 0.08, n),
             beta=g.uniform(0.85, 0.9, n), mu=g.normal(3e-4, 1e-4, n))
    if model == "gjr":
        P["gamma"] = g.uniform(-0.02, 0.15, n)
    y = np.concatenate([g.uniform(P["mu"].min(), P["mu"].max(), 40), P["mu"][:5],
                        g.standard_t(5, 40) * 0.01, [P["mu"].max(), P["mu"].min()]])
    g.shuffle(y)
    s0 = np.full(n, 1.1e-4)
    spec, s2 = get_spec(model), s0
    for t in range(y.size):
        s2 = spec.next_variance(y[t] - P["mu"], s2, P)
    assert np.array_equal(refilter_variance(model, y, P, s0), s2)
