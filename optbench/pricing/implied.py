r"""Implied volatilities of European (and American) options, vectorised, with a reason
code wherever no volatility reproduces the price.

Notes
-----
A European price :math:`P` on spot :math:`S` with rate :math:`r` and yield :math:`q`
is first turned into an undiscounted Black price on the forward,
:math:`p = P/D`, :math:`D = e^{-rt}`, :math:`F = S e^{(r-q)t}`. No volatility fits
unless :math:`\max(\theta(F-K), 0) < p < F` (calls, :math:`\theta = 1`) or
:math:`< K` (puts, :math:`\theta=-1`) (Hull, ch. 11 bounds; Black 1976). Inside the
bounds the intrinsic value is subtracted, the remainder normalised by
:math:`\sqrt{FK}` and solved with :func:`optbench.pricing.lets_be_rational.normalised_implied_vol_otm`
(Jäckel, "Let's Be Rational", *Wilmott* 2015), then :math:`\sigma = s/\sqrt t`.
Elements the vectorised solver flags as unconverged are solved again, one at a time,
with vollib's scalar implementation of the same method; they carry ``FALLBACK``.
"""
from __future__ import annotations

import numpy as np

from optbench.pricing.bsm import as_flag_array, as_float_array
from optbench.pricing.lets_be_rational import CHUNK, normalised_implied_vol_otm

#: status codes returned beside each implied volatility
OK = 0
BELOW_INTRINSIC = 1
ABOVE_MAX = 2
BAD_INPUT = 3
EXPIRED = 4
FALLBACK = 5
NOT_CONVERGED = 6

STATUS_NAMES: dict[int, str] = {
    OK: "ok",
    BELOW_INTRINSIC: "below_intrinsic",
    ABOVE_MAX: "above_max",
    BAD_INPUT: "bad_input",
    EXPIRED: "expired",
    FALLBACK: "fallback",
    NOT_CONVERGED: "not_converged",
}


def status_name(status) -> np.ndarray | str:
    """Names for status codes (``"ok"``, ``"below_intrinsic"``, ...); scalar for scalar."""
    arr = np.asarray(status)
    names = np.array([STATUS_NAMES[i] for i in range(len(STATUS_NAMES))], dtype=object)
    out = names[arr.astype(int)]
    return str(out) if arr.ndim == 0 else out


def _numeric(name: str, value) -> np.ndarray:
    return as_float_array(value, name)


def _flags(is_call) -> np.ndarray:
    return as_flag_array(is_call)


def _broadcast(names, values):
    try:
        return np.broadcast_arrays(*values)
    except ValueError:
        shapes = ", ".join(f"{n}{np.shape(v)}" for n, v in zip(names, values))
        raise ValueError(f"shapes do not broadcast: {shapes}") from None


def black_implied_vol_with_status(price, F, K, t, D, is_call):
    """Black-76 implied volatility from a discounted price on a forward.

    Parameters
    ----------
    price : discounted option price (same units as F and K).
    F : forward for the expiry; K : strike.
    t : time to expiry in years.
    D : discount factor to the expiry (e^{-rt}).
    is_call : bool array.

    Returns
    -------
    (vol, status) : annualised decimal volatility (NaN where none fits) and int8
        status codes (:data:`OK`, :data:`BELOW_INTRINSIC`, ...). Scalars for scalar
        input, arrays of the broadcast shape otherwise.
    """
    names = ("price", "F", "K", "t", "D")
    vals = [_numeric(n, v) for n, v in zip(names, (price, F, K, t, D))]
    flags = _flags(is_call)
    price, F, K, t, D, flags = _broadcast(names + ("is_call",), vals + [flags])
    shape = price.shape
    scalar = len(shape) == 0
    price, F, K, t, D, flags = (a.ravel() for a in (price, F, K, t, D, flags))
    n = price.shape[0]
    vol = np.full(n, np.nan)
    status = np.zeros(n, dtype=np.int8)
    unsettled = []
    # screened and solved in cache-sized chunks (the solver's own chunk size)
    for start in range(0, n, CHUNK):
        sl = slice(start, start + CHUNK)
        idx, conv = _screen_and_solve(price[sl], F[sl], K[sl], t[sl], D[sl], flags[sl],
                                      vol[sl], status[sl])
        if not conv.all():
            unsettled.append(start + idx[~conv])
    if unsettled:
        bad_idx = np.concatenate(unsettled)
        p = price[bad_idx] / D[bad_idx]
        vol[bad_idx], status[bad_idx] = _reference_fallback(
            p, F[bad_idx], K[bad_idx], t[bad_idx], flags[bad_idx])
    if scalar:
        return float(vol[0]), int(status[0])
    return vol.reshape(shape), status.reshape(shape)


