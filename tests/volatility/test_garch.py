"""fit_garch / fix_garch against the arch library on arch's bundled S&P 500 sample.

Reference: the arch package (K. Sheppard et al.), arch.univariate.arch_model, fitted
on arch.data.sp500 daily returns. arch fits percent returns by convention; optbench
takes decimals, so y_pct = 100 y, mu_pct = 100 mu, omega_pct = 1e4 omega and
loglik_pct = loglik_dec - n ln 100 (the density of 100 y is the density of y / 100).
Both sides use the same start-up variance (arch's backcast: the 0.94-weighted
average of the first 75 squared residuals).
"""
from __future__ import annotations

import dataclasses
import math
import warnings

import numpy as np
import pytest
from arch import arch_model
from arch.data import sp500
from arch.univariate import EWMAVariance, ZeroMean

from optbench.errors import InputError
from optbench.volatility import garch as garch_mod
from optbench.volatility.garch import GarchFit, fit_garch, fix_garch
from optbench.volatility.recursions import garch_variance_loop

ARCH_KW = {
    ("garch", "normal"): dict(vol="GARCH", p=1, q=1, dist="normal"),
    ("garch", "t"): dict(vol="GARCH", p=1, q=1, dist="studentst"),
    ("gjr", "t"): dict(vol="GARCH", p=1, o=1, q=1, dist="studentst"),
    ("gjr", "normal"): dict(vol="GARCH", p=1, o=1, q=1, dist="normal"),
    ("egarch", "normal"): dict(vol="EGARCH", p=1, o=1, q=1, dist="normal"),
}
ARCH_NAMES = {"mu": "mu", "omega": "omega", "alpha": "alpha[1]", "gamma": "gamma[1]",
              "beta": "beta[1]", "nu": "nu"}


@pytest.fixture(scope="module")
def pct_returns():
    # arch.data.sp500: daily S&P 500 prices bundled with the arch package
    prices = sp500.load()["Adj Close"]
    return 100.0 * prices.pct_change().dropna()


def _to_pct(model, params):
    out = {}
    for k, v in params.items():
        if k == "mu":
            v = 100 * v
        elif k == "omega" and model != "egarch":
            v = 1e4 * v
        elif k == "omega":  # log-variance intercept: ln(1e4) (1 - beta) shift
            v = v + math.log(1e4) * (1 - params["beta"])
        out[ARCH_NAMES[k]] = v
    return out


def _arch_fit(y_pct, model, dist, mean="Constant"):
    am = arch_model(y_pct, mean=mean, rescale=False, **ARCH_KW[(model, dist)])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return am, am.fit(disp="off")


@pytest.mark.parametrize("model,dist", [("garch", "normal"), ("garch", "t"),
                                        ("gjr", "t"), ("gjr", "normal"),
                                        ("egarch", "normal")])
def test_fit_agrees_with_arch(pct_returns, model, dist):
    y = pct_returns.to_numpy() / 100
    fit = fit_garch(y, model, dist)
    _, res = _arch_fit(pct_returns, model, dist)
    n = y.shape[0]
    assert fit.converged and fit.fallback_reason is None
    # arch: loglik on percent returns; optbench: on decimals
    assert fit.loglik - n * math.log(100) == pytest.approx(res.loglikelihood, abs=1e-6)
    ours = _to_pct(model, fit.params)
    for name, value in res.params.items():
        assert ours[name] == pytest.approx(value, abs=1e-3), name
    # robust (Bollerslev-Wooldridge) standard errors; different numerical derivatives
    for k, v in fit.std_errors.items():
        if k == "omega" and model == "egarch":
            continue  # the EGARCH intercept's SE mixes with beta's under rescaling
        se_pct = {"mu": 100 * v, "omega": 1e4 * v}.get(k, v)
        assert se_pct == pytest.approx(res.std_err[ARCH_NAMES[k]], rel=0.02), k
    # information criteria: arch's, shifted by the units of the log-likelihood
    assert fit.bic == pytest.approx(res.bic - 2 * n * math.log(100), abs=1e-5)
    assert fit.aic == pytest.approx(res.aic - 2 * n * math.log(100), abs=1e-5)


