"""The straightforward pandas path of the implied forwards, kept only to check the
vectorised one in :mod:`optbench.pricing.forwards` against (bit for bit): one
structured-array key per quote for the pairing, a ``groupby`` per expiry, a frame
per expiry's fit, one dict per expiry row. The helpers that did not change
(``_given``, ``_pv``, ``_cash_carry``, ``_wls_line``, ``_weighted_median``) are
shared with the module.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from optbench.pricing.forwards import (FORWARD_COLUMNS, _cash_carry, _given, _pv,
                                       _weighted_median, _wls_line)


def reference_parity_pairs(quotes: pd.DataFrame) -> pd.DataFrame:
    """Strikes of each expiry where the call and the put are both quoted two-sided.

    Returns a frame with ``expiry, t, strike, c_mid, p_mid, c_spread, p_spread``, one
    row per pair in the order of the calls' spreads (tightest first). Where a side is
    quoted twice, its tightest quote is used. Vectorised over the quotes (no
    per-expiry frames): the pairs are matched by an integer id of (expiry, strike).
    """
    bid = quotes["bid"].to_numpy(float)
    ask = quotes["ask"].to_numpy(float)
    with np.errstate(invalid="ignore"):
        good = (bid > 0) & (ask >= bid) & np.isfinite(bid) & np.isfinite(ask)
    idx = np.flatnonzero(good)
    # tightest first (the sort pandas' sort_values uses), then one quote per
    # (expiry, strike, side): the first, i.e. the tightest
    idx = idx[np.argsort((ask - bid)[idx], kind="quicksort")]
    expiry = quotes["expiry"].to_numpy()[idx]
    strike = quotes["strike"].to_numpy(float)[idx]
    is_call = quotes["is_call"].to_numpy(bool)[idx]
    key = np.empty(idx.size, dtype=[("e", expiry.dtype), ("k", "f8"), ("c", "?")])
    key["e"], key["k"], key["c"] = expiry, strike, is_call
    _, first = np.unique(key, return_index=True)
    keep = np.sort(first)
    idx, key = idx[keep], key[keep]
    _, pair_id = np.unique(key[["e", "k"]], return_inverse=True)
    pair_id = pair_id.ravel()
    call_at = np.flatnonzero(key["c"])
    put_of = np.full(pair_id.max() + 1 if pair_id.size else 0, -1)
    put_at = np.flatnonzero(~key["c"])
    put_of[pair_id[put_at]] = put_at
    match = put_of[pair_id[call_at]] if call_at.size else call_at
    calls, puts = idx[call_at[match >= 0]], idx[match[match >= 0]]
    mid = 0.5 * (bid + ask)
    spread = ask - bid
    return pd.DataFrame({
        "expiry": quotes["expiry"].to_numpy()[calls], "t": quotes["t"].to_numpy()[calls],
        "strike": quotes["strike"].to_numpy(float)[calls], "c_mid": mid[calls],
        "p_mid": mid[puts], "c_spread": spread[calls], "p_spread": spread[puts]})


def reference_implied_forwards(quotes: pd.DataFrame, spot: float, rate: float, div_yield: float,
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
    expiries = quotes.groupby("expiry", sort=True)["t"].first()
    if "style" in quotes.columns:
        american_quote = quotes["style"].astype(str).str.lower() == "american"
        all_american = american_quote.groupby(quotes["expiry"]).all()
    else:
        all_american = pd.Series(False, index=expiries.index)
    pairs = reference_parity_pairs(quotes)
    grouped = dict(tuple(pairs.groupby("expiry"))) if len(pairs) else {}
    times, amounts = dividends if dividends is not None else ((), ())
    rows = []
    for expiry, t in expiries.items():  # one fit per expiry (a handful), not per quote
        t = float(t)
        pv = _pv(t, rate, times, amounts)
        row = _given(expiry, t, spot, rate, div_yield, pv)
        g = grouped.get(expiry)
        use_parity = t > 0 and not (all_american.get(expiry, False) and american != "parity")
        if use_parity and g is not None and len(g) >= min_pairs:
            fit = _fit_expiry(g, t, spot, rate, n_near, min_pairs)
            if fit is not None:
                row = {"expiry": expiry, "t": t, **fit, "pv_dividends": pv,
                       "dividend_forward": row["dividend_forward"],
                       "cash_carry": _cash_carry(fit, spot, pv, t)}
        rows.append(row)
    out = pd.DataFrame(rows, columns=FORWARD_COLUMNS)
    return out.sort_values("t", kind="stable").reset_index(drop=True)

def _fit_expiry(g: pd.DataFrame, t: float, spot: float, rate: float, n_near: int,
                min_pairs: int):
    k = g["strike"].to_numpy(float)
    y = (g["c_mid"] - g["p_mid"]).to_numpy(float)
    spread2 = (g["c_spread"] ** 2 + g["p_spread"] ** 2).to_numpy(float)
    near = np.argsort(np.abs(y))[:n_near]
    k, y, spread2 = k[near], y[near], spread2[near]
    w = 1.0 / np.maximum(spread2, 1e-12 * max(spot, 1.0) ** 2)
    keep = np.ones(k.size, dtype=bool)
    a, b, se_b, res = _wls_line(k, y, w)
    for _ in range(2):  # trim outliers, refit
        if not np.all(np.isfinite(res)):
            break
        mad = np.median(np.abs(res[keep]))
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
