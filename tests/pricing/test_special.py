"""optbench.pricing.special against scipy.special (the reference library) on wide
grids, and the demo comparison and hedge unchanged when scipy.special's compiled
functions are swapped back in.

Sources of the approximations: W. J. Cody, Math. Comp. 23 (1969) 631-637 (erf, erfc,
erfcx); M. J. Wichura, Applied Statistics 37 (1988) 477-484, AS 241 (normal
quantile); Abramowitz & Stegun 6.3.5/6.3.18 (digamma). Reference values:
scipy.special (cephes / Faddeeva C code).
"""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import scipy.special as sc

from optbench.pricing import special

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "chains" / "ZPHX"

X_CORE = np.concatenate([np.linspace(-2.0, 2.0, 240_001),
                         -np.geomspace(1e-300, 2.0, 5_001), np.geomspace(1e-300, 2.0, 5_001),
                         [0.0, 0.46875, -0.46875]])
X_WIDE = np.concatenate([np.linspace(-40.0, 40.0, 400_001), -np.geomspace(1e-300, 1e6, 5_001),
                         np.geomspace(1e-300, 1e6, 5_001)])


def _rel(ours, ref):
    ok = np.isfinite(ref) & (ref != 0.0)
    return np.abs(ours[ok] - ref[ok]) / np.abs(ref[ok])


@pytest.mark.parametrize("name", ["erf", "erfc", "erfcx_numpy", "ndtr_numpy"])
def test_error_functions_match_scipy(name):
    # the numpy versions themselves (erfcx and ndtr can hand over to scipy.special's
    # ufuncs, special.PREFER_COMPILED)
    ours, ref = getattr(special, name), getattr(sc, name.removesuffix("_numpy"))
    # |x| <= 2: within 2e-15 relative of scipy.special (Cody 1969 claims ~1e-16)
    assert _rel(ours(X_CORE), ref(X_CORE)).max() < 2e-15, "scipy.special." + name
    # wider: the two differ by the rounding of x^2 inside exp(-x^2), ~ eps x^2
    # (optbench splits exp(-x^2) as Cody does; scipy rounds x^2 first)
    w_ours, w_ref = ours(X_WIDE), ref(X_WIDE)
    ok = np.isfinite(w_ref) & (w_ref != 0.0)
    tol = 1e-15 * (1.0 + X_WIDE[ok] ** 2)
    assert np.all(np.abs(w_ours[ok] - w_ref[ok]) <= tol * np.abs(w_ref[ok])), name
    assert np.array_equal(np.isinf(w_ours), np.isinf(w_ref)), name
    # both flush to 0 beyond exp(-709.78) (a subnormal price means nothing)
    assert np.array_equal(w_ours == 0.0, w_ref == 0.0), name
    assert np.isnan(ours(np.nan)) and np.isnan(ours(np.array([np.nan])))[0]
    assert ours(np.inf) == ref(np.inf) and ours(-np.inf) == ref(-np.inf)


def test_shapes_and_scalars():
    a = np.linspace(-3, 3, 12).reshape(3, 4)
    assert special.ndtr_numpy(a).shape == (3, 4)
    assert isinstance(special.ndtr_numpy(0.3), np.floating)
    assert special.ndtr_numpy(0.3) == pytest.approx(sc.ndtr(0.3), rel=1e-15)
    assert special.ndtri_numpy(np.empty(0)).shape == (0,)
    assert special.erfcx_numpy(np.empty(0)).shape == (0,)


def test_compiled_functions_used_when_preferred_and_imported(monkeypatch):
    """With PREFER_COMPILED and scipy.special imported (as here) erfcx, ndtr and ndtri
    are its ufuncs; with PREFER_COMPILED off (the default), or without scipy.special,
    the numpy versions."""
    monkeypatch.setattr(special, "PREFER_COMPILED", True)
    x = np.linspace(-9.0, 9.0, 101)
    for name in ("erfcx", "ndtr"):
        assert np.array_equal(getattr(special, name)(x), getattr(sc, name)(x)), name
    p = np.linspace(0.0, 1.0, 101)
    assert np.array_equal(special.ndtri(p), sc.ndtri(p))
    monkeypatch.setattr(special, "PREFER_COMPILED", False)
    assert np.array_equal(special.ndtr(x), special.ndtr_numpy(x))
    assert np.array_equal(special.ndtri(p), special.ndtri_numpy(p))
    monkeypatch.setattr(special, "PREFER_COMPILED", True)
    monkeypatch.delitem(sys.modules, "scipy.special")
    assert np.array_equal(special.erfcx(x), special.erfcx_numpy(x))


