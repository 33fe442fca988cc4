"""The bound-constrained quasi-Newton minimiser against scipy.optimize (reference
library, imported only here) on standard test problems."""
from __future__ import annotations

import numpy as np
import pytest

from optbench.volatility.optimize import minimize_box


def rosenbrock(x):
    f = 100 * (x[1] - x[0] ** 2) ** 2 + (1 - x[0]) ** 2
    g = np.array([-400 * x[0] * (x[1] - x[0] ** 2) - 2 * (1 - x[0]), 200 * (x[1] - x[0] ** 2)])
    return f, g


def test_rosenbrock_interior_minimum():
    res = minimize_box(rosenbrock, [-1.2, 1.0], [-5, -5], [5, 5], gtol=1e-10)
    assert res.success
    np.testing.assert_allclose(res.x, [1.0, 1.0], atol=1e-6)   # known minimum (1, 1)


def test_bound_active_minimum_matches_scipy_lbfgsb():
    from scipy.optimize import minimize

    rng = np.random.default_rng(0)
    A = rng.standard_normal((6, 6))
    Q = A @ A.T + 0.5 * np.eye(6)
    c = rng.standard_normal(6) * 3

    def quad(x):
        return 0.5 * x @ Q @ x + c @ x, Q @ x + c

    lo, hi = np.zeros(6), np.full(6, 0.4)
    ours = minimize_box(quad, np.full(6, 0.2), lo, hi, gtol=1e-12)
    ref = minimize(lambda x: quad(x)[0], np.full(6, 0.2), jac=lambda x: quad(x)[1],
                   method="L-BFGS-B", bounds=list(zip(lo, hi)),
                   options={"ftol": 1e-15, "gtol": 1e-12})
    assert ours.success
    np.testing.assert_allclose(ours.x, ref.x, atol=1e-7)
    assert ours.fun == pytest.approx(ref.fun, abs=1e-12)
    assert np.any(ours.x == 0.0) or np.any(ours.x == 0.4)   # some bound is active


def test_infeasible_region_is_avoided():
    # minimum of (x-2)^2 + (y-2)^2 subject to x + y <= 1 (as a feasibility test): (0.5, 0.5)
    def f(x):
        return float(np.sum((x - 2) ** 2)), 2 * (x - 2)

    res = minimize_box(f, [0.0, 0.0], [-5, -5], [5, 5], feasible=lambda x: x.sum() <= 1.0)
    assert res.x.sum() <= 1.0
    assert np.all(np.abs(res.x - 0.5) < 0.05)   # reaches the constraint from inside


def test_linear_inequality_is_followed_to_the_constrained_minimum():
    """A quadratic whose unconstrained minimum breaks ``x1 + x2 + x3 <= 1`` (the shape
    of GARCH's stationarity limit) and a bound: the active-set steps move along the
    limit to the constrained minimum that scipy's SLSQP (reference library) finds."""
    from scipy.optimize import minimize

    rng = np.random.default_rng(3)
    A = rng.standard_normal((4, 4))
    Q = A @ A.T + 0.5 * np.eye(4)
    c = -Q @ np.array([0.2, 0.6, 0.7, 0.3])          # unconstrained minimum sums > 1

    def quad(x):
        return 0.5 * x @ Q @ x + c @ x, Q @ x + c

    row = np.array([[0.0, 1.0, 1.0, 1.0]])
    lo, hi = np.zeros(4), np.ones(4)
    ours = minimize_box(quad, np.full(4, 0.1), lo, hi, A_ub=row, b_ub=[1.0], gtol=1e-12)
    ref = minimize(lambda x: quad(x)[0], np.full(4, 0.1), jac=lambda x: quad(x)[1],
                   method="SLSQP", bounds=list(zip(lo, hi)),
                   constraints=[{"type": "ineq", "fun": lambda x: 1.0 - row[0] @ x,
                                 "jac": lambda x: -row[0]}],
                   options={"ftol": 1e-15, "maxiter": 500})
    assert ours.success and ref.success
    assert float(row[0] @ ours.x) == pytest.approx(1.0, abs=1e-12)   # on the limit
    assert ours.active_rows == (0,)
    np.testing.assert_allclose(ours.x, ref.x, atol=1e-6)
    assert ours.fun <= ref.fun + 1e-12
