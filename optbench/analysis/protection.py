"""The protection verdict: is the put a buyer of protection would buy expensive, fair or
cheap against the model's distribution of its payoff?

The ATM verdict judges one number, the at-the-money implied vol. Someone buying
protection pays for an out-of-the-money put, whose price carries the skew; this module
judges two such puts on each expiry on their own: the put nearest 25 delta and the put
nearest the user's floor (a fraction of spot, 90 % by default). Pure: arrays in,
small frozen results out.

Notes
-----
**Which puts.** Among the expiry's listed puts with an ask above zero: the one whose
Black-Scholes-Merton delta (at its mid implied vol) is nearest -0.25, and the one whose
strike is nearest ``floor`` × spot (ties to the lower strike).

**Expected payoff.** Over the simulated terminal prices :math:`S_T^{(j)} = S\\,e^{X_j}`
of the fitted volatility model with the chosen drift
(:mod:`optbench.analysis.drift`), the model-expected discounted payoff per unit of the
underlying is :math:`\\hat V = D\\,\\frac1n\\sum_j (K - S_T^{(j)})^+` with the
expiry's discount factor :math:`D = e^{-r\\tau}`; its Monte Carlo standard error is
:math:`D\\,s/\\sqrt n` with :math:`s` the sample standard deviation of the payoffs
(Glasserman, *Monte Carlo Methods in Financial Engineering*, 2003, §1.1). Under a
constant vol and the risk-free drift this is the Black-Scholes-Merton put price
(Hull, *Options, Futures, and Other Derivatives*, ch. 15) — the test suite checks it.

**Band.** Parameter uncertainty enters as it does in the ATM verdict: the forecast
band :math:`[\\sigma_{lo}, \\sigma_{hi}]` (quantiles of the forecast vol over the
sampling distribution of the estimated parameters) is carried to the payoff by scaling
every simulated daily vol by :math:`\\lambda = \\sigma_{lo}/\\hat\\sigma` and
:math:`\\sigma_{hi}/\\hat\\sigma` on the same random numbers, giving
:math:`V_{lo}` and :math:`V_{hi}`. Simulation error is added in quadrature (the two are
independent):

.. math:: V_{high} = \\hat V + \\sqrt{(V_{hi}-\\hat V)^2 + (z\\,SE)^2},\\quad
          V_{low} = \\hat V - \\sqrt{(\\hat V - V_{lo})^2 + (z\\,SE)^2},

with :math:`z = \\Phi^{-1}(\\text{band high level})` (1.645 for the default 95 %).

**Verdict.** From the buyer's side, with the premium a buyer pays (the ask):
``"rich"`` (expensive protection) if ask > :math:`V_{high}`, ``"cheap"`` if
ask < :math:`V_{low}`, ``"fair"`` otherwise; ``"n/a"`` without a put or a payoff.
The mid premium is shown beside it. When fewer than :data:`MIN_PAYING_PATHS` simulated
paths end below the strike, the simulation cannot resolve the payoff (its standard
error is then itself unreliable): the verdict is ``"n/a"`` and the comparison says so
in its warnings (more paths resolve it).
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

#: delta of the out-of-the-money put judged beside the floor put
PUT_DELTA = -0.25
DEFAULT_FLOOR = 0.90
#: fewest simulated paths ending below the strike for a protection verdict
MIN_PAYING_PATHS = 20

PROTECTION_RULE = ("the put a buyer would buy (nearest 25 delta, and nearest "
                   "the floor of {floor:.0%} of spot) is rich (expensive protection) if its "
                   "ask is above the upper edge of its model-expected discounted payoff's "
                   "band, cheap if below the lower edge, fair inside; the band carries the "
                   "forecast band ({low:.0%}-{high:.0%} quantiles over the model's parameter "
                   "uncertainty) to the payoff and adds the simulation error; drift: {drift}")


@dataclass(frozen=True)
class PutJudgement:
    """One put judged against the model's payoff distribution (per unit of the
    underlying; multiply by the contract multiplier for one contract)."""

    strike: float = math.nan
    delta: float = math.nan
    iv: float = math.nan
    premium: float = math.nan          # the ask a buyer pays
    premium_mid: float = math.nan
    expected_payoff: float = math.nan
    payoff_low: float = math.nan
    payoff_high: float = math.nan
    payoff_se: float = math.nan
    verdict: str = "n/a"
    paying_paths: int = 0
    n_paths: int = 0

    @property
    def unresolved(self) -> bool:
        """True when the put was judged but too few paths paid for a verdict."""
        return math.isfinite(self.strike) and self.n_paths > 0 and \
            self.paying_paths < MIN_PAYING_PATHS

    def fields_with(self, prefix: str) -> dict:
        """The ExpiryRow fields of this put, named ``<prefix>_<field>``."""
        return {f"{prefix}_{k}": getattr(self, k)
                for k in ("strike", "delta", "iv", "premium", "premium_mid",
                          "expected_payoff", "payoff_low", "payoff_high", "payoff_se",
                          "verdict")}


def protection_verdict(premium: float, low: float, high: float) -> str:
    """rich if the premium paid is above the payoff band, cheap below it, fair inside."""
    vals = (premium, low, high)
    if any(v is None or not math.isfinite(float(v)) for v in vals):
        return "n/a"
    if premium > high:
        return "rich"
    if premium < low:
        return "cheap"
    return "fair"


def _column(table, name: str, dtype) -> np.ndarray:
    """One column of a per-strike table (a DataFrame or a mapping of column names to
    arrays) as a numpy array."""
    return np.asarray(table[name], dtype=dtype)


def choose_puts(table, spot: float, floor: float) -> tuple[int, int]:
    """Row positions in one expiry's per-strike ``table`` (a DataFrame, or a mapping of
    its columns to arrays) of the 25-delta put and the floor put (-1 where none has an
    ask)."""
    from optbench.analysis.hedge import nearest_index

    strikes = _column(table, "strike", float)
    ask = _column(table, "ask", float)
    delta = _column(table, "delta", float)
    puts = ~_column(table, "is_call", bool) & np.isfinite(ask) & (ask > 0)
    i25 = nearest_index(delta, PUT_DELTA, puts & np.isfinite(delta))
    i_floor = nearest_index(strikes, floor * spot, puts)
    return i25, i_floor


def _path_sums(pay: np.ndarray) -> np.ndarray:
    """Sums over the last axis (the paths) of ``pay`` (shape ``(..., strikes, paths)``),
    added in the order numpy's reduction over the paths axis of the
    ``(..., paths, strikes)`` layout adds them: one after the other for two or more
    strikes (the paths axis is then not the contiguous one), pairwise for one strike.
    The same numbers as that reduction, bit for bit, without its slow strided loop."""
    if pay.shape[-2] == 1:
        return pay.sum(axis=-1)
    return np.cumsum(pay, axis=-1)[..., -1]


def expected_put_payoffs(log_returns: np.ndarray, spot: float, discount: float,
                         strikes: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(discounted mean payoff, its Monte Carlo standard error, paths paying) of puts
    at ``strikes``
    over terminal log returns ``log_returns`` (shape ``(..., n_paths)``); results have
    shape ``log_returns.shape[:-1] + strikes.shape`` (a scalar strike counts as one).

    Notes
    -----
    Mean :math:`\\bar p = \\frac1n\\sum_j p_j` and sample standard deviation
    :math:`s = \\sqrt{\\sum_j (p_j - \\bar p)^2/(n-1)}` of the payoffs
    :math:`p_j = (K - S e^{x_j})^+`, as ``numpy.mean`` and ``numpy.std(ddof=1)`` form
    them over the paths axis (the same additions in the same order, see
    :func:`_path_sums`); the paths are kept on the contiguous axis.
    """
    strikes = np.asarray(strikes, float)
    if strikes.ndim > 1:
        return _expected_put_payoffs_grid(log_returns, spot, discount, strikes)
    k = strikes.reshape(-1, 1)                                        # (strikes, 1)
    s_t = spot * np.exp(np.asarray(log_returns, float))[..., None, :]  # (..., 1, paths)
    pay = np.maximum(k - s_t, 0.0)                                    # (..., strikes, paths)
    n = pay.shape[-1]
    mean = _path_sums(pay) / n
    if n > 1:
        dev = pay - mean[..., None]
        np.square(dev, out=dev)
        se = np.sqrt(_path_sums(dev) / (n - 1)) / math.sqrt(n)
    else:
        se = np.full_like(mean, np.nan)
    paying = np.count_nonzero(pay > 0, axis=-1)
    return discount * mean, discount * se, paying


