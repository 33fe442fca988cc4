"""The invented demo scenario: the Zephyr Composite Index (code ``ZPHX``).

Everything here is invented: the index, its prices, its holidays and its option
chain. :func:`generate` builds the scenario from a fixed seed with
``numpy.random.default_rng`` and :func:`write_scenario` writes it as a scenario
folder (``chain.csv``, ``history.csv``, ``meta.toml``), byte for byte the same on
every run with the same seed (fixed decimals, no timestamps, ``\\n`` line ends).

The price history
-----------------
Daily log returns follow a GJR-GARCH(1,1) with standardised Student-t innovations
(Glosten, Jagannathan and Runkle 1993; Bollerslev 1987 for the t innovations)
whose long-run variance drifts slowly between a calm and a turbulent level, driven
by a two-state Markov chain (Hamilton 1989) and smoothed exponentially so that
spells start and end gradually:

.. math::

    r_t = \\mu + \\sigma_t z_t, \\qquad z_t \\sim t_\\nu \\sqrt{(\\nu-2)/\\nu},

    \\sigma_t^2 = \\omega_t + (\\alpha + \\gamma\\,1[\\varepsilon_{t-1} < 0])
                  \\varepsilon_{t-1}^2 + \\beta\\,\\sigma_{t-1}^2,
    \\qquad \\omega_t = \\bar\\sigma_t^2 (1 - \\alpha - \\gamma/2 - \\beta).

Each day is split into an overnight gap (a share of the day's variance) and an
intraday Brownian bridge from the open to the close sampled on a fine grid; the
high and low are the bridge's extremes, so ``high >= max(open, close)`` and
``low <= min(open, close)`` by construction.

The option chain
----------------
On the last history date, each expiry's ATM implied vol is the model's forecast of
the average vol over the option's life plus a premium in vol points
(:data:`ATM_PREMIUM`): a few points above it on every expiry but the first weekly,
which the market prices about two points below the forecast (so that both "rich"
and "cheap" show up). The forecast used here is the closed-form GJR forecast with
the true ``alpha, gamma``, the persistence a single-regime fit finds on such a
history (:data:`REFERENCE_PERSISTENCE`), the regime chain's stationary variance as
long-run level and the last conditional variance re-filtered with those values. The
generator does not fit a model at run time; the premiums were tuned so that the ATM
vols keep their sign against ``optbench.fit_garch`` on the committed history
(checked in ``tests/test_demo.py``). The smile
around the ATM level is an SSVI total-variance surface (Gatheral and Jacquier
2014, "Arbitrage-free SVI volatility surfaces", *Quantitative Finance* 14(1))

.. math::

    w(k, \\theta) = \\tfrac{\\theta}{2}\\bigl(1 + \\rho\\varphi k +
        \\sqrt{(\\varphi k + \\rho)^2 + 1 - \\rho^2}\\bigr),
    \\qquad \\varphi(\\theta) = \\eta\\,\\theta^{-\\lambda}(1+\\theta)^{\\lambda-1},

with ``k = ln(K/F)`` and ``theta = sigma_atm^2 t``; mids are Black-Scholes-Merton
prices (:func:`optbench.pricing.bsm.bsm_price`) and bid/ask spreads are set in vol
points (wider for short-dated, far-from-the-money options) times vega, with a
minimum of one tick, rounded outward to the tick (0.05 at and above 3.00, 0.01
below).

The deliberately bad chain rows
-------------------------------
So that ``optbench check`` has something to say, the chain carries exactly these
bad rows (see :data:`BAD_ROWS`; everything else is clean):

1. ``crossed``   -- a 2027-01-15 call whose ask is below its bid;
2. ``zero_bid``  -- a 2026-12-18 put quoted 0.00 bid;
3. ``below_intrinsic`` -- a deep in-the-money 2027-02-19 call whose ask is below
   its intrinsic value ``S - K``;
4. ``duplicate`` -- a second line for a 2027-05-21 put, with a different quote;
5. ``expired``   -- two lines (a call and a put) for 2026-11-20, a week before the
   quote date;
6. ``unparseable`` -- a 2026-12-11 line whose strike reads ``"5,O5O.00"`` (letters in
   place of digits) and whose symbol is blank, so no strike can be read from it.
"""
from __future__ import annotations

import datetime as _dt
import io
from dataclasses import dataclass
from pathlib import Path

import numpy as np

# --------------------------------------------------------------------- constants
CODE = "ZPHX"
NAME = "Zephyr Composite Index"
SEED = 20261346
ASOF = _dt.date(2026, 11, 27)          # a Friday
FIRST_DATE = _dt.date(2020, 11, 30)    # about six years of weekdays before ASOF
START_PRICE = 2000.0
RATE = 0.04                            # continuously compounded
DIV_YIELD = 0.015                      # continuously compounded
STYLE = "european"
MULTIPLIER = 100

