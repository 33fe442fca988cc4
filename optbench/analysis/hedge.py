"""Hedge-cost estimates: protective put, put spread and collar on a portfolio.

What protection costs on the screen, against what the fitted volatility model says it
is worth. Pure: arrays and frames in, a frozen :class:`HedgeEstimate` out.

Notes
-----
**Contracts.** For a portfolio of value :math:`V` with beta :math:`\\beta` to the
underlying (or a hedge ratio :math:`h` in its place), spot :math:`S` and contract
multiplier :math:`m`,

.. math:: n = \\operatorname{round}\\left(\\frac{\\beta V}{m S}\\right),

the beta-weighted number of index contracts (Hull, *Options, Futures, and Other
Derivatives*, §3.5 "Stock index futures — hedging an equity portfolio" and §17.2
"portfolio insurance").

**Premiums.** Each leg's premium is ``quantity * multiplier * price``; the mid premium
uses mid prices, the premium actually paid uses the ask for bought legs and the bid
for sold legs. Net premiums are cash paid (a credit is negative).

**Expected payoff and probability of payoff.** Terminal prices are
:math:`S_T = S\\exp(X)` with :math:`X` the terminal log return of the fitted model's
simulated paths over the trading days to expiry, with the comparison's drift
(:mod:`optbench.analysis.drift`: by default :math:`E[S_T] = S e^{(r-q)\\tau}` — no
expected excess return — with the fitted volatility dynamics; an excess return the
user sets; or the fitted mean only when asked for), :math:`r`, :math:`q` the expiry's
rate and carry. The expected payoff is the discounted mean of the legs' payoff over
the paths, :math:`e^{-r\\tau}\\,\\overline{\\text{payoff}(S_T)}`; the overpay is premium
paid less that expected payoff; the probability of payoff is the share of paths on
which the legs pay more than zero.

**Breakeven.** The underlying level at expiry below which the hedge pays back more
than it cost: :math:`K_{put} - p/(n m)` with :math:`p` the net premium paid (NaN for a
put spread whose premium exceeds its width; the put strike for a collar with a net
credit).

**Annual cost of rolling.** The same protection (the same strikes as fractions of the
then-current price, the same tenor :math:`\\tau`) bought again every :math:`\\tau` for
a year: :math:`N = 365/\\text{calendar days}` rolls, the last weighted by its fraction.
Roll :math:`k` (from :math:`t_k = k\\tau` to :math:`t_{k+1}`) is priced with Black (1976)
at the forward ATM implied volatility of the term structure between those times,
:math:`\\sigma_{k}^2 = (w(t_{k+1}) - w(t_k))/\\tau`, where :math:`w(t) = \\sigma_{ATM}^2 t`
is interpolated linearly in :math:`t` between the listed expiries and extended at
the last expiry's forward variance, plus each leg's skew offset (its implied vol
minus the ATM vol today), and the same half-spread per unit of spot as quoted today.
The price is scaled to today's spot (no drift assumed); with a cash dividend schedule
the carry of every roll is the chosen expiry's (its dividends as a yield). Total
variance interpolation:
Gatheral, *The Volatility Surface* (2006), ch. 3.
"""
from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Sequence

import numpy as np
import pandas as pd

from optbench.analysis.drift import (DriftChoice, TerminalDraws, choose_drift,
                                     simulate_terminal)
from optbench.analysis.results import (CAUTION, HedgeEstimate, HedgeLeg, HedgeRequest)
from optbench.errors import InputError

#: Underlying moves at expiry shown in the scenario table: -30 % ... +10 %, step 5 %.
SCENARIO_MOVES = tuple(round(m, 2) for m in np.arange(-0.30, 0.1001, 0.05))

DEFAULT_DAYS = 91

