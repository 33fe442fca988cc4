r"""Joint simulation of the underlying and the portfolio to one or more horizons.

Notes
-----
**Underlying.** Daily log returns :math:`r_i` from the fitted GARCH-family model
(:meth:`optbench.volatility.GarchFit.simulate`, starting from today's conditional
variance). With an annual drift :math:`\mu_a` (default the risk-free rate less the
dividend yield, :math:`r-q`), the log return to a horizon of :math:`h` trading days and
calendar time :math:`\tau` is

.. math:: X_h = \sum_{i\le h}(r_i - \hat\mu) - \ln\overline{\exp\Bigl(\sum_{i\le h}(r_i-\hat\mu)\Bigr)} + \mu_a\tau,

so that the simulated mean of :math:`S_T/S` is exactly :math:`e^{\mu_a\tau}` (empirical
martingale correction: Duan and Simonato, "Empirical martingale simulation for asset
prices", *Management Science* 44(9), 1998). With ``drift=None`` the fitted mean is kept
and the dividend yield taken off, :math:`X_h = \sum r_i - q\tau` (the rule of
:func:`optbench.analysis.hedge.hedge_from_comparison`).

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
    drift: float | None
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


def simulate_joint(fit, residuals, beta: float, trading_days, t, *, div_yield: float = 0.0,
                   drift: float | None = 0.0, n_paths: int = 20000,
                   seed: int | None = 7) -> JointPaths:
    """Simulate the underlying and the portfolio to every horizon (see module Notes).

    Parameters
    ----------
    fit : fitted GARCH-family model (``GarchFit``) of the underlying.
    residuals : daily OLS residuals of the portfolio on the underlying; ``None`` or
        empty for a portfolio that is exactly ``beta`` × the underlying.
    beta : the portfolio's beta.
    trading_days, t : horizons in trading days and in calendar years (same length).
    div_yield : dividend yield (used with ``drift=None`` only).
    drift : annual drift of the underlying's price (decimal, e.g. ``r - q``), or None
        for the fitted mean less the dividend yield.
    """
    td = np.asarray(trading_days, int)
    tt = np.asarray(t, float)
    if td.size == 0 or (td < 1).any():
        raise ValueError("horizons must be positive trading days")
    h_max = int(td.max())
    sim = fit.simulate(h_max, n_paths=int(n_paths), seed=seed)
    mu = float(fit.params.get("mu", 0.0) or 0.0)
    cum = horizon_sums(sim.returns.T, td)   # the simulation's (days, paths) memory
    if drift is None:
        index = cum - div_yield * tt[None, :]
        rule = "fitted mean of the model, less the dividend yield"
    else:
        core = cum - mu * td[None, :]
        shift = np.log(np.mean(np.exp(core), axis=0))
        index = core - shift[None, :] + float(drift) * tt[None, :]
        rule = f"{drift:.4%} a year (mean of S_T matched to it on the paths)"
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
                      drift=None if drift is None else float(drift), drift_rule=rule,
                      residual_vol_today=s_today * math.sqrt(252))
