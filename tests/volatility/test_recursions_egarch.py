"""EGARCH's loop-free recursions against the plain sequential loops: the prefix scan
of affine maps, the Newton solve of the log-variance path (Nelson 1991 recursion)
and the vectorised adjoint (checked against the loop and by finite differences)."""
from __future__ import annotations

import math

import numpy as np
import pytest

from optbench.volatility.recursions import (affine_filter, affine_filter_loop,
                                            egarch_adjoint, egarch_adjoint_loop,
                                            egarch_log_variance,
                                            egarch_log_variance_loop)


@pytest.mark.parametrize("n", [1, 2, 3, 64, 1000, 5003])
def test_affine_filter_equals_loop(n):
    rng = np.random.default_rng(n)
    a = rng.uniform(-1.2, 1.2, n)          # signed, some above one in size
    b = rng.standard_normal((3, n))
    x0 = np.array([0.5, -1.0, 2.0])
    ref = affine_filter_loop(a, b, x0)
    got = affine_filter(a, b, x0)
    np.testing.assert_allclose(got, ref, rtol=1e-11, atol=1e-12 * np.max(np.abs(ref)))
    np.testing.assert_allclose(affine_filter(a, b[1], -1.0), ref[1], rtol=1e-11,
                               atol=1e-12 * np.max(np.abs(ref[1])))


def _returns(n, seed):
    rng = np.random.default_rng(seed)
    # heavy-tailed shocks with slowly changing scale (unit variance on average)
    return rng.standard_t(5, n) * np.exp(0.4 * np.sin(np.arange(n) / 200)) / math.sqrt(5 / 3)


@pytest.mark.parametrize("params", [(-0.0, 0.134, -0.15, 0.974), (0.02, 0.10, -0.05, 0.97),
                                    (0.0, 0.05, 0.0, 0.995), (0.3, 0.5, -0.4, 0.6),
                                    (-0.1, 0.25, 0.2, 0.9)])
def test_newton_path_equals_loop(params):
    e = _returns(4000, 11)
    hb = math.log(1.3)
    ref = egarch_log_variance_loop(e, *params, hb)
    np.testing.assert_allclose(egarch_log_variance(e, *params, hb), ref, rtol=0, atol=1e-11)
    # started from the path at other parameters (how the estimator calls it)
    start = egarch_log_variance_loop(e, 0.0, 0.1, -0.1, 0.95, hb)
    np.testing.assert_allclose(egarch_log_variance(e, *params, hb, start=start), ref,
                               rtol=0, atol=1e-11)


def test_capped_path_falls_back_to_the_loop():
    """A wild trial point whose path hits the [-30, 30] guard: same as the loop."""
    e = _returns(3000, 12)
    params = (0.01, 0.07, -0.78, 0.906)
    ref = egarch_log_variance_loop(e, *params, -0.05)
    assert ref.max() == 30.0 or ref.min() == -30.0
    with np.errstate(all="ignore"):
        got = egarch_log_variance(e, *params, -0.05)
    np.testing.assert_array_equal(got, ref)


def test_adjoint_equals_loop_and_finite_differences():
    e = _returns(2500, 13)
    om, a, g, b, hb = 0.01, 0.12, -0.1, 0.96, 0.2
    h = egarch_log_variance(e, om, a, g, b, hb)
    z = e * np.exp(-0.5 * h)
    w = 0.5 * (z * z - 1.0)               # dl/dh of the normal log-density
    lam = egarch_adjoint(z, w, a, g, b)
    np.testing.assert_allclose(lam, egarch_adjoint_loop(z, w, a, g, b), rtol=1e-11,
                               atol=1e-12 * np.max(np.abs(lam)))

    def loglik(om_):
        hh = egarch_log_variance_loop(e, om_, a, g, b, hb)
        return float(np.sum(-0.5 * (hh + e * e * np.exp(-hh))))

    d = 1e-6   # dL/domega = sum_t lam_t (omega enters every step with weight one)
    fd = (loglik(om + d) - loglik(om - d)) / (2 * d)
    assert lam.sum() == pytest.approx(fd, rel=1e-6)


@pytest.mark.parametrize("dist", ["normal", "t"])
def test_egarch_objective_gradient_against_finite_differences(dist):
    """The estimator's EGARCH gradient (Newton path + vectorised adjoint) against
    central differences of its objective."""
    from optbench.volatility.garch import _Problem

    y = _returns(2000, 14)
    prob = _Problem(y, "egarch", dist, True, 1.0)
    theta = np.array([0.02, 0.01, 0.12, -0.1, 0.96] + ([6.5] if dist == "t" else []))
    f, g = prob.objective_grad(theta)
    for i in range(theta.size):
        h = 1e-6
        tp, tm = theta.copy(), theta.copy()
        tp[i] += h
        tm[i] -= h
        fd = (prob.objective(tp) - prob.objective(tm)) / (2 * h)
        assert g[i] == pytest.approx(fd, rel=1e-5, abs=1e-9)


@pytest.mark.parametrize("dist", ["normal", "t"])
def test_egarch_per_day_scores_against_finite_differences(dist):
    """Forward-sensitivity scores of each day against central differences of the
    per-day log-likelihood (the robust covariance and the optimiser's start use them)."""
    from optbench.volatility.garch import _Problem

    y = _returns(1500, 15)
    prob = _Problem(y, "egarch", dist, True, 1.0)
    theta = np.array([0.02, 0.01, 0.12, -0.1, 0.96] + ([6.5] if dist == "t" else []))
    ll, sc = prob.egarch_score_obs(theta)
    np.testing.assert_allclose(ll, prob.loglik_obs(theta), rtol=1e-12)
    for i in range(theta.size):
        h = 1e-6
        tp, tm = theta.copy(), theta.copy()
        tp[i] += h
        tm[i] -= h
        fd = (prob.loglik_obs(tp) - prob.loglik_obs(tm)) / (2 * h)
        np.testing.assert_allclose(sc[:, i], fd, rtol=1e-5, atol=1e-7)


@pytest.mark.parametrize("gamma", [-0.15, 0.15])
def test_asymmetry_start_has_the_sign_and_size_of_the_simulated_gamma(gamma):
    """EGARCH's start for gamma, from a symmetric GARCH fit's residuals, on 8,000 days
    simulated by the arch library (arch_model(..., vol="EGARCH").simulate, an
    independent simulator) with leverage of either sign: the start lies on the
    true side of zero and within a factor of three of the truth (it is a start,
    shrunk by half), and the EGARCH fit from it recovers gamma."""
    from arch import arch_model
    from arch.univariate import Normal

    from optbench.volatility.garch import _asymmetry_start, fit_garch

    am = arch_model(None, mean="Constant", vol="EGARCH", p=1, o=1, q=1, dist="normal",
                    rescale=False)
    am.distribution = Normal(seed=np.random.default_rng(7))
    y = am.simulate([0.03, 0.0, 0.12, gamma, 0.97], 8000, burn=500)["data"].to_numpy() / 100
    g = fit_garch(y, "garch", "normal")
    assert g.converged and g.model == "garch"
    start = _asymmetry_start(g.std_resid)
    assert start is not None and np.sign(start) == np.sign(gamma)
    assert abs(gamma) / 3 < abs(start) < 3 * abs(gamma), start
    fit = fit_garch(y, "egarch", "normal")
    assert fit.converged and fit.model == "egarch"
    assert fit.params["gamma"] == pytest.approx(gamma, abs=4 * fit.std_errors["gamma"])
