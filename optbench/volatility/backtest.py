"""Out-of-sample check of a volatility model: fit to a split date, hold the
parameters, roll one-day-ahead forecasts through the rest of the history.

The result says how often returns fell outside +-k sigma against what a normal
and the fitted distribution expect, how the one-day Value-at-Risk fared (Kupiec
1995, Christoffersen 1998, Basel Committee 1996 zones), what the standardised
residuals look like, which days surprised the model most, and how the model's
variance forecasts over several horizons compare with EWMA and trailing realized
variance (QLIKE and MSE, Patton 2011; Mincer-Zarnowitz regressions).
"""
from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field

import numpy as np

from optbench.errors import InputError
from optbench.volatility import evaluation as ev

__all__ = ["BacktestResult", "VarCheck", "HorizonAccuracy", "backtest",
           "MIN_IN_SAMPLE", "MIN_OUT_OF_SAMPLE", "EWMA_LAMBDA", "TRAILING_WINDOW"]

MIN_IN_SAMPLE = 250          # returns needed before the split to fit a model
MIN_OUT_OF_SAMPLE = 20       # returns needed after the split to judge it
EWMA_LAMBDA = 0.94           # RiskMetrics (1996) daily decay, common practice
TRAILING_WINDOW = 21         # trailing realized-variance benchmark, trading days
BASEL_WINDOW = 250           # Basel Committee (1996) backtesting window, trading days
N_SURPRISES = 10


# --------------------------------------------------------------------------- results
@dataclass(frozen=True)
class VarCheck:
    """One-day Value-at-Risk exceedances at one confidence level.

    The VaR of day t is the loss beyond the return quantile
    mu + sigma_t * q_{1-level} of the fitted innovation distribution; an
    exceedance is a return below that quantile (a loss on a long position).
    """

    level: float
    quantile_z: float            # standardised innovation quantile q_{1-level}
    exceedances: int
    expected: float              # n_out * (1 - level)
    kupiec: ev.LRTest
    independence: ev.LRTest
    conditional_coverage: ev.LRTest
    zone: str                    # over the whole out-of-sample period
    windows: tuple               # per 250-day block: dicts start, end, exceedances, zone
    hits: np.ndarray = field(repr=False, default=None)  # bool per out-of-sample day

    def to_dict(self) -> dict:
        return {
            "level": self.level, "quantile_z": self.quantile_z,
            "exceedances": self.exceedances, "expected": self.expected,
            "kupiec_lr": self.kupiec.statistic, "kupiec_p": self.kupiec.p_value,
            "christoffersen_lr_ind": self.independence.statistic,
            "christoffersen_p_ind": self.independence.p_value,
            "christoffersen_lr_cc": self.conditional_coverage.statistic,
            "christoffersen_p_cc": self.conditional_coverage.p_value,
            "zone": self.zone, "windows": list(self.windows),
        }


@dataclass(frozen=True)
class HorizonAccuracy:
    """Variance-forecast accuracy over one horizon (trading days), by forecaster.

    ``losses`` maps forecaster name ("model", "ewma", "trailing_21") to a dict
    with ``qlike``, ``mse`` (daily decimal variance units, squared) and the
    Mincer-Zarnowitz ``mz``. ``origin_dates``, ``realized`` and ``forecasts``
    keep the series behind them (forecast made at the close of the origin date
    for the next h returns).
    """

    horizon: int
    n: int
    losses: dict
    origin_dates: np.ndarray = field(repr=False, default=None)  # last day known
    realized: np.ndarray = field(repr=False, default=None)      # sum of next h r^2
    forecasts: dict = field(repr=False, default_factory=dict)   # name -> h-day variance

    def to_dict(self) -> dict:
        return {"horizon": self.horizon, "n": self.n,
                "forecasters": {k: {"qlike": v["qlike"], "mse": v["mse"],
                                    "mz": v["mz"].to_dict()}
                                for k, v in self.losses.items()}}


