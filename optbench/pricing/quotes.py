r"""Bid, mid and ask implied volatilities for every quote of a chain.

Notes
-----
Each quote is priced on its own expiry's forward :math:`F` and discount :math:`D`
(from :func:`optbench.pricing.forwards.implied_forwards`): European quotes with the
Black-76 inversion :math:`\sigma(P; F, K, t, D)` (Black 1976; Jäckel 2015), American
quotes with the tree-based inversion of :mod:`optbench.pricing.american` on spot with
that expiry's rate :math:`r = -\ln D/t` and carry :math:`q = r - \ln(F/S)/t`.
A bid of zero has no implied volatility (status ``below_intrinsic``). With a cash
dividend schedule, American quotes use the escrowed-dividend tree of
:mod:`optbench.pricing.american_dividends` with the expiry's ``cash_carry`` as yield.

The smile is built from out-of-the-money quotes (:func:`otm_quotes`): puts struck
below the forward and calls at or above it, the side where quotes carry time value
only and are the most liquid (common practice).
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np
import pandas as pd

from optbench.pricing.forwards import _is_american
from optbench.pricing.implied import STATUS_NAMES, black_implied_vol_with_status

_NAMES = np.array([STATUS_NAMES[i] for i in range(len(STATUS_NAMES))], dtype=object)


class QuoteVols(NamedTuple):
    """Per-quote arrays of :func:`quote_vol_arrays` (length n, in the quotes' order).

    ``forward``, ``discount``, ``rate``, ``carry``: the quote's expiry's values from the
    forwards frame; ``vols``: (3, n) bid, mid and ask implied vols (decimals, NaN where
    none fits); ``status``: (3, n) int8 status codes of the same
    (:data:`optbench.pricing.implied.STATUS_NAMES`); ``american``: bool.
    """

    forward: np.ndarray
    discount: np.ndarray
    rate: np.ndarray
    carry: np.ndarray
    vols: np.ndarray
    status: np.ndarray
    american: np.ndarray


def quote_vol_arrays(quotes: pd.DataFrame, forwards: pd.DataFrame,
                     spot: float | None = None, dividends=None) -> QuoteVols:
    """The per-quote forwards, discounts and bid/mid/ask implied vols of
    :func:`quote_implied_vols` as arrays (no frame built): what the comparison reads.

    Parameters and method as :func:`quote_implied_vols`.
    """
    for col in ("expiry", "strike", "is_call", "bid", "ask", "t"):
        if col not in quotes.columns:
            raise ValueError(f"quotes frame lacks column {col!r}")
    at = _expiry_rows(forwards["expiry"], quotes["expiry"])
    if (at < 0).any():
        missing = set(quotes["expiry"].unique()) - set(forwards["expiry"])
        raise ValueError(f"no forward for expiry {sorted(missing)[0]}")

    def per_quote(name):
        return forwards[name].to_numpy(float)[at]

    F = per_quote("forward")
    D = per_quote("discount")
    r = per_quote("rate")
    carry = per_quote("carry")
    K = quotes["strike"].to_numpy(float)
    t = quotes["t"].to_numpy(float)
    c = quotes["is_call"].to_numpy(bool)
    bid = quotes["bid"].to_numpy(float)
    ask = quotes["ask"].to_numpy(float)
    mid = quotes["mid"].to_numpy(float) if "mid" in quotes.columns else 0.5 * (bid + ask)
    # the three sides in one vectorised call
    prices = np.concatenate([bid, mid, ask])
    n = len(quotes)
    vol, st = black_implied_vol_with_status(prices, np.tile(F, 3), np.tile(K, 3),
                                            np.tile(t, 3), np.tile(D, 3), np.tile(c, 3))
    am = _is_american(quotes["style"]) if "style" in quotes.columns else np.zeros(n, bool)
    if am.any():
        if spot is None:
            raise ValueError("spot is needed for American-style quotes")
        i = np.flatnonzero(np.tile(am, 3))
        j = i % n
        if dividends is not None and len(dividends[0]):
            from optbench.pricing.american_dividends import (
                american_dividend_implied_vol_with_status)
            q = per_quote("cash_carry")
            va, sa = american_dividend_implied_vol_with_status(
                prices[i], float(spot), K[j], t[j], r[j], q[j], c[j], *dividends)
        else:
            from optbench.pricing.american import american_implied_vol_with_status
            va, sa = american_implied_vol_with_status(prices[i], float(spot), K[j],
                                                      t[j], r[j], carry[j], c[j])
        vol[i] = va
        st[i] = sa
    return QuoteVols(forward=F, discount=D, rate=r, carry=carry, vols=vol.reshape(3, n),
                     status=st.reshape(3, n), american=am)


def _expiry_rows(listed: pd.Series, wanted: pd.Series) -> np.ndarray:
    """Row of ``listed`` (distinct expiries) holding each of ``wanted``, -1 where none:
    ``pandas.Index(listed).get_indexer(wanted)``, by a sorted search when both are
    datetime64 of one unit (no index built)."""
    lv, wv = listed.to_numpy(), wanted.to_numpy()
    if lv.dtype.kind != "M" or lv.dtype != wv.dtype or not lv.size or np.isnat(lv).any():
        return pd.Index(listed).get_indexer(wanted)
    order = np.argsort(lv, kind="stable")
    ranked = lv[order]
    if (ranked[1:] == ranked[:-1]).any():    # an expiry listed twice
        return pd.Index(listed).get_indexer(wanted)
    pos = np.minimum(np.searchsorted(ranked, wv), ranked.size - 1)
    return np.where(ranked[pos] == wv, order[pos], -1).astype(np.intp)


def quote_implied_vols(quotes: pd.DataFrame, forwards: pd.DataFrame,
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
    a = quote_vol_arrays(quotes, forwards, spot, dividends)
    with np.errstate(divide="ignore", invalid="ignore"):
        log_moneyness = np.log(quotes["strike"].to_numpy(float) / a.forward)
    added = {"forward": a.forward, "discount": a.discount, "log_moneyness": log_moneyness,
             "iv_bid": a.vols[0], "iv_mid": a.vols[1], "iv_ask": a.vols[2],
             "status": _NAMES[a.status[1]], "status_bid": _NAMES[a.status[0]],
             "status_ask": _NAMES[a.status[2]]}
    out = quotes.copy()
    for name, values in added.items():
        out[name] = values
    return out


def otm_quotes(frame: pd.DataFrame) -> pd.DataFrame:
    """The out-of-the-money side of each strike: puts with K < F, calls with K >= F.

    ``frame`` needs ``strike``, ``is_call`` and ``forward`` (as returned by
    :func:`quote_implied_vols`).
    """
    K = frame["strike"].to_numpy(float)
    F = frame["forward"].to_numpy(float)
    c = frame["is_call"].to_numpy(bool)
    keep = np.where(c, K >= F, K < F)
    return frame.loc[keep]
