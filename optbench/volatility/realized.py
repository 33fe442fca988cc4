"""Realized (historical) volatility estimators over rolling windows.

Close-to-close, Parkinson (1980), Garman-Klass (1980), Rogers-Satchell (1991) and
Yang-Zhang (2000). Every estimator takes price arrays (one value per trading day,
oldest first) and a window length in trading days and returns an array the length
of the prices: entry i is the annualised volatility (decimal, 0.215 = 21.5%) over
the ``window`` days ending on day i, NaN where the window does not fit yet.
Annualisation is by 252 trading days a year.

All rolling sums are vectorised (differences of cumulative sums); there are no
Python loops over days.
"""
from __future__ import annotations

from types import SimpleNamespace

import numpy as np

from optbench.errors import InputError

__all__ = [
    "ESTIMATORS", "TRADING_DAYS_PER_YEAR", "PARKINSON_CONSTANT",
    "close_to_close", "parkinson", "garman_klass", "rogers_satchell", "yang_zhang",
    "realized_vol", "trailing_realized_vol",
]

TRADING_DAYS_PER_YEAR = 252
#: 1 / (4 ln 2): Parkinson's (1980) scaling of the squared log range
PARKINSON_CONSTANT = 1.0 / (4.0 * np.log(2.0))
#: estimator name -> whether it needs open/high/low
ESTIMATORS = {"close": False, "parkinson": True, "garman_klass": True,
              "rogers_satchell": True, "yang_zhang": True}


def _prices(name: str, x) -> np.ndarray:
    a = np.asarray(x, dtype=float)
    if a.ndim != 1:
        raise ValueError(f"{name} prices must be one-dimensional")
    if np.any(a[np.isfinite(a)] <= 0):
        raise ValueError(f"{name} prices must be positive")
    return a


def _window(window: int, n: int) -> int:
    w = int(window)
    if w < 1:
        raise ValueError(f"window must be at least 1 trading day, got {window}")
    return w


def _window_sums(x: np.ndarray, w: int) -> np.ndarray:
    """Sums of x over each run of w consecutive values (cumulative-sum differences);
    NaN for a window that holds a missing value, without spoiling later windows."""
    bad = ~np.isfinite(x)
    c = np.concatenate([[0.0], np.cumsum(np.where(bad, 0.0, x))])
    out = c[w:] - c[:-w]
    if bad.any():
        nb = np.concatenate([[0], np.cumsum(bad)])
        out[(nb[w:] - nb[:-w]) > 0] = np.nan
    return out


def _rolling_mean(x: np.ndarray, w: int, offset: int = 0) -> np.ndarray:
    """Mean of x over windows of w values, placed at the window's last index + offset
    in an output of length len(x) + offset; NaN elsewhere."""
    out = np.full(x.size + offset, np.nan)
    if x.size >= w:
        out[w - 1 + offset:] = _window_sums(x, w) / w
    return out


def _rolling_var(x: np.ndarray, w: int, offset: int = 0, demean: bool = True) -> np.ndarray:
    """Sample variance (ddof 1 if demeaned, else the mean square) over windows of w
    values, placed as in :func:`_rolling_mean`.

    Uses sum((x - m)^2) = S2 - S1^2 / w on values centred by their overall mean
    first; the relative error stays below 1e-8 of the volatility on 20,000 days
    whose vol ranges from 5% to 80% (tested); negative round-off is clipped to zero."""
    out = np.full(x.size + offset, np.nan)
    if demean and w < 2:
        raise ValueError("a demeaned variance needs a window of at least 2")
    if x.size >= w:
        if demean:
            xc = x - np.nanmean(x)
            s1 = _window_sums(xc, w)
            s2 = _window_sums(xc * xc, w)
            out[w - 1 + offset:] = np.maximum(s2 - s1 * s1 / w, 0.0) / (w - 1)
        else:
            out[w - 1 + offset:] = _window_sums(x * x, w) / w
    return out


def _annualise(var_daily: np.ndarray, periods: int) -> np.ndarray:
    return np.sqrt(np.maximum(var_daily, 0.0) * periods)


