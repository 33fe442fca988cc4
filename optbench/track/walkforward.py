"""The walk-forward replay: the verdict each past day would have given, and the
realized vol that followed.

For every date of an implied-vol history the volatility model is fitted only on
the returns up to that date, forecasts the average vol to that row's expiry with
its band, and gives the verdict it would have given; then the realized vol over
the trading days that followed, up to the expiry, is read from the price history
where the history reaches that far.

Notes
-----
**Refits.** The model is estimated (:func:`optbench.volatility.garch.fit_garch`) on
the first usable date and again on the first date at least ``refit_every`` trading
days (history rows) later, always on every return up to that date (an expanding
window). Between refits the parameters are held and the conditional variance is
filtered forward over the new returns (:meth:`GarchFit.filter`), so each day's
forecast starts from that day's own state — nothing later than the day is used.

**Forecast.** :math:`\\hat\\sigma = \\sqrt{252\\,\\tfrac1h\\sum_{k\\le h}E_t[\\sigma^2_{t+k}]}`
over the ``h`` trading days from the day after the date to the expiry (weekdays less
the holiday list), the same average-variance forecast as ``optbench compare``.

**Band.** At each refit the fit's parameter-uncertainty band
(:meth:`GarchFit.forecast_band`) is computed for the horizons of its block and held
*relative to the forecast* (low/forecast and high/forecast per horizon) until the
next refit: each day's band is its own forecast times those ratios.

**Verdict.** The comparison's rule (:func:`optbench.analysis.results.verdict_for`):
rich above the band, cheap below it, fair inside.

**P(realized > implied).** At each refit the model is simulated ``n_paths`` paths
from the refit day's state; for each horizon ``h`` the simulated realized variances
:math:`RV_h = \\tfrac{252}{h}\\sum_{k\\le h} r_k^2` are divided by their mean. A day in
the block with forecast :math:`\\hat\\sigma` then gets
:math:`P = \\Pr[RV_h/\\overline{RV_h} > \\sigma_{imp}^2/\\hat\\sigma^2]`: the simulated
distribution's shape at the refit, scaled to the day's own expected variance.

**Realized vol.** :math:`\\sqrt{\\tfrac{252}{m}\\sum r_k^2}` over the ``m`` history
returns dated after the date up to and including the expiry (close to close, not
demeaned); only where the history's last date is on or after the expiry.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from optbench.analysis.results import VERDICTS
from optbench.volatility.garch import MIN_RETURNS

DEFAULT_REFIT_EVERY = 21
DEFAULT_N_PATHS = 1000
DEFAULT_BAND = (0.05, 0.95)
#: tenor groups (calendar days) for rows that gave an expiry instead of a tenor
STANDARD_TENORS = (7, 14, 30, 61, 91, 122, 182, 273, 365, 547, 730)

OBSERVATION_COLUMNS = ("date", "tenor", "tenor_days", "expiry", "trading_days", "atm_iv",
                       "iv_25d_put", "iv_25d_call", "forecast_vol", "forecast_low",
                       "forecast_high", "verdict", "iv_minus_forecast",
                       "prob_realized_above_iv", "realized_vol", "realized_days",
                       "checked", "refit_date", "line")


@dataclass(frozen=True, eq=False)
class WalkForward:
    """The replay, one row per usable implied-vol observation.

    ``observations`` has :data:`OBSERVATION_COLUMNS` (vols as decimals; ``tenor`` is
    the row's tenor group in calendar days; ``checked`` says whether the history
    reaches its expiry, and then ``realized_vol`` is set). ``refits`` has one row
    per estimation: ``date``, ``n_returns``, ``model``, ``converged``,
    ``fallback_reason``, ``persistence`` and the parameters. ``rejected`` lists
    observations that could not be replayed (``line``, ``reason``, ``detail``).
    """

    observations: pd.DataFrame
    refits: pd.DataFrame
    rejected: pd.DataFrame


def tenor_groups(tenor_days: np.ndarray, tenor_given: np.ndarray) -> np.ndarray:
    """A row's tenor group: its tenor when the file gave one, else the nearest of
    :data:`STANDARD_TENORS` to its calendar days to expiry."""
    std = np.asarray(STANDARD_TENORS)
    nearest = std[np.abs(np.log(np.maximum(tenor_days, 1)[:, None] / std[None, :]))
                  .argmin(axis=1)]
    return np.where(tenor_given, tenor_days, nearest).astype(np.int64)


def _refit_points(days: np.ndarray, every: int) -> np.ndarray:
    """Refit indices among the sorted distinct history positions ``days``: the
    first, then the first at least ``every`` positions after the previous one."""
    points = [int(days[0])]
    while True:
        k = np.searchsorted(days, points[-1] + every)
        if k >= days.size:
            return np.asarray(points)
        points.append(int(days[k]))


def _average_variance(fit, s2: np.ndarray, h: np.ndarray) -> np.ndarray:
    """Expected average daily variance over ``h`` days from next-day variances ``s2``
    with the fit's parameters held (elementwise over observations)."""
    from optbench.volatility import forecast as fc

    p = fit.params
    if fit.model in ("garch", "gjr") and fit.persistence < 1:
        pers = fit.persistence
        return fc.linear_average_variance(s2, p["omega"] / (1 - pers), pers, h)
    if fit.model == "egarch":
        hs, inv = np.unique(h, return_inverse=True)
        avg = fc.egarch_average_variance(s2, p["omega"], p["alpha"], p["gamma"], p["beta"],
                                         hs, fit.dist, fit._z_grid)
        return avg[np.arange(s2.size), inv]
    if fit.model in ("garch", "gjr"):      # held non-stationary: the fit's own recursion
        out = np.empty(s2.size)
        for hh in np.unique(h):            # loops over distinct horizons only
            k = np.arange(int(hh))
            pers = fit.persistence
            geo = k if pers == 1 else (pers ** k - 1.0) / (pers - 1.0)
            sel = h == hh
            out[sel] = np.mean(p["omega"] * geo[None, :] + pers ** k[None, :]
                               * s2[sel, None], axis=1)
        return out
    return np.asarray(s2, float).copy()     # EWMA: flat forecast


