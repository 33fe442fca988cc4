"""The fast simulation against its plain reference, to the last bit.

The reference below is the simulation written the obvious way: one day at a time,
``sigma_t z_t`` formed day by day, the variance recursion of each model
(Bollerslev 1986 GARCH, Glosten-Jagannathan-Runkle 1993 GJR, Nelson 1991 EGARCH,
RiskMetrics 1996 EWMA) stepped with :meth:`VolSpec.next_variance`, and the terminal
sums added one day at a time. The vectorised code must give the same floats (the
same operations on the same values, only arranged over whole arrays): the random
stream, the number of paths and the arithmetic are unchanged, so no verdict near a
band edge can flip.
"""
from __future__ import annotations

import itertools

import numpy as np
import pytest

from optbench.analysis.drift import (_sums_at_horizons, _sums_day_by_day, choose_drift,
                                     simulate_terminal)
from optbench.volatility.distributions import std_t_draws_fast
from optbench.volatility.simulate import simulate_paths
from optbench.volatility.specs import get_spec

PARAMS = {"garch": dict(mu=3e-4, omega=2e-6, alpha=0.08, beta=0.9, nu=6.3),
          "gjr": dict(mu=3e-4, omega=2e-6, alpha=0.03, gamma=0.12, beta=0.88, nu=4.1),
          "egarch": dict(mu=2e-4, omega=-0.2, alpha=0.12, gamma=-0.08, beta=0.975, nu=7.0),
          "ewma": dict(mu=1e-4)}


def reference_paths(model, params, dist, last_variance, horizon, n_paths, seed,
                    drift=None):
    """Day by day: returns and variances laid out (days, paths)."""
    rng = np.random.default_rng(seed)
    size = (horizon, n_paths)
    if dist == "t":
        z = std_t_draws_fast(rng, float(params["nu"]), size)
    else:
        z = rng.standard_normal(size, dtype=np.float32)
    spec = get_spec(model)
    r = np.empty(size)
    v = np.empty(size)
    s2 = np.full(n_paths, float(last_variance))
    for t in range(horizon):
        v[t] = s2
        r[t] = np.sqrt(s2) * z[t]
        if model in ("garch", "gjr"):
            # the multiplier form sigma^2_{t+1} = omega + sigma^2_t m_t, m_t in float32
            zt = z[t]
            m = zt * zt * np.float32(params["alpha"])
            if params.get("gamma"):
                neg = np.minimum(zt, np.float32(0.0))
                m = m + neg * neg * np.float32(params["gamma"])
            m = m + np.float32(params["beta"])
            s2 = s2 * m + params["omega"]
        else:
            s2 = spec.next_variance(r[t], s2, params)
    if drift is not None:
        r = (r + drift) - 0.5 * v
    elif params.get("mu"):
        r = r + params["mu"]
    return r, v


CASES = [(m, d, dr, hn) for m, d, dr, hn in itertools.product(
    PARAMS, ["t", "normal"], [None, 1.3e-4], [(1, 5), (2, 3), (63, 500), (300, 41)])
    if not (m == "ewma" and d == "t")]


@pytest.mark.parametrize("model,dist,drift,shape", CASES)
def test_simulate_paths_is_the_day_by_day_simulation(model, dist, drift, shape):
    h, n = shape
    r, v = reference_paths(model, PARAMS[model], dist, 1.2e-4, h, n, 3, drift)
    sim = simulate_paths(model, PARAMS[model], dist, 1.2e-4, h, n, seed=3, drift=drift)
    assert np.array_equal(sim.returns, r.T) and np.array_equal(sim.variances, v.T)


@pytest.mark.parametrize("days,paths", [(40, 500), (1, 16), (5, 17), (63, 16), (300, 33),
                                        (20, 1), (30, 3), (30, 9), (130, 2000)])
@pytest.mark.parametrize("convexity", [0.0, 1.0])
def test_sums_at_horizons_are_the_day_by_day_sums(days, paths, convexity):
    rng = np.random.default_rng(days * 1000 + paths)
    r = rng.normal(0, 0.01, size=(days, paths))
    v = rng.uniform(1e-5, 4e-4, size=(days, paths))
    h = np.concatenate([rng.integers(1, days + 1, size=4), [days, 1]])
    want = np.unique(h)
    ref = _sums_day_by_day(r, v, 2e-4, convexity, want, np.searchsorted(want, h))
    kept = (r.copy(), v.copy())
    plain = _sums_at_horizons(r, v, 2e-4, convexity, h)
    assert np.array_equal(r, kept[0]) and np.array_equal(v, kept[1])   # inputs untouched
    scratch = _sums_at_horizons(r.copy(), v.copy(), 2e-4, convexity, h, half_v=0.5 * v,
                                overwrite=True)
    for a, b, c in zip(ref, plain, scratch):
        assert np.array_equal(a, b) and np.array_equal(a, c)


class _Fit:
    model, dist, last_variance = "gjr", "t", 1.2e-4
    params = PARAMS["gjr"]


