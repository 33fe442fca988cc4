r"""American-exercise prices and implied volatilities, vectorised over options.

Notes
-----
Prices come from a Cox-Ross-Rubinstein binomial tree (Cox, Ross & Rubinstein 1979;
Hull, *Options, Futures, and Other Derivatives*, ch. 13 and 21) with the two
refinements of Broadie & Detemple (1996), "BBSR":

* at the last step before expiry the continuation value is the Black-Scholes-Merton
  price over one step (a smoother start than the payoff), and
* Richardson extrapolation over two tree sizes, :math:`P = 2P_N - P_{N/2}`.

The result is floored at the immediate-exercise value and at the European
(Black-Scholes-Merton) value, both no-arbitrage lower bounds (Hull ch. 11).

The tree has :math:`u = e^{\sigma\sqrt{\Delta t}}, d = 1/u`,
:math:`p = (e^{(r-q)\Delta t} - d)/(u - d)`; at each node the value is
:math:`\max(\text{exercise}, e^{-r\Delta t}[p V_u + (1-p) V_d])`. Every option of a
chain is priced in the same pass: the arrays are (options x nodes) and the Python loop
runs over time steps only. A call on an asset with no yield (:math:`q \le 0`) is never
exercised early (Merton 1973) and gets the European price.

Implied volatility (:func:`american_implied_vol_with_status`) solves
:math:`A(\sigma) = P` by iterating on the early-exercise premium,
:math:`\sigma_{k+1} = \sigma_E\big(P - [A(\sigma_k) - E(\sigma_k)]\big)`, where
:math:`\sigma_E` is the European implied vol (Let's Be Rational) and :math:`E` the
European price, taken once from the European implied vol of :math:`P`; then
safeguarded secant steps on :math:`A(\sigma) - P` (steps limited to halving or
doubling :math:`\sigma`). Elements still unsettled are bisected on
:math:`A(\sigma)` directly, which rises with :math:`\sigma`. The lowest volatility
tried keeps the tree's probabilities inside (0, 1). No volatility fits below the immediate-exercise value or
at/above the upper bound (:math:`S` for calls, :math:`K` for puts).
"""
from __future__ import annotations

import numpy as np

from optbench.pricing.bsm import as_flag_array, as_float_array, black_price

#: tree steps of the finer of the two trees (the coarser has half)
DEFAULT_STEPS = 100


def _arrays(*values):
    return [as_float_array(v) for v in values]


def _tree(S, K, t, r, q, sigma, is_call, n):
    """BBSR tree value with n steps for 1-d arrays of live options (sigma*sqrt(t) > 0)."""
    dt = t / n
    sq = sigma * np.sqrt(dt)
    u = np.exp(sq)
    d = 1.0 / u
    growth = np.exp((r - q) * dt)
    p = (growth - d) / (u - d)
    disc = np.exp(-r * dt)
    sign = np.where(is_call, 1.0, -1.0)[:, None]
    Kc = K[:, None]
    # node prices at step n-1: S u^(2j-(n-1)), j = 0..n-1
    j = np.arange(n)
    nodes = S[:, None] * np.exp(sq[:, None] * (2 * j - (n - 1)))
    nodes = np.ascontiguousarray(nodes)
    cont = black_price(nodes * growth[:, None], Kc, dt[:, None], disc[:, None],
                       sigma[:, None], is_call[:, None])
    V = np.maximum(cont, sign * (nodes - Kc))
    pu = (disc * p)[:, None]
    pd_ = (disc * (1 - p))[:, None]
    uc = u[:, None]
    ex = np.empty_like(V)
    for step in range(n - 2, -1, -1):
        m = step + 1
        nodes = nodes[:, :m]
        nodes *= uc
        cont = V[:, 1:] * pu
        cont += pd_ * V[:, :-1]
        e = ex[:, :m]
        np.subtract(nodes, Kc, out=e)
        e *= sign
        V = np.maximum(cont, e, out=cont)
    return V[:, 0]


