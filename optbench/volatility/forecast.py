"""Forecast term structures of GARCH-family models (closed forms and exact recursions).

All functions are vectorised: parameters may be arrays (one value per parameter
draw) and horizons an array of trading-day counts, broadcast against each other.
Variances are daily, in decimal-return units; volatilities are annualised with
252 trading days a year.
"""
from __future__ import annotations

import math

import numpy as np
from optbench.pricing.special import ndtr, stdtrit, stdtrit_one_df

from optbench.volatility.recursions import SQRT_2_OVER_PI

TRADING_DAYS_PER_YEAR = 252


def linear_forecast_variance(last_variance, long_run_variance, persistence,
                             horizon: int) -> np.ndarray:
    """Expected daily variances E[sigma^2_{T+k}], k = 1..horizon, GARCH(1,1) or GJR.

    Notes
    -----
    ``E_T[sigma^2_{T+k}] = V_L + p^{k-1} (sigma^2_{T+1} - V_L)`` with
    ``V_L = omega / (1 - p)`` and persistence ``p = alpha + beta`` (GARCH) or
    ``alpha + gamma/2 + beta`` (GJR with symmetric innovations);
    Hull, *Options, Futures, and Other Derivatives*, chapter "Estimating
    volatilities and correlations" (GARCH(1,1) forecasts).
    """
    k = np.arange(horizon)
    p = np.asarray(persistence, dtype=float)[..., None]
    vl = np.asarray(long_run_variance, dtype=float)[..., None]
    s1 = np.asarray(last_variance, dtype=float)[..., None]
    return vl + p ** k * (s1 - vl)