#: A request for ``days`` uses the nearest listed expiry; it is named in a warning
#: when it is more than ``max(TENOR_WARN_DAYS, TENOR_WARN_SHARE * days)`` away, and the
#: request is refused when the listed expiry is under half or over twice the days
#: asked and more than ``TENOR_GROSS_DAYS`` away (common practice: a tenor is "near"
#: within about a week or a tenth of itself).
TENOR_WARN_DAYS = 7
TENOR_WARN_SHARE = 0.10
TENOR_GROSS_DAYS = 14
#: A floor (or a collar's call strike) uses the nearest listed strike; it is named in
#: a warning when more than ``STRIKE_WARN`` (1 % of spot) away from the level asked,
#: and the request is refused beyond ``STRIKE_GROSS`` (5 % of spot).
STRIKE_WARN = 0.01
STRIKE_GROSS = 0.05
#: Most contracts a hedge may hold; beyond it the inputs are out of scale.
MAX_CONTRACTS = 1e9


# ------------------------------------------------------------------- pure pieces
def contracts_for(portfolio_value: float, ratio: float, multiplier: float,
                  spot: float) -> int:
    """``round(ratio * V / (multiplier * spot))``: beta-weighted number of contracts.

    Hull, *Options, Futures, and Other Derivatives*, §3.5 (beta-weighted hedge) and
    §17.2 (portfolio insurance with index options).
    """
    x = ratio * portfolio_value / (multiplier * spot)
    if not math.isfinite(x) or x > MAX_CONTRACTS:
        raise InputError("--portfolio", f"{portfolio_value:g} x {ratio:g} needs more than "
                                        f"{MAX_CONTRACTS:,.0f} contracts of {multiplier:g} x "
                                        f"{spot:g}: check the portfolio value, beta and "
                                        "multiplier")
    n = int(round(x))
    if n < 1:
        raise InputError("--portfolio", f"{portfolio_value:g} is smaller than half of one "
                                        f"contract ({multiplier:g} x {spot:g}); nothing to hedge")
    return n


def leg_payoff(levels: np.ndarray, strikes: np.ndarray, is_call: np.ndarray,
               signs: np.ndarray) -> np.ndarray:
    """Payoff per unit (one contract's worth / multiplier) of signed legs at ``levels``.

    ``levels`` has any shape; the result has that shape. Vectorised over legs and levels.
    """
    levels = np.asarray(levels, dtype=float)[..., None]
    strikes = np.asarray(strikes, dtype=float)
    intrinsic = np.where(np.asarray(is_call, bool), levels - strikes, strikes - levels)
    return (np.maximum(intrinsic, 0.0) * np.asarray(signs, float)).sum(axis=-1)


def nearest_index(values: np.ndarray, target: float, mask: np.ndarray | None = None) -> int:
    """Index of the value nearest ``target`` (ties to the lower value), within ``mask``."""
    values = np.asarray(values, dtype=float)
    dist = np.abs(values - target)
    if mask is not None:
        dist = np.where(mask, dist, np.inf)
    if not np.isfinite(dist).any():
        return -1
    # ties: prefer the lower strike (more conservative protection never overstated)
    order = np.lexsort((values, dist))
    return int(order[0])


def total_variance_curve(t: np.ndarray, atm_iv: np.ndarray):
    """``w(t) = sigma_ATM(t)^2 t`` through the listed expiries, as a callable.

    Linear in ``t`` between expiries, ``sigma_1^2 t`` before the first, and extended at
    the last interval's forward variance after the last (Gatheral 2006, ch. 3).
    Expiries with no ATM vol are skipped.
    """
    t = np.asarray(t, float)
    iv = np.asarray(atm_iv, float)
    ok = np.isfinite(t) & np.isfinite(iv) & (t > 0)
    t, iv = t[ok], iv[ok]
    if t.size == 0:
        raise InputError("chain", "no expiry has an at-the-money implied vol")
    order = np.argsort(t)
    t, w = t[order], (iv[order] ** 2) * t[order]
    w = np.maximum.accumulate(w)   # total variance must not fall with maturity
    tail_var = (w[-1] - w[-2]) / (t[-1] - t[-2]) if t.size > 1 else w[-1] / t[-1]
    tail_var = max(tail_var, 1e-10)
    tt = np.concatenate([[0.0], t])
    ww = np.concatenate([[0.0], w])

    def w_of(x):
        x = np.asarray(x, float)
        inside = np.interp(x, tt, ww)
        return np.where(x > t[-1], w[-1] + tail_var * (x - t[-1]), inside)

    return w_of