@dataclass(frozen=True)
class BacktestResult:
    """Everything the out-of-sample check found; views read it and recompute nothing.

    Daily volatilities (``sigma_*``) are decimals per day (not annualised);
    ``std_resid_out`` are z_t = (r_t - mu) / sigma_t.
    """

    split: _dt.date
    n_in: int
    n_out: int
    band_k: float
    model: dict                       # the (first) fit's to_dict()
    model_name: str
    dist: str
    nu: float | None
    mu: float
    dates_out: np.ndarray             # datetime64[D], out-of-sample return dates
    returns_out: np.ndarray
    sigma_out: np.ndarray             # one-day-ahead daily vol forecasts
    std_resid_out: np.ndarray
    outside_band: int
    expected_normal: float
    expected_model: float
    var: tuple                        # of VarCheck
    residuals: ev.ResidualStats
    histogram: ev.Histogram
    surprises: tuple                  # dicts date, z, return, sigma, largest |z| first
    accuracy: tuple                   # of HorizonAccuracy
    refit_every: int | None
    refit_dates: tuple                # dates (ISO) the parameters were re-estimated after
    refit_models: tuple               # model each refit chose (differs with model="auto")
    fallback_reason: str | None
    # what a price chart with +-k sigma bands needs (all days with a return); given
    # bare returns instead of a PriceHistory, close is NaN and the bands are simple
    # returns exp(mu +- k sigma) - 1
    chart_dates: np.ndarray = field(repr=False)    # datetime64[D], return dates
    chart_close: np.ndarray = field(repr=False)    # close on those dates
    chart_sigma: np.ndarray = field(repr=False)    # one-day-ahead daily vol, in and out
    chart_band_low: np.ndarray = field(repr=False)  # prev close * exp(mu - k sigma)
    chart_band_high: np.ndarray = field(repr=False)  # prev close * exp(mu + k sigma)
    source: str = "history"
    issues: tuple = ()                # what the history loader reported (gaps, fixes)

    @property
    def outside_band_dates(self) -> np.ndarray:
        return self.dates_out[np.abs(self.std_resid_out) > self.band_k]

    def to_dict(self) -> dict:
        return {
            "source": self.source,
            "split": self.split.isoformat(),
            "n_in": self.n_in,
            "n_out": self.n_out,
            "first_out": _iso(self.dates_out[0]),
            "last_out": _iso(self.dates_out[-1]),
            "band_k": self.band_k,
            "outside_band": self.outside_band,
            "expected_normal": self.expected_normal,
            "expected_model": self.expected_model,
            "var": [v.to_dict() for v in self.var],
            "residuals": {k: v for k, v in self.residuals.to_dict().items()},
            "histogram": self.histogram.to_dict(),
            "surprises": list(self.surprises),
            "accuracy": [a.to_dict() for a in self.accuracy],
            "refit_every": self.refit_every,
            "refit_dates": list(self.refit_dates),
            "refit_models": list(self.refit_models),
            "model": self.model,
            "fallback_reason": self.fallback_reason,
            "history_issues": list(self.issues),
        }


def _iso(d) -> str:
    return str(np.datetime64(d, "D"))


# --------------------------------------------------------------------------- helpers
def _as_day(value, source: str = "--split") -> np.datetime64:
    if isinstance(value, np.datetime64):
        return value.astype("datetime64[D]")
    if isinstance(value, _dt.datetime):
        return np.datetime64(value.date(), "D")
    if isinstance(value, _dt.date):
        return np.datetime64(value, "D")
    try:
        return np.datetime64(_dt.date.fromisoformat(str(value).strip()), "D")
    except ValueError:
        raise InputError(source, f"not a date (YYYY-MM-DD): {value!r}") from None


