"""The result objects every view reads: the comparison and the hedge-cost estimates.

One computation, many views: :func:`optbench.compare` returns a :class:`Comparison`
and :func:`optbench.hedge` returns a :class:`HedgeEstimate`. The terminal workbench,
the command line and every export read these objects and never recompute numbers.
All objects are frozen dataclasses; each has ``to_dict()`` giving plain Python values
(dates as ISO strings, floats possibly NaN — the JSON writer turns NaN into ``null``).

Units (everywhere in this module)
---------------------------------
- Volatilities are annualised decimals (0.215 = 21.5 %). A *vol point* is 0.01.
- Variances are annualised decimals of variance (0.215**2 = 0.046225).
- Rates and yields are continuously compounded decimals.
- ``t`` is calendar days / 365 from the quote date; ``trading_days`` counts the
  weekdays (less holidays) after the quote date up to and including the expiry,
  annualised with 252 in the volatility model.
- Money amounts (premiums, payoffs, edges, P&L) are in the underlying's currency
  for the whole position (``premium_*``, ``expected_payoff``, scenarios) or for one
  contract (``edge_per_contract``) — the name says which.
- Percentages of the portfolio are decimals (``cost_pct`` 0.012 = 1.2 % of value).
- Probabilities are decimals in [0, 1].

Per-expiry fields (:class:`ExpiryRow`)
--------------------------------------
``expiry``
    expiry date (``datetime.date``).
``calendar_days``, ``trading_days``, ``t``
    calendar days to expiry, trading days to expiry, calendar days / 365.
``forward``, ``discount``, ``forward_source``
    forward price of the underlying for that expiry, discount factor e^{-rt}, and
    how the forward was found (``"put-call parity"`` from the quotes, or
    ``"carry"`` = S·e^{(r-q)t} from the rate and dividend yield).
``style``
    exercise style of the quotes (``"european"``/``"american"``); American chains
    use the American implied vols.
``n_quotes``
    quotes used on that expiry.
``atm_iv``, ``atm_iv_bid``, ``atm_iv_ask``
    at-the-money (strike = forward) implied vol from mid, bid and ask quotes.
``iv_25d_put``, ``iv_25d_call``, ``rr_25d``
    implied vol at the 25-delta put and call, and the risk reversal
    ``iv_25d_call - iv_25d_put`` (decimal vol; negative = puts dearer).
``iv_90``, ``iv_95``
    implied vol on the fitted smile at strikes of 90 % and 95 % of the forward.
``model_free_iv``
    square root of the model-free implied variance (decimal vol).
``forecast_vol``, ``forecast_low``, ``forecast_high``
    the fitted model's forecast of the annualised average vol from the day after
    the last return to expiry, and its band: quantiles of that forecast over the
    sampling distribution of the model's estimated parameters (the band's levels
    are ``Comparison.band``, by default 5 % and 95 %).
``realized_vol``
    trailing realized vol over a window as long as the option's life (in trading
    days, at least 5), close-to-close, annualised with 252.
``cone_percentile``
    where ``atm_iv`` sits in the historical distribution of realized vol over
    windows of that length (0 = below every window, 1 = above every window).
``iv_minus_forecast``
    ``atm_iv - forecast_vol`` in decimal vol (0.02 = 2 vol points).
``variance_premium``
    ``atm_iv**2 - forecast_vol**2`` (annualised variance; the variance risk premium
    of Bollerslev, Tauchen & Zhou 2009, with the model forecast as the expectation
    of realized variance).
``iv_forecast_ratio``
    ``atm_iv / forecast_vol``.
``prob_realized_above_iv``
    share of the model's simulated paths whose realized vol over the option's life
    ends above ``atm_iv`` (the model's physical, not risk-neutral, distribution).
``verdict``
    ``"rich"`` (``atm_iv > forecast_high``), ``"cheap"`` (``atm_iv < forecast_low``)
    or ``"fair"`` (inside the band); ``"n/a"`` when either side is missing.
``smile``
    a small summary of the smile fit (``{"method", "rmse", "n_points", "converged",
    "bf_25d", "params", "curve"}``; ``params`` holds the raw SVI
    ``a, b, rho, m, sigma, t`` of the total variance in log-moneyness, ``curve`` the
    fitted smile ``{"strike": [...], "iv": [...]}`` across the quoted strikes).
``arbitrage_flags``
    count of quotes flagged by the static-arbitrage checks on that expiry.
``rate``, ``carry``
    the rate and the carry (dividend yield plus borrow) used for that expiry,
    continuously compounded decimals: implied by put-call parity where
    ``forward_source`` says so, else the given rate and dividend yield.
``floor``
    the protection floor as a fraction of spot (``Comparison.floor``, 0.90 by default).
``put25_*``, ``floor_put_*`` — the protection verdict (:mod:`optbench.analysis.protection`)
    two listed puts judged on their own: the put nearest 25 delta (``put25_``) and the
    put nearest ``floor`` × spot (``floor_put_``). Per put: ``strike``; ``delta``
    (Black-Scholes-Merton spot delta at its mid vol); ``iv`` (its mid implied vol);
    ``premium`` (the ask a buyer pays, per unit of the underlying) and ``premium_mid``;
    ``expected_payoff`` (the model-expected discounted payoff per unit over the
    simulated fitted model with the comparison's ``drift``); ``payoff_low``,
    ``payoff_high`` (its band: the forecast band carried to the payoff plus the
    simulation error); ``payoff_se`` (the Monte Carlo standard error of
    ``expected_payoff``); ``verdict`` (``"rich"`` = expensive protection, the ask above
    ``payoff_high``; ``"cheap"`` below ``payoff_low``; ``"fair"`` inside; ``"n/a"``
    without a put or a model). NaN where the expiry has no put with an ask.

Per-strike table (``Comparison.strikes[expiry]``, a DataFrame)
--------------------------------------------------------------
One row per used quote: ``expiry``, ``strike``, ``is_call``, ``type`` (``C``/``P``),
``moneyness`` (strike / forward), ``bid``, ``ask``, ``mid`` (per unit of the
underlying), ``iv_bid``, ``iv_mid``, ``iv_ask`` (decimal vol, NaN where no vol fits),
``delta`` (per unit), ``vega_per_vol_point`` (price change per unit of the underlying
for +0.01 vol), ``forecast_vol`` (the expiry's forecast), ``price_at_forecast`` (the
option's value per unit at the forecast vol), ``edge_per_contract`` (market mid minus
``price_at_forecast``, times the multiplier — positive = the market charges more
than the forecast says it is worth), ``edge_vol_points`` (the edge in vol points,
exactly: ``100 * (iv_mid - forecast_vol)``, 2.0 = 2 vol points rich),
``edge_per_vega`` (the edge per unit divided by ``vega_per_vol_point`` at the mid
implied vol: the first-order vega view of the same edge, in vol points),
``multiplier``, ``line`` (input line).
"""
from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass, field, fields
from typing import Any