def test_normal_quantile_matches_scipy():
    p = np.concatenate([np.linspace(0.0, 1.0, 200_001), np.geomspace(1e-300, 0.5, 20_001),
                        1.0 - np.geomspace(1e-16, 0.5, 2_001)])
    ours, ref = special.ndtri_numpy(p), sc.ndtri(p)
    # Wichura (1988) AS 241 PPND16: about 1e-16 relative
    assert _rel(ours, ref).max() < 2e-15, "scipy.special.ndtri"
    assert special.ndtri_numpy(0.0) == -np.inf and special.ndtri_numpy(1.0) == np.inf
    assert np.isnan(special.ndtri_numpy(np.array([-0.1, 1.1, np.nan]))).all()
    # round trip through optbench's own ndtr (lower half: above 0, Phi rounds to 1)
    q = np.linspace(-30, 0, 1001)
    assert np.allclose(special.ndtri_numpy(special.ndtr_numpy(q)), q, rtol=1e-12, atol=1e-12)


def test_gamma_functions_match_scipy():
    x = np.concatenate([np.linspace(0.01, 200.0, 20_001), np.geomspace(1e-3, 1e6, 2_001),
                        -np.linspace(0.05, 9.95, 100)])
    lg = special.gammaln(x)
    assert np.allclose(lg, sc.gammaln(x), rtol=1e-14, atol=1e-13), "scipy.special.gammaln"
    dg = special.digamma(x)
    assert np.allclose(dg, sc.digamma(x), rtol=1e-13, atol=1e-13), "scipy.special.digamma"
    assert special.gammaln(0.5) == pytest.approx(0.5 * np.log(np.pi), rel=1e-15)  # Gamma(1/2)=sqrt(pi)
    assert special.digamma(1.0) == pytest.approx(-0.5772156649015329, rel=1e-15)  # -Euler's gamma
    assert np.isnan(special.digamma(0.0)) and special.gammaln(0.0) == np.inf


def test_student_t_quantile_matches_scipy():
    p = np.concatenate([np.geomspace(1e-16, 0.5, 400), 1.0 - np.geomspace(1e-12, 0.5, 100),
                        np.linspace(0.01, 0.99, 99)])
    for nu in (2.05, 2.5, 3.0, 4.0, 5.7, 8.0, 12.3, 30.0, 100.0, 1000.0):
        ours, ref = special.stdtrit(nu, p), sc.stdtrit(nu, p)
        assert np.allclose(ours, ref, rtol=1e-12, atol=1e-300), f"scipy.special.stdtrit nu={nu}"
    # nu = 2 has the closed form t = (2p - 1) / sqrt(2 p (1 - p)) (well known; e.g.
    # Hill 1970, Comm. ACM 13, Algorithm 396)
    q = np.linspace(0.001, 0.999, 999)
    assert np.allclose(special.stdtrit(2.0, q), (2 * q - 1) / np.sqrt(2 * q * (1 - q)),
                       rtol=1e-13, atol=1e-15)
    # textbook table value: t_{0.975, 5} = 2.571 (any Student-t table)
    assert round(float(special.stdtrit(5.0, 0.975)), 3) == 2.571
    grid = special.stdtrit(np.array([3.0, 4.0])[:, None], np.array([0.1, 0.5, 0.9]))
    assert grid.shape == (2, 3) and np.all(grid[:, 1] == 0.0)
    assert np.allclose(grid[:, 0], -grid[:, 2], rtol=1e-14, atol=0)
    assert special.stdtrit(5.0, 0.0) == -np.inf and special.stdtrit(5.0, 1.0) == np.inf
    # the normal-to-t table of the simulation (float32): identical to scipy's
    x = np.linspace(-8.0, 0.0, 4097)
    for nu in (2.3, 6.3, 60.0):
        assert np.array_equal(special.stdtrit(nu, special.ndtr(x)).astype(np.float32),
                              sc.stdtrit(nu, sc.ndtr(x)).astype(np.float32)), nu