def close_to_close(close, window: int, *, demean: bool = True,
                   periods_per_year: int = TRADING_DAYS_PER_YEAR) -> np.ndarray:
    """Close-to-close volatility over the last ``window`` daily log returns.

    Notes
    -----
    r_t = ln(C_t / C_{t-1});
    sigma^2 = 252 / (n - 1) * sum (r_t - rbar)^2 (demeaned, the sample variance), or
    sigma^2 = 252 / n * sum r_t^2 (``demean=False``). A window of n returns needs
    n + 1 closes, so entry i uses closes i-n .. i. Hull, *Options, Futures, and
    Other Derivatives*, "Estimating volatility from historical data".
    """
    c = _prices("close", close)
    w = _window(window, c.size)
    r = np.diff(np.log(c))
    return _annualise(_rolling_var(r, w, offset=1, demean=demean), periods_per_year)


def parkinson(high, low, window: int, *,
              periods_per_year: int = TRADING_DAYS_PER_YEAR) -> np.ndarray:
    """Parkinson (1980) high-low range volatility.

    Notes
    -----
    sigma^2 = 252 / (4 n ln 2) * sum (ln H_t / L_t)^2. Parkinson, M. (1980), "The
    extreme value method for estimating the variance of the rate of return",
    Journal of Business 53(1), 61-65. Assumes no drift and no opening jump.
    """
    h, l = _prices("high", high), _prices("low", low)
    w = _window(window, h.size)
    u = np.log(h / l)
    return _annualise(PARKINSON_CONSTANT * _rolling_mean(u * u, w), periods_per_year)


def garman_klass(open_, high, low, close, window: int, *,
                 periods_per_year: int = TRADING_DAYS_PER_YEAR) -> np.ndarray:
    """Garman-Klass (1980) open-high-low-close volatility.

    Notes
    -----
    sigma^2 = 252 / n * sum [ 0.5 (ln H/L)^2 - (2 ln 2 - 1) (ln C/O)^2 ], the
    practical form of Garman & Klass's best analytic scale-invariant estimator
    (their eq. for sigma-hat_5). Garman, M. B. and Klass, M. J. (1980), "On the
    estimation of security price volatilities from historical data", Journal of
    Business 53(1), 67-78. Assumes no drift; ignores the overnight jump.
    """
    o, h, l, c = (_prices(n, x) for n, x in
                  (("open", open_), ("high", high), ("low", low), ("close", close)))
    w = _window(window, c.size)
    hl = np.log(h / l)
    co = np.log(c / o)
    daily = 0.5 * hl * hl - (2.0 * np.log(2.0) - 1.0) * co * co
    return _annualise(_rolling_mean(daily, w), periods_per_year)


def _rs_terms(o, h, l, c) -> np.ndarray:
    return np.log(h / c) * np.log(h / o) + np.log(l / c) * np.log(l / o)


def rogers_satchell(open_, high, low, close, window: int, *,
                    periods_per_year: int = TRADING_DAYS_PER_YEAR) -> np.ndarray:
    """Rogers-Satchell (1991) drift-independent range volatility.

    Notes
    -----
    sigma^2 = 252 / n * sum [ ln(H/C) ln(H/O) + ln(L/C) ln(L/O) ]. Rogers, L. C. G.
    and Satchell, S. E. (1991), "Estimating variance from high, low and closing
    prices", Annals of Applied Probability 1(4), 504-512.
    """
    o, h, l, c = (_prices(n, x) for n, x in
                  (("open", open_), ("high", high), ("low", low), ("close", close)))
    w = _window(window, c.size)
    return _annualise(_rolling_mean(_rs_terms(o, h, l, c), w), periods_per_year)