def _screen_and_solve(price, F, K, t, D, flags, vol, status):
    """Reason codes and implied vols for one chunk of 1-d inputs, written into ``vol``
    and ``status``; returns the indices handed to the solver and its converged flags.

    The codes are written lowest priority first so that the stronger reason wins:
    bad input, then expired, below intrinsic, above the maximum, and last a normalised
    remainder that is subnormal (below intrinsic) or at its maximum (above max)."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        p = price / D  # undiscounted
        diff = F - K
        intrinsic = np.where(flags, diff, -diff)
        np.maximum(intrinsic, 0.0, out=intrinsic)
        upper = np.where(flags, F, K)
        x = F / K
        np.log(x, out=x)
        np.abs(x, out=x)
        np.negative(x, out=x)
        fk = F * K
        np.sqrt(fk, out=fk)
        beta = p - intrinsic
        beta /= fk
        # a remainder that rounds to zero (or beyond the normalised maximum) has no vol
        b_max = np.exp(0.5 * x)
        np.copyto(status, ABOVE_MAX, where=beta >= b_max)
        # subnormal normalised prices (below 2.2e-308) cannot be inverted to any
        # useful accuracy (Jäckel 2015): treated as a time value that rounds to zero
        np.copyto(status, BELOW_INTRINSIC, where=~(beta >= np.finfo(float).tiny))
        np.copyto(status, ABOVE_MAX, where=p >= upper)
        np.copyto(status, BELOW_INTRINSIC, where=p <= intrinsic)
        np.copyto(status, EXPIRED, where=t <= 0)
        ok = np.isfinite(price)
        ok &= np.isfinite(F)
        ok &= np.isfinite(K)
        ok &= np.isfinite(t)
        ok &= np.isfinite(D)
        ok &= F > 0
        ok &= K > 0
        ok &= D > 0
        ok &= price >= 0
        np.copyto(status, BAD_INPUT, where=~ok)
    todo = status == OK
    if todo.all():  # the common case: no gathers
        s, conv = normalised_implied_vol_otm(beta, x)
        np.divide(s, np.sqrt(t), out=vol)
        return np.arange(status.shape[0]), conv
    idx = np.flatnonzero(todo)
    if not idx.size:
        return idx, np.ones(0, dtype=bool)
    s, conv = normalised_implied_vol_otm(beta[idx], x[idx])
    s /= np.sqrt(t[idx])
    vol[idx] = s
    return idx, conv


def _reference_fallback(p, F, K, t, flags):
    """Scalar reference solve (vollib's Let's Be Rational) for the few unsettled
    elements; NaN and NOT_CONVERGED where it also fails."""
    from lets_be_rational import implied_volatility_from_a_transformed_rational_guess as lbr
    vol = np.full(p.shape, np.nan)
    status = np.full(p.shape, NOT_CONVERGED, dtype=np.int8)
    for i in range(p.shape[0]):  # only the rare unconverged elements come here
        try:
            v = float(lbr(float(p[i]), float(F[i]), float(K[i]), float(t[i]),
                          1.0 if flags[i] else -1.0))
        except Exception:  # the reference signals its failures by exceptions
            continue
        if np.isfinite(v) and 0 < v < 1e6:
            vol[i] = v
            status[i] = FALLBACK
    return vol, status


def implied_vol_with_status(price, S, K, t, r, q, is_call, style: str = "european"):
    """Black-Scholes-Merton implied volatility and a reason code per element.

    Parameters
    ----------
    price : option price (discounted, as quoted).
    S, K : spot and strike.
    t : time to expiry in years (calendar days / 365).
    r, q : continuously compounded rate and dividend yield, decimals.
    is_call : bool or array of bool.
    style : ``"european"`` or ``"american"``.

    Returns
    -------
    (vol, status) : annualised decimal volatilities (NaN where none fits) and int8
        codes: 0 ``ok``, 1 ``below_intrinsic``, 2 ``above_max``, 3 ``bad_input``
        (non-finite, non-positive spot/strike or negative price), 4 ``expired``
        (t <= 0), 5 ``fallback`` (solved by the scalar reference), 6
        ``not_converged``. See :data:`STATUS_NAMES`.

    Examples
    --------
    Hull, *Options, Futures, and Other Derivatives*, Example 15.6 (S = 42, K = 40,
    r = 10%, T = 0.5): the call at 4.7594 implies 20% volatility.

    >>> v, code = implied_vol_with_status(4.759422392871532, 42, 40, 0.5, 0.1, 0.0, True)
    >>> round(v, 12), STATUS_NAMES[code]
    (0.2, 'ok')
    """
    style = str(style).lower()
    if style == "american":
        from optbench.pricing.american import american_implied_vol_with_status
        return american_implied_vol_with_status(price, S, K, t, r, q, is_call)
    if style != "european":
        raise ValueError(f"style must be 'european' or 'american', not {style!r}")
    names = ("price", "S", "K", "t", "r", "q")
    vals = [_numeric(n, v) for n, v in zip(names, (price, S, K, t, r, q))]
    _broadcast(names + ("is_call",), vals + [_flags(is_call)])  # one clear shape error
    price, S, K, t, r, q = vals
    with np.errstate(over="ignore", invalid="ignore"):
        F = S * np.exp((r - q) * t)  # a non-positive spot gives F <= 0: bad_input
        D = np.exp(-r * t)
    return black_implied_vol_with_status(price, F, K, t, D, is_call)


def implied_vol(price, S, K, t, r, q, is_call, style: str = "european"):
    """Black-Scholes-Merton implied volatility; NaN wherever no volatility fits.

    Same arguments as :func:`implied_vol_with_status`, which also says why an element
    is NaN. Scalar in, scalar (float) out; arrays broadcast.

    >>> from optbench.pricing.bsm import bsm_price
    >>> p = bsm_price(100.0, [80.0, 100.0, 125.0], 0.75, 0.03, 0.01, 0.35, True)
    >>> [round(float(v), 12) for v in implied_vol(p, 100.0, [80.0, 100.0, 125.0], 0.75, 0.03, 0.01, True)]
    [0.35, 0.35, 0.35]
    """
    return implied_vol_with_status(price, S, K, t, r, q, is_call, style)[0]