def _expected_put_payoffs_grid(log_returns, spot, discount, strikes):
    """:func:`expected_put_payoffs` for strikes of two or more dimensions."""
    s_t = spot * np.exp(np.asarray(log_returns, float))[..., None]
    pay = np.maximum(strikes - s_t, 0.0)
    n = pay.shape[-2]
    mean = pay.mean(axis=-2)
    se = pay.std(axis=-2, ddof=1) / math.sqrt(n) if n > 1 else np.full_like(mean, np.nan)
    paying = (pay > 0).sum(axis=-2)
    return discount * mean, discount * se, paying


@functools.lru_cache(maxsize=8)
def _band_z(level: float) -> float:
    """:math:`\\Phi^{-1}` of the band's upper level (1.645 for 95 %)."""
    from optbench.pricing.special import ndtri
    return float(ndtri(level))


def judge_puts(table, rows: tuple[int, ...], draws, column: int, *,
               spot: float, discount: float, forecast_vol: float, forecast_low: float,
               forecast_high: float, band_high_level: float) -> list[PutJudgement]:
    """Judge the puts at positions ``rows`` of ``table`` (one expiry's per-strike
    table: a DataFrame, or a mapping of its columns to arrays) against the
    terminal draws of that expiry (``draws``: :class:`~optbench.analysis.drift.
    TerminalDraws`, ``column`` its expiry). See the module Notes."""
    picked = [i for i in rows if i >= 0]
    out = {i: PutJudgement() for i in rows}
    if not picked or draws is None or not (forecast_vol > 0):
        return [out[i] for i in rows]
    take = np.asarray(picked, dtype=np.intp)
    K = _column(table, "strike", float)[take]
    scales = [1.0]
    for edge in (forecast_low, forecast_high):
        scales.append(edge / forecast_vol if math.isfinite(edge) and edge > 0 else 1.0)
    x = np.stack([draws.log_return(s, column) for s in scales])      # (3, paths)
    value, se, paying = expected_put_payoffs(x, spot, discount, K)   # (3, puts)
    n_paths = x.shape[-1]
    z = _band_z(float(band_high_level))
    mid_v, lo_v, hi_v, se0 = value[0], value[1], value[2], se[0]
    zse = z * se0
    high = mid_v + np.sqrt(np.maximum(hi_v - mid_v, 0.0) ** 2 + zse ** 2)
    low = mid_v - np.sqrt(np.maximum(mid_v - lo_v, 0.0) ** 2 + zse ** 2)
    low = np.maximum(low, 0.0)
    ask = _column(table, "ask", float)[take]
    delta = _column(table, "delta", float)[take]
    iv = _column(table, "iv_mid", float)[take]
    mid = _column(table, "mid", float)[take]
    for n, i in enumerate(picked):
        enough = int(paying[0, n]) >= MIN_PAYING_PATHS
        out[i] = PutJudgement(
            strike=float(K[n]), delta=float(delta[n]), iv=float(iv[n]),
            premium=float(ask[n]), premium_mid=float(mid[n]),
            expected_payoff=float(mid_v[n]), payoff_low=float(low[n]),
            payoff_high=float(high[n]), payoff_se=float(se0[n]),
            verdict=protection_verdict(float(ask[n]), float(low[n]), float(high[n]))
            if enough else "n/a", paying_paths=int(paying[0, n]), n_paths=int(n_paths))
    return [out[i] for i in rows]
