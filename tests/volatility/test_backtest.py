"""Out-of-sample model check: held-parameter filtering and multi-step forecasts
against the arch library's fixed-parameter model, VaR quantiles against
scipy.stats, and exceedance counts on a simulated GJR-t series with known
parameters."""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
import scipy.stats as st
from arch import arch_model

from optbench.errors import InputError
from optbench.volatility import evaluation as ev
from optbench.volatility.backtest import backtest

TRUE = {"mu": 3e-4, "omega": 2e-6, "alpha": 0.02, "gamma": 0.10, "beta": 0.90, "nu": 6.0}
N = 3000
SPLIT_AT = 1499                     # index of the last in-sample return


def _simulate_gjr_t(n, mu, omega, alpha, gamma, beta, nu, seed):
    """Independent GJR-GARCH(1,1)-t simulator (Glosten, Jagannathan & Runkle 1993,
    unit-variance t innovations, Bollerslev 1987), started at the long-run variance."""
    rng = np.random.default_rng(seed)
    z = rng.standard_t(nu, n) * math.sqrt((nu - 2) / nu)
    r = np.empty(n)
    s2 = omega / (1 - alpha - gamma / 2 - beta)
    for t in range(n):  # test reference: the plain recursion
        e = math.sqrt(s2) * z[t]
        r[t] = mu + e
        s2 = omega + (alpha + gamma * (e < 0)) * e * e + beta * s2
    return r


@pytest.fixture(scope="module")
def series():
    r = _simulate_gjr_t(N, seed=1, **TRUE)
    dates = np.datetime64("2011-01-03") + np.arange(N + 1)  # one date per price
    return r, dates


@pytest.fixture(scope="module")
def result(series):
    r, dates = series
    return backtest(r, dates[1 + SPLIT_AT], model="gjr", dist="t", dates=dates,
                    horizons=(1, 5, 21))


def _arch_fixed(result, r):
    """arch's fixed-parameter GJR-t model on percent returns with our parameters."""
    p = result.model["params"]
    am = arch_model(r * 100, mean="Constant", vol="GARCH", p=1, o=1, q=1, dist="t",
                    rescale=False)
    return am.fix([p["mu"] * 100, p["omega"] * 1e4, p["alpha"], p["gamma"], p["beta"],
                   p["nu"]])


def test_split_and_sample_sizes(result):
    assert result.n_in == SPLIT_AT + 1 and result.n_out == N - SPLIT_AT - 1
    assert result.dates_out[0] > np.datetime64(result.split)
    assert result.sigma_out.shape == result.std_resid_out.shape == (result.n_out,)


def test_held_parameter_vols_match_arch_fixed_model(result, series):
    # arch library: arch_model(...).fix(params).conditional_volatility. The start-up
    # (backcast) differs in detail, but its weight beta^t has vanished long before
    # the split, so out of sample the two must agree closely.
    r, _ = series
    arch_vol = np.asarray(_arch_fixed(result, r).conditional_volatility) / 100
    np.testing.assert_allclose(result.sigma_out, arch_vol[SPLIT_AT + 1:], rtol=1e-8)
    np.testing.assert_allclose(result.chart_sigma[SPLIT_AT + 1:], result.sigma_out)
    z = (r[SPLIT_AT + 1:] - result.mu) / arch_vol[SPLIT_AT + 1:]
    np.testing.assert_allclose(result.std_resid_out, z, rtol=1e-7)


def test_multi_step_forecasts_match_arch(result, series):
    # arch library: fixed-model forecast(horizon=h, start=...) gives E[sigma^2_{t+k}]
    # from every origin; our h-day forecast is their sum plus h mu^2 (E[sum r^2]).
    r, _ = series
    fixed = _arch_fixed(result, r)
    for acc in result.accuracy:
        h = acc.horizon
        f = fixed.forecast(horizon=h, start=SPLIT_AT, reindex=False, method="analytic")
        arch_sum = f.variance.to_numpy().sum(axis=1)[:acc.n] / 1e4
        expected = arch_sum + h * result.mu ** 2
        np.testing.assert_allclose(acc.forecasts["model"], expected, rtol=1e-7)
        # realized: the sum of the next h squared returns
        origin = SPLIT_AT + 1
        assert acc.realized[0] == pytest.approx(np.sum(r[origin:origin + h] ** 2), rel=1e-12)


