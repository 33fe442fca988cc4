"""The comparison: is the volatility an option chain charges rich or cheap against the
fitted model's forecast, per expiry and per strike?

:func:`compare` orchestrates the other parts of optbench (loading, implied forwards,
implied vols, smile fits, model-free variance, static-arbitrage checks, the GARCH-family
fit, its forecast band and simulation, realized vol and the cone) and returns one
frozen :class:`~optbench.analysis.results.Comparison`. It computes nothing those parts
already compute; what is its own is listed below.

Notes
-----
**ATM implied vol.** ATM means strike = forward. The mid ATM vol is the expiry's
fitted smile at log-moneyness 0 (:func:`optbench.analysis.smile.smile_points`); the bid
and ask ATM vols are the bid and ask implied vols of the out-of-the-money quotes
(puts below the forward, calls above) interpolated linearly in log-moneyness
:math:`k = \\ln(K/F)` at :math:`k = 0`. The ATM vol is only read where quotes with a
mid implied vol lie on both sides of the forward within ``ATM_MAX_DISTANCE`` (10 %) in
:math:`|k|`; otherwise it is unavailable (NaN, verdict ``n/a``, with a warning) and never
extrapolated from a far strike. A smile fit whose ATM vol lies outside the ATM bid–ask
vols is not used for it: the interpolated mid quotes are (and a warning says so);
``smile["atm_source"]`` names which (``smile``, ``interpolated quotes`` or
``unavailable``).

**Sanity gates.** Before any model runs, :mod:`optbench.analysis.sanity` checks the
inputs against each other (spot, the parity-implied spot, a ``--spot`` override, the
history's last close and date) and the history for degenerate stretches; its warnings,
and every row the history loader dropped, are part of ``warnings``. A forecast outside
the plausible range is flagged and gets no verdict.

**Forecast and band.** ``forecast_vol`` is the model's annualised average vol over the
trading days to expiry, :math:`\\sqrt{252\\,\\tfrac1h\\sum_{k\\le h} E[\\sigma^2_{T+k}]}`;
``forecast_low``/``forecast_high`` are the ``band`` quantiles of that forecast over the
estimated parameters' sampling distribution
(:meth:`optbench.volatility.garch.GarchFit.forecast_band`).

**Verdict.** rich if ATM IV > ``forecast_high``, cheap if ATM IV < ``forecast_low``,
else fair — the implied vol is called rich or cheap only when it lies outside what the
model, allowing for the uncertainty of its own parameters, expects.

**Variance risk premium.** :math:`VRP = \\sigma_{ATM}^2 - \\hat\\sigma_{fc}^2`, annualised
variance, with the model forecast in place of the expected realized variance
(Bollerslev, Tauchen & Zhou, "Expected stock returns and variance risk premia",
*Review of Financial Studies* 22, 2009, who use implied minus expected realized
variance). The ratio is :math:`\\sigma_{ATM}/\\hat\\sigma_{fc}`.

**Probability that realized ends above implied.** The fitted model is simulated from
the day after the last return (``n_paths`` paths, ``seed``) to the longest expiry; on
each path the realized vol to each expiry is
:math:`\\sqrt{252/h\\,\\sum_{k\\le h} r_k^2}` and the probability is the share of paths
where it exceeds the ATM implied vol. This is the model's *physical* distribution.

**Drift of the simulated prices.** Every simulated terminal price and probability
uses the drift of :mod:`optbench.analysis.drift`: by default :math:`r - q` (no
expected excess return), an excess return the user sets, or the fitted mean only when
asked for; the volatility dynamics are the fitted model's.

**Protection verdict.** Per expiry, the put nearest 25 delta and the put nearest the
floor judged on their own: the ask against the band of the model-expected discounted
payoff (:mod:`optbench.analysis.protection`).

**Trailing realized vol and the cone.** Close-to-close realized vol over the last
:math:`\\max(h, 5)` trading days (:func:`optbench.volatility.realized.trailing_realized_vol`);
``cone_percentile`` is the percentile rank of the ATM IV among the rolling realized
vols of the cone window nearest :math:`h` (Burghardt & Lane 1990).

**Smile fit.** Raw SVI on the out-of-the-money mid vols of each expiry, vega-weighted
(:func:`optbench.analysis.smile.fit_svi`); on a dense expiry at most
``MAX_SMILE_POINTS`` quotes evenly spaced in log-moneyness enter the fit (the smile's
five parameters are fixed by far fewer points; this keeps large chains fast).

**Per strike.** ``price_at_forecast`` is the Black-Scholes-Merton value at the expiry's
forward and discount with the forecast vol (American exercise for American chains);
``edge_per_contract = (mid - price_at_forecast) * multiplier``;
``edge_vol_points = 100 (iv_mid - forecast_vol)`` (the exact vol-point gap that
prices the edge) and ``edge_per_vega = (mid - price_at_forecast) / vega_per_vol_point``
with vega at the quote's mid implied vol (at the forecast vol where no mid vol fits),
its first-order approximation — far from the money the two differ because vega
changes with the vol.
"""
from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Callable, Sequence
from pathlib import Path

import numpy as np
import pandas as pd

from optbench.analysis.drift import choose_drift, simulate_terminal
from optbench.analysis.protection import (DEFAULT_FLOOR, MIN_PAYING_PATHS, PROTECTION_RULE,
                                          choose_puts, judge_puts)
from optbench.analysis.results import (CAUTION, STRIKE_COLUMNS, VERDICT_RULE, Comparison,
                                       ExpiryRow, ModelSummary, verdict_for)
