"""A small bound-constrained quasi-Newton minimiser for the GARCH-family likelihoods.

numpy only: ``scipy.optimize`` costs about half a second to import on the machines
optbench targets, more than a whole fit, so the estimator uses this instead.
"""
from __future__ import annotations

import math
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
                 gtol: float = 1e-9, ftol: float = 1e-15, gain_tol: float = 0.0,
                 stop_if=None) -> MinimizeResult:
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
    stop_if : callable, optional
        ``(x, f, gradient) -> str or None``, asked after every accepted step: a
        string stops the climb there (``success`` False, the string as ``message``),
        e.g. when the caller knows where the climb will end.

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
    cb_viol = None if C is None else cb + cviol
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
    H = (V / wp) @ V.T            # inverse of the positive definite start
    eye = np.eye(k)
    span = np.maximum(hi - lo, 1e-12)
    cap_step = None if max_step is None else np.asarray(max_step, dtype=float)
    lo_tol = lo + 1e-12 * span
    hi_tol = hi - 1e-12 * span
    work = []

    def done(success, message, it):
        try:
            Bh = np.linalg.inv(H)
        except np.linalg.LinAlgError:
            Bh = None
        return MinimizeResult(x, f, bool(success), message, it, nfev, g, Bh, tuple(work))

    for it in range(1, max_iter + 1):
        at_lo = x <= lo_tol
        at_hi = x >= hi_tol
        free = ~((at_lo & (g > 0)) | (at_hi & (g < 0)))
        if C is not None:
            slack = cb - C @ x
            near = [int(i) for i in (slack <= ctol).nonzero()[0]]
            # working rows: those at the limit that the steepest-descent direction on
            # the free coordinates would cross (refined below by the multipliers' signs)
            work = [i for i in near if float(C[i, free] @ g[free]) < 0.0]
        else:
            near = work = []
        Hg = H @ g
        for _ in range(2 * k + 4):
            d, nu = _step(H, Hg, free, C, work)
            if nu is not None and float(nu.min()) < 0.0:
                work.pop(int(nu.argmin()))      # the row does not hold the step back
                continue
            # a free coordinate on a bound that the step would cross is held
            out = free & ((at_lo & (d < 0)) | (at_hi & (d > 0)))
            if out.any():
                free &= ~out
                continue
            # a row at its limit that the step would cross joins the working set
            cross = [i for i in near if i not in work and float(C[i] @ d) > 0.0]
            if cross:
                work.append(cross[0])
                continue
            break
        r = g if nu is None else g + C[work].T @ nu
        pg = r * free
        if not free.any() or float(np.abs(pg).max()) < gtol:
            return done(True, "projected gradient below tolerance", it)
        dg = float(d @ g)
        if not dg < 0:
            c = max(1.0, 1.0 / max(float(np.diag(H).min()), 1e-300))
            H = eye / c
            d, _ = _step(H, H @ g, free, C, work)
        elif -0.5 * dg < max(0.1 * ftol * (1.0 + abs(f)), gain_tol):
            # the full quasi-Newton step predicts a decrease far below what the
            # objective can resolve: nothing is left to gain
            return done(True, "predicted decrease below tolerance", it)
        step = 1.0
        if cap_step is not None:
            big = np.abs(d) > cap_step
            if big.any():
                step = float((cap_step[big] / np.abs(d[big])).min())
        if C is not None:
            # ratio test: stop where the step would cross a row not in the working set
            Cd = C @ d
            for i in (Cd > 0).nonzero()[0]:
                if int(i) not in work:
                    step = min(step, max(float(slack[i]) / float(Cd[i]), 0.0))
        accepted = False
        rel = float((np.abs(d) / (1.0 + np.abs(x))).max())
        for _ in range(50):
            if step * rel < 1e-15:
                break   # the step no longer moves x: at the precision of f
            xn = np.minimum(np.maximum(x + step * d, lo), hi)
            if ((C is None or bool((C @ xn <= cb_viol).all()))
                    and (feasible is None or feasible(xn))):
                fn, gn = fun_grad(xn)
                nfev += 1
                if math.isfinite(fn) and fn <= f + 1e-4 * float(g @ (xn - x)):
                    accepted = True
                    break
            step *= 0.5
        if not accepted:
            return done(float(np.abs(pg).max()) < 1e3 * gtol, "line search found no decrease",
                        it)
        s = xn - x
        y = gn - g
        df = f - fn
        x, f, g = xn, fn, gn
        sy = float(s @ y)
        if sy > 1e-12 * math.sqrt(float(s @ s) * float(y @ y)):
            # BFGS update of the inverse Hessian (Nocedal & Wright, eq. 6.17)
            Hy = H @ y
            H = (H + ((sy + float(y @ Hy)) / (sy * sy)) * (s[:, None] * s)
                 - (Hy[:, None] * s + s[:, None] * Hy) / sy)
        if df < ftol * (1.0 + abs(f)):
            return done(True, "relative change in the objective below tolerance", it)
        if stop_if is not None:
            why = stop_if(x, f, g)
            if why:
                return done(False, why, it)
    return done(False, f"iteration limit ({max_iter}) reached", max_iter)


def _step(H, Hg, free, C, work):
    """Quasi-Newton step with the held coordinates and the working rows as
    equalities, from the inverse Hessian ``H`` (range-space form): with ``E`` the
    held coordinates' unit vectors and the rows, ``d = -H (g + E lam)`` and
    ``E' d = 0``, so ``(E' H E) lam = -E' H g``. Returns the step and the rows'
    multipliers (None without rows); the same step as solving
    ``[B_ff A_f'; A_f 0] [d_f; nu] = [-g_f; 0]`` with ``B = H^-1``."""
    held = (~free).nonzero()[0]
    nh, m = held.size, len(work)
    if nh == 0 and m == 0:
        return -Hg, None
    if nh == 1 and m == 0:
        # one held coordinate j: E = e_j, so HE = H[:, j], S = H[j, j] (the same
        # numbers as the general form below, without building E)
        j = int(held[0])
        Hj = H[:, j]
        d = -(Hg + Hj * (-Hg[j] / Hj[j]))
        d[j] = 0.0
        return d, None
    k = Hg.shape[0]
    E = np.zeros((k, nh + m))
    E[held, np.arange(nh)] = 1.0
    if m:
        E[:, nh:] = C[work].T
    HE = H @ E
    S = E.T @ HE
    rhs = -(E.T @ Hg)
    try:
        lam = rhs / S[0, 0] if nh + m == 1 else np.linalg.solve(S, rhs)
    except np.linalg.LinAlgError:
        lam = np.linalg.lstsq(S, rhs, rcond=None)[0]
    d = -(Hg + HE @ lam)
    d[held] = 0.0
    return d, (lam[nh:] if m else None)