def _inputs(history, dates):
    """(source, return dates, returns, close aligned with returns or None, prev close)."""
    if hasattr(history, "returns") and hasattr(history, "dates"):
        source = str(getattr(history, "source", "history"))
        r = np.asarray(history.returns, dtype=float)
        d = np.asarray(history.dates).astype("datetime64[D]")
        close = np.asarray(history.close, dtype=float)
        if d.size == r.size + 1:
            return source, d[1:], r, close[1:], close[:-1]
        if d.size == r.size:
            return source, d, r, close, np.concatenate([[np.nan], close[:-1]])
        raise InputError(source, "returns and dates do not line up")
    if dates is None:
        raise InputError("backtest", "give a PriceHistory, or returns together with dates")
    r = np.asarray(history, dtype=float)
    d = np.asarray(dates).astype("datetime64[D]")
    if d.size == r.size + 1:
        d = d[1:]
    if d.size != r.size:
        raise InputError("dates", f"{d.size} dates for {r.size} returns")
    return "returns", d, r, None, None


def _fit(returns, model, dist, mean):
    """fit_garch, or the EWMA benchmark (nothing to estimate) for model="ewma"."""
    from optbench.volatility.garch import fit_garch, fix_garch
    if model == "ewma":
        return fix_garch(returns, {}, "ewma", "normal", mean)
    return fit_garch(returns, model=model, dist=dist, mean=mean)


def _innovation(fit) -> tuple[str, float | None]:
    dist = getattr(fit, "dist", "normal")
    nu = fit.params.get("nu") if dist == "t" else None
    return dist, (float(nu) if nu is not None else None)


def _sum_forecast(fit, s2_next: np.ndarray, h: int, dist: str, nu) -> np.ndarray:
    """Expected sum of the next h daily variances from each origin, given the
    one-day-ahead variance s2_next at that origin (vectorised over origins).

    GARCH / GJR: sum_{k=1..h} [V_L + p^{k-1}(s2 - V_L)] = h V_L + (s2 - V_L)(1 - p^h)/(1 - p)
    (Hull's GARCH(1,1) forecast, persistence p). EWMA: h s2. EGARCH: Nelson's (1991)
    moment recursion E[s2_{T+k}] = c_k s2^{beta^{k-1}}, with c_k from the model's
    forecast module.
    """
    name = fit.model
    p = fit.params
    if name in ("garch", "gjr"):
        pers = p["alpha"] + p["beta"] + (0.5 * p.get("gamma", 0.0) if name == "gjr" else 0.0)
        if pers >= 1.0 - 1e-12:
            return h * s2_next
        vl = p["omega"] / (1.0 - pers)
        return h * vl + (s2_next - vl) * (1.0 - pers ** h) / (1.0 - pers)
    if name == "egarch":
        from optbench.volatility.forecast import egarch_forecast_variance
        z_sample = None
        if dist == "t":  # the t has no moment-generating function: average over draws
            from optbench.volatility.distributions import std_t_draws
            z = std_t_draws(np.random.default_rng(20000), nu, 10_000)
            z_sample = np.concatenate([z, -z])
        c = egarch_forecast_variance(1.0, p["omega"], p["alpha"], p["gamma"], p["beta"],
                                     h, dist, z_sample)
        bk = p["beta"] ** np.arange(h)
        return (np.asarray(s2_next)[:, None] ** bk[None, :]) @ c
    return h * s2_next


def _ewma(returns: np.ndarray, lam: float, backcast: float) -> np.ndarray:
    """EWMA one-day-ahead variances for every return and the day after (n + 1)."""
    from optbench.volatility.recursions import ewma_variance
    s2 = ewma_variance(returns, lam, backcast)
    return np.append(s2, lam * s2[-1] + (1.0 - lam) * returns[-1] ** 2)


