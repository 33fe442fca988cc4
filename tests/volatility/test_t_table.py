"""The simulation's normal-to-t quantile table (``_normal_to_t_table``) solved by the
anchors-and-quadrature path (``special.t_quantiles_normal_grid``) against the table
of Halley steps on the incomplete beta function at every node (the path used before,
kept below as the reference), and against scipy.special.stdtrit (the outside source:
scipy's own Student-t quantile, at scipy's own normal probabilities).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.special as sc

from optbench.pricing import special
from optbench.volatility import distributions as dist

#: 500 degrees of freedom spread geometrically over [2.1, 200], and a dense run over
#: [4, 12], where the screen's fitted t models land (5.9-7.6 on the benchmark
#: universe's first rows)
NUS = np.concatenate([np.geomspace(2.1, 200.0, 500), np.linspace(4.0, 12.0, 81)])


def reference_table(nu: float):
    """The table as built before the quadrature path (t quantiles by
    :func:`special.stdtrit_one_df` at every node)."""
    left = (special.stdtrit_one_df(nu, dist._table_probabilities())
            * math.sqrt((nu - 2.0) / nu))
    vals = np.concatenate([left, -left[-2::-1]])
    vals[dist._GRID_STEPS // 2] = 0.0
    slope = np.diff(vals)
    return vals[:-1].astype(np.float32), slope.astype(np.float32)


def quadrature_table(nu: float):
    """The table with ``TABLE_BY_QUADRATURE`` on (built outside the cache)."""
    left = dist._lower_table_quantiles(nu, True) * math.sqrt((nu - 2.0) / nu)
    vals = np.concatenate([left, -left[-2::-1]])
    vals[dist._GRID_STEPS // 2] = 0.0
    slope = np.diff(vals)
    return vals[:-1].astype(np.float32), slope.astype(np.float32)


def _ulps32(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    ia = a.view(np.int32).astype(np.int64)
    ib = b.view(np.int32).astype(np.int64)
    ia = np.where(ia < 0, -(ia & 0x7FFFFFFF), ia)
    ib = np.where(ib < 0, -(ib & 0x7FFFFFFF), ib)
    return np.abs(ia - ib)


def test_default_table_is_the_quadrature_path():
    assert dist.TABLE_BY_QUADRATURE is True
    for nu in (2.1, 6.37, 30.0):
        dist._normal_to_t_table.cache_clear()
        vals, slope = dist._normal_to_t_table(nu)
        q_vals, q_slope = quadrature_table(nu)
        assert vals.tobytes() == q_vals.tobytes() and slope.tobytes() == q_slope.tobytes()
    dist._normal_to_t_table.cache_clear()


def test_quadrature_table_matches_reference_table():
    """float32 ``vals`` identical at every df; ``slope`` (a float32 difference of two
    float64 quantiles that both paths place a few float64 units apart) identical but
    for a handful of entries one float32 unit in the last place away (measured: 14 of
    the 4.76 million slopes of these 581 dfs, in 7 tables)."""
    diff_slope = 0
    for nu in NUS:
        vals, slope = quadrature_table(float(nu))
        ref_vals, ref_slope = reference_table(float(nu))
        assert vals.tobytes() == ref_vals.tobytes(), f"reference table vals nu={nu}"
        d = slope != ref_slope
        if d.any():
            assert _ulps32(slope[d], ref_slope[d]).max() == 1, f"reference slope nu={nu}"
            diff_slope += int(d.sum())
    assert diff_slope <= 30, diff_slope


def test_quadrature_quantiles_match_scipy():
    """float64 quantiles within 2e-13 of scipy.special.stdtrit(nu, scipy.special.ndtr(x))
    (the bound the one-df solver is held to on this grid, test_special.py), or no
    further from it than the one-df solver itself."""
    x = dist._table_nodes()
    p_scipy = sc.ndtr(x)
    for nu in list(NUS[::5]) + [300.0, 500.0]:          # (fits allow df up to 500)
        ours = dist._lower_table_quantiles(float(nu), True)
        old = dist._lower_table_quantiles(float(nu), False)
        ref = sc.stdtrit(float(nu), p_scipy)
        assert ours[-1] == 0.0 and ref[-1] == 0.0
        err = np.abs(ours[:-1] - ref[:-1])
        tol = np.maximum(2e-13 * np.abs(ref[:-1]), 1.5 * np.abs(old[:-1] - ref[:-1]))
        assert np.all(err <= tol), f"scipy.special.stdtrit nu={nu}"
        assert np.all(np.diff(ours) > 0.0), nu


def test_quadrature_grid_checks_its_nodes():
    x = dist._table_nodes()
    prep = dist._table_probabilities()
    with pytest.raises(ValueError):
        special.t_quantiles_normal_grid(6.0, x[:-1], prep)
    with pytest.raises(ValueError):
        special.t_quantiles_normal_grid(0.0, x, prep)
    with pytest.raises(ValueError):             # nodes too far apart for the starts
        xs = np.linspace(-3.0, 0.0, 65)
        special.t_quantiles_normal_grid(4.5, xs, special.QuantileProbabilities(special.ndtr(xs)))
    # another grid (1/256 apart, the widest allowed): still the t quantiles
    # (scipy.special.stdtrit as the reference)
    xs = np.linspace(-3.0, 0.0, 769)
    for nu in (2.1, 4.5, 30.0):
        ours = special.t_quantiles_normal_grid(
            nu, xs, special.QuantileProbabilities(special.ndtr(xs)))
        assert np.allclose(ours, sc.stdtrit(nu, sc.ndtr(xs)), rtol=2e-13, atol=1e-300), nu


def test_tail_distribution_function_matches_scipy():
    """The tail anchors' distribution function by quadrature and the density's
    large-|t| series (``special._t_tail_cdf``, used up to df 20) against
    scipy.special.stdtr, from the 1 % quantile out to the 1e-16 one."""
    for nu in (2.1, 2.5, 3.0, 4.0, 5.3, 6.37, 8.0, 12.0, 16.0, 20.0):
        a = 0.5 * nu
        log_c = -(math.lgamma(a) + math.lgamma(0.5) - math.lgamma(a + 0.5)) - 0.5 * math.log(nu)
        t = sc.stdtrit(nu, np.geomspace(1e-16, 0.01, 300))
        ours = special._t_tail_cdf(t, nu, log_c)
        assert np.allclose(ours, sc.stdtr(nu, t), rtol=2e-14, atol=0), \
            f"scipy.special.stdtr nu={nu}"


def test_quantile_grid_of_one_df_matches_general_solver(monkeypatch):
    """std_t_quantile_grid by stdtrit_one_df (QUANTILE_GRID_ONE_DF) against the
    general solver stdtrit (the default) and scipy.special.stdtrit."""
    from optbench.volatility import forecast as fc

    assert fc.QUANTILE_GRID_ONE_DF is True
    for n in (256, 2000, 7):
        p = (np.arange(n) + 0.5) / n
        for nu in (2.1, 4.6, 6.37, 8.3, 30.0, 200.0):
            monkeypatch.setattr(fc, "QUANTILE_GRID_ONE_DF", False)
            general = fc.std_t_quantile_grid(nu, n)
            monkeypatch.setattr(fc, "QUANTILE_GRID_ONE_DF", True)
            one = fc.std_t_quantile_grid(nu, n)
            assert one.shape == general.shape == (n,)
            tol = 2e-14 if nu <= 100 else 2e-13         # as in test_special.py
            assert np.allclose(one, general, rtol=tol, atol=0), f"optbench stdtrit nu={nu}"
            ref = sc.stdtrit(nu, p) * np.sqrt((nu - 2.0) / nu)
            assert np.allclose(one, ref, rtol=1e-12, atol=0), f"scipy.special.stdtrit nu={nu}"
        # an array of df: one grid per row, by the general solver
        rows = fc.std_t_quantile_grid(np.array([4.6, 8.3]), n)
        monkeypatch.setattr(fc, "QUANTILE_GRID_ONE_DF", False)
        assert rows.tobytes() == fc.std_t_quantile_grid(np.array([4.6, 8.3]), n).tobytes()