# GJR-GARCH(1,1)-t parameters of the daily log returns (decimals)
MU = 0.00035                           # daily mean log return
ALPHA, GAMMA, BETA = 0.025, 0.11, 0.895  # persistence alpha + gamma/2 + beta = 0.975
NU = 6.0                               # Student-t degrees of freedom
CALM_VOL, TURBULENT_VOL = 0.12, 0.30   # long-run annualised vol of the two spells
P_CALM_TO_TURBULENT = 1.0 / 320.0      # daily switching probabilities (Markov chain)
P_TURBULENT_TO_CALM = 1.0 / 110.0
# A single-regime GJR fitted on a history whose long-run level shifts reads the
# shifts as extra persistence (Lamoureux and Lastrapes 1990); the reference forecast
# that anchors the ATM vols uses this persistence (tuned on the seed below).
REFERENCE_PERSISTENCE = 0.988
LEVEL_SMOOTHING = 0.97                 # daily EWMA weight on the previous long-run level
OVERNIGHT_SHARE = 0.2                  # share of a day's variance in the overnight gap
BRIDGE_STEPS = 39                      # intraday grid (ten-minute steps of a 6.5 h session)

# expiries: weeklies, the next third Fridays, a half-year, one and two years
EXPIRIES = (
    _dt.date(2026, 12, 4), _dt.date(2026, 12, 11), _dt.date(2026, 12, 18),
    _dt.date(2027, 1, 15), _dt.date(2027, 2, 19), _dt.date(2027, 5, 21),
    _dt.date(2027, 11, 19), _dt.date(2028, 11, 17),
)
# ATM implied vol minus the model forecast, in vol points (0.01), per expiry
ATM_PREMIUM = (-0.020, 0.018, 0.023, 0.025, 0.026, 0.025, 0.023, 0.023)
# strike grid per expiry: (lowest strike / spot, highest strike / spot, increment)
STRIKE_GRID = (
    (0.80, 1.10, 25.0), (0.80, 1.10, 25.0), (0.78, 1.12, 25.0),
    (0.75, 1.15, 25.0), (0.72, 1.18, 50.0), (0.65, 1.25, 50.0),
    (0.55, 1.30, 50.0), (0.50, 1.40, 100.0),
)
# SSVI smile: correlation rho and power-law curvature eta * theta^-lam (1+theta)^(lam-1)
SSVI_RHO, SSVI_ETA, SSVI_LAMBDA = -0.70, 1.10, 0.45
MIN_MID = 0.05                         # options worth less than this are not listed

EXPIRED = _dt.date(2026, 11, 20)
# (kind, expiry, type, strike / spot target) of the deliberately bad rows
BAD_ROWS = (
    ("crossed", _dt.date(2027, 1, 15), "C", 1.05),
    ("zero_bid", _dt.date(2026, 12, 18), "P", 0.92),
    ("below_intrinsic", _dt.date(2027, 2, 19), "C", 0.80),
    ("duplicate", _dt.date(2027, 5, 21), "P", 0.95),
    ("expired", EXPIRED, "C", 1.00),
    ("expired", EXPIRED, "P", 1.00),
    ("unparseable", _dt.date(2026, 12, 11), "P", 0.97),
)

CHAIN_COLUMNS = ("underlying", "quote_date", "underlying_price", "expiry", "strike",
                 "type", "bid", "ask", "last", "volume", "open_interest", "symbol",
                 "style", "multiplier")


# --------------------------------------------------------------------- calendar
def _observed(day: _dt.date, taken: set[_dt.date]) -> _dt.date:
    """A holiday falling on a weekend (or on another holiday) moves to the next weekday."""
    while day.weekday() >= 5 or day in taken:
        day += _dt.timedelta(days=1)
    return day


def _nth_weekday(year: int, month: int, weekday: int, n: int) -> _dt.date:
    first = _dt.date(year, month, 1)
    return first + _dt.timedelta(days=(weekday - first.weekday()) % 7 + 7 * (n - 1))


def holidays(first_year: int = 2020, last_year: int = 2028) -> list[_dt.date]:
    """The invented ZPHX exchange holidays (weekdays only), oldest first.

    New Year's Day (1 January), Founders' Day (first Monday of March), Lantern Day
    (2 July), Harvest Monday (second Monday of October), Winter Rest (24 and 31
    December); weekend dates move to the next free weekday.
    """
    out: list[_dt.date] = []
    for year in range(first_year, last_year + 1):
        taken: set[_dt.date] = set()
        for day in (_dt.date(year, 1, 1), _nth_weekday(year, 3, 0, 1), _dt.date(year, 7, 2),
                    _nth_weekday(year, 10, 0, 2), _dt.date(year, 12, 24),
                    _dt.date(year, 12, 31)):
            obs = _observed(day, taken)
            if obs.year == year:
                taken.add(obs)
        out.extend(sorted(taken))
    return out


def trading_dates(first: _dt.date, last: _dt.date, holiday_list: list[_dt.date]) -> np.ndarray:
    """Weekdays from ``first`` to ``last`` inclusive, less holidays (datetime64[D])."""
    days = np.arange(np.datetime64(first), np.datetime64(last) + 1, dtype="datetime64[D]")
    hol = np.array(holiday_list, dtype="datetime64[D]")
    keep = np.is_busday(days) & ~np.isin(days, hol)
    return days[keep]


