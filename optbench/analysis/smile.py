"""Smile per expiry: a raw SVI fit of total implied variance in log-moneyness, and
the smile's standard points (fixed moneyness, fixed delta, risk reversal, butterfly).

Notes
-----
Raw SVI (Gatheral 2004) writes the total implied variance :math:`w = \\sigma_{imp}^2 t`
as a function of log-moneyness :math:`k = \\ln(K/F)`:

.. math::

    w(k) = a + b\\,\\bigl[\\rho\\,(k - m) + \\sqrt{(k - m)^2 + \\sigma^2}\\bigr],

with :math:`b \\ge 0`, :math:`|\\rho| < 1`, :math:`\\sigma > 0` and
:math:`a + b\\sigma\\sqrt{1-\\rho^2} \\ge 0` (the smallest total variance is not
negative). The fit is the quasi-explicit method of De Marco & Martini (2009): for
fixed :math:`(m, \\sigma)`, put
:math:`y = (k - m)/\\sigma`; then :math:`w = a + d\\,y + c\\sqrt{y^2 + 1}` with
:math:`c = b\\sigma`, :math:`d = \\rho b \\sigma` is linear in :math:`(a, d, c)` and
the constraints :math:`c \\ge 0`, :math:`|d| \\le c` become the box
:math:`u = c + d \\ge 0`, :math:`v = c - d \\ge 0`. The inner weighted linear least
squares is solved exactly (every active set of the box is tried in closed form,
batched in numpy over candidate :math:`(m, \\sigma)`). The outer problem in
:math:`(m, \\sigma)` is searched on a coarse grid; from the three best grid points
that lie in distinct regions, a finer grid and then a variable-projection
Levenberg-Marquardt polish in :math:`(m, \\ln\\sigma)` (Golub & Pereyra 1973,
Kaufman 1975: Gauss-Newton steps of the reduced problem, each trial point scored by
the exact inner solve) refine the fit, all starts and several damping factors in
one batched step. The search is deterministic and needs no starting guess.
:func:`fit_svi_many` runs the search of several expiries together (one batch of
closed forms per grid, one polish loop for every expiry's starts) with each expiry's
sums formed exactly as alone, so its fits equal :func:`fit_svi`'s bit for bit.

References: J. Gatheral, "A parsimonious arbitrage-free implied volatility
parameterization with application to the valuation of volatility derivatives",
Global Derivatives, Madrid, 2004; J. Gatheral, *The Volatility Surface*, Wiley 2006,
ch. 3; S. De Marco and C. Martini, "Quasi-explicit calibration of Gatheral's SVI
model", 2009; J. Gatheral and A. Jacquier, "Arbitrage-free SVI
volatility surfaces", Quantitative Finance 14 (2014); G. H. Golub and V. Pereyra,
"The differentiation of pseudo-inverses and nonlinear least squares problems whose
variables separate", SIAM J. Numer. Anal. 10 (1973); L. Kaufman, "A variable
projection method for solving separable nonlinear least squares problems", BIT 15
(1975); D. W. Marquardt, "An algorithm for least-squares estimation of nonlinear
parameters", J. SIAM 11 (1963).
"""
from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np
from optbench.pricing.special import ndtr, ndtri

from optbench.errors import InputError

#: fixed moneyness points K/F of :func:`smile_points`
MONEYNESS = (0.90, 0.95, 1.00, 1.05, 1.10)
#: absolute delta of the wing points of :func:`smile_points`
WING_DELTA = 0.25

_GRID = ((21, 17), (11, 9))   # (m, log sigma) points: coarse grid, zoom around a start
_STARTS = 3                    # local minima of the coarse grid polished
_SIGMA_MIN = 1e-4     # smallest SVI sigma (log-moneyness units)
_SIGMA_GRID = (0.01, 2.0)  # coarse-grid sigma range, as fractions of the k range
_CRAWL = 0.1         # a start behind a finished one stops when a step gains less


@dataclass(frozen=True)
class SviFit:
    """A raw SVI smile for one expiry.

    Attributes
    ----------
    a, b, rho, m, sigma : float
        Raw SVI parameters; ``w(k) = a + b*(rho*(k - m) + sqrt((k - m)**2 + sigma**2))``
        with ``w`` total implied variance (decimal vol squared times years) and
        ``k = ln(K/F)``.
    t : float
        Time to expiry in years (calendar days / 365).
    rmse_iv : float
        Root mean square, weighted like the fit, of the fitted minus quoted implied
        vol, in decimal vol (0.001 = 0.1 vol point).
    n_points : int
        Quotes used in the fit (finite inputs with positive weight).
    converged : bool
        True for a full SVI fit whose parameters are not degenerate (see
        :func:`fit_svi`); False for the simpler fits of 1 to 4 points.
    message : str
        What was fitted, and any caveat.
    method : str
        ``"svi"`` (full fit), ``"svi-fixed-m-sigma"`` (3 or 4 points: m and sigma
        fixed, the linear part fitted) or ``"flat"`` (1 or 2 points: flat total
        variance, b = 0).
    """

    a: float
    b: float
    rho: float
    m: float
    sigma: float
    t: float
    rmse_iv: float
    n_points: int
    converged: bool
    message: str
    method: str = "svi"

    def total_variance(self, k: np.ndarray | float) -> np.ndarray:
        """Total implied variance ``w(k)`` (decimal vol squared times years) at
        log-moneyness ``k = ln(K/F)``; broadcasts."""
        k = np.asarray(k, dtype=float)
        x = k - self.m
        return self.a + self.b * (self.rho * x + np.sqrt(x * x + self.sigma ** 2))

    def iv(self, k: np.ndarray | float) -> np.ndarray:
        """Implied volatility ``sqrt(w(k) / t)`` (annualised decimal) at
        log-moneyness ``k``; NaN where the fitted total variance is negative."""
        w = self.total_variance(k)
        with np.errstate(invalid="ignore"):
            return np.sqrt(np.where(w >= 0, w, np.nan) / self.t)

    def density_g(self, k: np.ndarray | float) -> np.ndarray:
        """Durrleman's butterfly function g(k) of the fitted smile; the smile has no
        butterfly arbitrage where g(k) >= 0.

        Notes
        -----
        :math:`g(k) = \\bigl(1 - \\frac{k w'}{2w}\\bigr)^2
        - \\frac{w'^2}{4}\\bigl(\\frac1w + \\frac14\\bigr) + \\frac{w''}{2}`, with, for raw
        SVI, :math:`w' = b(\\rho + x/R)`, :math:`w'' = b\\sigma^2/R^3`,
        :math:`x = k - m`, :math:`R = \\sqrt{x^2 + \\sigma^2}`. The risk-neutral density
        of :math:`k` is :math:`g(k)\\,e^{-d_2^2/2}/\\sqrt{2\\pi w}` with
        :math:`d_2 = -k/\\sqrt w - \\sqrt w/2` (Gatheral & Jacquier 2014, Lemma 2.2;
        Breeden & Litzenberger 1978).
        """
        k = np.asarray(k, dtype=float)
        x = k - self.m
        R = np.sqrt(x * x + self.sigma ** 2)
        w = self.a + self.b * (self.rho * x + R)
        w1 = self.b * (self.rho + x / R)
        w2 = self.b * self.sigma ** 2 / R ** 3
        with np.errstate(divide="ignore", invalid="ignore"):
            return (1 - k * w1 / (2 * w)) ** 2 - w1 * w1 / 4 * (1 / w + 0.25) + w2 / 2

    @property
    def min_total_variance(self) -> float:
        """Smallest total variance of the smile, ``a + b*sigma*sqrt(1 - rho**2)``."""
        return float(self.a + self.b * self.sigma * np.sqrt(max(1.0 - self.rho ** 2, 0.0)))

    def to_dict(self) -> dict:
        return {"a": self.a, "b": self.b, "rho": self.rho, "m": self.m,
                "sigma": self.sigma, "t": self.t, "rmse_iv": self.rmse_iv,
                "n_points": self.n_points, "converged": self.converged,
                "message": self.message, "method": self.method}


# ---------------------------------------------------------------------------
# inner problem: exact box-constrained weighted least squares, batched
# ---------------------------------------------------------------------------

#: free coefficients (a, u, v) of each active set tried by :func:`_inner`; the last
#: row is the all-zero fallback
_FREE = np.array([[1, 1, 1], [1, 0, 1], [1, 1, 0], [1, 0, 0],
                  [0, 1, 1], [0, 1, 0], [0, 0, 1], [0, 0, 0]], dtype=float)


