"""Sanity gates: do the inputs agree with each other, and is the history fit to model?

These checks run before any model is fitted (``compare`` and so ``hedge``, ``screen``
and the workbench; ``fit`` and ``backtest`` run the history checks). Each returns the
warnings the user should see with the answer (they go into the result objects'
``warnings``) and raises :class:`~optbench.errors.InputError` — one line, with both
numbers — where the inputs cannot describe the same market. Pure: arrays and small
objects in, lists of strings out.

Tolerances (common practice; stated here and in ``docs/methodology.md``)
-----------------------------------------------------------------------
**Prices that should agree** — the history's last close, the chain's spot (file,
``meta.toml`` or ``--spot``), the spot implied by put-call parity on the quotes, and
a ``--spot`` override against the file's own spot:

- within :data:`PRICE_WARN` (5 %) of each other: fine (dividends, a close taken at
  another time of day than the quotes, an adjusted close);
- beyond 5 % and within a factor :data:`PRICE_GROSS` (2): a warning with both
  numbers;
- a factor of 2 or more apart: an error with both numbers (a price on the wrong
  scale, another underlying's file, a mistyped override).

The spot the quotes imply is :math:`S = (C - P + K e^{-rt})\\,e^{qt}` per strike with
both a call and a put quoted two-sided (put-call parity, Hull, *Options, Futures,
and Other Derivatives*, ch. 11), at the given rate and yield, the median over all
such strikes of European quotes.

**Dates**: the history's last close more than :data:`STALE_DAYS` (5) calendar days
before the quote date is a warning (a weekend plus a holiday is normal); more than
:data:`STALE_DAYS_GROSS` (31) an error — the forecast would start a month before the
quotes. Closes after the quote date are not used (no look-ahead).

**Degenerate histories** (:func:`history_findings`):

- fewer than :data:`MIN_USABLE_RETURNS` (250, about a year) returns after cleaning:
  an error that says how many rows cleaning dropped;
- a one-day move of a factor :data:`JUMP_FACTOR` (10) or more
  (:math:`|r_t| \\ge \\ln 10`): an error naming the day — a close on the wrong scale
  or an unadjusted split, not a market move a volatility model should learn from;
- :data:`FLAT_RUN_WARN` (10) or more consecutive unchanged closes: a warning (stale
  prices); :data:`FLAT_RUN_STOP` (20) or more ending at the last close, or unchanged
  closes on more than half of the days: an error (the forecast would start from, or
  be dominated by, a price that did not move).

**Plausible forecasts**: an annualised forecast vol outside
:data:`PLAUSIBLE_VOL` ([1 %, 300 %]) is flagged wherever it is shown (the comparison
then gives no verdict for that expiry).
"""
from __future__ import annotations

import datetime as _dt
import math

import numpy as np
import pandas as pd

from optbench.errors import InputError

PRICE_WARN = 0.05
PRICE_GROSS = 2.0
STALE_DAYS = 5
STALE_DAYS_GROSS = 31
MIN_USABLE_RETURNS = 250
JUMP_FACTOR = 10.0
FLAT_RUN_WARN = 10
FLAT_RUN_STOP = 20
PLAUSIBLE_VOL = (0.01, 3.0)

_TOLERANCE = (f"tolerance: a warning beyond {PRICE_WARN:.0%}, an error at a factor of "
              f"{PRICE_GROSS:g}")


def _money(x: float) -> str:
    return f"{x:,.2f}" if abs(x) < 1e12 else f"{x:.3g}"


def compare_prices(a: float, a_name: str, b: float, b_name: str, *,
                   source: str) -> str | None:
    """A warning (or an InputError) when two prices of the same underlying disagree.

    Returns None within :data:`PRICE_WARN`, a warning text up to a factor
    :data:`PRICE_GROSS`, and raises beyond it. Non-finite or non-positive inputs
    are not compared (None).
    """
    a, b = float(a), float(b)
    if not (math.isfinite(a) and math.isfinite(b) and a > 0 and b > 0):
        return None
    ratio = max(a / b, b / a)
    if ratio >= PRICE_GROSS:
        raise InputError(source, f"{a_name} {_money(a)} and {b_name} {_money(b)} differ by "
                                 f"a factor of {ratio:,.3g}: they cannot be the same "
                                 f"underlying on the same day ({_TOLERANCE})")
    if ratio - 1.0 > PRICE_WARN:
        return (f"{a_name} {_money(a)} and {b_name} {_money(b)} differ by "
                f"{100 * (a / b - 1):+.1f}% (beyond {PRICE_WARN:.0%}): check that the "
                "files describe the same underlying and day")
    return None