def _trading_days_to(expiry: np.ndarray, holiday_list: list[_dt.date]) -> np.ndarray:
    """Trading days after ASOF up to and including each expiry."""
    hol = np.array(holiday_list, dtype="datetime64[D]")
    start = np.datetime64(ASOF) + 1
    return np.busday_count(start, np.asarray(expiry, dtype="datetime64[D]") + 1,
                           holidays=hol)


# --------------------------------------------------------------------- history
@dataclass(frozen=True)
class DemoHistory:
    """The simulated daily history (prices rounded to cents)."""

    dates: np.ndarray           # datetime64[D]
    open: np.ndarray
    high: np.ndarray
    low: np.ndarray
    close: np.ndarray
    cond_var: np.ndarray        # daily conditional variance of each day's return
    long_run_vol: np.ndarray    # annualised long-run level in force each day
    turbulent: np.ndarray       # bool, regime of each day
    next_var: float             # conditional variance of the day after the last date


def simulate_history(rng: np.random.Generator, dates: np.ndarray) -> DemoHistory:
    """GJR-GARCH(1,1)-t returns with a slowly switching long-run level; OHLC from
    an overnight gap and an intraday Brownian bridge (see the module notes)."""
    n = dates.size
    # regime path: two-state Markov chain, then an exponentially smoothed level
    u = rng.random(n)
    turbulent = np.zeros(n, dtype=bool)
    state = False
    for i in range(n):
        p = P_TURBULENT_TO_CALM if state else P_CALM_TO_TURBULENT
        if u[i] < p:
            state = not state
        turbulent[i] = state
    target = np.log(np.where(turbulent, TURBULENT_VOL, CALM_VOL) ** 2 / 252.0)
    log_level = np.empty(n)
    level = target[0]
    for i in range(n):
        level = LEVEL_SMOOTHING * level + (1.0 - LEVEL_SMOOTHING) * target[i]
        log_level[i] = level
    long_run_var = np.exp(log_level)
    persistence = ALPHA + 0.5 * GAMMA + BETA
    omega = long_run_var * (1.0 - persistence)

    z = rng.standard_t(NU, size=n) * np.sqrt((NU - 2.0) / NU)
    var = np.empty(n)
    eps = np.empty(n)
    v = long_run_var[0]
    for i in range(n):
        var[i] = v
        eps[i] = np.sqrt(v) * z[i]
        lev = GAMMA if eps[i] < 0.0 else 0.0
        nxt = omega[i + 1] if i + 1 < n else omega[i]
        v = nxt + (ALPHA + lev) * eps[i] ** 2 + BETA * v
    next_var = float(v)
    returns = MU + eps
    returns[0] = 0.0                      # the first date is the starting level

    log_close = np.log(START_PRICE) + np.cumsum(returns)
    # overnight gap and intraday bridge
    gap = rng.standard_normal(n) * np.sqrt(OVERNIGHT_SHARE * var)
    gap[0] = 0.0
    intraday = returns - gap
    steps = rng.standard_normal((n, BRIDGE_STEPS)) * np.sqrt(
        (1.0 - OVERNIGHT_SHARE) * var / BRIDGE_STEPS)[:, None]
    walk = np.cumsum(steps, axis=1)
    frac = np.arange(1, BRIDGE_STEPS + 1) / BRIDGE_STEPS
    bridge = walk - frac * walk[:, -1:] + frac * intraday[:, None]
    log_open = log_close - intraday
    up = np.maximum(bridge.max(axis=1), 0.0)
    down = np.minimum(bridge.min(axis=1), 0.0)
    close = np.round(np.exp(log_close), 2)
    open_ = np.round(np.exp(log_open), 2)
    high = np.maximum(np.round(np.exp(log_open + up), 2), np.maximum(open_, close))
    low = np.minimum(np.round(np.exp(log_open + down), 2), np.minimum(open_, close))
    return DemoHistory(dates=dates, open=open_, high=high, low=low, close=close,
                       cond_var=var, long_run_vol=np.sqrt(long_run_var * 252.0),
                       turbulent=turbulent, next_var=next_var)


