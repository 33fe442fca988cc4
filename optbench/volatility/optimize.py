"""A small bound-constrained quasi-Newton minimiser for the GARCH-family likelihoods.

numpy only: ``scipy.optimize`` costs about half a second to import on the machines
optbench targets, more than a whole fit, so the estimator uses this instead.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class MinimizeResult:
    x: np.ndarray
    fun: float
    success: bool
    message: str
    nit: int
    nfev: int
    grad: np.ndarray | None = None   # gradient at x
    hess: np.ndarray | None = None   # the quasi-Newton Hessian estimate at x
    active_rows: tuple = ()          # inequality rows held as equalities at x


def minimize_box(fun_grad, x0, lower, upper, *, feasible=None, hess0=None,
                 fg0=None, max_step=None, A_ub=None, b_ub=None, max_iter: int = 300,
                 gtol: float = 1e-9, ftol: float = 1e-15, gain_tol: float = 0.0
                 ) -> MinimizeResult:
    """Minimise a smooth function with analytic gradient inside a box and under a few
    linear inequalities.

    Parameters
    ----------
    fun_grad : callable
        ``x -> (f, gradient)``.
    x0, lower, upper : array-like
        Start and bounds (the start is clipped into the box).
    feasible : callable, optional
        ``x -> bool``; points for which it is False are treated as ``f = +inf``
        (a constraint that is neither a bound nor linear).
    hess0 : ndarray, optional
        Starting Hessian estimate (e.g. by finite differences); identity otherwise.
    fg0 : tuple, optional
        ``(f, gradient)`` at ``x0`` when already known (saves one evaluation); only
        used when ``x0`` lies inside the box.
    max_step : array-like, optional
        Largest change of each coordinate in one trial step: the line search starts
        from the largest fraction of the quasi-Newton step (at most one) that
        respects it (a simple trust region; keeps trial points where the model can
        be evaluated cheaply).
    A_ub, b_ub : array-like, optional
        Linear inequalities ``A_ub x <= b_ub`` (one row each; the start must satisfy
        them). A row the iterate reaches is held as an equality while its Lagrange
        multiplier is positive, so the method moves *along* it.
    gain_tol : float
        Also converged when the full quasi-Newton step predicts a decrease of ``f``
        below this (absolute): the caller's resolution of ``f``.

    Returns
    -------
    MinimizeResult
        ``active_rows`` lists the inequality rows held at the end.

    Notes
    -----
    Projected quasi-Newton with an active set (Bertsekas 1982, *SIAM J. Control
    Optim.* 20; Nocedal & Wright, *Numerical Optimization*, 2nd ed., §16.5-16.7 and
    the BFGS update §6.1): coordinates at a bound whose gradient points outward are
    held; inequality rows at their limit form the working set, and the step solves
    the quasi-Newton model on the free coordinates with the working rows as
    equalities (the KKT system ``[B A'; A 0]``); a row whose multiplier is negative
    leaves the working set, a row the step would cross joins it. The trial point is
    projected onto the box, its length capped where it would cross an inequality
    (ratio test), and accepted by Armijo backtracking (sufficient decrease 1e-4).
    Converged when the projected gradient's largest entry is below ``gtol`` or a
    full step changes ``f`` by less than ``ftol`` relative.
    """
    lo = np.asarray(lower, dtype=float)
    hi = np.asarray(upper, dtype=float)
    x0 = np.asarray(x0, dtype=float)
    x = np.clip(x0, lo, hi)
    k = x.size
    C = None if A_ub is None else np.atleast_2d(np.asarray(A_ub, dtype=float))
    if C is not None and C.shape[0] == 0:
        C = None
    cb = None if C is None else np.atleast_1d(np.asarray(b_ub, dtype=float))
    ctol = None if C is None else 1e-10 * (1.0 + np.abs(cb))      # "at the limit"
    cviol = None if C is None else 1e-12 * (1.0 + np.abs(cb))     # rounding allowed
    if fg0 is not None and np.array_equal(x, x0):
        f, g = float(fg0[0]), np.asarray(fg0[1], dtype=float)
        nfev = 0
    else:
        f, g = fun_grad(x)
        nfev = 1
    if not np.isfinite(f):
        return MinimizeResult(x, float(f), False, "objective not finite at the start", 0, 1)
    B = np.eye(k) if hess0 is None else 0.5 * (np.asarray(hess0, dtype=float)
                                               + np.asarray(hess0, dtype=float).T)
    w, V = np.linalg.eigh(B)
    floor = 1e-8 * max(1.0, float(np.abs(w).max()))
    B = (V * np.maximum(np.abs(w), floor)) @ V.T            # positive definite start
    eye = np.eye(k)
    span = np.maximum(hi - lo, 1e-12)
    cap_step = None if max_step is None else np.asarray(max_step, dtype=float)
    lo_tol = lo + 1e-12 * span
    hi_tol = hi - 1e-12 * span
    work = np.zeros(0, dtype=int)
    for it in range(1, max_iter + 1):
        at_lo = x <= lo_tol
        at_hi = x >= hi_tol
        free = ~((at_lo & (g > 0)) | (at_hi & (g < 0)))
        near = (np.flatnonzero(cb - C @ x <= ctol) if C is not None
                else np.zeros(0, dtype=int))
        # working rows: those at the limit that the steepest-descent direction on the
        # free coordinates would cross (refined below by the multipliers' signs)
        work = [int(i) for i in near if float(C[i, free] @ g[free]) < 0.0]
        d = np.zeros(k)
        r = g
        nu = None
        for _ in range(2 * k + 4):
            d, nu = _step(B, g, free, C, work)
            if nu is not None and nu.size and float(nu.min()) < 0.0:
                work.pop(int(np.argmin(nu)))      # the row does not hold the step back
                continue
            # a free coordinate on a bound that the step would cross is held
            out = free & ((at_lo & (d < 0)) | (at_hi & (d > 0)))
            if out.any():
                free &= ~out
                continue
            # a row at its limit that the step would cross joins the working set
            cross = [int(i) for i in near if int(i) not in work and float(C[i] @ d) > 0.0]
            if cross:
                work.append(cross[0])
                continue
            break
        if nu is not None and nu.size:
            r = g + C[work].T @ nu
        pg = np.where(free, r, 0.0)
        if not np.any(free) or np.max(np.abs(pg)) < gtol:
            return MinimizeResult(x, f, True, "projected gradient below tolerance", it, nfev,
                                  g, B, tuple(work))
        if not np.dot(d, g) < 0:
            c = max(1.0, float(np.abs(np.diag(B)).max()))
            B = eye * c
            d = -pg / c
            if C is not None and work:
                d, _ = _step(B, g, free, C, work)
        elif -0.5 * float(np.dot(d, g)) < max(0.1 * ftol * (1.0 + abs(f)), gain_tol):
            # the full quasi-Newton step predicts a decrease far below what the
            # objective can resolve: nothing is left to gain
            return MinimizeResult(x, f, True, "predicted decrease below tolerance", it,
                                  nfev, g, B, tuple(work))
        step = 1.0
        if max_step is not None:
            big = np.abs(d) * step > cap_step
            if big.any():
                step = float(np.min(cap_step[big] / np.abs(d[big])))
        if C is not None:
            # ratio test: stop where the step would cross a row not in the working set
            Cd = C @ d
            slack = cb - C @ x
            for i in np.flatnonzero(Cd > 0):
                if int(i) not in work:
                    step = min(step, max(float(slack[i]) / float(Cd[i]), 0.0))
        accepted = False
        for _ in range(50):
            if step * np.max(np.abs(d) / (1.0 + np.abs(x))) < 1e-15:
                break   # the step no longer moves x: at the precision of f
            xn = np.minimum(np.maximum(x + step * d, lo), hi)
            if ((C is None or np.all(C @ xn <= cb + cviol))
                    and (feasible is None or feasible(xn))):
                fn, gn = fun_grad(xn)
                nfev += 1
                if np.isfinite(fn) and fn <= f + 1e-4 * np.dot(g, xn - x):
                    accepted = True
                    break
            step *= 0.5
        if not accepted:
            ok = np.max(np.abs(pg)) < 1e3 * gtol
            return MinimizeResult(x, f, bool(ok), "line search found no decrease", it, nfev,
                                  g, B, tuple(work))
        s = xn - x
        y = gn - g
        df = f - fn
        x, f, g = xn, fn, gn
        sy = float(np.dot(s, y))
        Bs = B @ s
        sBs = float(np.dot(s, Bs))
        if sy > 1e-12 * np.sqrt(np.dot(s, s) * np.dot(y, y)) and sBs > 0:
            B = B + np.outer(y, y) / sy - np.outer(Bs, Bs) / sBs   # BFGS (direct form)
        if df < ftol * (1.0 + abs(f)):
            return MinimizeResult(x, f, True, "relative change in the objective below "
                                              "tolerance", it, nfev, g, B, tuple(work))
    return MinimizeResult(x, f, False, f"iteration limit ({max_iter}) reached", max_iter, nfev,
                          g, B, tuple(work))


def _step(B, g, free, C, work):
    """Quasi-Newton step on the free coordinates with the working rows held as
    equalities: solves ``[B_ff A_f'; A_f 0] [d_f; nu] = [-g_f; 0]``. Returns the full
    step (zero on held coordinates) and the rows' multipliers (None without rows)."""
    k = g.shape[0]
    d = np.zeros(k)
    idx = np.flatnonzero(free)
    m = len(work)
    if idx.size == 0:
        return d, (np.zeros(m) if m else None)
    Bf = B if idx.size == k else B[np.ix_(idx, idx)]
    gf = g[idx]
    try:
        if not m:
            d[idx] = -np.linalg.solve(Bf, gf)
            return d, None
        A = C[np.ix_(work, idx)]
        nf = idx.size
        K = np.zeros((nf + m, nf + m))
        K[:nf, :nf] = Bf
        K[:nf, nf:] = A.T
        K[nf:, :nf] = A
        rhs = np.concatenate([-gf, np.zeros(m)])
        sol = np.linalg.lstsq(K, rhs, rcond=None)[0] if nf < m else np.linalg.solve(K, rhs)
        d[idx] = sol[:nf]
        return d, sol[nf:]
    except np.linalg.LinAlgError:
        d[idx] = -gf
        return d, (np.zeros(m) if m else None)
