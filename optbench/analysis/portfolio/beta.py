r"""Beta of a portfolio to the underlying by ordinary least squares on daily log returns.

Notes
-----
For portfolio returns :math:`y_t` and the underlying's returns :math:`x_t`,
:math:`t = 1..n`, the regression :math:`y_t = \alpha + \beta x_t + e_t` gives

.. math::

    \hat\beta = \frac{S_{xy}}{S_{xx}}, \quad \hat\alpha = \bar y - \hat\beta\bar x, \quad
    s^2 = \frac{\sum_t \hat e_t^2}{n-2}, \quad
    \operatorname{se}(\hat\beta) = \sqrt{s^2 / S_{xx}}, \quad
    \operatorname{se}(\hat\alpha) = \sqrt{s^2\,(1/n + \bar x^2/S_{xx})},

:math:`R^2 = 1 - \sum\hat e_t^2 / S_{yy}`, with :math:`S_{xy} = \sum (x_t-\bar x)(y_t-\bar y)`
(Greene, *Econometric Analysis*, 7th ed., ch. 4 — chapter from memory; the usual homoskedastic
standard errors). The residual (idiosyncratic) volatility is :math:`s\sqrt{252}`.
The market-model beta of a portfolio used for index hedging: Hull, *Options, Futures,
and Other Derivatives*, §3.5.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

TRADING_DAYS = 252
DEFAULT_WINDOW = 252


@dataclass(frozen=True, eq=False)
class BetaFit:
    """OLS of portfolio returns on the underlying's returns (decimals; see module Notes).

    ``residual_vol`` is annualised (``s * sqrt(252)``); ``residuals`` are the daily
    OLS residuals aligned with ``dates``.
    """

    beta: float
    alpha: float
    beta_se: float
    alpha_se: float
    r_squared: float
    residual_vol: float
    n_obs: int
    dates: np.ndarray
    residuals: np.ndarray
    portfolio_returns: np.ndarray
    index_returns: np.ndarray

    def to_dict(self) -> dict:
        return {"beta": self.beta, "beta_se": self.beta_se, "alpha_daily": self.alpha,
                "alpha_se": self.alpha_se, "r_squared": self.r_squared,
                "residual_vol": self.residual_vol, "n_obs": self.n_obs,
                "first_date": str(self.dates[0]) if len(self.dates) else None,
                "last_date": str(self.dates[-1]) if len(self.dates) else None}


def ols_beta(y, x, dates=None) -> BetaFit:
    """OLS of ``y`` on a constant and ``x`` (1-D arrays of equal length, finite).

    Returns :class:`BetaFit`; NaN statistics when fewer than three observations or no
    variation in ``x``.
    """
    y = np.asarray(y, float)
    x = np.asarray(x, float)
    n = y.size
    nan = math.nan
    dates = np.asarray(dates) if dates is not None else np.arange(n)
    if n < 3:
        return BetaFit(nan, nan, nan, nan, nan, nan, n, dates, np.full(n, nan), y, x)
    xm, ym = x.mean(), y.mean()
    dx, dy = x - xm, y - ym
    sxx = float(dx @ dx)
    syy = float(dy @ dy)
    if sxx <= 0:
        return BetaFit(nan, nan, nan, nan, nan, nan, n, dates, np.full(n, nan), y, x)
    beta = float(dx @ dy) / sxx
    alpha = ym - beta * xm
    resid = y - alpha - beta * x
    ssr = float(resid @ resid)
    s2 = ssr / (n - 2)
    return BetaFit(
        beta=beta, alpha=float(alpha), beta_se=math.sqrt(s2 / sxx),
        alpha_se=math.sqrt(s2 * (1.0 / n + xm * xm / sxx)),
        r_squared=1.0 - ssr / syy if syy > 0 else nan,
        residual_vol=math.sqrt(s2 * TRADING_DAYS), n_obs=n, dates=dates, residuals=resid,
        portfolio_returns=y, index_returns=x)


def masked_ols_columns(Y: np.ndarray, x: np.ndarray) -> dict[str, np.ndarray]:
    """The module's OLS for every column of ``Y`` on ``x``, each on its own finite rows.

    Vectorised over columns; returns arrays ``beta``, ``beta_se``, ``r_squared``,
    ``residual_vol`` (annualised) and ``n_obs``, NaN where fewer than three rows.
    """
    Y = np.asarray(Y, float)
    x = np.asarray(x, float)[:, None]
    m = np.isfinite(Y) & np.isfinite(x)
    n = m.sum(axis=0).astype(float)
    Yz = np.where(m, Y, 0.0)
    Xz = np.where(m, x, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        xm = Xz.sum(0) / n
        ym = Yz.sum(0) / n
        dx = np.where(m, x - xm, 0.0)
        dy = np.where(m, Y - ym, 0.0)
        sxx = (dx * dx).sum(0)
        syy = (dy * dy).sum(0)
        beta = (dx * dy).sum(0) / sxx
        ssr = syy - beta * beta * sxx
        s2 = ssr / (n - 2)
        ok = (n >= 3) & (sxx > 0)
        out = {"beta": beta, "beta_se": np.sqrt(s2 / sxx),
               "r_squared": 1.0 - ssr / syy, "residual_vol": np.sqrt(s2 * TRADING_DAYS)}
    out = {k: np.where(ok, v, np.nan) for k, v in out.items()}
    out["n_obs"] = n.astype(int)
    return out
