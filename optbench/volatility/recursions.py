"""Variance recursions of the GARCH family, kept apart from the modelling code.

Each function is one recursion over time, vectorised with numpy. The linear
recursions (GARCH, GJR-GARCH, EWMA) are written as a *blocked linear filter*:
``x_t = u_t + b * x_{t-1}`` is solved block by block with a lower-triangular
Toeplitz matrix of powers of ``b``, carrying the boundary value across blocks, so
that no Python loop runs over the observations and the variance and all of its
parameter derivatives are filtered in one matrix product. The EGARCH recursion is
non-linear (the standardised residual feeds back); it is solved for the whole path
at once by Newton's method, each round a time-varying linear recursion solved by a
prefix scan of affine maps (:func:`affine_filter`), with the sequential loop as the
fallback.

Plain reference versions (:func:`linear_filter_loop`, :func:`garch_variance_loop`,
:func:`affine_filter_loop`, :func:`egarch_adjoint_loop`) are kept only so that tests can check the fast versions against them.
"""
from __future__ import annotations

import functools
import math

import numpy as np

SQRT_2_OVER_PI = math.sqrt(2.0 / math.pi)  # E|z| for a standard normal z
LN_VARIANCE_CAP = 30.0  # cap on the log-variance in the EGARCH loop (overflow guard)


def _block_length(n: int) -> int:
    return max(8, min(128, int(math.sqrt(max(n, 1) / 2.0))))


_SINGLE_THREAD_MNK = 262_144


@functools.lru_cache(maxsize=64)
def _block_indices(L: int):
    """Lag indices and mask of the lower-triangular Toeplitz matrix of a block."""
    k = np.arange(L)
    lag = k[:, None] - k[None, :]
    return np.maximum(lag, 0), lag >= 0


