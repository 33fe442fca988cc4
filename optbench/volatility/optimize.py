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


def minimize_box(fun_grad, x0, lower, upper, *, feasible=None, hess0=None,
                 fg0=None, max_step=None, max_iter: int = 300, gtol: float = 1e-9, ftol: float = 1e-15
                 ) -> MinimizeResult:
    """Minimise a smooth function with analytic gradient inside a box.

    Parameters
    ----------
    fun_grad : callable
        ``x -> (f, gradient)``.
    x0, lower, upper : array-like
        Start and bounds (the start is clipped into the box).
    feasible : callable, optional
        ``x -> bool``; points for which it is False are treated as ``f = +inf``
        (used for the stationarity constraint, which is not a box).
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

    Returns
    -------
    MinimizeResult

    Notes
    -----
    Projected quasi-Newton with an active set (Bertsekas 1982, *SIAM J. Control
    Optim.* 20; Nocedal & Wright, *Numerical Optimization*, 2nd ed., §16.7 and the
    BFGS update §6.1): coordinates at a bound whose gradient points outward are held,
    the quasi-Newton step solves the BFGS Hessian's free block, the trial point is projected onto the
    box and accepted by Armijo backtracking (sufficient decrease 1e-4). Converged when
    the projected gradient's largest entry is below ``gtol`` or a full step changes
    ``f`` by less than ``ftol`` relative.
    """
    lo = np.asarray(lower, dtype=float)
    hi = np.asarray(upper, dtype=float)
    x0 = np.asarray(x0, dtype=float)
    x = np.clip(x0, lo, hi)
    k = x.size
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
    wp = np.maximum(np.abs(w), floor)
    B = (V * wp) @ V.T            # positive definite start
    Hinv = (V / wp) @ V.T         # its inverse, kept alongside for the interior steps
    eye = np.eye(k)
    span = np.maximum(hi - lo, 1e-12)
    cap_step = None if max_step is None else np.asarray(max_step, dtype=float)
    lo_tol = lo + 1e-12 * span
    hi_tol = hi - 1e-12 * span
    for it in range(1, max_iter + 1):
        at_lo = x <= lo_tol
        at_hi = x >= hi_tol
        interior = not (at_lo.any() or at_hi.any())
        if interior:
            pg = g
        else:
            active = (at_lo & (g > 0)) | (at_hi & (g < 0))
            free = ~active
            pg = np.where(active, 0.0, g)
        if np.max(np.abs(pg)) < gtol:
            return MinimizeResult(x, f, True, "projected gradient below tolerance", it, nfev,
                                  g, B)
        d = np.zeros(k)
        if interior:   # nothing on a bound: the plain quasi-Newton step
            d = -(Hinv @ g)
        for _ in range(0 if interior else k):
            # Newton step on the free coordinates: B_ff d_f = -g_f
            d[:] = 0.0
            try:
                if free.all():
                    d = -np.linalg.solve(B, g)
                else:
                    d[free] = -np.linalg.solve(B[np.ix_(free, free)], g[free])
            except np.linalg.LinAlgError:
                d = -pg
                break
            # a free coordinate sitting on a bound that the step would cross joins
            # the active set, and the step is solved again
            out = free & ((at_lo & (d < 0)) | (at_hi & (d > 0)))
            if not out.any():
                break
            free &= ~out
        if not np.dot(d, g) < 0:
            c = max(1.0, float(np.abs(np.diag(B)).max()))
            B = eye * c
            Hinv = eye / c
            d = -pg / c
        elif -0.5 * float(np.dot(d, g)) < 0.1 * ftol * (1.0 + abs(f)):
            # the full quasi-Newton step predicts a decrease far below what the
            # objective can resolve: nothing is left to gain
            return MinimizeResult(x, f, True, "predicted decrease below tolerance", it,
                                  nfev, g, B)
        step = 1.0
        if max_step is not None:
            big = np.abs(d) * step > cap_step
            if big.any():
                step = float(np.min(cap_step[big] / np.abs(d[big])))
        accepted = False
        for _ in range(50):
            if step * np.max(np.abs(d) / (1.0 + np.abs(x))) < 1e-15:
                break   # the step no longer moves x: at the precision of f
            xn = np.minimum(np.maximum(x + step * d, lo), hi)
            if feasible is None or feasible(xn):
                fn, gn = fun_grad(xn)
                nfev += 1
                if np.isfinite(fn) and fn <= f + 1e-4 * np.dot(g, xn - x):
                    accepted = True
                    break
            step *= 0.5
        if not accepted:
            ok = np.max(np.abs(pg)) < 1e3 * gtol
            return MinimizeResult(x, f, bool(ok), "line search found no decrease", it, nfev,
                                  g, B)
        s = xn - x
        y = gn - g
        df = f - fn
        x, f, g = xn, fn, gn
        sy = float(np.dot(s, y))
        Bs = B @ s
        sBs = float(np.dot(s, Bs))
        if sy > 1e-12 * np.sqrt(np.dot(s, s) * np.dot(y, y)) and sBs > 0:
            B = B + np.outer(y, y) / sy - np.outer(Bs, Bs) / sBs   # BFGS (direct form)
            # the same update of the inverse (Nocedal & Wright, eq. 6.17)
            Ms = eye - np.outer(s, y) / sy
            Hinv = Ms @ Hinv @ Ms.T + np.outer(s, s) / sy
        if df < ftol * (1.0 + abs(f)):
            return MinimizeResult(x, f, True, "relative change in the objective below "
                                              "tolerance", it, nfev, g, B)
    return MinimizeResult(x, f, False, f"iteration limit ({max_iter}) reached", max_iter, nfev,
                          g, B)