from optbench.analysis.strike_tables import StrikeTables
from optbench.errors import InputError

DEFAULT_N_PATHS = 2000
#: width of the one-day price band kept with the history, in conditional sigmas
BAND_SIGMAS = 3.0
DEFAULT_SEED = 7
DEFAULT_BAND = (0.05, 0.95)
MIN_REALIZED_WINDOW = 5
#: most out-of-the-money quotes per expiry given to the smile fit (evenly spaced in k)
MAX_SMILE_POINTS = 200
#: the ATM vol needs a quote with a mid implied vol on each side of the forward within
#: this distance in log-moneyness |ln(K/F)| (10 %), else it is unavailable
ATM_MAX_DISTANCE = 0.10

CONVENTIONS = {
    "vol": "annualised decimal (0.215 = 21.5%); a vol point is 0.01",
    "option_time": "calendar days / 365 from the quote date's end of day",
    "model_horizon": "trading days after the quote date up to expiry, annualised with 252",
    "rates": "continuously compounded decimals",
    "atm": "strike equal to the expiry's forward",
    "moneyness": "strike / forward",
    "delta": "Black-Scholes-Merton spot delta at the mid implied vol",
    "forecast_band": "quantiles of the forecast over the model's parameter uncertainty",
    "probabilities": "the fitted model's simulated volatility dynamics with the drift "
                     "named under 'drift' (by default r - q, no expected excess return)",
    "money": "per contract (edge) or whole position, in the underlying's currency",
}


# ------------------------------------------------------------------------ inputs
def _load(source, history, overrides: dict):
    """(chain, history, holidays, source text) from paths, a Scenario or objects."""
    from optbench.data.chain import OptionChain
    from optbench.data.scenario import Scenario

    if isinstance(source, Scenario):
        if overrides:
            raise InputError("compare", "market overrides apply when loading; pass the "
                                        "folder path with the overrides instead")
        hist = source.history if history is None else _history(history)
        return source.chain, hist, tuple(source.holidays), str(source.path)
    if isinstance(source, OptionChain):
        if overrides:
            raise InputError("compare", "market overrides apply when loading; pass the "
                                        "chain file path with the overrides instead")
        if history is None:
            raise InputError("--history", "give the price history of the underlying")
        return source, _history(history), tuple(source.holidays), source.source
    path = Path(source)
    if not path.exists():
        raise InputError(path, "no such file or folder")
    from optbench.data.scenario import load_scenario
    folder = path if path.is_dir() else path.parent
    if history is not None and not isinstance(history, (str, Path)):
        from optbench.data.chain import load_chain
        chain = load_chain(path, **overrides)
        return chain, history, tuple(chain.holidays), str(path)
    if history is None and not (folder / "history.csv").is_file():
        raise InputError("--history", f"{folder} has no history.csv: give the price "
                                      "history with --history FILE")
    kw = dict(overrides)
    if history is not None:
        kw["history"] = history
    sc = load_scenario(path, **kw)
    return sc.chain, sc.history, tuple(sc.holidays or sc.chain.holidays), str(path)


def _history(history):
    if isinstance(history, (str, Path)):
        from optbench.data.history import load_history
        return load_history(history)
    return history


# ------------------------------------------------------------------- per-quote vols
def _quote_vols(q: pd.DataFrame, fwd: pd.DataFrame, spot: float, dividends=None):
    """Per-quote forward, discount, rate, carry and bid/mid/ask implied vols
    (:func:`optbench.pricing.quotes.quote_vol_arrays`; American quotes by the tree,
    with the cash ``dividends`` (times, amounts) at their dates when given)."""
    from optbench.pricing.quotes import quote_vol_arrays

    a = quote_vol_arrays(q, fwd, spot, dividends=dividends)
    return a.forward, a.discount, a.rate, a.carry, a.vols, a.american


def _usable_quotes(q: pd.DataFrame, expiries, source) -> pd.DataFrame:
    """The quotes with time to expiry left (``t > 0``) and, when ``expiries`` are given,
    of those expiries only (the comparison then covers only those), numbered from 0:
    one boolean take of the frame."""
    values = q["expiry"].to_numpy()
    keep = q["t"].to_numpy(float) > 0
    if expiries is not None:
        keep &= _only_expiries(values, keep, expiries, source)
    if keep.all():
        return q.reset_index(drop=True)
    out = q.take(np.flatnonzero(keep))
    out.index = pd.RangeIndex(len(out))   # what reset_index(drop=True) gives, no copy
    return out


def _only_expiries(values: np.ndarray, usable: np.ndarray, expiries,
                   source) -> np.ndarray:
    """Which quotes (expiry ``values``) belong to the chosen expiries; an expiry with no
    ``usable`` quote is an error. Compared per listed expiry, not per quote."""
    listed_values = np.unique(values[usable])
    wanted_days = [pd.Timestamp(e) for e in expiries]
    if values.dtype.kind == "M" and all(
            not pd.isna(w) and w.tz is None and 1900 <= w.year <= 2200 for w in wanted_days):
        # on numpy's dates (the listed ones are the loader's, 1900-2200)
        wanted64 = np.array([w.to_datetime64() for w in wanted_days])
        found = _isin_few(wanted64, listed_values)
        missing = sorted({w for w, f in zip(wanted_days, found) if not f})
        chosen = _isin_few(listed_values, wanted64)
    else:
        listed = pd.to_datetime(listed_values)
        wanted = pd.to_datetime(pd.Index(wanted_days))
        missing = sorted(set(wanted) - set(listed))
        chosen = listed.isin(wanted)
    if missing:
        raise InputError("--expiry", f"{missing[0].date().isoformat()} is not an expiry "
                                     f"with usable quotes in {source}")
    return _isin_few(values, listed_values[chosen])