def annual_roll_cost(*, spot: float, rate: float, div_yield: float, tau: float,
                     calendar_days: int, w_of, atm_iv_now: float,
                     leg_moneyness: np.ndarray, leg_is_call: np.ndarray,
                     leg_signs: np.ndarray, leg_iv: np.ndarray,
                     leg_half_spread: np.ndarray) -> float:
    """Net premium per unit of underlying of rolling the legs for one year.

    See the module Notes. ``leg_moneyness`` is strike / spot, ``leg_signs`` +1 bought,
    -1 sold (per unit: quantity / contracts), ``leg_half_spread`` the paid-minus-mid
    price per unit today (>= 0), charged again on every roll.
    """
    from optbench.pricing.bsm import black_price

    n_rolls = 365.0 / calendar_days
    k = np.arange(math.ceil(n_rolls - 1e-9))
    weights = np.minimum(1.0, n_rolls - k)
    start, end = k * tau, (k + 1) * tau
    fwd_var = np.maximum((w_of(end) - w_of(start)) / tau, 1e-10)
    fwd_vol = np.sqrt(fwd_var)                                   # (rolls,)
    skew = np.asarray(leg_iv, float) - atm_iv_now                # (legs,)
    skew = np.where(np.isfinite(skew), skew, 0.0)
    vols = np.maximum(fwd_vol[:, None] + skew[None, :], 1e-4)    # (rolls, legs)
    F = spot * math.exp((rate - div_yield) * tau)
    D = math.exp(-rate * tau)
    K = spot * np.asarray(leg_moneyness, float)
    prices = black_price(F, K[None, :], tau, D, vols, np.asarray(leg_is_call, bool)[None, :])
    signs = np.asarray(leg_signs, float)
    per_roll = (signs[None, :] * prices).sum(axis=1) + np.abs(signs) @ np.asarray(
        leg_half_spread, float)
    return float((weights * per_roll).sum())


def breakeven_level(put_strike: float, net_premium_per_unit: float,
                    spread_width: float | None = None) -> float:
    """Underlying level at expiry below which the hedge pays back more than it cost."""
    p = net_premium_per_unit
    if p <= 0:
        return float(put_strike)
    if spread_width is not None and p >= spread_width:
        return math.nan
    return float(put_strike - p)


# ------------------------------------------------------------------ orchestration
def _pick_expiry(request: HedgeRequest, expiries: Sequence[_dt.date],
                 calendar_days: Sequence[int], warnings: list | None = None) -> int:
    if not expiries:
        raise InputError("chain", "no usable expiry in the chain")
    if request.expiry is not None:
        for i, e in enumerate(expiries):
            if e == request.expiry:
                return i
        have = ", ".join(e.isoformat() for e in expiries)
        raise InputError("--expiry", f"{request.expiry.isoformat()} is not an expiry in "
                                     f"the chain (have: {have})")
    days = request.days if request.days is not None else DEFAULT_DAYS
    cd = np.asarray(calendar_days, float)
    i = nearest_index(cd, days)
    used = int(cd[i])
    off = abs(used - days)
    if off > TENOR_GROSS_DAYS and not 0.5 <= used / days <= 2.0:
        raise InputError("--days", f"no listed expiry near {days} days: the nearest, "
                                   f"{expiries[i].isoformat()}, is {used} days away (listed: "
                                   f"{int(cd.min())} to {int(cd.max())} days)")
    if off > max(TENOR_WARN_DAYS, TENOR_WARN_SHARE * days) and warnings is not None:
        warnings.append(f"no expiry at {days} days: the nearest listed, "
                        f"{expiries[i].isoformat()} ({used} days), is used")
    return i