@pytest.mark.parametrize("rule", ["risk-free", "fitted"])
def test_terminal_draws_are_the_day_by_day_sums(rule):
    choice = choose_drift(rule, rate=0.04, div_yield=0.01, fitted_mu=3e-4)
    h = np.array([5, 20, 45, 70, 130, 260, 20])
    taus = h / 252.0
    fitted = rule == "fitted"
    daily = None if fitted else choice.annual / 252.0
    r, v = reference_paths("gjr", _Fit.params, "t", 1.2e-4, int(h.max()), 700, 7, daily)
    a = 3e-4 if fitted else daily
    want = np.unique(h)
    shock, var, sq = _sums_day_by_day(r, v, a, 0.0 if fitted else 1.0, want,
                                      np.searchsorted(want, h))
    draws = simulate_terminal(_Fit, choice, h, taus, 0.04, 0.01, n_paths=700, seed=7)
    assert np.array_equal(draws.shock, shock) and np.array_equal(draws.variance, var)
    assert np.array_equal(draws.realized_vol, np.sqrt(252.0 / h * sq))


@pytest.mark.parametrize("nu,size", [(5.7, (70, 2000)), (2.3, 40_000), (30.0, (3, 7)),
                                     (4.1, 1), (8.0, (2, 16385))])
def test_fast_t_draws_are_the_whole_array_transform(nu, size):
    """The chunked in-place transform against the same formula over the whole array."""
    from optbench.volatility.distributions import (_GRID_HALF_WIDTH, _GRID_STEPS,
                                                   _normal_to_t_table)
    vals, slope = _normal_to_t_table(nu)
    x = np.random.default_rng(9).standard_normal(size, dtype=np.float32)
    pos = (x + np.float32(_GRID_HALF_WIDTH)) * np.float32(_GRID_STEPS / (2 * _GRID_HALF_WIDTH))
    pos = np.clip(pos, np.float32(0.0), np.float32(_GRID_STEPS - 1e-3))
    i = pos.astype(np.int32)
    frac = (pos - i).astype(np.float32)
    ref = slope[i] * frac + vals[i]
    got = std_t_draws_fast(np.random.default_rng(9), nu, size)
    assert got.dtype == np.float32 and got.shape == np.shape(ref)
    assert np.array_equal(got, ref)


class _GivenNormals:
    """A stand-in generator whose normals are given (the transform's edge cases)."""

    def __init__(self, x):
        self.x = np.asarray(x, dtype=np.float32)

    def standard_normal(self, size, dtype=np.float64):
        return self.x.reshape(size).astype(dtype, copy=True)


def test_fast_t_draws_at_the_table_edges_are_the_modf_transform():
    """Normals at, beyond and just inside +-8, at zero and at node boundaries: the
    chunked transform (trunc, subtract, look-ups by np.take's wrap path) gives the
    floats of the plain formula with numpy.modf's fractional and integral parts."""
    from optbench.volatility.distributions import (_GRID_HALF_WIDTH, _GRID_STEPS,
                                                   _normal_to_t_table)
    f32 = np.float32
    edge = np.array([-np.inf, -1e30, -9.0, -8.0, np.nextafter(f32(-8), f32(0)), -7.998046875,
                     -1e-30, -0.0, 0.0, 1e-30, 0.001953125, 7.998046875,
                     np.nextafter(f32(8), f32(0)), 8.0, 9.0, 1e30, np.inf], dtype=f32)
    x = np.concatenate([edge, np.random.default_rng(3).standard_normal(40_000, dtype=f32)])
    for nu in (2.3, 6.3):
        vals, slope = _normal_to_t_table(nu)
        p = (x + f32(_GRID_HALF_WIDTH)) * f32(_GRID_STEPS / (2 * _GRID_HALF_WIDTH))
        p = np.clip(p, f32(0.0), f32(_GRID_STEPS - 1e-3))
        frac, cell = np.modf(p)
        i = cell.astype(np.intp)
        ref = slope[i] * frac + vals[i]
        got = std_t_draws_fast(_GivenNormals(x), nu, x.shape)
        assert got.dtype == np.float32 and np.array_equal(got.view(np.int32),
                                                          ref.view(np.int32)), nu


def test_quantile_table_is_the_general_solvers_table_to_the_float32_bit():
    """The table from stdtrit_one_df (one df, Halley steps) against the same table from
    optbench's general stdtrit (bracketed Newton), the route the table took before:
    the two solvers agree to a few 1e-15, so the float32 nodes are identical and a
    slope can differ only where that difference straddles a float32 rounding
    boundary (measured: a few per cent of degrees of freedom have one such cell, or
    its mirror image), by one float32 unit; a draw in such a cell moves by at most
    one unit of its last place, and only when the product lands on a boundary too."""
    import math

    from optbench.pricing.special import ndtr, stdtrit
    from optbench.volatility.distributions import _GRID_STEPS, _normal_to_t_table

    x = np.linspace(-8.0, 0.0, _GRID_STEPS // 2 + 1)
    same = 0
    nus = np.concatenate([np.linspace(2.05, 12.0, 23), [15.5, 23.0, 41.7, 60.0]])
    for nu in nus:
        nu = float(nu)
        left = stdtrit(nu, ndtr(x)) * math.sqrt((nu - 2.0) / nu)
        vals = np.concatenate([left, -left[-2::-1]])
        vals[_GRID_STEPS // 2] = 0.0
        ref_vals, ref_slope = vals[:-1].astype(np.float32), np.diff(vals).astype(np.float32)
        got_vals, got_slope = _normal_to_t_table(nu)
        assert np.array_equal(got_vals, ref_vals), nu
        off = np.flatnonzero(got_slope != ref_slope)
        assert off.size <= 2, nu
        assert np.all(np.abs(got_slope[off] - ref_slope[off]) <= np.spacing(ref_slope[off])), nu
        same += off.size == 0
    assert same >= len(nus) - 3