def _isin_few(values: np.ndarray, few: np.ndarray) -> np.ndarray:
    """``numpy.isin(values, few)`` for a handful of ``few`` (a few expiries): one
    equality test per element of ``few``, which is what numpy.isin does for so few
    (without its dispatch); numpy.isin itself for more."""
    if few.size > 8 or values.dtype != few.dtype:
        return np.isin(values, few)
    out = np.zeros(values.shape, dtype=bool)
    for value in few:
        out |= values == value
    return out


def _expiry_positions(listed: np.ndarray, values: np.ndarray) -> np.ndarray:
    """Position of each quote's expiry (``values``) among the distinct ``listed``
    expiries, -1 where it is not listed (what ``pandas.Index.get_indexer`` gives)."""
    if not listed.size:
        return np.full(values.shape, -1, dtype=np.intp)
    order = np.argsort(listed, kind="stable")
    ranked = listed[order]
    pos = np.minimum(np.searchsorted(ranked, values), ranked.size - 1)
    return np.where(ranked[pos] == values, order[pos], -1)


SMILE_CURVE_POINTS = 121


def _smile_curve(fit, strikes: np.ndarray, forward: float) -> dict:
    """The fitted smile on an even strike grid from the lowest to the highest quoted
    strike: ``{"strike": [...], "iv": [...]}`` (decimal vols)."""
    grid = np.linspace(float(strikes.min()), float(strikes.max()), SMILE_CURVE_POINTS)
    return {"strike": grid.tolist(), "iv": np.asarray(fit.iv(np.log(grid / forward)),
                                                      float).tolist()}


def _interp_at_forward(k: np.ndarray, v: np.ndarray) -> float:
    """Linear interpolation of ``v`` at k = 0 (flat beyond the ends); NaN if empty."""
    ok = np.isfinite(k) & np.isfinite(v)
    if not ok.any():
        return math.nan
    k, v = k[ok], v[ok]
    o = np.argsort(k)
    return float(np.interp(0.0, k[o], v[o]))