def _leg(side: str, row: pd.Series, expiry: _dt.date, contracts: int,
         multiplier: float) -> HedgeLeg:
    sign = 1 if side == "buy" else -1
    price_paid = float(row["ask"]) if side == "buy" else float(row["bid"])
    units = contracts * multiplier
    return HedgeLeg(
        side=side, type="C" if bool(row["is_call"]) else "P", strike=float(row["strike"]),
        expiry=expiry, quantity=sign * contracts, bid=float(row["bid"]),
        ask=float(row["ask"]), mid=float(row["mid"]), iv_mid=float(row["iv_mid"]),
        forecast_vol=float(row["forecast_vol"]),
        price_at_forecast=float(row["price_at_forecast"]),
        premium_mid=sign * units * float(row["mid"]),
        premium_paid=sign * units * price_paid,
        premium_at_forecast=sign * units * float(row["price_at_forecast"]),
        line=int(row["line"]) if "line" in row and pd.notna(row["line"]) else 0)


def _near_strike(name: str, asked: float, listed: float, spot: float, what: str,
                 warnings: list | None) -> None:
    """Refuse (beyond :data:`STRIKE_GROSS`) or name (beyond :data:`STRIKE_WARN`) a
    listed strike used for a level that is not listed."""
    off = abs(listed - asked) / spot
    if off > STRIKE_GROSS:
        raise InputError(name, f"no listed {what} near {asked:,.2f} ({asked / spot:.1%} of "
                               f"spot): the nearest is {listed:,.2f} ({listed / spot:.1%}), "
                               f"more than {STRIKE_GROSS:.0%} of spot away")
    if off > STRIKE_WARN and warnings is not None:
        warnings.append(f"no {what} at {asked:,.2f} ({asked / spot:.1%} of spot): the "
                        f"nearest listed, {listed:,.2f} ({listed / spot:.1%}), is used")


def _choose_legs(request: HedgeRequest, table: pd.DataFrame, spot: float,
                 contracts: int, multiplier: float, expiry: _dt.date,
                 warnings: list | None = None):
    """Pick the listed strikes for the structure; returns (buy rows, sell rows, note)."""
    strikes = table["strike"].to_numpy(float)
    is_call = table["is_call"].to_numpy(bool)
    bid = table["bid"].to_numpy(float)
    ask = table["ask"].to_numpy(float)
    buyable = np.isfinite(ask) & (ask > 0)
    sellable = np.isfinite(bid) & (bid > 0)
    puts = ~is_call
    i_put = nearest_index(strikes, request.floor * spot, puts & buyable)
    if i_put < 0:
        raise InputError("--expiry", f"{expiry.isoformat()} has no put with an ask to buy")
    put_k = strikes[i_put]
    _near_strike("--floor", request.floor * spot, put_k, spot, "put", warnings)
    buys, sells, note = [i_put], [], ""
    if request.structure == "put_spread":
        lower = request.lower_floor if request.lower_floor is not None else request.floor - 0.10
        if lower <= 0:
            raise InputError("--lower-floor", "give a lower floor above 0 for the put spread")
        i_low = nearest_index(strikes, lower * spot, puts & sellable & (strikes < put_k))
        if i_low < 0:
            raise InputError("--lower-floor", f"no listed put below {put_k:g} with a bid "
                                              f"on {expiry.isoformat()}")
        _near_strike("--lower-floor", lower * spot, strikes[i_low], spot, "put to sell",
                     warnings)
        sells.append(i_low)
    elif request.structure == "collar":
        calls_ok = is_call & sellable & (strikes > spot)
        if request.call_strike is not None:
            if request.call_strike <= put_k:
                raise InputError("--call-strike", f"{request.call_strike:g} is not above "
                                                  f"the bought put's strike {put_k:g}: a "
                                                  "collar sells a call above the put")
            i_call = nearest_index(strikes, request.call_strike,
                                   is_call & sellable & (strikes > put_k))
            if i_call < 0:
                raise InputError("--call-strike", f"no call with a bid on {expiry.isoformat()}")
            _near_strike("--call-strike", request.call_strike, strikes[i_call], spot,
                         "call", warnings)
            note = "call strike as given"
            if not math.isclose(strikes[i_call], request.call_strike):
                note = (f"call strike {request.call_strike:g} not listed; nearest listed "
                        f"{strikes[i_call]:g} used")
        else:
            if not calls_ok.any():
                raise InputError("--structure", f"no call above spot with a bid on "
                                                f"{expiry.isoformat()} to fund a collar")
            # near-zero net premium actually paid: put at its ask, call at its bid
            net = np.where(calls_ok, ask[i_put] - bid, np.inf)
            order = np.lexsort((strikes, np.abs(net)))
            i_call = int(order[0])
            note = ("call strike chosen among the listed calls above spot for the net "
                    "premium actually paid (put ask minus call bid) nearest zero")
        sells.append(i_call)
    return buys, sells, note