def _accuracy(fit_sums, r: np.ndarray, rdates: np.ndarray, ewma_s2: np.ndarray,
              n_in: int, horizons) -> tuple:
    n = r.size
    r2 = r * r
    csum = np.concatenate([[0.0], np.cumsum(r2)])
    out = []
    for h in horizons:
        h = int(h)
        origins = np.arange(n_in, n - h + 1)        # forecasts for returns i .. i+h-1
        if origins.size < 3:
            continue
        realized = csum[origins + h] - csum[origins]
        trailing = h * (csum[origins] - csum[origins - TRAILING_WINDOW]) / TRAILING_WINDOW
        forecasts = {
            "model": fit_sums(origins, h),   # E[sum r^2] = sum E[sigma^2] + h mu^2
            "ewma": h * ewma_s2[origins],
            f"trailing_{TRAILING_WINDOW}": trailing,
        }
        losses = {name: {"qlike": ev.qlike_loss(realized, f), "mse": ev.mse_loss(realized, f),
                         "mz": ev.mincer_zarnowitz(realized, f)}
                  for name, f in forecasts.items()}
        out.append(HorizonAccuracy(h, int(origins.size), losses, rdates[origins - 1],
                                   realized, forecasts))
    return tuple(out)


def _zone_windows(hits: np.ndarray, dates: np.ndarray, level: float) -> tuple:
    blocks = []
    for start in range(0, hits.size - BASEL_WINDOW + 1, BASEL_WINDOW):
        x = int(hits[start:start + BASEL_WINDOW].sum())
        blocks.append({"start": _iso(dates[start]),
                       "end": _iso(dates[start + BASEL_WINDOW - 1]),
                       "exceedances": x,
                       "zone": ev.basel_zone(x, BASEL_WINDOW, level)})
    return tuple(blocks)