#: elements per block of the (candidates, quotes) arrays in :func:`_moments`: blocks
#: of at most ~96 kB are reused by the allocator instead of being mapped afresh
_BLOCK = 12_000


def _basis(k: np.ndarray, m: np.ndarray, s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``P = (r + y)/2`` and ``Q = (r - y)/2`` with ``y = (k - m)/s``,
    ``r = sqrt(y**2 + 1)``; shape (p, n)."""
    P, Q = _basis_pq(k, m, s)
    return P, Q


def _basis_pq(k: np.ndarray, m: np.ndarray, s: np.ndarray) -> np.ndarray:
    """:func:`_basis` as one array of shape (2, p, n): ``P`` then ``Q``."""
    PQ = np.empty((2, m.size, k.size))
    y = np.subtract(k[None, :], m[:, None], out=PQ[1])
    y /= s[:, None]
    return _pq_from_y(PQ)


def _pq_from_y(PQ: np.ndarray) -> np.ndarray:
    """``P = (sqrt(y^2 + 1) + y) / 2`` and ``Q = sqrt(y^2 + 1) - P`` in place, from
    ``y = (k - m) / s`` held in ``PQ[1]``; returns ``PQ`` (``P`` then ``Q``)."""
    P, Q = PQ
    r = np.multiply(Q, Q)
    r += 1.0
    np.sqrt(r, out=r)
    np.add(r, Q, out=P)
    P *= 0.5
    np.subtract(r, P, out=Q)
    return PQ


def _moments(k: np.ndarray, W2: np.ndarray, m: np.ndarray, s: np.ndarray):
    """Weighted sums of the inner least squares for each candidate (m, s):
    ``P'wt, P'(wt w), Q'wt, Q'(wt w), (P*P)'wt, (Q*Q)'wt``, each of shape (p,), and
    ``(P, Q)`` when all candidates fit in one block (else None). Computed in blocks
    of candidates, ``P`` and ``Q`` of a block side by side (numpy multiplies them
    one after the other, as two products would)."""
    p, n = m.size, k.size
    rows = max(1, _BLOCK // max(n, 1))
    wt = W2[:, 0]
    out = np.empty((6, p))
    PQ = None
    for i in range(0, p, rows):
        sl = slice(i, min(i + rows, p))
        PQ_b = _basis_pq(k, m[sl], s[sl])                          # (2, rows, n)
        out[0:4, sl] = (PQ_b @ W2).transpose(0, 2, 1).reshape(4, -1)
        if rows >= p:           # one block: P and Q are returned, squares apart
            PQ = (PQ_b[0], PQ_b[1])
            sq = np.multiply(PQ_b, PQ_b)
        else:
            sq = np.multiply(PQ_b, PQ_b, out=PQ_b)
        out[4:6, sl] = sq @ wt
    return (*out, PQ)


def _inner(k: np.ndarray, w: np.ndarray, wt: np.ndarray, m: np.ndarray,
           s: np.ndarray, exact: bool = False,
           ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    r"""Best (a, u, v) and weighted squared error for each candidate (m, s).

    ``k, w, wt`` have shape (n,); ``m, s`` shape (p,). Returns coefficients of shape
    (p, 3), objective of shape (p,) and the index of the active set taken (a row of
    ``_FREE``).

    With :math:`y = (k - m)/s`, :math:`r = \sqrt{y^2 + 1}`, the model is
    :math:`w = a + u P + v Q` with :math:`P = (r + y)/2`, :math:`Q = (r - y)/2`
    (so :math:`u = c + d`, :math:`v = c - d` and :math:`PQ = 1/4`). Every active
    set of the constraints :math:`u \ge 0`, :math:`v \ge 0` is solved in closed
    form (Cramer's rule on the normal equations), with ``a`` free (kept where
    :math:`a + \sqrt{uv} \ge 0`, i.e. the minimum variance is not negative) and with
    ``a = 0`` (a sufficient condition); the feasible solution of least error is kept.
    For a convex quadratic this is the exact constrained minimum over the sets tried.
    The seven sets are evaluated together as (7, p) arrays. The objective is the
    expanded quadratic :math:`\|w\|^2 - 2c^\top h + c^\top G c`; with ``exact`` it
    is recomputed from the residuals of the set taken (full precision near a zero
    residual, for the polish).
    """
    wtw = wt * w
    W2 = np.stack([wt, wtw], axis=1)                                # (n, 2)
    g01, h1, g02, h2, g11, g22, PQ = _moments(k, W2, m, s)
    g00 = float(wt.sum())
    h0 = float(wtw.sum())
    ww = float(wtw @ w)
    best, best_obj, sets = _closed_forms(g00, h0, ww, g01, h1, g02, h2, g11, g22)
    if exact:
        P, Q = PQ if PQ is not None else _basis(k, m, s)
        e = best[:, 0:1] + best[:, 1:2] * P + best[:, 2:3] * Q - w
        best_obj = (e * e) @ wt
    return best, np.maximum(best_obj, 0.0), sets


def _closed_forms(g00, h0, ww, g01, h1, g02, h2, g11, g22):
    """The seven active sets of :func:`_inner` in closed form from the weighted sums
    (each of shape (p,); ``g00 = sum wt``, ``h0 = sum wt w`` and ``ww = sum wt w^2``
    numbers, or arrays of shape (p,) when the candidates come from several fits):
    the best feasible (a, u, v), its objective (the expanded quadratic) and set."""
    g12 = 0.25 * g00
    p = g01.size
    tiny = 1e-300
    A = np.zeros((7, p))
    U = np.zeros((7, p))
    V = np.zeros((7, p))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        # (a, u, v) all free: Cramer's rule
        c00 = g11 * g22 - g12 * g12
        c01 = g02 * g12 - g01 * g22
        c02 = g01 * g12 - g02 * g11
        c11 = g00 * g22 - g02 * g02
        c12 = g01 * g02 - g00 * g12
        c22 = g00 * g11 - g01 * g01
        det = g00 * c00 + g01 * c01 + g02 * c02
        det = np.where(np.abs(det) > tiny, det, np.nan)
        A[0] = (c00 * h0 + c01 * h1 + c02 * h2) / det
        U[0] = (c01 * h0 + c11 * h1 + c12 * h2) / det
        V[0] = (c02 * h0 + c12 * h1 + c22 * h2) / det

        def pair(gii, gij, gjj, hi, hj):
            d = gii * gjj - gij * gij
            d = np.where(np.abs(d) > tiny, d, np.nan)
            return (gjj * hi - gij * hj) / d, (gii * hj - gij * hi) / d

        A[1], V[1] = pair(g00, g02, g22, h0, h2)          # u = 0
        A[2], U[2] = pair(g00, g01, g11, h0, h1)          # v = 0
        A[3] = h0 / g00                                   # u = v = 0
        U[4], V[4] = pair(g11, g12, g22, h1, h2)          # a = 0
        U[5] = h1 / g11                                   # a = v = 0
        V[6] = h2 / g22                                   # a = u = 0
        # the full quadratic (not ww - c'h): exact for any c, also where the normal
        # equations are ill-conditioned (sigma large against the quotes' spread)
        obj = (ww - 2.0 * (A * h0 + U * h1 + V * h2)
               + A * A * g00 + U * U * g11 + V * V * g22
               + 2.0 * (A * U * g01 + A * V * g02 + U * V * g12))
        ok = (U >= 0) & (V >= 0) & (A + np.sqrt(np.maximum(U * V, 0.0)) >= 0)
    obj = np.where(ok & np.isfinite(obj), obj, np.inf)
    sets = np.argmin(obj, axis=0)
    cols = np.arange(p)
    best_obj = obj[sets, cols]
    best = np.stack([A[sets, cols], U[sets, cols], V[sets, cols]], axis=1)
    flat = ~np.isfinite(best_obj)
    if np.any(flat):
        # a = u = v = 0 is always feasible
        best[flat] = 0.0
        best_obj[flat] = np.broadcast_to(ww, (p,))[flat]
        sets[flat] = 7
    return best, best_obj, sets


def _raw_params(coef: np.ndarray, m: float, s: float) -> tuple[float, float, float]:
    a, u, v = (float(x) for x in coef)
    c = 0.5 * (u + v)
    d = 0.5 * (u - v)
    b = c / s
    rho = d / c if c > 0 else 0.0
    return a, b, float(np.clip(rho, -1.0, 1.0))


#: for each active set of :func:`_inner` (rows of ``_FREE[:7]``), which entries of
#: the 3 x 3 normal equations are kept (the others become an identity row/column)
_KEEP7 = (_FREE[:7, :, None] * _FREE[:7, None, :]).astype(bool)
_EYE3 = np.eye(3)


def _inner_few(k: np.ndarray, w: np.ndarray, wt: np.ndarray, m: np.ndarray,
               s: np.ndarray) -> tuple[np.ndarray, ...]:
    """:func:`_inner` for a few candidates (the polish's trial points), with the
    seven active sets solved by one batched ``numpy.linalg.solve`` and the
    objective taken from the residuals. Also returns the basis ``P, Q``."""
    P, Q = _basis(k, m, s)
    wtw = wt * w
    W2 = np.stack([wt, wtw], axis=1)
    gP, gQ = P @ W2, Q @ W2
    p = m.size
    g00 = float(wt.sum())
    G = np.empty((p, 3, 3))
    G[:, 0, 0] = g00
    G[:, 0, 1] = G[:, 1, 0] = gP[:, 0]
    G[:, 0, 2] = G[:, 2, 0] = gQ[:, 0]
    G[:, 1, 2] = G[:, 2, 1] = 0.25 * g00
    G[:, 1, 1] = (P * P) @ wt
    G[:, 2, 2] = (Q * Q) @ wt
    h = np.empty((p, 3))
    h[:, 0] = float(wtw.sum())
    h[:, 1] = gP[:, 1]
    h[:, 2] = gQ[:, 1]
    G7 = np.where(_KEEP7[:, None], G[None], _EYE3)                  # (7, p, 3, 3)
    H7 = h[None] * _FREE[:7, None, :]
    C = np.linalg.solve(G7, H7[..., None])[..., 0]                  # (7, p, 3)
    obj = (float(wtw @ w) - 2.0 * (C * h).sum(-1)
           + ((C[..., None, :] @ G)[..., 0, :] * C).sum(-1))
    with np.errstate(invalid="ignore"):
        ok = (C[..., 1:].min(-1) >= 0) & (
            C[..., 0] + np.sqrt(np.maximum(C[..., 1] * C[..., 2], 0.0)) >= 0)
    obj = np.where(ok & np.isfinite(obj), obj, np.inf)
    sets = np.argmin(obj, axis=0)
    cols = np.arange(p)
    best = C[sets, cols]
    flat = ~np.isfinite(obj[sets, cols])
    if np.any(flat):
        best[flat] = 0.0
        sets[flat] = 7
    e = best[:, 0:1] + best[:, 1:2] * P + best[:, 2:3] * Q - w
    return best, (e * e) @ wt, sets, P, Q


def _inner_exact(k, w, wt, m, s):
    """:func:`_inner_few`, or the closed forms of :func:`_inner` (with the objective
    from the residuals) should a set's normal equations be exactly singular."""
    try:
        return _inner_few(k, w, wt, m, s)
    except np.linalg.LinAlgError:       # an exactly singular set: the closed forms
        coef, obj, sets = _inner(k, w, wt, m, s, exact=True)
        return (coef, obj, sets) + _basis(k, m, s)


#: damping factors tried together in each polish step (times the start's lambda)
_DAMPING = 10.0 ** np.array([-3.0, -1.0, 1.0, 3.0])


def _polish(k: np.ndarray, w: np.ndarray, wt: np.ndarray, m0: np.ndarray,
            ls0: np.ndarray, bounds: tuple[float, float, float, float],
            max_iter: int = 20) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    r"""Levenberg-Marquardt in (m, ln sigma) with the linear part solved exactly,
    batched over starts and damping factors (one smile; :func:`_polish_many` takes
    the same steps for several smiles at once).

    ``m0, ls0`` (shape (S,)) are the starts; ``bounds`` = (m_min, m_max, ln sigma
    min, ln sigma max) clip the trial points. Returns m, ln sigma, coefficients
    (a, u, v) of shape (S, 3) and objectives, each start's best point.

    Notes
    -----
    Variable projection (Golub & Pereyra 1973) with Kaufman's (1975) Jacobian: at
    the current :math:`(m, \ln\sigma)` the linear coefficients are optimal, so the
    Gauss-Newton system of all five parameters,
    :math:`J = \sqrt{\omega}\,[1, P, Q, \partial w/\partial m, \partial w/\partial\ln\sigma]`
    with :math:`\partial w/\partial y = (uP - vQ)/r`, :math:`\partial y/\partial m = -1/\sigma`,
    :math:`\partial y/\partial\ln\sigma = -y` (columns of coefficients held at 0 by
    the active set dropped), gives the projected step in :math:`(m, \ln\sigma)`.
    Each trial point is scored by the exact inner solve, so a step is kept only
    when the reduced objective falls, and the constraints hold by construction.
    Marquardt's scaling ``diag(J'J)``; every start tries the damping factors
    ``_DAMPING`` at once (one batched solve and one batched inner solve per step)
    and keeps the best. A start stops when its relative improvement is below 1e-10
    (or below 1e-7 and a hundredth of the one before: geometric convergence then
    leaves less than about 1e-9 to gain), its step is negligible, or a round of steps
    fails to improve; once one start has
    stopped, a start still behind it that gained less than ``_CRAWL`` (10 %) on its
    last step stops too (it is creeping towards the same or a worse point). At most
    ``max_iter`` rounds: a nearly straight smile has its infimum at the edge of SVI's
    parameter space (sigma -> 0 or m far outside the quotes) and would creep on; such
    fits are flagged degenerate by :func:`fit_svi`.
    """
    sw = np.sqrt(wt)
    m_min, m_max, ls_min, ls_max = bounds
    m, ls = m0.astype(float).copy(), ls0.astype(float).copy()
    coef, obj, sets, P, Q = _inner_exact(k, w, wt, m, np.exp(ls))
    S = m.size
    L = _DAMPING.size
    lam = np.full(S, 1e-3)
    live = np.ones(S, dtype=bool)
    eye = np.eye(5)
    rel = np.zeros(S)
    for _ in range(max_iter):
        ia = np.flatnonzero(live)
        if ia.size == 0:
            break
        p = ia.size
        mm, ll = m[ia], ls[ia]
        J, e = _residuals_jacobian(P[ia], Q[ia], coef[ia], _FREE[sets[ia]], sw, w, ll)
        Jt = J.transpose(0, 2, 1)
        A = Jt @ J                                                  # (p, 5, 5)
        g = Jt @ e[:, :, None]                                      # (p, 5, 1)
        d = np.diagonal(A, axis1=1, axis2=2)
        d = np.where(d > 0, d, 1.0)
        lams = lam[ia][:, None] * _DAMPING                           # (p, L)
        Mx = A[:, None] + (lams[:, :, None, None] * eye) * d[:, None, None, :]
        try:
            step = np.linalg.solve(Mx, -np.repeat(g[:, None], L, axis=1))[..., 0]
        except np.linalg.LinAlgError:
            lam[ia] *= 1e4
            live[ia] = False
            continue
        mt = np.clip(mm[:, None] + step[..., 3], m_min, m_max).ravel()
        lt = np.clip(ll[:, None] + step[..., 4], ls_min, ls_max).ravel()
        ct, ot, st, Pt, Qt = _inner_exact(k, w, wt, mt, np.exp(lt))
        ib, pb = _take_best_trials(ot, ia, L, mt, lt, m, ls, obj, lam, lams, live, rel)
        if ib.size:
            coef[ib], sets[ib] = ct[pb], st[pb]
            P[ib], Q[ib] = Pt[pb], Qt[pb]
        # a start still behind one that has finished and gaining little per step
        # is heading for the same or a worse point: stop it
        fin = ~live
        if fin.any():
            live &= ~((obj > obj[fin].min() * (1 + 1e-9)) & (rel < _CRAWL))
    return m, ls, coef, obj


def _residuals_jacobian(P, Q, coef, free, sw, w, ls):
    """Weighted residuals ``e`` (p, n) and the Jacobian ``J`` (p, n, 5) of the
    polish (:func:`_polish`) at points with basis rows ``P, Q`` (p, n), inner
    coefficients ``coef`` and active sets' ``free`` columns (p, 3), ln sigma ``ls``;
    ``sw``, ``w`` the square roots of the weights and the total variances, (n,) or
    (p, n)."""
    y, r = P - Q, P + Q
    e = sw * (coef[:, 0:1] + coef[:, 1:2] * P + coef[:, 2:3] * Q - w)
    dwdy = (coef[:, 1:2] * P - coef[:, 2:3] * Q) / r
    dwdy *= sw
    J = np.empty((*P.shape, 5))
    J[..., 0] = free[:, 0:1] * sw
    J[..., 1] = free[:, 1:2] * P * sw
    J[..., 2] = free[:, 2:3] * Q * sw
    J[..., 3] = dwdy * (-1.0 / np.exp(ls))[:, None]
    J[..., 4] = -dwdy * y
    return J, e


def _take_best_trials(ot, ia, L, mt, lt, m, ls, obj, lam, lams, live, rel):
    """One polish round's outcome for the live starts ``ia`` (shared by
    :func:`_polish` and :func:`_polish_many`): each start's best trial point (``ot``
    the trial objectives, ``L`` per start, at ``mt, lt``) replaces the start where
    it is lower; ``m, ls, obj, lam, live, rel`` are updated in place (the stop rule
    of :func:`_polish`). Returns the improved starts and the trials they took."""
    p = ia.size
    ot = np.where(np.isfinite(ot), ot, np.inf).reshape(p, L)
    pick = np.argmin(ot, axis=1)
    pick += np.arange(0, p * L, L)
    o_new = ot.ravel()[pick]
    o_old = obj[ia]
    better = o_new < o_old
    ib, pb = ia[better], pick[better]
    if ib.size:
        o_prev, o_new = o_old[better], o_new[better]
        gain = (o_prev - o_new) / np.maximum(o_prev, 1e-300)
        m_prev, ls_prev = m[ib], ls[ib]
        m_new, ls_new = mt[pb], lt[pb]
        done = (gain <= 1e-10) | (
            (np.abs(m_new - m_prev) <= 1e-13 * (1.0 + np.abs(m_prev)))
            & (np.abs(ls_new - ls_prev) <= 1e-13 * (1.0 + np.abs(ls_prev))))
        # converging geometrically, 100 times faster than the last step: what
        # is left to gain is below about 1e-9 of the objective
        done |= (gain <= 1e-7) & (gain <= 0.01 * rel[ib])
        m[ib], ls[ib], obj[ib] = m_new, ls_new, o_new
        lam[ib] = np.maximum(lams.ravel()[pb] / 3.0, 1e-12)
        live[ib] = ~done & (o_new > 1e-30)
        rel[ib] = (o_prev - o_new) / np.maximum(o_prev, 1e-300)
    live[ia[~better]] = False
    return ib, pb


# ---------------------------------------------------------------------------
# several smiles at once: the polish of every expiry in one batched loop
# ---------------------------------------------------------------------------

class _Layout:
    """One set of points' flat layout (:meth:`_Smiles.layout`): row offsets ``offs``
    (size points + 1), each point's row length ``n_pt``, each element's quote
    ``kidx`` in the concatenated quotes and its ``k``, ``w`` and ``sw`` (square root
    of the weight), the runs ``segs`` of :meth:`_Smiles.segments`; ``n`` the row
    length when every point has the same (else 0); ``blocks``, neighbouring runs
    of one shape: (first point, end point, first element, end element, (runs,
    points per run, quotes), the runs' ``[wt, wt w]`` stacked, their ``wt`` stacked);
    ``rows``, neighbouring points with as many quotes each (first
    point, end point, quotes); ``G0``, ``h0`` the normal equations' entries that do
    not depend on (m, sigma) and ``ww`` each point's ``sum wt w^2``."""

    __slots__ = ("offs", "n_pt", "kidx", "segs", "k", "w", "sw", "n", "blocks",
                 "rows", "G0", "h0", "ww")


class _Smiles:
    """The quotes of several smile fits side by side: ``k``, ``w``, weights and their
    square roots concatenated (fit ``f`` at ``base[f]:base[f] + n[f]``), and each fit's
    constants of the inner least squares, computed as :func:`_inner_few` computes
    them for one fit."""

    def __init__(self, problems):
        self.k = np.concatenate([p[0] for p in problems])
        self.w = np.concatenate([p[1] for p in problems])
        self.sw = np.concatenate([np.sqrt(p[2]) for p in problems])
        self.n = np.array([p[0].size for p in problems], dtype=np.intp)
        self.base = np.concatenate([[0], np.cumsum(self.n)[:-1]]).astype(np.intp)
        self.wt_of = [p[2] for p in problems]
        self.w_of = [p[1] for p in problems]
        self.k_of = [p[0] for p in problems]
        self.W2, g00, h0, ww = [], [], [], []
        for _, w, wt in problems:
            wtw = wt * w
            self.W2.append(np.stack([wt, wtw], axis=1))
            g00.append(float(wt.sum()))
            h0.append(float(wtw.sum()))
            ww.append(float(wtw @ w))
        self.g00, self.h0, self.wwsum = np.array(g00), np.array(h0), np.array(ww)
        self._layouts: dict = {}

    def layout(self, fit_of: np.ndarray) -> _Layout:
        """The :class:`_Layout` of one basis row per point (points grouped by fit, in
        order). Kept per set of points (the polish meets the same sets round after
        round)."""
        key = fit_of.tobytes()
        hit = self._layouts.get(key)
        if hit is None:
            hit = self._layouts[key] = self._new_layout(fit_of)
        return hit

    def _new_layout(self, fit_of: np.ndarray) -> _Layout:
        lay = _Layout()
        n_pt = self.n[fit_of]
        offs = np.zeros(fit_of.size + 1, dtype=np.intp)
        np.cumsum(n_pt, out=offs[1:])
        kidx = np.arange(offs[-1]) + np.repeat(self.base[fit_of] - offs[:-1], n_pt)
        lay.offs, lay.n_pt, lay.kidx = offs, n_pt, kidx
        lay.segs = segs = self.segments(fit_of)
        lay.k, lay.w, lay.sw = self.k[kidx], self.w[kidx], self.sw[kidx]
        lay.n = int(n_pt[0]) if n_pt.size and bool((n_pt == n_pt[0]).all()) else 0
        # neighbouring fits with the same (points, quotes) matrix: one stacked product
        # passes numpy the same matrices, one by one, as each fit alone
        lay.blocks = []
        for shape, group in itertools.groupby(segs, lambda sg: (sg[2] - sg[1],
                                                               int(self.n[sg[0]]))):
            group = list(group)
            W2 = np.stack([self.W2[f] for f, _, _ in group])
            wt = np.stack([self.wt_of[f] for f, _, _ in group])[:, :, None]
            a, b = group[0][1], group[-1][2]
            lay.blocks.append((a, b, int(offs[a]), int(offs[b]), (len(group), *shape),
                               W2, wt))
        # neighbouring points with as many quotes each: (points, quotes) arrays
        lay.rows = [(a, a + len(list(group)), n) for a, n, group in _runs(n_pt.tolist())]
        g00 = self.g00[fit_of]
        lay.G0 = np.zeros((fit_of.size, 9))
        lay.G0[:, 0] = g00
        lay.G0[:, 5] = lay.G0[:, 7] = 0.25 * g00
        lay.h0 = np.zeros((fit_of.size, 3))
        lay.h0[:, 0] = self.h0[fit_of]
        lay.ww = self.wwsum[fit_of]
        return lay

    @staticmethod
    def segments(fit_of: np.ndarray) -> list[tuple[int, int, int]]:
        """(fit, first point, end point) of each run of points of one fit."""
        fits = fit_of.tolist()
        out, a = [], 0
        for i in range(1, len(fits) + 1):
            if i == len(fits) or fits[i] != fits[a]:
                out.append((fits[a], a, i))
                a = i
        return out


def _runs(values: list):
    """(first index, value, group) of each run of equal neighbouring values."""
    i = 0
    for v, group in itertools.groupby(values):
        group = list(group)
        yield i, v, group
        i += len(group)


def _inner_many(sm: _Smiles, fit_of: np.ndarray, m: np.ndarray, s: np.ndarray):
    """:func:`_inner_exact` for points of several fits at once (``fit_of`` the fit of
    each point, grouped): the elementwise work and the seven active sets' solves in
    one batch, each fit's weighted sums by the same matrix products as one fit alone
    (one stacked product for every fit when their runs have one shape). Returns
    coefficients, objectives, active sets, and the basis ``P, Q`` flat with its
    layout (:meth:`_Smiles.layout`)."""
    lay = sm.layout(fit_of)
    offs, n_pt, segs, n = lay.offs, lay.n_pt, lay.segs, lay.n
    p = m.size
    PQ = np.empty((2, offs[-1]))
    y = np.subtract(lay.k, m.repeat(n_pt), out=PQ[1])
    y /= s.repeat(n_pt)
    P, Q = _pq_from_y(PQ)
    sq = np.multiply(PQ, PQ)
    G = lay.G0.copy()
    h = lay.h0.copy()
    g = np.empty((2, p, 2))
    for a, b, ea, eb, shape, W2, wt in lay.blocks:
        # P and Q of the block's fits side by side: (2, fits, points, quotes)
        g[:, a:b] = (PQ[:, ea:eb].reshape(2, *shape) @ W2).reshape(2, b - a, 2)
        G[a:b, 4::4] = (sq[:, ea:eb].reshape(2, *shape) @ wt).reshape(2, b - a).T
    G[:, 1:4:2] = g[0, :, 0:1]
    G[:, 2:7:4] = g[1, :, 0:1]
    G = G.reshape(p, 3, 3)
    h[:, 1:] = g[:, :, 1].T
    G7 = np.where(_KEEP7[:, None], G[None], _EYE3)                  # (7, p, 3, 3)
    H7 = h[None] * _FREE[:7, None, :]
    exact = None                        # fits whose sets go to the closed forms
    try:
        C = np.linalg.solve(G7, H7[..., None])[..., 0]              # (7, p, 3)
    except np.linalg.LinAlgError:
        C = np.zeros((7, p, 3))
        exact = np.zeros(len(sm.n), dtype=bool)
        for f, a, b in segs:
            try:
                C[:, a:b] = np.linalg.solve(G7[:, a:b], H7[:, a:b, :, None])[..., 0]
            except np.linalg.LinAlgError:     # an exactly singular set: closed forms
                exact[f] = True
    # sums over the last axis of three written out: numpy adds them in this order
    ch = C * h
    cgc = (C[..., None, :] @ G)[..., 0, :] * C
    obj = (lay.ww - 2.0 * (ch[..., 0] + ch[..., 1] + ch[..., 2])
           + (cgc[..., 0] + cgc[..., 1] + cgc[..., 2]))
    a_, u_, v_ = C[..., 0], C[..., 1], C[..., 2]
    with np.errstate(invalid="ignore"):
        ok = (u_ >= 0) & (v_ >= 0) & (a_ + np.sqrt(np.maximum(u_ * v_, 0.0)) >= 0)
    obj = np.where(ok & np.isfinite(obj), obj, np.inf)
    sets = np.argmin(obj, axis=0)
    cols = np.arange(p)
    best = C[sets, cols]
    flat = ~np.isfinite(obj[sets, cols])
    if flat.any():
        best[flat] = 0.0
        sets[flat] = 7
    if n:
        e = (best[:, 0:1] + best[:, 1:2] * P.reshape(p, n) + best[:, 2:3] * Q.reshape(p, n)
             - lay.w.reshape(p, n))
    else:
        bE = best.repeat(n_pt, axis=0)
        e = bE[:, 0] + bE[:, 1] * P + bE[:, 2] * Q - lay.w
    e *= e
    e = e.reshape(-1)
    out = np.empty(p)
    for a, b, ea, eb, shape, _, wt in lay.blocks:
        out[a:b] = (e[ea:eb].reshape(shape) @ wt).reshape(b - a)
    if exact is not None:
        for f, a, b in segs:
            if exact[f]:
                coef_f, obj_f, sets_f = _inner(sm.k_of[f], sm.w_of[f], sm.wt_of[f], m[a:b],
                                               s[a:b], exact=True)
                best[a:b], out[a:b], sets[a:b] = coef_f, obj_f, sets_f
    return best, out, sets, P, Q, lay


def _rows(offs: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Flat indices of the basis rows of ``points`` under the row offsets ``offs``."""
    n = offs[points + 1] - offs[points]
    first = np.repeat(offs[points] - np.concatenate([[0], np.cumsum(n)[:-1]]), n)
    return np.arange(int(n.sum())) + first


def _polish_many(sm: _Smiles, fit_of: np.ndarray, m0: np.ndarray, ls0: np.ndarray,
                 bounds: np.ndarray, max_iter: int = 20):
    """:func:`_polish` of several fits at once, step for step the same: the starts of
    every fit (``fit_of``, grouped by fit) advance together; each fit's weighted
    sums and normal matrices are the same matrix products as for that fit alone, the
    elementwise work, the damped solves and the trial points' inner solves are one
    batch. ``bounds`` has one row (m min, m max, ln sigma min, ln sigma max) per
    start. Returns m, ln sigma, coefficients and objectives of every start."""
    fit_of = np.asarray(fit_of, dtype=np.intp)
    ml = np.stack([m0, ls0], axis=1).astype(float)     # (m, ln sigma) of each start
    m, ls = ml[:, 0], ml[:, 1]
    coef, obj, sets, P, Q, lay0 = _inner_many(sm, fit_of, m, np.exp(ls))
    offs, n = lay0.offs, lay0.n
    if n:                       # every start's basis row as a row of a (starts, n) array
        P, Q = P.reshape(-1, n), Q.reshape(-1, n)
    rows_of: dict = {}          # flat basis rows of a set of starts
    S = m.size
    L = _DAMPING.size
    lam = np.full(S, 1e-3)
    live = np.ones(S, dtype=bool)
    eye = np.eye(5)
    rel = np.zeros(S)
    first_start = np.flatnonzero(np.r_[True, np.diff(fit_of) != 0])
    per_fit = np.diff(np.r_[first_start, S])
    b_lo, b_hi = bounds[:, 0:3:2], bounds[:, 1:4:2]
    for _ in range(max_iter):
        ia = np.flatnonzero(live)
        if ia.size == 0:
            break
        fa = fit_of[ia]
        lay = sm.layout(fa)
        offs_a, n_a, segs, w, sw = lay.offs, lay.n_pt, lay.segs, lay.w, lay.sw
        p = ia.size
        mml = ml[ia]
        ll = mml[:, 1]
        c = coef[ia]
        free = _FREE[sets[ia]]
        if n:
            # every start's quotes as a row: the steps of one fit alone
            J, e = _residuals_jacobian(P[ia], Q[ia], c, free, lay.sw.reshape(p, n),
                                       lay.w.reshape(p, n), ll)
            Jt = J.transpose(0, 2, 1)
            A = Jt @ J                                              # (p, 5, 5)
            g = Jt @ e[:, :, None]                                  # (p, 5, 1)
        else:
            key = ia.tobytes()
            src = rows_of.get(key)
            if src is None:
                src = rows_of[key] = _rows(offs, ia)
            Pa, Qa = P[src], Q[src]
            y, r = Pa - Qa, Pa + Qa
            cf = np.concatenate([c, free], axis=1).repeat(n_a, axis=0)
            e = sw * (cf[:, 0] + cf[:, 1] * Pa + cf[:, 2] * Qa - w)
            dwdy = (cf[:, 1] * Pa - cf[:, 2] * Qa) / r
            dwdy *= sw
            J = np.empty((offs_a[-1], 5))
            J[:, 0] = cf[:, 3] * sw
            J[:, 1] = cf[:, 4] * Pa * sw
            J[:, 2] = cf[:, 5] * Qa * sw
            J[:, 3] = dwdy * (-1.0 / np.exp(ll)).repeat(n_a)
            J[:, 4] = -dwdy * y
            # each start's (5, n) by (n, 5) product, as for one fit alone, for
            # every run of starts with as many quotes at once
            A = np.empty((p, 5, 5))
            g = np.empty((p, 5, 1))
            for a, b, n_r in lay.rows:
                seg = slice(offs_a[a], offs_a[b])
                Jf = J[seg].reshape(b - a, n_r, 5)
                Jt = Jf.transpose(0, 2, 1)
                A[a:b] = Jt @ Jf                                    # (p, 5, 5)
                g[a:b] = Jt @ e[seg].reshape(b - a, n_r, 1)
        d = np.diagonal(A, axis1=1, axis2=2)
        d = np.where(d > 0, d, 1.0)
        lams = lam[ia][:, None] * _DAMPING                           # (p, L)
        Mx = A[:, None] + (lams[:, :, None, None] * eye) * d[:, None, None, :]
        rhs = -g[:, None].repeat(L, axis=1)
        try:
            step = np.linalg.solve(Mx, rhs)[..., 0]
        except np.linalg.LinAlgError:
            # as for one fit alone: a fit with a singular system stops
            step = np.zeros((p, L, 5))
            keep = np.ones(p, dtype=bool)
            for f, a, b in segs:
                try:
                    step[a:b] = np.linalg.solve(Mx[a:b], rhs[a:b])[..., 0]
                except np.linalg.LinAlgError:
                    lam[ia[a:b]] *= 1e4
                    live[ia[a:b]] = False
                    keep[a:b] = False
            if not keep.any():
                continue
            ia, fa, mml = ia[keep], fa[keep], mml[keep]
            lams, step = lams[keep], step[keep]
            p = ia.size
        # the trial points clipped to each start's box, (m, ln sigma) together
        trial = mml[:, None] + step[..., 3:]                        # (p, L, 2)
        np.maximum(trial, b_lo[ia][:, None], out=trial)
        np.minimum(trial, b_hi[ia][:, None], out=trial)
        mt, lt = trial.reshape(-1, 2).T
        ct, ot, st, Pt, Qt, lay_t = _inner_many(sm, fa.repeat(L), mt, np.exp(lt))
        ib, pb = _take_best_trials(ot, ia, L, mt, lt, m, ls, obj, lam, lams, live, rel)
        if ib.size:
            coef[ib], sets[ib] = ct[pb], st[pb]
            if n:
                P[ib], Q[ib] = Pt.reshape(-1, n)[pb], Qt.reshape(-1, n)[pb]
            else:
                offs_t = lay_t.offs
                for i, t in zip(ib.tolist(), pb.tolist()):   # each start's basis row
                    a, b, c0 = offs[i], offs[i + 1], offs_t[t]
                    P[a:b] = Pt[c0:c0 + b - a]
                    Q[a:b] = Qt[c0:c0 + b - a]
        # per fit: a start behind one of its fit's finished starts, gaining little
        if not live.all():
            fin_obj = np.where(live, np.inf, obj)
            best_fin = np.minimum.reduceat(fin_obj, first_start)
            live &= ~((obj > best_fin.repeat(per_fit) * (1 + 1e-9)) & (rel < _CRAWL))
    return m, ls, coef, obj


def _check_inputs(k, w, weights, t) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
    try:
        k = np.asarray(k, dtype=float)
        w = np.asarray(w, dtype=float)
    except (TypeError, ValueError):
        raise InputError("fit_svi", "log-moneyness and total variance must be numbers")
    if k.shape != w.shape:
        raise InputError("fit_svi", f"log-moneyness has shape {k.shape} but total "
                                    f"variance has shape {w.shape}")
    if k.ndim != 1:
        k, w = k.ravel(), w.ravel()
    if weights is None:
        wt = np.ones_like(k)
    else:
        try:
            wt = np.broadcast_to(np.asarray(weights, dtype=float), k.shape).copy()
        except (TypeError, ValueError):
            raise InputError("fit_svi", "weights must be numbers of the same shape as k")
        if np.any(wt < 0):
            raise InputError("fit_svi", "weights must not be negative")
    try:
        t = float(t)
    except (TypeError, ValueError):
        raise InputError("fit_svi", f"time to expiry must be a number, not {t!r}")
    if not np.isfinite(t) or t <= 0:
        raise InputError("fit_svi", f"time to expiry must be positive, not {t}")
    keep = np.isfinite(k) & np.isfinite(w) & np.isfinite(wt) & (wt > 0) & (w >= 0)
    if not np.any(keep):
        raise InputError("fit_svi", "no finite quote with positive weight to fit")
    return k[keep], w[keep], wt[keep], t


def fit_svi(k: np.ndarray, w: np.ndarray, weights: np.ndarray | None = None, *,
            t: float) -> SviFit:
    """Fit a raw SVI smile to total implied variance of one expiry.

    Parameters
    ----------
    k : array
        Log-moneyness ``ln(K/F)`` of each quote, with ``F`` the expiry's forward.
    w : array, same shape
        Total implied variance ``iv**2 * t`` of each quote (iv a decimal).
    weights : array or None
        Non-negative weights on the squared total-variance residuals (for a
        vega-weighted fit pass the BSM vega of each quote, e.g. normalised to a
        mean of 1). Points with zero weight or non-finite input are left out.
    t : float
        Time to expiry in years (calendar days / 365).

    Returns
    -------
    SviFit

    Notes
    -----
    Minimises :math:`\\sum_i \\omega_i\\,(w_{SVI}(k_i) - w_i)^2` over raw SVI
    parameters subject to :math:`b \\ge 0`, :math:`|\\rho| \\le 1`,
    :math:`\\sigma > 0`, :math:`a + b\\sigma\\sqrt{1-\\rho^2} \\ge 0` (Gatheral 2004),
    by the quasi-explicit reduction of De Marco & Martini (2009): the inner problem in
    :math:`(a, \\rho b\\sigma, b\\sigma)` is an exact box-constrained linear least
    squares; the outer search covers :math:`m \\in [k_{min} - \\Delta, k_{max} + \\Delta]`
    and :math:`\\sigma \\in [0.01\\Delta, 2\\Delta]` on a log grid (:math:`\\Delta`
    the quotes' range of log-moneyness), then zooms and polishes from the three best
    grid points in distinct regions by variable-projection Levenberg-Marquardt in
    :math:`(m, \\ln\\sigma)` (see the module notes and :func:`_polish`); the
    result is never worse than the best zoomed grid point. ``converged`` is False
    when the result is degenerate (m outside that range, sigma at its floor of
    1e-4, or :math:`|\\rho| \\ge 0.999`).

    With 3 or 4 points SVI's five parameters are not identified: ``m`` is held at the
    point of lowest total variance and ``sigma`` at half the log-moneyness range,
    and the linear part is fitted (``method="svi-fixed-m-sigma"``). With 1 or 2
    points the smile is flat in total variance (``method="flat"``).
    """
    return fit_svi_many([(k, w, weights, t)], errors="raise")[0]


def fit_svi_many(problems, *, errors: str = "raise") -> list:
    """:func:`fit_svi` of several smiles (e.g. every expiry of a chain) at once.

    ``problems`` is a sequence of ``(k, w, weights, t)``, each as :func:`fit_svi`
    takes them. Returns one :class:`SviFit` per problem, the same fits, bit for bit,
    as :func:`fit_svi` one at a time: the polish of every smile runs in one batched
    loop (:func:`_polish_many`), each smile's own sums formed by the same matrix
    products as alone. With ``errors="return"`` a problem whose input is unusable
    gives its :class:`~optbench.errors.InputError` in its place instead of raising.
    """
    if errors not in ("raise", "return"):
        raise ValueError(f"errors must be 'raise' or 'return', not {errors!r}")
    out: list = [None] * len(problems)
    pending = []                 # (position, start, data for the finish)
    for i, (k, w, weights, t) in enumerate(problems):
        try:
            res = _svi_start(k, w, weights, t)
        except InputError as err:
            if errors == "raise":
                raise
            out[i] = err
            continue
        if isinstance(res, SviFit):
            out[i] = res
        else:
            pending.append((i, res))
    states = [st for _, st in pending]
    if states:
        # the coarse grids, the zoom around the best points, the zoomed grids
        for st, obj0 in zip(states, _grid_objectives(states)):
            _svi_zoom(st, obj0)
        for st, objz in zip(states, _grid_objectives(states)):
            _svi_polish_starts(st, objz)
    if len(pending) == 1:        # one smile: its own polish, without the batch layout
        i, st = pending[0]
        out[i] = _svi_finish(st, *_polish(st["k"], st["w"], st["wt"], st["m0"], st["ls0"],
                                          st["bounds"]))
    elif pending:
        # fits with equally many quotes side by side (their products are stacked);
        # each fit's arithmetic does not depend on its neighbours
        pending.sort(key=lambda item: item[1]["k"].size)
        sm = _Smiles([(st["k"], st["w"], st["wt"]) for _, st in pending])
        fit_of = np.concatenate([np.full(st["m0"].size, f, dtype=np.intp)
                                 for f, (_, st) in enumerate(pending)])
        bounds = np.concatenate([np.broadcast_to(np.array(st["bounds"], float),
                                                 (st["m0"].size, 4))
                                 for _, st in pending])
        m_f, ls_f, coef_f, obj_f = _polish_many(
            sm, fit_of, np.concatenate([st["m0"] for _, st in pending]),
            np.concatenate([st["ls0"] for _, st in pending]), bounds)
        for f, (i, st) in enumerate(pending):
            sel = fit_of == f
            out[i] = _svi_finish(st, m_f[sel], ls_f[sel], coef_f[sel], obj_f[sel])
    return out


def _svi_result(k, w, wt, t, iv_q, a, b, rho, m, s, converged, message, method):
    x = k - m
    wf = a + b * (rho * x + np.sqrt(x * x + s * s))
    iv_f = np.sqrt(np.maximum(wf, 0.0) / t)
    rmse = float(np.sqrt(np.sum(wt * (iv_f - iv_q) ** 2) / np.sum(wt)))
    return SviFit(float(a), float(b), float(rho), float(m), float(s), t, rmse, k.size,
                  bool(converged), message, method)


def _svi_start(k, w, weights, t):
    """The work of :func:`fit_svi` before its grids: a finished :class:`SviFit` for
    1 to 4 points, else the state of the search with its coarse grid (the grids'
    objectives are then formed for every smile together, :func:`_grid_objectives`)."""
    k, w, wt, t = _check_inputs(k, w, weights, t)
    n = k.size
    wt = wt / wt.mean()
    iv_q = np.sqrt(w / t)

    if n < 3 or np.ptp(k) <= 0:
        a0 = float(np.sum(wt * w) / np.sum(wt))
        return _svi_result(k, w, wt, t, iv_q, a0, 0.0, 0.0, float(np.mean(k)), 0.1, False,
                           f"flat total variance: {n} distinct point(s) cannot identify "
                           "a smile", "flat")
    span = float(np.ptp(k))
    if n < 5:
        m0 = float(k[np.argmin(w)])
        s0 = max(0.5 * span, _SIGMA_MIN)
        coef, _, _ = _inner(k, w, wt, np.array([m0]), np.array([s0]))
        a, b, rho = _raw_params(coef[0], m0, s0)
        return _svi_result(k, w, wt, t, iv_q, a, b, rho, m0, s0, False,
                           f"{n} points: m and sigma held fixed, level/slope/curvature "
                           "fitted", "svi-fixed-m-sigma")

    m_lo, m_hi = float(k.min()) - span, float(k.max()) + span
    ls_lo = np.log(max(_SIGMA_GRID[0] * span, _SIGMA_MIN))
    ls_hi = np.log(_SIGMA_GRID[1] * span)
    (n_m, n_s), _ = _GRID
    mg = np.linspace(m_lo, m_hi, n_m)
    lsg = np.linspace(ls_lo, ls_hi, n_s)
    M, LS = np.empty((n_m, n_s)), np.empty((n_m, n_s))  # the (m, ln sigma) mesh
    M[:] = mg[:, None]
    LS[:] = lsg
    # the constants of the inner least squares, as _inner forms them
    wtw = wt * w
    return {"k": k, "w": w, "wt": wt, "t": t, "iv_q": iv_q, "span": span,
            "m_lo": m_lo, "m_hi": m_hi, "ls_lo": ls_lo, "ls_hi": ls_hi,
            "dm": mg[1] - mg[0], "dls": lsg[1] - lsg[0], "M": M, "LS": LS,
            "W2": np.stack([wt, wtw], axis=1), "g00": float(wt.sum()),
            "h0": float(wtw.sum()), "ww": float(wtw @ w),
            "grid": (M.ravel(), np.exp(LS.ravel()))}


def _grid_objectives(states: list[dict]) -> list[np.ndarray]:
    """The inner objective (as :func:`_inner` gives it) at every point of each
    state's ``grid``: each smile's weighted sums by its own products
    (:func:`_moments`), the closed forms of every smile in one batch."""
    sums = [_moments(st["k"], st["W2"], *st["grid"])[:6] for st in states]
    counts = [st["grid"][0].size for st in states]
    cat = [np.concatenate([sm_[i] for sm_ in sums]) for i in range(6)]
    const = [np.repeat(np.array([st[name] for st in states]), counts)
             for name in ("g00", "h0", "ww")]
    _, obj, _ = _closed_forms(*const, *cat)
    obj = np.maximum(obj, 0.0)
    return np.split(obj, np.cumsum(counts)[:-1])


def _svi_zoom(st: dict, obj0: np.ndarray) -> None:
    """From the coarse grid's objectives: the starts (the best grid points, each
    more than two cells from the ones already taken) and a finer grid two cells
    either side of each, as the state's next ``grid``."""
    M, LS = st["M"], st["LS"]
    (_, n_s), (z_m, z_s) = _GRID
    obj0 = obj0.reshape(M.shape)
    # a narrow diagonal valley may have no grid-local minimum of its own, and a flat
    # plateau, e.g. sigma -> 0, has many tied ones
    order = np.argsort(obj0.ravel(), kind="stable")
    cand: list[tuple[int, int]] = []
    for c in order:
        ci, cj = divmod(int(c), n_s)
        if all(max(abs(ci - si), abs(cj - sj)) > 2 for si, sj in cand):
            cand.append((ci, cj))
            if len(cand) == _STARTS:
                break
    m_lo, m_hi, ls_lo, ls_hi = st["m_lo"], st["m_hi"], st["ls_lo"], st["ls_hi"]
    dm, dls = st["dm"], st["dls"]
    ci, cj = np.array(cand, dtype=np.intp).reshape(-1, 2).T
    mc, lc = M[ci, cj], LS[ci, cj]
    # every start's zoomed axes at once, (points, starts), then its grid row by row
    mz = np.linspace(np.maximum(mc - 2 * dm, m_lo), np.minimum(mc + 2 * dm, m_hi), z_m)
    lz = np.linspace(np.maximum(lc - 2 * dls, ls_lo), np.minimum(lc + 2 * dls, ls_hi), z_s)
    st["MZ"] = MZ = np.repeat(mz.T, z_s, axis=1)
    st["LZ"] = LZ = np.tile(lz.T, (1, z_m))
    st["grid"] = (MZ.ravel(), np.exp(LZ.ravel()))


def _svi_polish_starts(st: dict, objz: np.ndarray) -> None:
    """Each start's best zoomed grid point, where the polish begins, and the box
    its trial points are clipped to."""
    MZ, LZ = st["MZ"], st["LZ"]
    iz = np.argmin(objz.reshape(MZ.shape), axis=1)
    rows = np.arange(MZ.shape[0])
    span = st["span"]
    st["m0"], st["ls0"] = MZ[rows, iz], LZ[rows, iz]
    st["bounds"] = (st["m_lo"] - 10.0 * span, st["m_hi"] + 10.0 * span,
                    np.log(_SIGMA_MIN), st["ls_hi"] + np.log(10.0))


def _svi_finish(st: dict, m_f, ls_f, coef_f, obj_f) -> SviFit:
    """The polished starts of one smile to its :class:`SviFit` (the best start)."""
    ib = int(np.argmin(obj_f))
    m_best, s_best = float(m_f[ib]), float(np.exp(ls_f[ib]))
    a, b, rho = _raw_params(coef_f[ib], m_best, s_best)
    # m far outside the strikes or a vanishing sigma: the smile is nearly a straight
    # line or a corner over the quotes, and SVI's parameters are not identified
    degenerate = (m_best <= st["m_lo"] or m_best >= st["m_hi"]
                  or s_best <= _SIGMA_MIN * 1.0001 or abs(rho) >= 0.999)
    message = "raw SVI fit" if not degenerate else (
        "raw SVI fit; parameters nearly degenerate (m outside the search range, sigma "
        "near 0 or |rho| near 1): the smile is close to a line or a corner")
    return _svi_result(st["k"], st["w"], st["wt"], st["t"], st["iv_q"], a, b, rho, m_best,
                       s_best, not degenerate, message, "svi")


# ---------------------------------------------------------------------------
# smile points
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class SmilePoints:
    """Standard points of one expiry's fitted smile.

    Attributes
    ----------
    moneyness : tuple of float
        Strikes as fractions of the forward, K/F (0.90 ... 1.10).
    iv_moneyness : ndarray
        Fitted implied vol (decimal) at each ``moneyness``.
    iv_atm : float
        Fitted implied vol at the forward (ATM means K = F in optbench).
    iv_25d_put, iv_25d_call : float
        Fitted implied vol at the strikes whose delta is -0.25 (put) and +0.25 (call).
    strike_25d_put, strike_25d_call : float
        Those strikes.
    rr_25d : float
        Risk reversal ``iv_25d_call - iv_25d_put`` (decimal vol; negative = puts dearer).
    bf_25d : float
        Smile butterfly ``(iv_25d_call + iv_25d_put)/2 - iv_atm`` (decimal vol).
    delta_convention : str
        ``"spot"`` (delta = e^{-qt} N(d1) for calls, -e^{-qt} N(-d1) for puts) or
        ``"forward"`` (N(d1), -N(-d1)).
    atm_convention : str
        Always ``"forward"``: ATM is the strike equal to the forward.
    """

    moneyness: tuple
    iv_moneyness: np.ndarray
    iv_atm: float
    iv_25d_put: float
    iv_25d_call: float
    strike_25d_put: float
    strike_25d_call: float
    rr_25d: float
    bf_25d: float
    delta_convention: str
    atm_convention: str = "forward"

    def to_dict(self) -> dict:
        return {"moneyness": list(self.moneyness),
                "iv_moneyness": [float(x) for x in self.iv_moneyness],
                "iv_atm": self.iv_atm, "iv_25d_put": self.iv_25d_put,
                "iv_25d_call": self.iv_25d_call, "strike_25d_put": self.strike_25d_put,
                "strike_25d_call": self.strike_25d_call, "rr_25d": self.rr_25d,
                "bf_25d": self.bf_25d, "delta_convention": self.delta_convention,
                "atm_convention": self.atm_convention}


def _fixed_point_d1(fit: SviFit, k: list, d1: list) -> list:
    """The fixed point ``k = w(k)/2 - d1*sqrt(w(k))`` of :func:`_strike_for_d1` for
    a list of targets, iterated together (at most 60 rounds, until every ``k`` moves
    by less than 1e-13), with ``w`` as :meth:`SviFit.total_variance` forms it."""
    a, b, rho, m, s2 = fit.a, fit.b, fit.rho, fit.m, fit.sigma ** 2
    sqrt = math.sqrt
    for _ in range(60):
        k_new = []
        for kk, dd in zip(k, d1):
            x = kk - m
            wk = max(a + b * (rho * x + sqrt(x * x + s2)), 1e-300)
            k_new.append(wk / 2 - dd * sqrt(wk))
        if all(abs(kn - kk) < 1e-13 for kn, kk in zip(k_new, k)):
            return k_new
        k = k_new
    return k


def _strike_for_d1(fit: SviFit, d1_target: np.ndarray) -> np.ndarray:
    """Log-moneyness k with d1(k) = (-k + w(k)/2)/sqrt(w(k)) equal to each target.

    A fixed point k = w(k)/2 - d1*sqrt(w(k)) first (it converges when the smile's
    slope is moderate), then a vectorised bisection on a bracket wherever the fixed
    point did not settle.
    """
    d1_target = np.asarray(d1_target, dtype=float)
    w0 = max(float(fit.total_variance(0.0)), 1e-12)
    k = w0 / 2 - d1_target * np.sqrt(w0)
    if d1_target.ndim == 1:
        # a few targets: the same steps in Python floats (the same IEEE operations
        # as numpy's, element by element), all targets in lockstep
        k = np.array(_fixed_point_d1(fit, k.tolist(), d1_target.tolist()))
    else:
        for _ in range(60):
            wk = np.maximum(fit.total_variance(k), 1e-300)
            k_new = wk / 2 - d1_target * np.sqrt(wk)
            if (np.abs(k_new - k) < 1e-13).all():
                k = k_new
                break
            k = k_new

    def d1_of(kk):
        wk = fit.total_variance(kk)
        with np.errstate(invalid="ignore", divide="ignore"):
            return (-kk + wk / 2) / np.sqrt(wk)

    bad = ~(np.abs(d1_of(k) - d1_target) < 1e-9)
    if np.any(bad):
        # bracket: d1 is large and positive far left, large negative far right
        width = 10.0 * np.sqrt(w0) + 1.0
        lo = np.full(d1_target.shape, -width)
        hi = np.full(d1_target.shape, width)
        for _ in range(200):
            mid = 0.5 * (lo + hi)
            above = d1_of(mid) > d1_target
            lo = np.where(above, mid, lo)
            hi = np.where(above, hi, mid)
        kb = 0.5 * (lo + hi)
        ok = np.abs(d1_of(kb) - d1_target) < 1e-7
        k = np.where(bad, np.where(ok, kb, np.nan), k)
    return k


def smile_points(fit: SviFit, F: float, t: float | None = None, r: float = 0.0,
                 q: float | None = None, S: float | None = None, *,
                 delta: str = "spot") -> SmilePoints:
    """Implied vols at fixed moneyness and fixed delta from a fitted smile.

    Parameters
    ----------
    fit : SviFit
        The expiry's smile.
    F : float
        The expiry's forward.
    t : float, optional
        Time to expiry in years; defaults to ``fit.t``.
    r : float
        Continuously compounded rate (decimal); only used with ``S`` to imply the
        carry.
    q : float, optional
        Continuously compounded dividend yield / carry (decimal) for spot deltas.
        If omitted it is implied from the forward: ``q = r - ln(F/S)/t``.
    S : float, optional
        Spot; needed for spot deltas when ``q`` is not given.
    delta : {"spot", "forward"}
        Spot delta ``e^{-qt} N(d1)`` (the hedge ratio in the underlying, matching
        :func:`optbench.pricing.bsm_greeks`) or forward delta ``N(d1)``.

    Returns
    -------
    SmilePoints

    Notes
    -----
    With :math:`w(k)` the fitted total variance,
    :math:`d_1(k) = (-k + w(k)/2)/\\sqrt{w(k)}`. A call of spot delta
    :math:`\\Delta` has :math:`d_1 = N^{-1}(\\Delta e^{qt})`; a put of spot delta
    :math:`-\\Delta` has :math:`d_1 = -N^{-1}(\\Delta e^{qt})` (Hull, *Options,
    Futures, and Other Derivatives*, ch. 19; Clark, *Foreign Exchange Option Pricing*,
    2011, ch. 3 for delta conventions). The strike is solved on the fitted smile.
    Risk reversal :math:`RR = \\sigma_{25C} - \\sigma_{25P}`, butterfly
    :math:`BF = (\\sigma_{25C} + \\sigma_{25P})/2 - \\sigma_{ATM}`.
    """
    t = fit.t if t is None else float(t)
    F = float(F)
    if not np.isfinite(F) or F <= 0:
        raise InputError("smile_points", f"forward must be positive, not {F}")
    if not np.isfinite(t) or t <= 0:
        raise InputError("smile_points", f"time to expiry must be positive, not {t}")
    if delta not in ("spot", "forward"):
        raise InputError("smile_points", f"delta must be 'spot' or 'forward', not {delta!r}")
    if t != fit.t:
        fit = SviFit(fit.a, fit.b, fit.rho, fit.m, fit.sigma, t, fit.rmse_iv,
                     fit.n_points, fit.converged, fit.message, fit.method)
    if delta == "spot":
        if q is None:
            if S is None or not float(S) > 0:
                raise InputError("smile_points",
                                 "spot deltas need the dividend yield q or the spot S")
            q = float(r) - np.log(F / float(S)) / t
        scale = np.exp(float(q) * t)
    else:
        scale = 1.0
    money = np.asarray(MONEYNESS)
    iv_m = fit.iv(np.log(money))
    target = WING_DELTA * scale
    if target >= 1.0:
        d1 = np.array([np.nan, np.nan])
    else:
        z = float(ndtri(target))
        d1 = np.array([-z, z])      # [put, call]
    kk = _strike_for_d1(fit, d1)
    iv_w = fit.iv(kk)
    iv_atm = float(fit.iv(0.0))
    iv_p, iv_c = float(iv_w[0]), float(iv_w[1])
    return SmilePoints(MONEYNESS, iv_m, iv_atm, iv_p, iv_c, float(F * np.exp(kk[0])),
                       float(F * np.exp(kk[1])), iv_c - iv_p,
                       0.5 * (iv_c + iv_p) - iv_atm, delta)


def spot_delta(fit: SviFit, F: float, K: np.ndarray, q: float, is_call: np.ndarray,
               ) -> np.ndarray:
    """BSM spot delta ``±e^{-qt} N(±d1)`` at strikes ``K`` with the fitted smile's vol.

    Used to check :func:`smile_points`; broadcasts over ``K`` and ``is_call``.
    """
    k = np.log(np.asarray(K, dtype=float) / float(F))
    wk = fit.total_variance(k)
    d1 = (-k + wk / 2) / np.sqrt(wk)
    disc_q = np.exp(-float(q) * fit.t)
    return np.where(np.asarray(is_call, dtype=bool), disc_q * ndtr(d1),
                    -disc_q * ndtr(-d1))