def reference_forecast_vol(history: DemoHistory, trading_days: np.ndarray) -> np.ndarray:
    """Closed-form GJR forecast of the annualised average vol over each horizon.

    With persistence :math:`P = \\alpha + \\gamma/2 + \\beta` (symmetric innovations),
    long-run variance :math:`\\bar\\sigma^2` and next-day variance
    :math:`\\sigma^2_{T+1}`, :math:`E_T[\\sigma^2_{T+j}] = \\bar\\sigma^2 +
    P^{j-1}(\\sigma^2_{T+1} - \\bar\\sigma^2)`; the forecast over ``h`` days is
    :math:`\\sqrt{252\\,\\tfrac1h\\sum_{j=1}^h E_T[\\sigma^2_{T+j}]}`
    (Glosten, Jagannathan and Runkle 1993; Hull, *Options, Futures, and Other
    Derivatives*, ch. 23, for the GARCH(1,1) term structure). The long-run level is
    the stationary variance of the regime mix, :math:`(1-\\pi)\\sigma_c^2 +
    \\pi\\sigma_u^2` with :math:`\\pi = p_{cu}/(p_{cu}+p_{uc})` (Hamilton 1989);
    :math:`P` is :data:`REFERENCE_PERSISTENCE`, the persistence a single-regime fit
    reads into level shifts (Lamoureux and Lastrapes 1990); the next-day variance is
    re-filtered over the whole history with these values.
    """
    r = np.diff(np.log(history.close))
    # the regime chain's stationary share of turbulent days weights the two levels
    share = P_CALM_TO_TURBULENT / (P_CALM_TO_TURBULENT + P_TURBULENT_TO_CALM)
    long_run = ((1.0 - share) * CALM_VOL ** 2 + share * TURBULENT_VOL ** 2) / 252.0
    beta = REFERENCE_PERSISTENCE - ALPHA - 0.5 * GAMMA
    persistence = REFERENCE_PERSISTENCE
    omega = long_run * (1.0 - persistence)
    eps = r - r.mean()
    v = long_run
    for e in eps:
        v = omega + (ALPHA + (GAMMA if e < 0.0 else 0.0)) * e * e + beta * v
    h = np.asarray(trading_days, dtype=float)
    # sum_{j=1}^{h} P^{j-1} = (1 - P^h) / (1 - P)
    avg = long_run + (v - long_run) * (1.0 - persistence ** h) / ((1.0 - persistence) * h)
    return np.sqrt(252.0 * avg)


# --------------------------------------------------------------------- chain
def _ssvi_total_variance(k: np.ndarray, theta: np.ndarray) -> np.ndarray:
    """SSVI total implied variance (Gatheral and Jacquier 2014, eq. 4.1 with the
    power-law curvature of their section 4.2)."""
    phi = SSVI_ETA * theta ** (-SSVI_LAMBDA) * (1.0 + theta) ** (SSVI_LAMBDA - 1.0)
    rho = SSVI_RHO
    return 0.5 * theta * (1.0 + rho * phi * k + np.sqrt((phi * k + rho) ** 2 + 1.0 - rho ** 2))


def _tick(price: np.ndarray) -> np.ndarray:
    return np.where(price >= 3.0, 0.05, 0.01)


def _round_down(x: np.ndarray) -> np.ndarray:
    tick = _tick(x)
    return np.floor(x / tick + 1e-9) * tick


def _round_up(x: np.ndarray) -> np.ndarray:
    tick = _tick(x)
    return np.ceil(x / tick - 1e-9) * tick


def _round_near(x: np.ndarray) -> np.ndarray:
    tick = _tick(x)
    return np.round(x / tick) * tick


def occ_symbol(root: str, expiry: _dt.date, cp: str, strike: float) -> str:
    """OCC option symbol: root padded to six characters, YYMMDD, C/P, strike x 1000
    in eight digits (OCC Options Symbology Initiative, 2010)."""
    return f"{root:<6}{expiry:%y%m%d}{cp}{int(round(strike * 1000)):08d}"


@dataclass(frozen=True)
class DemoScenario:
    """The generated scenario: the history, the chain rows and the meta facts."""

    history: DemoHistory
    chain: list[dict]           # one dict per chain.csv row, values already formatted
    spot: float
    holidays: list[_dt.date]
    atm_iv: dict                # expiry -> ATM implied vol used for the smile
    reference_forecast: dict    # expiry -> closed-form model forecast (annualised)
    bad_rows: list[tuple[int, str]]  # (1-based line in chain.csv, kind)


def _fmt(x: float, decimals: int = 2) -> str:
    return f"{x:.{decimals}f}"


