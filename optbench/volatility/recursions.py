"""Variance recursions of the GARCH family, kept apart from the modelling code.

Each function is one recursion over time, vectorised with numpy. The linear
recursions (GARCH, GJR-GARCH, EWMA) are written as a *blocked linear filter*:
``x_t = u_t + b * x_{t-1}`` is solved block by block with a lower-triangular
Toeplitz matrix of powers of ``b``, carrying the boundary value across blocks, so
that no Python loop runs over the observations and the variance and all of its
parameter derivatives are filtered in one matrix product. The EGARCH recursion is
non-linear (the standardised residual feeds back), so it is a tight loop over
time on Python floats.

Plain reference versions (:func:`linear_filter_loop`, :func:`garch_variance_loop`)
are kept only so that tests can check the fast versions against them.
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
        starts = np.broadcast_to(np.asarray(x0, dtype=float), lead)
        return np.stack([_scaled_cumsum_filter(row, float(b), float(s0))
                         for row, s0 in zip(u, starts)])
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


def _scaled_cumsum_filter(u: np.ndarray, b: float, x0: float) -> np.ndarray:
    """One-channel :func:`linear_filter` for ``0.6 <= b < 1`` by scaled cumulative sums.

    Inside a block of length L, ``x_{mL+k} = b^k (sum_{j<=k} u_{mL+j} b^{-j}) +
    b^{k+1} c_m``; L is chosen so that ``b^{-L} <= 10^4`` (at most four digits of
    headroom are spent, so the result matches the loop to ~1e-15 relative to the
    block's scale). Block ends ``c_m`` are carried by a loop over the n/L blocks.
    """
    n = u.shape[0]
    L = int(min(128, 4.0 / -math.log10(b)))
    nb = -(-n // L)
    pad = nb * L - n
    if pad:
        u = np.concatenate([u, np.zeros(pad)])
    bk = b ** np.arange(L)
    U = u.reshape(nb, L) / bk
    np.cumsum(U, axis=1, out=U)
    U *= bk
    ends = U[:, -1].tolist()
    bL = b ** L
    carry = [0.0] * nb
    prev = x0
    for m in range(nb):
        carry[m] = prev
        prev = ends[m] + bL * prev
    U += np.array(carry)[:, None] * (b * bk)
    return U.reshape(-1)[:n]


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
                   with_mean: bool = False):
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

    Returns
    -------
    sigma2 : ndarray, shape (n,)
    dsigma2 : ndarray, shape (k, n), only with ``grad``; rows ordered
        (mu,) omega, alpha, gamma, beta.

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
    g[1:] = np.where(neg[:-1], e2[:-1], 0.0)
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
    rows += [np.ones(n), a, g, s2_lag]
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


def egarch_log_variance(eps: np.ndarray, omega: float, alpha: float, gamma: float,
                        beta: float, ln_backcast: float) -> np.ndarray:
    """Log conditional variances of EGARCH(1,1) (Nelson 1991).

    Notes
    -----
    ``ln sigma^2_t = omega + alpha (|z_{t-1}| - sqrt(2/pi)) + gamma z_{t-1}
    + beta ln sigma^2_{t-1}``, ``z_t = e_t / sigma_t``; at t = 0 the shock terms
    are absent and ``ln sigma^2_{-1} = ln_backcast``. The log-variance is kept in
    [-30, 30] to keep a wild trial parameter from overflowing. The recursion is
    non-linear, so this is a loop over time on Python floats.
    """
    e = np.asarray(eps, dtype=float).tolist()
    n = len(e)
    out = [0.0] * n
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


def egarch_adjoint(z: list, lam_direct: np.ndarray, alpha: float, gamma: float,
                   beta: float) -> np.ndarray:
    """Backward (adjoint) recursion of EGARCH(1,1) for the gradient of a sum.

    With ``h_t = ln sigma^2_t`` and ``a_t = dL/dh_t`` holding the other h fixed,
    the total derivative obeys ``lam_t = a_t + J_{t+1} lam_{t+1}``, ``lam_{n-1} =
    a_{n-1}``, where ``J_{t+1} = dh_{t+1}/dh_t = beta - (alpha |z_t| + gamma z_t)/2``
    (``dz_t/dh_t = -z_t/2``). A loop over time on Python floats.
    """
    a = lam_direct.tolist()
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
