r"""Joint simulation of the underlying and the portfolio to one or more horizons.

Notes
-----
**Underlying.** Daily log returns :math:`r_i = \hat\mu + \sigma_i z_i` from the fitted
GARCH-family model (:meth:`optbench.volatility.GarchFit.simulate`, starting from
today's conditional variance). With an annual drift :math:`a` (default each expiry's
rate less its carry, :math:`r-q`, plus an excess return the caller may give), the log
return to a horizon of :math:`h` trading days and calendar time :math:`\tau` is

.. math:: X_h = a\tau + \sum_{i\le h}\sigma_i z_i - \tfrac12\sum_{i\le h}\sigma_i^2,

whose conditional mean of :math:`e^{X_h}` given the volatility path is :math:`e^{a\tau}`
for normal shocks, so :math:`E[S_T] = S e^{a\tau}` (Glasserman, *Monte Carlo Methods in
Financial Engineering*, 2003, §3.2, the discretised log price; the same construction
as the single hedge's drift rule). With ``drift=None`` the fitted mean is kept and the
carry taken off, :math:`X_h = \sum r_i - q\tau`. The simulation runs once to the
longest horizon; every expiry reads its own partial sums.

**Portfolio.** :math:`\ln(V_T/V) = \hat\beta X_h + \sum_{i\le h}\varepsilon_i`, with the
estimated beta and no alpha (common practice: an estimated alpha is mostly noise).
The residuals :math:`\varepsilon_i` are drawn by *filtered historical simulation*
(Barone-Adesi, Giannopoulos and Vosper, "VaR without correlations for portfolios of
derivative securities", *Journal of Futures Markets* 19(5), 1999): the OLS residuals
are standardised by an EWMA volatility with :math:`\lambda = 0.94` (J.P. Morgan/Reuters,
*RiskMetrics — Technical Document*, 4th ed., 1996), drawn with replacement,
independently of the underlying's shocks (OLS residuals are uncorrelated with the
regressor by construction), and scaled by today's EWMA residual volatility, which is
also the EWMA forecast for every later day. Why not a GARCH fit on the residuals: a
year of residuals (252) is too few to pin down a GARCH persistence, and the bootstrap
keeps the residuals' own fat tails and skew without choosing a distribution.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

EWMA_LAMBDA = 0.94
RESIDUAL_METHOD = ("filtered historical simulation: OLS residuals standardised by an "
                   "EWMA vol (lambda 0.94), bootstrapped, scaled by today's EWMA "
                   "residual vol")


@dataclass(frozen=True, eq=False)
class JointPaths:
    """Simulated log returns to each horizon (columns follow ``trading_days``).

    ``index`` is :math:`\\ln(S_T/S)`, ``residual`` the summed residual, shape
    ``(n_paths, len(trading_days))``; ``beta`` the portfolio's beta to the underlying.
    """

    trading_days: np.ndarray
    t: np.ndarray
    index: np.ndarray
    residual: np.ndarray
    beta: float
    drift: float | str | None
    drift_rule: str
    residual_vol_today: float
    residual_method: str = RESIDUAL_METHOD

    @property
    def portfolio(self) -> np.ndarray:
        """:math:`\\ln(V_T/V)` per path and horizon."""
        return self.beta * self.index + self.residual

    def column(self, trading_days: int) -> int:
        hit = np.flatnonzero(self.trading_days == int(trading_days))
        if not hit.size:
            raise KeyError(trading_days)
        return int(hit[0])


def ewma_standardise(residuals, lam: float = EWMA_LAMBDA):
    """Residuals over their EWMA vol, rescaled to unit variance, and today's EWMA vol.

    :math:`s_t^2 = \\lambda s_{t-1}^2 + (1-\\lambda)e_{t-1}^2`, started at the sample
    variance; today's (next day's) :math:`s_{T+1}^2 = \\lambda s_T^2 + (1-\\lambda)e_T^2`.
    """
    e = np.asarray(residuals, float)
    n = e.size
    s2_0 = float(e @ e) / n
    # s2[t] = lam^t s2_0 + (1-lam) sum_{j<t} lam^(t-1-j) e_j^2: a convolution with the
    # kernel (1-lam) lam^k, cut where lam^k < 1e-16 (weights beyond are below precision)
    k = np.arange(min(n, int(math.log(1e-16) / math.log(lam)) + 1))
    conv = np.convolve(e * e, (1 - lam) * lam ** k)[:n]
    s2 = np.empty(n + 1)
    s2[0] = s2_0
    s2[1:] = conv + lam ** np.arange(1, n + 1) * s2_0
    z = e / np.sqrt(s2[:-1])
    z = z / np.sqrt(np.mean(z * z))
    return z, float(math.sqrt(s2[-1]))


def horizon_sums(daily: np.ndarray, trading_days: np.ndarray) -> np.ndarray:
    """``daily[:h].sum(axis=0)`` for every ``h`` in ``trading_days`` (sorted, unique), with
    ``daily`` laid out (days, paths); returns shape ``(paths, len(trading_days))``: sums
    of the segments between horizons, accumulated (cheaper than a cumulative sum over
    every day)."""
    td = np.asarray(trading_days, int)
    seg = np.add.reduceat(daily, np.concatenate([[0], td[:-1]]), axis=0, dtype=np.float64)
    return np.cumsum(seg, axis=0).T


def simulate_joint(fit, residuals, beta: float, trading_days, t, *, rates, carries,
                   drift: float | str | None = "carry", excess_return: float = 0.0,
                   n_paths: int = 20000, seed: int | None = 7,
                   underlying=None) -> JointPaths:
    """Simulate the underlying and the portfolio to every horizon (see module Notes).

    Parameters
    ----------
    fit : fitted GARCH-family model (``GarchFit``) of the underlying.
    residuals : daily OLS residuals of the portfolio on the underlying; ``None`` or
        empty for a portfolio that is exactly ``beta`` × the underlying.
    beta : the portfolio's beta.
    trading_days, t : horizons in trading days and in calendar years (same length).
    rates, carries : each horizon's rate and carry (its forward's), decimals.
    drift : ``"carry"`` — each horizon's ``r - q`` plus ``excess_return`` (the
        default); a number — that annual drift for every horizon; None — the fitted
        mean of the daily log returns less the carry.
    underlying : the underlying's paths already simulated with ``fit``, ``n_paths``
        and ``seed`` to exactly these ``trading_days``
        (:class:`~optbench.analysis.drift.TerminalDraws`, as the hedge estimate uses):
        their summed shocks :math:`\\sum\\sigma_i z_i` and variances
        :math:`\\sum\\sigma_i^2` are read instead of simulating again (the same paths:
        the drift never enters the volatility recursion).
    """
    td = np.asarray(trading_days, int)
    tt = np.asarray(t, float)
    rr = np.broadcast_to(np.asarray(rates, float), td.shape)
    qq = np.broadcast_to(np.asarray(carries, float), td.shape)
    if td.size == 0 or (td < 1).any():
        raise ValueError("horizons must be positive trading days")
    h_max = int(td.max())
    mu = float(fit.params.get("mu", 0.0) or 0.0)
    if underlying is not None:
        got = underlying.trading_days
        if got is None or not np.array_equal(got, td) or underlying.shock.shape[0] != n_paths:
            raise ValueError("the underlying's draws were simulated to other horizons or "
                             "with another number of paths")
        shock, var = underlying.shock, underlying.variance
        cum = shock + mu * td[None, :]
    else:
        sim = fit.simulate(h_max, n_paths=int(n_paths), seed=seed)
        cum = horizon_sums(sim.returns.T, td)   # the simulation's (days, paths) memory
    if drift is None:
        index = cum - (qq * tt)[None, :]
        rule = "fitted mean of the model's daily log returns, less the carry"
    else:
        if isinstance(drift, str):
            if drift != "carry":
                raise ValueError(f"drift must be 'carry', a number or None, not {drift!r}")
            annual = rr - qq + float(excess_return)
            rule = ("risk-free rate less carry of each expiry"
                    + (f", plus an excess return of {excess_return:+.2%} a year"
                       if excess_return else " (no expected excess return)"))
        else:
            annual = np.full(td.shape, float(drift))
            rule = f"{float(drift):+.2%} a year"
        # sum of sigma_i z_i, less half the summed variance: E[S_T/S] = exp(annual tau)
        if underlying is None:
            shock = cum - mu * td[None, :]
            var = horizon_sums(sim.variances.T, td)
        index = (annual * tt)[None, :] + shock - 0.5 * var
    e = np.asarray(residuals if residuals is not None else [], float)
    e = e[np.isfinite(e)]
    if e.size >= 2 and math.sqrt(float(e @ e) / e.size) > 1e-12:   # else: no basis risk
        z, s_today = ewma_standardise(e)
        rng = np.random.default_rng(None if seed is None else [int(seed), 14])
        draws = z.astype(np.float32)[rng.integers(0, z.size, size=(h_max, int(n_paths)),
                                                  dtype=np.int32)]
        resid = horizon_sums(draws, td) * s_today
    else:
        s_today = 0.0
        resid = np.zeros_like(index)
    return JointPaths(trading_days=td, t=tt, index=index, residual=resid, beta=float(beta),
                      drift=drift if drift is None or isinstance(drift, str) else float(drift),
                      drift_rule=rule,
                      residual_vol_today=s_today * math.sqrt(252))