def _build_chain(rng: np.random.Generator, history: DemoHistory,
                 holiday_list: list[_dt.date]):
    spot = float(history.close[-1])
    exp = np.array(EXPIRIES, dtype="datetime64[D]")
    cal_days = (exp - np.datetime64(ASOF)).astype(int)
    t_exp = cal_days / 365.0
    tdays = _trading_days_to(exp, holiday_list)
    forecast = reference_forecast_vol(history, tdays)
    atm = forecast + np.array(ATM_PREMIUM)
    theta = atm ** 2 * t_exp
    if np.any(np.diff(theta) <= 0):
        raise AssertionError("ATM total variance must rise with expiry (calendar arbitrage)")

    rows = []
    for i, expiry in enumerate(EXPIRIES):
        lo, hi, step = STRIKE_GRID[i]
        strikes = np.arange(np.ceil(lo * spot / step) * step, hi * spot + 1e-9, step)
        t = t_exp[i]
        fwd = spot * np.exp((RATE - DIV_YIELD) * t)
        k = np.log(strikes / fwd)
        vol = np.sqrt(_ssvi_total_variance(k, theta[i]) / t)
        for cp in ("C", "P"):
            rows.append(dict(expiry=expiry, i=i, cp=cp, strike=strikes, k=k, vol=vol))

    # everything below is vectorised over all contracts at once
    expiry = np.concatenate([[r["expiry"]] * r["strike"].size for r in rows])
    idx = np.concatenate([np.full(r["strike"].size, r["i"]) for r in rows])
    cp = np.concatenate([[r["cp"]] * r["strike"].size for r in rows])
    strike = np.concatenate([r["strike"] for r in rows])
    k = np.concatenate([r["k"] for r in rows])
    vol = np.concatenate([r["vol"] for r in rows])
    t = t_exp[idx]
    is_call = cp == "C"

    from optbench.pricing.bsm import bsm_price
    mid = bsm_price(spot, strike, t, RATE, DIV_YIELD, vol, is_call)
    sd = vol * np.sqrt(t)
    fwd = spot * np.exp((RATE - DIV_YIELD) * t)
    d1 = (np.log(fwd / strike) + 0.5 * sd ** 2) / sd
    vega = spot * np.exp(-DIV_YIELD * t) * np.sqrt(t) * np.exp(-0.5 * d1 ** 2) / np.sqrt(2 * np.pi)
    # half-spread in vol: a base, more far from the money (in standard deviations)
    # and at the short end
    half_vol = 0.0015 + 0.001 * np.minimum(np.abs(k) / sd, 4.0) + 0.0015 / np.sqrt(t * 12.0)
    half = np.maximum(vega * half_vol, 0.5 * _tick(mid))
    half = np.maximum(half, 0.004 * mid)
    bid = _round_down(mid - half)
    ask = _round_up(mid + half)
    bid = np.maximum(bid, 0.0)
    intrinsic = np.maximum(np.where(is_call, spot - strike, strike - spot), 0.0)
    keep = ((mid >= MIN_MID) & (bid >= 0.01) & (bid >= intrinsic)
            & (ask - bid <= 0.8 * 0.5 * (ask + bid)))

    # trade data: open interest peaks near the money and on the monthlies
    monthly = np.isin(idx, (2, 3, 4, 5, 6, 7))
    width = 0.06 + 0.35 * np.sqrt(t)
    oi_mean = (200.0 + 1800.0 * monthly) * np.exp(-0.5 * (k / width) ** 2) * np.where(
        is_call, 0.8, 1.2)
    oi = np.floor(oi_mean * rng.lognormal(0.0, 0.8, size=k.size) - 40.0)
    oi = np.maximum(oi, 0.0)
    vol_mean = oi * 0.08 * np.exp(-t * 2.0)
    volume = rng.poisson(vol_mean)
    # a traded contract's last lies inside the spread; an untraded one is stale
    last_trade = bid + rng.random(k.size) * (ask - bid)
    last_stale = mid * np.exp(0.15 * rng.standard_normal(k.size))
    last = np.where(volume > 0, last_trade, last_stale)
    last = np.maximum(_round_near(last), 0.01)

    order = np.lexsort((strike, ~is_call, idx))
    order = order[keep[order]]

    def row(j: int) -> dict:
        e = expiry[j]
        return {
            "underlying": CODE, "quote_date": ASOF.isoformat(),
            "underlying_price": _fmt(spot), "expiry": e.isoformat(),
            "strike": _fmt(strike[j]), "type": cp[j], "bid": _fmt(bid[j]),
            "ask": _fmt(ask[j]),
            "last": "" if oi[j] == 0 and volume[j] == 0 else _fmt(last[j]),
            "volume": str(int(volume[j])), "open_interest": str(int(oi[j])),
            "symbol": occ_symbol(CODE, e, cp[j], strike[j]), "style": STYLE,
            "multiplier": str(MULTIPLIER),
        }

    def pick(exp_date: _dt.date, typ: str, moneyness: float) -> int:
        cand = [j for j in order if expiry[j] == exp_date and cp[j] == typ]
        return min(cand, key=lambda j: (abs(strike[j] / spot - moneyness), strike[j]))

    out: list[dict] = []
    kinds: list[str] = []
    targets = {}
    for kind, e, typ, m in BAD_ROWS:
        if e in EXPIRIES:
            targets.setdefault(pick(e, typ, m), kind)

    # the expired lines come first (a stale export still carries last week's expiry)
    for kind, e, typ, m in BAD_ROWS:
        if kind != "expired":
            continue
        ks = np.round(m * spot / 25.0) * 25.0
        px = float(bsm_price(spot, ks, 7.0 / 365.0, RATE, DIV_YIELD, 0.15, typ == "C"))
        out.append({
            "underlying": CODE, "quote_date": ASOF.isoformat(),
            "underlying_price": _fmt(spot), "expiry": e.isoformat(), "strike": _fmt(ks),
            "type": typ, "bid": _fmt(float(_round_down(np.array(px * 0.97)))),
            "ask": _fmt(float(_round_up(np.array(px * 1.03)))),
            "last": _fmt(float(_round_near(np.array(px)))),
            "volume": "0", "open_interest": "1250",
            "symbol": occ_symbol(CODE, e, typ, ks), "style": STYLE,
            "multiplier": str(MULTIPLIER),
        })
        kinds.append("expired")

    for j in order:
        r = row(j)
        kind = targets.get(j)
        if kind is None:
            out.append(r)
            kinds.append("")
            continue
        if kind == "crossed":
            r["bid"], r["ask"] = r["ask"], r["bid"]
            out.append(r)
            kinds.append(kind)
        elif kind == "zero_bid":
            r["bid"] = "0.00"
            out.append(r)
            kinds.append(kind)
        elif kind == "below_intrinsic":
            intr = spot - strike[j]
            r["bid"] = _fmt(float(_round_down(np.array(0.55 * intr))))
            r["ask"] = _fmt(float(_round_up(np.array(0.60 * intr))))
            r["last"] = r["ask"]
            out.append(r)
            kinds.append(kind)
        elif kind == "duplicate":
            out.append(r)
            kinds.append("")
            dup = dict(r)
            dup["bid"] = _fmt(bid[j] + 0.5)
            dup["ask"] = _fmt(ask[j] + 0.5)
            dup["volume"], dup["open_interest"] = "0", r["open_interest"]
            out.append(dup)
            kinds.append(kind)
        elif kind == "unparseable":
            r["strike"] = r["strike"].replace("0", "O", 2)
            r["strike"] = r["strike"][:1] + "," + r["strike"][1:]
            r["symbol"] = ""
            out.append(r)
            kinds.append(kind)
    bad = [(n + 2, kind) for n, kind in enumerate(kinds) if kind]
    return out, spot, dict(zip(EXPIRIES, atm)), dict(zip(EXPIRIES, forecast)), bad