def test_zero_mean_agrees_with_arch(pct_returns):
    y = pct_returns.to_numpy() / 100
    fit = fit_garch(y, "garch", "normal", mean="zero")
    _, res = _arch_fit(pct_returns, "garch", "normal", mean="Zero")
    assert "mu" not in fit.params
    assert fit.loglik - y.size * math.log(100) == pytest.approx(res.loglikelihood, abs=1e-6)
    assert 1e4 * fit.params["omega"] == pytest.approx(res.params["omega"], abs=1e-3)
    assert fit.params["beta"] == pytest.approx(res.params["beta[1]"], abs=1e-3)


@pytest.mark.parametrize("model,dist", [("garch", "normal"), ("gjr", "t"),
                                        ("egarch", "normal")])
def test_fixed_parameters_agree_with_arch_fix(pct_returns, model, dist):
    """arch's ARCHModel.fix(params): likelihood and conditional vol at held params."""
    y = pct_returns.to_numpy() / 100
    params = {"garch": dict(mu=4e-4, omega=2e-6, alpha=0.09, beta=0.89),
              "gjr": dict(mu=3e-4, omega=1.5e-6, alpha=0.02, gamma=0.15, beta=0.9, nu=7.0),
              "egarch": dict(mu=2e-4, omega=-0.25, alpha=0.13, gamma=-0.15, beta=0.97)}[model]
    fixed = fix_garch(y, params, model, dist)
    am = arch_model(pct_returns, mean="Constant", rescale=False, **ARCH_KW[(model, dist)])
    pct = _to_pct(model, params)
    res = am.fix(list(pct.values()))  # arch's order: mean, variance, distribution
    assert fixed.loglik - y.size * math.log(100) == pytest.approx(res.loglikelihood,
                                                                  abs=1e-6)
    np.testing.assert_allclose(fixed.conditional_vol * 100,
                               res.conditional_volatility.to_numpy(), rtol=1e-9)


def test_ewma_matches_arch_ewma(pct_returns):
    """The EWMA fallback's variances equal arch's EWMAVariance(0.94) (RiskMetrics 1996)."""
    y = pct_returns.to_numpy() / 100
    fixed = fix_garch(y, {}, "ewma", "normal", mean="zero")
    am = ZeroMean(pct_returns, volatility=EWMAVariance(0.94), rescale=False)
    res = am.fix([])
    np.testing.assert_allclose(fixed.conditional_vol * 100,
                               res.conditional_volatility.to_numpy(), rtol=1e-9)
    assert fixed.loglik - y.size * math.log(100) == pytest.approx(res.loglikelihood,
                                                                  abs=1e-6)
    assert fixed.persistence == 1.0 and fixed.long_run_vol is None


def test_filter_continues_the_fitted_state(pct_returns):
    """Held-parameter filtering of later returns equals the plain loop over the
    whole sample (same parameters, same start-up variance)."""
    y = pct_returns.to_numpy() / 100
    head, tail = y[:3000], y[3000:]
    fit = fit_garch(head, "gjr", "normal")
    s2 = fit.filter(tail)
    assert s2.shape == (tail.size + 1,)
    assert s2[0] == pytest.approx(fit.last_variance, rel=1e-12)
    p = fit.params
    ref = garch_variance_loop(y - p["mu"], p["omega"], p["alpha"], p["gamma"],
                              p["beta"], fit.backcast)
    np.testing.assert_allclose(fit.conditional_vol ** 2, ref[:3000], rtol=1e-10)
    np.testing.assert_allclose(s2[:-1], ref[3000:], rtol=1e-10)
    # the last value is the forecast for the day after the last return
    e = tail[-1] - p["mu"]
    nxt = p["omega"] + (p["alpha"] + p["gamma"] * (e < 0)) * e * e + p["beta"] * s2[-2]
    assert s2[-1] == pytest.approx(nxt, rel=1e-12)


def test_auto_picks_lowest_bic(pct_returns):
    y = pct_returns.to_numpy()[-2000:] / 100
    fit = fit_garch(y, "auto", "t")
    assert set(fit.candidates) == {"garch", "gjr", "egarch"}
    bics = {k: v for k, v in fit.candidates.items() if v is not None}
    assert fit.model == min(bics, key=bics.get)
    assert fit.bic == pytest.approx(min(bics.values()))