def linear_average_variance(last_variance, long_run_variance, persistence,
                            trading_days) -> np.ndarray:
    """Average expected daily variance over days 1..T (closed form), GARCH or GJR.

    Notes
    -----
    ``(1/T) sum_{k=1..T} E[sigma^2_{T+k}] = V_L + (sigma^2_{T+1} - V_L)
    (1 - p^T) / ((1 - p) T)``, the discrete sum of the geometric forecast decay.
    Broadcasts parameters (e.g. shape (draws, 1)) against horizons (shape (h,)).
    """
    T = np.maximum(np.asarray(trading_days, dtype=float), 1.0)
    p = np.asarray(persistence, dtype=float)
    vl = np.asarray(long_run_variance, dtype=float)
    s1 = np.asarray(last_variance, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        factor = np.where(np.abs(1.0 - p) > 1e-12, (1.0 - p ** T) / ((1.0 - p) * T), 1.0)
    return vl + (s1 - vl) * factor


def _geometric_sums(persistence, T):
    """``S = sum_{k<T} p^k`` and ``D = sum_{k<T} sum_{j<k} p^j`` for ``0 <= p <= 1``,
    accurate to rounding for ``p`` anywhere up to and including one.

    Notes
    -----
    With ``d = 1 - p`` and ``l = ln p = log1p(-d)``: ``S = -expm1(T l) / d`` and
    ``D = (T - S) / d = [expm1(T l) - T expm1(l)] / d^2``. The bracket cancels
    when ``|T l|`` is small; there it is summed as its series
    ``sum_{m>=2} (T^m - T) l^m / m!`` (the two exponential series subtracted term by
    term), which has no cancellation. At ``p = 1`` exactly, ``S = T`` and
    ``D = T (T - 1) / 2``.
    """
    p = np.asarray(persistence, dtype=float)
    T = np.asarray(T, dtype=float)
    d = 1.0 - p
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        lg = np.log1p(-np.minimum(d, 1.0))
        x = T * lg
        S = np.where(d == 0.0, T, -np.expm1(x) / d)
        direct = (np.expm1(x) - T * np.expm1(lg)) / (d * d)
        # series of the bracket for |T l| < 0.5: 40 terms reach rounding (summed for
        # those elements only: each element's terms are its own)
        small = np.abs(x) < 0.5
        D = direct
        if np.any(small):
            shape = np.broadcast(x, T, d).shape
            i = np.broadcast_to(small, shape)
            xs = np.broadcast_to(x, shape)[i]
            ls = np.broadcast_to(lg, shape)[i]
            Ts = np.broadcast_to(T, shape)[i]
            ds = np.broadcast_to(d, shape)[i]
            # rows: (T l)^m / m! and l^m / m!, stepped together (the same floats)
            step = np.stack([xs, ls])
            ab = step.copy()
            a, b = ab
            acc = np.zeros_like(xs)
            term = np.empty_like(xs)
            mul, div, sub = np.multiply, np.divide, np.subtract
            for m in range(2, 42):
                mul(ab, step, ab)
                div(ab, m, ab)
                mul(Ts, b, term)
                sub(a, term, term)
                acc += term
            D = np.array(np.broadcast_to(direct, shape))
            D[i] = acc / (ds * ds)
        D = np.where(d == 0.0, 0.5 * T * (T - 1.0), D)
        # far from one (including p = 0, where ln p = -inf) the plain forms are exact
        far = d >= 0.5
        if np.any(far):
            pT = p ** T
            S_plain = (1.0 - pT) / d
            S = np.where(far, S_plain, S)
            D = np.where(far, (T - S_plain) / d, D)
    return S, D


def linear_average_variance_from_omega(last_variance, omega, persistence,
                                       trading_days) -> np.ndarray:
    """Average expected daily variance over days 1..T, GARCH or GJR, written with
    ``omega`` instead of the long-run variance so that it holds (and stays exact)
    for persistence up to and including one.

    Notes
    -----
    ``E_T[sigma^2_{T+k}] = omega sum_{j<k-1} p^j + p^{k-1} sigma^2_{T+1}``, so
    ``(1/T) sum_{k=1..T} E_T[sigma^2_{T+k}] = (sigma^2_{T+1} S + omega D) / T`` with
    the geometric sums ``S`` and ``D`` of :func:`_geometric_sums` (stable as
    ``p -> 1``; equals :func:`linear_average_variance` for ``p < 1``).
    """
    T = np.maximum(np.asarray(trading_days, dtype=float), 1.0)
    S, D = _geometric_sums(persistence, T)
    return (np.asarray(last_variance, dtype=float) * S
            + np.asarray(omega, dtype=float) * D) / T


def linear_forecast_variance_from_omega(last_variance, omega, persistence,
                                        horizon: int) -> np.ndarray:
    """Expected daily variances for steps 1..horizon, ``omega sum_{j<k-1} p^j +
    p^{k-1} sigma^2_{T+1}``, stable for persistence up to and including one
    (``sum_{j<k} p^j = -expm1(k ln p) / (1 - p)``, ``k`` at ``p = 1``)."""
    k = np.arange(horizon, dtype=float)
    p = np.asarray(persistence, dtype=float)[..., None]
    d = 1.0 - p
    with np.errstate(divide="ignore", invalid="ignore"):
        lg = np.log1p(-np.minimum(d, 1.0))
        geo = np.where(d == 0.0, k, -np.expm1(k * lg) / d)
        pk = np.exp(k * lg)
        far = d >= 0.5   # plain forms (also p = 0, where ln p = -inf)
        if np.any(far):
            pk = np.where(far, p ** k, pk)
            geo = np.where(far, (1.0 - p ** k) / d, geo)
    return (np.asarray(omega, dtype=float)[..., None] * geo
            + pk * np.asarray(last_variance, dtype=float)[..., None])


def hull_term_structure(trading_days, omega: float, alpha: float, beta: float,
                        current_variance: float) -> np.ndarray:
    """Hull's continuous approximation of the GARCH(1,1) volatility term structure.

    Notes
    -----
    ``sigma(T)^2 = 252 [V_L + (1 - e^{-aT}) / (aT) (V(0) - V_L)]`` with
    ``a = ln(1 / (alpha + beta))`` and ``V_L = omega / (1 - alpha - beta)``
    (Hull, *Options, Futures, and Other Derivatives*, chapter "Estimating
    volatilities and correlations", volatility term structures). It replaces the
    discrete sum over days by an integral; :func:`linear_average_variance` is the
    exact discrete average optbench uses. Returns annualised volatilities.
    """
    T = np.asarray(trading_days, dtype=float)
    p = alpha + beta
    a = math.log(1.0 / p)
    vl = omega / (1.0 - p)
    var = TRADING_DAYS_PER_YEAR * (vl + (1.0 - np.exp(-a * T)) / (a * T)
                                   * (current_variance - vl))
    return np.sqrt(var)


#: How :func:`std_t_quantile_grid` solves a grid for one ``nu``. True (the default):
#: :func:`stdtrit_one_df` (Halley steps for one df; 1.0 ms instead of 4.3 ms for 256
#: points, 1.4 instead of 6.9 for 2,000, this machine), which agrees with the general
#: solver within 2e-14 relative for nu <= 100 (6e-15 at the screen's fitted nu; 2e-13
#: beyond 100), tests/volatility/test_t_table.py: the EGARCH-t forecasts and bands
#: moved in their last bits (within 7.5e-15 relative on the benchmark universe's rows).
#: False: the general solver :func:`stdtrit` (Newton steps) for every grid.
QUANTILE_GRID_ONE_DF = True


def std_t_quantile_grid(nu, n_points: int = 2000) -> np.ndarray:
    """Mid-point quantiles ``Q((i - 1/2) / N)`` of the unit-variance Student-t,
    i = 1..N (``nu`` may be an array: one grid per row; see
    :data:`QUANTILE_GRID_ONE_DF`)."""
    nu = np.asarray(nu, dtype=float)[..., None]
    p = (np.arange(n_points) + 0.5) / n_points
    if QUANTILE_GRID_ONE_DF and nu.size == 1:
        q = stdtrit_one_df(float(nu.flat[0]), p).reshape(nu.shape[:-1] + (n_points,))
    else:
        q = stdtrit(nu, p)
    return q * np.sqrt((nu - 2.0) / nu)


def egarch_log_mgf(c, alpha, gamma, dist: str, z_grid: np.ndarray | None = None):
    """``ln E[exp(c g(z))]`` for the EGARCH news term ``g(z) = alpha (|z| - sqrt(2/pi))
    + gamma z``, z a unit-variance innovation.

    Parameters
    ----------
    c, alpha, gamma : float or ndarray (broadcast together)
    dist : {"normal", "t"}
    z_grid : ndarray, shape (..., N), for ``dist="t"``
        Quantile grid of the innovation (see :func:`std_t_quantile_grid`); leading
        axes broadcast with ``c``.

    Notes
    -----
    Normal z: ``E[exp(a|z| + b z)] = e^{(a+b)^2/2} Phi(a+b) + e^{(a-b)^2/2} Phi(a-b)``
    with ``a = c alpha``, ``b = c gamma`` (the moment formula behind Nelson's 1991
    EGARCH variance forecast). For the Student-t the exact expectation is infinite
    (the t has no moment-generating function); optbench takes the expectation over
    the t truncated at its ``1/(2N)`` and ``1 - 1/(2N)`` quantiles, i.e. the mean over
    a mid-point quantile grid of N points. This is the finite quantity a simulation
    forecast with a comparable number of draws estimates; say so when quoting it.
    """
    c = np.asarray(c, dtype=float)
    a = c * alpha
    b = c * gamma
    if dist == "normal" or z_grid is None:
        ap, am = a + b, a - b
        val = np.exp(0.5 * ap * ap) * ndtr(ap) + np.exp(0.5 * am * am) * ndtr(am)
        return np.log(val) - a * SQRT_2_OVER_PI
    z = np.asarray(z_grid, dtype=float)
    if z.ndim >= 1 and all(s == 1 for s in z.shape[:-1]):
        return _log_mean_exp_grid(np.asarray(a), np.asarray(b), z)
    shock = (np.asarray(a)[..., None] * (np.abs(z) - SQRT_2_OVER_PI)
             + np.asarray(b)[..., None] * z)
    m = shock.max(axis=-1, keepdims=True)
    return (m + np.log(np.mean(np.exp(shock - m), axis=-1, keepdims=True)))[..., 0]


#: elements (rows x grid points) of one block of :func:`_log_mean_exp_grid`: its two
#: scratch arrays stay in the processor's cache
_GRID_BLOCK_ELEMENTS = 1 << 14


def _log_mean_exp_grid(a: np.ndarray, b: np.ndarray, z: np.ndarray) -> np.ndarray:
    """``ln mean_j exp(a (|z_j| - sqrt(2/pi)) + b z_j)`` for one quantile grid ``z``
    (shape (1, .., 1, N)) and every element of ``a`` and ``b`` (broadcast): the
    figures of the broadcast form in :func:`egarch_log_mgf` to the last bit (the
    same products, sum, maximum, exponential and row sums; only a block of rows at
    a time, in reused scratch arrays, instead of one (rows x N) array per step).
    """
    shape = np.broadcast_shapes(a.shape, b.shape, z.shape[:-1])
    zz = z.reshape(-1)
    n = zz.size
    av = np.broadcast_to(a, shape).reshape(-1)
    bv = np.broadcast_to(b, shape).reshape(-1)
    rows = av.size
    absk = np.abs(zz) - SQRT_2_OVER_PI
    step = max(1, min(rows, _GRID_BLOCK_ELEMENTS // max(n, 1)))
    shock = np.empty((step, n))
    tmp = np.empty((step, n))
    out = np.empty(rows)
    for r0 in range(0, rows, step):
        r1 = min(rows, r0 + step)
        s, t = shock[:r1 - r0], tmp[:r1 - r0]
        np.multiply(av[r0:r1, None], absk, out=s)
        np.multiply(bv[r0:r1, None], zz, out=t)
        s += t
        m = s.max(axis=1)
        s -= m[:, None]
        np.exp(s, out=s)
        mean = np.add.reduce(s, axis=1)
        mean /= n
        np.log(mean, out=mean)
        np.add(m, mean, out=out[r0:r1])
    return out.reshape(shape)


def egarch_average_variance(last_variance, omega, alpha, gamma, beta, trading_days,
                            dist: str, z_grid=None) -> np.ndarray:
    """Average of the EGARCH expected daily variances over days 1..T, vectorised
    over parameter draws (leading axis) — see :func:`egarch_forecast_variance`.

    Parameters are arrays of shape (d,) (or scalars); ``z_grid`` (d, N) for the t.
    Returns shape (d, len(trading_days)).
    """
    T = np.maximum(np.atleast_1d(np.asarray(trading_days, dtype=int)), 1)
    h = int(T.max())
    s1 = np.atleast_1d(np.asarray(last_variance, dtype=float))[:, None]
    om, al, ga, be = (np.atleast_1d(np.asarray(x, dtype=float))[:, None]
                      for x in (omega, alpha, gamma, beta))
    k = np.arange(h)
    bk = be ** k
    with np.errstate(divide="ignore", invalid="ignore"):
        drift = np.where(np.abs(1 - be) > 1e-12, om * (1 - bk) / (1 - be), om * k)
    c = be ** np.arange(max(h - 1, 0))
    if dist == "t" and z_grid is not None:
        # ln E[exp(c g(z))] is smooth in c on [0, 1]: evaluate it on 33 nodes per
        # draw and interpolate linearly at c = beta^j (error ~ 1e-6 in ln M)
        zg = np.asarray(z_grid, dtype=float)
        if zg.ndim == 1:
            zg = zg[None, :]
        nodes = np.linspace(0.0, 1.0, 33)
        table = egarch_log_mgf(nodes[None, :], al, ga, dist, zg[:, None, :])
        pos = np.clip(c, 0.0, 1.0) * 32.0
        i0 = np.minimum(pos.astype(int), 31)
        w = pos - i0
        log_m = (np.take_along_axis(table, i0, axis=1) * (1 - w)
                 + np.take_along_axis(table, i0 + 1, axis=1) * w)
    else:
        log_m = egarch_log_mgf(c, al, ga, "normal")
    cum = np.concatenate([np.zeros((log_m.shape[0], 1)), np.cumsum(log_m, axis=1)], axis=1)
    v = np.exp(drift + bk * np.log(s1) + cum)
    return np.cumsum(v, axis=1)[:, T - 1] / T


def egarch_forecast_variance(last_variance: float, omega: float, alpha: float,
                             gamma: float, beta: float, horizon: int, dist: str,
                             z_grid: np.ndarray | None = None) -> np.ndarray:
    """Expected daily variances E[sigma^2_{T+k}], k = 1..horizon, EGARCH(1,1).

    Notes
    -----
    Iterating ``ln sigma^2_{t+1} = omega + g(z_t) + beta ln sigma^2_t`` gives
    ``E[sigma^2_{T+k}] = exp(omega (1 - beta^{k-1}) / (1 - beta)
    + beta^{k-1} ln sigma^2_{T+1}) prod_{j=0}^{k-2} E[exp(beta^j g(z))]``
    (Nelson 1991), evaluated with :func:`egarch_log_mgf`.
    """
    k = np.arange(horizon)
    bk = beta ** k
    if abs(1.0 - beta) > 1e-12:
        drift = omega * (1.0 - bk) / (1.0 - beta)
    else:
        drift = omega * k
    c = beta ** np.arange(max(horizon - 1, 0))
    if dist == "t" and z_grid is not None:
        # exact grid expectation while c >= 1e-3; below, the second-order cumulant
        # expansion ln E[exp(c g)] = c^2 Var(g) / 2 + O(c^3) (E g = 0), with Var(g)
        # over the same grid, keeps long horizons cheap
        z = np.asarray(z_grid, dtype=float)
        g = alpha * (np.abs(z) - SQRT_2_OVER_PI) + gamma * z
        big = c >= 1e-3
        log_m = np.empty_like(c)
        log_m[big] = egarch_log_mgf(c[big], alpha, gamma, dist, z_grid)
        log_m[~big] = 0.5 * c[~big] ** 2 * np.var(g) + c[~big] * np.mean(g)
    else:
        log_m = egarch_log_mgf(c, alpha, gamma, dist, z_grid)
    cum = np.concatenate([[0.0], np.cumsum(log_m)])
    return np.exp(drift + bk * math.log(last_variance) + cum)


def annualise(avg_daily_variance) -> np.ndarray:
    """``sqrt(252 * average daily variance)``: annualised decimal volatility."""
    return np.sqrt(TRADING_DAYS_PER_YEAR * np.asarray(avg_daily_variance, dtype=float))



#: days of one block of :func:`refilter_variance` (its scratch arrays, days x draws,
#: stay in the processor's cache)
_REFILTER_DAYS = 16


def refilter_variance(model: str, returns, params: dict, s2) -> np.ndarray:
    """sigma^2 for the day after ``returns``, filtered from ``s2`` (the variance of the
    first return's day) with each parameter draw: ``params`` holds arrays over the
    draws (``mu`` optional), ``s2`` one value per draw. The step of the forecast band
    that re-filters the recent returns with every draw.

    Notes
    -----
    GARCH and GJR: ``sigma^2_{t+1} = (omega + alpha e_t^2) + beta sigma^2_t
    + gamma 1[e_t < 0] e_t^2`` with ``e_t = y_t - mu`` (Bollerslev 1986; Glosten,
    Jagannathan and Runkle 1993), added in the order of
    :meth:`optbench.volatility.specs.VolSpec.next_variance`, so the floats are that
    function's; the terms without ``sigma^2_t`` are formed for a few days at a time,
    leaving a multiply and two additions a day (one on a day whose residual is
    non-negative in every draw: the leverage term is +-0 there, and adding it to a
    positive variance changes no bit). EGARCH and EWMA step
    ``next_variance`` day by day.
    """
    from optbench.volatility.specs import get_spec

    y = np.asarray(returns, dtype=float)
    mu = params.get("mu", 0.0)
    if model == "egarch":
        return _refilter_egarch(y, mu, params, s2)
    if model not in ("garch", "gjr"):
        spec = get_spec(model)
        for t in range(y.shape[0]):
            s2 = spec.next_variance(y[t] - mu, s2, params)
        return s2
    omega, alpha, beta = params["omega"], params["alpha"], params["beta"]
    gamma = params["gamma"] if model == "gjr" else None
    s2 = np.array(s2, dtype=float)
    shape = (min(_REFILTER_DAYS, max(y.shape[0], 1)), s2.shape[0])
    e, e2, base = np.empty(shape), np.empty(shape), np.empty(shape)
    if gamma is not None:
        # which days have a negative residual in every draw, in some, in none: the
        # leverage term gamma 1[e < 0] e^2 is gamma e^2 on the first, masked on the
        # second and +-0 on the last (adding it there is a no-op on the positive
        # variances, so it is skipped)
        mu_arr = np.asarray(mu, dtype=float)
        all_neg = y < mu_arr.min(initial=np.inf)
        some_neg = y < mu_arr.max(initial=-np.inf)
        mixed = some_neg & ~all_neg
        lev = np.empty(shape)
    mul, add = np.multiply, np.add     # (positional outputs: the quickest calls)
    for t0 in range(0, y.shape[0], shape[0]):
        n = min(shape[0], y.shape[0] - t0)
        E, E2, B = e[:n], e2[:n], base[:n]
        np.subtract(y[t0:t0 + n, None], mu, out=E)
        mul(E, E, E2)
        mul(alpha, E2, B)
        B += omega                              # omega + alpha e^2
        if gamma is None:
            for k in range(n):
                mul(beta, s2, s2)
                add(s2, B[k], s2)
            continue
        L = lev[:n]
        mul(E2, gamma, L)                       # gamma e^2 where e < 0
        for k in range(n):
            mul(beta, s2, s2)
            add(s2, B[k], s2)
            if some_neg[t0 + k]:
                if mixed[t0 + k]:
                    np.copyto(L[k], 0.0, where=E[k] >= 0.0)
                add(s2, L[k], s2)
    return s2


def _refilter_egarch(y: np.ndarray, mu, params: dict, s2) -> np.ndarray:
    """:func:`refilter_variance` for EGARCH: ``ln sigma^2_{t+1} = omega + alpha (|z_t| -
    sqrt(2/pi)) + gamma z_t + beta ln sigma^2_t``, ``z_t = e_t / sigma_t``, capped at
    ``exp(30)`` (Nelson 1991), with the operations of
    :meth:`optbench.volatility.specs.VolSpec.next_variance` in its order (the same
    floats), in place in reused arrays; the residuals a block of days at a time."""
    omega, alpha, gamma, beta = (params[k] for k in ("omega", "alpha", "gamma", "beta"))
    s2 = np.array(s2, dtype=float)
    shape = (min(_REFILTER_DAYS, max(y.shape[0], 1)), s2.shape[0])
    e = np.empty(shape)
    z, w = np.empty(s2.shape), np.empty(s2.shape)
    mul, add = np.multiply, np.add
    for t0 in range(0, y.shape[0], shape[0]):
        n = min(shape[0], y.shape[0] - t0)
        E = e[:n]
        np.subtract(y[t0:t0 + n, None], mu, out=E)
        for k in range(n):
            np.sqrt(s2, out=z)
            np.divide(E[k], z, out=z)            # z = e / sigma
            np.abs(z, out=w)
            np.subtract(w, SQRT_2_OVER_PI, out=w)
            mul(alpha, w, w)
            add(omega, w, w)                     # omega + alpha (|z| - sqrt(2/pi))
            mul(gamma, z, z)
            add(w, z, w)                         # ... + gamma z
            np.log(s2, out=z)
            mul(beta, z, z)
            add(w, z, w)                         # ... + beta ln sigma^2
            np.minimum(w, 30.0, out=w)
            np.exp(w, out=s2)
    return s2