def test_student_t_quantile_of_one_df_matches_scipy():
    """stdtrit_one_df (Halley steps, one df for a whole array) against
    scipy.special.stdtrit, and against optbench's own stdtrit (a separate solver)."""
    p = np.concatenate([np.geomspace(1e-16, 0.5, 400), 1.0 - np.geomspace(1e-12, 0.5, 100),
                        np.linspace(0.01, 0.99, 99), [0.5]])
    for nu in (2.05, 2.3, 3.0, 4.0, 5.7, 8.0, 12.3, 30.0, 100.0, 500.0, 1000.0):
        ours, ref = special.stdtrit_one_df(nu, p), sc.stdtrit(nu, p)
        assert np.allclose(ours, ref, rtol=1e-12, atol=1e-300), f"scipy.special.stdtrit nu={nu}"
        own = special.stdtrit(nu, p)
        tol = 2e-14 if nu <= 100 else 2e-13
        assert np.allclose(ours, own, rtol=tol, atol=0), f"optbench stdtrit nu={nu}"
    # the simulation's table grid: t quantiles of normal probabilities on [-8, 0], within
    # ~1e-13 of scipy.special.stdtrit(nu, scipy.special.ndtr(x)) (scipy's own error
    # there is of that order: the two optbench solvers agree to 2e-14)
    x = np.linspace(-8.0, 0.0, 4097)
    for nu in (2.05, 2.3, 4.1, 5.7, 6.3, 8.0, 12.3, 30.0, 60.0, 100.0):
        ours, ref = special.stdtrit_one_df(nu, special.ndtr(x)), sc.stdtrit(nu, sc.ndtr(x))
        assert ours[-1] == 0.0 and ref[-1] == 0.0
        assert np.allclose(ours[:-1], ref[:-1], rtol=2e-13, atol=0), f"scipy.special.stdtrit nu={nu}"
        assert np.array_equal(ours.astype(np.float32), ref.astype(np.float32)), nu
    # nu = 2 closed form t = (2p - 1) / sqrt(2 p (1 - p)) (as above), a textbook table
    # value t_{0.975, 5} = 2.571 (any Student-t table), edges and scalars
    q = np.linspace(0.001, 0.999, 999)
    assert np.allclose(special.stdtrit_one_df(2.0, q), (2 * q - 1) / np.sqrt(2 * q * (1 - q)),
                       rtol=1e-13, atol=1e-15)
    assert round(float(special.stdtrit_one_df(5.0, 0.975)), 3) == 2.571
    assert np.ndim(special.stdtrit_one_df(5.0, 0.975)) == 0
    edges = special.stdtrit_one_df(5.0, np.array([0.0, 1.0, 0.5, -0.1, 1.1, np.nan]))
    assert edges[0] == -np.inf and edges[1] == np.inf and edges[2] == 0.0
    assert np.isnan(edges[3:]).all()
    assert np.isnan(special.stdtrit_one_df(0.0, [0.2, 0.7])).all()


def test_student_t_quantile_of_prepared_probabilities():
    """Probabilities made ready once (QuantileProbabilities: the simulation's table
    grid, edges, both tails) give stdtrit_one_df's floats for the plain array, bit for
    bit, at every df; and they agree with scipy.special.stdtrit read as an array."""
    p = np.concatenate([special.ndtr(np.linspace(-8.0, 0.0, 4097)), [0.0, 1.0, -0.1, np.nan],
                        1.0 - np.geomspace(1e-12, 0.5, 50)])
    prep = special.QuantileProbabilities(p)
    for nu in (0.0, 2.05, 3.0, 5.7, 30.0, 500.0):
        assert special.stdtrit_one_df(nu, prep).tobytes() == \
            special.stdtrit_one_df(nu, p).tobytes(), nu
    one = special.QuantileProbabilities(0.975)
    assert special.stdtrit_one_df(5.0, one) == special.stdtrit_one_df(5.0, 0.975)
    assert np.ndim(special.stdtrit_one_df(5.0, one)) == 0
    grid = special.QuantileProbabilities(p[:4097])
    assert np.allclose(sc.stdtrit(5.7, grid)[:-1], special.stdtrit_one_df(5.7, grid)[:-1],
                       rtol=2e-13, atol=0), "scipy.special.stdtrit"