def test_result_fields_and_json(pct_returns):
    y = pct_returns.to_numpy() / 100
    fit = fit_garch(y, "gjr", "t")
    assert isinstance(fit, GarchFit)
    p = fit.params
    assert fit.persistence == pytest.approx(p["alpha"] + p["gamma"] / 2 + p["beta"])
    assert fit.half_life_days == pytest.approx(math.log(0.5) / math.log(fit.persistence))
    assert fit.long_run_vol == pytest.approx(
        math.sqrt(252 * p["omega"] / (1 - fit.persistence)))
    assert fit.conditional_vol.shape == y.shape == fit.std_resid.shape
    d = fit.to_dict()
    for key in ("name", "dist", "params", "std_errors", "loglik", "aic", "bic",
                "converged", "fallback_reason", "persistence", "half_life_days",
                "long_run_vol"):
        assert key in d
    import json
    json.dumps(d, allow_nan=False)
    with pytest.raises(Exception):
        fit.model = "garch"  # frozen


def test_fallback_is_reported(pct_returns, monkeypatch):
    """A GJR fit that stops away from an optimum fails the first-order check, is
    not called converged, falls back to GARCH, and says so."""
    y = pct_returns.to_numpy()[-1500:] / 100
    real = garch_mod.minimize_box

    def failing_for_gjr(fun, x0, *args, **kw):
        res = real(fun, x0, *args, **kw)
        if len(x0) == 6:  # mu, omega, alpha, alpha+gamma, beta, nu: stop at the start
            x = np.clip(x0, args[0], args[1])
            res = dataclasses.replace(res, x=x, fun=fun(x)[0], success=False,
                                      message="iteration limit reached", grad=None,
                                      hess=None)
        return res

    monkeypatch.setattr(garch_mod, "minimize_box", failing_for_gjr)
    fit = fit_garch(y, "gjr", "t")
    assert fit.model == "garch" and fit.converged
    assert fit.optimality["passed"]
    assert fit.fallback_reason.startswith("gjr stopped short of an optimum")
    assert "fell back to garch" in fit.fallback_reason
    assert fit.to_dict()["fallback_reason"] == fit.fallback_reason


def test_everything_failing_falls_back_to_ewma(pct_returns, monkeypatch):
    y = pct_returns.to_numpy()[-1500:] / 100
    real = garch_mod.minimize_box

    def always_fails(fun, x0, *args, **kw):   # every fit stops at its start
        res = real(fun, x0, *args, **kw)
        x = np.clip(x0, args[0], args[1])
        return dataclasses.replace(res, x=x, fun=fun(x)[0], success=False,
                                   message="line search found no decrease", grad=None,
                                   hess=None)

    monkeypatch.setattr(garch_mod, "minimize_box", always_fails)
    fit = fit_garch(y, "egarch", "t")
    assert fit.model == "ewma"
    assert fit.fallback_reason.startswith("EWMA lambda=0.94 used:")
    assert "egarch stopped short of an optimum" in fit.fallback_reason
    assert "garch stopped short of an optimum" in fit.fallback_reason
    assert np.all(np.isfinite(fit.forecast_vol([5, 21, 63])))


@pytest.mark.parametrize("bad,needle", [
    (np.full(100, 0.01), "at least 250"),
    (np.r_[np.full(299, 0.01) * np.sign(np.sin(np.arange(299))), np.nan], "non-finite"),
    (np.zeros(400), "constant"),
])
def test_bad_returns_are_clear_errors(bad, needle):
    with pytest.raises(InputError) as err:
        fit_garch(bad)
    assert err.value.source == "returns" and needle in err.value.problem


def test_bad_choices_are_clear_errors(pct_returns):
    y = pct_returns.to_numpy()[-500:] / 100
    with pytest.raises(InputError, match="model"):
        fit_garch(y, model="figarch")
    with pytest.raises(InputError, match="dist"):
        fit_garch(y, dist="skewt")
    with pytest.raises(InputError, match="missing"):
        fix_garch(y, {"omega": 1e-6}, "garch", "normal")


def test_given_backcast_agrees_with_arch(pct_returns):
    """fit_garch(backcast=...) against arch's fit(backcast=...) (arch: percent^2 units)."""
    y = pct_returns.to_numpy() / 100
    fit = fit_garch(y, "garch", "normal", backcast=2.5e-4)
    am = arch_model(pct_returns, mean="Constant", rescale=False, vol="GARCH", p=1, q=1)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = am.fit(disp="off", backcast=2.5)
    assert fit.backcast == pytest.approx(2.5e-4)
    assert fit.loglik - y.size * math.log(100) == pytest.approx(res.loglikelihood, abs=1e-6)
    assert fit.params["beta"] == pytest.approx(res.params["beta[1]"], abs=1e-3)


