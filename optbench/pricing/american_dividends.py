r"""American options with known cash dividends at their ex-dates, vectorised over options.

Notes
-----
The escrowed-dividend tree (Hull, *Options, Futures, and Other Derivatives*, ch. 21
"known dollar dividends"): a Cox-Ross-Rubinstein tree is built for the risky part
:math:`S^*_0 = S - PV(T)` (:mod:`optbench.pricing.cash_dividends`), which recombines;
at step :math:`k` (time :math:`s_k = kT/N`) the stock price at a node is the tree
value plus the present value at :math:`s_k` of the dividends still to go ex before
expiry,

.. math:: S(s_k) = S^*(s_k) + \sum_{s_k < \tau_j \le T} D_j e^{-r(\tau_j - s_k)},

so the price drops by the dividend as the tree passes each ex-date. Each node takes
:math:`\max(\theta(S(s_k) - K),\ e^{-r\Delta t}[p V_u + (1-p) V_d])` with
:math:`u = e^{\sigma\sqrt{\Delta t}}`, :math:`p = (e^{(r-q)\Delta t} - d)/(u - d)`.
A call is exercised early, if at all, just before an ex-date (Merton 1973), which
rarely falls on a tree date: at the tree date :math:`s_k` just before ex-date
:math:`\tau_j` the value is also floored at the policy "exercise at
:math:`\tau_j^-` if in the money", worth Black (1976) over :math:`h = \tau_j - s_k`
on :math:`S^*` with strike :math:`K - D_j - PV_{later}(\tau_j)` (the stock just
before the ex-date is :math:`S^*(\tau_j) + D_j + PV_{later}(\tau_j)`). As in :mod:`optbench.pricing.american`, the last step uses the
Black-Scholes-Merton value over one step (no dividend remains after expiry) and two
tree sizes are combined, :math:`2P_N - P_{N/2}` (Broadie & Detemple 1996). The result
is floored at immediate exercise and at the escrowed European value. The arrays are
(nodes x options), in blocks of ``TREE_BLOCK`` options; the Python loop runs over
time steps only, and over dividends (a handful) when the remaining present values
are tabulated. The ex-date floors of every (option, ex-date) pair are valued in one
vectorised call before the loop; the one-step Black values (last step and floors)
are evaluated only within 20 standard deviations :math:`\sigma\sqrt h` of the
strike, the discounted intrinsic value beyond (the same number to double precision).

:math:`\sigma` is the volatility of :math:`S^*` (the escrowed model's caveat: Haug,
Haug & Lewis 2003, see :mod:`optbench.pricing.cash_dividends`).

Accuracy: against QuantLib's finite-difference engine in the same escrowed model
(``FdBlackScholesVanillaEngine`` with ``CashDividendModel.Escrowed``, 800 x 800 grid)
within 0.2 % of the price (or 0.01 price units) with the default 200 steps on the
cases of ``tests/pricing/test_dividends.py`` (largest seen 0.05 %); on the 100 sampled
options of ``tests/benchmarks/bench_american_dividends.py`` (expiries up to two years,
eight dividends, 400 x 400 reference) the median gap is 0.01 % and the largest 0.34 %
(a two-year out-of-the-money put at 15 % vol, the tree's own discretisation: 0.02 %
with 800 steps; 0.07 % for the whole sample with 400 steps). Implied volatility
(:func:`american_dividend_implied_vol_with_status`) solves :math:`A(\sigma) = P` by
the early-exercise-premium step from the escrowed European implied vol and bracketed
secant steps (:func:`optbench.pricing.american.bracketed_solve`), bisection for what
is left; its accuracy is the tree's.
"""
from __future__ import annotations

import numpy as np

from optbench.pricing.american import _low_vol, lattice
from optbench.pricing.bsm import as_flag_array, as_float_array, black_price
from optbench.pricing.cash_dividends import escrowed_forward, pv_dividends

#: tree steps of the finer of the two trees (the coarser has half)
DEFAULT_STEPS = 200