def hedge_expiry(comparison, request: HedgeRequest):
    """The comparison's :class:`~optbench.analysis.results.ExpiryRow` the request's
    hedge uses (``--expiry``, or the listed expiry nearest ``--days``); raises
    :class:`~optbench.errors.InputError` as :func:`hedge_from_comparison` does."""
    i = _pick_expiry(request, [row.expiry for row in comparison.expiries],
                     [row.calendar_days for row in comparison.expiries])
    return comparison.expiries[i]


def hedge_from_comparison(comparison, request: HedgeRequest, *, n_paths: int = 20000,
                          seed: int | None = 7, draws: TerminalDraws | None = None
                          ) -> HedgeEstimate:
    """Hedge-cost estimates from a finished :class:`~optbench.analysis.results.Comparison`.

    Uses the comparison's per-strike table (quotes, implied and forecast vols, prices
    at the forecast vol), its ATM term structure (for the roll cost) and its fitted
    model (for the simulated payoff). See the module Notes for every formula.

    ``draws``: terminal draws already simulated with these ``n_paths`` and ``seed``
    under the comparison's drift (:func:`optbench.analysis.drift.simulate_terminal`,
    e.g. to every horizon a portfolio's loss distribution and menu need); the hedge
    reads its expiry's column instead of simulating again — the same paths and
    figures as its own simulation. Without a column for its expiry (trading days,
    calendar time, rate and carry), it simulates.
    """
    spot, rate, q = float(comparison.spot), float(comparison.rate), float(comparison.div_yield)
    expiries = [row.expiry for row in comparison.expiries]
    warnings: list[str] = []
    i_exp = _pick_expiry(request, expiries, [row.calendar_days for row in comparison.expiries],
                         warnings)
    row = comparison.expiries[i_exp]
    table = comparison.strikes[row.expiry]
    multiplier = float(request.multiplier or comparison.multiplier or 100.0)
    ratio = request.exposure_ratio
    V = request.portfolio_value
    n = contracts_for(V, ratio, multiplier, spot)
    buys, sells, note = _choose_legs(request, table, spot, n, multiplier, row.expiry,
                                     warnings)
    legs = tuple([_leg("buy", table.iloc[i], row.expiry, n, multiplier) for i in buys]
                 + [_leg("sell", table.iloc[i], row.expiry, n, multiplier) for i in sells])
    k = np.array([leg.strike for leg in legs])
    c = np.array([leg.type == "C" for leg in legs])
    s = np.array([1.0 if leg.side == "buy" else -1.0 for leg in legs])
    units = n * multiplier
    premium_mid = float(sum(leg.premium_mid for leg in legs))
    premium_paid = float(sum(leg.premium_paid for leg in legs))
    premium_fc = float(sum(leg.premium_at_forecast for leg in legs))

    # simulated terminal prices: fitted volatility dynamics, the comparison's drift
    tau = row.t
    fit = getattr(comparison, "fit", None)
    choice = _drift_of(comparison)
    if fit is not None and row.trading_days > 0:
        r_e = row.rate if math.isfinite(row.rate) else rate
        q_e = row.carry if math.isfinite(row.carry) else q
        col = draws.column_for(row.trading_days, tau, r_e, q_e) \
            if draws is not None and draws.shock.shape[0] == int(n_paths) else None
        if col is None:
            draws, col = simulate_terminal(fit, choice, [row.trading_days], [tau], [r_e],
                                           [q_e], n_paths=n_paths, seed=seed), 0
        s_t = spot * np.exp(draws.log_return(1.0, col))
        pay = leg_payoff(s_t, k, c, s) * units
        expected = float(math.exp(-r_e * tau) * pay.mean())
        prob = float((pay > 1e-12).mean())
    else:
        expected, prob = math.nan, math.nan
        warnings.append("no fitted model: expected payoff and probability not computed")

    width = float(k[0] - k[1]) if request.structure == "put_spread" else None
    be = breakeven_level(k[0], premium_paid / units, width)

    moves = np.array(SCENARIO_MOVES)
    level = spot * (1.0 + moves)
    unhedged = V * request.beta * moves
    hedged = unhedged + leg_payoff(level, k, c, s) * units - premium_paid
    scenarios = tuple({"move": float(m), "level": float(lv), "unhedged": float(u),
                       "hedged": float(h)} for m, lv, u, h in zip(moves, level, unhedged, hedged))

    half_spread = np.array([(leg.ask - leg.mid) if leg.side == "buy" else (leg.mid - leg.bid)
                            for leg in legs])
    if any(math.isfinite(r.atm_iv) for r in comparison.expiries):
        w_of = total_variance_curve([r.t for r in comparison.expiries],
                                    [r.atm_iv for r in comparison.expiries])
        atm_now = row.atm_iv if math.isfinite(row.atm_iv) else float(np.sqrt(w_of(tau) / tau))
        # with cash dividends the roll's carry is the expiry's (dividends included)
        q_roll = row.carry if ("dividends" in (getattr(comparison, "sources", None) or {})
                               and math.isfinite(row.carry)) else q
        roll_unit = annual_roll_cost(
            spot=spot, rate=rate, div_yield=q_roll, tau=tau, calendar_days=row.calendar_days,
            w_of=w_of, atm_iv_now=atm_now, leg_moneyness=k / spot, leg_is_call=c,
            leg_signs=s, leg_iv=np.array([leg.iv_mid for leg in legs]),
            leg_half_spread=half_spread)
    else:
        roll_unit = math.nan
        warnings.append("no expiry has an ATM implied vol: the annual roll cost is not "
                        "computed")
    roll = roll_unit * units
    roll_method = ("same strikes as fractions of spot and same tenor re-bought every "
                   f"{row.calendar_days} days for a year ({365 / row.calendar_days:.2f} "
                   "rolls), each priced with Black (1976) at the forward ATM implied vol "
                   "of the term structure plus today's skew offset, plus today's half-spread")

    cost_pct = premium_paid / V
    model = {"name": comparison.model.name, "dist": comparison.model.dist,
             "measure": f"fitted volatility dynamics; drift: {choice.text}"}
    return HedgeEstimate(
        request=request, underlying=comparison.underlying, asof=comparison.asof,
        spot=spot, rate=rate, div_yield=q, expiry=row.expiry,
        calendar_days=row.calendar_days, trading_days=row.trading_days,
        structure=request.structure, contracts=n, multiplier=multiplier,
        strike=float(k[0]), strikes=tuple(float(x) for x in k), legs=legs,
        premium_mid=premium_mid, premium_paid=premium_paid,
        premium_at_forecast=premium_fc, expected_payoff=expected,
        overpay=premium_paid - expected, cost_pct=cost_pct,
        cost_pct_annual=cost_pct * 365.0 / row.calendar_days, prob_payoff=prob,
        breakeven=be, breakeven_move=be / spot - 1.0 if math.isfinite(be) else math.nan,
        scenarios=scenarios, annual_roll_cost=roll, annual_roll_cost_pct=roll / V,
        roll_method=roll_method, collar_note=note, model=model, n_paths=int(n_paths),
        seed=seed, warnings=tuple(warnings) + tuple(comparison.warnings), caution=CAUTION,
        drift=choice.to_dict(),
        style=str(getattr(comparison, "style", "european")),
        sources=dict(getattr(comparison, "sources", {}) or {})
        | ({"multiplier": "caller"} if request.multiplier else {}))