def test_held_integrated_parameters_forecast_linearly(pct_returns):
    """alpha + beta = 1 (integrated GARCH): E[sigma^2_{T+k}] = sigma^2_{T+1} + (k-1) omega."""
    y = pct_returns.to_numpy() / 100
    fixed = fix_garch(y, dict(mu=0.0, omega=1e-7, alpha=0.06, beta=0.94), "garch", "normal")
    v = fixed.forecast_variance(10)
    np.testing.assert_allclose(v, fixed.last_variance + 1e-7 * np.arange(10), rtol=1e-12)
    assert fixed.half_life_days is None and fixed.long_run_vol is None
    assert fixed.forecast_vol(10) == pytest.approx(math.sqrt(252 * v.mean()))


def test_estimate_at_the_stationarity_limit_is_reported(pct_returns):
    """With one -22% day added to the sample, the GARCH-normal maximum sits on the
    stationarity limit — arch's own fit (reference library) ends at alpha + beta = 1
    too. optbench holds the persistence at 1 - STATIONARITY_MARGIN, calls the fit
    converged (the KKT check with the limit active) and says so in ``warnings``."""
    from optbench.volatility.garch import STATIONARITY_MARGIN

    y = pct_returns.to_numpy().copy() / 100
    y[3000] = -0.22
    fit = fit_garch(y, "garch", "normal")
    am = arch_model(100 * y, mean="Constant", rescale=False, vol="GARCH", p=1, q=1)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = am.fit(disp="off")
    assert res.params["alpha[1]"] + res.params["beta[1]"] == pytest.approx(1.0, abs=1e-4)
    assert fit.model == "garch" and fit.converged and fit.fallback_reason is None
    assert fit.persistence == pytest.approx(1.0 - STATIONARITY_MARGIN, abs=1e-12)
    assert "stationarity limit" in fit.optimality["active_bounds"]
    assert len(fit.warnings) == 1 and "stationarity limit" in fit.warnings[0]
    assert fit.to_dict()["warnings"] == list(fit.warnings)
    assert fit.long_run_vol is None
    # arch's optimum at persistence 1 is higher only by what the margin costs:
    # about the limit's multiplier (d log L / d persistence) times the margin
    nu = fit.optimality["limit_multiplier"]
    assert nu > 0
    arch_ll = res.loglikelihood + y.size * math.log(100)   # percent -> decimal returns
    assert fit.loglik >= arch_ll - 1.1 * nu * STATIONARITY_MARGIN - 1e-6
    assert fit.params["alpha"] == pytest.approx(res.params["alpha[1]"], abs=1e-4)


def test_fitting_stays_off_slow_scipy_imports():
    """Start-up rule: a fit imports neither scipy.optimize, scipy.stats nor scipy.signal."""
    import subprocess
    import sys

    code = ("import sys, numpy as np\n"
            "from optbench.volatility.garch import fit_garch\n"
            "r = np.random.default_rng(0).standard_normal(400) * 0.01\n"
            "f = fit_garch(r, 'auto', 't'); f.forecast_band([5, 21]); f.simulate(5, 10)\n"
            "print(','.join(m for m in sys.modules if m.split('.')[:2] in "
            "(['scipy', 'optimize'], ['scipy', 'stats'], ['scipy', 'signal'])))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == ""


@pytest.mark.parametrize("seed", [1, 2, 14])
def test_egarch_weak_dynamics_reaches_the_reference_optimum(seed):
    # Reference: the arch library's EGARCH(1,1)-t fit on a series it simulates with
    # weak dynamics (beta 0.6, alpha 0.05). Starting only from high persistence, the
    # fit used to stop at a local optimum near beta 0.9-0.97 with a lower likelihood;
    # it now also climbs from the weak-dynamics regime and keeps the higher optimum.
    from arch.univariate import EGARCH, ConstantMean, StudentsT
    sim = ConstantMean(None, volatility=EGARCH(1, 1, 1), distribution=StudentsT(seed=seed))
    y = sim.simulate([0.0, -0.5, 0.05, 0.0, 0.6, 8.0], 3000)["data"].to_numpy()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = arch_model(y, vol="EGARCH", p=1, o=1, q=1, dist="t").fit(disp="off")
    fit = fit_garch(y / 100.0, model="egarch", dist="t")
    ref_loglik = ref.loglikelihood + len(y) * np.log(100.0)   # percent -> decimal units
    assert fit.loglik >= ref_loglik - 1e-6
    assert fit.params["beta"] == pytest.approx(ref.params["beta[1]"], abs=5e-3)