# ------------------------------------------------------------------------ compare
def compare(chain, history=None, *, model: str = "auto", dist: str = "t",
            mean: str = "constant", spot: float | None = None,
            asof: _dt.date | str | None = None, rate: float | None = None,
            div_yield: float | None = None, style: str | None = None,
            multiplier: float | None = None, band: tuple[float, float] = DEFAULT_BAND,
            n_paths: int = DEFAULT_N_PATHS, seed: int | None = DEFAULT_SEED,
            backtest: bool | _dt.date | str = False, fit=None,
            expiries: Sequence[_dt.date] | None = None,
            progress: Callable[[str], None] | None = None, drift: str = "risk-free",
            excess_return: float | None = None,
            floor: float = DEFAULT_FLOOR,
            max_strike_ratio: float | None = None, dividends=None,
            lean: bool = False) -> Comparison:
    """Compare the chain's implied vols with the fitted model's forecast.

    Parameters
    ----------
    chain : path to a chain file or scenario folder, a Scenario or an OptionChain.
    history : path or PriceHistory; optional when ``chain`` is a scenario folder (or a
        chain file whose folder holds ``history.csv``).
    model, dist, mean : the volatility model (as ``optbench fit``): ``garch``, ``gjr``,
        ``egarch`` or ``auto`` (lowest BIC); ``normal`` or ``t``; ``constant`` or ``zero``.
    spot, asof, rate, div_yield : market overrides (decimals for rate and yield).
    style, multiplier : exercise style (``european``/``american``) and contract
        multiplier of every option, in place of the file's columns and meta.toml.
    band : quantile levels of the forecast band (default 5 % and 95 %).
    n_paths, seed : simulation behind ``prob_realized_above_iv`` and the hedge.
    backtest : False (default), True (out-of-sample check over the last 252 returns)
        or a split date; adds the backtest summary (and its surprises) to the result.
    fit : a fitted or fixed-parameter model (``GarchFit`` from ``fit_garch`` or
        ``fix_garch`` on this history's returns) to use instead of fitting one; then
        ``model``, ``dist`` and ``mean`` are not used.
    expiries : compare only these expiries (dates listed in the chain); the screen
        uses it to work on the tenors it shows. Static-arbitrage flags across
        expiries then look at these expiries only. Default: every expiry.
    progress : called with a short text before each long step (for views).
    drift, excess_return : the drift of the simulated prices
        (:func:`optbench.analysis.drift.choose_drift`): ``"risk-free"`` (default, plus
        ``excess_return`` a year when given, else the scenario's ``excess_return`` in
        ``meta.toml``) or ``"fitted"`` (the fitted mean).
    floor : the protection floor as a fraction of spot, in (0, 1] (default 0.90).
    max_strike_ratio : the loader's plausible-strike factor (default 10; see
        :func:`optbench.data.chain.load_chain`).
    dividends : cash dividends (a CSV path or a
        :class:`~optbench.data.dividends.DividendSchedule`) in place of the
        scenario's ``meta.toml`` ones; forwards, implied vols and American prices then
        use them (escrowed-dividend model, :mod:`optbench.pricing.cash_dividends`).
    lean : True leaves out what no screen column reads (the screen's rows,
        :mod:`optbench.screening.rows`): the volatility cone (``cone`` is None and each
        row's ``cone_percentile`` NaN), the trailing realized vols (``realized`` is
        empty and each row's ``realized_vol`` NaN), the history frame (``history`` is
        None) and the smiles' plotted curves. Every other number and warning is the
        same as without it.

    Returns
    -------
    Comparison
        See :mod:`optbench.analysis.results` for every field and unit, and this
        module's Notes for the formulas.
    """
    from optbench.analysis.arbitrage import strike_arbitrage
    from optbench.analysis.smile import fit_svi_many, smile_points
    from optbench.pricing.bsm import black_price, bsm_price
    from optbench.pricing.forwards import implied_forwards
    from optbench.pricing.greeks import bsm_greeks
    from optbench.volatility.calendar import trading_days as count_trading_days
    from optbench.volatility.cone import vol_cone
    from optbench.volatility.garch import fit_garch
    from optbench.volatility.realized import trailing_realized_vol

    say = progress or (lambda text: None)
    lo_level, hi_level = (float(band[0]), float(band[1]))
    if not 0 < lo_level < hi_level < 1:
        raise InputError("--band", f"band levels must satisfy 0 < low < high < 1, not {band}")
    if int(n_paths) < 100:
        raise InputError("--paths", f"need at least 100 simulated paths, not {n_paths}")
    floor = _floor(floor)
    overrides = {k: v for k, v in (("spot", spot), ("asof", asof), ("rate", rate),
                                   ("div_yield", div_yield), ("style", style),
                                   ("multiplier", multiplier),
                                   ("max_strike_ratio", max_strike_ratio)) if v is not None}
    say("loading the chain and the history")
    if dividends is not None and isinstance(chain, (str, Path)):
        overrides["dividends"] = dividends       # the loader's price bounds allow for them
        dividends = None
    ch, hist, holidays, source = _load(chain, history, overrides)
    if dividends is not None:
        from optbench.data.dividends import attach_dividends
        ch = attach_dividends(ch, dividends)
    warnings: list[str] = list(getattr(ch, "notes", ()))
    for name, flag in (("rate", "--rate"), ("div_yield", "--div-yield")):
        if getattr(ch, f"{name}_source", "") == "default":
            warnings.append(f"no {name.replace('_', ' ')} in the chain or meta.toml: 0 used "
                            f"where parity cannot tell (give {flag})")
    q = ch.quotes
    if not len(q):
        raise InputError(ch.source, _no_quotes_problem(ch))
    from optbench.analysis import sanity
    warnings.extend(f"history: {issue}" for issue in getattr(hist, "issues", ()))
    hist = _history_upto(hist, ch.asof, warnings)
    warnings.extend(sanity.history_findings(hist))
    warnings.extend(sanity.input_consistency(ch, hist))
    q = _usable_quotes(q, expiries, ch.source)
    S, r0, q0 = float(ch.spot), float(ch.rate), float(ch.div_yield)
    meta_excess, meta_source = _meta_excess(chain)
    drift_choice = choose_drift(drift, excess_return, rate=r0, div_yield=q0,
                                meta_excess=meta_excess, meta_source=meta_source)

    # --- forwards and implied vols (vectorised over every quote)
    say("implied forwards and vols")
    schedule = getattr(ch, "dividends", None)
    divs = schedule.arrays(ch.asof) if schedule is not None else None
    fwd = implied_forwards(q, S, r0, q0, dividends=divs)
    if divs is not None:
        from optbench.pricing.forwards import forward_disagreements
        warnings.extend(forward_disagreements(fwd))
    F, D, r_q, carry_q, vols, american = _quote_vols(q, fwd, S, divs)
    iv_bid, iv_mid, iv_ask = vols
    # the quotes' and expiries' columns, each read from its frame once
    K = q["strike"].to_numpy(float)
    t_q = q["t"].to_numpy(float)
    is_call = q["is_call"].to_numpy(bool)
    exp_q = q["expiry"].to_numpy()
    mid = q["mid"].to_numpy(float)
    bid_q = q["bid"].to_numpy(float)
    ask_q = q["ask"].to_numpy(float)
    fwd_expiry = fwd["expiry"].to_numpy()
    fwd_t = fwd["t"].to_numpy(float)
    fwd_forward = fwd["forward"].to_numpy(float)
    fwd_rate = fwd["rate"].to_numpy(float)
    fwd_carry = fwd["carry"].to_numpy(float)
    fwd_discount = fwd["discount"].to_numpy(float)
    k_q = np.log(K / F)
    otm = np.where(is_call, K >= F, K <= F)
    style = "american" if american.all() else ("mixed" if american.any() else "european")
    mult = q["multiplier"].to_numpy(float) if "multiplier" in q.columns else np.full(len(q), 100.0)

    # --- static arbitrage flags per quote
    arb = strike_arbitrage(exp_q, K, mid, is_call, forward=F, discount=D, bid=bid_q,
                           ask=ask_q)

    # --- model fit and forecasts on the trading-day calendar
    if fit is None:
        say(f"fitting the {model} volatility model")
        fit = fit_garch(hist.returns, model=model, dist=dist, mean=mean)
    elif len(fit.conditional_vol) != len(hist.returns):
        raise InputError("fit", f"the model was fitted on {len(fit.conditional_vol)} "
                                f"returns, the history has {len(hist.returns)}")
    if fit.fallback_reason:
        warnings.append(f"volatility model: {fit.fallback_reason}")
    warnings += [f"volatility model: {w}" for w in getattr(fit, "warnings", ())]
    exp_dates = fwd_expiry.astype("datetime64[D]").tolist()
    last_day = pd.Timestamp(hist.dates[-1]).date()
    if last_day != ch.asof and (ch.asof - last_day).days <= sanity.STALE_DAYS:
        warnings.append(f"the history ends on {last_day.isoformat()}, the quotes are of "
                        f"{ch.asof.isoformat()}: forecasts run from the day after the "
                        "last close")
    td = np.asarray(count_trading_days(ch.asof, np.array(exp_dates, dtype="datetime64[D]"),
                                       holidays), dtype=int)
    td_model = np.maximum(td, 1)
    fc = np.atleast_1d(fit.forecast_vol(td_model))
    band_lo, band_hi = fit.forecast_band(td_model, level=(lo_level, hi_level))
    band_lo, band_hi = np.atleast_1d(band_lo), np.atleast_1d(band_hi)

    say(f"simulating {int(n_paths):,} paths of the model")
    if drift_choice.rule == "fitted":
        drift_choice = choose_drift("fitted", rate=r0, div_yield=q0,
                                    fitted_mu=float(fit.params.get("mu", 0.0) or 0.0))
    draws = simulate_terminal(fit, drift_choice, td_model, fwd_t, fwd_rate, fwd_carry,
                              n_paths=int(n_paths), seed=seed)
    rv_paths = draws.realized_vol                              # (paths, expiries)

    # --- realized vol and the cone
    windows = np.maximum(td_model, MIN_REALIZED_WINDOW)
    if lean:
        realized, cone = np.full(len(windows), np.nan), None
    else:
        realized = trailing_realized_vol(hist, windows)
        cone = vol_cone(hist)

    # --- per expiry: smiles, ATM, points
    say("smile fits")
    expiry_codes = _expiry_positions(fwd_expiry, exp_q)
    rows: list[ExpiryRow] = []
    strike_slices: dict[_dt.date, tuple[int, int]] = {}
    fc_q = fc[expiry_codes]
    with np.errstate(invalid="ignore", divide="ignore"):
        price_fc = black_price(F, K, t_q, D, fc_q, is_call)
        if american.any():          # American quotes: the tree, on spot, rate and carry
            am = np.flatnonzero(american)
            if divs is not None:    # cash dividends at their ex-dates
                from optbench.pricing.american_dividends import american_dividend_price
                cash_q = fwd["cash_carry"].to_numpy(float)[expiry_codes]
                price_fc[am] = american_dividend_price(S, K[am], t_q[am], r_q[am],
                                                       cash_q[am], fc_q[am], is_call[am],
                                                       *divs)
            else:
                price_fc[am] = bsm_price(S, K[am], t_q[am], r_q[am], carry_q[am], fc_q[am],
                                         is_call[am], style="american")
        vega_vol = np.where(np.isfinite(iv_mid), iv_mid, fc_q)
        g = bsm_greeks(S, K, t_q, r_q, carry_q, vega_vol, is_call)
    edge_unit = mid - price_fc
    vega_pt = np.asarray(g.vega_per_vol_point, float)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        edge_vega = np.where(vega_pt > 1e-12, edge_unit / vega_pt, np.nan)
    edge_pts = 100.0 * (iv_mid - fc_q)
    n_q = len(q)
    columns = {
        "expiry": exp_q, "strike": K, "is_call": is_call,
        "type": np.where(is_call, "C", "P"), "moneyness": K / F,
        "bid": bid_q, "ask": ask_q, "mid": mid,
        "iv_bid": iv_bid, "iv_mid": iv_mid, "iv_ask": iv_ask,
        "delta": np.asarray(g.delta, float), "vega_per_vol_point": vega_pt,
        "forecast_vol": fc_q, "price_at_forecast": price_fc,
        "edge_per_contract": edge_unit * mult, "edge_vol_points": edge_pts,
        "edge_per_vega": edge_vega, "multiplier": mult,
        "line": q["line"].to_numpy() if "line" in q.columns else np.zeros(n_q, np.int64),
    }
    # the per-strike columns sorted once by expiry, then puts before calls, then strike
    # (a stable sort: the order each expiry's own stable sort gives); each expiry's
    # rows are one slice of them, the protection judging reads the sorted arrays, and
    # each expiry's DataFrame is made when a view first reads it (StrikeTables)
    order = np.lexsort((K, is_call, expiry_codes))
    columns = {name: np.asarray(columns[name])[order] for name in STRIKE_COLUMNS}
    bounds = np.searchsorted(expiry_codes[order], np.arange(len(fwd) + 1))

    model_free = _model_free_vols(q, fwd, warnings, expiry_codes,
                                  columns=(K, is_call, mid, bid_q, fwd_t, fwd_forward,
                                           fwd_discount))
    fwd_parity = (fwd["source"] == "parity").to_numpy(bool)
    # the smile of every expiry fitted together (the same fits as one at a time)
    problems, fitted = [], []
    for j in range(len(exp_dates)):
        t_e = float(fwd_t[j])
        idx = np.flatnonzero((expiry_codes == j) & otm & np.isfinite(iv_mid))
        if idx.size > MAX_SMILE_POINTS:
            idx = idx[np.argsort(k_q[idx], kind="stable")]
            idx = idx[np.unique(np.linspace(0, idx.size - 1, MAX_SMILE_POINTS).round().astype(int))]
        if idx.size >= 1:
            vw = np.where(np.isfinite(vega_pt[idx]), np.maximum(vega_pt[idx], 1e-8), 1e-8)
            problems.append((k_q[idx], iv_mid[idx] ** 2 * t_e, vw, t_e))
            fitted.append(j)
    smile_fits = dict(zip(fitted, fit_svi_many(problems, errors="return")))
    for j, e_date in enumerate(exp_dates):
        sel = expiry_codes == j
        t_e = float(fwd_t[j])
        F_e = float(fwd_forward[j])
        smile_info: dict = {"method": "none"}
        atm = iv25p = iv25c = rr = iv90 = iv95 = math.nan
        if j in smile_fits:
            try:
                sfit = smile_fits[j]
                if isinstance(sfit, InputError):
                    raise sfit
                pts = smile_points(sfit, F_e, t_e, r=float(fwd_rate[j]),
                                   q=float(fwd_carry[j]))
                atm, iv25p, iv25c, rr = pts.iv_atm, pts.iv_25d_put, pts.iv_25d_call, pts.rr_25d
                money = list(pts.moneyness)
                iv90 = float(pts.iv_moneyness[money.index(0.90)])
                iv95 = float(pts.iv_moneyness[money.index(0.95)])
                smile_info = {"method": sfit.method, "rmse": float(sfit.rmse_iv),
                              "n_points": int(sfit.n_points), "converged": bool(sfit.converged),
                              "bf_25d": float(pts.bf_25d),
                              # raw SVI parameters (total variance in log-moneyness)
                              "params": {name: float(getattr(sfit, name))
                                         for name in ("a", "b", "rho", "m", "sigma", "t")},
                              # the fitted curve across the quoted strikes, for views
                              "curve": None if lean else _smile_curve(sfit, K[sel], F_e)}
            except InputError as err:
                smile_info = {"method": "failed", "reason": err.problem}
        sel_otm = sel & otm
        k_otm = k_q[sel_otm]
        atm_bid = _interp_at_forward(k_otm, iv_bid[sel_otm])
        atm_ask = _interp_at_forward(k_otm, iv_ask[sel_otm])
        atm, atm_bid, atm_ask, atm_source, atm_note = _atm_rules(
            e_date, atm, atm_bid, atm_ask, k_q[sel], iv_mid[sel],
            _interp_at_forward(k_otm, iv_mid[sel_otm]))
        smile_info["atm_source"] = atm_source
        if atm_note:
            warnings.append(atm_note)
        f_e, lo_e, hi_e = float(fc[j]), float(band_lo[j]), float(band_hi[j])
        verdict = verdict_for(atm, lo_e, hi_e)
        if sanity.implausible_forecast(f_e):
            warnings.append(sanity.forecast_flag(e_date, f_e))
            verdict = "n/a"
        prob = float(np.mean(rv_paths[:, j] > atm)) if math.isfinite(atm) else math.nan
        lo_row, hi_row = int(bounds[j]), int(bounds[j + 1])
        part_columns = {name: columns[name][lo_row:hi_row]
                        for name in ("strike", "ask", "delta", "is_call", "iv_mid", "mid")}
        put25, floor_put = judge_puts(
            part_columns, choose_puts(part_columns, S, floor), draws, j, spot=S,
            discount=float(fwd_discount[j]), forecast_vol=f_e, forecast_low=lo_e,
            forecast_high=hi_e, band_high_level=hi_level)
        for name, judged in (("25-delta put", put25), ("floor put", floor_put)):
            if judged.unresolved:
                warnings.append(
                    f"protection verdict n/a for the {name} {judged.strike:g} on "
                    f"{e_date.isoformat()}: only {judged.paying_paths} of "
                    f"{judged.n_paths:,} simulated paths end below its strike (at least "
                    f"{MIN_PAYING_PATHS} needed; more --paths resolve it)")
        rows.append(ExpiryRow(
            expiry=e_date, calendar_days=int(round(t_e * 365)), trading_days=int(td[j]),
            t=t_e, forward=F_e, discount=float(fwd_discount[j]),
            forward_source="put-call parity" if fwd_parity[j] else "carry",
            style="american" if american[sel].all() else "european",
            n_quotes=int(sel.sum()), atm_iv=float(atm), atm_iv_bid=atm_bid, atm_iv_ask=atm_ask,
            iv_25d_put=float(iv25p), iv_25d_call=float(iv25c), iv_90=iv90, iv_95=iv95,
            rr_25d=float(rr), model_free_iv=float(model_free[j]), forecast_vol=f_e,
            forecast_low=lo_e, forecast_high=hi_e, realized_vol=float(realized[j]),
            cone_percentile=(math.nan if cone is None
                             else float(cone.percentile_rank(atm, td_model[j]))),
            iv_minus_forecast=float(atm - f_e), variance_premium=float(atm ** 2 - f_e ** 2),
            iv_forecast_ratio=float(atm / f_e) if f_e > 0 else math.nan,
            prob_realized_above_iv=prob, verdict=verdict,
            smile=smile_info, arbitrage_flags=int(arb.quote_flag[sel].sum()),
            rate=float(fwd_rate[j]), carry=float(fwd_carry[j]),
            floor=floor, **put25.fields_with("put25"), **floor_put.fields_with("floor_put")))
        strike_slices[e_date] = (lo_row, hi_row)

    bt = None
    if backtest is not False and backtest is not None:
        say("out-of-sample check")
        bt = _backtest(hist, backtest, model, dist, mean)

    summary = ModelSummary(
        name=fit.model, dist=fit.dist, mean=fit.mean, params=dict(fit.params),
        std_errors=dict(fit.std_errors), loglik=float(fit.loglik), aic=float(fit.aic),
        bic=float(fit.bic), converged=bool(fit.converged),
        persistence=float(fit.persistence),
        half_life_days=_num(fit.half_life_days), long_run_vol=_num(fit.long_run_vol),
        n_obs=int(fit.n_obs), fallback_reason=fit.fallback_reason)
    history_frame = None if lean else _history_frame(hist, fit)
    return Comparison(
        asof=ch.asof, underlying=ch.underlying or Path(source).stem, source=source,
        spot=S, rate=r0, div_yield=q0, style=style,
        multiplier=float(np.median(mult)) if len(mult) else 100.0,
        conventions=dict(CONVENTIONS), model=summary, band=(lo_level, hi_level),
        verdict_rule=VERDICT_RULE.format(low=lo_level, high=hi_level),
        quality=ch.quality.as_dict(), expiries=tuple(rows),
        strikes=StrikeTables(columns, strike_slices),
        realized={} if lean else {"estimator": "close-to-close",
                                  "window_days": windows.tolist(),
                                  "vol": [float(x) for x in realized]},
        cone=None if cone is None else _cone_frame(cone), history=history_frame,
        backtest=bt,
        n_paths=int(n_paths), seed=seed, rejected=ch.rejected,
        warnings=tuple(warnings), caution=CAUTION, fit=fit,
        sources={name: getattr(ch, f"{name}_source", "file")
                 for name in ("spot", "asof", "rate", "div_yield", "style",
                              "multiplier")}
        | ({"dividends": schedule.source} if schedule is not None else {}),
        drift=drift_choice, floor=floor,
        protection_rule=PROTECTION_RULE.format(floor=floor, low=lo_level, high=hi_level,
                                               drift=drift_choice.text))