# --------------------------------------------------------------------- scenario
def generate(seed: int = SEED) -> DemoScenario:
    """Build the whole demo scenario from ``seed`` (pure: no files written)."""
    rng = np.random.default_rng(seed)
    hol = holidays()
    dates = trading_dates(FIRST_DATE, ASOF, hol)
    history = simulate_history(rng, dates)
    chain, spot, atm, forecast, bad = _build_chain(rng, history, hol)
    return DemoScenario(history=history, chain=chain, spot=spot, holidays=hol,
                        atm_iv=atm, reference_forecast=forecast, bad_rows=bad)


def render_files(scenario: DemoScenario) -> dict[str, bytes]:
    """The scenario folder's files as bytes: ``chain.csv``, ``history.csv``, ``meta.toml``."""
    chain = io.StringIO()
    chain.write(",".join(CHAIN_COLUMNS) + "\n")
    for r in scenario.chain:
        chain.write(",".join(_csv_field(r[c]) for c in CHAIN_COLUMNS) + "\n")

    h = scenario.history
    hist = io.StringIO()
    hist.write("date,open,high,low,close\n")
    for d, o, hi, lo, c in zip(h.dates.astype(str), h.open, h.high, h.low, h.close):
        hist.write(f"{d},{o:.2f},{hi:.2f},{lo:.2f},{c:.2f}\n")

    hol = ", ".join(f'"{d.isoformat()}"' for d in scenario.holidays)
    meta = (
        "# optbench demo scenario. The data are invented: the Zephyr Composite Index,\n"
        "# its prices, holidays and option chain are simulated by `optbench demo`\n"
        f"# (fixed seed). No real index, company or market event is represented.\n"
        f'name = "{NAME}"\n'
        f'code = "{CODE}"\n'
        f"spot = {scenario.spot:.2f}\n"
        f"asof = {ASOF.isoformat()}\n"
        f"rate = {RATE}\n"
        f"div_yield = {DIV_YIELD}\n"
        f'style = "{STYLE}"\n'
        f"multiplier = {MULTIPLIER}\n"
        f'note = "Invented data for demonstration only; not a real index."\n'
        f"holidays = [{hol}]\n"
    )
    return {"chain.csv": chain.getvalue().encode(), "history.csv": hist.getvalue().encode(),
            "meta.toml": meta.encode()}


def _csv_field(text: str) -> str:
    return f'"{text}"' if ("," in text or '"' in text) else text


