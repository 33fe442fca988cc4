"""Monte Carlo simulation of a fitted GARCH-family model over a horizon.

Vectorised over paths: the only Python loop runs over days. The paths start from
the fit's last state (the variance for the day after the last return), so their
spread is the model's view of what the underlying can do over an option's life.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from optbench.volatility.distributions import std_t_draws_fast
from optbench.volatility.forecast import TRADING_DAYS_PER_YEAR
from optbench.volatility.specs import get_spec


@dataclass(frozen=True)
class SimulatedPaths:
    """Simulated daily log returns.

    Attributes
    ----------
    returns : ndarray, shape (n_paths, horizon)
        Daily log returns, decimals.
    variances : ndarray, shape (n_paths, horizon)
        Conditional daily variance of each simulated day.
    """

    returns: np.ndarray
    variances: np.ndarray

    @property
    def n_paths(self) -> int:
        return self.returns.shape[0]

    @property
    def horizon(self) -> int:
        return self.returns.shape[1]

    def realized_vol(self) -> np.ndarray:
        """Annualised close-to-close realized vol of each path,
        ``sqrt(252 / h * sum_t r_t^2)`` (no demeaning, common practice for option
        horizons), shape (n_paths,)."""
        r = self.returns
        return np.sqrt(TRADING_DAYS_PER_YEAR / r.shape[1] * np.einsum("ij,ij->i", r, r))

    def terminal_return(self) -> np.ndarray:
        """Log return over the whole horizon, ``sum_t r_t``, shape (n_paths,)."""
        return self.returns.sum(axis=1)


def simulate_paths(model: str, params: dict, dist: str, last_variance: float,
                   horizon: int, n_paths: int, seed=None,
                   drift: float | None = None) -> SimulatedPaths:
    """Simulate ``n_paths`` paths of ``horizon`` days from a fitted state.

    Parameters
    ----------
    model : str
        ``garch``, ``gjr``, ``egarch`` or ``ewma``.
    params : dict
        Decimal-unit parameters (``mu`` optional, ``nu`` for the t).
    dist : str
        ``normal`` or ``t`` (unit-variance Student-t).
    last_variance : float
        sigma^2 of the first simulated day (the fit's ``last_variance``).
    horizon, n_paths : int
    seed : int, numpy Generator or None
    drift : float or None
        Daily log drift ``a`` of the price set by the caller (e.g. ``(r - q + x) / 252``
        or ``(r - q + x) tau / h`` for a horizon of ``h`` trading days over ``tau``
        years). None (default) keeps the fitted mean ``mu``.

    Notes
    -----
    ``r_t = mu + sigma_t z_t`` (fitted mean), or with ``drift`` given
    ``r_t = a - sigma_t^2 / 2 + sigma_t z_t``: the convexity term ``-sigma_t^2/2``
    makes ``E[exp(r_t) | sigma_t] = exp(a)`` for normal innovations, so
    ``E[S_h] = S_0 e^{a h}`` by iterated expectations (for the unit-variance t with
    ``nu > 4`` the daily error is of order ``sigma_t^4 (kurtosis - 3) / 24``, below
    1e-6 a day at daily vols under 5 %; the tabulated t draws are bounded, so the
    mean of ``exp`` exists).
    The drift never enters the variance recursion, which runs on ``sigma_t z_t``:
    the volatility paths are the same whatever the drift.
    ``sigma^2_{t+1}`` from the model's recursion
    (see :mod:`optbench.volatility.recursions`). Innovations are drawn in float32
    (the shocks only need single precision; t draws by the tabulated quantile
    transform of normals, :func:`optbench.volatility.distributions.std_t_draws_fast`);
    the recursion runs in float64.
    """
    r, v, _ = simulate_days(model, params, dist, last_variance, horizon, n_paths, seed,
                            drift)
    return SimulatedPaths(returns=r.T, variances=v.T)


def _draws(rng: np.random.Generator, dist: str, params: dict, size) -> np.ndarray:
    """Unit-variance innovations, float32, laid out (days, paths)."""
    if dist == "t":
        return std_t_draws_fast(rng, float(params["nu"]), size)
    return rng.standard_normal(size, dtype=np.float32)


def simulate_days(model: str, params: dict, dist: str, last_variance: float,
                  horizon: int, n_paths: int, seed=None, drift: float | None = None,
                  *, keep_half_variance: bool = False):
    """The arrays behind :func:`simulate_paths`, laid out (days, paths) (each day one
    contiguous row), freshly allocated so the caller may overwrite them.

    Returns ``(r, v, half_v)``: daily log returns, conditional daily variances and,
    when ``keep_half_variance`` is set and the convexity term was applied (``drift``
    given), the array ``v / 2`` that was subtracted from the returns (else None).
    The numbers are those of :func:`simulate_paths` (see there), to the last bit.

    Notes
    -----
    For GARCH and GJR the per-day loop is only the variance recursion, written into
    its rows of ``v`` (a multiply and an add per day); ``sigma_t z_t`` is then formed
    for all days at once as ``sqrt(v) * z``, the same products as day by day.
    """
    if horizon < 1 or n_paths < 1:
        raise ValueError("horizon and n_paths must be positive")
    spec = get_spec(model)
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    size = (horizon, n_paths)
    z = _draws(rng, dist, params, size)
    mu = float(params.get("mu", 0.0))
    v = np.empty(size)
    v[0] = float(last_variance)
    if model in ("garch", "gjr"):
        # e_t^2 = sigma_t^2 z_t^2 and 1[e_t < 0] = 1[z_t < 0], so
        # sigma^2_{t+1} = omega + sigma^2_t * (beta + z_t^2 (alpha + gamma 1[z_t < 0])):
        # the multiplier is built for all days at once (float32), the loop is a
        # multiply-add
        omega, alpha, beta = (float(params[k]) for k in ("omega", "alpha", "beta"))
        gamma = float(params.get("gamma", 0.0))
        mult = z[:-1] * z[:-1]
        if gamma:
            neg = np.minimum(z[:-1], np.float32(0.0))
            neg *= neg
            neg *= np.float32(gamma)
        mult *= np.float32(alpha)
        if gamma:
            mult += neg
            del neg
        mult += np.float32(beta)
        for t in range(horizon - 1):   # loop over days only; vectorised over paths
            nxt = v[t + 1]
            np.multiply(v[t], mult[t], out=nxt)
            nxt += omega
        del mult
        r = np.sqrt(v)
        r *= z
    else:
        r = np.empty(size)
        s2 = v[0]
        for t in range(horizon):
            e = r[t]
            np.sqrt(s2, out=e)
            e *= z[t]
            if t + 1 < horizon:
                s2 = spec.next_variance(e, s2, params)
                v[t + 1] = s2
    del z
    half_v = None
    if drift is not None:
        r += float(drift)
        half_v = np.multiply(v, 0.5)
        r -= half_v
    elif mu:
        r += mu
    return r, v, (half_v if keep_half_variance else None)