def _floor(value) -> float:
    """The protection floor, a fraction of spot in (0, 1]."""
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise InputError("--floor", f"not a number: {value!r}") from None
    if not (math.isfinite(x) and 0 < x <= 1):
        raise InputError("--floor", f"must be a fraction of spot in (0, 1], such as 0.90, "
                                    f"not {value!r}")
    return x


def _meta_excess(source) -> tuple[object, str]:
    """(``excess_return`` of the scenario's meta.toml or None, where it was read)."""
    from optbench.data.scenario import Scenario, read_meta
    if isinstance(source, Scenario):
        return source.meta.get("excess_return"), "meta.toml"
    if not isinstance(source, (str, Path)):
        return None, "meta.toml"
    path = Path(source)
    meta = (path if path.is_dir() else path.parent) / "meta.toml"
    if not meta.is_file():
        return None, str(meta)
    return read_meta(meta).get("excess_return"), str(meta)


def _no_quotes_problem(ch) -> str:
    """Why a chain has no usable quote, from its rejection counts."""
    rejected = dict(ch.quality.rejected)
    if not rejected:
        return "no usable quotes in the chain"
    top = sorted(rejected.items(), key=lambda kv: -kv[1])
    shown = ", ".join(f"{n} {code}" for code, n in top[:3])
    text = f"no usable quotes: all {ch.quality.rows_in} rows rejected ({shown})"
    if top[0][0] == "other_quote_date":
        text += (f"; the chain's as-of date is {ch.asof.isoformat()} "
                 f"[{getattr(ch, 'asof_source', 'file')}]")
    elif top[0][0] == "implausible_strike":
        text += (f"; the spot is {ch.spot:,.6g} [{getattr(ch, 'spot_source', 'file')}] — "
                 "is it the underlying's price?")
    elif top[0][0] == "expired":
        text += f"; every expiry is on or before the as-of date {ch.asof.isoformat()}"
    return text