# --------------------------------------------------------------------------- main
def backtest(history, split, model: str = "auto", dist: str = "t",
             mean: str = "constant", k: float = 3.0, var_levels=(0.99, 0.975),
             refit_every: int | None = None, horizons=(1, 5, 21), *,
             dates=None) -> BacktestResult:
    """Fit to a split date, hold the parameters and check one-day-ahead forecasts
    on every later day.

    Parameters
    ----------
    history : PriceHistory or array of daily log returns (decimals)
        With an array, give ``dates`` too (one per return, or one per price).
    split : date or ISO string
        Last day of the estimation sample; returns dated after it are out of sample.
    model, dist, mean : str
        Passed to :func:`optbench.volatility.garch.fit_garch`; ``model="ewma"``
        checks the EWMA (lambda 0.94) variance with normal innovations instead.
    k : float
        Width of the band in standard deviations (3 by default).
    var_levels : sequence of float
        One-day VaR confidence levels (0.99, 0.975).
    refit_every : int, optional
        Re-estimate the parameters on all returns so far every this many
        out-of-sample days (e.g. 21 or 63); by default they stay fixed.
    horizons : sequence of int
        Forecast horizons, trading days, for the accuracy comparison.

    Returns
    -------
    BacktestResult

    Raises
    ------
    InputError
        Split outside the history, fewer than 250 returns before it or fewer than
        20 after it, missing returns, or an unusable setting.

    Notes
    -----
    With parameters held, sigma^2_t comes from the model's recursion on the
    actual returns up to t-1, z_t = (r_t - mu) / sigma_t. Band count: days with
    |z_t| > k, against n 2 (1 - Phi(k)) under a normal and n 2 (1 - F(k)) under
    the fitted innovation (standardised t: F(z) = T_nu(z sqrt(nu/(nu-2)))). VaR
    exceedances: z_t < q_{1-level}, tested with Kupiec (1995) and Christoffersen
    (1998); zones by the Basel Committee (1996) binomial rule.
    """
    source, rdates, r, close, prev_close = _inputs(history, dates)
    if r.size == 0:
        raise InputError(source, "no returns")
    bad = ~np.isfinite(r)
    if bad.any():
        raise InputError(source, f"{int(bad.sum())} returns are missing or not finite "
                                 f"(first on {_iso(rdates[bad][0])}); fix or remove those rows")
    k = float(k)
    if not np.isfinite(k) or k <= 0:
        raise InputError("--k", f"the band width must be a positive number, got {k}")
    levels = tuple(float(x) for x in var_levels)
    if any(not 0.5 < x < 1.0 for x in levels):
        raise InputError("var_levels", f"VaR levels must lie between 0.5 and 1, got {levels}")
    if refit_every is not None and int(refit_every) < 1:
        raise InputError("--refit-every", f"must be a positive number of days, got {refit_every}")
    horizons = tuple(int(h) for h in horizons)
    if any(h < 1 for h in horizons):
        raise InputError("horizons", f"horizons must be positive trading days, got {horizons}")

    split_day = _as_day(split)
    first, last = rdates[0], rdates[-1]
    if not first <= split_day < last:
        raise InputError("--split", f"{_iso(split_day)} is outside the history "
                                    f"({_iso(first)} to {_iso(last)}); choose a date "
                                    f"before its last day")
    n_in = int(np.searchsorted(rdates, split_day, side="right"))
    n = r.size
    n_out = n - n_in
    if n_in < MIN_IN_SAMPLE:
        raise InputError("--split", f"only {n_in} returns up to {_iso(split_day)}; the model "
                                    f"needs at least {MIN_IN_SAMPLE} before the split")
    if n_out < MIN_OUT_OF_SAMPLE:
        raise InputError("--split", f"only {n_out} returns after {_iso(split_day)}; the check "
                                    f"needs at least {MIN_OUT_OF_SAMPLE}")
    if np.all(r[:n_in] == r[0]):
        raise InputError(source, "prices are constant before the split: no volatility to model")

    # --- fit, hold, roll (optionally refit on an expanding window)
    fit0 = _fit(r[:n_in], model, dist, mean)
    starts = [n_in] if not refit_every else list(range(n_in, n, int(refit_every)))
    s2 = np.empty(n + 1)
    mu_path = np.empty(n)
    s2[:n_in] = np.asarray(fit0.conditional_vol, dtype=float) ** 2
    mu_path[:n_in] = fit0.params.get("mu", 0.0)
    fits = []
    for j, start in enumerate(starts):
        fit = fit0 if j == 0 else _fit(r[:start], model, dist, mean)
        fits.append(fit)
        stop = starts[j + 1] if j + 1 < len(starts) else n
        # held parameters: the recursion continues from the fit's next-day variance
        held = np.asarray(fit.filter(r[start:stop]), dtype=float)
        s2[start:stop] = held[:-1]
        s2[stop] = held[-1]
        mu_path[start:stop] = fit.params.get("mu", 0.0)
    fit_of_day = np.zeros(n, dtype=int)
    for j, start in enumerate(starts):
        fit_of_day[start:] = j

    sigma = np.sqrt(s2[:n])
    z_all = (r - mu_path) / sigma
    dist_name, nu = _innovation(fit0)
    z = z_all[n_in:]
    dout = rdates[n_in:]
    # with refits, each day's band and VaR use the fit in force on that day

    def cdf_of(x):
        out = np.empty(z.size)
        for j, f in enumerate(fits):
            sel = fit_of_day[n_in:] == j
            d_j, nu_j = _innovation(f)
            out[sel] = ev.innovation_cdf(x if np.ndim(x) == 0 else x[sel], d_j, nu_j)
        return out

    def ppf_of(p):
        out = np.empty(z.size)
        for j, f in enumerate(fits):
            sel = fit_of_day[n_in:] == j
            d_j, nu_j = _innovation(f)
            out[sel] = ev.innovation_ppf(p, d_j, nu_j)
        return out

    outside = int(np.count_nonzero(np.abs(z) > k))
    expected_normal = ev.expected_outside_band(n_out, k, "normal")
    expected_model = float(np.sum(2.0 * (1.0 - cdf_of(k))))

    var_checks = []
    for level in levels:
        q = ppf_of(1.0 - level)
        hits = z < q
        x = int(hits.sum())
        var_checks.append(VarCheck(
            level=level, quantile_z=float(q[-1]), exceedances=x, expected=n_out * (1.0 - level),
            kupiec=ev.kupiec_pof(x, n_out, 1.0 - level),
            independence=ev.christoffersen_independence(hits),
            conditional_coverage=ev.christoffersen_conditional_coverage(hits, 1.0 - level),
            zone=ev.basel_zone(x, n_out, level), windows=_zone_windows(hits, dout, level),
            hits=hits))

    stats = ev.residual_stats(z)
    last_dist, last_nu = _innovation(fits[-1])
    hist = ev.residual_histogram(z, last_dist, last_nu)
    order = np.argsort(-np.abs(z), kind="stable")[:N_SURPRISES]
    surprises = tuple({"date": _iso(dout[i]), "z": float(z[i]), "return": float(r[n_in + i]),
                       "sigma": float(sigma[n_in + i])} for i in order)

    # --- accuracy over horizons: model vs EWMA vs trailing realized variance
    def model_sums(origins, h):
        out = np.empty(origins.size)
        which = fit_of_day[np.minimum(origins, n - 1)]
        for j, f in enumerate(fits):
            sel = which == j
            if sel.any():
                mu_j = float(f.params.get("mu", 0.0))
                out[sel] = _sum_forecast(f, s2[origins[sel]], h, *_innovation(f)) + h * mu_j ** 2
        return out

    from optbench.volatility.recursions import backcast_value
    ewma_s2 = _ewma(r, EWMA_LAMBDA, backcast_value(r[:n_in]))
    mu0 = float(fit0.params.get("mu", 0.0))
    accuracy = _accuracy(model_sums, r, rdates, ewma_s2, n_in, horizons)

    # --- chart: price with +-k sigma bands around the previous close
    # a day whose conditional vol is absurd (a degenerate history, flagged by the sanity
    # checks) has no upper band: exp overflows to inf, which the charts leave open
    with np.errstate(over="ignore", invalid="ignore"):
        if close is not None:
            band_low = prev_close * np.exp(mu_path - k * sigma)
            band_high = prev_close * np.exp(mu_path + k * sigma)
            chart_close = close
        else:
            band_low = np.exp(mu_path - k * sigma) - 1.0
            band_high = np.exp(mu_path + k * sigma) - 1.0
            chart_close = np.full(n, np.nan)

    model_dict = fit0.to_dict() if hasattr(fit0, "to_dict") else {
        "name": fit0.model, "dist": dist_name, "params": dict(fit0.params)}
    reasons = [getattr(f, "fallback_reason", None) for f in fits]
    reasons = [x for x in reasons if x]
    return BacktestResult(
        split=split_day.astype(object), n_in=n_in, n_out=n_out, band_k=k,
        model=model_dict, model_name=str(fit0.model), dist=dist_name, nu=nu, mu=mu0,
        dates_out=dout, returns_out=r[n_in:], sigma_out=sigma[n_in:], std_resid_out=z,
        outside_band=outside, expected_normal=expected_normal,
        expected_model=expected_model, var=tuple(var_checks), residuals=stats,
        histogram=hist, surprises=surprises, accuracy=accuracy,
        refit_every=int(refit_every) if refit_every else None,
        refit_dates=tuple(_iso(rdates[s - 1]) for s in starts[1:]),
        refit_models=tuple(str(f.model) for f in fits[1:]),
        fallback_reason="; ".join(dict.fromkeys(reasons)) or None,
        chart_dates=rdates, chart_close=chart_close, chart_sigma=sigma,
        chart_band_low=band_low, chart_band_high=band_high, source=source,
        issues=tuple(str(x) for x in (getattr(history, "issues", None) or ())))