def simulate_hedge_paths(comparison, trading_days, taus, rates, carries, *,
                         n_paths: int = 20000, seed: int | None = 7) -> TerminalDraws | None:
    """The comparison's fitted model simulated once to every horizon under its drift
    (:func:`optbench.analysis.drift.simulate_terminal`): the draws a hedge estimate
    (``draws=`` of :func:`hedge_from_comparison`), its loss distribution and its
    protection menu share. None without a fitted model."""
    fit = getattr(comparison, "fit", None)
    if fit is None:
        return None
    return simulate_terminal(fit, _drift_of(comparison), trading_days, taus, rates, carries,
                             n_paths=int(n_paths), seed=seed)


def _drift_of(comparison) -> DriftChoice:
    """The comparison's drift (risk-free at its rate and yield if it carries none)."""
    choice = getattr(comparison, "drift", None)
    if isinstance(choice, DriftChoice):
        return choice
    return choose_drift("risk-free", rate=float(comparison.rate),
                        div_yield=float(comparison.div_yield))


def hedge(chain, history=None, *, portfolio_value: float, beta: float = 1.0,
          hedge_ratio: float | None = None, floor: float = 0.90,
          expiry: _dt.date | str | None = None, days: int | None = None,
          structure: str = "put", lower_floor: float | None = None,
          call_strike: float | None = None, multiplier: float | None = None,
          comparison=None, n_paths: int = 20000, seed: int | None = 7,
          **compare_options) -> HedgeEstimate:
    """Hedge-cost estimates for a portfolio protected with listed options.

    Parameters
    ----------
    chain : path, scenario folder, :class:`~optbench.data.OptionChain` or Scenario
        (ignored when ``comparison`` is given).
    history : price history (path or PriceHistory); optional for a scenario folder.
    portfolio_value : money, > 0.
    beta, hedge_ratio : beta of the portfolio to the underlying, or the ratio to hedge.
    floor : bought put strike as a fraction of spot, in (0, 1].
    expiry, days : an expiry in the chain, or the expiry nearest ``days`` calendar days
        (default 91).
    structure : ``"put"``, ``"put_spread"`` (``"put-spread"``) or ``"collar"``.
    lower_floor : sold put strike as a fraction of spot (put spread).
    call_strike : sold call strike (collar); None = near-zero net premium.
    multiplier : contract multiplier (default: the chain's).
    comparison : a finished :func:`~optbench.analysis.compare.compare` result to reuse
        (its drift is used).
    n_paths, seed : the simulation of the fitted model.
    **compare_options : passed to :func:`~optbench.analysis.compare.compare`
        (``model``, ``dist``, ``mean``, ``spot``, ``asof``, ``rate``, ``div_yield``,
        ``drift``, ``excess_return``).

    Returns
    -------
    HedgeEstimate
        Carries :data:`~optbench.analysis.results.CAUTION`.
    """
    request = HedgeRequest(portfolio_value=portfolio_value, beta=beta,
                           hedge_ratio=hedge_ratio, floor=floor, expiry=expiry, days=days,
                           structure=structure, lower_floor=lower_floor,
                           call_strike=call_strike, multiplier=multiplier)
    if comparison is None:
        from optbench.analysis.compare import compare
        comparison = compare(chain, history, n_paths=n_paths, seed=seed, floor=floor,
                             **compare_options)
    return hedge_from_comparison(comparison, request, n_paths=n_paths, seed=seed)