def _atm_rules(expiry, smile_atm: float, atm_bid: float, atm_ask: float,
               k: np.ndarray, iv_mid: np.ndarray, interp_mid: float):
    """The ATM vol the verdict uses: ``(atm, bid, ask, source, warning or '')``.

    Quotes with a mid vol must lie on both sides of the forward within
    :data:`ATM_MAX_DISTANCE`; a smile ATM outside [bid, ask] gives way to the
    interpolated quotes (module Notes).
    """
    ok = np.isfinite(k) & np.isfinite(iv_mid)
    below = ok & (k <= 0) & (k >= -ATM_MAX_DISTANCE)
    above = ok & (k >= 0) & (k <= ATM_MAX_DISTANCE)
    if not (below.any() and above.any()):
        near = np.abs(k[ok]).min() if ok.any() else math.nan
        where = (f"the nearest is {100 * (math.exp(float(near)) - 1):+.0f}% from it"
                 if math.isfinite(near) else "no strike has a mid implied vol")
        side = "below" if not below.any() else "above"
        return (math.nan, math.nan, math.nan, "unavailable",
                f"{expiry.isoformat()}: ATM vol unavailable (no quote {side} the forward "
                f"within {ATM_MAX_DISTANCE:.0%}; {where}); verdict n/a")
    if math.isfinite(smile_atm):
        if math.isfinite(atm_bid) and math.isfinite(atm_ask) and not (
                atm_bid - 1e-6 <= smile_atm <= atm_ask + 1e-6):
            return (interp_mid, atm_bid, atm_ask, "interpolated quotes",
                    f"{expiry.isoformat()}: the smile fit's ATM vol {100 * smile_atm:.2f}% "
                    f"lies outside the ATM bid-ask vols {100 * atm_bid:.2f}-"
                    f"{100 * atm_ask:.2f}%; the interpolated quotes' "
                    f"{100 * interp_mid:.2f}% is used")
        return smile_atm, atm_bid, atm_ask, "smile", ""
    return interp_mid, atm_bid, atm_ask, "interpolated quotes", ""


