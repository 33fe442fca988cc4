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
    r, v = simulate_days(model, params, dist, last_variance, horizon, n_paths, seed,
                         drift)
    return SimulatedPaths(returns=r.T, variances=v.T)


def _draws(rng: np.random.Generator, dist: str, params: dict, size) -> np.ndarray:
    """Unit-variance innovations, float32, laid out (days, paths)."""
    if dist == "t":
        return std_t_draws_fast(rng, float(params["nu"]), size)
    return rng.standard_normal(size, dtype=np.float32)


#: elements (days x paths) of one block of days worked through at a time: the scratch
#: arrays of a block stay in the processor's cache, and no array of every day's
#: temporaries is allocated (fresh memory costs more than the arithmetic on it)
BLOCK_ELEMENTS = 1 << 15


def day_blocks(model: str, params: dict, dist: str, last_variance: float, horizon: int,
               n_paths: int, seed=None, drift: float | None = None, *,
               r_out: np.ndarray | None = None, v_out: np.ndarray | None = None):
    """The simulation of :func:`simulate_paths`, a block of consecutive days at a time.

    Yields ``(t0, r, v, half_v)`` per block: the block's first day, its daily log
    returns and conditional variances (laid out (days, paths)) and, when ``drift``
    is given, the ``v / 2`` subtracted from the returns (else None). Without
    ``r_out`` / ``v_out`` (arrays (horizon, paths)) the blocks are scratch arrays
    reused for the next block, which the consumer may overwrite; with them, the
    blocks are views into them. The numbers are those of the day-by-day simulation
    to the last bit: the random numbers are drawn at once, in the same order, and
    every day's operations are the same, only grouped over the days of a block.
    """
    if horizon < 1 or n_paths < 1:
        raise ValueError("horizon and n_paths must be positive")
    spec = get_spec(model)
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    z = _draws(rng, dist, params, (horizon, n_paths))
    mu = float(params.get("mu", 0.0))
    linear = model in ("garch", "gjr")
    if linear:
        omega, alpha, beta = (float(params[k]) for k in ("omega", "alpha", "beta"))
        gamma = float(params.get("gamma", 0.0))
    days = max(1, min(horizon, BLOCK_ELEMENTS // n_paths))
    shape = (days, n_paths)
    mult = np.empty(shape, np.float32) if linear else None
    mult64 = np.empty(shape) if linear else None
    neg = np.empty(shape, np.float32) if linear and gamma else None
    rb = np.empty(shape) if r_out is None else None
    vb = np.empty(shape) if v_out is None else None
    hb = np.empty(shape) if drift is not None else None
    carry = np.full(n_paths, float(last_variance))   # sigma^2 of the block's first day
    for t0 in range(0, horizon, days):
        t1 = min(t0 + days, horizon)
        n = t1 - t0
        zb = z[t0:t1]
        r = rb[:n] if r_out is None else r_out[t0:t1]
        v = vb[:n] if v_out is None else v_out[t0:t1]
        v[0] = carry
        if linear:
            # e_t^2 = sigma_t^2 z_t^2 and 1[e_t < 0] = 1[z_t < 0], so
            # sigma^2_{t+1} = omega + sigma^2_t * (beta + z_t^2 (alpha + gamma 1[z_t < 0])):
            # the multiplier (float32) for the block's days at once, then a
            # multiply-add a day
            m = mult[:n]
            np.multiply(zb, zb, out=m)
            m *= np.float32(alpha)
            if gamma:
                g = neg[:n]
                np.minimum(zb, np.float32(0.0), out=g)
                g *= g
                g *= np.float32(gamma)
                m += g
            m += np.float32(beta)
            m64 = mult64[:n]
            np.copyto(m64, m)          # exact; the day's multiply then runs in one type
            for k in range(n - 1):   # loop over days only; vectorised over paths
                nxt = v[k + 1]
                np.multiply(v[k], m64[k], out=nxt)
                nxt += omega
            if t1 < horizon:
                np.multiply(v[n - 1], m64[n - 1], out=carry)
                carry += omega
            np.sqrt(v, out=r)
            r *= zb
        else:
            for k in range(n):
                e = r[k]
                np.sqrt(v[k], out=e)
                e *= zb[k]
                if t0 + k + 1 < horizon:
                    s2 = spec.next_variance(e, v[k], params)
                    if k + 1 < n:
                        v[k + 1] = s2
                    else:
                        carry[:] = s2
        h = None
        if drift is not None:
            r += float(drift)
            h = hb[:n]
            np.multiply(v, 0.5, out=h)
            r -= h
        elif mu:
            r += mu
        yield t0, r, v, h


def simulate_days(model: str, params: dict, dist: str, last_variance: float,
                  horizon: int, n_paths: int, seed=None, drift: float | None = None):
    """The arrays behind :func:`simulate_paths`: daily log returns and conditional
    daily variances laid out (days, paths) (each day one contiguous row), freshly
    allocated; the numbers of the day-by-day simulation to the last bit (see
    :func:`day_blocks`)."""
    r = np.empty((horizon, n_paths)) if horizon >= 1 and n_paths >= 1 else None
    v = np.empty_like(r) if r is not None else None
    for _ in day_blocks(model, params, dist, last_variance, horizon, n_paths, seed,
                        drift, r_out=r, v_out=v):
        pass
    return r, v
