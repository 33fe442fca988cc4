"""Statistics that judge a volatility model out of sample.

Coverage tests for Value-at-Risk exceedances (Kupiec 1995; Christoffersen 1998),
the Basel Committee (1996) traffic-light zones, forecast losses (QLIKE and MSE,
Patton 2011), the Mincer-Zarnowitz (1969) regression, moments and the
Jarque-Bera (1980) test of standardised residuals, and the standardised
innovation distributions (normal, Student-t scaled to unit variance) used by the
bands and the VaR quantiles.

All functions are pure and vectorised; p-values come from ``scipy.special``
(``chdtrc``, ``bdtr``, ``stdtr``, ``ndtr``) so that importing this module stays
cheap (``scipy.stats`` is not imported).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

__all__ = [
    "LRTest", "ResidualStats", "MincerZarnowitz", "Histogram",
    "innovation_cdf", "innovation_ppf", "innovation_pdf", "expected_outside_band",
    "kupiec_pof", "christoffersen_independence", "christoffersen_conditional_coverage",
    "transition_counts", "basel_zone", "basel_zone_thresholds",
    "qlike_loss", "mse_loss", "mincer_zarnowitz", "residual_stats", "residual_histogram",
]

# cumulative binomial probabilities that bound the Basel traffic-light zones
BASEL_GREEN_BELOW = 0.95
BASEL_RED_FROM = 0.9999


# --------------------------------------------------------------------------- results
@dataclass(frozen=True)
class LRTest:
    """A likelihood-ratio test: statistic, chi-square degrees of freedom, p-value."""

    statistic: float
    df: int
    p_value: float

    def to_dict(self) -> dict:
        return {"lr": self.statistic, "df": self.df, "p": self.p_value}


@dataclass(frozen=True)
class ResidualStats:
    """Moments of standardised residuals and the Jarque-Bera normality test.

    ``skew`` and ``excess_kurtosis`` are the moment (biased) estimators
    m3 / m2^1.5 and m4 / m2^2 - 3, as used by the Jarque-Bera statistic.
    """

    n: int
    mean: float
    std: float
    min: float
    max: float
    skew: float
    excess_kurtosis: float
    jarque_bera: float
    jarque_bera_p: float

    def to_dict(self) -> dict:
        return {k: getattr(self, k) for k in (
            "n", "mean", "std", "min", "max", "skew", "excess_kurtosis",
            "jarque_bera", "jarque_bera_p")}


@dataclass(frozen=True)
class MincerZarnowitz:
    """OLS of realized on forecast variance: realized = alpha + beta * forecast + e.

    An unbiased forecast has alpha = 0 and beta = 1; ``r2`` is the share of the
    realized variance's variation the forecast explains.
    """

    alpha: float
    beta: float
    r2: float
    n: int

    def to_dict(self) -> dict:
        return {"alpha": self.alpha, "beta": self.beta, "r2": self.r2, "n": self.n}


@dataclass(frozen=True)
class Histogram:
    """Bin edges and counts of standardised residuals, with what the fitted
    innovation distribution expects: its density at the bin centres and the
    expected count in each bin (n * (F(right edge) - F(left edge)))."""

    edges: np.ndarray
    counts: np.ndarray
    density: np.ndarray
    expected_counts: np.ndarray
    below: int
    above: int

    def to_dict(self) -> dict:
        return {"edges": self.edges.tolist(), "counts": self.counts.tolist(),
                "density": self.density.tolist(),
                "expected_counts": self.expected_counts.tolist(),
                "below": self.below, "above": self.above}


# ------------------------------------------------------- standardised innovations
def _check_dist(dist: str, nu: float | None) -> float | None:
    if dist == "normal":
        return None
    if dist == "t":
        if nu is None or not np.isfinite(nu) or nu <= 2.0:
            raise ValueError(f"standardised Student-t needs degrees of freedom nu > 2, got {nu}")
        return float(nu)
    raise ValueError(f"unknown innovation distribution {dist!r} (normal or t)")


def innovation_cdf(z, dist: str = "normal", nu: float | None = None) -> np.ndarray:
    """Distribution function of a zero-mean, unit-variance innovation.

    Notes
    -----
    Normal: Phi(z). Standardised Student-t with nu > 2 degrees of freedom
    (Bollerslev 1987): F(z) = T_nu(z * sqrt(nu / (nu - 2))), where T_nu is the
    Student-t distribution function (``scipy.special.stdtr``).
    """
    z = np.asarray(z, dtype=float)
    nu = _check_dist(dist, nu)
    if nu is None:
        return special.ndtr(z)
    return special.stdtr(nu, z * np.sqrt(nu / (nu - 2.0)))


def innovation_ppf(p, dist: str = "normal", nu: float | None = None) -> np.ndarray:
    """Quantile of a zero-mean, unit-variance innovation (inverse of
    :func:`innovation_cdf`): Phi^-1(p), or T_nu^-1(p) * sqrt((nu - 2) / nu)."""
    p = np.asarray(p, dtype=float)
    nu = _check_dist(dist, nu)
    if nu is None:
        return special.ndtri(p)
    return special.stdtrit(nu, p) * np.sqrt((nu - 2.0) / nu)


def innovation_pdf(z, dist: str = "normal", nu: float | None = None) -> np.ndarray:
    """Density of a zero-mean, unit-variance innovation.

    Notes
    -----
    Standardised t (Bollerslev 1987):
    f(z) = Gamma((nu+1)/2) / [Gamma(nu/2) sqrt(pi (nu-2))] * (1 + z^2/(nu-2))^(-(nu+1)/2).
    """
    z = np.asarray(z, dtype=float)
    nu = _check_dist(dist, nu)
    if nu is None:
        return np.exp(-0.5 * z * z) / np.sqrt(2.0 * np.pi)
    logc = (special.gammaln(0.5 * (nu + 1.0)) - special.gammaln(0.5 * nu)
            - 0.5 * np.log(np.pi * (nu - 2.0)))
    return np.exp(logc - 0.5 * (nu + 1.0) * np.log1p(z * z / (nu - 2.0)))


def expected_outside_band(n: int, k: float, dist: str = "normal",
                          nu: float | None = None) -> float:
    """Expected count of days with |z| > k among n: n * 2 * (1 - F(k)).

    For the normal this is n * 2 * (1 - Phi(k)) (0.27% of days at k = 3).
    """
    return float(n * 2.0 * (1.0 - innovation_cdf(float(k), dist, nu)))


# ------------------------------------------------------------- coverage tests
def _bernoulli_loglik(successes, trials, p) -> np.ndarray:
    """sum of log-probabilities of `successes` hits with probability p in `trials`,
    with 0 * log 0 = 0 (``scipy.special.xlogy``)."""
    return special.xlogy(successes, p) + special.xlog1py(trials - successes, -p)


def kupiec_pof(exceedances: int, n: int, p: float) -> LRTest:
    """Kupiec (1995) proportion-of-failures test of unconditional coverage.

    Parameters
    ----------
    exceedances : int
        Days on which the loss exceeded the VaR, x.
    n : int
        Days observed.
    p : float
        Exceedance probability the VaR promises (0.01 for a 99% VaR).

    Notes
    -----
    LR_pof = -2 ln[(1-p)^(n-x) p^x] + 2 ln[(1-x/n)^(n-x) (x/n)^x] ~ chi2(1).
    Kupiec, P. (1995), "Techniques for verifying the accuracy of risk measurement
    models", Journal of Derivatives 3(2), 73-84.
    """
    x, n = int(exceedances), int(n)
    if n <= 0 or not 0 <= x <= n:
        raise ValueError(f"need 0 <= exceedances <= n with n > 0, got x={x}, n={n}")
    if not 0.0 < p < 1.0:
        raise ValueError(f"exceedance probability must be in (0, 1), got {p}")
    lr = -2.0 * (_bernoulli_loglik(x, n, p) - _bernoulli_loglik(x, n, x / n))
    lr = float(max(lr, 0.0))
    return LRTest(lr, 1, float(special.chdtrc(1, lr)))


def transition_counts(hits) -> tuple[int, int, int, int]:
    """Counts (n00, n01, n10, n11) of day-to-day transitions in a 0/1 hit series;
    n_ij is the number of days in state j that follow a day in state i."""
    h = np.asarray(hits, dtype=bool)
    prev, cur = h[:-1], h[1:]
    n01 = int(np.count_nonzero(~prev & cur))
    n11 = int(np.count_nonzero(prev & cur))
    n10 = int(np.count_nonzero(prev & ~cur))
    n00 = int(prev.size - n01 - n11 - n10)
    return n00, n01, n10, n11


def christoffersen_independence(hits) -> LRTest:
    """Christoffersen (1998) test that exceedances do not cluster.

    Notes
    -----
    With transition counts n_ij, pi01 = n01/(n00+n01), pi11 = n11/(n10+n11) and
    pi = (n01+n11)/(n00+n01+n10+n11):
    LR_ind = -2 ln[(1-pi)^(n00+n10) pi^(n01+n11)]
             + 2 ln[(1-pi01)^n00 pi01^n01 (1-pi11)^n10 pi11^n11] ~ chi2(1).
    Christoffersen, P. (1998), "Evaluating interval forecasts", International
    Economic Review 39(4), 841-862.
    """
    n00, n01, n10, n11 = transition_counts(hits)
    total = n00 + n01 + n10 + n11
    if total == 0:
        raise ValueError("need at least two days to count transitions")
    pi = (n01 + n11) / total
    pi01 = n01 / (n00 + n01) if n00 + n01 else 0.0
    pi11 = n11 / (n10 + n11) if n10 + n11 else 0.0
    restricted = _bernoulli_loglik(n01 + n11, total, pi)
    unrestricted = (_bernoulli_loglik(n01, n00 + n01, pi01)
                    + _bernoulli_loglik(n11, n10 + n11, pi11))
    lr = float(max(-2.0 * (restricted - unrestricted), 0.0))
    return LRTest(lr, 1, float(special.chdtrc(1, lr)))


def christoffersen_conditional_coverage(hits, p: float) -> LRTest:
    """Christoffersen (1998) conditional coverage: LR_cc = LR_pof + LR_ind ~ chi2(2).

    The proportion-of-failures part is Kupiec's over all days (the common
    practice of not conditioning on the first observation).
    """
    h = np.asarray(hits, dtype=bool)
    pof = kupiec_pof(int(h.sum()), h.size, p)
    ind = christoffersen_independence(h)
    lr = pof.statistic + ind.statistic
    return LRTest(lr, 2, float(special.chdtrc(2, lr)))


# ------------------------------------------------------------- Basel zones
def basel_zone_thresholds(n: int = 250, level: float = 0.99) -> tuple[int, int]:
    """First exceedance counts of the yellow and of the red zone.

    Notes
    -----
    Basel Committee on Banking Supervision (1996), "Supervisory framework for the
    use of 'backtesting' in conjunction with the internal models approach to
    market risk capital requirements", Table 2: a count x of exceptions is green
    while the binomial probability of x or fewer, P(X <= x) with X ~ Bin(n, 1 -
    level), is below 95%; red once it reaches 99.99%; yellow between. For 99% VaR
    over 250 days this gives green 0-4, yellow 5-9, red 10 or more. Other windows
    and levels use the same cumulative-probability rule.
    """
    if n <= 0 or not 0.0 < level < 1.0:
        raise ValueError(f"need n > 0 and 0 < level < 1, got n={n}, level={level}")
    counts = np.arange(n + 1)
    cdf = special.bdtr(counts, n, 1.0 - level)
    yellow = int(np.argmax(cdf >= BASEL_GREEN_BELOW)) if (cdf >= BASEL_GREEN_BELOW).any() else n + 1
    red = int(np.argmax(cdf >= BASEL_RED_FROM)) if (cdf >= BASEL_RED_FROM).any() else n + 1
    return yellow, red


def basel_zone(exceedances: int, n: int = 250, level: float = 0.99) -> str:
    """Traffic-light zone ("green", "yellow" or "red") of an exceedance count;
    see :func:`basel_zone_thresholds`."""
    yellow, red = basel_zone_thresholds(n, level)
    if exceedances >= red:
        return "red"
    if exceedances >= yellow:
        return "yellow"
    return "green"


# ------------------------------------------------------------- forecast losses
def _pair(realized, forecast) -> tuple[np.ndarray, np.ndarray]:
    rv = np.asarray(realized, dtype=float)
    fc = np.asarray(forecast, dtype=float)
    rv, fc = np.broadcast_arrays(rv, fc)
    ok = np.isfinite(rv) & np.isfinite(fc)
    return rv[ok], fc[ok]


def qlike_loss(realized, forecast) -> float:
    """Mean QLIKE loss of variance forecasts against realized variance.

    Notes
    -----
    L(RV, h) = RV/h - ln(RV/h) - 1 (Patton 2011, the member of his robust family
    with b = -2, normalised to 0 at a perfect forecast). Days with RV <= 0 or a
    non-positive forecast are left out (the loss is undefined there).
    Patton, A. J. (2011), "Volatility forecast comparison using imperfect
    volatility proxies", Journal of Econometrics 160(1), 246-256.
    """
    rv, fc = _pair(realized, forecast)
    ok = (rv > 0) & (fc > 0)
    if not ok.any():
        return float("nan")
    ratio = rv[ok] / fc[ok]
    return float(np.mean(ratio - np.log(ratio) - 1.0))


def mse_loss(realized, forecast) -> float:
    """Mean squared error of variance forecasts: mean (RV - h)^2 (Patton 2011, b = 0)."""
    rv, fc = _pair(realized, forecast)
    if rv.size == 0:
        return float("nan")
    return float(np.mean((rv - fc) ** 2))


def mincer_zarnowitz(realized, forecast) -> MincerZarnowitz:
    """Mincer-Zarnowitz regression RV_t = alpha + beta * h_t + e_t by least squares.

    Notes
    -----
    beta = cov(h, RV) / var(h), alpha = mean(RV) - beta mean(h),
    R^2 = 1 - SSR / SST. Mincer, J. and Zarnowitz, V. (1969), "The evaluation of
    economic forecasts", in *Economic Forecasts and Expectations*, NBER.
    """
    rv, fc = _pair(realized, forecast)
    n = rv.size
    if n < 3:
        return MincerZarnowitz(float("nan"), float("nan"), float("nan"), n)
    dh = fc - fc.mean()
    drv = rv - rv.mean()
    sxx = float(dh @ dh)
    if sxx <= 0.0:
        return MincerZarnowitz(float("nan"), float("nan"), float("nan"), n)
    beta = float(dh @ drv) / sxx
    alpha = float(rv.mean() - beta * fc.mean())
    resid = drv - beta * dh
    sst = float(drv @ drv)
    r2 = 1.0 - float(resid @ resid) / sst if sst > 0 else float("nan")
    return MincerZarnowitz(alpha, beta, r2, n)


# ------------------------------------------------------------- residuals
def residual_stats(z) -> ResidualStats:
    """Moments and Jarque-Bera test of standardised residuals (NaNs ignored).

    Notes
    -----
    With central moments m_k = mean((z - mean z)^k): S = m3 / m2^1.5,
    K = m4 / m2^2 - 3, JB = n/6 (S^2 + K^2/4) ~ chi2(2) under normality.
    Jarque, C. M. and Bera, A. K. (1980), "Efficient tests for normality,
    homoscedasticity and serial independence of regression residuals",
    Economics Letters 6(3), 255-259.
    """
    z = np.asarray(z, dtype=float)
    z = z[np.isfinite(z)]
    n = z.size
    if n < 3:
        raise ValueError(f"need at least 3 residuals, got {n}")
    d = z - z.mean()
    m2 = float(np.mean(d * d))
    m3 = float(np.mean(d ** 3))
    m4 = float(np.mean(d ** 4))
    skew = m3 / m2 ** 1.5 if m2 > 0 else float("nan")
    kurt = m4 / m2 ** 2 - 3.0 if m2 > 0 else float("nan")
    jb = n / 6.0 * (skew ** 2 + kurt ** 2 / 4.0)
    return ResidualStats(n, float(z.mean()), float(np.std(z, ddof=1)), float(z.min()),
                         float(z.max()), skew, kurt, float(jb), float(special.chdtrc(2, jb)))


def residual_histogram(z, dist: str = "normal", nu: float | None = None,
                       bins: int = 40, limit: float = 5.0) -> Histogram:
    """Histogram of standardised residuals on [-limit, limit] with ``bins`` equal
    bins, the fitted innovation density at the bin centres and the expected count
    per bin; values beyond the range are counted in ``below`` / ``above``."""
    z = np.asarray(z, dtype=float)
    z = z[np.isfinite(z)]
    edges = np.linspace(-limit, limit, bins + 1)
    counts, _ = np.histogram(z, bins=edges)
    centres = 0.5 * (edges[:-1] + edges[1:])
    cdf = innovation_cdf(edges, dist, nu)
    return Histogram(edges, counts.astype(int), innovation_pdf(centres, dist, nu),
                     z.size * np.diff(cdf), int(np.count_nonzero(z < -limit)),
                     int(np.count_nonzero(z > limit)))