def _remaining_pv(t, r, n, times, amounts):
    r"""(options, n+1): PV at each step time of the dividends going ex after it and by
    expiry, :math:`e^{r s_k} \sum_j D_j e^{-r\tau_j}` over the live dividends."""
    s = (t / n)[:, None] * np.arange(n + 1)[None, :]
    out = np.zeros(s.shape)
    for tau, amount in zip(times, amounts):   # a handful of dividends
        live = (tau > s) & (tau <= t[:, None])
        out += live * (amount * np.exp(-r * tau))[:, None]
    out *= np.exp(r[:, None] * s)
    return out


#: beyond this many standard deviations sigma*sqrt(h) from the strike, the Black
#: value equals the discounted intrinsic value to double precision (the normal tail
#: at 20 is below 1e-88)
_FAR = 20.0


def _black_near_strike(F, K, h, D, sigma, is_call):
    r""":func:`black_price` on arrays of one shape, evaluated only where
    :math:`|\ln(F/K)| \le 20\sigma\sqrt h + \sigma^2 h` and the discounted
    intrinsic value elsewhere (equal to double precision there). Over one tree step
    only a few nodes lie that close to the strike."""
    F, K, h, D, sigma, is_call = np.broadcast_arrays(F, K, h, D, sigma, is_call)
    sd = sigma * np.sqrt(h)
    out = D * np.maximum(np.where(is_call, F - K, K - F), 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        near = ~(np.abs(np.log(F / K)) > _FAR * sd + sd * sd)
    if near.any():
        out[near] = black_price(F[near], K[near], h[near], D[near], sigma[near],
                                is_call[near])
    return out


def _tree(Sx, K, t, r, q, sigma, is_call, n, times, amounts):
    """Escrowed tree value with n steps for 1-d arrays of live options. The arrays
    are (nodes x options): each step reads and writes contiguous blocks."""
    dt, sq, u, growth, p, disc = lattice(t, r, q, sigma, n)
    sign = np.where(is_call, 1.0, -1.0)
    rem = _remaining_pv(t, r, n, times, amounts).T
    j = np.arange(n)[:, None]
    nodes = np.ascontiguousarray(Sx * np.exp(sq * (2 * j - (n - 1))))
    cont = _black_near_strike(nodes * growth, K, dt, disc, sigma, is_call)
    V = np.maximum(cont, sign * (nodes + rem[n - 1] - K))
    pu = disc * p
    pd_ = disc * (1 - p)
    # signed node prices and signed (remaining PV - strike): the exercise value at a
    # step is their sum
    nodes *= sign
    shift = sign * (rem - K)
    ex = np.empty_like(V)
    down = np.empty_like(V)
    buffers = (np.empty_like(V), np.empty_like(V))
    # calls: the tree date just before each ex-date that falls strictly between two
    # tree dates (a put is never exercised just before an ex-date: waiting for the
    # drop is worth more); every such floor is valued in one pass before the loop
    between = _ex_date_floors(Sx, K, t, r, q, sigma, is_call, n, dt, sq, times, amounts)
    for step in range(n - 2, -1, -1):
        m = step + 1
        nodes = nodes[:m]
        nodes *= u
        cont = np.multiply(V[1:], pu, out=buffers[step % 2][:m])
        cont += np.multiply(V[:-1], pd_, out=down[:m])
        e = np.add(nodes, shift[step], out=ex[:m])
        V = np.maximum(cont, e, out=cont)
        for j0, cols, floor in between.get(step, ()):
            V[j0:, cols] = np.maximum(V[j0:, cols], floor)
    return V[0]


#: options per tree pass: the (nodes x options) arrays of a block stay in cache
TREE_BLOCK = 512


def _chunked_tree(args, n, times, amounts):
    """:func:`_tree` over blocks of TREE_BLOCK options (same values, faster on long
    chains: the working arrays of a block fit in the processor's cache)."""
    size = args[0].shape[0]
    if size <= TREE_BLOCK:
        return _tree(*args, n, times, amounts)
    out = np.empty(size)
    for lo in range(0, size, TREE_BLOCK):
        part = slice(lo, lo + TREE_BLOCK)
        out[part] = _tree(*(a[part] for a in args), n, times, amounts)
    return out


def _ex_date_floors(Sx, K, t, r, q, sigma, is_call, n, dt, sq, times, amounts):
    """``{step: [(first node, columns, values), ...]}`` (values: nodes x options): at
    the tree date ``s = step*dt`` just before
    an ex-date ``tau`` that falls strictly between two tree dates, the value at that
    date's nodes (``Sx u^(2j - step)``, j = 0..step) of the policy "exercise just
    before the ex-date if in the money": Black (1976) over h = tau - s on the escrowed
    part, strike less the dividend and the later dividends' PV at tau (the stock just
    before the ex-date is S*(tau) + D + PV_later(tau)). A lower bound of the
    continuation that restores the exercise date the tree's grid misses. All
    (option, ex-date) pairs are valued in one vectorised call, grouped by step."""
    times = np.asarray(times, dtype=float)
    amounts = np.asarray(amounts, dtype=float)
    pair_rows, pair_div, pair_step = [], [], []
    for jd, tau in enumerate(times):   # a handful of dividends
        k = np.floor(tau / dt).astype(int)
        inside = is_call & (tau <= t) & (tau > 0) & (tau - k * dt > 1e-12 * t) & (k <= n - 2)
        rows = np.flatnonzero(inside)
        pair_rows.append(rows)
        pair_div.append(np.full(rows.size, jd))
        pair_step.append(k[rows])
    rows = np.concatenate(pair_rows)
    if rows.size == 0:
        return {}
    div = np.concatenate(pair_div)
    step = np.concatenate(pair_step)
    order = np.lexsort((div, -step))
    rows, div, step = rows[order], div[order], step[order]
    tau = times[div]
    # the later dividends' PV at tau, for each pair
    later = np.zeros(rows.size)
    for tau2, amount in zip(times, amounts):
        later += np.where((tau2 > tau) & (tau2 <= t[rows]),
                          amount * np.exp(-r[rows] * (tau2 - tau)), 0.0)
    h = tau - step * dt[rows]
    k_eff = K[rows] - amounts[div] - later
    # a call's floor is 0 at nodes more than 20 standard deviations below its
    # effective strike (and V >= 0 there): each (step, ex-date) group starts at the
    # lowest node any of its pairs needs
    o = rows
    sd = sigma[o] * np.sqrt(h)
    with np.errstate(divide="ignore", invalid="ignore"):
        reach = np.log(Sx[o] / k_eff) + (r[o] - q[o]) * h + _FAR * sd + sd * sd
        first = np.floor(0.5 * (step - reach / sq[o])) - 1
    first = np.where(is_call[o] & (k_eff > 0) & np.isfinite(first),
                     np.clip(first, 0, step + 1), 0).astype(int)
    key = step * times.size + div
    cuts = np.flatnonzero(np.diff(key)) + 1
    bounds = np.concatenate(([0], cuts, [rows.size]))
    group_first = np.minimum.reduceat(first, bounds[:-1])
    first = np.repeat(group_first, np.diff(bounds))
    # flat layout: pair i holds nodes first_i .. step_i
    width = step + 1 - first
    pair = np.repeat(np.arange(rows.size), width)
    start = np.cumsum(width) - width
    j = first[pair] + np.arange(pair.size) - start[pair]
    o = rows[pair]
    nodes = Sx[o] * np.exp(sq[o] * (2 * j - step[pair]))
    disc = np.exp(-r[o] * h[pair])
    fwd = nodes * np.exp((r[o] - q[o]) * h[pair])
    ke = k_eff[pair]
    positive = ke > 0
    value = _black_near_strike(fwd, np.where(positive, ke, 1.0), h[pair], disc, sigma[o],
                               is_call[o])
    sign = np.where(is_call[o], 1.0, -1.0)
    # a non-positive effective strike: the call is a forward, the put worthless
    value = np.where(positive, value, np.maximum(sign * disc * (fwd - ke), 0.0))
    out = {}
    for g, (lo, hi) in enumerate(zip(bounds[:-1], bounds[1:])):
        st, j0 = int(step[lo]), int(group_first[g])
        if j0 > st:
            continue
        block = value[start[lo]:start[lo] + (hi - lo) * (st + 1 - j0)]
        out.setdefault(st, []).append((j0, rows[lo:hi], block.reshape(hi - lo, -1).T))
    return out


def _prepare(values):
    arrays = [as_float_array(v) for v in values[:-1]] + [as_flag_array(values[-1])]
    arrays = np.broadcast_arrays(*arrays)
    return arrays[0].shape, [a.ravel() for a in arrays]


def american_dividend_price(S, K, t, r, q, sigma, is_call, times, amounts,
                            steps: int = DEFAULT_STEPS) -> np.ndarray:
    """Price of American options on an underlying paying cash dividends.

    Parameters
    ----------
    S, K, t, r, q, sigma, is_call : as :func:`optbench.pricing.american.american_price`
        (``q`` a continuous yield beside the cash dividends, usually 0); broadcast.
    times, amounts : 1-d ex-dividend times (years from the quote date) and amounts.
    steps : steps of the finer tree (even).

    Returns
    -------
    ndarray (0-d for scalar input); NaN for bad input or where the dividends' present
    value reaches spot. With ``t <= 0`` or ``sigma <= 0``: the larger of immediate
    exercise and the discounted escrowed forward intrinsic value.

    Examples
    --------
    The known-dividend call of Hull (S = K = 40, r = 9 %, sigma = 30 %, T = 0.5,
    0.50 ex in two and five months; quoted from memory) is worth 3.67 European; the
    American call is worth a little more (early exercise just before the second
    ex-date pays on some paths):

    >>> v = american_dividend_price(40, 40, 0.5, 0.09, 0.0, 0.30, True, [2/12, 5/12], [.5, .5])
    >>> 3.67 <= round(float(v), 2) < 3.75
    True
    """
    shape, (S, K, t, r, q, sigma, is_call) = _prepare((S, K, t, r, q, sigma, is_call))
    times = np.asarray(times, dtype=float).ravel()
    amounts = np.asarray(amounts, dtype=float).ravel()
    steps = max(4, int(steps) + int(steps) % 2)
    out = np.full(S.shape, np.nan)
    with np.errstate(invalid="ignore", over="ignore"):
        tt = np.maximum(t, 0.0)
        pv = pv_dividends(tt, r, times, amounts)
        Sx = S - pv
        valid = np.isfinite(S) & np.isfinite(K) & (S > 0) & (K > 0) & np.isfinite(t) \
            & np.isfinite(r) & np.isfinite(q) & np.isfinite(sigma) & (Sx > 0)
        F = Sx * np.exp((r - q) * tt)
        D = np.exp(-r * tt)
        immediate = np.maximum(np.where(is_call, S - K, K - S), 0.0)
        dead = valid & ((t <= 0) | (sigma <= 0))
        out[dead] = np.maximum(immediate[dead], D[dead] * np.maximum(
            np.where(is_call[dead], F[dead] - K[dead], K[dead] - F[dead]), 0.0))
        live = valid & ~dead
        # a call with no dividend before expiry and no yield is never exercised early
        euro = live & is_call & (q <= 0) & (pv <= 0)
        if euro.any():
            out[euro] = black_price(F[euro], K[euro], t[euro], D[euro], sigma[euro], True)
        tree = live & ~euro
        if tree.any():
            i = np.flatnonzero(tree)
            args = (Sx[i], K[i], t[i], r[i], q[i], sigma[i], is_call[i])
            val = 2.0 * _chunked_tree(args, steps, times, amounts) \
                - _chunked_tree(args, steps // 2, times, amounts)
            euro_i = black_price(F[i], K[i], t[i], D[i], sigma[i], is_call[i])
            out[i] = np.maximum(np.maximum(val, immediate[i]), euro_i)
    return out.reshape(shape)


def american_dividend_implied_vol_with_status(price, S, K, t, r, q, is_call, times, amounts,
                                              steps: int = DEFAULT_STEPS,
                                              max_iter: int = 12):
    """Implied volatility (of the escrowed :math:`S^*`) of American options with cash
    dividends, and a status code per element (codes of
    :mod:`optbench.pricing.implied`). Accuracy is the tree's (see the module Notes)."""
    from optbench.pricing import implied as iv
    from optbench.pricing.american import triage_quotes

    shape, (price, S, K, t, r, q, is_call) = _prepare((price, S, K, t, r, q, is_call))
    times = np.asarray(times, dtype=float).ravel()
    amounts = np.asarray(amounts, dtype=float).ravel()
    with np.errstate(invalid="ignore", over="ignore"):
        pv = pv_dividends(np.maximum(t, 0.0), r, times, amounts)
    # spot must stay above the present value of the dividends (escrowed model)
    vol, status, todo = triage_quotes(price, S, K, t, r, q, is_call,
                                      extra_bad=~(S - pv > 0))

    def A(idx, sigma):
        return american_dividend_price(S[idx], K[idx], t[idx], r[idx], q[idx], sigma,
                                       is_call[idx], times, amounts, steps)

    if todo.size:
        lo = _low_vol(r[todo], q[todo], t[todo], steps)
        a_lo = A(todo, lo)
        flat = price[todo] <= a_lo + 1e-9 * np.maximum(S[todo], K[todo])
        status[todo[flat]] = iv.BELOW_INTRINSIC
        todo, a_lo = todo[~flat], a_lo[~flat]
    if todo.size:
        vol[todo], status[todo] = _solve(A, todo, price[todo], S[todo], K[todo], t[todo],
                                         r[todo], q[todo], is_call[todo], times, amounts,
                                         steps, max_iter, a_lo)
    if len(shape) == 0:
        return float(vol[0]), int(status[0])
    return vol.reshape(shape), status.reshape(shape)


def american_dividend_implied_vol(price, S, K, t, r, q, is_call, times, amounts,
                                  steps: int = DEFAULT_STEPS):
    """:func:`american_dividend_implied_vol_with_status` without the codes (NaN where
    no volatility fits)."""
    return american_dividend_implied_vol_with_status(price, S, K, t, r, q, is_call, times,
                                                     amounts, steps)[0]


def _solve(A, idx, P, S, K, t, r, q, c, times, amounts, steps, max_iter, a_lo):
    """:func:`optbench.pricing.american.bracketed_solve` on the tree (premium step
    from the escrowed European implied vol, bracketed secant steps); bisection for
    the rest (A rises with sigma)."""
    from optbench.pricing import implied as iv
    from optbench.pricing.american import bracketed_solve

    F = escrowed_forward(S, t, r, q, times, amounts)
    D = np.exp(-r * t)
    lo_vol = _low_vol(r, q, t, steps)
    v0, _ = iv.black_implied_vol_with_status(P, F, K, t, D, c)
    sig, done = bracketed_solve(lambda j, sigma: A(idx[j], sigma) - P[j], P, F, K, t, D, c,
                                lo_vol, a_lo, v0, 1e-13 * np.maximum(S, K), max_iter)
    status = np.where(done, iv.OK, iv.NOT_CONVERGED).astype(np.int8)
    rest = np.flatnonzero(~done)
    if rest.size:
        lo = lo_vol[rest].copy()
        hi = np.full(rest.size, 5.0)
        a_lo, a_hi = A(idx[rest], lo), A(idx[rest], hi)
        inside = (a_lo < P[rest]) & (P[rest] < a_hi)
        for _ in range(48):
            mid = 0.5 * (lo + hi)
            up = A(idx[rest], mid) < P[rest]
            lo = np.where(up, mid, lo)
            hi = np.where(up, hi, mid)
        sig[rest] = np.where(inside, 0.5 * (lo + hi), np.nan)
        status[rest] = np.where(inside, iv.OK, np.where(P[rest] <= a_lo, iv.BELOW_INTRINSIC,
                                                        iv.ABOVE_MAX))
    return np.where(status == iv.OK, sig, np.nan), status
