r"""Black-Scholes-Merton and Black-76 sensitivities, vectorised.

Notes
-----
With :math:`F = S e^{(r-q)t}`, :math:`D = e^{-rt}`,
:math:`d_{1,2} = [\ln(F/K) \pm \sigma^2 t/2]/(\sigma\sqrt t)`, :math:`\theta = \pm1`
for calls/puts (Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed.,
§2.1 "generalised Black-Scholes" greeks; Hull, *Options, Futures, and Other
Derivatives*, ch. 19):

* delta :math:`= \theta e^{-qt} N(\theta d_1)` (per 1.00 of spot);
* gamma :math:`= e^{-qt}\varphi(d_1)/(S\sigma\sqrt t)`;
* vega :math:`= S e^{-qt}\varphi(d_1)\sqrt t` per 1.00 of volatility
  (``vega_per_vol_point`` is that times 0.01);
* theta :math:`= -S e^{-qt}\varphi(d_1)\sigma/(2\sqrt t) - \theta r K e^{-rt}N(\theta d_2)
  + \theta q S e^{-qt} N(\theta d_1)` per year of calendar time
  (``theta_per_day`` divides by 365, optbench's calendar-day convention);
* rho :math:`= \theta K t e^{-rt} N(\theta d_2)` per 1.00 of rate
  (``rho_per_point`` is per 0.01).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from optbench.pricing.special import ndtr

from optbench.pricing.bsm import as_flag_array, as_float_array, black_price

_INV_SQRT_2PI = 0.3989422804014326779399460599343818684758586311649


@dataclass(frozen=True)
class Greeks:
    """Price and sensitivities of European options (arrays of the broadcast shape).

    Units: ``delta`` per 1.00 of the underlying (spot for :func:`bsm_greeks`, the
    forward for :func:`black_greeks`); ``gamma`` per 1.00 squared; ``vega`` per 1.00
    of volatility and ``vega_per_vol_point`` per 0.01; ``theta_per_year`` and
    ``theta_per_day`` (calendar, /365) in price per unit of time passing;
    ``rho`` per 1.00 of rate and ``rho_per_point`` per 0.01.
    """

    price: np.ndarray
    delta: np.ndarray
    gamma: np.ndarray
    vega: np.ndarray
    vega_per_vol_point: np.ndarray
    theta_per_year: np.ndarray
    theta_per_day: np.ndarray
    rho: np.ndarray
    rho_per_point: np.ndarray


def _arrays(*values):
    return [as_float_array(v) for v in values]


def bsm_greeks(S, K, t, r, q, sigma, is_call) -> Greeks:
    """Black-Scholes-Merton price and greeks with a continuous dividend yield.

    Parameters
    ----------
    S, K : spot and strike; t : years to expiry (calendar days / 365);
    r, q : continuously compounded rate and yield (decimals);
    sigma : annualised volatility (decimal); is_call : bool array.

    Returns
    -------
    Greeks : see the class for units. Where ``sigma*sqrt(t) <= 0`` the option is at
        its intrinsic value: delta is the exercise indicator times e^{-qt}, gamma and
        vega are zero.

    Examples
    --------
    Hull, *Options, Futures, and Other Derivatives*, Example 19.1 (S = 49, K = 50,
    r = 5%, sigma = 20%, T = 20 weeks): call delta 0.522.

    >>> g = bsm_greeks(49, 50, 20 / 52, 0.05, 0.0, 0.20, True)
    >>> round(float(g.delta), 3)
    0.522
    """
    S, K, t, r, q, sigma = _arrays(S, K, t, r, q, sigma)
    is_call = as_flag_array(is_call)
    S, K, t, r, q, sigma, is_call = np.broadcast_arrays(S, K, t, r, q, sigma, is_call)
    theta_sign = np.where(is_call, 1.0, -1.0)
    sqrt_t = np.sqrt(np.maximum(t, 0.0))
    sd = sigma * sqrt_t
    dq = np.exp(-q * t)
    dr = np.exp(-r * t)
    live = sd > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        d1 = (np.log(S / K) + (r - q) * t) / sd + 0.5 * sd
        d2 = d1 - sd
        pdf = _INV_SQRT_2PI * np.exp(-0.5 * d1 * d1)
        nd1 = ndtr(theta_sign * d1)
        nd2 = ndtr(theta_sign * d2)
        delta = theta_sign * dq * nd1
        gamma = dq * pdf / (S * sd)
        vega = S * dq * pdf * sqrt_t
        theta_y = (-S * dq * pdf * sigma / (2 * sqrt_t) - theta_sign * r * K * dr * nd2
                   + theta_sign * q * S * dq * nd1)
        rho = theta_sign * K * t * dr * nd2
    # at zero total volatility the option is worth its discounted forward intrinsic value
    F = S * np.exp((r - q) * t)
    itm = np.where(is_call, F > K, F < K)
    delta = np.where(live, delta, np.where(itm, theta_sign * dq, 0.0))
    gamma = np.where(live, gamma, 0.0)
    vega = np.where(live, vega, 0.0)
    theta0 = np.where(itm, theta_sign * (q * S * dq - r * K * dr), 0.0)
    theta_y = np.where(live, theta_y, theta0)
    rho = np.where(live, rho, np.where(itm, theta_sign * K * t * dr, 0.0))
    price = black_price(F, K, t, dr, sigma, is_call)
    return Greeks(price=price, delta=delta, gamma=gamma, vega=vega,
                  vega_per_vol_point=0.01 * vega, theta_per_year=theta_y,
                  theta_per_day=theta_y / 365.0, rho=rho, rho_per_point=0.01 * rho)


def black_greeks(F, K, t, r, sigma, is_call) -> Greeks:
    """Black-76 price and greeks of an option on a forward/futures price ``F``.

    Black (1976): the BSM greeks with the yield equal to the rate (cost of carry
    b = 0, Haug §1.1.2), so delta and gamma are per 1.00 of the forward and rho is the
    sensitivity to the discount rate alone (``-t * price``).

    >>> g = black_greeks(100.0, 100.0, 0.5, 0.05, 0.25, True)
    >>> round(float(g.rho), 6) == round(float(-0.5 * g.price), 6)
    True
    """
    F, K, t, r, sigma = _arrays(F, K, t, r, sigma)
    g = bsm_greeks(F, K, t, r, r, sigma, is_call)
    # with q = r, d(price)/dr would also move the yield; keep the discount-only rho
    rho = -t * g.price
    return Greeks(price=g.price, delta=g.delta, gamma=g.gamma, vega=g.vega,
                  vega_per_vol_point=g.vega_per_vol_point,
                  theta_per_year=g.theta_per_year, theta_per_day=g.theta_per_day,
                  rho=rho, rho_per_point=0.01 * rho)