def linear_filter(u: np.ndarray, b: float, x0: np.ndarray | float = 0.0) -> np.ndarray:
    """Solve ``x_t = u_t + b * x_{t-1}`` (t = 0..n-1) with ``x_{-1} = x0``.

    Parameters
    ----------
    u : ndarray, shape (..., n)
        Inputs; leading axes are independent channels filtered with the same ``b``.
    b : float
        Filter coefficient, ``0 <= b < 1`` in the uses here.
    x0 : float or ndarray broadcastable to ``u.shape[:-1]``
        Value before the first input.

    Returns
    -------
    ndarray, shape like ``u``

    Notes
    -----
    With blocks of length L, inside block m (k = 0..L-1)
    ``x_{mL+k} = sum_{j<=k} b^{k-j} u_{mL+j} + b^{k+1} c_m`` where ``c_m`` is the
    last value of the previous block; ``c_m`` itself obeys the same recursion at
    stride L with coefficient ``b^L`` and is solved by the same method on the
    (n/L)-long series of block ends. All terms are sums of non-negative powers of ``b``, so the result is
    as accurate as the direct loop (no division by powers of ``b``).
    """
    u = np.asarray(u, dtype=float)
    n = u.shape[-1]
    lead = u.shape[:-1]
    if n == 0:
        return u.copy()
    if 0.6 <= b < 1.0 and n >= 64 and u.ndim <= 2 and (u.ndim == 1 or u.shape[0] <= 16):
        if u.ndim == 1:
            return _scaled_cumsum_filter(u, float(b), float(x0))
        return _scaled_cumsum_filter(u, float(b), x0)
    if abs(b) < 0.6 and u.ndim <= 2 and (u.ndim == 1 or u.shape[0] <= 16):
        return _doubling_filter(u, float(b), x0)
    L = _block_length(n)
    nb = -(-n // L)
    pad = nb * L - n
    if pad:
        u = np.concatenate([u, np.zeros(lead + (pad,))], axis=-1)
    lagc, mask = _block_indices(L)
    b = float(b)
    x0 = np.broadcast_to(np.asarray(x0, dtype=float), lead)
    with np.errstate(under="ignore", over="ignore", invalid="ignore"):
        pw = b ** np.arange(L + 1)
        Tt = np.where(mask, pw[lagc], 0.0).T              # T[k, j] = b^(k-j), transposed
        U = u.reshape(-1, L)
        Y = np.empty_like(U)
        # small products only: OpenBLAS runs a product single-threaded below
        # M*N*K = 262,144, which keeps this fast on a busy machine
        step = max(1, _SINGLE_THREAD_MNK // (L * L))
        for i in range(0, U.shape[0], step):
            np.matmul(U[i:i + step], Tt, out=Y[i:i + step])
        Y = Y.reshape(lead + (nb, L))
        # carry into block m = last value of block m-1: the same recursion at
        # stride L with coefficient b^L (solved by calling this function again)
        carry = np.concatenate([x0[..., None],
                                linear_filter(Y[..., :-1, L - 1], pw[L], x0)], axis=-1)
        X = Y + carry[..., :, None] * pw[1:]
    return X.reshape(lead + (nb * L,))[..., :n]


def reverse_filter(w: np.ndarray, b: float) -> np.ndarray:
    """Solve ``l_t = w_t + b * l_{t+1}`` backwards in time with ``l_n = 0``.

    This is the adjoint of :func:`linear_filter`: for any inputs ``v``,
    ``sum_t w_t [F v]_t = sum_t v_t l_t``, which turns the gradient of a sum over
    filtered variances into one backward filter plus dot products.
    """
    return linear_filter(np.asarray(w)[..., ::-1], b)[..., ::-1]


def _doubling_filter(u: np.ndarray, b: float, x0) -> np.ndarray:
    """:func:`linear_filter` for ``|b| < 0.6`` by doubling.

    After the rounds with lags 1, 2, 4, ..., 2^(r-1) (each ``x_t += b^s x_{t-s}``,
    ``b^s`` squared every round) ``x_t = sum_{j < 2^r} b^j u_{t-j}``: the exact sum
    once ``2^r > t``, and otherwise short only of terms below ``b^(2^r) <= 1e-20``
    times the inputs (Hillis-Steele scan with a constant coefficient). At most
    seven rounds for ``|b| < 0.6``; about three times faster than the Toeplitz blocks
    on one channel.
    """
    x = np.array(u, dtype=float)
    n = x.shape[-1]
    x[..., 0] += b * np.asarray(x0, dtype=float)
    c = b
    s = 1
    while s < n and abs(c) > 1e-20:
        x[..., s:] += c * x[..., :-s]
        c *= c
        s *= 2
    return x


def _scaled_cumsum_filter(u: np.ndarray, b: float, x0) -> np.ndarray:
    """:func:`linear_filter` for ``0.6 <= b < 1`` by scaled cumulative sums, on one
    channel (``u`` of shape (n,), ``x0`` a float) or several (shape (r, n), ``x0`` a
    float or r values).

    Inside a block of length L, ``x_{mL+k} = b^k (sum_{j<=k} u_{mL+j} b^{-j}) +
    b^{k+1} c_m``; L is chosen so that ``b^{-L} <= 10^4`` (at most four digits of
    headroom are spent, so the result matches the loop to ~1e-15 relative to the
    block's scale). Block ends ``c_m`` are carried by a loop over the n/L blocks;
    the channels share every array operation (the same arithmetic, element by
    element, as filtering each channel alone).
    """
    n = u.shape[-1]
    lead = u.shape[:-1]
    L = int(min(128, 4.0 / -math.log10(b)))
    nb = -(-n // L)
    pad = nb * L - n
    if pad:
        u = np.concatenate([u, np.zeros(lead + (pad,))], axis=-1)
    bk = b ** np.arange(L)
    U = u.reshape(lead + (nb, L)) / bk
    U = np.cumsum(U, axis=-1)    # (a new array: in place costs a copy for the overlap)
    U *= bk
    bL = b ** L
    if not lead:
        ends = U[:, -1].tolist()
        carry = [0.0] * nb
        prev = x0
        for m in range(nb):
            carry[m] = prev
            prev = ends[m] + bL * prev
        U += np.array(carry)[:, None] * (b * bk)
        return U.reshape(-1)[:n]
    starts = np.broadcast_to(np.asarray(x0, dtype=float), lead).tolist()
    carry = np.empty(lead + (nb,))
    for r, (ends, prev) in enumerate(zip(U[..., -1].tolist(), starts)):
        row = [0.0] * nb
        for m in range(nb):
            row[m] = prev
            prev = ends[m] + bL * prev
        carry[r] = row
    U += carry[..., None] * (b * bk)
    return U.reshape(lead + (nb * L,))[..., :n]


def linear_filter_loop(u: np.ndarray, b: float, x0: float = 0.0) -> np.ndarray:
    """Reference loop for :func:`linear_filter` (tests only)."""
    u = np.asarray(u, dtype=float)
    x = np.empty_like(u)
    prev = x0
    for t in range(u.shape[-1]):
        prev = u[..., t] + b * prev
        x[..., t] = prev
    return x


def garch_variance(eps: np.ndarray, omega: float, alpha: float, gamma: float,
                   beta: float, backcast: float, *, grad: bool = False,
                   with_mean: bool = False, with_gamma: bool = True):
    """Conditional variances of GARCH(1,1) / GJR-GARCH(1,1), with derivatives.

    Parameters
    ----------
    eps : ndarray, shape (n,)
        Residuals ``e_t = r_t - mu``.
    omega, alpha, gamma, beta : float
        Variance parameters (``gamma = 0`` gives GARCH(1,1)).
    backcast : float
        Stand-in for ``e_{-1}^2`` and ``sigma^2_{-1}``.
    grad : bool
        Also return the derivatives of ``sigma^2_t`` with respect to
        (omega, alpha, gamma, beta) and, with ``with_mean``, mu.
    with_mean : bool
        Include the derivative with respect to the mean ``mu`` (as the first row).
    with_gamma : bool
        Include the derivative with respect to ``gamma`` (False for GARCH(1,1)).

    Returns
    -------
    sigma2 : ndarray, shape (n,)
    dsigma2 : ndarray, shape (k, n), only with ``grad``; rows ordered
        (mu,) omega, alpha, (gamma,) beta.

    Notes
    -----
    ``sigma^2_t = omega + (alpha + gamma * I[e_{t-1} < 0]) e_{t-1}^2
    + beta * sigma^2_{t-1}`` (Bollerslev 1986; Glosten, Jagannathan & Runkle 1993),
    started with ``e_{-1}^2 = sigma^2_{-1} = backcast`` and
    ``I[e_{-1} < 0] e_{-1}^2 = backcast / 2``. Every derivative obeys the same
    linear filter with coefficient beta:
    ``d sigma^2_t = d u_t + beta * d sigma^2_{t-1} (+ sigma^2_{t-1} for beta)``.
    """
    eps = np.asarray(eps, dtype=float)
    n = eps.shape[0]
    e2 = eps * eps
    neg = eps < 0
    a = np.empty(n)
    g = np.empty(n)
    a[0] = backcast
    a[1:] = e2[:-1]
    g[0] = 0.5 * backcast
    np.multiply(e2[:-1], neg[:-1], out=g[1:])    # e^2 on down days, else 0
    u = omega + alpha * a + gamma * g
    if not grad:
        return linear_filter(u, beta, backcast)
    s2 = linear_filter(u, beta, backcast)
    s2_lag = np.empty(n)
    s2_lag[0] = backcast
    s2_lag[1:] = s2[:-1]
    rows = []
    if with_mean:
        dm = np.zeros(n)
        dm[1:] = -2.0 * eps[:-1] * (alpha + gamma * neg[:-1])
        rows.append(dm)
    rows += [np.ones(n), a, g, s2_lag] if with_gamma else [np.ones(n), a, s2_lag]
    d = linear_filter(np.stack(rows), beta, 0.0)
    return s2, d


def garch_variance_loop(eps, omega, alpha, gamma, beta, backcast):
    """Reference loop for :func:`garch_variance` (tests only)."""
    s2 = np.empty(len(eps))
    prev_e2, prev_neg, prev_s2 = backcast, 0.5 * backcast, backcast
    for t, e in enumerate(eps):
        s2[t] = omega + alpha * prev_e2 + gamma * prev_neg + beta * prev_s2
        prev_e2, prev_s2 = e * e, s2[t]
        prev_neg = e * e if e < 0 else 0.0
    return s2


def affine_filter(a: np.ndarray, b: np.ndarray, x0: np.ndarray | float = 0.0) -> np.ndarray:
    """Solve the time-varying linear recursion ``x_t = a_t x_{t-1} + b_t`` with
    ``x_{-1} = x0``, without a loop over time.

    Parameters
    ----------
    a : ndarray, shape (n,)
        Coefficients (any sign).
    b : ndarray, shape (..., n)
        Inputs; leading axes are channels sharing the coefficients ``a``.
    x0 : float or ndarray broadcastable to ``b.shape[:-1]``

    Returns
    -------
    ndarray, shape like ``b``

    Notes
    -----
    Each step is the affine map ``x -> a_t x + b_t``; maps compose associatively,
    ``(a2, b2) o (a1, b1) = (a2 a1, a2 b1 + b2)``, so all prefix compositions
    follow from ceil(log2 n) vectorised doubling rounds (the Hillis-Steele scan;
    Blelloch 1990, *Prefix sums and their applications*, CMU-CS-90-190). Only
    products and sums of the inputs occur (no division), so the result agrees with
    the sequential loop to rounding.
    """
    A = np.array(a, dtype=float)
    B = np.array(b, dtype=float)
    n = B.shape[-1]
    if n == 0:
        return B
    B[..., 0] += A[0] * np.asarray(x0, dtype=float)
    An = np.empty_like(A)
    s = 1
    while s < n:
        B[..., s:] += A[s:] * B[..., :-s]
        _next_products(A, An, s)
        A, An = An, A
        s *= 2
    return B


def _next_products(A: np.ndarray, out: np.ndarray, s: int) -> None:
    """One doubling round of the coefficient products, ``out_t = A_t A_{t-s}`` for
    ``t >= s`` and ``out_t = A_t`` before, written into a second buffer: the same
    products as the in-place update ``A[s:] *= A[:-s]`` without the copy of the
    overlapping operand that the in-place form needs."""
    out[:s] = A[:s]
    np.multiply(A[s:], A[:-s], out=out[s:])


def affine_filter_loop(a, b, x0=0.0) -> np.ndarray:
    """Reference loop for :func:`affine_filter` (tests only)."""
    b = np.asarray(b, dtype=float)
    x = np.empty_like(b)
    prev = np.asarray(x0, dtype=float)
    for t in range(b.shape[-1]):
        prev = a[t] * prev + b[..., t]
        x[..., t] = prev
    return x


def affine_scan_levels(a: np.ndarray) -> list:
    """The coefficient products of :func:`affine_filter`'s doubling rounds for the
    coefficients ``a``, kept so that several right-hand sides can be filtered with
    the same coefficients at half the cost (:func:`affine_scan_apply`)."""
    A = np.array(a, dtype=float)
    n = A.shape[0]
    levels = []
    s = 1
    while s < n:
        # each round's products go to a new array, so the previous one is kept as
        # the level without a copy
        levels.append((s, A[s:]))
        An = np.empty_like(A)
        _next_products(A, An, s)
        A = An
        s *= 2
    return levels


def affine_scan_apply(levels: list, b: np.ndarray) -> np.ndarray:
    """``x_t = a_t x_{t-1} + b_t`` with ``x_{-1} = 0`` for the coefficients whose
    :func:`affine_scan_levels` are given (the same rounds as :func:`affine_filter`)."""
    B = np.array(b, dtype=float)
    for s, As in levels:
        B[..., s:] += As * B[..., :-s]
    return B


NEWTON_TOL = 1e-13      # largest residual of the EGARCH recursion accepted (log-variance)
NEWTON_MAX_ITER = 40


def egarch_log_variance(eps: np.ndarray, omega: float, alpha: float, gamma: float,
                        beta: float, ln_backcast: float, *,
                        start: np.ndarray | None = None) -> np.ndarray:
    """Log conditional variances of EGARCH(1,1) (Nelson 1991).

    Parameters
    ----------
    eps : ndarray, shape (n,)
        Residuals.
    omega, alpha, gamma, beta : float
    ln_backcast : float
        ``ln sigma^2_{-1}``.
    start : ndarray, shape (n,), optional
        A guess of the path (e.g. the path at nearby parameters); a cheap
        exponentially weighted variance is used otherwise.

    Notes
    -----
    ``ln sigma^2_t = omega + alpha (|z_{t-1}| - sqrt(2/pi)) + gamma z_{t-1}
    + beta ln sigma^2_{t-1}``, ``z_t = e_t / sigma_t``; at t = 0 the shock terms
    are absent and ``ln sigma^2_{-1} = ln_backcast``.

    Because ``sign z_t = sign e_t``, the shock term is ``k_t exp(-h_t / 2)`` with
    ``k_t = (alpha + gamma) e_t`` for ``e_t >= 0`` and ``(gamma - alpha) e_t``
    otherwise, so the whole path ``h`` solves the smooth causal system
    ``F_t(h) = h_t - c - k_{t-1} exp(-h_{t-1}/2) - beta h_{t-1} = 0``
    (``c = omega - alpha sqrt(2/pi)``). Newton's method on the path solves, per
    round, the linear recursion ``d_t = J_t d_{t-1} - F_t`` with
    ``J_t = beta - k_{t-1} exp(-h_{t-1}/2) / 2`` by :func:`affine_filter`, i.e.
    without a loop over days; it stops when ``max |F_t| <= 1e-13``. If it does not
    converge in 40 rounds, or the path leaves [-30, 30] (the overflow guard of the
    loop), the sequential loop :func:`egarch_log_variance_loop` is used instead, so
    the result is always the loop's up to rounding.
    """
    e = np.asarray(eps, dtype=float)
    n = e.shape[0]
    cap = LN_VARIANCE_CAP
    h0 = min(max(omega + beta * ln_backcast, -cap), cap)
    if n < 2:
        return np.full(n, h0)
    const = omega - alpha * SQRT_2_OVER_PI
    k = np.where(e[:-1] >= 0, alpha + gamma, gamma - alpha) * e[:-1]
    with np.errstate(over="ignore", invalid="ignore", under="ignore"):
        if start is not None and start.shape == (n,) and np.all(np.isfinite(start)):
            h = start.copy()
        else:
            v0 = math.exp(ln_backcast)
            a = np.empty(n)
            a[0] = v0
            a[1:] = e[:-1] * e[:-1]
            h = np.log(linear_filter(0.06 * a, 0.94, v0) + 1e-300)
        h[0] = h0
        levels = None
        m_prev = math.inf
        for _ in range(NEWTON_MAX_ITER):
            w = k * np.exp(-0.5 * h[:-1])
            r = h[1:] - (const + w + beta * h[:-1])
            m = float(np.abs(r).max())
            if m <= NEWTON_TOL:
                if float(np.abs(h).max()) <= cap:
                    return h
                break
            if not math.isfinite(m):
                break
            if levels is None or m > 1e-3 * m_prev:
                # Newton: the Jacobian at the current path (its scan kept for the
                # next rounds while they converge fast: the chord method)
                levels = affine_scan_levels(beta - 0.5 * w)
            h[1:] -= affine_scan_apply(levels, r)
            m_prev = m
    return egarch_log_variance_loop(e, omega, alpha, gamma, beta, ln_backcast)


def egarch_log_variance_loop(eps: np.ndarray, omega: float, alpha: float, gamma: float,
                             beta: float, ln_backcast: float) -> np.ndarray:
    """EGARCH(1,1) log-variances by the sequential loop on Python floats, with the
    log-variance kept in [-30, 30] so that a wild trial parameter cannot overflow
    (the fallback and reference of :func:`egarch_log_variance`)."""
    e = np.asarray(eps, dtype=float).tolist()
    n = len(e)
    out = [0.0] * n
    if n == 0:
        return np.array(out)
    # alpha (|z| - sqrt(2/pi)) + gamma z = c0 + (alpha + gamma) z for z >= 0,
    # c0 + (gamma - alpha) z for z < 0, with c0 = -alpha sqrt(2/pi)
    const = omega - alpha * SQRT_2_OVER_PI
    up, down = alpha + gamma, gamma - alpha
    exp = math.exp
    cap = LN_VARIANCE_CAP
    lnv = omega + beta * ln_backcast
    lnv = cap if lnv > cap else (-cap if lnv < -cap else lnv)
    out[0] = lnv
    for t in range(1, n):
        z = e[t - 1] * exp(-0.5 * lnv)
        lnv = const + (up * z if z >= 0 else down * z) + beta * lnv
        if lnv > cap:
            lnv = cap
        elif lnv < -cap:
            lnv = -cap
        out[t] = lnv
    return np.array(out)


def egarch_jacobian(z: np.ndarray, alpha: float, gamma: float, beta: float) -> np.ndarray:
    """``J_{t+1} = dh_{t+1}/dh_t = beta - (alpha |z_t| + gamma z_t) / 2`` for
    t = 0..n-2 (``dz_t/dh_t = -z_t/2``), the coefficients of EGARCH's linearised
    recursion."""
    zl = np.asarray(z, dtype=float)[:-1]
    return beta - 0.5 * (alpha * np.abs(zl) + gamma * zl)


def egarch_adjoint(z: np.ndarray, lam_direct: np.ndarray, alpha: float, gamma: float,
                   beta: float) -> np.ndarray:
    """Backward (adjoint) recursion of EGARCH(1,1) for the gradient of a sum.

    With ``h_t = ln sigma^2_t`` and ``a_t = dL/dh_t`` holding the other h fixed,
    the total derivative obeys ``lam_t = a_t + J_{t+1} lam_{t+1}``, ``lam_{n-1} =
    a_{n-1}``, with ``J`` from :func:`egarch_jacobian`; solved backwards in time by
    :func:`affine_filter` (no loop over days).
    """
    a = np.asarray(lam_direct, dtype=float)
    n = a.shape[0]
    if n == 0:
        return a.copy()
    J = egarch_jacobian(z, alpha, gamma, beta)
    coef = np.empty(n)
    coef[0] = 0.0
    coef[1:] = J[::-1]
    return affine_filter(coef, a[::-1], 0.0)[::-1]


def egarch_adjoint_loop(z, lam_direct, alpha: float, gamma: float, beta: float) -> np.ndarray:
    """Reference loop for :func:`egarch_adjoint` (tests only)."""
    a = np.asarray(lam_direct, dtype=float).tolist()
    z = np.asarray(z, dtype=float).tolist()
    n = len(a)
    out = [0.0] * n
    lam = a[n - 1]
    out[n - 1] = lam
    up, down = 0.5 * (alpha + gamma), 0.5 * (gamma - alpha)
    for t in range(n - 2, -1, -1):
        zt = z[t]
        lam = a[t] + (beta - (up * zt if zt >= 0 else down * zt)) * lam
        out[t] = lam
    return np.array(out)


def ewma_variance(eps: np.ndarray, lam: float, backcast: float) -> np.ndarray:
    """EWMA variances ``sigma^2_t = lam sigma^2_{t-1} + (1 - lam) e_{t-1}^2``.

    Started with ``sigma^2_{-1} = e_{-1}^2 = backcast`` (J.P. Morgan/Reuters,
    *RiskMetrics Technical Document*, 1996, lambda = 0.94 for daily data).
    """
    eps = np.asarray(eps, dtype=float)
    a = np.empty(eps.shape[0])
    a[0] = backcast
    a[1:] = eps[:-1] ** 2
    return linear_filter((1.0 - lam) * a, lam, backcast)


def backcast_value(eps: np.ndarray, tau: int = 75, decay: float = 0.94) -> float:
    """Start-up variance: exponentially weighted average of early squared residuals.

    ``sum_{i<tau} w_i e_i^2 / sum w_i`` with ``w_i = decay^i`` and tau = 75 — the
    convention of the arch library's variance processes (arch.univariate.volatility,
    ``backcast``), used here so that likelihoods agree with arch on the same data.
    """
    eps = np.asarray(eps, dtype=float)
    tau = min(tau, eps.shape[0])
    w = decay ** np.arange(tau)
    return float(np.sum(w * eps[:tau] ** 2) / np.sum(w))