def write_scenario(folder: str | Path, seed: int = SEED) -> dict[str, int]:
    """Generate the scenario and write it into ``folder`` (created if needed).

    Returns ``{file name: bytes written}``.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    files = render_files(generate(seed))
    for name, data in files.items():
        (folder / name).write_bytes(data)
    return {name: len(data) for name, data in files.items()}


# --------------------------------------------------------------- implied-vol history
IV_HISTORY_YEARS = 3
IV_TENORS = (30, 61, 91, 182, 365)          # calendar days
IV_PREMIUM_MEAN = 0.022                     # average ATM premium over the expected vol
IV_PREMIUM_PERSISTENCE = 0.985              # daily AR(1) weight of the premium
IV_PREMIUM_SD = 0.018                       # stationary spread of the premium (vol)
IV_NOISE_SD = 0.004                         # day-to-day quoting noise per tenor (vol)
IV_PUT_SKEW, IV_CALL_SKEW = 0.045, -0.015   # 25-delta wings against ATM at 30 days
IV_STREAM = 2                               # independent random stream of the seed


def expected_vol(history: DemoHistory, index: np.ndarray, trading_days: np.ndarray
                 ) -> np.ndarray:
    """The true model's expected average vol from the day after ``dates[index]`` over
    ``trading_days`` days, holding that day's long-run level.

    With the simulation's GJR persistence :math:`P = \\alpha + \\gamma/2 + \\beta`,
    long-run daily variance :math:`\\bar\\sigma^2_t` in force on the day and the
    next day's conditional variance :math:`\\sigma^2_{t+1}`:
    :math:`\\sqrt{252\\,(\\bar\\sigma^2_t + (\\sigma^2_{t+1} - \\bar\\sigma^2_t)
    \\tfrac{1 - P^h}{(1-P)h})}` (Glosten, Jagannathan and Runkle 1993; the level
    shifts of the regime chain are not anticipated).
    """
    p = ALPHA + 0.5 * GAMMA + BETA
    nxt = np.append(history.cond_var[1:], history.next_var)[index]
    level = (history.long_run_vol[index] ** 2 / 252.0)
    h = np.asarray(trading_days, float)
    avg = level[:, None] if level.ndim == 1 and h.ndim == 2 else level
    nx = nxt[:, None] if nxt.ndim == 1 and h.ndim == 2 else nxt
    return np.sqrt(252.0 * (avg + (nx - avg) * (1.0 - p ** h) / ((1.0 - p) * h)))


def generate_iv_history(scenario: DemoScenario | None = None, seed: int = SEED) -> list[str]:
    """The demo's implied-vol history: one CSV line per date and tenor (no header).

    Over the last :data:`IV_HISTORY_YEARS` years of the price history, for each date
    and each tenor of :data:`IV_TENORS`, the ATM implied vol is the true model's
    expected vol to that tenor (:func:`expected_vol`) plus a premium that wanders
    as an AR(1) around :data:`IV_PREMIUM_MEAN` (sometimes below zero, so "cheap"
    shows up) plus quoting noise; the 25-delta put and call sit a skew above and
    below, shrinking with the tenor as :math:`(30/\\text{tenor})^{0.3}`. A separate
    random stream of the seed is used, so the chain and price history do not change.
    """
    sc = generate(seed) if scenario is None else scenario
    h = sc.history
    rng = np.random.default_rng([seed, IV_STREAM])
    first = np.datetime64(ASOF.replace(year=ASOF.year - IV_HISTORY_YEARS))
    index = np.flatnonzero(h.dates > first)
    n, k = index.size, len(IV_TENORS)
    tenor = np.array(IV_TENORS, dtype="timedelta64[D]")
    d = h.dates[index]
    hol = np.array(sc.holidays, dtype="datetime64[D]")
    one = np.timedelta64(1, "D")
    td = np.busday_count((d + one)[:, None], (d[:, None] + tenor[None, :]) + one, holidays=hol)
    vol = expected_vol(h, index, td)
    shock = rng.standard_normal(n) * IV_PREMIUM_SD * np.sqrt(1 - IV_PREMIUM_PERSISTENCE ** 2)
    prem = np.empty(n)
    x = 0.0
    for i in range(n):                      # an AR(1): each day depends on the one before
        x = IV_PREMIUM_PERSISTENCE * x + shock[i]
        prem[i] = x
    atm = vol + IV_PREMIUM_MEAN + prem[:, None] + rng.standard_normal((n, k)) * IV_NOISE_SD
    wing = (30.0 / np.array(IV_TENORS, float)) ** 0.3
    put = atm + IV_PUT_SKEW * wing + rng.standard_normal((n, k)) * IV_NOISE_SD / 2
    call = atm + IV_CALL_SKEW * wing + rng.standard_normal((n, k)) * IV_NOISE_SD / 2
    atm, put, call = (np.maximum(v, 0.02) for v in (atm, put, call))
    days = d.astype(str)
    return [f"{days[i]},{IV_TENORS[j]},{atm[i, j]:.4f},{put[i, j]:.4f},{call[i, j]:.4f}"
            for i in range(n) for j in range(k)]


def render_iv_history(scenario: DemoScenario | None = None, seed: int = SEED) -> bytes:
    """``iv_history.csv`` of the demo as bytes (header ``date,tenor_days,atm_iv,
    iv_25d_put,iv_25d_call``; decimal vols)."""
    lines = generate_iv_history(scenario, seed)
    return ("date,tenor_days,atm_iv,iv_25d_put,iv_25d_call\n" + "\n".join(lines)
            + "\n").encode()


def write_iv_history(folder: str | Path, seed: int = SEED) -> dict[str, int]:
    """Write the demo's ``iv_history.csv`` into ``folder``; ``{name: bytes}``."""
    data = render_iv_history(None, seed)
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "iv_history.csv").write_bytes(data)
    return {"iv_history.csv": len(data)}
