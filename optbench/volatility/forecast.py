"""Forecast term structures of GARCH-family models (closed forms and exact recursions).

All functions are vectorised: parameters may be arrays (one value per parameter
draw) and horizons an array of trading-day counts, broadcast against each other.
Variances are daily, in decimal-return units; volatilities are annualised with
252 trading days a year.
"""
from __future__ import annotations

import math

import numpy as np
from scipy.special import ndtr

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


def egarch_log_mgf(c, alpha, gamma, dist: str, z_sample: np.ndarray | None = None):
    """``ln E[exp(c g(z))]`` for the EGARCH news term ``g(z) = alpha (|z| - sqrt(2/pi))
    + gamma z``, z a unit-variance innovation.

    Notes
    -----
    Normal z: ``E[exp(a|z| + b z)] = e^{(a+b)^2/2} Phi(a+b) + e^{(a-b)^2/2} Phi(a-b)``
    with ``a = c alpha``, ``b = c gamma`` (Nelson 1991, the moment formula behind
    the EGARCH variance forecast). For the Student-t the exact expectation is
    infinite (the t has no moment-generating function), so the expectation is
    replaced by the average over a fixed sample ``z_sample`` of t draws: the same
    quantity a simulation forecast estimates.
    """
    c = np.asarray(c, dtype=float)
    a = c * alpha
    b = c * gamma
    if dist == "normal" or z_sample is None:
        ap, am = a + b, a - b
        val = np.exp(0.5 * ap * ap) * ndtr(ap) + np.exp(0.5 * am * am) * ndtr(am)
        return np.log(val) - a * SQRT_2_OVER_PI
    z = np.asarray(z_sample, dtype=float)
    shock = (a[..., None] * (np.abs(z) - SQRT_2_OVER_PI) + b[..., None] * z)
    m = shock.max(axis=-1, keepdims=True)
    return (m + np.log(np.mean(np.exp(shock - m), axis=-1, keepdims=True)))[..., 0]


def egarch_forecast_variance(last_variance: float, omega: float, alpha: float,
                             gamma: float, beta: float, horizon: int, dist: str,
                             z_sample: np.ndarray | None = None) -> np.ndarray:
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
    log_m = egarch_log_mgf(beta ** np.arange(max(horizon - 1, 0)), alpha, gamma, dist,
                           z_sample)
    cum = np.concatenate([[0.0], np.cumsum(log_m)])
    return np.exp(drift + bk * math.log(last_variance) + cum)


def annualise(avg_daily_variance) -> np.ndarray:
    """``sqrt(252 * average daily variance)``: annualised decimal volatility."""
    return np.sqrt(TRADING_DAYS_PER_YEAR * np.asarray(avg_daily_variance, dtype=float))
