r"""European options on an underlying paying known cash dividends: the escrowed model.

Notes
-----
With cash dividends :math:`D_j` going ex at times :math:`\tau_j` (years from the
quote date) the *escrowed-dividend* model (Hull, *Options, Futures, and Other
Derivatives*, ch. 15 "known dividends" and ch. 17) takes the risky part of the price,
:math:`S^* = S - PV`, with

.. math:: PV(t) = \sum_{0 < \tau_j \le t} D_j\, e^{-r \tau_j},

as the lognormal asset: the forward to an expiry :math:`t` is

.. math:: F = \big(S - PV(t)\big)\, e^{(r - q) t},

(:math:`q` a continuous yield on top of the cash dividends, usually 0), and a
European option is worth Black (1976) on that forward with the volatility of
:math:`S^*`. The model is simple and arbitrage-free but its volatility is that of
:math:`S^*`, not of :math:`S`: with large dividends or long expiries it misprices
strikes away from the money relative to a model in which the stock itself drops by
the dividend at the ex-date (Haug, Haug & Lewis, "Back to basics: a new approach to
the discrete dividend problem", *Wilmott Magazine*, 2003). optbench uses it because
parity forwards, implied vols and the early-exercise tree
(:mod:`optbench.pricing.american_dividends`) then share one consistent forward.
"""
from __future__ import annotations

import numpy as np

from optbench.pricing.bsm import as_flag_array, as_float_array, black_price


def pv_dividends(t, r, times, amounts) -> np.ndarray:
    """Present value at the quote date of the dividends going ex in ``(0, t]``.

    Parameters
    ----------
    t : years to expiry (array, any shape); r : continuously compounded rate
        (broadcasts with ``t``); times, amounts : 1-d arrays of the ex-dividend times
        (years) and cash amounts.

    Returns
    -------
    ndarray of the shape of ``t`` and ``r`` broadcast (0 where no dividend counts).
    """
    t, r = np.broadcast_arrays(as_float_array(t), as_float_array(r))
    times = np.asarray(times, dtype=float).ravel()
    amounts = np.asarray(amounts, dtype=float).ravel()
    out = np.zeros(t.shape)
    for tau, amount in zip(times, amounts):  # a handful of dividends, arrays of options
        if tau > 0:
            out = out + np.where(tau <= t, amount * np.exp(-r * tau), 0.0)
    return out


def escrowed_forward(S, t, r, q, times, amounts) -> np.ndarray:
    r"""Forward :math:`(S - PV(t))\,e^{(r-q)t}`; broadcasts over ``S, t, r, q``."""
    S, t, r, q = np.broadcast_arrays(*(as_float_array(x) for x in (S, t, r, q)))
    return (S - pv_dividends(t, r, times, amounts)) * np.exp((r - q) * t)


def escrowed_european_price(S, K, t, r, q, sigma, is_call, times, amounts) -> np.ndarray:
    """European price in the escrowed-dividend model: Black (1976) on
    :func:`escrowed_forward` with discount :math:`e^{-rt}`; NaN where the dividends'
    present value reaches spot.

    Examples
    --------
    Hull, *Options, Futures, and Other Derivatives* (known-dividend European call,
    example quoted from memory): S = 40, K = 40, r = 9 %, sigma = 30 %, T = 0.5, and
    dividends of 0.50 in two and five months give PV = 0.9742 and a call of 3.67.

    >>> round(float(escrowed_european_price(40, 40, 0.5, 0.09, 0.0, 0.30, True,
    ...                                     [2 / 12, 5 / 12], [0.5, 0.5])), 2)
    3.67
    """
    S, K, t, r, q, sigma = np.broadcast_arrays(*(as_float_array(x)
                                                 for x in (S, K, t, r, q, sigma)))
    F = escrowed_forward(S, t, r, q, times, amounts)
    F = np.where(F > 0, F, np.nan)
    return black_price(F, K, t, np.exp(-r * t), sigma, as_flag_array(is_call))