def _history_upto(hist, asof: _dt.date, warnings: list):
    """The history's days up to the quote date (no look-ahead past the quotes)."""
    import dataclasses
    dates = np.asarray(hist.dates, dtype="datetime64[D]")
    keep = int(np.searchsorted(dates, np.datetime64(asof, "D"), side="right"))
    if keep == len(dates):
        return hist
    if keep < 2:
        raise InputError(hist.source, f"no closes on or before the quote date {asof}")
    warnings.append(f"history closes after the quote date {asof.isoformat()} are not used")

    def cut(x):
        return None if x is None else np.asarray(x)[:keep]
    return dataclasses.replace(hist, dates=dates[:keep], close=cut(hist.close),
                               open=cut(hist.open), high=cut(hist.high), low=cut(hist.low),
                               returns=np.asarray(hist.returns)[:keep - 1])


def _num(x) -> float:
    return math.nan if x is None else float(x)


def _history_frame(hist, fit) -> pd.DataFrame:
    """The history's closes with the fit's returns, conditional vols, standardised
    residuals and the one-day band of the close, ``previous close x exp(mu +- 3
    sigma_t)``, one row per return."""
    sigma_d = np.asarray(fit.conditional_vol, float)
    prev_close = np.asarray(hist.close[:-1], float)
    mu_d = float(fit.params.get("mu", 0.0) or 0.0)
    return pd.DataFrame({
        "date": np.asarray(hist.dates[1:], dtype="datetime64[D]").astype("datetime64[ns]"),
        "close": np.asarray(hist.close[1:], float), "ret": np.asarray(hist.returns, float),
        "sigma": sigma_d, "z": np.asarray(fit.std_resid, float),
        "band_low": prev_close * np.exp(mu_d - BAND_SIGMAS * sigma_d),
        "band_high": prev_close * np.exp(mu_d + BAND_SIGMAS * sigma_d)})


