"""Validation rules for option quotes: one named reason per rejected row.

Every quote a file holds ends up either used or rejected with exactly one reason,
the first rule in :data:`REASONS` that it breaks. Quotes that are usable but
deserve a second look are kept and flagged (:data:`WARNINGS`). All rules are
evaluated as whole-column array operations.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

# reason code -> what it means; the order is the order rules are applied in
REASONS: dict[str, str] = {
    "bad_symbol": "option symbol is not an OCC symbol (root, YYMMDD, C/P, strike x 1000)",
    "missing_field": "a required field (expiry, strike, type, bid, ask) is empty",
    "bad_date": "expiry or quote date is not a readable date between 1900 and 2200",
    "bad_number": "strike, bid, ask or multiplier is not a finite number (multiplier > 0)",
    "bad_type": "option type is not call/put (C/P)",
    "bad_style": "exercise style is not european/american",
    "symbol_mismatch": "option symbol disagrees with the expiry, strike or type columns",
    "other_underlying": "row is for another underlying than the chain's",
    "other_quote_date": "row is quoted on another date than the chain's as-of date",
    "nonpositive_strike": "strike is zero or negative",
    "implausible_strike": "strike further from spot than the plausible factor (default 10x)",
    "expired": "expiry is on or before the quote date",
    "negative_quote": "bid or ask is negative",
    "crossed": "crossed market: ask below bid",
    "no_bid": "no bid (bid is zero)",
    "duplicate": "same contract (expiry, strike, type, multiplier) as an earlier row",
    "below_intrinsic": "mid below the no-arbitrage lower bound (discounted intrinsic value)",
    "above_upper_bound": "mid above the no-arbitrage upper bound (call > spot, put > discounted strike)",
    "wide_spread": "bid-ask spread wider than the limit (relative to mid)",
}

WARNINGS: dict[str, str] = {
    "stale": "no volume and no open interest: the quote may be stale",
    "tiny_price": "mid below the tiny-price threshold: dominated by the tick size",
    "bad_optional_field": "last, volume, open interest or IV unreadable; left empty",
}

# absolute and relative tolerance of the no-arbitrage bounds (rounding of quotes,
# spot and rate): a mid must miss a bound by more than 0.01 + 0.05% of the bound
BOUND_TOL_ABS = 0.01
BOUND_TOL_REL = 5e-4


def _g(values) -> np.ndarray:
    return np.char.mod("%g", np.asarray(values, dtype=float))


class _Assigner:
    """Keeps the first reason (and its detail) given to each row."""

    def __init__(self, n: int) -> None:
        self.reason = np.full(n, "", dtype=object)
        self.detail = np.full(n, "", dtype=object)
        self.open = np.ones(n, dtype=bool)

    def apply(self, code: str, mask: np.ndarray, detail) -> None:
        assert code in REASONS, code
        mask = np.asarray(mask, dtype=bool)
        if not mask.any():          # the usual case: no row breaks the rule
            return
        sel = mask & self.open
        if not sel.any():
            return
        self.reason[sel] = code
        self.open[sel] = False
        if callable(detail):
            self.detail[sel] = detail(sel)
        elif isinstance(detail, np.ndarray):
            self.detail[sel] = detail[sel]
        else:
            self.detail[sel] = detail


def no_arbitrage_bounds(spot: float, strike: np.ndarray, t: np.ndarray, rate: float,
                        div_yield: float, is_call: np.ndarray,
                        american: np.ndarray,
                        pv_dividends=0.0) -> tuple[np.ndarray, np.ndarray]:
    """Static lower and upper bounds of an option's price.

    Notes
    -----
    With discount D = e^{-rt} and dividend factor Q = e^{-qt}:
    European call  max(0, S·Q − K·D) ≤ C ≤ S;
    European put   max(0, K·D − S·Q) ≤ P ≤ K·D;
    American options are worth at least their undiscounted intrinsic value
    (max(0, S − K) for calls, max(0, K − S) for puts) and an American put at most K.
    Hull, *Options, Futures, and Other Derivatives*, ch. 11 (properties of stock
    options); Merton (1973), "Theory of rational option pricing". With cash dividends
    of present value ``pv_dividends`` before each expiry the European bounds use
    S − PV in place of S (Hull ch. 11, "effect of dividends").
    """
    disc = np.exp(-rate * t)
    qf = np.exp(-div_yield * t)
    s_ex = spot - np.asarray(pv_dividends, dtype=float)
    eu_call = np.maximum(0.0, s_ex * qf - strike * disc)
    eu_put = np.maximum(0.0, strike * disc - s_ex * qf)
    lower = np.where(is_call, eu_call, eu_put)
    intrinsic = np.where(is_call, np.maximum(0.0, spot - strike),
                         np.maximum(0.0, strike - spot))
    lower = np.where(american, np.maximum(lower, intrinsic), lower)
    upper = np.where(is_call, spot, np.where(american, strike, strike * disc))
    return lower, upper


def _contracts_distinct(expiry: np.ndarray, strike: np.ndarray, is_call: np.ndarray,
                        mult: np.ndarray) -> bool:
    """True when no two rows hold the same contract, seen from the rows' order alone:
    one multiplier, rows in runs of one (expiry, type) whose strikes rise strictly, and
    no (expiry, type) in two runs — a chain written expiry by expiry. False says only
    that the order does not show it (then :func:`first_of_contract` looks).

    The rows are the live ones of :func:`assign_reasons`: dated expiries, finite
    positive strikes and multipliers, so equality is plain numeric equality."""
    n = expiry.size
    if n < 2 or expiry.dtype.kind != "M" or strike.dtype.kind != "f" \
            or mult.dtype.kind != "f" or is_call.dtype.kind != "b":
        return n < 2
    if not (mult == mult[0]).all():
        return False
    e = expiry.view(np.int64)
    if (e == np.iinfo(np.int64).min).any():      # NaT: leave it to the full search
        return False
    new_run = (e[1:] != e[:-1]) | (is_call[1:] != is_call[:-1])
    if not ((strike[1:] > strike[:-1]) | new_run).all():
        return False
    starts = np.flatnonzero(np.r_[True, new_run])
    run_e, run_c = e[starts], is_call[starts]
    order = np.lexsort((run_c, run_e))
    run_e, run_c = run_e[order], run_c[order]
    return not ((run_e[1:] == run_e[:-1]) & (run_c[1:] == run_c[:-1])).any()


def first_of_contract(*keys: np.ndarray) -> np.ndarray:
    """For each row, the position of the first row with the same key (the row itself
    when it is the first): keys compared column by column, missing values (NaN, NaT)
    equal to each other, as ``pandas.DataFrame.duplicated`` compares rows.

    Each column is coded by ``pandas.factorize`` (hashing, no sort); the codes are
    combined into one integer by place value (coded again whenever the product of the
    columns' sizes could overflow) and coded once more. Those final codes number the
    keys in order of first appearance, so a key's first row is where its code first
    exceeds every code before it.
    """
    fast = _first_of_sorted_keys(keys)
    if fast is not None:
        return fast
    ids = np.zeros(len(keys[0]), dtype=np.int64)
    size = 1
    for col in keys:
        codes, uniq = pd.factorize(col, use_na_sentinel=False)
        if size * max(len(uniq), 1) >= 2 ** 62:
            ids = pd.factorize(ids)[0].astype(np.int64)
            size = int(ids.max()) + 1 if ids.size else 1
        ids = ids * max(len(uniq), 1) + codes
        size *= max(len(uniq), 1)
    ids = pd.factorize(ids)[0].astype(np.int64)
    if not ids.size:
        return ids
    seen_before = np.maximum.accumulate(np.r_[-1, ids[:-1]])
    first_rows = np.flatnonzero(ids > seen_before)
    return first_rows[ids]


def _first_of_sorted_keys(keys) -> np.ndarray | None:
    """:func:`first_of_contract` for keys that are numpy numbers, booleans or dates
    (None for any other key): the rows sorted by their keys (``numpy.lexsort``, stable,
    so each key's rows keep their order), a new key wherever a column changes from the
    row before (NaN equal to NaN, NaT to NaT, -0.0 to 0.0: the equality of
    ``pandas.factorize``), and each row pointed at its key's first row."""
    cols = []
    for col in keys:
        a = np.asarray(col)
        if a.dtype.kind == "M":
            a = a.view(np.int64)             # NaT is one integer: equal to itself
        elif a.dtype.kind == "f":
            a = a.astype(np.float64) + 0.0    # -0.0 + 0.0 is 0.0
        elif a.dtype.kind not in "biu":
            return None
        cols.append(a)
    n = cols[0].size
    if n == 0:
        return np.zeros(0, dtype=np.int64)
    order = np.lexsort(cols[::-1])           # the first key sorts first
    new_key = np.zeros(n, dtype=bool)
    new_key[0] = True
    for a in cols:
        s = a[order]
        differs = s[1:] != s[:-1]
        if s.dtype.kind == "f":
            differs &= ~(np.isnan(s[1:]) & np.isnan(s[:-1]))
        new_key[1:] |= differs
    starts = np.flatnonzero(new_key)
    first_sorted = order[starts][np.cumsum(new_key) - 1]
    out = np.empty(n, dtype=np.int64)
    out[order] = first_sorted
    return out


def assign_reasons(p, *, spot: float, rate: float, div_yield: float,
                   max_spread: float | None,
                   max_strike_ratio: float | None = None,
                   dividends=None) -> tuple[np.ndarray, np.ndarray]:
    """The rejection reason ('' for a kept row) and its detail for every row.

    Parameters
    ----------
    p : mapping of str -> ndarray
        Parsed rows (one array per field, all the same length): ``expiry``
        (datetime64), ``strike``, ``bid``, ``ask``, ``multiplier`` (float, NaN where
        unreadable), ``is_call`` (bool; meaningless where ``bad_type``),
        ``american`` (bool), ``calendar_days`` (float), ``line`` (int), the boolean
        masks ``missing_<field>``, ``bad_symbol``, ``bad_date``, ``bad_number``,
        ``bad_type``, ``bad_style``, ``symbol_mismatch``, ``other_underlying``,
        ``other_quote_date``, and the detail texts ``bad_number_detail`` and
        ``symbol_mismatch_detail``.
    spot, rate, div_yield : float
        Spot (price units), continuously compounded rate and yield (decimals).
    max_spread : float or None
        Largest accepted (ask − bid) / mid; None switches the rule off.
    max_strike_ratio : float or None
        Strikes outside ``[spot / ratio, spot * ratio]`` are ``implausible_strike``;
        None switches the rule off.
    dividends : optional ``(times, amounts)`` of cash dividends (years from the quote
        date); the European price bounds then allow for them.
    """
    n = len(p["line"])
    a = _Assigner(n)
    a.apply("bad_symbol", np.asarray(p["bad_symbol"]), "symbol not readable")
    for field in ("expiry", "strike", "type", "bid", "ask"):
        a.apply("missing_field", np.asarray(p[f"missing_{field}"]), f"no {field}")
    a.apply("bad_date", np.asarray(p["bad_date"]), "expiry not a date in 1900-2200")
    if "bad_quote_date" in p:
        a.apply("bad_date", np.asarray(p["bad_quote_date"]), "quote date not a date in 1900-2200")
    a.apply("bad_number", np.asarray(p["bad_number"]), np.asarray(p["bad_number_detail"]))
    a.apply("bad_type", np.asarray(p["bad_type"]), "type not call/put")
    a.apply("bad_style", np.asarray(p["bad_style"]), "style not european/american")
    a.apply("symbol_mismatch", np.asarray(p["symbol_mismatch"]),
            np.asarray(p["symbol_mismatch_detail"]))
    a.apply("other_underlying", np.asarray(p["other_underlying"]), "another underlying")
    a.apply("other_quote_date", np.asarray(p["other_quote_date"]), "another quote date")

    strike = np.asarray(p["strike"], dtype=float)
    bid = np.asarray(p["bid"], dtype=float)
    ask = np.asarray(p["ask"], dtype=float)
    days = np.asarray(p["calendar_days"], dtype=float)
    mult = np.asarray(p["multiplier"], dtype=float)
    a.apply("nonpositive_strike", strike <= 0, lambda s: "strike " + _g(strike[s]))
    if max_strike_ratio is not None:
        with np.errstate(over="ignore", invalid="ignore"):
            far = (strike > spot * max_strike_ratio) | (strike < spot / max_strike_ratio)
        a.apply("implausible_strike", far,
                lambda s: "strike " + _g(strike[s]) + f" outside spot {spot:g} "
                + f"/ x {max_strike_ratio:g}")
    a.apply("bad_number", mult <= 0, lambda s: "multiplier " + _g(mult[s]))
    a.apply("expired", days <= 0,
            lambda s: "expiry " + np.datetime_as_string(
                np.asarray(p["expiry"])[s], unit="D").astype(object))
    a.apply("negative_quote", (bid < 0) | (ask < 0),
            lambda s: "bid " + _g(bid[s]) + ", ask " + _g(ask[s]))
    a.apply("crossed", ask < bid, lambda s: "ask " + _g(ask[s]) + " < bid " + _g(bid[s]))
    a.apply("no_bid", bid == 0, lambda s: "bid 0, ask " + _g(ask[s]))

    live = a.open.copy()
    is_call = np.asarray(p["is_call"], dtype=bool)
    if live.any():
        keys = (np.asarray(p["expiry"])[live], strike[live], is_call[live], mult[live])
        dup = np.zeros(keys[0].size, dtype=bool) if _contracts_distinct(*keys) else None
        if dup is None:
            first = first_of_contract(*keys)
            dup = first != np.arange(first.size)
        if dup.any():
            first_line = np.asarray(p["line"])[live][first]
            mask = np.zeros(n, dtype=bool)
            mask[np.flatnonzero(live)[dup]] = True
            lines = np.zeros(n, dtype=np.int64)
            lines[live] = first_line
            a.apply("duplicate", mask, lambda s: "same contract as line "
                    + lines[s].astype(str).astype(object))

    live = a.open.copy()
    mid = 0.5 * (bid + ask)
    t = np.where(live, days, 0.0) / 365.0
    pv = 0.0
    if dividends is not None:
        from optbench.pricing.cash_dividends import pv_dividends
        pv = pv_dividends(t, rate, *dividends)
    lower, upper = no_arbitrage_bounds(spot, np.where(live, strike, 0.0), t, rate,
                                       div_yield, is_call, np.asarray(p["american"], dtype=bool),
                                       pv_dividends=pv)
    tol_lo = BOUND_TOL_ABS + BOUND_TOL_REL * lower
    tol_hi = BOUND_TOL_ABS + BOUND_TOL_REL * upper
    a.apply("below_intrinsic", live & (mid < lower - tol_lo),
            lambda s: "mid " + _g(mid[s]) + " < lower bound " + _g(np.round(lower[s], 4)))
    a.apply("above_upper_bound", live & (mid > upper + tol_hi),
            lambda s: "mid " + _g(mid[s]) + " > upper bound " + _g(np.round(upper[s], 4)))
    if max_spread is not None:
        with np.errstate(divide="ignore", invalid="ignore"):
            rel = (ask - bid) / mid
        a.apply("wide_spread", live & (rel > max_spread),
                lambda s: "spread " + _g(np.round(100 * rel[s], 1)) + "% of mid > "
                + f"{100 * max_spread:g}%")
    return a.reason, a.detail


def quote_warnings(volume: np.ndarray, open_interest: np.ndarray, mid: np.ndarray,
                   bad_optional: np.ndarray, *, tiny_price: float) -> pd.Categorical:
    """Comma-separated warning flags per kept quote ('' when none), as a categorical.

    ``stale``: the row reports volume and/or open interest and every reported one
    is zero. ``tiny_price``: mid below ``tiny_price`` (price units).
    ``bad_optional_field``: an optional cell was unreadable and left empty.
    """
    known = np.isfinite(volume) | np.isfinite(open_interest)
    zero_or_none = ((~np.isfinite(volume)) | (volume == 0)) & \
                   ((~np.isfinite(open_interest)) | (open_interest == 0))
    flags = [("stale", known & zero_or_none), ("tiny_price", mid < tiny_price),
             ("bad_optional_field", bad_optional)]
    # each combination of flags is one category: code = sum of 2**i over set flags
    codes = np.zeros(len(mid), dtype=np.int16)
    for i, (_, mask) in enumerate(flags):
        codes += (np.asarray(mask, dtype=bool) << i).astype(np.int16)
    return pd.Categorical.from_codes(codes, dtype=_warning_dtype(), validate=False)


def _warning_dtype() -> pd.CategoricalDtype:
    """The categories of :func:`quote_warnings`: every combination of its three flags,
    in code order (built once; checking the categories costs more than the codes)."""
    global _WARNING_DTYPE
    if _WARNING_DTYPE is None:
        flags = ("stale", "tiny_price", "bad_optional_field")
        _WARNING_DTYPE = pd.CategoricalDtype(
            [",".join(f for i, f in enumerate(flags) if code >> i & 1)
             for code in range(2 ** len(flags))])
    return _WARNING_DTYPE


_WARNING_DTYPE = None