def american_price(S, K, t, r, q, sigma, is_call, steps: int = DEFAULT_STEPS) -> np.ndarray:
    """Price of American options; broadcasts over every argument.

    Parameters
    ----------
    S, K : spot and strike; t : years to expiry; r, q : continuously compounded rate
        and yield (decimals); sigma : annualised volatility (decimal);
        is_call : bool array; steps : steps of the finer tree (even; the coarser tree
        for the Richardson step has half).

    Returns
    -------
    ndarray (0-d for scalar input). Where ``t <= 0`` or ``sigma <= 0`` the value is
    the larger of immediate exercise and the discounted forward intrinsic value;
    non-finite or non-positive spot/strike give NaN.

    Examples
    --------
    Hull, *Options, Futures, and Other Derivatives*, American put of the binomial-tree
    chapter (S = K = 50, r = 10%, sigma = 40%, T = 5 months): about 4.28 with many
    steps (Hull quotes 4.49 for the five-step tree and 4.29 for 30 steps).

    >>> round(float(american_price(50, 50, 5 / 12, 0.10, 0.0, 0.40, False)), 2)
    4.28
    """
    S, K, t, r, q, sigma = _arrays(S, K, t, r, q, sigma)
    is_call = as_flag_array(is_call)
    S, K, t, r, q, sigma, is_call = np.broadcast_arrays(S, K, t, r, q, sigma, is_call)
    shape = S.shape
    S, K, t, r, q, sigma, is_call = (a.ravel() for a in (S, K, t, r, q, sigma, is_call))
    steps = max(4, int(steps) + int(steps) % 2)
    out = np.full(S.shape, np.nan)
    valid = np.isfinite(S) & np.isfinite(K) & (S > 0) & (K > 0) & np.isfinite(t) \
        & np.isfinite(r) & np.isfinite(q) & np.isfinite(sigma)
    with np.errstate(invalid="ignore", over="ignore"):
        tt = np.maximum(t, 0.0)
        F = S * np.exp((r - q) * tt)
        D = np.exp(-r * tt)
        immediate = np.maximum(np.where(is_call, S - K, K - S), 0.0)
        dead = valid & ((t <= 0) | (sigma <= 0))
        out[dead] = np.maximum(immediate[dead],
                               D[dead] * np.maximum(np.where(is_call[dead], F[dead] - K[dead],
                                                             K[dead] - F[dead]), 0.0))
        live = valid & ~dead
        euro = live & is_call & (q <= 0)
        if euro.any():
            out[euro] = black_price(F[euro], K[euro], t[euro], D[euro], sigma[euro], True)
        tree = live & ~euro
        if tree.any():
            i = np.flatnonzero(tree)
            args = (S[i], K[i], t[i], r[i], q[i], sigma[i], is_call[i])
            fine = _tree(*args, steps)
            coarse = _tree(*args, steps // 2)
            val = 2.0 * fine - coarse
            # no-arbitrage floors: immediate exercise, and the European value (which
            # also repairs the tree's relative error on far out-of-the-money options)
            euro_i = black_price(F[i], K[i], t[i], D[i], sigma[i], is_call[i])
            out[i] = np.maximum(np.maximum(val, immediate[i]), euro_i)
    return out.reshape(shape)


def american_implied_vol_with_status(price, S, K, t, r, q, is_call,
                                     steps: int = DEFAULT_STEPS, max_iter: int = 12):
    """Implied volatility of American options and a status code per element.

    Same arguments and status codes as
    :func:`optbench.pricing.implied.implied_vol_with_status`; ``below_intrinsic`` means
    at or below the option's value at (near) zero volatility, which for American
    options may exceed immediate exercise (a deep in-the-money option whose price
    does not move with volatility names no volatility). Accuracy is that of the tree
    (about 1e-4 of the price with the default steps), not machine precision.
    """
    from optbench.pricing import implied as iv

    price, S, K, t, r, q = _arrays(price, S, K, t, r, q)
    is_call = as_flag_array(is_call)
    price, S, K, t, r, q, is_call = np.broadcast_arrays(price, S, K, t, r, q, is_call)
    shape = price.shape
    price, S, K, t, r, q, is_call = (a.ravel() for a in (price, S, K, t, r, q, is_call))
    n = price.size
    vol = np.full(n, np.nan)
    status = np.full(n, iv.OK, dtype=np.int8)
    finite = np.isfinite(price) & np.isfinite(S) & np.isfinite(K) & np.isfinite(t) \
        & np.isfinite(r) & np.isfinite(q)
    bad = ~finite | (S <= 0) | (K <= 0) | (price < 0)
    status[bad] = iv.BAD_INPUT
    expired = ~bad & (t <= 0)
    status[expired] = iv.EXPIRED
    live = ~bad & ~expired
    immediate = np.maximum(np.where(is_call, S - K, K - S), 0.0)
    upper = np.where(is_call, S, K)
    # at (or within a rounding error of) the exercise value no volatility is identified
    below = live & (price <= immediate + 1e-9 * np.maximum(S, K))
    above = live & ~below & (price >= upper)
    status[below] = iv.BELOW_INTRINSIC
    status[above] = iv.ABOVE_MAX
    todo = np.flatnonzero(live & ~below & ~above)
    if todo.size:
        # the lower bound is the value at (nearly) zero volatility, which for American
        # options can exceed immediate exercise: at or below it no volatility is
        # identified (prices within 1e-9 of the larger of S and K count as at it)
        lo = _low_vol(r[todo], q[todo], t[todo], steps)
        a_lo = american_price(S[todo], K[todo], t[todo], r[todo], q[todo], lo,
                              is_call[todo], steps)
        flat = price[todo] <= a_lo + 1e-9 * np.maximum(S[todo], K[todo])
        status[todo[flat]] = iv.BELOW_INTRINSIC
        todo = todo[~flat]
    if todo.size:
        v, st = _solve(price[todo], S[todo], K[todo], t[todo], r[todo], q[todo],
                       is_call[todo], steps, max_iter)
        vol[todo] = v
        status[todo] = st
    if len(shape) == 0:
        return float(vol[0]), int(status[0])
    return vol.reshape(shape), status.reshape(shape)


def _solve(P, S, K, t, r, q, c, steps, max_iter):
    """Early-exercise-premium step from the European implied vol, then safeguarded
    secant steps on A(sigma) - P; bisection for whatever is left."""
    from optbench.pricing import implied as iv

    F = S * np.exp((r - q) * t)
    D = np.exp(-r * t)
    lo_vol = _low_vol(r, q, t, steps)
    v0, _ = iv.black_implied_vol_with_status(P, F, K, t, D, c)
    s0 = np.clip(np.where(np.isfinite(v0), v0, 0.25), lo_vol, 4.0)
    a0 = american_price(S, K, t, r, q, s0, c, steps)
    f0 = a0 - P
    # premium step: sigma_1 = sigma_E(P - [A(sigma_0) - E(sigma_0)])
    prem = a0 - black_price(F, K, t, D, s0, c)
    v1, _ = iv.black_implied_vol_with_status(P - prem, F, K, t, D, c)
    s1 = np.where(np.isfinite(v1), v1, np.where(f0 > 0, 0.8 * s0, 1.25 * s0))
    s1 = np.clip(s1, lo_vol, 5.0)
    tol_price = 1e-13 * np.maximum(S, K)
    done = np.abs(f0) <= tol_price
    s1 = np.where(done, s0, s1)
    act = np.flatnonzero(~done)
    sig = s1.copy()
    for _ in range(max_iter):
        if act.size == 0:
            break
        a1 = american_price(S[act], K[act], t[act], r[act], q[act], s1[act], c[act], steps)
        f1 = a1 - P[act]
        conv = (np.abs(f1) <= tol_price[act]) | (np.abs(s1[act] - s0[act]) <= 1e-9 * s1[act])
        with np.errstate(divide="ignore", invalid="ignore"):
            slope = (f1 - f0[act]) / (s1[act] - s0[act])
            step = -f1 / slope
        s_new = np.where(np.isfinite(step) & (slope > 0), s1[act] + step,
                         np.where(f1 > 0, 0.8 * s1[act], 1.25 * s1[act]))
        s_new = np.clip(s_new, np.maximum(0.5 * s1[act], lo_vol[act]), 2.0 * s1[act])
        sig[act] = s1[act]
        done[act[conv]] = True
        keep = ~conv
        s0[act], f0[act] = s1[act], f1
        s1[act] = np.where(conv, s1[act], s_new)
        act = act[keep]
    status = np.where(done, iv.OK, iv.NOT_CONVERGED).astype(np.int8)
    rest = np.flatnonzero(~done)
    if rest.size:
        sig[rest], status[rest] = _bisect(P[rest], S[rest], K[rest], t[rest], r[rest],
                                          q[rest], c[rest], steps, lo_vol[rest])
    sig = np.where(status == iv.OK, sig, np.nan)
    return sig, status


def _low_vol(r, q, t, steps):
    """Smallest volatility at which the tree's probabilities stay inside (0, 1):
    sigma * sqrt(dt) must exceed |r - q| * dt."""
    dt = t / (steps // 2)
    return np.maximum(0.005, 2.0 * np.abs(r - q) * np.sqrt(dt))


def _bisect(P, S, K, t, r, q, c, steps, lo, hi=5.0, iters=48):
    """Vectorised bisection on the American price (it rises with volatility)."""
    from optbench.pricing import implied as iv

    lo = np.asarray(lo, dtype=float).copy()
    hi = np.full(P.shape, hi)
    a_lo = american_price(S, K, t, r, q, lo, c, steps)
    a_hi = american_price(S, K, t, r, q, hi, c, steps)
    inside = (a_lo < P) & (P < a_hi)
    for _ in range(iters):
        mid = 0.5 * (lo + hi)
        a = american_price(S, K, t, r, q, mid, c, steps)
        up = a < P
        lo = np.where(up, mid, lo)
        hi = np.where(up, hi, mid)
    sig = np.where(inside, 0.5 * (lo + hi), np.nan)
    status = np.where(inside, iv.OK, np.where(P <= a_lo, iv.BELOW_INTRINSIC, iv.ABOVE_MAX))
    return sig, status.astype(np.int8)


def american_implied_vol(price, S, K, t, r, q, is_call, steps: int = DEFAULT_STEPS):
    """American implied volatility; NaN where none fits (see
    :func:`american_implied_vol_with_status` for the reasons)."""
    return american_implied_vol_with_status(price, S, K, t, r, q, is_call, steps)[0]