def _cone_frame(cone) -> pd.DataFrame:
    names = []
    for qv in cone.quantiles:
        names.append("min" if qv == 0 else "max" if qv == 1 else "median" if qv == 0.5
                     else f"p{round(100 * qv):d}")
    values = np.asarray(cone.values, float).reshape(len(cone.windows), -1)
    if values.shape[1] != len(names) or len(set(names)) != len(names):
        frame = pd.DataFrame(values, columns=names)
        frame.insert(0, "window_days", np.asarray(cone.windows, int))
        frame["latest"] = np.asarray(cone.latest, float)
        frame["n_obs"] = np.asarray(cone.n_obs, int)
        return frame
    # one construction of the whole frame (not a frame grown column by column)
    return pd.DataFrame({"window_days": np.asarray(cone.windows, int),
                         **{name: values[:, i] for i, name in enumerate(names)},
                         "latest": np.asarray(cone.latest, float),
                         "n_obs": np.asarray(cone.n_obs, int)})


def _model_free_vols(q: pd.DataFrame, fwd: pd.DataFrame, warnings: list,
                     code: np.ndarray | None = None, columns=None) -> np.ndarray:
    """sqrt of the model-free implied variance per expiry (NaN where unavailable).

    One call of :func:`optbench.analysis.model_free.model_free_variance` per expiry on
    its strikes' call and put mids and bids (a loop over expiries, not quotes);
    ``code`` is each quote's expiry position in ``fwd`` when already known, and
    ``columns`` the arrays ``(strike, is_call, mid, bid)`` of ``q`` and ``(t, forward,
    discount)`` of ``fwd`` when already read.
    """
    from optbench.analysis.model_free import model_free_variance

    if code is None:
        code = pd.Index(fwd["expiry"]).get_indexer(q["expiry"])
    if columns is None:
        columns = (q["strike"].to_numpy(float), q["is_call"].to_numpy(bool),
                   q["mid"].to_numpy(float), q["bid"].to_numpy(float),
                   fwd["t"].to_numpy(float), fwd["forward"].to_numpy(float),
                   fwd["discount"].to_numpy(float))
    K, calls, mid, bid, t, forward, discount = columns
    out = np.full(len(fwd), np.nan)
    for j in range(len(fwd)):
        sel = np.flatnonzero(code == j)
        if sel.size == 0:
            continue
        K_j, calls_j = K[sel], calls[sel]
        strikes = np.unique(K_j)
        pos = np.searchsorted(strikes, K_j)
        side = {}
        for name, values in (("mid", mid[sel]), ("bid", bid[sel])):
            for is_call in (True, False):
                arr = np.full(strikes.size, np.nan)
                pick = calls_j == is_call
                arr[pos[pick]] = values[pick]
                side[name, is_call] = arr
        try:
            mf = model_free_variance(strikes, float(t[j]), float(forward[j]),
                                     float(discount[j]),
                                     call_mid=side["mid", True], put_mid=side["mid", False],
                                     call_bid=side["bid", True], put_bid=side["bid", False])
        except InputError as err:
            warnings.append(f"model-free variance, {pd.Timestamp(fwd['expiry'].iloc[j]).date()}: "
                            f"{err.problem}")
            continue
        out[j] = mf.vol
    return out


def _backtest(hist, split, model, dist, mean):
    from optbench.volatility.backtest import backtest as run_backtest
    if split is True:
        n = len(hist.dates)
        split = pd.Timestamp(hist.dates[max(n - 253, 1)]).date()
    return run_backtest(hist, split, model=model, dist=dist, mean=mean).to_dict()
