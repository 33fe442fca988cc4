"""The fast recursions and densities against plain references: a Python loop, finite
differences, and scipy's Student-t density (scipy.stats.t)."""
from __future__ import annotations

import math

import numpy as np
import pytest

from optbench.volatility.distributions import (normal_loglik, std_t_loglik,
                                               std_t_loglik_sums)
from optbench.volatility.garch import _Problem
from optbench.volatility.recursions import (garch_variance, garch_variance_loop,
                                            linear_filter, linear_filter_loop,
                                            reverse_filter)


@pytest.mark.parametrize("b", [0.3, 0.97])
@pytest.mark.parametrize("n", [1, 2, 37, 250, 1000, 5003])
def test_blocked_filter_equals_loop(n, b):
    rng = np.random.default_rng(n)
    u = rng.random((3, n))
    np.testing.assert_allclose(linear_filter(u, b, [1.0, 2.0, 0.5]),
                               np.stack([linear_filter_loop(u[i], b, x0)
                                         for i, x0 in enumerate([1.0, 2.0, 0.5])]),
                               rtol=1e-12)
    # many channels take the Toeplitz-block solver whatever b is
    wide = rng.random((20, n))
    np.testing.assert_allclose(linear_filter(wide, b, 0.4), linear_filter_loop(wide, b, 0.4),
                               rtol=1e-12)


def test_reverse_filter_is_the_adjoint():
    rng = np.random.default_rng(1)
    v, w = rng.random(900), rng.random(900)
    assert np.dot(w, linear_filter(v, 0.9)) == pytest.approx(
        np.dot(v, reverse_filter(w, 0.9)), rel=1e-12)


def test_gjr_variance_and_derivatives():
    rng = np.random.default_rng(2)
    e = 0.01 * rng.standard_normal(3000)
    args = (1e-6, 0.04, 0.1, 0.88, 1.1e-4)
    s2, d = garch_variance(e, *args, grad=True)
    np.testing.assert_allclose(s2, garch_variance_loop(e, *args), rtol=1e-12)
    for i in range(4):   # central differences of the loop reference
        h = 1e-7 * max(abs(args[i]), 1e-4)
        up, dn = list(args), list(args)
        up[i] += h
        dn[i] -= h
        fd = (garch_variance_loop(e, *up) - garch_variance_loop(e, *dn)) / (2 * h)
        np.testing.assert_allclose(d[i], fd, rtol=1e-5, atol=1e-12)


@pytest.mark.parametrize("model,dist", [("garch", "normal"), ("gjr", "t")])
def test_analytic_gradient_against_finite_differences(model, dist):
    rng = np.random.default_rng(3)
    y = rng.standard_normal(2000) * np.exp(0.3 * np.sin(np.arange(2000) / 50))
    prob = _Problem(y, model, dist, True, 1.0)
    theta = np.array([0.02, 0.05, 0.06] + ([0.08] if model == "gjr" else []) + [0.88]
                     + ([6.5] if dist == "t" else []))
    f, g = prob.objective_grad(theta)
    for i in range(theta.size):
        h = 1e-6
        tp, tm = theta.copy(), theta.copy()
        tp[i] += h
        tm[i] -= h
        fd = (prob.objective(tp) - prob.objective(tm)) / (2 * h)
        assert g[i] == pytest.approx(fd, rel=1e-5, abs=1e-9)


def test_densities_against_scipy():
    from scipy import stats

    rng = np.random.default_rng(4)
    e = rng.standard_normal(50) * 0.02
    s2 = rng.uniform(1e-4, 9e-4, 50)
    np.testing.assert_allclose(normal_loglik(e, s2), stats.norm.logpdf(e, scale=np.sqrt(s2)),
                               rtol=1e-12)
    nu = 5.5
    scale = np.sqrt(s2 * (nu - 2) / nu)   # unit-variance t (Bollerslev 1987)
    np.testing.assert_allclose(std_t_loglik(e, s2, nu), stats.t.logpdf(e, nu, scale=scale),
                               rtol=1e-12)
    _, d_s2, d_e, d_nu = std_t_loglik(e, s2, nu, grad=True)
    h = 1e-6
    fd_nu = (std_t_loglik(e, s2, nu + h) - std_t_loglik(e, s2, nu - h)) / (2 * h)
    np.testing.assert_allclose(d_nu, fd_nu, rtol=1e-6)
    fd_s2 = (std_t_loglik(e, s2 * (1 + h), nu) - std_t_loglik(e, s2 * (1 - h), nu)) / (2 * h * s2)
    np.testing.assert_allclose(d_s2, fd_s2, rtol=1e-5)
    assert math.isfinite(float(d_e.sum()))


def test_t_density_sums_equal_summed_arrays():
    """The fused sums used by the objective against scipy's Student-t log-density
    (scipy.stats.t, unit-variance scaling of Bollerslev 1987) and the per-day arrays."""
    from scipy import stats

    rng = np.random.default_rng(7)
    e = rng.standard_t(5, 3000) * 0.015
    s2 = rng.uniform(1e-4, 9e-4, 3000)
    for nu in (2.3, 6.0, 80.0):
        total, d_s2, sum_d_e, sum_d_nu = std_t_loglik_sums(e, e * e, s2.copy(), nu)
        scale = np.sqrt(s2 * (nu - 2) / nu)
        ref = float(stats.t.logpdf(e, nu, scale=scale).sum())   # scipy reference
        assert total == pytest.approx(ref, rel=1e-13, abs=1e-9)
        _, a_s2, a_e, a_nu = std_t_loglik(e, s2, nu, grad=True)
        np.testing.assert_allclose(d_s2, a_s2, rtol=1e-12, atol=1e-12 * np.abs(a_s2).max())
        assert sum_d_e == pytest.approx(float(a_e.sum()), rel=1e-10, abs=1e-8)
        assert sum_d_nu == pytest.approx(float(a_nu.sum()), rel=1e-9, abs=1e-9)


