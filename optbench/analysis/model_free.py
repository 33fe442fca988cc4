"""Model-free implied variance per expiry from the out-of-the-money strip, and its
interpolation to constant maturities.

Notes
-----
Under any diffusion for the forward, the risk-neutral expected annualised variance to
expiry :math:`T` is the price of a strip of out-of-the-money options weighted by
:math:`1/K^2` (Demeterfi, Derman, Kamal & Zou, "A guide to volatility and variance
swaps", Journal of Derivatives 6(4), 1999; Britten-Jones
& Neuberger, "Option prices, implied price processes, and stochastic volatility",
Journal of Finance 55, 2000):

.. math::

    \\sigma^2_{MF} = \\frac{2}{T} \\int_0^\\infty \\frac{e^{rT} Q(K)}{K^2}\\,dK,

with :math:`Q` the put below the forward and the call above. On listed strikes the
integral becomes the standard sum

.. math::

    \\sigma^2 = \\frac{2}{T} \\sum_i \\frac{\\Delta K_i}{K_i^2} e^{rT} Q(K_i)
              - \\frac{1}{T}\\Bigl(\\frac{F}{K_0} - 1\\Bigr)^2,

with :math:`K_0` the first listed strike at or below :math:`F`, puts below
:math:`K_0`, calls above, the average of put and call at :math:`K_0` (the last term
corrects for using the call-minus-put at :math:`K_0` in place of the forward), and
:math:`\\Delta K_i = (K_{i+1} - K_{i-1})/2` (one-sided at the ends of the strip).

Truncation rule (common practice): walking outward from :math:`K_0` on each side,
a strike whose out-of-the-money option has no bid (zero or missing) is skipped, and
the strip stops at the first two consecutive strikes without a bid; nothing beyond
is used. Without bids, only prices that are missing or not positive are skipped.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from optbench.errors import InputError

#: constant maturities, in calendar days, of :func:`constant_maturity_variance`
CONSTANT_MATURITY_DAYS = (30, 61, 91, 182, 365)

_MIN_STRIKES = 3


@dataclass(frozen=True)
class ModelFreeVariance:
    """Model-free implied variance of one expiry.

    Attributes
    ----------
    variance : float
        Annualised implied variance, decimal (0.04 = a 20% vol); NaN if the strip
        could not be built.
    t : float
        Time to expiry in years.
    n_strikes : int
        Strikes in the strip after truncation.
    k0 : float
        The first strike at or below the forward.
    strike_low, strike_high : float
        The ends of the strip used.
    note : str
        How the strip was built (truncation, missing quotes) or why it failed.
    """

    variance: float
    t: float
    n_strikes: int
    k0: float
    strike_low: float
    strike_high: float
    note: str

    @property
    def vol(self) -> float:
        """Square root of :attr:`variance` (annualised decimal vol)."""
        return float(np.sqrt(self.variance)) if self.variance >= 0 else float("nan")

    def to_dict(self) -> dict:
        return {"variance": self.variance, "vol": self.vol, "t": self.t,
                "n_strikes": self.n_strikes, "k0": self.k0,
                "strike_low": self.strike_low, "strike_high": self.strike_high,
                "note": self.note}


def _array(name: str, x, n: int) -> np.ndarray:
    if x is None:
        return np.full(n, np.nan)
    try:
        a = np.asarray(x, dtype=float)
    except (TypeError, ValueError):
        raise InputError("model_free_variance", f"{name} must be numbers")
    if a.shape not in ((), (n,)):
        raise InputError("model_free_variance",
                         f"{name} has shape {a.shape} but there are {n} strikes")
    return np.broadcast_to(a, (n,)).astype(float)


def _scalar(name: str, x) -> float:
    try:
        v = float(x)
    except (TypeError, ValueError):
        raise InputError("model_free_variance", f"{name} must be a number, not {x!r}")
    if not np.isfinite(v) or v <= 0:
        raise InputError("model_free_variance", f"{name} must be positive, not {v}")
    return v


def _keep_side(quoted: np.ndarray) -> tuple[np.ndarray, bool]:
    """Which strikes of one side (ordered outward from K0) the strip uses.

    ``quoted`` is True where the option has a bid (and a positive price). Strikes
    without one are skipped; the side stops at the first two in a row.
    """
    z = ~quoted
    pair = z[:-1] & z[1:]
    if np.any(pair):
        stop = int(np.argmax(pair))
        keep = quoted.copy()
        keep[stop:] = False
        return keep, True
    return quoted, False


def _nanmean2(a: float, b: float) -> float:
    """``numpy.nanmean([a, b])`` of two numbers, not both NaN: the same sum of the
    non-NaN values (a NaN counts as 0, the sum starts at +0) divided by their count."""
    return (0.0 + (a if a == a else 0.0) + (b if b == b else 0.0)) / ((a == a) + (b == b))


def _nanmax2(a: float, b: float) -> float:
    """``numpy.nanmax([a, b])`` of two numbers, not both NaN (the second of two equal
    ones, as numpy's reduction keeps it)."""
    if a != a:
        return b
    if b != b:
        return a
    return a if a > b else b


def model_free_variance(strike, t, forward, discount, *, call_mid=None, put_mid=None,
                        otm_mid=None, call_bid=None, put_bid=None,
                        otm_bid=None) -> ModelFreeVariance:
    """Model-free implied variance of one expiry from its out-of-the-money strip.

    Parameters
    ----------
    strike : array
        Distinct strikes of the expiry (any order).
    t : float
        Time to expiry in years (calendar days / 365).
    forward : float
        The expiry's forward ``F`` (e.g. implied from put-call parity).
    discount : float
        Discount factor ``D = e^{-rT}`` to expiry.
    call_mid, put_mid : array, optional
        Mid prices of the call and the put at each strike (NaN where not quoted).
    otm_mid : array, optional
        Instead of ``call_mid``/``put_mid``: the out-of-the-money mid at each strike
        (put below ``K0``, call above, the put-call average at ``K0``).
    call_bid, put_bid, otm_bid : array, optional
        Bids matching the mids, for the truncation rule (see module notes).

    Returns
    -------
    ModelFreeVariance

    Notes
    -----
    :math:`\\sigma^2 = (2/T)\\sum_i (\\Delta K_i/K_i^2)\\,Q(K_i)/D - (1/T)(F/K_0 - 1)^2`
    (Demeterfi, Derman, Kamal & Zou 1999; Britten-Jones & Neuberger 2000). The
    strip's discretisation and truncation both bias the estimate down when the
    strikes are sparse or stop short of the tails.
    """
    try:
        K = np.asarray(strike, dtype=float).ravel()
    except (TypeError, ValueError):
        raise InputError("model_free_variance", "strikes must be numbers")
    n = K.size
    t = _scalar("time to expiry", t)
    F = _scalar("forward", forward)
    D = _scalar("discount factor", discount)
    if n == 0:
        raise InputError("model_free_variance", "no strikes given")
    if not np.all(np.isfinite(K)) or np.any(K <= 0):
        raise InputError("model_free_variance", "strikes must be positive numbers")
    if otm_mid is None and call_mid is None and put_mid is None:
        raise InputError("model_free_variance", "give call_mid and put_mid, or otm_mid")
    order = np.argsort(K, kind="stable")
    K = K[order]
    if np.any(np.diff(K) == 0):
        raise InputError("model_free_variance", "strikes must be distinct")

    def pick(x):
        return _array("price", x, n)[order]

    i0 = int(np.searchsorted(K, F, side="right")) - 1
    nan = float("nan")
    if i0 < 0:
        return ModelFreeVariance(nan, t, 0, nan, nan, nan,
                                 "no strike at or below the forward")
    notes = []
    if otm_mid is not None:
        Q = pick(otm_mid)
        bid = pick(otm_bid) if otm_bid is not None else None
    else:
        cm, pm = pick(call_mid), pick(put_mid)
        Q = np.where(K < K[i0], pm, cm)
        both = _nanmean2(float(cm[i0]), float(pm[i0])) if (
            np.isfinite(cm[i0]) or np.isfinite(pm[i0])) else nan
        if not (np.isfinite(cm[i0]) and np.isfinite(pm[i0])):
            notes.append("only one side quoted at K0")
        Q[i0] = both
        if call_bid is not None or put_bid is not None:
            cb, pb = pick(call_bid), pick(put_bid)
            bid = np.where(K < K[i0], pb, cb)
            bid[i0] = _nanmax2(float(cb[i0]), float(pb[i0])) if (
                np.isfinite(cb[i0]) or np.isfinite(pb[i0])) else nan
        else:
            bid = None
    quoted = np.isfinite(Q) & (Q > 0)
    if bid is not None:
        quoted &= np.isfinite(bid) & (bid > 0)
    if not quoted[i0]:
        return ModelFreeVariance(nan, t, 0, float(K[i0]), nan, nan,
                                 "no usable quote at K0, the strike at or below the forward")
    keep = np.zeros(n, dtype=bool)
    keep[i0] = True
    below, cut_lo = _keep_side(quoted[:i0][::-1])
    above, cut_hi = _keep_side(quoted[i0 + 1:])
    keep[:i0] = below[::-1]
    keep[i0 + 1:] = above
    if cut_lo:
        notes.append("put side stopped at two strikes without a bid")
    if cut_hi:
        notes.append("call side stopped at two strikes without a bid")
    Ks, Qs = K[keep], Q[keep]
    m = Ks.size
    if m < _MIN_STRIKES:
        return ModelFreeVariance(nan, t, m, float(K[i0]), float(Ks[0]), float(Ks[-1]),
                                 f"only {m} usable strike(s); at least {_MIN_STRIKES} needed")
    dK = np.empty(m)
    dK[1:-1] = 0.5 * (Ks[2:] - Ks[:-2])
    dK[0] = Ks[1] - Ks[0]
    dK[-1] = Ks[-1] - Ks[-2]
    k0 = float(K[i0])
    var = 2.0 / t * float(np.sum(dK / Ks ** 2 * Qs)) / D - (F / k0 - 1.0) ** 2 / t
    n_skipped = int(np.count_nonzero(~keep))
    if n_skipped:
        notes.append(f"{n_skipped} strike(s) left out")
    note = "; ".join(notes) if notes else "full strip"
    return ModelFreeVariance(float(var), t, m, k0, float(Ks[0]), float(Ks[-1]), note)


@dataclass(frozen=True)
class ConstantMaturityVariance:
    """Model-free variance interpolated to constant maturities.

    Attributes
    ----------
    days : ndarray of int
        Target maturities in calendar days (30, 61, 91, 182, 365 by default).
    t : ndarray
        The same in years (days / 365).
    variance : ndarray
        Annualised variance at each target; NaN outside the listed expiries.
    notes : tuple of str
        Per target: which expiries were used, or why there is no value.
    """

    days: np.ndarray
    t: np.ndarray
    variance: np.ndarray
    notes: tuple

    @property
    def vol(self) -> np.ndarray:
        """Square root of :attr:`variance` (annualised decimal vols)."""
        with np.errstate(invalid="ignore"):
            return np.sqrt(self.variance)

    def to_dict(self) -> dict:
        return {"points": [{"days": int(d), "t": float(tt), "variance": float(v),
                            "vol": float(s), "note": nt}
                           for d, tt, v, s, nt in zip(self.days, self.t, self.variance,
                                                      self.vol, self.notes)]}


def constant_maturity_variance(t, variance, days=CONSTANT_MATURITY_DAYS
                               ) -> ConstantMaturityVariance:
    """Interpolate per-expiry annualised variances to constant maturities.

    Parameters
    ----------
    t : array
        Times to the listed expiries in years (calendar days / 365), distinct.
    variance : array
        Annualised (model-free) implied variance of each expiry; NaN entries are
        left out.
    days : sequence of int
        Target maturities in calendar days.

    Returns
    -------
    ConstantMaturityVariance

    Notes
    -----
    Linear in total variance :math:`w = \\sigma^2 t` between the two listed expiries
    that bracket the target :math:`\\tau`:
    :math:`w(\\tau) = w_1 + (w_2 - w_1)(\\tau - t_1)/(t_2 - t_1)`, reported as
    :math:`w(\\tau)/\\tau`. A target exactly on a listed expiry takes that expiry's
    variance. There is no extrapolation: a target before the first or after the
    last listed expiry is NaN with a note. (This is how volatility indices are
    commonly held at a constant maturity; Demeterfi et al. 1999, §4 on term structure
    of variance; Gatheral 2006, ch. 11.)
    """
    try:
        t = np.asarray(t, dtype=float).ravel()
        v = np.asarray(variance, dtype=float).ravel()
        d = np.asarray(days, dtype=float).ravel()
    except (TypeError, ValueError):
        raise InputError("constant_maturity_variance", "times, variances and days must be numbers")
    if t.shape != v.shape:
        raise InputError("constant_maturity_variance",
                         f"{t.size} expiry times but {v.size} variances")
    if np.any(d <= 0) or not np.all(np.isfinite(d)):
        raise InputError("constant_maturity_variance", "target days must be positive")
    ok = np.isfinite(t) & np.isfinite(v) & (t > 0)
    t, v = t[ok], v[ok]
    order = np.argsort(t)
    t, v = t[order], v[order]
    if np.any(np.diff(t) == 0):
        raise InputError("constant_maturity_variance", "expiry times must be distinct")
    tau = d / 365.0
    out = np.full(tau.shape, np.nan)
    notes = []
    if t.size == 0:
        return ConstantMaturityVariance(d.astype(int), tau, out,
                                        tuple("no expiry with a variance" for _ in tau))
    w = v * t
    hi = np.searchsorted(t, tau, side="left")          # first expiry >= target
    exact = (hi < t.size) & (t[np.minimum(hi, t.size - 1)] == tau)
    inside = (tau >= t[0]) & (tau <= t[-1])
    hi_c = np.clip(hi, 1, max(t.size - 1, 1))
    lo_c = hi_c - 1
    if t.size >= 2:
        frac = (tau - t[lo_c]) / (t[hi_c] - t[lo_c])
        w_tau = w[lo_c] + (w[hi_c] - w[lo_c]) * frac
        out = np.where(inside, w_tau / tau, np.nan)
    out = np.where(exact, v[np.minimum(hi, t.size - 1)], out)
    days_listed = np.rint(t * 365).astype(int)
    for j in range(tau.size):
        if exact[j]:
            notes.append(f"listed expiry of {days_listed[np.minimum(hi[j], t.size - 1)]} days")
        elif tau[j] < t[0]:
            notes.append(f"before the first listed expiry ({days_listed[0]} days); "
                         "not extrapolated")
        elif tau[j] > t[-1]:
            notes.append(f"after the last listed expiry ({days_listed[-1]} days); "
                         "not extrapolated")
        else:
            a, b = lo_c[j], hi_c[j]
            s = f"interpolated between {days_listed[a]} and {days_listed[b]} days"
            if w[b] < w[a]:
                s += "; total variance falls between them (calendar arbitrage)"
            notes.append(s)
    return ConstantMaturityVariance(d.astype(int), tau, out, tuple(notes))
