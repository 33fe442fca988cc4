"""Statistics of a forecast's track record: regressions with Newey–West standard
errors, the Brier score and its reliability table, hit rates and percentiles.

Pure numpy, vectorised over observations (the only loops run over lags or
probability buckets, never over rows).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Regression:
    """An OLS regression with Newey–West (HAC) standard errors.

    Attributes
    ----------
    names : tuple of str
        Regressor names, ``"const"`` first.
    coef, std_error : tuple of float
        Estimates and their Newey–West standard errors, in ``names`` order.
    n_obs : int
    lags : int
        Bartlett-kernel lags used.
    r_squared : float
    """

    names: tuple
    coef: tuple
    std_error: tuple
    n_obs: int
    lags: int
    r_squared: float

    def to_dict(self) -> dict:
        return {"n_obs": self.n_obs, "lags": self.lags, "r_squared": self.r_squared,
                "coef": dict(zip(self.names, self.coef)),
                "std_error": dict(zip(self.names, self.std_error))}


def newey_west_cov(X: np.ndarray, resid: np.ndarray, lags: int) -> np.ndarray:
    """Newey–West covariance of OLS coefficients.

    Notes
    -----
    :math:`\\hat V = (X'X)^{-1} \\hat S (X'X)^{-1}` with
    :math:`\\hat S = \\Gamma_0 + \\sum_{l=1}^{L} (1 - \\tfrac{l}{L+1})
    (\\Gamma_l + \\Gamma_l')`, :math:`\\Gamma_l = \\sum_{t>l} x_t u_t u_{t-l} x_{t-l}'`
    (Bartlett weights; Newey & West, "A simple, positive semi-definite,
    heteroskedasticity and autocorrelation consistent covariance matrix",
    *Econometrica* 55, 1987), without a small-sample degrees-of-freedom factor.
    """
    X = np.asarray(X, float)
    u = np.asarray(resid, float)
    n, k = X.shape
    g = X * u[:, None]
    S = g.T @ g
    for lag in range(1, min(int(lags), n - 1) + 1):
        gamma = g[lag:].T @ g[:-lag]
        S += (1.0 - lag / (lags + 1.0)) * (gamma + gamma.T)
    bread = np.linalg.inv(X.T @ X)
    return bread @ S @ bread


def ols_newey_west(y, regressors: dict, lags: int) -> Regression:
    """OLS of ``y`` on a constant and ``regressors`` ({name: array}), with
    Newey–West standard errors over ``lags`` lags (:func:`newey_west_cov`).

    Rows where any value is missing are left out. Returns NaN estimates when fewer
    observations than two more than the regressors remain.
    """
    names = ("const", *regressors)
    y = np.asarray(y, float)
    X = np.column_stack([np.ones_like(y)] + [np.asarray(v, float) for v in regressors.values()])
    ok = np.isfinite(y) & np.all(np.isfinite(X), axis=1)
    y, X = y[ok], X[ok]
    n, k = X.shape
    if n < k + 2 or np.linalg.matrix_rank(X) < k:
        nan = tuple(math.nan for _ in names)
        return Regression(names, nan, nan, int(n), int(lags), math.nan)
    coef, *_ = np.linalg.lstsq(X, y, rcond=None)
    resid = y - X @ coef
    cov = newey_west_cov(X, resid, lags)
    se = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    tss = float(np.sum((y - y.mean()) ** 2))
    r2 = 1.0 - float(resid @ resid) / tss if tss > 0 else math.nan
    return Regression(names, tuple(float(c) for c in coef), tuple(float(s) for s in se),
                      int(n), int(lags), r2)


def brier_score(prob, outcome) -> float:
    """Mean squared difference between forecast probabilities and 0/1 outcomes.

    Notes
    -----
    :math:`BS = \\tfrac1N \\sum_i (p_i - o_i)^2` (Brier, "Verification of forecasts
    expressed in terms of probability", *Monthly Weather Review* 78, 1950, for a
    two-category event). 0 is perfect; always saying 0.5 scores 0.25.
    """
    p = np.asarray(prob, float)
    o = np.asarray(outcome, float)
    ok = np.isfinite(p) & np.isfinite(o)
    if not ok.any():
        return math.nan
    return float(np.mean((p[ok] - o[ok]) ** 2))


def reliability_table(prob, outcome, buckets: int = 5) -> list[dict]:
    """Forecast probability against observed frequency, by probability bucket.

    Buckets split [0, 1] into ``buckets`` equal widths (the last includes 1). Each
    entry: ``low``, ``high``, ``n``, ``mean_prob`` (average forecast probability),
    ``observed`` (share of outcomes that happened; NaN in an empty bucket) — the
    reliability diagram of Murphy & Winkler ("A general framework for forecast
    verification", *Monthly Weather Review* 115, 1987).
    """
    p = np.asarray(prob, float)
    o = np.asarray(outcome, float)
    ok = np.isfinite(p) & np.isfinite(o)
    p, o = p[ok], o[ok]
    idx = np.clip((p * buckets).astype(int), 0, buckets - 1)
    n = np.bincount(idx, minlength=buckets)
    sp = np.bincount(idx, weights=p, minlength=buckets)
    so = np.bincount(idx, weights=o, minlength=buckets)
    with np.errstate(invalid="ignore", divide="ignore"):
        mp = np.where(n > 0, sp / np.maximum(n, 1), np.nan)
        mo = np.where(n > 0, so / np.maximum(n, 1), np.nan)
    edges = np.linspace(0.0, 1.0, buckets + 1)
    return [{"low": float(edges[i]), "high": float(edges[i + 1]), "n": int(n[i]),
             "mean_prob": float(mp[i]), "observed": float(mo[i])} for i in range(buckets)]


def percentile_rank(history, value: float) -> float:
    """Share of ``history`` below ``value`` (ties count half), in [0, 1]; NaN when
    there is no history or no value."""
    h = np.asarray(history, float)
    h = h[np.isfinite(h)]
    if not h.size or not math.isfinite(value):
        return math.nan
    return float((np.sum(h < value) + 0.5 * np.sum(h == value)) / h.size)


def summary(values, levels=(0.1, 0.5, 0.9)) -> dict:
    """``n``, ``mean`` and the ``levels`` quantiles (keys ``p10``, ``p50`` ...) of the
    finite values (NaN when empty)."""
    v = np.asarray(values, float)
    v = v[np.isfinite(v)]
    out = {"n": int(v.size), "mean": float(v.mean()) if v.size else math.nan}
    q = np.quantile(v, levels) if v.size else [math.nan] * len(levels)
    for lv, x in zip(levels, q):
        out[f"p{round(100 * lv):02d}"] = float(x)
    return out


def share(mask) -> float:
    """Share of True in a boolean array (NaN when empty)."""
    m = np.asarray(mask, bool)
    return float(m.mean()) if m.size else math.nan