def parity_spot(quotes: pd.DataFrame, rate: float, div_yield: float) -> float:
    """Median over strikes of the spot put-call parity implies, European quotes only.

    :math:`S = (C - P + K e^{-rt}) e^{qt}` per (expiry, strike) with a two-sided call
    and put (Hull, ch. 11); NaN when no such strike exists. Pure numpy (the keys are
    matched with ``np.intersect1d``), so it adds little to a comparison's time.
    """
    q = quotes
    if not len(q):
        return math.nan
    t = q["t"].to_numpy(float)
    bid = q["bid"].to_numpy(float)
    ask = q["ask"].to_numpy(float)
    ok = (t > 0) & (bid > 0) & (ask >= bid)
    if "style" in q.columns:
        ok &= (q["style"] != "american").to_numpy(dtype=bool)   # canonical words
    if not ok.any():
        return math.nan
    expiry = q["expiry"].to_numpy()[ok]
    strike = q["strike"].to_numpy(float)[ok]
    call = q["is_call"].to_numpy(bool)[ok]
    mid = 0.5 * (bid[ok] + ask[ok])
    t = t[ok]
    _, e_code = np.unique(expiry, return_inverse=True)
    _, k_code = np.unique(strike, return_inverse=True)
    key = e_code.astype(np.int64) * (int(k_code.max()) + 1) + k_code
    c_keys, c_first = np.unique(key[call], return_index=True)
    p_keys, p_first = np.unique(key[~call], return_index=True)
    _, ci, pi = np.intersect1d(c_keys, p_keys, assume_unique=True, return_indices=True)
    if not ci.size:
        return math.nan
    c_rows = np.flatnonzero(call)[c_first[ci]]
    p_rows = np.flatnonzero(~call)[p_first[pi]]
    tt = t[c_rows]
    with np.errstate(over="ignore", invalid="ignore"):
        s = (mid[c_rows] - mid[p_rows] + strike[c_rows] * np.exp(-rate * tt)) \
            * np.exp(div_yield * tt)
    s = s[np.isfinite(s) & (s > 0)]
    return float(np.median(s)) if s.size else math.nan


def input_consistency(chain, history) -> list[str]:
    """Spot, parity-implied spot, a spot override and the history's last close and
    date, against each other (tolerances in the module docstring).

    ``chain`` is an :class:`~optbench.data.chain.OptionChain`, ``history`` a
    :class:`~optbench.data.history.PriceHistory` already cut at the quote date.
    """
    out: list[str] = []
    spot = float(chain.spot)
    spot_source = getattr(chain, "spot_source", "file")
    spot_arg = "--spot" if spot_source == "caller" else chain.source
    spot_name = f"the chain's spot [{spot_source}]"
    last_close = float(history.close[-1])
    last_day = pd.Timestamp(history.dates[-1]).date()
    close_name = f"the history's last close ({last_day.isoformat()})"

    ref = float(getattr(chain, "spot_reference", math.nan))
    if spot_source == "caller" and math.isfinite(ref):
        ref_name = f"the spot in the {getattr(chain, 'spot_reference_source', 'file')}"
        out.append(compare_prices(spot, "--spot", ref, ref_name, source="--spot"))
    out.append(compare_prices(spot, spot_name, last_close, close_name, source=spot_arg))
    implied = parity_spot(chain.quotes, float(chain.rate), float(chain.div_yield))
    if math.isfinite(implied):
        out.append(compare_prices(spot, spot_name, implied,
                                  "the spot put-call parity implies from the quotes",
                                  source=spot_arg))
        out.append(compare_prices(last_close, close_name, implied,
                                  "the spot put-call parity implies from the quotes",
                                  source=history.source))

    asof = chain.asof
    behind = (asof - last_day).days
    if behind > STALE_DAYS_GROSS:
        raise InputError(history.source, f"the history ends on {last_day.isoformat()}, "
                                         f"{behind} days before the quote date "
                                         f"{asof.isoformat()}: the forecast would start "
                                         f"that long before the quotes (an error beyond "
                                         f"{STALE_DAYS_GROSS} days)")
    if behind > STALE_DAYS:
        out.append(f"the history ends on {last_day.isoformat()}, {behind} calendar days "
                   f"before the quote date {asof.isoformat()} (beyond {STALE_DAYS}): "
                   "forecasts run from the day after the last close")
    return [w for w in out if w]