_SWAP = """
import sys, scipy.special as sc
import optbench.pricing.bsm, optbench.pricing.greeks, optbench.pricing.lets_be_rational
import optbench.analysis.smile, optbench.volatility.distributions, optbench.volatility.forecast
import optbench.pricing.special
for mod in (optbench.pricing.special, optbench.pricing.bsm, optbench.pricing.greeks, optbench.pricing.lets_be_rational,
            optbench.analysis.smile, optbench.volatility.distributions,
            optbench.volatility.forecast):
    for name in ("ndtr", "ndtri", "erfcx", "gammaln", "digamma", "stdtrit"):
        if hasattr(mod, name):
            setattr(mod, name, getattr(sc, name))
    if hasattr(mod, "stdtrit_one_df"):
        setattr(mod, "stdtrit_one_df", sc.stdtrit)
from optbench.cli import main
sys.exit(main(sys.argv[1:]))
"""


def test_numpy_versions_by_default_even_with_scipy_imported():
    """A process's numbers must not depend on what else it imported: with scipy.special
    imported and nothing set, ndtr is the numpy version (bit for bit)."""
    code = ("import numpy as np, scipy.special as sc; from optbench.pricing import special; "
            "x = np.linspace(-9, 9, 10001); "
            "print(special.PREFER_COMPILED, np.array_equal(special.ndtr(x), special.ndtr_numpy(x)))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, cwd=ROOT)
    assert out.stdout.split() == ["False", "True"]


def _run(args, swap):
    code = _SWAP if swap else "import sys; from optbench.cli import main; sys.exit(main(sys.argv[1:]))"
    out = subprocess.run([sys.executable, "-c", code, *args], capture_output=True, text=True,
                         check=True, cwd=ROOT)
    return json.loads(out.stdout)


def _assert_close(a, b, path=""):
    if isinstance(a, dict):
        assert set(a) == set(b), path
        for k in a:
            _assert_close(a[k], b[k], f"{path}/{k}")
    elif isinstance(a, list):
        assert len(a) == len(b), path
        for i, (u, v) in enumerate(zip(a, b)):
            _assert_close(u, v, f"{path}[{i}]")
    elif isinstance(a, float) and isinstance(b, float):
        # closed-form values agree to ~1e-15; values that come out of iterative
        # solvers (SVI least squares, numerical-Hessian standard errors, and what is
        # read off the fitted smile) stop at solver tolerances and move by up to
        # ~1e-8 relative when Phi changes in its last bit, so 1e-7 is the bound
        assert a == pytest.approx(b, rel=1e-7, abs=1e-12), path
    else:
        assert a == b, path


@pytest.mark.parametrize("args", [
    ["compare", str(DEMO), "--format", "json"],
    ["hedge", str(DEMO), "--portfolio", "1000000", "--days", "91", "--paths", "2000",
     "--format", "json"],
], ids=["compare", "hedge"])
def test_demo_numbers_unchanged_with_scipy_special(args):
    """The demo's comparison and hedge with scipy.special's compiled functions swapped
    back in agree with optbench's own (every number in the JSON, see the tolerance)."""
    _assert_close(_run(args, swap=False), _run(args, swap=True))


def test_incomplete_beta_fraction_with_one_a_b_is_the_general_one():
    """The continued fraction of the incomplete beta function (DLMF 8.17.22, modified
    Lentz) where every element has the same (a, b) gives the floats of the general
    elementwise form, bit for bit (each element leaves as it converges, so an
    element's value does not depend on the others: one odd element added forces the
    general form); checked against scipy.special.betainc through I_x(a, b)."""
    g = np.random.default_rng(4)
    for a, b in ((1.025, 0.5), (3.0, 0.5), (0.5, 2.85), (15.0, 0.5), (250.0, 0.5)):
        x = g.uniform(0.0, 1.0, 400) * (a + 1.0) / (a + b + 2.0)
        fast = special._betacf(np.full(x.size, a), np.full(x.size, b), x)
        general = special._betacf(np.r_[np.full(x.size, a), a + 1.0],
                                  np.r_[np.full(x.size, b), b], np.r_[x, 0.1])[:-1]
        assert fast.tobytes() == general.tobytes(), (a, b)
        front = np.exp(a * np.log(x) + b * np.log1p(-x) - special.gammaln(a)
                       - special.gammaln(b) + special.gammaln(a + b))
        assert np.allclose(front * fast / a, sc.betainc(a, b, x), rtol=1e-12, atol=1e-300)