import numpy as np
import pandas as pd

CAUTION = ("Model estimates from the data given, not advice. Decisions belong with "
           "your licensed advisers and the rules of your exchange and broker.")

VERDICT_RULE = ("rich if the ATM implied vol is above the upper edge of the forecast band "
                "(the {high:.0%} quantile of the model's forecast vol to that expiry over the "
                "uncertainty of its estimated parameters), cheap if below its lower edge "
                "(the {low:.0%} quantile), fair inside the band")

VERDICTS = ("rich", "fair", "cheap", "n/a")

STRUCTURES = ("put", "put_spread", "collar")

#: Largest beta or hedge ratio a request accepts (a leveraged portfolio's beta to
#: its index is a few units; beyond 10 the number is a typing error).
MAX_BETA = 10.0

#: Columns of every per-strike table, in order.
STRIKE_COLUMNS = ("expiry", "strike", "is_call", "type", "moneyness", "bid", "ask", "mid",
                  "iv_bid", "iv_mid", "iv_ask", "delta", "vega_per_vol_point",
                  "forecast_vol", "price_at_forecast", "edge_per_contract",
                  "edge_vol_points", "edge_per_vega", "multiplier", "line")


# --------------------------------------------------------------------------- helpers
def plain(value: Any) -> Any:
    """Turn numpy scalars, dates, frames and nested containers into plain Python.

    NaN stays ``float('nan')``; the JSON writer renders it as ``null``.
    """
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, (np.bool_,)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value)
    if isinstance(value, pd.Timestamp):
        return None if pd.isna(value) else value.date().isoformat()
    if isinstance(value, np.datetime64):
        return None if np.isnat(value) else str(value.astype("datetime64[D]"))
    if isinstance(value, _dt.datetime):
        return value.date().isoformat()
    if isinstance(value, _dt.date):
        return value.isoformat()
    if isinstance(value, pd.DataFrame):
        return [{str(k): plain(v) for k, v in rec.items()}
                for rec in value.to_dict(orient="records")]
    if isinstance(value, dict):
        return {str(plain(k)) if not isinstance(k, str) else k: plain(v)
                for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return [plain(v) for v in value.tolist()]
    if hasattr(value, "to_dict"):
        return plain(value.to_dict())
    return value


def _isnan(x: Any) -> bool:
    try:
        return math.isnan(float(x))
    except (TypeError, ValueError):
        return False


def verdict_for(atm_iv: float, low: float, high: float) -> str:
    """The verdict rule: rich above the band, cheap below it, fair inside."""
    if _isnan(atm_iv) or _isnan(low) or _isnan(high):
        return "n/a"
    if atm_iv > high:
        return "rich"
    if atm_iv < low:
        return "cheap"
    return "fair"


# --------------------------------------------------------------------- comparison
@dataclass(frozen=True, eq=False)
class ModelSummary:
    """The fitted volatility model, as the comparison used it.

    ``params`` are in decimal-return units (``omega`` in squared daily decimal
    returns, ``mu`` a daily decimal return); ``long_run_vol`` is annualised with 252;
    ``half_life_days`` in trading days.
    """

    name: str
    dist: str
    mean: str
    params: dict
    std_errors: dict = field(default_factory=dict)
    loglik: float = math.nan
    aic: float = math.nan
    bic: float = math.nan
    converged: bool = True
    persistence: float = math.nan
    half_life_days: float = math.nan
    long_run_vol: float = math.nan
    n_obs: int = 0
    fallback_reason: str | None = None

    def to_dict(self) -> dict:
        return {f.name: plain(getattr(self, f.name)) for f in fields(self)}


@dataclass(frozen=True, eq=False)
class ExpiryRow:
    """One expiry of the comparison; see the module docstring for every field's units."""

    expiry: _dt.date
    calendar_days: int
    trading_days: int
    t: float
    forward: float
    discount: float
    forward_source: str
    style: str
    n_quotes: int
    atm_iv: float
    atm_iv_bid: float
    atm_iv_ask: float
    iv_25d_put: float
    iv_25d_call: float
    iv_90: float
    iv_95: float
    rr_25d: float
    model_free_iv: float
    forecast_vol: float
    forecast_low: float
    forecast_high: float
    realized_vol: float
    cone_percentile: float
    iv_minus_forecast: float
    variance_premium: float
    iv_forecast_ratio: float
    prob_realized_above_iv: float
    verdict: str
    smile: dict = field(default_factory=dict)
    arbitrage_flags: int = 0
    rate: float = math.nan
    carry: float = math.nan
    # the protection verdict (see the module docstring and analysis/protection.py)
    floor: float = math.nan
    put25_strike: float = math.nan
    put25_delta: float = math.nan
    put25_iv: float = math.nan
    put25_premium: float = math.nan
    put25_premium_mid: float = math.nan
    put25_expected_payoff: float = math.nan
    put25_payoff_low: float = math.nan
    put25_payoff_high: float = math.nan
    put25_payoff_se: float = math.nan
    put25_verdict: str = "n/a"
    floor_put_strike: float = math.nan
    floor_put_delta: float = math.nan
    floor_put_iv: float = math.nan
    floor_put_premium: float = math.nan
    floor_put_premium_mid: float = math.nan
    floor_put_expected_payoff: float = math.nan
    floor_put_payoff_low: float = math.nan
    floor_put_payoff_high: float = math.nan
    floor_put_payoff_se: float = math.nan
    floor_put_verdict: str = "n/a"

    def to_dict(self) -> dict:
        return {f.name: plain(getattr(self, f.name)) for f in fields(self)}


@dataclass(frozen=True, eq=False)
class Comparison:
    """Implied against forecast volatility for one underlying.

    Attributes
    ----------
    asof : quote date.
    underlying : code or name of the underlying.
    source : the chain file or scenario folder the quotes came from.
    spot, rate, div_yield : market inputs used (decimals for rate and yield).
    style, multiplier : exercise style and contract multiplier of the chain.
    conventions : how times, vols and rates are measured (plain words).
    model : the fitted volatility model (:class:`ModelSummary`).
    band : (low, high) quantile levels of the forecast band, e.g. (0.05, 0.95).
    verdict_rule : the verdict rule in plain words.
    quality : ``{"rows_in", "rows_used", "rejected": {reason: count},
        "warnings": {flag: count}}``.
    expiries : one :class:`ExpiryRow` per expiry, nearest first.
    strikes : per-strike tables, ``{expiry date: DataFrame}`` with
        :data:`STRIKE_COLUMNS` (a read-only mapping,
        :class:`~optbench.analysis.strike_tables.StrikeTables`: each frame is made
        when first read).
    realized : trailing realized vols, ``{"window_days": [...], "vol": [...]}`` and
        the estimator's name under ``"estimator"``.
    cone : the volatility cone, a DataFrame with ``window_days`` and quantile columns
        (``min``, ``p10``, ``p25``, ``median``, ``p75``, ``p90``, ``max``, decimals).
    history : price history with the model's conditional vol: DataFrame with
        ``date``, ``close``, ``ret`` (daily log return), ``sigma`` (conditional daily
        vol, decimal), ``z`` (ret standardised by the model: ``(ret - mu)/sigma``),
        ``band_low``/``band_high`` (the one-day ±3-sigma band of the close: previous
        close × exp(mu ∓ 3·sigma), in price units).
    backtest : the out-of-sample summary (backtest JSON) when computed, else None.
    n_paths, seed : the simulation behind the bands and probabilities.
    rejected : rejected input rows (``line``, ``reason``, ``detail``), or None.
    warnings : notes the user should see (fallbacks, missing parts, stale data).
    caution : :data:`CAUTION`.
    fit : the fitted model object (``GarchFit``) for further simulation (hedge);
        not part of ``to_dict()``.
    sources : where each market input came from (``{"spot": "file", "rate": "meta",
        ...}``: ``caller``, ``file``, ``meta`` or ``default``).
    drift : the drift of every simulated terminal price and probability
        (:class:`optbench.analysis.drift.DriftChoice`; in JSON ``{"rule":
        "risk-free"|"excess"|"fitted", "annual", "excess_return", "source", "text"}``).
    floor : the protection floor, a fraction of spot (the floor put of each expiry).
    protection_rule : the protection verdict's rule in plain words.
    """

    asof: _dt.date
    underlying: str
    source: str
    spot: float
    rate: float
    div_yield: float
    style: str
    multiplier: float
    conventions: dict
    model: ModelSummary
    band: tuple[float, float]
    verdict_rule: str
    quality: dict
    expiries: tuple[ExpiryRow, ...]
    strikes: dict
    realized: dict = field(default_factory=dict)
    cone: pd.DataFrame | None = None
    history: pd.DataFrame | None = None
    backtest: dict | None = None
    n_paths: int = 0
    seed: int | None = None
    rejected: pd.DataFrame | None = None
    warnings: tuple[str, ...] = ()
    caution: str = CAUTION
    fit: Any = field(default=None, repr=False)
    sources: dict = field(default_factory=dict)
    drift: Any = None
    floor: float = 0.90
    protection_rule: str = ""

    # -- access
    def expiry_frame(self) -> pd.DataFrame:
        """The per-expiry table as a DataFrame (one row per expiry; smile flattened)."""
        rows = []
        for row in self.expiries:
            d = {f.name: getattr(row, f.name) for f in fields(row) if f.name != "smile"}
            d["smile_method"] = row.smile.get("method")
            d["smile_rmse"] = row.smile.get("rmse", math.nan)
            rows.append(d)
        return pd.DataFrame(rows)

    def strike_frame(self, expiry: _dt.date | str | None = None) -> pd.DataFrame:
        """The per-strike table for one expiry (date or ISO string), or all of them."""
        if expiry is None:
            frames = [f for f in self.strikes.values() if len(f)]
            if not frames:
                return pd.DataFrame(columns=list(STRIKE_COLUMNS))
            return pd.concat(frames, ignore_index=True)
        if isinstance(expiry, str):
            expiry = _dt.date.fromisoformat(expiry)
        try:
            return self.strikes[expiry]
        except KeyError:
            from optbench.errors import InputError
            have = ", ".join(d.isoformat() for d in self.strikes)
            raise InputError("--expiry", f"{expiry.isoformat()} is not an expiry in the "
                                         f"chain (have: {have})") from None

    def expiry_row(self, expiry: _dt.date | str) -> ExpiryRow:
        if isinstance(expiry, str):
            expiry = _dt.date.fromisoformat(expiry)
        for row in self.expiries:
            if row.expiry == expiry:
                return row
        from optbench.errors import InputError
        raise InputError("--expiry", f"{expiry.isoformat()} is not an expiry in the chain")

    def to_dict(self, *, strikes: bool = True, history: bool = False) -> dict:
        """JSON-ready dict (DESIGN.md's compare contract plus the fields above)."""
        out = {
            "asof": plain(self.asof),
            "underlying": self.underlying,
            "source": self.source,
            "spot": plain(self.spot),
            "rate": plain(self.rate),
            "div_yield": plain(self.div_yield),
            "style": self.style,
            "multiplier": plain(self.multiplier),
            "sources": plain(self.sources),
            "conventions": plain(self.conventions),
            "model": self.model.to_dict(),
            "band": list(self.band),
            "verdict_rule": self.verdict_rule,
            "drift": plain(self.drift),
            "floor": plain(self.floor),
            "protection_rule": self.protection_rule,
            "n_paths": self.n_paths,
            "seed": self.seed,
            "expiries": [row.to_dict() for row in self.expiries],
            "quality": plain(self.quality),
            "realized": plain(self.realized),
            "cone": plain(self.cone) if self.cone is not None else None,
            "backtest": plain(self.backtest),
            "warnings": list(self.warnings),
            "caution": self.caution,
        }
        if strikes:
            out["strikes"] = plain(self.strike_frame())
        if history and self.history is not None:
            out["history"] = plain(self.history)
        return out


# --------------------------------------------------------------------------- hedge
@dataclass(frozen=True, eq=False)
class HedgeRequest:
    """What to protect and how.

    Attributes
    ----------
    portfolio_value : value of the portfolio in money (> 0).
    beta : beta of the portfolio to the underlying (used unless ``hedge_ratio``).
    hedge_ratio : units of underlying exposure to protect per unit of portfolio
        value / spot; overrides ``beta`` when given.
    floor : put strike as a fraction of spot (0.90 = protect below 90 % of spot);
        must lie in (0, 1].
    expiry : the expiry to use (a date in the chain), or None.
    days : pick the expiry nearest to this many calendar days (when ``expiry`` is None).
    structure : ``"put"``, ``"put_spread"`` or ``"collar"``.
    lower_floor : the sold put's strike as a fraction of spot (put spread only;
        below ``floor``; default ``floor - 0.10``).
    call_strike : the sold call's strike in money (collar only); None = choose the
        listed call that makes the net premium nearest zero.
    multiplier : contract multiplier; None = the chain's.

    Ranges: ``beta`` and ``hedge_ratio`` at most :data:`MAX_BETA` in size; a collar's
    ``call_strike`` must lie above the put strike (checked against the chain, where
    the listed strikes are known).
    """

    portfolio_value: float
    beta: float = 1.0
    hedge_ratio: float | None = None
    floor: float = 0.90
    expiry: _dt.date | None = None
    days: int | None = None
    structure: str = "put"
    lower_floor: float | None = None
    call_strike: float | None = None
    multiplier: float | None = None

    def __post_init__(self) -> None:
        from optbench.errors import InputError

        def num(name: str, value: Any) -> float:
            try:
                x = float(value)
            except (TypeError, ValueError):
                raise InputError(name, f"not a number: {value!r}") from None
            if not math.isfinite(x):
                raise InputError(name, f"not a finite number: {value!r}")
            return x

        pv = num("--portfolio", self.portfolio_value)
        if pv <= 0:
            raise InputError("--portfolio", f"portfolio value must be positive, not {value_text(pv)}")
        object.__setattr__(self, "portfolio_value", pv)
        beta = num("--beta", self.beta)
        object.__setattr__(self, "beta", beta)
        if self.hedge_ratio is not None:
            hr = num("--hedge-ratio", self.hedge_ratio)
            if hr <= 0:
                raise InputError("--hedge-ratio", f"must be positive, not {value_text(hr)}")
            object.__setattr__(self, "hedge_ratio", hr)
        elif beta <= 0:
            raise InputError("--beta", f"a protective hedge needs a positive beta, not "
                                       f"{value_text(beta)}")
        for name, ratio in (("--beta", beta), ("--hedge-ratio", self.hedge_ratio)):
            if ratio is not None and abs(float(ratio)) > MAX_BETA:
                raise InputError(name, f"{value_text(float(ratio))} is beyond any "
                                       f"portfolio's exposure (at most {MAX_BETA:g})")
        floor = num("--floor", self.floor)
        if not 0 < floor <= 1:
            raise InputError("--floor", f"must be a fraction of spot in (0, 1], such as "
                                        f"0.90, not {value_text(floor)}")
        object.__setattr__(self, "floor", floor)
        structure = str(self.structure).lower().replace("-", "_")
        if structure not in STRUCTURES:
            raise InputError("--structure", f"must be one of put, put-spread, collar, "
                                            f"not {self.structure!r}")
        object.__setattr__(self, "structure", structure)
        if self.lower_floor is not None:
            lf = num("--lower-floor", self.lower_floor)
            if not 0 < lf < floor:
                raise InputError("--lower-floor", f"must lie between 0 and the floor "
                                                  f"{value_text(floor)}, not {value_text(lf)}")
            object.__setattr__(self, "lower_floor", lf)
        if self.call_strike is not None:
            cs = num("--call-strike", self.call_strike)
            if cs <= 0:
                raise InputError("--call-strike", f"must be a positive strike, not "
                                                  f"{value_text(cs)}")
            object.__setattr__(self, "call_strike", cs)
        if self.multiplier is not None:
            m = num("--multiplier", self.multiplier)
            if m <= 0:
                raise InputError("--multiplier", f"must be positive, not {value_text(m)}")
            object.__setattr__(self, "multiplier", m)
        if self.days is not None:
            try:
                d = int(self.days)
            except (TypeError, ValueError):
                raise InputError("--days", f"not a whole number of days: {self.days!r}") from None
            if d <= 0:
                raise InputError("--days", f"must be a positive number of days, not {d}")
            object.__setattr__(self, "days", d)
        if self.expiry is not None and not isinstance(self.expiry, _dt.date):
            try:
                object.__setattr__(self, "expiry", _dt.date.fromisoformat(str(self.expiry)))
            except ValueError:
                raise InputError("--expiry", f"not a date (YYYY-MM-DD): {self.expiry!r}") from None

    @property
    def exposure_ratio(self) -> float:
        """The ratio applied to portfolio value: ``hedge_ratio`` if given, else ``beta``."""
        return self.hedge_ratio if self.hedge_ratio is not None else self.beta

    def to_dict(self) -> dict:
        return {f.name: plain(getattr(self, f.name)) for f in fields(self)}


def value_text(x: float) -> str:
    return f"{x:g}"


@dataclass(frozen=True, eq=False)
class HedgeLeg:
    """One option leg of a hedge.

    ``quantity`` is in contracts (positive = bought, negative = sold); ``bid``, ``ask``,
    ``mid`` and ``price_at_forecast`` are per unit of the underlying; ``premium_*`` are
    money for the whole leg, signed as cash paid (a sold leg has a negative premium).
    """

    side: str                 # "buy" | "sell"
    type: str                 # "P" | "C"
    strike: float
    expiry: _dt.date
    quantity: int
    bid: float
    ask: float
    mid: float
    iv_mid: float
    forecast_vol: float
    price_at_forecast: float
    premium_mid: float
    premium_paid: float
    premium_at_forecast: float
    line: int = 0

    def to_dict(self) -> dict:
        return {f.name: plain(getattr(self, f.name)) for f in fields(self)}


@dataclass(frozen=True, eq=False)
class HedgeEstimate:
    """Hedge-cost estimates for one portfolio; see the module docstring for units.

    Attributes
    ----------
    request : the :class:`HedgeRequest`.
    underlying, asof, spot : the market used.
    expiry, calendar_days, trading_days : the protection's expiry.
    structure : ``"put"``, ``"put_spread"`` or ``"collar"``.
    contracts : number of contracts, ``round(ratio * V / (multiplier * spot))``.
    multiplier : contract multiplier used.
    strike : the bought put's strike; ``strikes`` all strikes, bought put first.
    legs : the option legs (:class:`HedgeLeg`).
    premium_mid : net premium at mid prices (money, positive = paid).
    premium_paid : net premium actually paid: ask for bought legs, bid for sold legs.
    premium_at_forecast : net value of the legs at the forecast vol (money).
    expected_payoff : mean payoff of the legs at expiry over the simulated fitted
        model (physical distribution), discounted at the rate (money).
    overpay : ``premium_paid - expected_payoff`` (money).
    cost_pct : ``premium_paid / portfolio_value`` (decimal).
    cost_pct_annual : ``cost_pct * 365 / calendar_days`` (decimal per year).
    prob_payoff : share of simulated paths on which the legs pay more than zero.
    breakeven : underlying level at expiry below which the hedge's payoff exceeds
        the premium paid (NaN if it never does; for a collar with a net credit it is
        the put strike).
    breakeven_move : ``breakeven / spot - 1``.
    scenarios : ``({"move": -0.30, "level": ..., "unhedged": ..., "hedged": ...}, ...)``:
        portfolio P&L at expiry for underlying moves -30 % … +10 % (step 5 %), without
        and with the hedge (payoff less premium paid), the portfolio moving by
        ``ratio * move``.
    annual_roll_cost : premium of rolling the same protection for a year (money).
    annual_roll_cost_pct : the same as a decimal of the portfolio value.
    roll_method : how the annual roll cost was found (plain words).
    collar_note : how the collar's call strike was chosen ("" otherwise).
    model : model name and distribution used for the simulation.
    n_paths, seed : simulation behind ``expected_payoff`` and ``prob_payoff``.
    caution : :data:`CAUTION`.
    drift : the drift of the simulated terminal prices, as the comparison's
        (``{"rule", "annual", "excess_return", "source", "text"}``).
    style : exercise style of the quotes the legs were priced from.
    sources : where spot, as-of date, rate, dividend yield, style and multiplier came
        from (as :attr:`Comparison.sources`; the multiplier is ``caller`` when the
        request sets it).
    """

    request: HedgeRequest
    underlying: str
    asof: _dt.date
    spot: float
    rate: float
    div_yield: float
    expiry: _dt.date
    calendar_days: int
    trading_days: int
    structure: str
    contracts: int
    multiplier: float
    strike: float
    strikes: tuple[float, ...]
    legs: tuple[HedgeLeg, ...]
    premium_mid: float
    premium_paid: float
    premium_at_forecast: float
    expected_payoff: float
    overpay: float
    cost_pct: float
    cost_pct_annual: float
    prob_payoff: float
    breakeven: float
    breakeven_move: float
    scenarios: tuple[dict, ...]
    annual_roll_cost: float
    annual_roll_cost_pct: float
    roll_method: str
    collar_note: str
    model: dict
    n_paths: int
    seed: int | None
    warnings: tuple[str, ...] = ()
    caution: str = CAUTION
    drift: dict = field(default_factory=dict)
    style: str = "european"
    sources: dict = field(default_factory=dict)

    def scenario_frame(self) -> pd.DataFrame:
        return pd.DataFrame(list(self.scenarios))

    def pnl_at(self, moves) -> tuple[np.ndarray, np.ndarray]:
        """Portfolio P&L at expiry (unhedged, hedged) for underlying moves (decimals).

        The scenario table's rule on any grid of moves: unhedged ``V * beta * move``;
        hedged adds the legs' payoff at ``spot * (1 + move)`` less the premium paid.
        """
        moves = np.asarray(moves, dtype=float)
        level = self.spot * (1.0 + moves)
        k = np.array([leg.strike for leg in self.legs])
        c = np.array([leg.type == "C" for leg in self.legs])
        q = np.array([leg.quantity for leg in self.legs], float) * self.multiplier
        intrinsic = np.where(c, level[..., None] - k, k - level[..., None])
        payoff = (np.maximum(intrinsic, 0.0) * q).sum(axis=-1)
        unhedged = self.request.portfolio_value * self.request.beta * moves
        return unhedged, unhedged + payoff - self.premium_paid

    def leg_frame(self) -> pd.DataFrame:
        return pd.DataFrame([leg.to_dict() for leg in self.legs])

    @property
    def structure_name(self) -> str:
        """The structure as outputs write it: ``put``, ``put spread``, ``collar``."""
        return self.structure.replace("_", " ")

    @property
    def strike_legs(self) -> str:
        """Every leg's strike with its side and type: ``buy put 4700 / sell call 5500``."""
        kind = {"P": "put", "C": "call"}
        return " / ".join(f"{leg.side} {kind.get(leg.type, leg.type)} {leg.strike:g}"
                          for leg in self.legs)

    def summary(self) -> dict:
        """The headline numbers as ``{name: value}`` (for tables and sheets); the
        structure by its name and every leg's strike."""
        keys = ("expiry", "calendar_days", "contracts", "multiplier",
                "strike", "strike_legs", "premium_mid", "premium_paid", "premium_at_forecast",
                "expected_payoff", "overpay", "cost_pct", "cost_pct_annual",
                "prob_payoff", "breakeven", "breakeven_move", "annual_roll_cost",
                "annual_roll_cost_pct")
        return {"structure": self.structure_name, **{k: getattr(self, k) for k in keys}}

    def to_dict(self) -> dict:
        out = {f.name: plain(getattr(self, f.name)) for f in fields(self)}
        out["request"] = self.request.to_dict()
        out["legs"] = [leg.to_dict() for leg in self.legs]
        out["scenarios"] = [plain(s) for s in self.scenarios]
        out["strikes"] = [float(k) for k in self.strikes]
        return out