@pytest.mark.parametrize("b", [0.0, 0.3, 0.6, 0.75, 0.94, 0.999])
def test_filter_paths_equal_loop_for_all_coefficients(b):
    """Both solvers (Toeplitz blocks; scaled cumulative sums for 0.6 <= b < 1),
    signed inputs, against the plain loop."""
    rng = np.random.default_rng(7)
    u = rng.standard_normal(4999)
    ref = linear_filter_loop(u, b, 0.7)
    np.testing.assert_allclose(linear_filter(u, b, 0.7), ref, rtol=0,
                               atol=1e-13 * np.max(np.abs(ref)))


def test_egarch_loop_against_plain_formula():
    """The EGARCH loop against the recursion written term by term (Nelson 1991)."""
    from optbench.volatility.recursions import SQRT_2_OVER_PI, egarch_log_variance

    rng = np.random.default_rng(8)
    e = 0.01 * rng.standard_t(5, 800)
    om, a, g, b, hb = -0.3, 0.12, -0.08, 0.97, math.log(1e-4)
    got = egarch_log_variance(e, om, a, g, b, hb)
    h = np.empty(800)
    h[0] = om + b * hb
    for t in range(1, 800):
        z = e[t - 1] / math.sqrt(math.exp(h[t - 1]))
        h[t] = om + a * (abs(z) - SQRT_2_OVER_PI) + g * z + b * h[t - 1]
    np.testing.assert_allclose(got, h, rtol=1e-12, atol=1e-12)


def test_garch_derivatives_without_the_gamma_row():
    """GARCH(1,1) asks for no gamma row: the other rows are unchanged (mean row
    included), against the full GJR set of rows at gamma = 0."""
    rng = np.random.default_rng(21)
    e = 0.01 * rng.standard_normal(1200)
    args = (1e-6, 0.07, 0.0, 0.9, 1.1e-4)
    s2_full, d_full = garch_variance(e, *args, grad=True, with_mean=True)
    s2, d = garch_variance(e, *args, grad=True, with_mean=True, with_gamma=False)
    np.testing.assert_array_equal(s2, s2_full)
    np.testing.assert_allclose(d, np.delete(d_full, 3, axis=0), rtol=1e-13, atol=0)


def test_trigamma_against_scipy():
    """The start curvature's psi'(x) against scipy.special.polygamma(1, x)."""
    from scipy.special import polygamma

    from optbench.volatility.garch import _trigamma

    for x in (1.025, 1.5, 2.5, 3.99, 4.0, 9.99, 10.0, 37.5, 250.0):
        assert _trigamma(x) == pytest.approx(float(polygamma(1, x)), rel=1e-12)


@pytest.mark.parametrize("model", ["garch", "gjr"])
def test_student_t_information_matches_the_scores_at_the_true_parameters(model):
    """The conditional information of the Student-t GARCH/GJR (the optimiser's start
    curvature) against the outer product of the analytic per-day scores on a long
    series simulated from the same parameters: equal in expectation at the true
    parameters (the information matrix equality; Bollerslev 1987), so within the
    sampling error of 40,000 days. Its gradient is the analytic one."""
    rng = np.random.default_rng(7)
    n, nu = 40_000, 7.0
    omega, alpha, gamma, beta = 0.05, 0.05, (0.08 if model == "gjr" else 0.0), 0.88
    z = rng.standard_t(nu, n) * math.sqrt((nu - 2.0) / nu)
    e = np.empty(n)
    s2 = omega / (1.0 - alpha - gamma / 2 - beta)
    prev_e = 0.0
    for t in range(n):
        s2 = omega + (alpha + gamma * (prev_e < 0)) * prev_e ** 2 + beta * s2 if t else s2
        e[t] = math.sqrt(s2) * z[t]
        prev_e = e[t]
    y = 0.02 + e
    prob = _Problem(y, model, "t", True, float(np.var(y)))
    vol = [omega, alpha] + ([gamma] if model == "gjr" else []) + [beta]
    theta = np.array([0.02] + vol + [nu])
    info, (f0, g0) = prob._t_information(theta)
    f1, g1 = prob.objective_grad(theta)
    assert f0 == pytest.approx(f1, rel=1e-12)
    np.testing.assert_allclose(g0, g1, rtol=1e-8, atol=1e-12)
    _, sc = prob.score_obs(theta)
    opg = sc.T @ sc / n
    d_info, d_opg = np.sqrt(np.diag(info)), np.sqrt(np.diag(opg))
    np.testing.assert_allclose(d_info, d_opg, rtol=0.1)
    corr_info = info / np.outer(d_info, d_info)
    corr_opg = opg / np.outer(d_opg, d_opg)
    np.testing.assert_allclose(corr_info, corr_opg, atol=0.1)