# --------------------------------------------------------------- demo portfolio
# An invented portfolio of a dozen invented holdings on the invented index: each
# holding's daily log return is beta_i x the index's plus its own Student-t noise
# (the market model; Sharpe 1963, "A simplified model for portfolio analysis").
# Written as chains/ZPHX/holdings.csv and a wide history of closes,
# chains/ZPHX/holdings_history.csv, with a few deliberate gaps so the loader has
# something to report: ZH07 listed only 120 trading days ago (too short for the
# one-year beta), ZH11 with four days of missing closes, ZH12 absent from the
# history file, a column ZH13 (a holding since sold) that matches no holding, and
# ZH05 without a price in the holdings file (its last close is used).
PORTFOLIO_SEED = 20261414
PORTFOLIO_YEARS = 3                    # trading years of holdings history
PORTFOLIO_TARGET_VALUE = 25_000_000.0
PORTFOLIO_CODES = tuple(f"ZH{i:02d}" for i in range(1, 14))   # ZH13 = sold holding


@dataclass(frozen=True)
class DemoPortfolio:
    """The invented holdings (``holdings`` rows) and the wide closes (``dates``, ``closes``
    as ``{code: array, NaN = no close}``)."""

    holdings: list[dict]
    dates: np.ndarray
    closes: dict
    betas: dict


def generate_portfolio(scenario: DemoScenario, seed: int = PORTFOLIO_SEED) -> DemoPortfolio:
    """Invent the demo portfolio on ``scenario``'s index history (pure, fixed seed)."""
    rng = np.random.default_rng(seed)
    h = scenario.history
    n = min(len(h.close), PORTFOLIO_YEARS * 252 + 1)
    dates = h.dates[-n:]
    idx_ret = np.diff(np.log(h.close[-n:]))
    k = len(PORTFOLIO_CODES)
    betas = np.round(rng.uniform(0.6, 1.7, k), 2)
    idio = rng.uniform(0.12, 0.32, k) / np.sqrt(252)        # daily residual vol
    nu = 5.0
    z = rng.standard_t(nu, size=(n - 1, k)) * np.sqrt((nu - 2) / nu)
    rets = idx_ret[:, None] * betas[None, :] + z * idio[None, :]
    start = np.round(rng.uniform(20.0, 400.0, k), 2)
    closes = np.round(start[None, :] * np.exp(np.vstack([np.zeros(k), np.cumsum(rets, 0)])), 2)
    closes[:-120, 6] = np.nan                                # ZH07: listed 120 days ago
    closes[[-200, -150, -90, -30], 10] = np.nan              # ZH11: four gaps
    shares = rng.uniform(0.04, 0.12, 12)
    shares /= shares.sum()
    rows = []
    for i, code in enumerate(PORTFOLIO_CODES[:12]):
        price = float(closes[-1, i])
        qty = int(round(PORTFOLIO_TARGET_VALUE * shares[i] / price))
        rows.append({"symbol": code, "quantity": str(qty),
                     "price": "" if code == "ZH05" else f"{price:.2f}"})
    columns = {code: closes[:, i] for i, code in enumerate(PORTFOLIO_CODES) if code != "ZH12"}
    return DemoPortfolio(holdings=rows, dates=dates, closes=columns,
                         betas=dict(zip(PORTFOLIO_CODES, betas.tolist())))


def render_portfolio_files(portfolio: DemoPortfolio) -> dict[str, bytes]:
    """``holdings.csv`` and ``holdings_history.csv`` as bytes (fixed decimals, ``\\n``)."""
    hold = io.StringIO()
    hold.write("symbol,quantity,price\n")
    for r in portfolio.holdings:
        hold.write(f"{r['symbol']},{r['quantity']},{r['price']}\n")
    codes = list(portfolio.closes)
    hist = io.StringIO()
    hist.write("date," + ",".join(codes) + "\n")
    cols = np.column_stack([portfolio.closes[c] for c in codes])
    for d, row in zip(portfolio.dates.astype(str), cols):
        hist.write(d + "," + ",".join("" if not np.isfinite(v) else f"{v:.2f}" for v in row)
                   + "\n")
    return {"holdings.csv": hold.getvalue().encode(),
            "holdings_history.csv": hist.getvalue().encode()}


def write_portfolio(folder: str | Path, seed: int = SEED,
                    portfolio_seed: int = PORTFOLIO_SEED) -> dict[str, int]:
    """Generate the demo portfolio on the scenario of ``seed`` and write
    ``holdings.csv`` and ``holdings_history.csv`` into ``folder``.

    Returns ``{file name: bytes written}``.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    files = render_portfolio_files(generate_portfolio(generate(seed), portfolio_seed))
    for name, data in files.items():
        (folder / name).write_bytes(data)
    return {name: len(data) for name, data in files.items()}