def test_accuracy_losses_are_the_evaluation_functions(result):
    acc = {a.horizon: a for a in result.accuracy}
    a1 = acc[1]
    for name in ("model", "ewma", "trailing_21"):
        assert a1.losses[name]["qlike"] == pytest.approx(
            ev.qlike_loss(a1.realized, a1.forecasts[name]))
        assert a1.losses[name]["mse"] == pytest.approx(ev.mse_loss(a1.realized, a1.forecasts[name]))
    assert acc[21].n == result.n_out - 20


def test_var_quantiles_match_scipy_t(result):
    # scipy.stats.t: quantile of the unit-variance t = t.ppf(p, nu) * sqrt((nu-2)/nu)
    nu = result.nu
    for v in result.var:
        q = st.t.ppf(1 - v.level, nu) * math.sqrt((nu - 2) / nu)
        assert v.quantile_z == pytest.approx(q, rel=1e-8)
        r_out = result.returns_out
        hits = r_out < result.mu + result.sigma_out * q
        assert v.exceedances == int(hits.sum())
        np.testing.assert_array_equal(v.hits, hits)
        assert v.expected == pytest.approx(result.n_out * (1 - v.level))


def test_exceedances_close_to_expected_on_true_model(result):
    # a correctly specified GJR-t model: coverage tests should not reject at 5%,
    # counts stay near what the model expects, residuals have unit variance
    for v in result.var:
        assert v.kupiec.p_value > 0.05
        assert v.conditional_coverage.p_value > 0.05
        assert abs(v.exceedances - v.expected) < 3 * math.sqrt(v.expected)
    assert abs(result.outside_band - result.expected_model) < 3 * math.sqrt(result.expected_model)
    # the normal badly under-predicts 3-sigma days for t(6) innovations
    assert result.expected_normal == pytest.approx(result.n_out * 2 * st.norm.sf(3.0))
    assert result.expected_model > 2.5 * result.expected_normal
    assert result.residuals.std == pytest.approx(1.0, abs=0.06)
    assert result.nu == pytest.approx(TRUE["nu"], rel=0.35)
    # the (correct) GJR-t model has lower QLIKE than EWMA and trailing realized
    # variance at every horizon: the true conditional variance minimises expected
    # QLIKE (Patton 2011)
    for acc in result.accuracy:
        assert acc.losses["model"]["qlike"] < acc.losses["ewma"]["qlike"]
        assert acc.losses["model"]["qlike"] < acc.losses["trailing_21"]["qlike"]


def test_surprises_and_histogram(result):
    zs = [s["z"] for s in result.surprises]
    assert len(zs) == 10
    assert abs(zs[0]) == pytest.approx(np.max(np.abs(result.std_resid_out)))
    assert all(abs(a) >= abs(b) for a, b in zip(zs, zs[1:]))
    h = result.histogram
    assert h.counts.sum() + h.below + h.above == result.n_out


def test_to_dict_has_design_keys(result):
    d = result.to_dict()
    for key in ("split", "n_out", "band_k", "outside_band", "expected_normal",
                "expected_model", "var", "residuals", "surprises", "accuracy", "model"):
        assert key in d
    for key in ("level", "exceedances", "kupiec_lr", "kupiec_p", "christoffersen_lr_ind",
                "zone"):
        assert key in d["var"][0]
    assert set(d["residuals"]) >= {"min", "max", "skew", "excess_kurtosis"}
    assert d["var"][0]["zone"] in ("green", "yellow", "red")
    import json
    json.dumps(d)


def test_egarch_multi_step_forecasts_match_fixed_fit(series):
    # EGARCH-normal h-day forecasts from each origin against the fixed-parameter
    # fit's own forecast (optbench.volatility.garch.fix_garch, Nelson 1991 moments,
    # which its tests check against arch) restarted at that origin
    from optbench.volatility.garch import fix_garch
    r, dates = series
    res = backtest(r[:2000], dates[1 + SPLIT_AT], model="egarch", dist="normal",
                   dates=dates[:2001], horizons=(5, 21))
    p = res.model["params"]
    for acc in res.accuracy:
        for j in (0, 137, acc.n - 1):
            origin = SPLIT_AT + 1 + j          # first return forecast
            fixed = fix_garch(r[:origin], p, "egarch", "normal")
            expected = fixed.forecast_variance(acc.horizon).sum() + acc.horizon * p["mu"] ** 2
            assert acc.forecasts["model"][j] == pytest.approx(expected, rel=1e-6)


