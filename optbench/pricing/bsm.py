"""Black-Scholes-Merton prices for European options on an asset with a continuous
dividend yield.

Notes
-----
With forward :math:`F = S e^{(r-q)t}` and discount factor :math:`D = e^{-rt}`,

.. math::

    C = D\\,[F N(d_1) - K N(d_2)], \\qquad P = D\\,[K N(-d_2) - F N(-d_1)],

    d_{1,2} = \\frac{\\ln(F/K) \\pm \\tfrac12 \\sigma^2 t}{\\sigma\\sqrt t}.

Merton (1973); Hull, *Options, Futures, and Other Derivatives*, ch. 15 and 17;
Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., §1.1.6 (generalised
Black-Scholes with cost of carry b = r - q).
"""
from __future__ import annotations

import numpy as np
from optbench.pricing.special import ndtr

ArrayLike = np.ndarray | float | int


def as_float_array(x: ArrayLike, name: str = "input") -> np.ndarray:
    """``x`` as a float array; text (or anything not numeric) is a ``TypeError``
    naming the argument rather than a silent conversion."""
    arr = np.asarray(x)
    if arr.dtype.kind in "biuf":
        return arr.astype(float, copy=False)
    if arr.dtype.kind == "O":
        try:
            if not all(isinstance(v, (int, float, np.number)) and not isinstance(v, bool)
                       or v is None for v in arr.ravel()):
                raise TypeError
            return np.array([np.nan if v is None else float(v) for v in arr.ravel()],
                            dtype=float).reshape(arr.shape)
        except TypeError:
            pass
    raise TypeError(f"{name} must be numeric, got values of type {arr.dtype}")


def as_flag_array(is_call) -> np.ndarray:
    """``is_call`` as a bool array: booleans, or 0/1 numbers; text such as "put" is a
    ``TypeError`` (numpy would silently read any non-empty string as True)."""
    arr = np.asarray(is_call)
    if arr.dtype.kind == "b":
        return arr
    if arr.dtype.kind in "iuf" or arr.dtype.kind == "O":
        try:
            num = arr.astype(float)
        except (TypeError, ValueError):
            num = None
        if num is not None:
            if not np.all((num == 0) | (num == 1)):
                raise ValueError("is_call must be boolean (True for calls, False for puts)")
            return num.astype(bool)
    raise TypeError(f"is_call must be boolean, got values of type {arr.dtype}")


def _as_float(x: ArrayLike) -> np.ndarray:
    return as_float_array(x)


def black_price(F: ArrayLike, K: ArrayLike, t: ArrayLike, D: ArrayLike,
                sigma: ArrayLike, is_call: ArrayLike) -> np.ndarray:
    """Black-76 price of a European option on a forward ``F`` with discount ``D``.

    Broadcasts over all arguments. At ``sigma * sqrt(t) == 0`` the price is the
    discounted intrinsic value ``D * max(±(F - K), 0)``.
    """
    F, K, t, D, sigma = map(_as_float, (F, K, t, D, sigma))
    is_call = as_flag_array(is_call)
    sd = sigma * np.sqrt(np.maximum(t, 0.0))
    with np.errstate(divide="ignore", invalid="ignore"):
        d1 = np.log(F / K) / sd + 0.5 * sd
        d2 = d1 - sd
        call = D * (F * ndtr(d1) - K * ndtr(d2))
        put = D * (K * ndtr(-d2) - F * ndtr(-d1))
    price = np.where(is_call, call, put)
    intrinsic = D * np.maximum(np.where(is_call, F - K, K - F), 0.0)
    price = np.where(sd > 0, price, intrinsic)
    # call and put prices are bounded below by their discounted intrinsic value
    return np.maximum(price, np.where(sd > 0, 0.0, intrinsic))


def bsm_price(S: ArrayLike, K: ArrayLike, t: ArrayLike, r: ArrayLike, q: ArrayLike,
              sigma: ArrayLike, is_call: ArrayLike, style: str = "european") -> np.ndarray:
    """Black-Scholes-Merton price; broadcasts over every argument.

    Parameters
    ----------
    S, K : spot and strike.
    t : time to expiry in years (calendar days / 365 in optbench).
    r, q : continuously compounded rate and dividend yield, decimals.
    sigma : volatility, annualised decimal (0.20 = 20%).
    is_call : bool or array of bool.
    style : ``"european"`` or ``"american"``.

    Returns
    -------
    ndarray (a 0-d array for scalar input).

    Examples
    --------
    Hull, *Options, Futures, and Other Derivatives*, Example 15.6: S = 42, K = 40,
    r = 10%, sigma = 20%, T = 0.5 gives c = 4.76 and p = 0.81.

    >>> round(float(bsm_price(42, 40, 0.5, 0.1, 0.0, 0.2, True)), 2)
    4.76
    >>> round(float(bsm_price(42, 40, 0.5, 0.1, 0.0, 0.2, False)), 2)
    0.81
    """
    style = str(style).lower()
    if style == "american":
        from optbench.pricing.american import american_price
        return american_price(S, K, t, r, q, sigma, is_call)
    if style != "european":
        raise ValueError(f"style must be 'european' or 'american', not {style!r}")
    S, K, t, r, q = (as_float_array(v, n) for v, n in zip((S, K, t, r, q),
                                                          ("S", "K", "t", "r", "q")))
    F = S * np.exp((r - q) * t)
    D = np.exp(-r * t)
    return black_price(F, K, t, D, sigma, is_call)
