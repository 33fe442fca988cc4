"""Innovation distributions: log-densities of residuals and their derivatives.

Each function takes residuals ``e`` and conditional variances ``s2`` and returns the
per-observation log-likelihood ``l_t`` and, on request, ``dl/ds2``, ``dl/de`` and (for
the Student-t) ``dl/dnu``, which the estimator chains with the variance derivatives
into an analytic score. Only :mod:`scipy.special` is used (cheap to import).
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from optbench.pricing.special import (QuantileProbabilities, digamma, gammaln, ndtr,
                                     stdtrit_one_df, t_quantiles_normal_grid)

LOG_2PI = math.log(2.0 * math.pi)
NU_MIN = 2.05   # smallest degrees of freedom allowed (variance must exist)
NU_MAX = 500.0


def normal_loglik(e: np.ndarray, s2: np.ndarray, *, grad: bool = False):
    """Gaussian log-density of residuals with conditional variance ``s2``.

    Notes
    -----
    ``l_t = -(ln 2 pi + ln s2_t + e_t^2 / s2_t) / 2``;
    ``dl/ds2 = (e^2/s2 - 1) / (2 s2)``, ``dl/de = -e / s2`` (Bollerslev 1986).
    """
    r = e * e / s2
    ll = -0.5 * (LOG_2PI + np.log(s2) + r)
    if not grad:
        return ll
    return ll, 0.5 * (r - 1.0) / s2, -e / s2


def std_t_loglik(e: np.ndarray, s2: np.ndarray, nu: float, *, grad: bool = False):
    """Standardised Student-t log-density (unit variance, ``nu > 2``).

    Notes
    -----
    With ``q = e^2 / (s2 (nu - 2))`` (Bollerslev 1987):
    ``l_t = lnG((nu+1)/2) - lnG(nu/2) - ln(pi (nu-2))/2 - ln(s2)/2
    - (nu+1)/2 ln(1 + q)``;
    ``dl/ds2 = (-1 + (nu+1) q/(1+q)) / (2 s2)``,
    ``dl/de = -(nu+1) e / (s2 (nu-2) (1+q))``,
    ``dl/dnu = [psi((nu+1)/2) - psi(nu/2) - 1/(nu-2) - ln(1+q)
    + (nu+1) q / ((nu-2)(1+q))] / 2``.
    """
    nm2 = nu - 2.0
    q = e * e / (s2 * nm2)
    lq = np.log1p(q)
    const = gammaln(0.5 * (nu + 1.0)) - gammaln(0.5 * nu) - 0.5 * math.log(math.pi * nm2)
    ll = const - 0.5 * np.log(s2) - 0.5 * (nu + 1.0) * lq
    if not grad:
        return ll
    w = q / (1.0 + q)
    d_s2 = 0.5 * (-1.0 + (nu + 1.0) * w) / s2
    d_e = -(nu + 1.0) * e / (s2 * nm2 * (1.0 + q))
    d_nu = 0.5 * (digamma(0.5 * (nu + 1.0)) - digamma(0.5 * nu) - 1.0 / nm2 - lq
                  + (nu + 1.0) * w / nm2)
    return ll, d_s2, d_e, d_nu


def std_t_loglik_sums(e: np.ndarray, e2: np.ndarray, s2: np.ndarray, nu: float):
    """The sums of :func:`std_t_loglik` that an objective and its gradient need.

    Returns ``(sum l_t, dl/ds2 per day, sum dl/de, sum dl/dnu)``: the same values as
    summing :func:`std_t_loglik`'s arrays, with fewer passes over the data.

    Notes
    -----
    With ``v_t = (nu - 2) s2_t + e_t^2``: ``q/(1+q) = e^2/v``, ``ln(1+q) = ln v - ln s2
    - ln(nu-2)`` and ``1/(s2 (1+q)) = (nu-2)/v`` (the formulas of
    :func:`std_t_loglik`, Bollerslev 1987, rearranged), so two logarithms and one
    reciprocal per day give every sum.
    """
    n = s2.shape[0]
    nm2 = nu - 2.0
    v = s2 * nm2
    v += e2
    inv_v = 1.0 / v
    sum_ln_s2 = float(np.log(s2).sum())
    sum_lq = float(np.log(v).sum()) - sum_ln_s2 - n * math.log(nm2)
    w = e2 * inv_v                      # q / (1 + q)
    sum_w = float(w.sum())
    const = gammaln(0.5 * (nu + 1.0)) - gammaln(0.5 * nu) - 0.5 * math.log(math.pi * nm2)
    total = n * const - 0.5 * sum_ln_s2 - 0.5 * (nu + 1.0) * sum_lq
    w *= nu + 1.0
    w -= 1.0
    w *= 0.5
    d_s2 = w
    d_s2 /= s2
    inv_v *= e     # (single-threaded: no BLAS call on long vectors)
    sum_d_e = -(nu + 1.0) * float(inv_v.sum())
    sum_d_nu = 0.5 * (n * (digamma(0.5 * (nu + 1.0)) - digamma(0.5 * nu) - 1.0 / nm2)
                      - sum_lq + (nu + 1.0) * sum_w / nm2)
    return total, d_s2, sum_d_e, sum_d_nu


def std_t_draws(rng: np.random.Generator, nu: float, size, dtype=np.float64) -> np.ndarray:
    """Draws of a unit-variance Student-t: ``z = N * sqrt((nu - 2) / (2 G))``,
    ``G ~ Gamma(nu/2, 1)`` (the normal / chi-square mixture, ``chi2_nu = 2 G``)."""
    z = rng.standard_normal(size, dtype=dtype)
    g = rng.standard_gamma(0.5 * nu, size, dtype=dtype)
    z *= np.sqrt(np.asarray((nu - 2.0) / 2.0, dtype=dtype) / g)
    return z


_GRID_HALF_WIDTH = 8.0
_GRID_STEPS = 8192


#: How the table's t quantiles are solved. True (the default):
#: :func:`t_quantiles_normal_grid` (the continued fraction at tail anchors only, the
#: other nodes by Halley steps on the integral of the t density from a neighbouring
#: anchor; about half the CPU time). False: :func:`stdtrit_one_df` at every node
#: (Halley steps on the incomplete beta function), the path used before and the
#: tests' reference. The two differ by a few units in the last place of the float64
#: quantiles (each as close to scipy.special.stdtrit); after the rounding to float32
#: ``vals`` were identical at all 581 df tested and ``slope`` differed by one unit in
#: the last place in 14 of 4.76 million entries (7 of the 581 tables), a change of
#: about 1e-7 in a draw that falls in such a cell (tests/volatility/test_t_table.py,
#: tests/benchmarks/ab_t_table.py).
TABLE_BY_QUADRATURE = True


def _table_nodes() -> np.ndarray:
    """The table's nodes x in [-8, 0] (8,192 cells over [-8, 8])."""
    return np.linspace(-_GRID_HALF_WIDTH, 0.0, _GRID_STEPS // 2 + 1)


@functools.lru_cache(maxsize=1)
def _table_probabilities() -> QuantileProbabilities:
    """Phi(x) at the table's nodes x in [-8, 0], with what the t quantiles need of them
    (the same for every ``nu``: made once per process)."""
    return QuantileProbabilities(ndtr(_table_nodes()))


def _lower_table_quantiles(nu: float, by_quadrature: bool) -> np.ndarray:
    """F_t^{-1}(Phi(x)) at the nodes x in [-8, 0] (see :data:`TABLE_BY_QUADRATURE`)."""
    if by_quadrature:
        return t_quantiles_normal_grid(nu, _table_nodes(), _table_probabilities())
    return stdtrit_one_df(nu, _table_probabilities())


@functools.lru_cache(maxsize=32)
def _normal_to_t_table(nu: float):
    """Nodes of the map x -> F_t^{-1}(Phi(x)) * sqrt((nu-2)/nu) on [-8, 8]."""
    left = (_lower_table_quantiles(nu, TABLE_BY_QUADRATURE)
            * math.sqrt((nu - 2.0) / nu))                # lower half, by symmetry
    vals = np.concatenate([left, -left[-2::-1]])
    vals[_GRID_STEPS // 2] = 0.0
    slope = np.diff(vals)
    return vals[:-1].astype(np.float32), slope.astype(np.float32)


#: draws transformed per chunk by :func:`std_t_draws_fast` (scratch arrays that stay
#: in the processor's cache instead of array-sized temporaries)
_CHUNK = 1 << 14


def std_t_draws_fast(rng: np.random.Generator, nu: float, size) -> np.ndarray:
    """Unit-variance Student-t draws (float32) by the quantile transform of normals.

    Notes
    -----
    ``z = F_t^{-1}(Phi(x)) sqrt((nu - 2)/nu)`` with ``x ~ N(0, 1)`` is exactly
    unit-variance t distributed (probability integral transform). The smooth map is
    tabulated on 8,193 nodes over ``x`` in [-8, 8] and interpolated linearly
    (relative error in z below 2e-5); normals beyond +-8 (probability 1e-15) are
    clipped.
    About twice as fast as the normal / chi-square mixture of :func:`std_t_draws`.
    The normals are transformed in place, a chunk at a time, in float32:
    ``p = clip((x + 8) * 512, 0, 8192 - 1e-3)``, ``i = trunc(p)``,
    ``z = slope[i] (p - i) + value[i]``. ``p - trunc(p)`` is exact in float32 (the
    figures of ``modf``), and the table look-ups never leave the table (``i`` is
    0..8191 after the clip), so they take the quick ``wrap`` path of ``np.take``.
    """
    vals, slope = _normal_to_t_table(float(nu))
    x = rng.standard_normal(size, dtype=np.float32)
    flat = x.reshape(-1)          # a view: x is freshly allocated and contiguous
    m = max(1, min(_CHUNK, flat.size))
    pos = np.empty(m, np.float32)
    cell = np.empty(m, np.float32)
    idx = np.empty(m, np.intp)
    idx32 = np.empty(m, np.int32)
    term = np.empty(m, np.float32)
    lo, hi = np.float32(0.0), np.float32(_GRID_STEPS - 1e-3)
    shift, scale = np.float32(_GRID_HALF_WIDTH), np.float32(_GRID_STEPS / (2 * _GRID_HALF_WIDTH))
    for s in range(0, flat.size, m):
        out = flat[s:s + m]
        k = out.size
        p, c, i, i32, t = pos[:k], cell[:k], idx[:k], idx32[:k], term[:k]
        np.add(out, shift, out=p)
        p *= scale
        np.clip(p, lo, hi, out=p)
        np.trunc(p, out=c)              # trunc(p), 0..8191
        p -= c                          # p - trunc(p), exact
        np.copyto(i32, c, casting="unsafe")   # (float32 -> int32 -> intp: quicker
        np.copyto(i, i32)                      # than float32 -> intp at once)
        np.take(slope, i, out=out, mode="wrap")
        out *= p
        np.take(vals, i, out=t, mode="wrap")
        out += t
    return x


@dataclass(frozen=True)
class Distribution:
    """Name and extra parameters of an innovation distribution."""

    name: str                    # "normal" or "t"
    param_names: tuple[str, ...]

    def starting_values(self) -> list[float]:
        return [8.0] if self.name == "t" else []

    def bounds(self) -> list[tuple[float, float]]:
        return [(NU_MIN, NU_MAX)] if self.name == "t" else []


NORMAL = Distribution("normal", ())
STUDENT_T = Distribution("t", ("nu",))


def get_distribution(name: str) -> Distribution:
    if name == "normal":
        return NORMAL
    if name == "t":
        return STUDENT_T
    raise ValueError(f"unknown distribution {name!r} (normal or t)")
