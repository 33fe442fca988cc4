"""The straightforward pandas path of the per-quote implied vols, kept only to check
the array path of :mod:`optbench.pricing.quotes` against (bit for bit): the forwards
frame indexed by expiry and ``reindex``-ed per quote, the quotes frame copied and
extended column by column.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from optbench.pricing.implied import black_implied_vol_with_status
from optbench.pricing.quotes import _NAMES


def reference_quote_implied_vols(quotes: pd.DataFrame, forwards: pd.DataFrame,
                       spot: float | None = None, dividends=None) -> pd.DataFrame:
    """Per-quote implied volatilities on each expiry's forward and discount.

    Parameters
    ----------
    quotes : canonical quotes frame (``expiry, strike, is_call, bid, ask, mid, t``;
        ``style`` optional, default European).
    forwards : frame from :func:`~optbench.pricing.forwards.implied_forwards`
        (``expiry, forward, discount, rate, carry``).
    spot : underlying price; needed only for American-style quotes.
    dividends : optional ``(times, amounts)`` of cash dividends (years from the quote
        date); American quotes are then inverted with the dividends at their dates.

    Returns
    -------
    A copy of ``quotes`` with ``forward``, ``discount``, ``log_moneyness``
    (ln(K/F)), ``iv_bid``, ``iv_mid``, ``iv_ask`` (decimals, NaN where none fits),
    ``status`` (name for the mid, e.g. ``"ok"``), ``status_bid`` and
    ``status_ask``.
    """
    for col in ("expiry", "strike", "is_call", "bid", "ask", "t"):
        if col not in quotes.columns:
            raise ValueError(f"quotes frame lacks column {col!r}")
    fw = forwards.set_index("expiry")
    missing = set(quotes["expiry"].unique()) - set(fw.index)
    if missing:
        raise ValueError(f"no forward for expiry {sorted(missing)[0]}")
    out = quotes.copy()
    F = fw["forward"].reindex(out["expiry"]).to_numpy(float)
    D = fw["discount"].reindex(out["expiry"]).to_numpy(float)
    out["forward"] = F
    out["discount"] = D
    K = out["strike"].to_numpy(float)
    t = out["t"].to_numpy(float)
    c = out["is_call"].to_numpy(bool)
    with np.errstate(divide="ignore", invalid="ignore"):
        out["log_moneyness"] = np.log(K / F)
    bid = out["bid"].to_numpy(float)
    ask = out["ask"].to_numpy(float)
    mid = out["mid"].to_numpy(float) if "mid" in out.columns else 0.5 * (bid + ask)
    # the three sides in one vectorised call
    prices = np.concatenate([bid, mid, ask])
    n = len(out)
    vol, st = black_implied_vol_with_status(prices, np.tile(F, 3), np.tile(K, 3),
                                            np.tile(t, 3), np.tile(D, 3), np.tile(c, 3))
    if "style" in out.columns:
        am = out["style"].astype(str).str.lower().eq("american").to_numpy()
        if am.any():
            if spot is None:
                raise ValueError("spot is needed for American-style quotes")
            r = fw["rate"].reindex(out["expiry"]).to_numpy(float)
            i = np.flatnonzero(np.tile(am, 3))
            j = i % n
            if dividends is not None and len(dividends[0]):
                from optbench.pricing.american_dividends import (
                    american_dividend_implied_vol_with_status)
                q = fw["cash_carry"].reindex(out["expiry"]).to_numpy(float)
                va, sa = american_dividend_implied_vol_with_status(
                    prices[i], float(spot), K[j], t[j], r[j], q[j], c[j], *dividends)
            else:
                from optbench.pricing.american import american_implied_vol_with_status
                q = fw["carry"].reindex(out["expiry"]).to_numpy(float)
                va, sa = american_implied_vol_with_status(prices[i], float(spot), K[j],
                                                          t[j], r[j], q[j], c[j])
            vol[i] = va
            st[i] = sa
    out["iv_bid"] = vol[:n]
    out["iv_mid"] = vol[n:2 * n]
    out["iv_ask"] = vol[2 * n:]
    out["status"] = _NAMES[st[n:2 * n]]
    out["status_bid"] = _NAMES[st[:n]]
    out["status_ask"] = _NAMES[st[2 * n:]]
    return out


def reference_compare_quote_vols(q: pd.DataFrame, fwd: pd.DataFrame, spot: float,
                                 dividends=None):
    """What the comparison read from the quotes frame before it read the arrays."""
    iv = reference_quote_implied_vols(q, fwd, spot, dividends=dividends)
    idx = pd.Index(fwd["expiry"]).get_indexer(q["expiry"])
    r = fwd["rate"].to_numpy(float)[idx]
    carry = fwd["carry"].to_numpy(float)[idx]
    american = (q["style"].astype(str).str.lower() == "american").to_numpy() \
        if "style" in q.columns else np.zeros(len(q), bool)
    vols = iv[["iv_bid", "iv_mid", "iv_ask"]].to_numpy(float).T
    return (iv["forward"].to_numpy(float), iv["discount"].to_numpy(float), r, carry, vols,
            american)
