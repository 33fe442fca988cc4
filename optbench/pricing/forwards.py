r"""Implied forward and discount factor per expiry from put-call parity.

Notes
-----
For European options on one expiry, put-call parity (Hull, *Options, Futures, and
Other Derivatives*, ch. 11; Stoll 1969) gives for every strike

.. math::  C(K) - P(K) = D\,(F - K),

a straight line in :math:`K` with slope :math:`-D` and intercept :math:`D F`.
optbench takes, per expiry, the strikes where both the call and the put are quoted
on both sides (bid > 0, ask >= bid), keeps the ``n_near`` of them nearest the money
(smallest :math:`|C - P|`, where parity quotes are tightest), and fits the line by
weighted least squares with weights :math:`1/(\text{spread}_C^2 + \text{spread}_P^2)`,
dropping pairs whose residual is more than three robust standard deviations
(1.4826 x the median absolute residual) from the line and refitting (a common-practice
trimming rule). The fitted discount is kept when it is well determined (its rate
:math:`-\ln D / t` has a standard error under 25 basis points and lies in a sensible
range); otherwise the given rate sets :math:`D = e^{-rt}` and the forward is the
weighted median of :math:`K + (C-P)/D`. The implied carry (dividend yield plus borrow)
is :math:`q = r - \ln(F/S)/t`. With fewer than ``min_pairs`` usable pairs, or a
forward outside half to twice spot, the expiry falls back to the given rate and
yield, :math:`F = S e^{(r-q)t}`, and says so in ``source``.

**Cash dividends.** Given a dividend schedule (``dividends=(times, amounts)``), the
carry forward is the escrowed-dividend forward
:math:`F = (S - PV(t))\,e^{(r-q)t}` (:mod:`optbench.pricing.cash_dividends`; Hull
ch. 15), used for every expiry that falls back to the given inputs. Where parity
gives the forward, the dividend forward is kept beside it (``dividend_forward``) and
:func:`forward_disagreements` names the expiries where the two differ by more than
``DIVIDEND_FORWARD_TOLERANCE`` (0.5 % of the forward, a chosen threshold: about one
missing or misdated dividend of a typical size). ``cash_carry``
:math:`= r - \ln(F/(S - PV))/t` is the continuous carry left beside the cash dividends
(the tree of :mod:`optbench.pricing.american_dividends` takes it as its yield); it is
the implied ``carry`` when no schedule is given.

Parity is exact for European exercise only; for American chains the fitted forward
is an approximation (the early-exercise premia of the call and the put differ), so
``implied_forwards`` uses the given rate and yield for expiries whose quotes are
all American unless ``american="parity"`` is passed.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

FORWARD_COLUMNS = ["expiry", "t", "forward", "discount", "rate", "carry", "source",
                   "discount_source", "n_pairs", "pv_dividends", "dividend_forward",
                   "cash_carry"]

#: largest relative gap between the parity forward and the dividend forward
#: before :func:`forward_disagreements` names the expiry (a chosen threshold)
DIVIDEND_FORWARD_TOLERANCE = 0.005


def _weighted_median(values: np.ndarray, weights: np.ndarray) -> float:
    order = np.argsort(values)
    v, w = values[order], weights[order]
    c = np.cumsum(w)
    return float(v[np.searchsorted(c, 0.5 * c[-1])])


def _median(values: np.ndarray) -> float:
    """``numpy.median`` of a short 1-d array of finite numbers, without its generic
    machinery: the middle value of the sorted values, or the sum of the two middle
    ones divided by 2 (numpy's mean of the two, the same floating-point operations)."""
    v = np.sort(values)
    m = v.size // 2
    if v.size == 0:
        return np.median(values)
    if v.size % 2:
        return v[m]
    return (v[m - 1] + v[m]) / 2


def _wls_line(k, y, w):
    """Weighted least squares y = a + b k; returns a, b, se_b, residuals."""
    sw = w.sum()
    km = (w * k).sum() / sw
    ym = (w * y).sum() / sw
    sxx = (w * (k - km) ** 2).sum()
    if sxx <= 0:
        return np.nan, np.nan, np.inf, np.full_like(y, np.nan)
    b = (w * (k - km) * (y - ym)).sum() / sxx
    a = ym - b * km
    res = y - a - b * k
    n = k.size
    if n > 2:
        s2 = (w * res ** 2).sum() / (n - 2)
        se_b = np.sqrt(s2 / sxx)
    else:
        se_b = np.inf
    return a, b, se_b, res


def parity_pairs(quotes: pd.DataFrame) -> pd.DataFrame:
    """Strikes of each expiry where the call and the put are both quoted two-sided.

    Returns a frame with ``expiry, t, strike, c_mid, p_mid, c_spread, p_spread``, one
    row per pair in the order of the calls' spreads (tightest first). Where a side is
    quoted twice, its tightest quote is used. Vectorised over the quotes (no
    per-expiry frames): the pairs are matched by an integer id of (expiry, strike).
    """
    bid = quotes["bid"].to_numpy(float)
    ask = quotes["ask"].to_numpy(float)
    expiry = quotes["expiry"].to_numpy()
    codes, _ = pd.factorize(expiry, use_na_sentinel=True)
    calls, puts = _pair_positions(codes, quotes["strike"].to_numpy(float),
                                  quotes["is_call"].to_numpy(bool), bid, ask)
    mid = 0.5 * (bid + ask)
    spread = ask - bid
    return pd.DataFrame({
        "expiry": expiry[calls], "t": quotes["t"].to_numpy()[calls],
        "strike": quotes["strike"].to_numpy(float)[calls], "c_mid": mid[calls],
        "p_mid": mid[puts], "c_spread": spread[calls], "p_spread": spread[puts]})


def _pair_positions(expiry_codes: np.ndarray, strike: np.ndarray, is_call: np.ndarray,
                    bid: np.ndarray, ask: np.ndarray):
    """Row positions ``(calls, puts)`` of the parity pairs, calls in the order of
    their spreads (tightest first), from integer expiry codes (-1 for none).

    Two-sided quotes (bid > 0, ask >= bid) are sorted by spread; the first quote of
    each (expiry, strike, side) is kept (the tightest); a call is paired with the put
    of its (expiry, strike). The key of a quote is one integer
    ``(expiry code * strikes + strike code) * 2 + is_call``.
    """
    with np.errstate(invalid="ignore"):
        good = (bid > 0) & (ask >= bid) & np.isfinite(bid) & np.isfinite(ask)
    # a quote without an expiry or with a NaN strike matches no other quote
    good &= (expiry_codes >= 0) & ~np.isnan(strike)
    idx = np.flatnonzero(good)
    # tightest first (the sort pandas' sort_values uses)
    idx = idx[np.argsort((ask - bid)[idx], kind="quicksort")]
    e = expiry_codes[idx].astype(np.int64)
    k_uniq, k = np.unique(strike[idx], return_inverse=True)
    c = is_call[idx]
    key = (e * max(k_uniq.size, 1) + k.ravel()) * 2 + c
    # np.unique's return_index sorts stably: the first (tightest) quote of each key
    _, first = np.unique(key, return_index=True)
    keep = np.sort(first)
    idx, key, c = idx[keep], key[keep], c[keep]
    pair = key >> 1
    call_at = np.flatnonzero(c)
    put_at = np.flatnonzero(~c)
    order = np.argsort(pair[put_at], kind="stable")
    put_pairs = pair[put_at][order]
    where = np.searchsorted(put_pairs, pair[call_at])
    found = where < put_pairs.size
    found[found] = put_pairs[where[found]] == pair[call_at][found]
    return idx[call_at[found]], idx[put_at[order[where[found]]]]


def implied_forwards(quotes: pd.DataFrame, spot: float, rate: float, div_yield: float,
                     *, n_near: int = 10, min_pairs: int = 3,
                     american: str = "given", dividends=None) -> pd.DataFrame:
    """Implied forward, discount, rate and carry for every expiry of a chain.

    Parameters
    ----------
    quotes : canonical quotes frame (columns ``expiry, strike, is_call, bid, ask, t``;
        ``style`` optional).
    spot : underlying price; rate, div_yield : the given continuously compounded rate
        and yield (decimals), used where parity cannot be trusted.
    n_near : pairs nearest the money used in the fit.
    min_pairs : fewer usable pairs than this -> the given rate and yield.
    american : ``"given"`` (default: all-American expiries use the given rate and
        yield) or ``"parity"`` (fit them anyway, as an approximation).
    dividends : optional ``(times, amounts)``, ex-dividend times in years from the
        quote date and cash amounts; the carry forward becomes the escrowed-dividend
        forward.

    Returns
    -------
    DataFrame, one row per expiry sorted by ``t``: ``expiry, t, forward, discount,
    rate`` (decimal, -ln(D)/t), ``carry`` (implied yield + borrow, decimal),
    ``source`` (``"parity"`` or ``"given"``), ``discount_source`` (``"parity"`` or
    ``"given"``), ``n_pairs`` (pairs kept in the fit), ``pv_dividends`` (present
    value of the cash dividends before the expiry, 0 without a schedule),
    ``dividend_forward`` (the carry forward from spot, the given rate and yield and the
    dividends), ``cash_carry`` (carry beside the cash dividends, see Notes).
    """
    for col in ("expiry", "strike", "is_call", "bid", "ask", "t"):
        if col not in quotes.columns:
            raise ValueError(f"quotes frame lacks column {col!r}")
    spot = float(spot)
    rate = float(rate)
    div_yield = float(div_yield)
    if not (np.isfinite(spot) and spot > 0):
        raise ValueError(f"spot must be a positive number, got {spot}")
    # one integer code per expiry (sorted; NaT -> -1, as groupby drops it)
    codes, uniq = _expiry_codes(quotes["expiry"])
    n_exp = len(uniq)
    has = codes >= 0
    t_all = quotes["t"].to_numpy()
    # the first non-missing t of each expiry (NaN when it has none)
    dated = np.flatnonzero(has & ~pd.isna(t_all))
    first_code, first_at = np.unique(codes[dated], return_index=True)
    t_exp = np.full(n_exp, np.nan)
    t_exp[first_code] = t_all[dated[first_at]].astype(float)
    if "style" in quotes.columns:
        american_quote = _is_american(quotes["style"])[has]
        rows_of = np.bincount(codes[has], minlength=n_exp)
        american_of = np.bincount(codes[has], weights=american_quote, minlength=n_exp)
        all_american = american_of == rows_of
    else:
        all_american = np.zeros(n_exp, bool)
    bid = quotes["bid"].to_numpy(float)
    ask = quotes["ask"].to_numpy(float)
    strike = quotes["strike"].to_numpy(float)
    calls, puts = _pair_positions(codes, strike, quotes["is_call"].to_numpy(bool), bid, ask)
    mid = 0.5 * (bid + ask)
    spread = ask - bid
    # pairs grouped by expiry, each group in pair order
    pair_code = codes[calls]
    by_expiry = np.argsort(pair_code, kind="stable")
    bounds = np.searchsorted(pair_code[by_expiry], np.arange(n_exp + 1))
    times, amounts = dividends if dividends is not None else ((), ())
    rows = []
    for i in range(n_exp):  # one fit per expiry (a handful), not per quote
        expiry, t = uniq[i], float(t_exp[i])
        pv = _pv(t, rate, times, amounts)
        row = _given(expiry, t, spot, rate, div_yield, pv)
        g = by_expiry[bounds[i]:bounds[i + 1]]
        use_parity = t > 0 and not (all_american[i] and american != "parity")
        if use_parity and g.size and g.size >= min_pairs:
            c, p = calls[g], puts[g]
            fit = _fit_expiry(strike[c], mid[c] - mid[p], spread[c] ** 2 + spread[p] ** 2,
                              t, spot, rate, n_near, min_pairs)
            if fit is not None:
                row = {"expiry": expiry, "t": t, **fit, "pv_dividends": pv,
                       "dividend_forward": row["dividend_forward"],
                       "cash_carry": _cash_carry(fit, spot, pv, t)}
        rows.append(row)
    if not rows:
        return pd.DataFrame(rows, columns=FORWARD_COLUMNS)
    order = np.argsort(np.array([r["t"] for r in rows], dtype=float), kind="stable")
    columns = {c: [rows[j][c] for j in order] for c in FORWARD_COLUMNS}
    columns["expiry"] = uniq[order]
    for c in ("t", "forward", "discount", "rate", "carry", "pv_dividends",
              "dividend_forward", "cash_carry"):
        columns[c] = np.array(columns[c], dtype=float)
    columns["n_pairs"] = np.array(columns["n_pairs"], dtype=np.int64)
    for c in ("source", "discount_source"):
        # text in the dtype pandas gives a list of words: the same column, built faster
        columns[c] = pd.array(columns[c], dtype=_text_dtype())
    # the dict holds FORWARD_COLUMNS in order, every value a new array of its own
    return pd.DataFrame(columns, copy=False)


_TEXT_DTYPE = None


def _text_dtype():
    """The dtype pandas gives a column made of a list of words (``str`` from pandas
    3, ``object`` before), found once."""
    global _TEXT_DTYPE
    if _TEXT_DTYPE is None:
        _TEXT_DTYPE = pd.DataFrame({"w": ["given"]})["w"].dtype
    return _TEXT_DTYPE


def _expiry_codes(expiry: pd.Series):
    """``pandas.factorize(expiry, sort=True)``: an integer code per quote (-1 for a
    missing expiry) and the distinct expiries in order. A datetime64 column is coded
    by ``numpy.unique`` on its values (the same codes and dates, without the index
    pandas builds); other columns by pandas."""
    values = expiry.to_numpy()
    if values.dtype.kind != "M":
        return pd.factorize(expiry, sort=True, use_na_sentinel=True)
    nat = np.isnat(values)
    if nat.any():
        uniq, inv = np.unique(values[~nat], return_inverse=True)
        codes = np.full(values.shape, -1, dtype=np.intp)
        codes[~nat] = inv.ravel()
        return codes, uniq
    if values.size and (values[1:] >= values[:-1]).all():
        # already in order (the loader sorts quotes by expiry): each run one code
        new = np.empty(values.size, dtype=bool)
        new[0] = True
        np.not_equal(values[1:], values[:-1], out=new[1:])
        return (np.cumsum(new) - 1).astype(np.intp), values[new]
    uniq, inv = np.unique(values, return_inverse=True)
    return inv.ravel().astype(np.intp), uniq


def _is_american(style: pd.Series) -> np.ndarray:
    """True where a ``style`` cell reads ``american`` (any case); a categorical
    column is read once per category."""
    if isinstance(style.dtype, pd.CategoricalDtype):
        cat = style.array  # the Categorical itself (no accessor built)
        categories = cat.categories.tolist()  # one conversion, not one per label
        if all(isinstance(c, str) and c.isascii() for c in categories):
            # plain ASCII words (the canonical european/american): lower case is the
            # same by Python's rules and pyarrow's
            cats = np.array([c.lower() == "american" for c in categories], dtype=bool)
        else:
            cats = (pd.Series(cat.categories).astype(str).str.lower()
                    == "american").to_numpy(bool)
        codes = np.asarray(cat.codes)
        table = np.append(cats, str(np.nan).lower() == "american")
        return table[codes]
    return (style.astype(str).str.lower() == "american").to_numpy(bool)


def _pv(t, rate, times, amounts) -> float:
    """Present value of the dividends going ex in (0, t] (0.0 without any)."""
    if len(times) == 0:
        return 0.0
    from optbench.pricing.cash_dividends import pv_dividends
    return float(pv_dividends(t, rate, times, amounts))


def _cash_carry(fit: dict, spot: float, pv: float, t: float) -> float:
    """Carry beside the cash dividends implied by a parity forward (NaN when the
    dividends' present value reaches spot)."""
    if pv == 0.0:
        return fit["carry"]
    base = spot - pv
    return float(fit["rate"] - np.log(fit["forward"] / base) / t) if base > 0 else np.nan


def _given(expiry, t, spot, rate, div_yield, pv=0.0):
    forward = (spot - pv) * np.exp((rate - div_yield) * t)
    carry = div_yield if pv == 0.0 else (
        rate - np.log(forward / spot) / t if forward > 0 and t > 0 else np.nan)
    return {"expiry": expiry, "t": t, "forward": forward,
            "discount": np.exp(-rate * t), "rate": rate, "carry": carry,
            "source": "given", "discount_source": "given", "n_pairs": 0,
            "pv_dividends": pv, "dividend_forward": forward, "cash_carry": div_yield}


def forward_disagreements(forwards: pd.DataFrame,
                          tolerance: float = DIVIDEND_FORWARD_TOLERANCE) -> list[str]:
    """One line per parity-forward expiry whose forward differs from the dividend
    forward by more than ``tolerance`` (relative); meant for runs with a dividend
    schedule, where the gap says the schedule and the quotes disagree."""
    out = []
    for row in forwards.itertuples(index=False):   # one row per expiry
        if row.source != "parity" or not np.isfinite(row.dividend_forward):
            continue
        gap = row.forward / row.dividend_forward - 1.0
        if abs(gap) > tolerance:
            day = pd.Timestamp(row.expiry).date().isoformat()
            out.append(f"{day}: the put-call parity forward {row.forward:.4g} differs from "
                       f"the dividend-schedule forward {row.dividend_forward:.4g} by "
                       f"{100 * gap:+.2f}% (the parity forward is used; check the "
                       "dividends, rate and spot)")
    return out


def _fit_expiry(k: np.ndarray, y: np.ndarray, spread2: np.ndarray, t: float,
                spot: float, rate: float, n_near: int, min_pairs: int):
    """The parity line of one expiry from its pairs' strikes ``k``, call minus put
    mids ``y`` and summed squared spreads ``spread2`` (Notes of this module)."""
    near = np.argsort(np.abs(y))[:n_near]
    k, y, spread2 = k[near], y[near], spread2[near]
    w = 1.0 / np.maximum(spread2, 1e-12 * max(spot, 1.0) ** 2)
    keep = np.ones(k.size, dtype=bool)
    a, b, se_b, res = _wls_line(k, y, w)
    for _ in range(2):  # trim outliers, refit
        if not np.all(np.isfinite(res)):
            break
        mad = _median(np.abs(res[keep]))
        scale = 1.4826 * mad
        if scale <= 0:
            break
        new_keep = np.abs(res) <= 3 * scale
        if new_keep.sum() < min_pairs or np.array_equal(new_keep, keep):
            break
        keep = new_keep
        a, b, se_b, _ = _wls_line(k[keep], y[keep], w[keep])
        res = y - a - b * k
    n_pairs = int(keep.sum())
    D = -b
    discount_source = "parity"
    r_fit = -np.log(D) / t if np.isfinite(D) and D > 0 else np.nan
    se_r = se_b / (D * t) if np.isfinite(r_fit) else np.inf
    if not (np.isfinite(r_fit) and -0.05 <= r_fit <= 0.25 and se_r < 0.0025):
        D = np.exp(-rate * t)
        discount_source = "given"
        F = _weighted_median(k[keep] + y[keep] / D, w[keep])
    else:
        F = a / D
    if not (np.isfinite(F) and 0.5 * spot <= F <= 2.0 * spot):
        return None
    r_used = -np.log(D) / t
    return {"forward": float(F), "discount": float(D), "rate": float(r_used),
            "carry": float(r_used - np.log(F / spot) / t), "source": "parity",
            "discount_source": discount_source, "n_pairs": n_pairs}
