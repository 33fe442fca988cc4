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
