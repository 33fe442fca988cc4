"""The drift of simulated prices: which one, chosen by whom, and the terminal log
returns it gives.

Expected payoffs and probabilities of protection need terminal prices, and those
depend on the drift of the price. A mean estimated from a few years of returns is
mostly noise (its standard error is of the order of the mean itself), so by default
no expected excess return is assumed; the user can set one, and the fitted mean is
used only when asked for. The volatility dynamics are always the fitted model's.

Notes
-----
**Rules.** ``"risk-free"`` (default): :math:`E[S_T] = S e^{(r-q)\\tau}`, the forward
— no expected excess return. ``"excess"``: :math:`E[S_T] = S e^{(r-q+x)\\tau}` with
the user's annual expected excess return :math:`x` (``--excess-return``, the
workbench's model dialog or ``excess_return`` in ``meta.toml``). ``"fitted"``: the
volatility model's fitted mean :math:`\\mu` of the daily log returns of the
(dividend-adjusted) closes, less the dividend yield, :math:`\\ln S_T/S =
\\sum_i(\\mu + \\sigma_i z_i) - q\\tau` — only when asked for (``--drift fitted``).

**Per-step adjustment.** With :math:`h` trading days to an expiry :math:`\\tau`
calendar years away, each simulated day's log return is

.. math:: r_i = a - \\tfrac12\\sigma_i^2 + \\sigma_i z_i,\\qquad a = (r - q + x)\\,\\tau/h,

where :math:`-\\tfrac12\\sigma_i^2` is the convexity term: for unit-variance normal
:math:`z_i` it makes :math:`E[e^{r_i}\\mid\\sigma_i] = e^{a}`, so by iterated
expectations :math:`E[S_T] = S e^{(r-q+x)\\tau}` whatever the volatility path
(Glasserman, *Monte Carlo Methods in Financial Engineering*, 2003, §3.2 on the
discretised log price; Hull, *Options, Futures, and Other Derivatives*, ch. 15, for
:math:`E[S_T] = S e^{\\mu T}` under the lognormal model). :math:`r`, :math:`q` are
the expiry's own rate and carry (those of its forward). The drift never enters the
variance recursion, so the volatility paths are the fitted model's whatever the drift.
The simulation runs once to the longest expiry with the chain's daily drift
:math:`(r_0-q_0+x)/252` (:func:`optbench.volatility.simulate.simulate_paths`); as the
drift is deterministic, each expiry's terminal log return then takes its own
:math:`(r-q+x)\\tau` in place of the chain's :math:`h(r_0-q_0+x)/252` — the same as
simulating that expiry with its own :math:`a`.

**Scaled vol levels.** :class:`TerminalDraws` keeps :math:`\\sum_i\\sigma_i z_i` and
:math:`\\sum_i\\sigma_i^2` per path, so the terminal log return at a vol level scaled
by :math:`\\lambda` (every :math:`\\sigma_i \\to \\lambda\\sigma_i`) is
:math:`(r-q+x)\\tau + \\lambda\\sum\\sigma_i z_i - \\tfrac12\\lambda^2\\sum\\sigma_i^2`
on the same random numbers (the protection verdict carries the forecast band this way,
:mod:`optbench.analysis.protection`).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from optbench.errors import InputError

RULES = ("risk-free", "excess", "fitted")
TRADING_DAYS_PER_YEAR = 252.0
#: largest annual excess return accepted (a decimal; 1.0 = 100 % a year)
MAX_EXCESS = 1.0


@dataclass(frozen=True)
class DriftChoice:
    """The drift every simulated terminal price uses.

    Attributes
    ----------
    rule : ``"risk-free"``, ``"excess"`` or ``"fitted"``.
    annual : the annual drift the rule puts in, decimal: ``r - q`` (risk-free),
        ``r - q + x`` (excess) — the expected growth rate of the price,
        :math:`E[S_T] = S e^{annual\\,\\tau}` — or ``252 mu - q`` (fitted: the fitted
        mean log return a year, less the dividend yield), with the chain's rate and
        dividend yield (each expiry uses its own forward's rate and carry).
    excess_return : ``x``, annual decimal (0 for risk-free, NaN for fitted).
    source : where the choice came from: ``"default"``, ``"caller"`` (argument or
        dialog) or ``"meta"`` (``excess_return`` in ``meta.toml``).
    fitted_mu : the fitted mean daily log return (used by the fitted rule only).
    """

    rule: str
    annual: float
    excess_return: float
    source: str = "default"
    fitted_mu: float = 0.0

    @property
    def text(self) -> str:
        """The drift in plain words, for every view."""
        if self.rule == "fitted":
            return (f"fitted mean of the history's log returns, {self.annual:+.2%} a year "
                    "after the dividend yield (asked for)")
        if self.rule == "excess":
            return (f"risk-free rate less dividend yield plus an expected excess return of "
                    f"{self.excess_return:+.2%} a year ({self.annual:+.2%} a year"
                    f"{', from meta.toml' if self.source == 'meta' else ''})")
        return (f"risk-free rate less dividend yield, {self.annual:+.2%} a year "
                "(no expected excess return)")

    def to_dict(self) -> dict:
        return {"rule": self.rule, "annual": float(self.annual),
                "excess_return": float(self.excess_return), "source": self.source,
                "text": self.text}


def choose_drift(drift: str | None = "risk-free", excess_return: float | None = None, *,
                 rate: float, div_yield: float, fitted_mu: float = 0.0,
                 meta_excess: float | None = None, meta_source: str = "meta.toml"
                 ) -> DriftChoice:
    """The :class:`DriftChoice` from the user's options.

    ``drift`` is ``"risk-free"`` (default; ``"excess"`` is accepted as its synonym) or
    ``"fitted"``; ``excess_return`` (annual decimal) beats ``meta_excess`` (the
    scenario's ``excess_return`` key); a non-zero excess return makes the rule
    ``"excess"``. Raises :class:`~optbench.errors.InputError` on a bad value.
    """
    rule = (drift or "risk-free").strip().lower().replace("_", "-")
    if rule not in RULES:
        raise InputError("--drift", f"must be risk-free or fitted, not {drift!r}")
    if rule == "fitted":
        if excess_return is not None:
            raise InputError("--excess-return", "an excess return cannot be combined with "
                                                "--drift fitted (the fitted mean is the drift)")
        mu = float(fitted_mu or 0.0)
        return DriftChoice("fitted", TRADING_DAYS_PER_YEAR * mu - float(div_yield),
                           math.nan, "caller", mu)
    source, x = "default", 0.0
    if excess_return is not None:
        source, x = "caller", _excess("--excess-return", excess_return)
    elif meta_excess is not None:
        source, x = "meta", _excess(f"{meta_source}: excess_return", meta_excess)
    if rule == "excess" and source == "default":
        raise InputError("--drift", "the excess rule needs an excess return "
                                    "(--excess-return, e.g. 0.03)")
    return DriftChoice("excess" if x != 0 else "risk-free",
                       float(rate) - float(div_yield) + x, x, source, float(fitted_mu or 0.0))


def _excess(name: str, value) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise InputError(name, f"not a number: {value!r} (an annual decimal such as "
                               "0.03)") from None
    if not math.isfinite(x) or abs(x) >= MAX_EXCESS:
        raise InputError(name, f"must be an annual decimal between -1 and 1 such as 0.03, "
                               f"not {value!r}")
    return x


@dataclass(frozen=True, eq=False)
class TerminalDraws:
    """Simulated terminal log returns :math:`\\ln(S_T/S)` per path and expiry.

    Attributes (arrays of shape ``(n_paths, n_expiries)`` unless said)
    ------------------------------------------------------------------
    log_drift : shape ``(n_expiries,)``: the deterministic part, ``(r - q + x) tau``
        (risk-free, excess) or ``h mu - q tau`` (fitted).
    shock : :math:`\\sum_{i\\le h}\\sigma_i z_i`.
    variance : :math:`\\sum_{i\\le h}\\sigma_i^2` (daily variances summed).
    convexity : 1.0 when the convexity term is applied (risk-free, excess), else 0.0.
    realized_vol : annualised realized vol of each path to each expiry,
        :math:`\\sqrt{252/h\\sum_{i\\le h} r_i^2}` (the simulated daily returns).
    horizons : shape ``(n_expiries, 4)``: each column's trading days, calendar years,
        rate and carry, as simulated (None when not recorded); :meth:`column_for`
        finds a horizon in them so one simulation serves every reader.
    """

    log_drift: np.ndarray
    shock: np.ndarray
    variance: np.ndarray
    convexity: float
    realized_vol: np.ndarray
    horizons: np.ndarray | None = None

    def log_return(self, scale: float = 1.0, column: int | slice = slice(None)) -> np.ndarray:
        """Terminal log returns with every daily vol scaled by ``scale`` (1 = as fitted)."""
        s = float(scale)
        return (self.log_drift[column] + s * self.shock[:, column]
                - self.convexity * 0.5 * s * s * self.variance[:, column])

    @property
    def trading_days(self) -> np.ndarray | None:
        """Each column's horizon in trading days (None when not recorded)."""
        return None if self.horizons is None else self.horizons[:, 0].astype(int)

    def column_for(self, trading_days: int, tau: float, rate: float,
                   carry: float) -> int | None:
        """The column simulated for exactly this horizon, calendar time, rate and carry
        (its terminal log returns are then those of a simulation of that expiry
        alone with the same paths, seed and drift), or None."""
        if self.horizons is None:
            return None
        want = np.array([max(int(trading_days), 1), tau, rate, carry], float)
        hit = np.flatnonzero((self.horizons == want).all(axis=1))
        return int(hit[0]) if hit.size else None


#: below this many paths a reduction along the days may be summed pairwise (numpy
#: sums a short row's column as one contiguous run): add day by day instead
_MIN_PATHS_TO_REDUCE = 16


class _RunningSums:
    """Per path, the running sums over the days of :math:`r_i - a + c\\,v_i/2` (the
    shocks :math:`\\sigma_i z_i`), of :math:`v_i` and of :math:`r_i^2`, read at each
    horizon in ``h``; fed a block of consecutive days at a time (laid out (days,
    paths)), which it uses as scratch space.

    The additions are those of a cumulative sum along the days, in day order, so the
    figures are those of ``np.cumsum(...)[h - 1]`` to the last bit, without holding
    every day's running sum (paths x days) in memory: the days between two horizons
    (or block edges) are summed by one reduction along the days, row after row,
    whose first row has the running sum so far added to it.
    """

    def __init__(self, n_paths: int, h: np.ndarray, a: float, convexity: float):
        self.want = np.unique(h)
        self.where = np.searchsorted(self.want, h)
        self.a, self.convexity = a, convexity
        self.out = np.empty((3, self.want.size, n_paths))
        self.acc = np.zeros((3, n_paths))
        self.k = 0
        self.started = False
        self.shock = None

    def add(self, t0: int, r: np.ndarray, v: np.ndarray, half_v: np.ndarray | None):
        """Take in days ``t0 ..`` (``r`` and ``v`` are overwritten; ``half_v`` is
        ``v / 2`` when already formed)."""
        last = int(self.want[-1])
        n = min(r.shape[0], last - t0)
        if n <= 0:
            return
        r, v = r[:n], v[:n]
        if self.shock is None or self.shock.shape[0] < n:
            self.shock = np.empty(r.shape)
        shock = np.subtract(r, self.a, out=self.shock[:n])
        if self.convexity:
            shock += np.multiply(v, 0.5) if half_v is None else half_v[:n]
        sq = np.multiply(r, r, out=r)
        s = 0
        while s < n:
            e = min(n, int(self.want[self.k]) - t0)
            for j, x in enumerate((shock, v, sq)):
                self._sum_rows(x[s:e], self.acc[j])
            self.started = True
            if t0 + e == self.want[self.k]:
                self.out[:, self.k] = self.acc
                self.k += 1
            s = e

    def _sum_rows(self, x: np.ndarray, acc: np.ndarray):
        if x.shape[1] < _MIN_PATHS_TO_REDUCE:
            for row in x:
                acc += row
            return
        if self.started:
            x[0] += acc                      # the running sum so far, then day order
        np.add.reduce(x, axis=0, out=acc)

    def result(self):
        """``(shock, variance, squares)`` sums, each of shape ``(paths, len(h))``."""
        o, w = self.out, self.where
        return o[0, w].T, o[1, w].T, o[2, w].T


def _sums_at_horizons(r: np.ndarray, v: np.ndarray, a: float, convexity: float,
                      h: np.ndarray, *, half_v: np.ndarray | None = None,
                      overwrite: bool = False):
    """Per path, the sums over the first ``h`` days (each ``h`` in the array) of
    :math:`r_i - a + c\\,v_i/2`, of :math:`v_i` and of :math:`r_i^2`, for ``r``, ``v``
    laid out (days, paths) (:class:`_RunningSums` fed all days at once; ``half_v`` is
    ``v / 2`` when already formed, ``overwrite`` lets it use ``r`` and ``v`` as scratch).
    The figures of ``np.cumsum(...)[h - 1]`` to the last bit. Returns three arrays of
    shape ``(paths, len(h))``.
    """
    if not overwrite:
        r, v = r.copy(), v.copy()
    sums = _RunningSums(r.shape[1], h, a, convexity)
    sums.add(0, r, v, half_v)
    return sums.result()


def _sums_day_by_day(r, v, a, convexity, want, where):
    """The sums of :func:`_sums_at_horizons` added one day at a time (its reference)."""
    n = r.shape[1]
    out = np.empty((3, want.size, n))
    acc = np.zeros((3, n))
    tmp = np.empty(n)
    k = 0
    for day in range(int(want[-1])):
        np.subtract(r[day], a, out=tmp)
        if convexity:
            tmp += 0.5 * v[day]
        acc[0] += tmp
        acc[1] += v[day]
        np.multiply(r[day], r[day], out=tmp)
        acc[2] += tmp
        if day + 1 == want[k]:
            out[:, k] = acc
            k += 1
    return out[0, where].T, out[1, where].T, out[2, where].T


def simulate_terminal(fit, choice: DriftChoice, trading_days, taus, rates, carries, *,
                      n_paths: int, seed=None) -> TerminalDraws:
    """Simulate the fitted model once to the longest horizon and return the terminal
    draws of each expiry under ``choice`` (see the module Notes).

    ``trading_days``, ``taus`` (calendar years), ``rates`` and ``carries`` (the
    expiries' continuously compounded rate and carry) are arrays over expiries.
    The paths of a horizon do not depend on the other horizons simulated with it (the
    random numbers of a day are drawn in the same order whatever the longest
    horizon), so a column is the same as a simulation of its expiry alone.
    """
    from optbench.volatility.simulate import day_blocks

    h = np.maximum(np.atleast_1d(np.asarray(trading_days, int)), 1)
    taus = np.atleast_1d(np.asarray(taus, float))
    rates = np.broadcast_to(np.asarray(rates, float), h.shape)
    carries = np.broadcast_to(np.asarray(carries, float), h.shape)
    fitted = choice.rule == "fitted"
    daily = None if fitted else choice.annual / TRADING_DAYS_PER_YEAR
    a = float(fit.params.get("mu", 0.0) or 0.0) if fitted else daily
    c = 0.0 if fitted else 1.0
    # the simulation a block of days at a time, summed as it goes (each day one
    # contiguous row of its block)
    sums = _RunningSums(int(n_paths), h, a, c)
    for t0, r, v, half_v in day_blocks(fit.model, fit.params, fit.dist, fit.last_variance,
                                       int(h.max()), int(n_paths), seed, drift=daily):
        sums.add(t0, r, v, half_v)
    shock, var, sq = sums.result()
    rv = np.sqrt(TRADING_DAYS_PER_YEAR / h * sq)
    if fitted:
        log_drift = h * a - carries * taus
    else:
        log_drift = (rates - carries + choice.excess_return) * taus
    horizons = np.column_stack([h.astype(float), np.broadcast_to(taus, h.shape), rates,
                                carries])
    return TerminalDraws(log_drift=np.asarray(log_drift, float), shock=shock, variance=var,
                         convexity=c, realized_vol=rv, horizons=horizons)
