"""Static-arbitrage flags on option quotes: vertical spreads and butterflies in strike,
and calendar spreads in expiry.

Notes
-----
For European options with discount factor :math:`D` and forward :math:`F`, a call
price surface :math:`C(K, T)` admits no static arbitrage only if, on each expiry,

.. math::

    -D \\le \\frac{\\partial C}{\\partial K} \\le 0, \\qquad
    \\frac{\\partial^2 C}{\\partial K^2} \\ge 0

(vertical spreads cost between nothing and their discounted width; butterflies cost
something), and, across expiries, total implied variance :math:`w = \\sigma^2 T` at
fixed log-moneyness :math:`k = \\ln(K/F_T)` does not fall as :math:`T` grows
(calendar spreads cost something). Carr & Madan, "A note on sufficient conditions
for no arbitrage", Finance Research Letters 2 (2005); Gatheral, *The Volatility
Surface* (2006), ch. 2-3; Gatheral & Jacquier, "Arbitrage-free SVI volatility
surfaces", Quantitative Finance 14 (2014), §2.

On quotes the derivatives become finite differences between neighbouring strikes.
Puts are turned into call-equivalents with put-call parity
:math:`C = P + D (F - K)`, which leaves convexity unchanged and turns the put
bounds :math:`0 \\le \\partial P/\\partial K \\le D` into the call bounds above.
A flag fires only when the breach is larger than what crossing the bid-ask spread
costs: the tolerance of a vertical spread is the sum of its two half-spreads, that of
a butterfly the weighted half-spreads of its three legs (what you give up buying at
the ask and selling at the bid), plus a tiny absolute tolerance for rounding.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from optbench.errors import InputError

#: the kinds of flag, with what each means
KINDS = {
    "vertical": "price of the higher strike's call-equivalent exceeds the lower's "
                "(a call spread with negative cost, or a put spread worth more than "
                "its discounted width)",
    "vertical_bound": "a call spread costs more than its discounted strike width "
                      "(or a put spread has negative cost)",
    "butterfly": "the middle strike is dearer than the straight line between its "
                 "neighbours (a butterfly with negative cost)",
    "calendar": "total implied variance at the same log-moneyness falls from one "
                "expiry to the next (a calendar spread with negative cost)",
}


@dataclass(frozen=True)
class ArbitrageFlags:
    """Static-arbitrage breaches found on a set of quotes (one row per breach).

    Attributes
    ----------
    kind : ndarray of str
        ``"vertical"``, ``"vertical_bound"``, ``"butterfly"`` or ``"calendar"``
        (see :data:`KINDS`).
    i, j, l : ndarray of int
        Positions (in the caller's input order) of the quotes involved: the lower
        strike, the middle strike (butterflies) and the higher strike; for
        ``calendar``, ``i`` is the earlier expiry's quote and ``j``, ``l`` the two
        later-expiry quotes whose total variance was interpolated. -1 where unused.
    x_low, x_mid, x_high : ndarray of float
        Strikes of ``i``, ``j``, ``l`` (log-moneyness for ``calendar``); NaN where
        unused.
    violation : ndarray of float
        Size of the breach, in money per unit of underlying for strike checks and in
        total variance (decimal vol squared times years) for ``calendar``.
    tolerance : ndarray of float
        The spread-based tolerance the breach exceeded, same units.
    quote_flag : ndarray of bool
        One entry per input quote: True if it takes part in any breach.
    """

    kind: np.ndarray
    i: np.ndarray
    j: np.ndarray
    l: np.ndarray
    x_low: np.ndarray
    x_mid: np.ndarray
    x_high: np.ndarray
    violation: np.ndarray
    tolerance: np.ndarray
    quote_flag: np.ndarray

    def __len__(self) -> int:
        return int(self.kind.size)

    def count(self, kind: str | None = None) -> int:
        """Number of breaches (of one ``kind`` if given)."""
        return int(self.kind.size if kind is None else np.count_nonzero(self.kind == kind))

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame({"kind": self.kind, "i": self.i, "j": self.j, "l": self.l,
                             "x_low": self.x_low, "x_mid": self.x_mid,
                             "x_high": self.x_high, "violation": self.violation,
                             "tolerance": self.tolerance})

    @staticmethod
    def combine(*flags: "ArbitrageFlags") -> "ArbitrageFlags":
        """Join the breaches of several checks made on the same quotes."""
        if not flags:
            raise ValueError("nothing to combine")
        n = {f.quote_flag.size for f in flags}
        if len(n) != 1:
            raise ValueError("flags were computed on different quote sets")
        cat = {name: np.concatenate([getattr(f, name) for f in flags])
               for name in ("kind", "i", "j", "l", "x_low", "x_mid", "x_high",
                            "violation", "tolerance")}
        qf = np.logical_or.reduce([f.quote_flag for f in flags])
        return ArbitrageFlags(quote_flag=qf, **cat)


def _flags(n, kind, i, j, l, xl, xm, xh, viol, tol) -> ArbitrageFlags:
    qf = np.zeros(n, dtype=bool)
    for idx in (i, j, l):
        qf[idx[idx >= 0]] = True
    return ArbitrageFlags(np.asarray(kind, dtype=object), i.astype(int), j.astype(int),
                          l.astype(int), xl.astype(float), xm.astype(float),
                          xh.astype(float), viol.astype(float), tol.astype(float), qf)


def _empty(n: int) -> ArbitrageFlags:
    e = np.array([], dtype=float)
    ei = np.array([], dtype=int)
    return _flags(n, np.array([], dtype=object), ei, ei, ei, e, e, e, e, e)


def _floats(name: str, x, n: int) -> np.ndarray:
    try:
        a = np.asarray(x, dtype=float)
    except (TypeError, ValueError):
        raise InputError("arbitrage", f"{name} must be numbers")
    try:
        return np.broadcast_to(a, (n,)).copy()
    except ValueError:
        raise InputError("arbitrage", f"{name} has shape {a.shape}, expected ({n},)")


def strike_arbitrage(expiry, strike, price, is_call, *, forward, discount,
                     bid=None, ask=None, abs_tol: float = 1e-9) -> ArbitrageFlags:
    """Vertical-spread and butterfly breaches in strike, per expiry and side.

    Parameters
    ----------
    expiry : array
        Expiry of each quote (any comparable labels: dates or times to expiry).
    strike : array
        Strike of each quote.
    price : array
        Price checked for each quote (usually the mid).
    is_call : array of bool
        Call (True) or put (False).
    forward, discount : float or array
        Forward ``F`` and discount factor ``D = e^{-rt}`` of each quote's expiry,
        used for put-call parity and the vertical bound.
    bid, ask : array, optional
        Quotes giving the spread-based tolerance; without them the tolerance is
        ``abs_tol`` alone.
    abs_tol : float
        Absolute tolerance for rounding, in price units.

    Returns
    -------
    ArbitrageFlags
        Breaches of kinds ``vertical``, ``vertical_bound`` and ``butterfly``.

    Notes
    -----
    With strikes :math:`K_1 < K_2 < K_3` of one expiry and side, call-equivalent
    prices :math:`c = C` or :math:`c = P + D(F - K)` and half-spreads :math:`h`:

    - vertical: :math:`c_2 - c_1 > h_1 + h_2`;
    - vertical_bound: :math:`c_1 - c_2 - D(K_2 - K_1) > h_1 + h_2`;
    - butterfly: :math:`c_2 - \\lambda c_1 - (1-\\lambda) c_3 > h_2 + \\lambda h_1
      + (1-\\lambda) h_3` with :math:`\\lambda = (K_3 - K_2)/(K_3 - K_1)`.

    Carr & Madan (2005); each is the cost of a spread that pays off a non-negative
    amount in every outcome. Vectorised over the whole chain (sort once by expiry,
    side and strike; compare neighbours within each group).
    """
    try:
        K = np.asarray(strike, dtype=float).ravel()
    except (TypeError, ValueError):
        raise InputError("arbitrage", "strike must be numbers")
    n = K.size
    try:
        is_call = np.broadcast_to(np.asarray(is_call, dtype=bool), (n,)).copy()
    except (TypeError, ValueError):
        raise InputError("arbitrage", f"is_call must be booleans for {n} quotes")
    expiry = np.asarray(expiry).ravel()
    if expiry.size == 1:
        expiry = np.broadcast_to(expiry, (n,))
    if expiry.size != n:
        raise InputError("arbitrage", f"expiry has {expiry.size} values for {n} quotes")
    p = _floats("price", price, n)
    F = _floats("forward", forward, n)
    D = _floats("discount", discount, n)
    if n == 0:
        return _empty(0)
    if np.any(K <= 0) or np.any(F <= 0) or np.any(D <= 0):
        raise InputError("arbitrage", "strikes, forwards and discount factors must be positive")
    if bid is not None and ask is not None:
        h = 0.5 * (_floats("ask", ask, n) - _floats("bid", bid, n))
        h = np.where(np.isfinite(h) & (h > 0), h, 0.0)
    else:
        h = np.zeros(n)
    c = np.where(is_call, p, p + D * (F - K))           # put-call parity
    # group id per (expiry, side), then order by group and strike
    _, g_exp = np.unique(expiry, return_inverse=True)
    group = g_exp.ravel() * 2 + is_call.astype(int)
    usable = np.isfinite(c) & np.isfinite(K)
    pos = np.flatnonzero(usable)
    order = pos[np.lexsort((K[pos], group[pos]))]
    Ks, cs, hs, gs, Ds = K[order], c[order], h[order], group[order], D[order]

    kinds, I, J, L, XL, XM, XH, V, T = [], [], [], [], [], [], [], [], []

    def add(kind, mask, i, j, l, viol, tol):
        sel = np.flatnonzero(mask)
        if sel.size == 0:
            return
        kinds.append(np.full(sel.size, kind, dtype=object))
        for store, idx in ((I, i), (J, j), (L, l)):
            store.append(np.where(idx[sel] >= 0, order[np.maximum(idx[sel], 0)], -1)
                         if idx is not None else np.full(sel.size, -1))
        XL.append(Ks[i[sel]] if i is not None else np.full(sel.size, np.nan))
        XM.append(Ks[j[sel]] if j is not None else np.full(sel.size, np.nan))
        XH.append(Ks[l[sel]] if l is not None else np.full(sel.size, np.nan))
        V.append(viol[sel])
        T.append(tol[sel])

    m = Ks.size
    if m >= 2:
        a = np.arange(m - 1)
        b = a + 1
        pair = (gs[a] == gs[b]) & (Ks[b] > Ks[a])
        tol2 = hs[a] + hs[b] + abs_tol
        v_dec = cs[b] - cs[a]
        add("vertical", pair & (v_dec > tol2), a, None, b, v_dec, tol2)
        v_bnd = cs[a] - cs[b] - Ds[a] * (Ks[b] - Ks[a])
        add("vertical_bound", pair & (v_bnd > tol2), a, None, b, v_bnd, tol2)
    if m >= 3:
        a = np.arange(m - 2)
        b, d = a + 1, a + 2
        trip = (gs[a] == gs[d]) & (Ks[b] > Ks[a]) & (Ks[d] > Ks[b])
        # outside a triple (other expiry, repeated strike) lam is not finite; those
        # elements are masked by ``trip``, so their NaN arithmetic is expected
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            lam = (Ks[d] - Ks[b]) / (Ks[d] - Ks[a])
            v_fly = cs[b] - lam * cs[a] - (1 - lam) * cs[d]
            tol3 = hs[b] + lam * hs[a] + (1 - lam) * hs[d] + abs_tol
        add("butterfly", trip & (v_fly > tol3), a, b, d, v_fly, tol3)

    if not kinds:
        return _empty(n)
    # butterflies carry the middle strike in j; verticals leave j unused
    return _flags(n, np.concatenate(kinds), np.concatenate(I), np.concatenate(J),
                  np.concatenate(L), np.concatenate(XL), np.concatenate(XM),
                  np.concatenate(XH), np.concatenate(V), np.concatenate(T))


def calendar_arbitrage(t, k, w, *, w_tol=None, abs_tol: float = 1e-12) -> ArbitrageFlags:
    """Calendar breaches: total implied variance that falls with expiry.

    Parameters
    ----------
    t : array
        Time to expiry of each quote in years (calendar days / 365).
    k : array
        Log-moneyness ``ln(K/F)`` of each quote, with its own expiry's forward.
    w : array
        Total implied variance ``iv**2 * t`` of each quote.
    w_tol : array, optional
        Per-quote tolerance in total variance, e.g. half the bid-ask range
        ``t * (iv_ask**2 - iv_bid**2) / 2``; 0 if omitted.
    abs_tol : float
        Absolute tolerance for rounding, in total variance.

    Returns
    -------
    ArbitrageFlags
        Breaches of kind ``calendar``: quote ``i`` of an expiry whose total variance
        exceeds, beyond the tolerance, the next expiry's total variance interpolated
        linearly in ``k`` between its quotes ``j`` and ``l``.

    Notes
    -----
    No calendar arbitrage requires :math:`\\partial_T w(k, T) \\ge 0` at fixed
    :math:`k` (Gatheral 2004; Gatheral & Jacquier 2014, Lemma 2.1). Each quote is
    compared with the next listed expiry only, within that expiry's quoted range of
    :math:`k` (no extrapolation). The loop runs over expiries, not over quotes.
    """
    try:
        t = np.asarray(t, dtype=float).ravel()
    except (TypeError, ValueError):
        raise InputError("arbitrage", "times to expiry must be numbers")
    n = t.size
    if np.any(t[np.isfinite(t)] < 0):
        raise InputError("arbitrage", "times to expiry must not be negative")
    k = _floats("log-moneyness", k, n)
    w = _floats("total variance", w, n)
    tol = np.zeros(n) if w_tol is None else np.where(
        np.isfinite(_floats("w_tol", w_tol, n)), _floats("w_tol", w_tol, n), 0.0)
    ok = np.isfinite(t) & np.isfinite(k) & np.isfinite(w) & (t > 0)
    ts = np.unique(t[ok])
    if ts.size < 2:
        return _empty(n)
    I, J, L, XL, XM, XH, V, T = [], [], [], [], [], [], [], []
    for t1, t2 in zip(ts[:-1], ts[1:]):
        i1 = np.flatnonzero(ok & (t == t1))
        i2 = np.flatnonzero(ok & (t == t2))
        if i2.size < 2:
            continue
        i2 = i2[np.argsort(k[i2], kind="stable")]
        k2 = k[i2]
        inside = (k[i1] >= k2[0]) & (k[i1] <= k2[-1])
        i1 = i1[inside]
        if i1.size == 0:
            continue
        w2 = np.interp(k[i1], k2, w[i2])
        tol2 = np.interp(k[i1], k2, tol[i2])
        hi = np.clip(np.searchsorted(k2, k[i1], side="left"), 1, k2.size - 1)
        lo = hi - 1
        viol = w[i1] - w2
        tt = tol[i1] + tol2 + abs_tol
        sel = viol > tt
        I.append(i1[sel]); J.append(i2[lo[sel]]); L.append(i2[hi[sel]])
        XL.append(k[i1[sel]]); XM.append(k2[lo[sel]]); XH.append(k2[hi[sel]])
        V.append(viol[sel]); T.append(tt[sel])
    if not I or sum(x.size for x in I) == 0:
        return _empty(n)
    cat = np.concatenate
    return _flags(n, np.full(sum(x.size for x in I), "calendar", dtype=object), cat(I),
                  cat(J), cat(L), cat(XL), cat(XM), cat(XH), cat(V), cat(T))