def walk_forward(returns: np.ndarray, dates: np.ndarray, obs: pd.DataFrame, *,
                 holidays=(), model: str = "gjr", dist: str = "t", mean: str = "constant",
                 refit_every: int = DEFAULT_REFIT_EVERY, band=DEFAULT_BAND,
                 n_paths: int = DEFAULT_N_PATHS, seed: int | None = 7,
                 min_returns: int = MIN_RETURNS, progress=None) -> WalkForward:
    """Replay the verdict on each observation (see the module Notes).

    Parameters
    ----------
    returns : ndarray
        Daily log returns, aligned with ``dates[1:]``.
    dates : ndarray of datetime64[D]
        The price history's dates.
    obs : DataFrame
        ``date``, ``tenor_days``, ``expiry``, ``atm_iv``, ``iv_25d_put``,
        ``iv_25d_call``, ``tenor_given``, ``line`` (as
        :func:`optbench.track.ivfile.load_iv_history` gives).
    holidays : dates skipped by the trading-day calendar.
    model, dist, mean : the volatility model (``auto`` picks by BIC at each refit).
    refit_every : trading days between refits.
    band : quantile levels of the forecast band.
    n_paths, seed : simulation behind ``prob_realized_above_iv``.
    min_returns : returns needed before a date for a fit.
    progress : called with a short text now and then (for views).
    """
    from optbench.volatility.garch import fit_garch

    say = progress or (lambda text: None)
    dates = np.asarray(dates, dtype="datetime64[D]")
    returns = np.asarray(returns, float)
    d = obs["date"].to_numpy().astype("datetime64[D]")
    exp = obs["expiry"].to_numpy().astype("datetime64[D]")
    lines = obs["line"].to_numpy(np.int64)
    pos = np.searchsorted(dates, d)
    on_day = (pos < dates.size) & (dates[np.minimum(pos, dates.size - 1)] == d)
    reason = np.full(len(obs), "", dtype=object)
    detail = np.full(len(obs), "", dtype=object)
    reason[~on_day] = "not_a_history_date"
    detail[~on_day] = "no close on that date in the price history"
    early = on_day & (pos < min_returns)
    reason[early] = "too_early"
    detail[early] = f"fewer than {min_returns} returns before it to fit the model"
    ok = reason == ""
    rejected = pd.DataFrame({"line": lines[~ok], "reason": reason[~ok].astype(str),
                             "detail": detail[~ok].astype(str)})
    o = obs[ok].reset_index(drop=True)
    j = pos[ok].astype(np.int64)
    d, exp, lines = d[ok], exp[ok], lines[ok]
    m = len(o)
    hol = np.array([np.datetime64(str(x)[:10], "D") for x in holidays], dtype="datetime64[D]")
    one = np.timedelta64(1, "D")
    h = np.maximum(np.busday_count(d + one, exp + one, holidays=hol), 1).astype(np.int64)
    iv = o["atm_iv"].to_numpy(float)

    fc_vol = np.full(m, np.nan)
    lo = np.full(m, np.nan)
    hi = np.full(m, np.nan)
    prob = np.full(m, np.nan)
    refit_of = np.zeros(m, np.int64)
    refit_rows = []
    if m:
        points = _refit_points(np.unique(j), int(refit_every))
        block = np.searchsorted(points, j, side="right") - 1
        for b, i0 in enumerate(points):
            sel = np.flatnonzero(block == b)
            say(f"refit {b + 1} of {len(points)} ({dates[i0]})")
            fit = fit_garch(returns[:i0], model=model, dist=dist, mean=mean)
            refit_rows.append({"date": dates[i0], "n_returns": int(i0), "model": fit.model,
                               "converged": bool(fit.converged),
                               "fallback_reason": fit.fallback_reason,
                               "persistence": float(fit.persistence),
                               **{k: float(v) for k, v in fit.params.items()}})
            jj = j[sel]
            s2_path = (fit.filter(returns[i0:int(jj.max())]) if jj.max() > i0
                       else np.array([fit.last_variance]))     # [0]: the day after i0
            s2 = s2_path[jj - i0]
            hh = h[sel]
            avg = _average_variance(fit, s2, hh)
            f = np.sqrt(252.0 * avg)
            hs, inv = np.unique(hh, return_inverse=True)
            point = np.atleast_1d(fit.forecast_vol(hs))
            b_lo, b_hi = fit.forecast_band(hs, level=tuple(band))
            with np.errstate(invalid="ignore", divide="ignore"):
                r_lo = np.atleast_1d(b_lo) / point
                r_hi = np.atleast_1d(b_hi) / point
            fc_vol[sel] = f
            lo[sel] = f * r_lo[inv]
            hi[sel] = f * r_hi[inv]
            refit_of[sel] = i0
            # simulated realized-variance shape per horizon, scaled to each day's mean
            sim = fit.simulate(int(hs.max()), n_paths=int(n_paths),
                               seed=None if seed is None else [int(seed), b])
            cum = np.cumsum(np.square(sim.returns), axis=1)[:, hs - 1] / hs  # (paths, H)
            ratio = np.sort(cum / cum.mean(axis=0), axis=0)
            x = np.square(iv[sel] / f)
            p_sel = np.empty(sel.size)
            for c in range(hs.size):           # loops over distinct horizons only
                rows = inv == c
                p_sel[rows] = 1.0 - np.searchsorted(ratio[:, c], x[rows], side="right") \
                    / ratio.shape[0]
            prob[sel] = p_sel

    # realized vol over the history returns after the date up to the expiry
    csum = np.concatenate([[0.0], np.cumsum(np.square(returns))])
    k_end = np.searchsorted(dates, exp, side="right") - 1
    checked = exp <= dates[-1]
    n_real = np.where(checked, k_end - j, 0)
    checked &= n_real >= 1
    with np.errstate(invalid="ignore", divide="ignore"):
        rv = np.where(checked, np.sqrt(252.0 / np.maximum(n_real, 1)
                                       * (csum[np.minimum(k_end, csum.size - 1)] - csum[j])),
                      np.nan)
    verdict = np.where(~(np.isfinite(iv) & np.isfinite(lo) & np.isfinite(hi)), VERDICTS[3],
                       np.where(iv > hi, "rich", np.where(iv < lo, "cheap", "fair")))
    frame = pd.DataFrame({
        "date": d.astype("datetime64[ns]"),
        "tenor": tenor_groups(o["tenor_days"].to_numpy(np.int64),
                              o["tenor_given"].to_numpy(bool)),
        "tenor_days": o["tenor_days"].to_numpy(np.int64),
        "expiry": exp.astype("datetime64[ns]"), "trading_days": h,
        "atm_iv": iv, "iv_25d_put": o["iv_25d_put"].to_numpy(float),
        "iv_25d_call": o["iv_25d_call"].to_numpy(float),
        "forecast_vol": fc_vol, "forecast_low": lo, "forecast_high": hi,
        "verdict": verdict, "iv_minus_forecast": iv - fc_vol,
        "prob_realized_above_iv": prob, "realized_vol": rv,
        "realized_days": n_real.astype(np.int64), "checked": checked,
        "refit_date": dates[refit_of].astype("datetime64[ns]"), "line": lines})
    refits = pd.DataFrame(refit_rows)
    if len(refits):
        refits["date"] = refits["date"].astype("datetime64[ns]")
    return WalkForward(observations=frame, refits=refits, rejected=rejected)


def overlap_lags(dates: np.ndarray, expiries: np.ndarray) -> int:
    """Newey–West lags for one tenor's observations: the most later observations
    whose date falls inside one observation's window (date, expiry) — for daily
    observations of a tenor of ``h`` trading days, ``h - 1``."""
    d = np.asarray(dates, dtype="datetime64[D]")
    e = np.asarray(expiries, dtype="datetime64[D]")
    if d.size < 2:
        return 0
    order = np.argsort(d, kind="stable")
    d, e = d[order], e[order]
    inside = np.searchsorted(d, e, side="left") - np.arange(d.size) - 1
    return int(max(0, inside.max()))


__all__ = ["WalkForward", "walk_forward", "tenor_groups", "overlap_lags",
           "DEFAULT_REFIT_EVERY", "DEFAULT_N_PATHS", "DEFAULT_BAND", "STANDARD_TENORS",
           "OBSERVATION_COLUMNS"]
