"""GARCH-family fits on the arch library's bundled datasets reach arch's optimum.

Source of the data and of the reference optimum: the arch library (bashtage/arch),
``arch.data.sp500`` (last 5,000 daily returns), ``arch.data.nasdaq``,
``arch.data.wti`` and ``arch.data.vix``; daily log returns of the adjusted close
(sp500, nasdaq) or the single close column (wti, vix), missing prices dropped.
arch fits percent returns; its log-likelihood converts to decimal returns by
``ll_decimal = ll_percent + n ln 100`` (the density of ``r/100`` is 100 times that of
``r``). Every optbench fit must reach a log-likelihood no lower than arch's by more
than 1e-6, report ``converged`` only with a passed first-order check, and GJR (which
nests GARCH at gamma = 0) must never end below optbench's own GARCH fit.
"""
from __future__ import annotations

import functools
import math
import warnings

import numpy as np
import pytest
from arch import arch_model

from optbench.volatility.garch import OPTIMALITY_GAIN_TOL, fit_garch

ARCH_KW = {"garch": dict(vol="GARCH", p=1, q=1), "gjr": dict(vol="GARCH", p=1, o=1, q=1),
           "egarch": dict(vol="EGARCH", p=1, o=1, q=1)}
ARCH_DIST = {"normal": "normal", "t": "studentst"}


@functools.lru_cache(maxsize=None)
def arch_dataset_returns(name: str) -> np.ndarray:
    """Daily decimal log returns of one of arch's bundled datasets."""
    from arch.data import nasdaq, sp500, vix, wti

    mod = {"sp500": sp500, "nasdaq": nasdaq, "wti": wti, "vix": vix}[name]
    d = mod.load()
    col = "Adj Close" if "Adj Close" in d.columns else d.columns[0]
    prices = d[col].dropna().to_numpy(dtype=float)
    y = np.diff(np.log(prices))
    return y[-5000:] if name == "sp500" else y


@functools.lru_cache(maxsize=None)
def arch_loglik(name: str, model: str, dist: str) -> float:
    """arch's maximised log-likelihood, converted to decimal returns."""
    y = arch_dataset_returns(name)
    am = arch_model(100.0 * y, mean="Constant", rescale=False, dist=ARCH_DIST[dist],
                    **ARCH_KW[model])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = am.fit(disp="off")
    return float(res.loglikelihood) + y.size * math.log(100.0)


DATASETS = ("sp500", "nasdaq", "wti", "vix")


@pytest.mark.slow
@pytest.mark.parametrize("name", DATASETS)
@pytest.mark.parametrize("dist", ["normal", "t"])
@pytest.mark.parametrize("model", ["garch", "gjr", "egarch"])
def test_fit_reaches_arch_optimum(name, model, dist):
    y = arch_dataset_returns(name)
    fit = fit_garch(y, model, dist)
    ref = arch_loglik(name, model, dist)
    assert fit.model == model and fit.fallback_reason is None
    assert fit.converged and fit.optimality["passed"]
    assert fit.optimality["predicted_gain"] <= fit.optimality["tolerance"]
    # arch library, same data: optbench's optimum is arch's or better
    assert fit.loglik >= ref - 1e-6, (name, model, dist, fit.loglik - ref)


@pytest.mark.parametrize("dist", ["normal", "t"])
def test_gjr_moves_along_the_alpha_plus_gamma_edge_on_vix(dist):
    """arch.data.vix: arch's GJR optimum sits on the edge alpha + gamma = 0 (alpha
    about 0.33, beta about 0.66); the fit must follow the edge there instead of
    stopping where it meets it, and never end below the GARCH fit it nests."""
    y = arch_dataset_returns("vix")
    fit = fit_garch(y, "gjr", dist)
    garch = fit_garch(y, "garch", dist)
    ref = arch_loglik("vix", "gjr", dist)
    assert fit.loglik >= ref - 1e-6, fit.loglik - ref          # arch library
    assert fit.loglik >= garch.loglik - 1e-9                   # nesting
    assert "alpha+gamma" in fit.optimality["active_bounds"]
    assert abs(fit.params["alpha"] + fit.params["gamma"]) < 1e-12
    assert fit.params["alpha"] > 0.2 and fit.params["beta"] < 0.8


def test_optimality_is_in_the_fit_json():
    y = arch_dataset_returns("nasdaq")
    d = fit_garch(y, "garch", "normal").to_dict()
    opt = d["optimality"]
    assert opt["passed"] is True
    assert opt["predicted_gain"] <= opt["tolerance"]
    assert opt["tolerance"] >= OPTIMALITY_GAIN_TOL
    assert set(opt) >= {"checked", "projected_gradient", "active_bounds"}


@pytest.mark.parametrize("model", ["garch", "gjr", "egarch"])
def test_student_t_is_optimised_in_inverse_nu_and_checked_there(model):
    """arch.data.sp500: the Student-t fits optimise eta = 1/nu; the first-order check
    from the per-day scores (chained through d nu / d eta = -nu^2) must pass at the
    optimum as the optimiser's own check did, and the log-likelihood reaches arch's
    (arch library, same data)."""
    from optbench.volatility import garch as G

    y = arch_dataset_returns("sp500")
    fit = fit_garch(y, model, "t")
    assert fit.optimality["coordinates"][-1] == "1/nu"
    assert fit.loglik >= arch_loglik("sp500", model, "t") - 1e-6
    scale = G._scale_of(y)
    y_s = y * scale
    prob = G._Problem(y_s, model, "t", True, G._backcast_scaled(y_s, True, None, scale))
    coords = G._Coordinates(prob)
    theta = G._to_scaled(model, prob.names, fit.params, scale)
    u = coords.u(theta)
    np.testing.assert_allclose(coords.theta(u), theta, rtol=1e-14)
    bounds = prob.internal_bounds(float(np.var(y_s)))
    lo, hi = coords.bounds(np.array([b[0] for b in bounds]),
                           np.array([b[1] for b in bounds]))
    srow = prob.stationarity_row()
    A = None if srow is None else (srow[0] @ coords.M)[None, :]
    b = None if srow is None else np.array([srow[1]])
    opt = G._optimality(prob, coords, u, lo, hi, None, A, b)
    assert opt["checked"].endswith("(curvature: outer product of the per-day scores)")
    assert opt["passed"], opt
    # away from the optimum (nu 30% higher), the gradient in eta by the chain rule
    # against a central difference of the log-likelihood in eta (the Jacobian the
    # scores path uses)
    theta[-1] *= 1.3
    u = coords.u(theta)
    h = 1e-6 * u[-1]
    up, um = u.copy(), u.copy()
    up[-1] += h
    um[-1] -= h
    fd = -(prob.objective(coords.theta(up)) - prob.objective(coords.theta(um))) / (2 * h)
    _, g = prob.objective_grad(theta)
    chain = -(coords.jacobian(theta).T @ g)[-1]
    assert abs(chain) > 1e-4
    assert chain == pytest.approx(fd, rel=1e-6)