def yang_zhang(open_, high, low, close, window: int, *,
               periods_per_year: int = TRADING_DAYS_PER_YEAR) -> np.ndarray:
    """Yang-Zhang (2000) volatility: overnight, open-to-close and Rogers-Satchell parts.

    Notes
    -----
    With overnight returns o_t = ln(O_t / C_{t-1}) and open-to-close returns
    c_t = ln(C_t / O_t) over n days,
    sigma^2 = sigma_o^2 + k sigma_c^2 + (1 - k) sigma_RS^2,
    k = 0.34 / (1.34 + (n + 1) / (n - 1)), where sigma_o^2 and sigma_c^2 are sample
    variances (ddof 1) and sigma_RS^2 is the Rogers-Satchell mean; annualised by 252.
    Entry i uses days i-n+1 .. i and the close of day i-n. Yang, D. and Zhang, Q.
    (2000), "Drift-independent volatility estimation based on high, low, open, and
    close prices", Journal of Business 73(3), 477-491.
    """
    o, h, l, c = (_prices(n, x) for n, x in
                  (("open", open_), ("high", high), ("low", low), ("close", close)))
    w = _window(window, c.size)
    if w < 2:
        raise ValueError("Yang-Zhang needs a window of at least 2 days")
    overnight = np.log(o[1:] / c[:-1])
    open_close = np.log(c[1:] / o[1:])
    rs = _rs_terms(o[1:], h[1:], l[1:], c[1:])
    k = 0.34 / (1.34 + (w + 1.0) / (w - 1.0))
    var = (_rolling_var(overnight, w, offset=1) + k * _rolling_var(open_close, w, offset=1)
           + (1.0 - k) * _rolling_mean(rs, w, offset=1))
    return _annualise(var, periods_per_year)


def realized_vol(history, window: int, estimator: str = "close", **kwargs) -> np.ndarray:
    """Rolling realized volatility of a price history by estimator name.

    Parameters
    ----------
    history : PriceHistory
        Anything with ``close`` and, for the range estimators, ``open``, ``high``,
        ``low`` arrays (``None`` where the file has no such column) and ``source``.
    window : int
        Window length in trading days.
    estimator : {"close", "parkinson", "garman_klass", "rogers_satchell", "yang_zhang"}

    Returns
    -------
    ndarray
        Annualised volatility (decimal) per day of ``history.close``.

    Raises
    ------
    InputError
        If the estimator needs open/high/low the history does not have, or the
        prices are not positive.
    """
    source = getattr(history, "source", "history")
    if estimator not in ESTIMATORS:
        raise InputError("--estimator", f"unknown realized-vol estimator {estimator!r} "
                         f"(one of {', '.join(ESTIMATORS)})")
    try:
        if estimator == "close":
            return close_to_close(history.close, window, **kwargs)
        fields = {n: getattr(history, n, None) for n in ("open", "high", "low")}
        missing = [n for n, v in fields.items() if v is None]
        if missing:
            raise InputError(source, f"the {estimator} estimator needs columns "
                             f"{', '.join(missing)}, which the history does not have")
        if estimator == "parkinson":
            return parkinson(fields["high"], fields["low"], window, **kwargs)
        func = {"garman_klass": garman_klass, "rogers_satchell": rogers_satchell,
                "yang_zhang": yang_zhang}[estimator]
        return func(fields["open"], fields["high"], fields["low"], history.close,
                    window, **kwargs)
    except ValueError as err:
        if isinstance(err, InputError):
            raise
        raise InputError(source, str(err)) from None


def trailing_realized_vol(history, windows, estimator: str = "close") -> np.ndarray:
    """Realized volatility over the last ``w`` trading days for each window length
    (e.g. each expiry's horizon), ending on the last day of the history.

    Returns an array like ``windows`` (NaN where the history is shorter than the
    window). The loop is over distinct window lengths, not over days.
    """
    win = np.asarray(windows, dtype=int)
    out = np.full(win.shape, np.nan)
    for w in np.unique(win[win >= 2]):
        out[win == w] = realized_vol(_tail(history, int(w) + 1), int(w), estimator)[-1]
    return out


def _tail(history, m: int) -> SimpleNamespace:
    """The last m days of a price history's arrays (only what the estimators read)."""
    def cut(x):
        return None if x is None else np.asarray(x, dtype=float)[-m:]
    return SimpleNamespace(source=getattr(history, "source", "history"),
                           close=cut(history.close),
                           **{n: cut(getattr(history, n, None)) for n in ("open", "high", "low")})