def _runs_of_true(mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Start indices and lengths of the runs of True in a boolean array."""
    m = np.concatenate([[False], np.asarray(mask, bool), [False]]).astype(np.int8)
    d = np.diff(m)
    starts = np.flatnonzero(d == 1)
    ends = np.flatnonzero(d == -1)
    return starts, ends - starts


def history_findings(history) -> list[str]:
    """Degenerate histories: too few returns, jumps of orders of magnitude, long
    stretches of unchanged closes (rules in the module docstring). Returns warnings
    and raises :class:`InputError` where no forecast should be made."""
    out: list[str] = []
    r = np.asarray(history.returns, float)
    dates = np.asarray(history.dates, dtype="datetime64[D]")
    close = np.asarray(history.close, float)
    dropped = dict(getattr(history, "dropped", {}) or {})
    if r.size < MIN_USABLE_RETURNS:
        why = ""
        if dropped:
            why = (" after cleaning dropped " + ", ".join(f"{n} {k}" for k, n in
                                                          dropped.items()) + " rows")
        raise InputError(history.source, f"only {r.size} usable daily returns{why}; the "
                                         f"volatility model needs at least "
                                         f"{MIN_USABLE_RETURNS} (about a year)")
    with np.errstate(invalid="ignore"):
        jump = np.flatnonzero(np.abs(r) >= math.log(JUMP_FACTOR))
    if jump.size:
        i = int(jump[0])
        more = f" ({jump.size} such days)" if jump.size > 1 else ""
        raise InputError(history.source, f"the close moves from {_money(close[i])} on "
                                         f"{dates[i]} to {_money(close[i + 1])} on "
                                         f"{dates[i + 1]}, a factor of "
                                         f"{math.exp(abs(r[i])):,.3g} in one day{more}: a "
                                         "price on the wrong scale or an unadjusted split "
                                         f"(an error from a factor of {JUMP_FACTOR:g})")
    flat = r == 0.0
    share = float(flat.mean()) if r.size else 0.0
    if share > 0.5:
        raise InputError(history.source, f"the close is constant (unchanged) on "
                                         f"{int(flat.sum())} of {r.size} days ({share:.0%}): "
                                         "not a traded price a volatility model can learn "
                                         "from")
    starts, lengths = _runs_of_true(flat)
    if lengths.size:
        k = int(np.argmax(lengths))
        longest, start = int(lengths[k]), int(starts[k])
        at_end = starts + lengths == r.size
        if at_end.any() and int(lengths[at_end][0]) >= FLAT_RUN_STOP:
            n_end = int(lengths[at_end][0])
            raise InputError(history.source, f"the last {n_end + 1} closes are the same "
                                             f"price {_money(close[-1])} (from "
                                             f"{dates[-n_end - 1]}): stale prices; the "
                                             "forecast would start from a market that "
                                             "did not trade")
        if longest >= FLAT_RUN_WARN:
            out.append(f"history: {longest + 1} consecutive closes unchanged at "
                       f"{_money(close[start])} from {dates[start]} to "
                       f"{dates[start + longest]} (stale prices?)")
    return out


def implausible_forecast(vol: float) -> bool:
    """True when an annualised forecast vol lies outside :data:`PLAUSIBLE_VOL`."""
    v = float(vol)
    return math.isfinite(v) and not PLAUSIBLE_VOL[0] <= v <= PLAUSIBLE_VOL[1]


def forecast_flag(expiry: _dt.date, vol: float) -> str:
    """The warning a forecast outside the plausible range carries."""
    return (f"{expiry.isoformat()}: forecast vol {100 * vol:,.4g}% is outside the "
            f"plausible range {PLAUSIBLE_VOL[0]:.0%} to {PLAUSIBLE_VOL[1]:.0%}; no verdict "
            "is given for it — check the price history")