def test_ewma_model_check(series):
    # EWMA (RiskMetrics 1996, lambda 0.94) held as the model: its one-day forecasts
    # are the EWMA benchmark's, so the two rows of the accuracy table coincide
    r, dates = series
    res = backtest(r, dates[1 + SPLIT_AT], model="ewma", mean="zero", dates=dates,
                   horizons=(1,))
    assert res.model_name == "ewma" and res.dist == "normal"
    one = res.accuracy[0]
    np.testing.assert_allclose(one.forecasts["model"], one.forecasts["ewma"], rtol=1e-10)


def test_periodic_refits(series):
    r, dates = series
    fixed = backtest(r, dates[1 + SPLIT_AT], model="garch", dist="normal", dates=dates,
                     horizons=(1,))
    refit = backtest(r, dates[1 + SPLIT_AT], model="garch", dist="normal", dates=dates,
                     refit_every=500, horizons=(1,))
    assert len(refit.refit_dates) == 2 and refit.refit_models == ("garch", "garch")
    # identical up to the first refit, different after
    np.testing.assert_allclose(refit.sigma_out[:500], fixed.sigma_out[:500], rtol=1e-12)
    assert not np.allclose(refit.sigma_out[500:], fixed.sigma_out[500:], rtol=1e-6)


def test_bad_input_is_one_line_input_error(series):
    r, dates = series
    with pytest.raises(InputError, match="outside the history"):
        backtest(r, "2040-01-01", model="garch", dist="normal", dates=dates)
    with pytest.raises(InputError, match="at least 250"):
        backtest(r, dates[100], model="garch", dist="normal", dates=dates)
    bad = r.copy()
    bad[700] = np.nan
    with pytest.raises(InputError, match="missing"):
        backtest(bad, dates[1 + SPLIT_AT], model="garch", dist="normal", dates=dates)
    with pytest.raises(InputError, match="not a date"):
        backtest(r, "last year", dates=dates)


# ------------------------------------------------------------- command line
def _write_history(path, r, dates):
    close = 1000 * np.exp(np.concatenate([[0.0], np.cumsum(r)]))
    lines = ["date,close"] + [f"{d},{c:.6f}" for d, c in zip(dates, close)]
    path.write_text("\n".join(lines) + "\n")


def test_cli_json_and_errors(series, tmp_path, capsys):
    from optbench.cli import main
    r, dates = series
    hist = tmp_path / "history.csv"
    _write_history(hist, r[:1200], dates[:1201])
    split = str(dates[900])
    assert main(["backtest", str(hist), "--split", split, "--model", "garch",
                 "--dist", "normal", "--format", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["split"] == split and doc["n_in"] == 900 and doc["n_out"] == 300
    assert doc["model"]["name"] == "garch" and "caution" in doc
    assert [v["level"] for v in doc["var"]] == [0.99, 0.975]
    # default split: hold out min(504, n - 250) returns
    assert main(["backtest", str(hist), "--model", "garch", "--dist", "normal",
                 "-f", "csv"]) == 0
    rows = capsys.readouterr().out.strip().splitlines()
    assert rows[0].startswith("date,return,sigma_daily,z") and len(rows) == 1 + 504
    # table renders every section
    assert main(["backtest", str(hist), "--split", split, "--model", "garch",
                 "--dist", "normal"]) == 0
    text = capsys.readouterr().out
    for heading in ("Days outside +-3 sigma", "VaR exceedances", "Largest surprises",
                    "Variance-forecast accuracy", "not advice"):
        assert heading in text
    # bad split: one line on stderr, exit 2, no traceback
    for bad in ("1999-01-01", str(dates[100])):
        assert main(["backtest", str(hist), "--split", bad]) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and err[0].startswith("optbench: error: --split")
    # a history too short to split: one line naming the file
    short = tmp_path / "short.csv"
    _write_history(short, r[:260], dates[:261])
    assert main(["backtest", str(short)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "short.csv: only 260 returns" in err[0]
    # a bad option value is an argparse error: exit 2, one line
    with pytest.raises(SystemExit) as stop:
        main(["backtest", str(hist), "--k", "-1"])
    assert stop.value.code == 2
    assert len(capsys.readouterr().err.strip().splitlines()) == 1
