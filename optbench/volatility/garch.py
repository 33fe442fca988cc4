"""Maximum-likelihood fits of GARCH(1,1), GJR-GARCH(1,1) and EGARCH(1,1).

``fit_garch`` estimates a model on daily decimal log returns; ``fix_garch`` evaluates
given parameters without estimating. Both return a :class:`GarchFit`, which
forecasts (term structure and parameter-uncertainty band), filters new returns with
the parameters held, and simulates.

Estimation runs on returns divided by their sample standard deviation (so the
variance is of order one for the optimiser); every reported number is converted
back to decimal-return units.
"""
from __future__ import annotations

import functools
import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from optbench.errors import InputError
from optbench.pricing.special import digamma, gammaln
from optbench.volatility import forecast as fc
from optbench.volatility.distributions import (LOG_2PI, NU_MIN, get_distribution,
                                               normal_loglik, std_t_loglik,
                                               std_t_loglik_sums)
from optbench.volatility.recursions import (LN_VARIANCE_CAP, SQRT_2_OVER_PI,
                                            affine_filter, backcast_value,
                                            egarch_jacobian,
                                            egarch_adjoint, egarch_log_variance,
                                            garch_variance, linear_filter,
                                            reverse_filter)
from optbench.volatility.optimize import minimize_box
from optbench.volatility.specs import EWMA_LAMBDA, get_spec

MIN_RETURNS = 250
MODELS = ("garch", "gjr", "egarch")
FALLBACK = {"egarch": "gjr", "gjr": "garch", "garch": "ewma"}
STATIONARITY_MARGIN = 1e-6
#: the optimiser stops when its next quasi-Newton step predicts a log-likelihood gain
#: below this: 10 times below the first-order check's tolerance
#: (OPTIMALITY_GAIN_TOL), 100 times below the 1e-6 at which fits are compared (at
#: 2e-9 the last step of a climb gained about 1e-8 and cost one more evaluation)
STOP_GAIN = 1e-8
#: ... and for GARCH climbed only as the start of GJR or EGARCH: within about this of
#: its optimum is as good a start (measured on arch's sp500, nasdaq, wti and vix:
#: from 1e-3 to 0.1 saves 1-2 GARCH evaluations per fit and costs GJR and EGARCH
#: none); a GJR fit from it must end at least QUICK_MARGIN (ten times more) above
#: it, else GARCH is fitted fully and GJR climbs again from its optimum
QUICK_STOP_GAIN = 0.1
QUICK_MARGIN = 1.0


# ---------------------------------------------------------------------------------
# input checks
# ---------------------------------------------------------------------------------
def _check_returns(returns) -> np.ndarray:
    try:
        y = np.asarray(returns, dtype=float)
    except (TypeError, ValueError):
        raise InputError("returns", "not numeric") from None
    if y.ndim != 1:
        y = y.squeeze()
        if y.ndim != 1:
            raise InputError("returns", f"expected a 1-D series, got shape {y.shape}")
    bad = ~np.isfinite(y)
    if bad.any():
        first = int(np.flatnonzero(bad)[0])
        raise InputError("returns", f"{int(bad.sum())} missing or non-finite value(s) "
                                    f"(first at position {first}); clean the history "
                                    "first, optbench does not fill gaps")
    if y.shape[0] < MIN_RETURNS:
        raise InputError("returns", f"only {y.shape[0]} returns; a volatility model needs "
                                    f"at least {MIN_RETURNS} (about a year of trading days)")
    if float(np.std(y)) <= 1e-12 * max(1.0, float(np.max(np.abs(y)))) or np.ptp(y) == 0:
        raise InputError("returns", "returns are constant (prices do not move); "
                                    "no volatility can be estimated")
    return y


#: fewest non-zero returns a fit needs (half of MIN_RETURNS; optbench's own choice)
MIN_MOVING_RETURNS = 125
#: a run of this many exactly-zero returns in a row is read as prices that did not
#: update (a live listed underlying practically never closes unchanged 20 trading
#: days in a row; optbench's own threshold, not a published one)
MAX_ZERO_RUN = 20
#: largest forecast daily variance accepted, as a multiple of the sample variance
#: (a forecast vol 100 times the history's is read as a broken fit; optbench's own
#: threshold)
MAX_FORECAST_VARIANCE_RATIO = 1e4


def _check_usable(y: np.ndarray) -> None:
    moving = int(np.count_nonzero(y))
    if moving < MIN_MOVING_RETURNS:
        raise InputError("returns", f"only {moving} of {y.shape[0]} returns are non-zero; "
                                    f"a volatility model needs at least "
                                    f"{MIN_MOVING_RETURNS} days on which the price moved")


def _longest_zero_run(y: np.ndarray) -> tuple[int, int]:
    """(length, start index) of the longest run of exactly-zero returns."""
    z = np.concatenate([[0], (y == 0).astype(np.int8), [0]])
    edges = np.flatnonzero(np.diff(z))
    if edges.size == 0:
        return 0, -1
    starts, ends = edges[::2], edges[1::2]
    i = int(np.argmax(ends - starts))
    return int(ends[i] - starts[i]), int(starts[i])


def _stale_reason(y: np.ndarray) -> str | None:
    """Why no GARCH-family model is fitted to these returns (None if nothing)."""
    run, start = _longest_zero_run(y)
    if run < MAX_ZERO_RUN:
        return None
    where = (f"the last {run}" if start + run == y.shape[0]
             else f"positions {start}-{start + run - 1}")
    return (f"{run} returns in a row are exactly zero ({where} of {y.shape[0]}): the "
            "price did not change, which a GARCH-family likelihood reads as a variance "
            "going to zero; check the price history for stale closes")


def _check_choice(name: str, value: str, allowed) -> None:
    if value not in allowed:
        raise InputError(name, f"{value!r} is not one of {', '.join(allowed)}")



#: elements per BLAS call on the hot path: OpenBLAS runs smaller products on one
#: thread, which keeps fits fast when other processes load the machine (threaded
#: products then wait for busy cores)
_BLAS_CHUNK = 8192


def _dot(a: np.ndarray, b: np.ndarray) -> float:
    """``a . b`` for long 1-D arrays, in single-threaded pieces."""
    n = a.shape[0]
    if n <= _BLAS_CHUNK:
        return float(np.dot(a, b))
    return float(sum(np.dot(a[i:i + _BLAS_CHUNK], b[i:i + _BLAS_CHUNK])
                     for i in range(0, n, _BLAS_CHUNK)))


def _gram(S: np.ndarray, T: np.ndarray | None = None) -> np.ndarray:
    """``S' T`` (``T = S`` by default) for tall (n, k) arrays, in single-threaded
    row blocks."""
    T = S if T is None else T
    n = S.shape[0]
    step = max(1, 262_144 // max(1, S.shape[1] * T.shape[1]))
    out = S[:step].T @ T[:step]
    for i in range(step, n, step):
        out += S[i:i + step].T @ T[i:i + step]
    return out

# ---------------------------------------------------------------------------------
# the likelihood problem (scaled units)
# ---------------------------------------------------------------------------------
class _Problem:
    """Log-likelihood of scaled returns ``y`` under (mean, variance spec, distribution)."""

    def __init__(self, y: np.ndarray, model: str, dist: str, has_mu: bool,
                 backcast: float):
        self.y = y
        self.n = y.shape[0]
        self.spec = get_spec(model)
        self.dist = get_distribution(dist)
        self.has_mu = has_mu
        self.backcast = backcast
        self.names = ((["mu"] if has_mu else []) + list(self.spec.param_names)
                      + list(self.dist.param_names))
        self.k = len(self.names)
        self.i_vol = 1 if has_mu else 0
        self.n_vol = len(self.spec.param_names)
        self._h_guess = None   # last EGARCH log-variance path: the next solve's start

    def unpack(self, theta):
        mu = theta[0] if self.has_mu else 0.0
        vol = dict(zip(self.spec.param_names, theta[self.i_vol:self.i_vol + self.n_vol]))
        nu = theta[-1] if self.dist.name == "t" else None
        return mu, vol, nu

    def variance(self, theta, grad=False):
        mu, p, _ = self.unpack(theta)
        eps = self.y - mu
        name = self.spec.name
        if name in ("garch", "gjr"):
            out = garch_variance(eps, p["omega"], p["alpha"], p.get("gamma", 0.0),
                                 p["beta"], self.backcast, grad=grad, with_mean=self.has_mu,
                                 with_gamma=name == "gjr")
            return eps, out
        if name == "egarch":
            lnv = self._egarch_path(eps, p)
            return eps, np.exp(lnv)
        lam = EWMA_LAMBDA
        a = np.empty(self.n)
        a[0] = self.backcast
        a[1:] = eps[:-1] ** 2
        return eps, linear_filter((1 - lam) * a, lam, self.backcast)

    def loglik_obs(self, theta, variance=None):
        eps, s2 = self.variance(theta) if variance is None else variance
        _, _, nu = self.unpack(theta)
        if not np.all(s2 > 0) or not np.all(np.isfinite(s2)):
            return None
        if nu is None:
            return normal_loglik(eps, s2)
        return std_t_loglik(eps, s2, nu)

    def score_obs(self, theta):
        """Per-observation log-likelihood and analytic scores (linear specs only)."""
        eps, (s2, d) = self.variance(theta, grad=True)
        _, _, nu = self.unpack(theta)
        if not np.all(s2 > 0) or not np.all(np.isfinite(s2)):
            return None, None
        if nu is None:
            ll, d_s2, d_e = normal_loglik(eps, s2, grad=True)
            d_nu = None
        else:
            ll, d_s2, d_e, d_nu = std_t_loglik(eps, s2, nu, grad=True)
        sc = (d * d_s2).T                          # (n, k_mean + k_vol)
        if self.has_mu:
            sc[:, 0] -= d_e
        if d_nu is not None:
            sc = np.column_stack([sc, d_nu])
        return ll, sc

    # objective for the optimiser: minus the mean log-likelihood
    def objective(self, theta):
        if self.spec.name in ("garch", "gjr"):
            return self._linear_objective(theta)
        ll = self.loglik_obs(theta)
        if ll is None or not np.all(np.isfinite(ll)):
            return 1e6
        return -float(np.mean(ll))

    def _t_information(self, theta):
        """Conditional information matrix of GARCH or GJR with unit-variance
        Student-t innovations, and ``(f, gradient)``, at ``theta`` (None when the
        variance path is not usable).

        With ``w_t = (d sigma^2_t / d theta) / sigma^2_t`` and ``b_t = q_t / (1 + q_t)``,
        ``q_t = e_t^2 / ((nu - 2) sigma^2_t)``, which is Beta(1/2, nu/2) under the
        model: the score in ``ln sigma^2`` is ``a = ((nu+1) b - 1)/2``, in ``nu``
        ``c = [psi((nu+1)/2) - psi(nu/2) - 1/(nu-2) + ln(1-b) + (nu+1) b/(nu-2)]/2``
        (the formulas of :func:`std_t_loglik`), and in the mean through the residual
        ``-(nu+1) e / (sigma^2 (nu-2)(1+q))``. Their second moments from the Beta
        moments (``Var b = 2 nu / ((nu+1)^2 (nu+3))``, ``Var ln(1-b) = psi'(nu/2) -
        psi'((nu+1)/2)``, ``Cov(b, ln(1-b)) = -2/(nu+1)^2``) give

        ``I = sum_t [E a^2 w_t w_t' + E(a c) (w_t e_nu' + e_nu w_t') + E c^2 e_nu
        e_nu' + D e_mu e_mu' / sigma^2_t]`` with ``E a^2 = nu / (2 (nu+3))`` and ``D =
        nu (nu+1) / ((nu-2)(nu+3))`` (the expected Hessian given the past: Bollerslev
        1987, *Rev. Econ. Stat.* 69, and Fiorentini, Sentana & Calzolari 2003, *J.
        Bus. Econ. Stat.* 21, derived here in ``nu``). Unlike the outer product of
        the scores, it does not weight the fat-tailed days' squared scores;
        measured on arch's sp500, nasdaq, wti and vix it leads the GARCH-t and
        GJR-t climbs to the same optimum with 0-8 fewer evaluations (one more on
        wti's GJR-t).
        """
        _, _, nu = self.unpack(theta)
        eps, (s2, d) = self.variance(theta, grad=True)
        if not np.all(s2 > 0) or not np.all(np.isfinite(s2)):
            return None
        ll, d_s2, d_e, d_nu = std_t_loglik(eps, s2, nu, grad=True)
        g_vol = _gram(d.T, d_s2[:, None])[:, 0]
        if self.has_mu:
            g_vol[0] -= d_e.sum()
        g0 = -np.append(g_vol, float(np.sum(d_nu))) / self.n
        f0 = -float(ll.sum()) / self.n
        half_nu, half_nu1 = 0.5 * nu, 0.5 * (nu + 1.0)
        var_b = 2.0 * nu / ((nu + 1.0) ** 2 * (nu + 3.0))
        var_l = _trigamma(half_nu) - _trigamma(half_nu1)
        cov_bl = -0.5 / half_nu1 ** 2
        r = (nu + 1.0) / (nu - 2.0)
        e_aa = nu / (2.0 * (nu + 3.0))
        e_ac = 0.25 * (nu + 1.0) * (cov_bl + r * var_b)
        e_cc = 0.25 * (var_l + 2.0 * r * cov_bl + r * r * var_b)
        w = d / s2
        k = self.k
        info = np.empty((k, k))
        info[:-1, :-1] = e_aa * _gram(w.T)
        if self.has_mu:
            d_mu = nu * (nu + 1.0) / ((nu - 2.0) * (nu + 3.0))
            info[0, 0] += d_mu * float(np.sum(1.0 / s2))
        col = e_ac * w.sum(axis=1)
        info[:-1, -1] = col
        info[-1, :-1] = col
        info[-1, -1] = e_cc * self.n
        if not (math.isfinite(f0) and np.all(np.isfinite(info))
                and np.all(np.isfinite(g0))):
            return None
        return info / self.n, (f0, g0)

    def _linear_objective(self, theta):
        """Minus the mean log-likelihood of GARCH or GJR, sums only (what ranking the
        starting points needs): one forward filter, no per-day arrays kept.

        Normal: ``L = -(n ln 2 pi + sum ln s2 + sum e^2/s2) / 2``; Student-t (unit
        variance, Bollerslev 1987): ``L = n c(nu) - sum ln s2 / 2 - (nu + 1)/2 sum
        ln(1 + e^2 / ((nu - 2) s2))`` with ``c(nu) = lnG((nu+1)/2) - lnG(nu/2) -
        ln(pi (nu-2))/2`` (the formulas of :func:`normal_loglik` and
        :func:`std_t_loglik`, summed)."""
        mu, p, nu = self.unpack(theta)
        eps = self.y - mu
        bc = self.backcast
        e2 = eps * eps
        a = np.empty(self.n)
        a[0] = bc
        a[1:] = e2[:-1]
        u = p["omega"] + p["alpha"] * a
        if self.spec.name == "gjr":
            g = np.empty(self.n)
            g[0] = 0.5 * bc
            np.multiply(e2[:-1], eps[:-1] < 0, out=g[1:])    # e^2 on down days, else 0
            u += p["gamma"] * g
        s2 = linear_filter(u, p["beta"], bc)
        with np.errstate(all="ignore"):
            if not (s2.min() > 0) or not np.isfinite(s2[-1]):
                return 1e6
            sum_ln_s2 = float(np.log(s2).sum())
            r = e2 / s2
            if nu is None:
                total = -0.5 * (self.n * LOG_2PI + sum_ln_s2 + float(r.sum()))
            else:
                nm2 = nu - 2.0
                r /= nm2
                const = (gammaln(0.5 * (nu + 1.0)) - gammaln(0.5 * nu)
                         - 0.5 * math.log(math.pi * nm2))
                total = (self.n * const - 0.5 * sum_ln_s2
                         - 0.5 * (nu + 1.0) * float(np.log1p(r).sum()))
        if not math.isfinite(total):
            return 1e6
        return -total / self.n

    def _egarch_path(self, eps, p):
        """EGARCH log-variances, started from the last path computed (the optimiser's
        trial points are close to each other, so Newton needs few rounds)."""
        h = egarch_log_variance(eps, p["omega"], p["alpha"], p["gamma"], p["beta"],
                                math.log(self.backcast), start=self._h_guess)
        if np.all(np.isfinite(h)) and float(np.max(np.abs(h))) < 0.5 * LN_VARIANCE_CAP:
            self._h_guess = h
        return h

    def _egarch_loglik(self, theta):
        """EGARCH's log-variance path and per-day log-likelihood with its derivatives
        in sigma^2, the residual and nu: what the objective and the scores share."""
        mu, p, nu = self.unpack(theta)
        eps = self.y - mu
        h = self._egarch_path(eps, p)
        s2 = np.exp(h)
        if nu is None:
            ll, d_s2, d_e = normal_loglik(eps, s2, grad=True)
            d_nu = None
        else:
            ll, d_s2, d_e, d_nu = std_t_loglik(eps, s2, nu, grad=True)
        return p, eps, h, s2, ll, d_s2, d_e, d_nu

    def egarch_score_obs(self, theta):
        """Per-day log-likelihood and analytic scores of EGARCH by forward
        sensitivities: ``dh_t/dtheta = J_t dh_{t-1}/dtheta + df_t/dtheta`` (``J`` from
        :func:`optbench.volatility.recursions.egarch_jacobian`, ``f_t`` the right-hand
        side of the recursion at fixed ``h_{t-1}``), all parameters in one
        :func:`optbench.volatility.recursions.affine_filter`."""
        p, eps, h, s2, ll, d_s2, d_e, d_nu = self._egarch_loglik(theta)
        hb = math.log(self.backcast)
        inv_s = np.exp(-0.5 * h)
        z = eps * inv_s
        n = self.n
        alpha, gamma, beta = p["alpha"], p["gamma"], p["beta"]
        rows = []
        if self.has_mu:
            r = np.zeros(n)
            r[1:] = -(alpha * np.sign(z[:-1]) + gamma) * inv_s[:-1]
            rows.append(r)
        r_a, r_g, r_b = np.zeros(n), np.zeros(n), np.empty(n)
        r_a[1:] = np.abs(z[:-1]) - SQRT_2_OVER_PI
        r_g[1:] = z[:-1]
        r_b[0] = hb
        r_b[1:] = h[:-1]
        rows += [np.ones(n), r_a, r_g, r_b]
        coef = np.empty(n)
        coef[0] = 0.0
        coef[1:] = egarch_jacobian(z, alpha, gamma, beta)
        dh = affine_filter(coef, np.stack(rows), 0.0)
        sc = (dh * (d_s2 * s2)).T
        if self.has_mu:
            sc[:, 0] -= d_e
        if d_nu is not None:
            sc = np.column_stack([sc, d_nu])
        return ll, sc

    def _egarch_objective_grad(self, theta):
        """Minus the mean log-likelihood of EGARCH and its gradient by the adjoint
        recursion (:func:`optbench.volatility.recursions.egarch_adjoint`).

        The density is written in ``h = ln sigma^2`` and ``z = e / sigma`` (no
        ``exp(h)`` needed): normal ``l_t = -(ln 2 pi + h_t + z_t^2)/2``, ``dl/dh =
        (z^2 - 1)/2``; Student-t with ``v_t = nu - 2 + z_t^2``: ``l_t = c(nu) - h_t/2 -
        (nu+1)/2 ln(v_t/(nu-2))``, ``dl/dh = ((nu+1) z^2/v - 1)/2``, ``dl/de = -(nu+1)
        z / (sigma v)`` (the formulas of :func:`std_t_loglik`, Bollerslev 1987).
        """
        mu, p, nu = self.unpack(theta)
        eps = self.y - mu
        h = self._egarch_path(eps, p)
        n = self.n
        hb = math.log(self.backcast)
        inv_s = np.exp(-0.5 * h)
        z = eps * inv_s
        z2 = z * z
        sum_h = float(h.sum())
        d_nu = None
        if nu is None:
            total = -0.5 * (n * LOG_2PI + sum_h + float(z2.sum()))
            a = 0.5 * (z2 - 1.0)
            zs = z * inv_s
            sum_d_e = -float(zs.sum())
        else:
            nm2 = nu - 2.0
            v = z2 + nm2
            sum_lq = float(np.log(v).sum()) - n * math.log(nm2)
            inv_v = 1.0 / v
            w = z2 * inv_v
            sum_w = float(w.sum())
            const = (gammaln(0.5 * (nu + 1.0)) - gammaln(0.5 * nu)
                     - 0.5 * math.log(math.pi * nm2))
            total = n * const - 0.5 * sum_h - 0.5 * (nu + 1.0) * sum_lq
            w *= nu + 1.0
            w -= 1.0
            w *= 0.5
            a = w
            inv_v *= z
            inv_v *= inv_s
            sum_d_e = -(nu + 1.0) * float(inv_v.sum())
            d_nu = 0.5 * (n * (digamma(0.5 * (nu + 1.0)) - digamma(0.5 * nu) - 1.0 / nm2)
                          - sum_lq + (nu + 1.0) * sum_w / nm2)
        if not math.isfinite(total):
            return 1e6, np.zeros(self.k)
        lam = egarch_adjoint(z, a, p["alpha"], p["gamma"], p["beta"])
        zl = z[:-1]
        l1 = lam[1:]
        grad = []
        if self.has_mu:
            dz = -(p["alpha"] * np.sign(zl) + p["gamma"]) * inv_s[:-1]
            grad.append(-sum_d_e + _dot(l1, dz))
        grad += [lam.sum(), _dot(l1, np.abs(zl) - SQRT_2_OVER_PI), _dot(l1, zl),
                 lam[0] * hb + _dot(l1, h[:-1])]
        if d_nu is not None:
            grad.append(d_nu)
        return -total / n, -np.array(grad) / n

    def objective_grad(self, theta):
        """Minus the mean log-likelihood and its analytic gradient (GARCH, GJR).

        Reverse mode: with ``w_t = dl_t/dsigma^2_t`` and the adjoint filter
        ``lam_t = w_t + beta lam_{t+1}``, ``dL/dtheta = sum_t lam_t du_t/dtheta``
        (``u_t`` the filter input; ``sigma^2_{t-1}`` for beta), so one backward
        filter replaces one forward filter per parameter.
        """
        if self.spec.name == "egarch":
            return self._egarch_objective_grad(theta)
        mu, p, nu = self.unpack(theta)
        y = self.y
        eps = y - mu
        alpha, gamma, beta = p["alpha"], p.get("gamma", 0.0), p["beta"]
        bc = self.backcast
        e2 = eps * eps
        neg = eps < 0
        a = np.empty(self.n)
        a[0] = bc
        a[1:] = e2[:-1]
        g = None
        if self.spec.name == "gjr":
            g = np.empty(self.n)
            g[0] = 0.5 * bc
            np.multiply(e2[:-1], neg[:-1], out=g[1:])    # e^2 on down days, else 0
            u = p["omega"] + alpha * a + gamma * g
        else:
            u = p["omega"] + alpha * a
        s2 = linear_filter(u, beta, bc)
        if not (s2.min() > 0) or not np.isfinite(s2[-1]):
            return 1e6, np.zeros(self.k)
        if nu is None:
            # normal density written out (as normal_loglik): only sums are needed
            inv = 1.0 / s2
            r = e2 * inv
            total = -0.5 * (self.n * LOG_2PI + float(np.log(s2).sum()) + float(r.sum()))
            r -= 1.0
            r *= inv
            r *= 0.5
            d_s2 = r
            sum_d_e = -_dot(eps, inv)
            d_nu = None
        else:
            total, d_s2, sum_d_e, d_nu = std_t_loglik_sums(eps, e2, s2, nu)
        lam = reverse_filter(d_s2, beta)
        s2_lag = np.empty(self.n)
        s2_lag[0] = bc
        s2_lag[1:] = s2[:-1]
        grad = []
        if self.has_mu:
            coef = alpha + gamma * neg[:-1] if g is not None else alpha
            grad.append(-2.0 * _dot(lam[1:], eps[:-1] * coef) - sum_d_e)
        grad.append(lam.sum())
        grad.append(_dot(lam, a))
        if g is not None:
            grad.append(_dot(lam, g))
        grad.append(_dot(lam, s2_lag))
        if d_nu is not None:
            grad.append(d_nu)
        if not math.isfinite(total):
            return 1e6, np.zeros(self.k)
        return -total / self.n, -np.array(grad) / self.n

    def bounds(self, var):
        sd = math.sqrt(var)
        b = []
        if self.has_mu:
            m = float(np.mean(self.y))
            b.append((m - 10 * sd, m + 10 * sd))
        return b + self.spec.bounds(var) + self.dist.bounds()

    def feasible(self, theta) -> bool:
        """The non-box constraints (stationarity; alpha + gamma >= 0 for GJR)."""
        i, nv = self.i_vol, self.n_vol
        return bool(np.all(self.spec.constraints(theta[i:i + nv]) >= 0.0))

    def hessian_estimate(self, theta):
        """Hessian of the objective (minus the mean log-likelihood) by forward
        differences of its gradient: the optimiser's starting curvature."""
        return self.start_curvature(theta)[0]

    def start_curvature(self, theta):
        """The optimiser's starting curvature and ``(f, gradient)`` at ``theta``.

        GARCH and GJR with normal innovations: the conditional information
        matrix, ``sum_t [ds2_t ds2_t' / (2 s2_t^2) + dm dm' / s2_t] / n`` (the expected
        Hessian given the past, Engle 1982, *Econometrica* 50, and Bollerslev 1986),
        from the same linear filter that gives the gradient; with Student-t
        innovations, the Student-t conditional information (:meth:`_t_information`).
        EGARCH (and the linear recursions when that fails): the outer product of the
        per-day analytic scores, ``S'S / n`` (Berndt, Hall, Hall & Hausman 1974). Each
        costs about one gradient instead of the k + 1 of finite differences
        (the fallback) and, measured on windows of 1,500-5,000 daily returns, leads
        the quasi-Newton iterations to the same optimum with fewer evaluations.
        """
        if self.spec.linear and self.dist.name == "normal" and self.spec.name != "ewma":
            eps, (s2, d) = self.variance(theta, grad=True)
            if np.all(s2 > 0) and np.all(np.isfinite(s2)):
                ll, d_s2, d_e = normal_loglik(eps, s2, grad=True)
                g0 = -_gram(d.T, d_s2[:, None])[:, 0]
                if self.has_mu:
                    g0[0] += d_e.sum()
                w = d / s2
                info = 0.5 * _gram(w.T)
                if self.has_mu:
                    info[0, 0] += float(np.sum(1.0 / s2))
                f0 = -float(ll.sum()) / self.n
                if math.isfinite(f0) and np.all(np.isfinite(info)):
                    return info / self.n, (f0, g0 / self.n)
        if self.spec.linear and self.dist.name == "t" and self.spec.name != "ewma":
            out = self._t_information(theta)
            if out is not None:
                return out
        if self.spec.name == "egarch" or (self.spec.linear and self.dist.name == "t"):
            ll, sc = (self.egarch_score_obs(theta) if self.spec.name == "egarch"
                      else self.score_obs(theta))
            if ll is not None and np.all(np.isfinite(ll)) and np.all(np.isfinite(sc)):
                g0 = -sc.sum(axis=0) / self.n
                return _gram(sc) / self.n, (-float(ll.sum()) / self.n, g0)
        k = self.k
        f0, g0 = self.objective_grad(theta)
        h = 1e-6 * np.maximum(np.abs(theta), 1e-2)
        B = np.empty((k, k))
        for i in range(k):
            tp = theta.copy()
            tp[i] += h[i]
            B[:, i] = (self.objective_grad(tp)[1] - g0) / h[i]
        return 0.5 * (B + B.T), (f0, g0)

    # largest change per trial step of the EGARCH variance parameters (scaled units)
    # (chosen by counting evaluations over five windows of 1,500-5,000 daily returns:
    # larger limits let trials reach the guard, smaller ones take more iterations)
    EGARCH_MAX_STEP = {"omega": 0.04, "alpha": 0.04, "gamma": 0.04, "beta": 0.02}

    def max_step(self):
        """Per-coordinate trial-step limit for EGARCH (None otherwise): a trial far
        from the current point can drive the log-variance path to its [-30, 30]
        guard, where only the sequential loop evaluates it; the limit keeps the line
        search among points the Newton path solver handles."""
        if self.spec.name != "egarch":
            return None
        lim = self.EGARCH_MAX_STEP
        return np.array([(lim.get(n, np.inf)) for n in self.names])

    def stationarity_row(self):
        """``(a, b)`` with the stationarity limit ``a . theta <= b`` for GARCH and GJR
        (``alpha + beta`` and ``alpha + gamma/2 + beta <= 1 - STATIONARITY_MARGIN``;
        ``gamma/2 = E[1(z<0) z^2] gamma`` for any symmetric unit-variance
        innovation, normal or Student-t), None otherwise (EGARCH's ``beta`` limit is
        a bound)."""
        if self.spec.name not in ("garch", "gjr"):
            return None
        a = np.zeros(self.k)
        i = self.i_vol
        a[i + 1] = 1.0                              # alpha
        if self.spec.name == "gjr":
            a[i + 2] = 0.5                          # gamma (kappa = 1/2)
        a[i + self.n_vol - 1] = 1.0                 # beta
        return a, 1.0 - STATIONARITY_MARGIN

    def constraint(self):
        spec, i, nv = self.spec, self.i_vol, self.n_vol
        jac_vol = spec.constraint_jacobian()
        if jac_vol.size == 0:
            return []
        jac = np.zeros((jac_vol.shape[0], self.k))
        jac[:, i:i + nv] = jac_vol
        return [{"type": "ineq", "fun": lambda th: spec.constraints(th[i:i + nv]),
                 "jac": lambda th: jac}]

    def starting_points(self, var):
        return [x for _, x in self.regime_starts(var)]

    def regime_starts(self, var):
        """Starting points with their regime label (see
        :meth:`optbench.volatility.specs.VolSpec.regime_starts`)."""
        mu0 = [float(np.mean(self.y))] if self.has_mu else []
        nu0 = self.dist.starting_values()
        return [(r, np.array(mu0 + v + nu0)) for r, v in self.spec.regime_starts(var)]

    def coordinate_map(self) -> np.ndarray:
        """``theta = M u`` for the whole parameter vector (mean and distribution
        coordinates unchanged; see :meth:`VolSpec.coordinate_map`)."""
        m = np.eye(self.k)
        i, nv = self.i_vol, self.n_vol
        m[i:i + nv, i:i + nv] = self.spec.coordinate_map()
        return m

    def internal_bounds(self, var):
        """Bounds of the optimiser's coordinates ``u`` (EGARCH's ``beta`` at most
        ``1 - STATIONARITY_MARGIN``: its stationarity limit)."""
        sd = math.sqrt(var)
        b = []
        if self.has_mu:
            m = float(np.mean(self.y))
            b.append((m - 10 * sd, m + 10 * sd))
        vol = list(self.spec.internal_bounds(var))
        if self.spec.name == "egarch":
            vol[-1] = (vol[-1][0], min(vol[-1][1], 1.0 - STATIONARITY_MARGIN))
        return b + vol + self.dist.bounds()

    def scores(self, theta):
        """Per-day log-likelihood and analytic scores (n, k) at ``theta``."""
        if self.spec.linear:
            return self.score_obs(theta)
        return self.egarch_score_obs(theta)

    # robust covariance --------------------------------------------------------------
    def scores_and_hessian(self, theta):
        """Per-observation scores (n, k) and the Hessian of the total log-likelihood."""
        k = self.k
        h = 1e-5 * np.maximum(np.abs(theta), 1e-2)
        # per-day scores analytically (linear filter, or EGARCH's forward
        # sensitivities); the Hessian by forward differences of the analytic gradient
        _, sc = self.score_obs(theta) if self.spec.linear else self.egarch_score_obs(theta)
        g0 = self.objective_grad(theta)[1]
        H = np.empty((k, k))
        for i in range(k):
            tp = theta.copy()
            tp[i] += h[i]
            H[:, i] = -self.n * (self.objective_grad(tp)[1] - g0) / h[i]
        return sc, 0.5 * (H + H.T)

    def robust_cov(self, theta):
        """Bollerslev-Wooldridge (1992) sandwich ``H^{-1} (S'S) H^{-1}``."""
        try:
            sc, H = self.scores_and_hessian(theta)
            Hinv = np.linalg.inv(H)
            cov = Hinv @ _gram(sc) @ Hinv
        except (np.linalg.LinAlgError, TypeError, ValueError):
            return np.full((self.k, self.k), np.nan)
        if not np.all(np.isfinite(cov)):
            return np.full((self.k, self.k), np.nan)
        return 0.5 * (cov + cov.T)


def _to_decimal(model: str, names, theta_s: np.ndarray, scale: float):
    """Scaled-unit parameters (last axis) -> decimal-unit parameter dict (vectorised)
    and the Jacobian of the map (for the covariance)."""
    theta_s = np.asarray(theta_s, dtype=float)
    out = {}
    k = len(names)
    J = np.eye(k)
    ix = {n: i for i, n in enumerate(names)}
    ln_s = math.log(scale)
    for n, i in ix.items():
        v = theta_s[..., i]
        if n == "mu":
            out[n] = v / scale
            J[i, i] = 1.0 / scale
        elif n == "omega" and model == "egarch":
            b = theta_s[..., ix["beta"]]
            out[n] = v - 2.0 * ln_s * (1.0 - b)
            J[i, ix["beta"]] = 2.0 * ln_s
        elif n == "omega":
            out[n] = v / scale ** 2
            J[i, i] = 1.0 / scale ** 2
        else:
            out[n] = v
    return out, J


def _to_scaled(model: str, names, params: dict, scale: float) -> np.ndarray:
    ln_s = math.log(scale)
    theta = []
    for n in names:
        v = float(params[n])
        if n == "mu":
            v *= scale
        elif n == "omega" and model == "egarch":
            v += 2.0 * ln_s * (1.0 - float(params["beta"]))
        elif n == "omega":
            v *= scale ** 2
        theta.append(v)
    return np.array(theta)


# ---------------------------------------------------------------------------------
# the result object
# ---------------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class GarchFit:
    """A fitted (or fixed-parameter) GARCH-family model on daily decimal log returns.

    Attributes
    ----------
    model : str
        ``garch``, ``gjr``, ``egarch`` or ``ewma`` (the fallback).
    dist : str
        ``normal`` or ``t`` (unit-variance Student-t).
    mean : str
        ``constant`` or ``zero``.
    params : dict
        Decimal units: ``mu`` (daily mean return), ``omega`` (daily variance units;
        for EGARCH in log-variance), ``alpha``, ``gamma``, ``beta``, ``nu`` as present;
        ``lambda`` for EWMA.
    std_errors : dict
        Robust (Bollerslev-Wooldridge 1992) standard errors, same keys (NaN where
        not available); computed on first use, like ``cov``.
    loglik : float
        Log-likelihood of the decimal returns.
    aic, bic : float
        ``-2 LL + 2k`` and ``-2 LL + k ln n``.
    n_obs : int
    converged : bool
        The estimate is stationary and passed the first-order optimality check
        recorded in ``optimality``.
    message : str
        The optimiser's message (or why no optimiser ran).
    fallback_reason : str or None
        Why this is not the model that was asked for (None when it is).
    last_variance : float
        sigma^2_{T+1}: daily variance for the day after the last return.
    conditional_vol : ndarray
        In-sample daily sigma_t, t = 1..n.
    std_resid : ndarray
        ``(r_t - mu) / sigma_t``.
    candidates : dict
        For ``model="auto"``: BIC of each candidate (None if it failed).
    optimality : dict or None
        What was checked before calling the estimate converged: ``passed``,
        ``checked`` (the test), ``predicted_gain`` (log-likelihood a Newton step on
        the free coordinates still promises), ``projected_gradient`` (largest free
        gradient entry of the log-likelihood, optimiser units), ``tolerance``,
        ``active_bounds`` (coordinates held at a bound; ``stationarity limit`` when
        the persistence is held at ``1 - STATIONARITY_MARGIN``), ``limit_multiplier``
        (d log L / d persistence held back there, else None). None when no estimation
        ran.
    cov : ndarray
        Robust covariance of the parameters in ``param_names`` order (decimal units),
        computed on first use.
    warnings : tuple of str
        Caveats of a converged estimate (e.g. persistence held at the stationarity
        limit); they travel with every number taken from the fit.
    """

    model: str
    dist: str
    mean: str
    params: dict
    loglik: float
    aic: float
    bic: float
    n_obs: int
    converged: bool
    message: str
    fallback_reason: str | None
    last_variance: float
    conditional_vol: np.ndarray = field(repr=False)
    std_resid: np.ndarray = field(repr=False)
    candidates: dict = field(default_factory=dict)
    covariance_source: object = field(default=None, repr=False)
    param_names: tuple = ()
    backcast: float = float("nan")
    returns: np.ndarray = field(default=None, repr=False)
    optimality: dict | None = field(default=None, repr=False)
    warnings: tuple = ()

    # -- derived values --------------------------------------------------------------
    @functools.cached_property
    def cov(self) -> np.ndarray | None:
        """Robust covariance of the parameters (``param_names`` order, decimal units),
        computed on first use (None when the fit failed)."""
        src = self.covariance_source
        return src() if callable(src) else src

    @functools.cached_property
    def std_errors(self) -> dict:
        """Robust (Bollerslev-Wooldridge 1992) standard errors, keyed like ``params``
        (NaN where not available); computed on first use."""
        cov = self.cov
        out = {}
        for i, n in enumerate(self.param_names):
            v = float(cov[i, i]) if cov is not None and cov.size else float("nan")
            out[n] = math.sqrt(v) if v >= 0 else float("nan")
        return out

    @property
    def persistence(self) -> float:
        """alpha + beta (GARCH), alpha + gamma/2 + beta (GJR), beta (EGARCH), 1 (EWMA)."""
        return float(get_spec(self.model).persistence(self.params))

    @property
    def half_life_days(self) -> float | None:
        """Trading days for a variance shock to halve: ``ln 0.5 / ln(persistence)``;
        None when the persistence is 1 (EWMA) or outside (0, 1)."""
        p = self.persistence
        if not 0.0 < p < 1.0:
            return None
        return math.log(0.5) / math.log(p)

    @property
    def long_run_variance(self) -> float | None:
        """Daily unconditional variance: ``omega / (1 - p)`` (GARCH, GJR); the limit of
        the EGARCH forecast; None for EWMA (no mean reversion) and at the
        stationarity limit (see :func:`at_stationarity_limit`: the level is not
        identified there)."""
        p = self.persistence
        if self.model != "ewma" and at_stationarity_limit(p):
            return None
        if self.model in ("garch", "gjr"):
            return self.params["omega"] / (1.0 - p) if p < 1 else None
        if self.model == "egarch":
            if p >= 1:
                return None
            v = self.forecast_variance(5000)
            return float(v[-1])
        return None

    @property
    def long_run_vol(self) -> float | None:
        """Annualised long-run volatility ``sqrt(252 V_L)`` (decimal); None for EWMA."""
        v = self.long_run_variance
        return None if v is None else math.sqrt(fc.TRADING_DAYS_PER_YEAR * v)

    @functools.cached_property
    def _z_grid(self) -> np.ndarray | None:
        """Quantile grid of the unit-variance t for EGARCH-t forecasts (see
        :func:`optbench.volatility.forecast.egarch_log_mgf`)."""
        if self.dist != "t":
            return None
        return fc.std_t_quantile_grid(float(self.params["nu"]), 2000)

    # -- forecasts ---------------------------------------------------------------------
    def forecast_variance(self, horizon: int) -> np.ndarray:
        """Expected daily variances for steps 1..horizon after the last return.

        GARCH/GJR: ``V_L + p^{k-1} (sigma^2_{T+1} - V_L)``; EGARCH: exact log-normal
        recursion (see :func:`optbench.volatility.forecast.egarch_forecast_variance`);
        EWMA: flat at sigma^2_{T+1}.
        """
        horizon = int(horizon)
        if horizon < 1:
            raise InputError("horizon", "must be at least one trading day")
        p = self.params
        if self.model in ("garch", "gjr"):
            # omega sum_{j<k-1} p^j + p^{k-1} sigma^2_{T+1}: stable up to p = 1 (and
            # valid beyond, for held non-stationary parameters)
            pers = self.persistence
            if pers <= 1:
                return fc.linear_forecast_variance_from_omega(self.last_variance,
                                                              p["omega"], pers, horizon)
            k = np.arange(horizon)
            geo = (pers ** k - 1.0) / (pers - 1.0)
            return p["omega"] * geo + pers ** k * self.last_variance
        if self.model == "egarch":
            return fc.egarch_forecast_variance(self.last_variance, p["omega"], p["alpha"],
                                               p["gamma"], p["beta"], horizon, self.dist,
                                               self._z_grid)
        return np.full(horizon, self.last_variance)

    def forecast_vol(self, trading_days):
        """Annualised forecast vol over each horizon: ``sqrt(252 * mean_{k<=T}
        E[sigma^2_{T+k}])`` (decimal). Horizons below one day use one day.
        Array in -> array out; scalar -> float."""
        T = np.asarray(trading_days)
        scalar = T.ndim == 0
        T = np.maximum(np.atleast_1d(T).astype(int), 1)
        if self.model in ("garch", "gjr") and 0 <= self.persistence <= 1:
            avg = fc.linear_average_variance_from_omega(
                self.last_variance, self.params["omega"], self.persistence, T)
        else:
            v = self.forecast_variance(int(T.max()))
            avg = np.cumsum(v)[T - 1] / T
        out = fc.annualise(avg)
        return float(out[0]) if scalar else out

    def forecast_band(self, trading_days, level=(0.05, 0.95), n_draws: int = 1000,
                      seed=0, window: int = 500):
        """(low, high) forecast vols from parameter uncertainty.

        Parameter vectors are drawn from N(theta_hat, robust covariance) in the
        estimator's units, draws that break a constraint (positivity, stationarity,
        nu > 2.05) are dropped (for an estimate held at the stationarity limit, draws
        beyond it are first moved onto it: the projected normal of a boundary
        estimate, Andrews 1999), each draw re-filters the last ``window`` returns
        from the fitted state to get its own sigma^2_{T+1}, and its term structure
        is computed in closed form (GARCH, GJR) or by the exact recursion (EGARCH).
        The band is the ``level`` quantiles across draws. EWMA has no estimated
        parameters: low = high = the forecast.
        """
        T = np.asarray(trading_days)
        scalar = T.ndim == 0
        T = np.maximum(np.atleast_1d(T).astype(int), 1)

        def point():   # the forecast, only where the band collapses to it
            lo = hi = np.atleast_1d(self.forecast_vol(T))
            return (float(lo[0]), float(hi[0])) if scalar else (lo.copy(), hi.copy())

        cov = self.cov
        if (self.model == "ewma" or cov is None or not np.all(np.isfinite(cov))
                or self.returns is None):
            return point()
        names = list(self.param_names)
        theta = np.array([self.params[n] for n in names])
        # draw in units where parameters are of order one (variance scaled by V_T)
        sc = np.ones(len(names))
        if "mu" in names:
            sc[names.index("mu")] = math.sqrt(self.last_variance)
        if "omega" in names and self.model != "egarch":
            sc[names.index("omega")] = self.last_variance
        rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
        cov_u = cov / np.outer(sc, sc)
        try:
            chol = np.linalg.cholesky(cov_u + 1e-14 * np.eye(len(names)))
        except np.linalg.LinAlgError:
            w, V = np.linalg.eigh(cov_u)
            chol = V * np.sqrt(np.clip(w, 0, None))
        m = 2 * n_draws + 50
        draws = theta / sc + rng.standard_normal((m, len(names))) @ chol.T
        draws *= sc
        P = {n: draws[:, i] for i, n in enumerate(names)}
        if at_stationarity_limit(self.persistence) and self.model != "ewma":
            # an estimate held at the stationarity limit: its sampling distribution is
            # the normal projected onto the feasible set (Andrews 1999, Econometrica
            # 67), so draws beyond the limit are moved onto it (along beta) instead of
            # dropped, which would leave only lower persistence in the band
            limit = 1.0 - STATIONARITY_MARGIN
            if self.model in ("garch", "gjr"):
                pers = P["alpha"] + 0.5 * P.get("gamma", 0.0) + P["beta"]
                P["beta"] = P["beta"] - np.maximum(pers - limit, 0.0)
            else:
                P["beta"] = np.minimum(P["beta"], limit)
        ok = np.ones(m, dtype=bool)
        if self.model in ("garch", "gjr"):
            g = P.get("gamma", np.zeros(m))
            pers = P["alpha"] + 0.5 * g + P["beta"]
            ok &= (P["omega"] > 0) & (P["alpha"] >= 0) & (P["beta"] >= 0) & (pers < 1)
            ok &= (P["alpha"] + g >= 0)
        else:
            ok &= (np.abs(P["beta"]) < 1)
        if "nu" in P:
            ok &= P["nu"] > NU_MIN
        if self.model == "egarch" and self.dist == "t":
            n_draws = min(n_draws, 250)   # (draws x horizon x grid) work
        idx = np.flatnonzero(ok)[:n_draws]
        if idx.size < 20:
            return point()
        P = {n: v[idx] for n, v in P.items()}
        y = self.returns
        n = y.shape[0]
        K = min(window, n)
        s2 = np.full(idx.size, self.conditional_vol[n - K] ** 2)
        s2 = fc.refilter_variance(self.model, y[n - K:], P, s2)
        if self.model in ("garch", "gjr"):
            g = P.get("gamma", 0.0)
            pers = P["alpha"] + 0.5 * g + P["beta"]
            avg = fc.linear_average_variance_from_omega(s2[:, None], P["omega"][:, None],
                                                        pers[:, None], T)
        else:
            # EGARCH: exact recursion per draw, vectorised over draws; the t
            # expectation uses a 256-point quantile grid at the fitted nu (the
            # uncertainty of nu itself is not carried into the EGARCH-t band)
            zg = (fc.std_t_quantile_grid(float(self.params["nu"]), 256)
                  if "nu" in P else None)
            avg = fc.egarch_average_variance(s2, P["omega"], P["alpha"], P["gamma"],
                                             P["beta"], T, self.dist, zg)
        vols = fc.annualise(avg)
        lo, hi = np.quantile(vols, level, axis=0)
        return (float(lo[0]), float(hi[0])) if scalar else (lo, hi)

    # -- held-parameter filtering and simulation ---------------------------------------
    def filter(self, returns, initial_variance: float | None = None) -> np.ndarray:
        """Conditional variances of new returns with this fit's parameters held.

        Returns sigma^2_t for t = 1..n+1: the first is ``initial_variance`` (default:
        this fit's ``last_variance``, i.e. the new returns continue the fitted
        sample), the last is the forecast for the day after the last new return.
        """
        r = np.asarray(returns, dtype=float)
        if r.ndim != 1 or not np.all(np.isfinite(r)):
            raise InputError("returns", "expected a 1-D series of finite returns")
        s0 = self.last_variance if initial_variance is None else float(initial_variance)
        e = r - self.params.get("mu", 0.0)
        p = self.params
        if self.model in ("garch", "gjr", "ewma"):
            e2 = e * e
            if self.model == "ewma":
                lam = p.get("lambda", EWMA_LAMBDA)
                u, b = (1 - lam) * e2, lam
            else:
                u = p["omega"] + p["alpha"] * e2
                if self.model == "gjr":
                    u = u + p["gamma"] * np.where(e < 0, e2, 0.0)
                b = p["beta"]
            return np.concatenate([[s0], linear_filter(u, b, s0)])
        out = np.empty(r.shape[0] + 1)
        out[0] = s0
        spec = get_spec(self.model)
        s2 = np.array([s0])
        for t in range(r.shape[0]):
            s2 = spec.next_variance(e[t:t + 1], s2, p)
            out[t + 1] = s2[0]
        return out

    def simulate(self, horizon: int, n_paths: int = 10_000, seed=None):
        """Simulate daily returns from the day after the last return
        (:class:`optbench.volatility.simulate.SimulatedPaths`)."""
        from optbench.volatility.simulate import simulate_paths

        return simulate_paths(self.model, self.params, self.dist, self.last_variance,
                              int(horizon), int(n_paths), seed)

    # -- output -------------------------------------------------------------------------
    def to_dict(self) -> dict:
        """JSON-ready summary (DESIGN.md ``model`` object of ``optbench fit``)."""
        def num(x):
            if x is None:
                return None
            x = float(x)
            return x if math.isfinite(x) else None

        return {
            "name": self.model, "dist": self.dist, "mean": self.mean,
            "params": {k: num(v) for k, v in self.params.items()},
            "std_errors": {k: num(v) for k, v in self.std_errors.items()},
            "loglik": num(self.loglik), "aic": num(self.aic), "bic": num(self.bic),
            "n_obs": self.n_obs, "converged": bool(self.converged),
            "message": self.message, "fallback_reason": self.fallback_reason,
            "persistence": num(self.persistence),
            "half_life_days": num(self.half_life_days),
            "long_run_vol": num(self.long_run_vol),
            "candidates": {k: num(v) for k, v in self.candidates.items()},
            "optimality": _optimality_json(self.optimality),
            "warnings": list(self.warnings),
        }


def _optimality_json(opt):
    if opt is None:
        return None
    out = {}
    for k, v in opt.items():
        if isinstance(v, float):
            out[k] = v if math.isfinite(v) else None
        else:
            out[k] = v
    return out


# ---------------------------------------------------------------------------------
# building a result
# ---------------------------------------------------------------------------------
def _trigamma(x: float) -> float:
    """psi'(x) for x > 0: the recurrence ``psi'(x) = psi'(x+1) + 1/x^2`` up to x >= 10,
    then the asymptotic series ``1/x + 1/(2x^2) + 1/(6x^3) - 1/(30x^5) + 1/(42x^7) -
    1/(30x^9) + 5/(66x^11)`` (Abramowitz & Stegun 6.4.12, Bernoulli-number
    coefficients; the next term is below 3e-14 there)."""
    acc = 0.0
    while x < 10.0:
        acc += 1.0 / (x * x)
        x += 1.0
    z = 1.0 / (x * x)
    return acc + 1.0 / x + z * (0.5 + (1.0 / x) * (1.0 / 6.0 + z * (-1.0 / 30.0 + z * (
        1.0 / 42.0 + z * (-1.0 / 30.0 + z * 5.0 / 66.0)))))


def _scale_of(y: np.ndarray) -> float:
    return 1.0 / float(np.std(y))


def _backcast_scaled(y_s, has_mu, backcast, scale):
    if backcast is not None:
        b = float(backcast)
        if not b > 0:
            raise InputError("backcast", "must be a positive daily variance")
        return b * scale ** 2
    resid = y_s - np.mean(y_s) if has_mu else y_s
    return backcast_value(resid)


def _result(prob: _Problem, theta_s: np.ndarray, y: np.ndarray, scale: float, mean: str,
            converged: bool, message: str, fallback_reason, candidates, with_cov=False,
            n_free: int | None = None, optimality: dict | None = None,
            loglik_scaled: float | None = None) -> GarchFit:
    """The fit at ``theta_s`` (scaled units) in decimal units. ``loglik_scaled``: the
    log-likelihood of the scaled returns when already known (the optimiser's last
    value), which saves the per-day densities."""
    model = prob.spec.name
    names = tuple(prob.names)
    eps_s, s2_s = prob.variance(theta_s)
    if loglik_scaled is None:
        ll_obs = prob.loglik_obs(theta_s, (eps_s, s2_s))
        loglik_scaled = float(np.sum(ll_obs))
    ll = loglik_scaled + prob.n * math.log(scale)
    params_arr, J = _to_decimal(model, names, theta_s, scale)
    params = {k: float(v) for k, v in params_arr.items()}
    if model == "ewma":
        params["lambda"] = EWMA_LAMBDA
        if mean == "constant":
            params = {"mu": float(np.mean(y)), **params}
    if not names:
        cov_source = np.zeros((0, 0))
    elif with_cov:
        def cov_source():   # the sandwich in the estimator's units, mapped to decimals
            return J @ prob.robust_cov(theta_s) @ J.T
    else:
        cov_source = None
    k = len(names) if n_free is None else n_free
    s2 = s2_s / scale ** 2
    mu = params.get("mu", 0.0)
    spec = prob.spec
    e_last = np.array([y[-1] - mu])
    last = float(spec.next_variance(e_last, np.array([s2[-1]]), params)[0])
    return GarchFit(
        model=model, dist=prob.dist.name, mean=mean, params=params,
        loglik=ll, aic=-2 * ll + 2 * k, bic=-2 * ll + k * math.log(prob.n),
        n_obs=prob.n, converged=bool(converged), message=message,
        fallback_reason=fallback_reason, last_variance=last,
        conditional_vol=np.sqrt(s2), std_resid=(y - mu) / np.sqrt(s2),
        candidates=dict(candidates or {}), covariance_source=cov_source, param_names=names,
        backcast=prob.backcast / scale ** 2, returns=y, optimality=optimality)


#: largest log-likelihood gain still predicted at a point called an optimum (the
#: score statistic on the free coordinates, halved), at least this much ...
OPTIMALITY_GAIN_TOL = 1e-7
#: ... and at most this fraction of ``n + |log-likelihood|`` (estimator units): the
#: tolerance grows with the size of the likelihood, whose rounding grows with it
OPTIMALITY_GAIN_REL = 1e-11


class _Coordinates:
    """The optimiser's coordinates ``u`` and the model's parameters ``theta``.

    ``theta = M u`` on the mean and variance parameters (:meth:`_Problem.coordinate_map`:
    GJR's ``alpha + gamma`` is a coordinate of its own), and the Student-t's degrees
    of freedom are optimised as ``eta = 1/nu``: the log-likelihood is much closer to
    quadratic in ``eta`` than in ``nu`` (it flattens as ``nu`` grows and steepens
    towards 2), so the quasi-Newton steps in ``nu`` no longer overshoot and swing
    back (Fiorentini, Sentana & Calzolari 2003, *J. Bus. Econ. Stat.* 21, estimate the
    Student-t GARCH in ``eta``). Measured on arch's sp500, nasdaq, wti and vix, the
    GARCH-t, GJR-t and EGARCH-t fits need 0-3 fewer likelihood evaluations each
    (none more), at the same optimum.
    """

    def __init__(self, prob: _Problem):
        self.M = prob.coordinate_map()
        self.Minv = np.linalg.inv(self.M)
        self.inv_nu = prob.dist.name == "t"      # nu is the last parameter

    def theta(self, u: np.ndarray) -> np.ndarray:
        th = self.M @ u
        if self.inv_nu:
            th[-1] = 1.0 / u[-1]
        return th

    def u(self, theta: np.ndarray) -> np.ndarray:
        u = self.Minv @ theta
        if self.inv_nu:
            u[-1] = 1.0 / theta[-1]
        return u

    def jacobian(self, theta: np.ndarray) -> np.ndarray:
        """``d theta / d u`` at ``theta`` (``d nu / d eta = -nu^2``)."""
        if not self.inv_nu:
            return self.M
        J = self.M.copy()
        J[-1, -1] = -theta[-1] ** 2
        return J

    def bounds(self, lo: np.ndarray, hi: np.ndarray):
        """Bounds of ``u`` from those of ``M^-1 theta`` (``nu`` in [a, b] is ``eta`` in
        [1/b, 1/a])."""
        lo, hi = lo.copy(), hi.copy()
        if self.inv_nu:
            lo[-1], hi[-1] = 1.0 / hi[-1], 1.0 / lo[-1]
        return lo, hi


def _optimality(prob: _Problem, coords: _Coordinates, u: np.ndarray, lo: np.ndarray,
                hi: np.ndarray, res=None, A_ub=None, b_ub=None) -> dict:
    """First-order (KKT) check of a constrained maximum of the log-likelihood.

    In the optimiser's coordinates ``u`` (``theta(u)``, see :class:`_Coordinates`;
    Jacobian ``J``) with ``G`` the gradient of the
    total log-likelihood and ``S`` the per-day scores: a coordinate at a bound is
    *active* when ``G`` points out of the box there (its multiplier has the right
    sign); on the other, *free*, coordinates the projected gradient must vanish. The
    check asks the remaining gain that a Newton step on the free coordinates
    predicts, ``G_f' H_f^{-1} G_f / 2`` (half the score statistic), to be at most ``max(OPTIMALITY_GAIN_TOL, OPTIMALITY_GAIN_REL
    (n + |log L|))`` in log-likelihood units (1e-7 up to about 4,000 returns), and
    records the largest free gradient entry beside it. ``H`` is the optimiser's
    quasi-Newton Hessian with its final analytic gradient when ``res`` (its result at
    ``u``) carries them, otherwise the outer product of the per-day scores ``S'S``
    (Berndt, Hall, Hall & Hausman 1974).

    A linear inequality ``A_ub u <= b_ub`` (the stationarity limit) at its limit is
    active when its multiplier ``nu = (A H^-1 A')^-1 A H^-1 G`` is positive (the
    likelihood rises across it); the gain is then that of the Newton step along it,
    ``(G - A' nu)' H^-1 (G - A' nu) / 2`` on the free coordinates (Nocedal & Wright,
    *Numerical Optimization*, 2nd ed., §12.3 and §16.5).
    """
    names = prob.names
    n = prob.n
    quasi = (res is not None and res.grad is not None and res.hess is not None
             and np.array_equal(np.asarray(res.x), u) and np.all(np.isfinite(res.grad))
             and np.all(np.isfinite(res.hess)))
    if quasi:
        # the optimiser's own gradient at u and its quasi-Newton Hessian (both of
        # minus the mean log-likelihood): no further likelihood evaluation
        g = -n * np.asarray(res.grad, dtype=float)
        total_ll = -n * float(res.fun)
        curvature = "quasi-Newton Hessian"
    else:
        theta = coords.theta(u)
        M = coords.jacobian(theta)
        with np.errstate(all="ignore"):
            ll, sc = prob.scores(theta)
        if ll is None or not np.all(np.isfinite(sc)) or not np.all(np.isfinite(ll)):
            return {"passed": False, "checked": "scores not finite at the estimate",
                    "predicted_gain": None, "projected_gradient": None,
                    "tolerance": OPTIMALITY_GAIN_TOL, "active_bounds": []}
        step = _BLAS_CHUNK // 8
        su = np.concatenate([sc[i:i + step] @ M for i in range(0, sc.shape[0], step)])
        g = su.sum(axis=0)
        total_ll = float(np.sum(ll))
        curvature = "outer product of the per-day scores"
    span = np.maximum(hi - lo, 1e-12)
    at_lo = u <= lo + 1e-10 * span
    at_hi = u >= hi - 1e-10 * span
    active = (at_lo & (g <= 0)) | (at_hi & (g >= 0))
    free = ~active
    gf = g[free]
    gain = 0.0
    rows_active = []
    limit_mult = None
    if gf.size:
        info = (n * np.asarray(res.hess, dtype=float)[np.ix_(free, free)] if quasi
                else _gram(su[:, free]))
        info = 0.5 * (info + info.T)
        w, V = np.linalg.eigh(info)
        w = np.maximum(w, 1e-12 * max(float(w.max()), 1e-300))
        Hinv = (V / w) @ V.T
        if A_ub is not None:
            slack = b_ub - A_ub @ u
            rows_active = [i for i in range(A_ub.shape[0])
                           if slack[i] <= 1e-10 * (1.0 + abs(b_ub[i]))]
        while rows_active:
            A = A_ub[np.ix_(rows_active, np.flatnonzero(free))]
            AH = A @ Hinv
            try:
                mult = np.linalg.solve(AH @ A.T, AH @ gf)
            except np.linalg.LinAlgError:
                mult = np.linalg.lstsq(AH @ A.T, AH @ gf, rcond=None)[0]
            if float(mult.min()) >= 0.0:
                gf = gf - A.T @ mult
                limit_mult = float(mult[0])
                break
            rows_active.pop(int(np.argmin(mult)))   # not binding: the gain counts it
        gain = 0.5 * float(gf @ Hinv @ gf)
    pg = float(np.max(np.abs(gf))) if gf.size else 0.0
    coord = _coordinate_names(prob)
    tol = max(OPTIMALITY_GAIN_TOL, OPTIMALITY_GAIN_REL * (n + abs(total_ll)))
    return {"passed": bool(gain <= tol),
            "checked": "KKT: projected gradient of the log-likelihood on the free "
                       "coordinates, as the Newton gain it still predicts "
                       f"(curvature: {curvature})",
            "predicted_gain": gain, "projected_gradient": pg,
            "tolerance": tol,
            "active_bounds": ([coord[i] for i in np.flatnonzero(active)]
                              + ["stationarity limit"] * bool(rows_active)),
            # d(log L)/d(persistence) held back by the limit: moving the limit from
            # 1 - margin to 1 would gain about this times the margin
            "limit_multiplier": limit_mult,
            "coordinates": coord if coord != list(names) else None}


def _coordinate_names(prob: _Problem) -> list:
    names = list(prob.names)
    if prob.spec.name == "gjr":
        names[names.index("gamma")] = "alpha+gamma"
    if prob.dist.name == "t":
        names[names.index("nu")] = "1/nu"
    return names


#: the slope below is scaled by this: measured on arch's sp500, nasdaq, wti and vix,
#: 0.4-0.6 all give the fewest EGARCH evaluations (0.3 and 0.75 one to three more)
ASYMMETRY_START_SHRINK = 0.5


def _asymmetry_start(z: np.ndarray) -> float | None:
    """A start for EGARCH's asymmetry ``gamma`` from a symmetric model's standardised
    residuals ``z`` (e.g. GARCH's): half the least-squares slope of ``ln z_t^2`` on
    ``z_{t-1}``.

    If the log-variance responds to the sign of a shock as EGARCH's
    ``gamma z_{t-1}`` term says, a symmetric variance path misses that term, and it
    reappears in the next day's ``ln z_t^2 = ln z*_t^2 + (h_t - h^sym_t)`` (``z*`` the
    true innovation, independent of the past), so the slope estimates ``gamma``
    (the log squared residual as a linear, noisy measurement of the log-variance:
    Harvey, Ruiz & Shephard 1994, *Rev. Econ. Stud.* 61, cited from memory). The slope is shrunk (:data:`ASYMMETRY_START_SHRINK`): it is a start for the
    climb, not an estimate. A least-squares fit of GARCH's own path gives
    ``gamma`` near 0 by construction, and the trial steps are capped, so a start far
    from the data's asymmetry costs several capped steps.
    """
    zl = z[:-1] - float(np.mean(z[:-1]))
    den = float(zl @ zl)
    if not den > 0:
        return None
    u = np.log(np.maximum(z[1:] * z[1:], 1e-8))     # floor: a zero residual
    g = ASYMMETRY_START_SHRINK * float(zl @ (u - float(np.mean(u)))) / den
    return g if math.isfinite(g) else None


def _egarch_start_from(prob: _Problem, mu: float, s2: np.ndarray, nu) -> np.ndarray | None:
    """An EGARCH start from another model's variance path (scaled units): least
    squares of ``h_t = omega + alpha (|z_{t-1}| - sqrt(2/pi)) + gamma z_{t-1}
    + beta h_{t-1}`` with ``h = ln s2`` and ``z`` the path's standardised residuals."""
    h = np.log(s2)
    z = (prob.y - mu) / np.sqrt(s2)
    X = np.column_stack([np.ones(h.size - 1), np.abs(z[:-1]) - SQRT_2_OVER_PI, z[:-1],
                         h[:-1]])
    try:
        coef = np.linalg.lstsq(X, h[1:], rcond=None)[0]
    except np.linalg.LinAlgError:
        return None
    omega, alpha, gamma, beta = (float(c) for c in coef)
    if not all(math.isfinite(c) for c in coef):
        return None
    g_hat = _asymmetry_start(z)       # the path is symmetric: gamma from its residuals
    if g_hat is not None:
        gamma = g_hat
    beta = min(max(beta, 0.0), 0.995)
    alpha = min(max(alpha, -0.5), 0.5)
    gamma = min(max(gamma, -0.5), 0.5)
    omega = float(np.mean(h[1:] - alpha * X[:, 1] - gamma * X[:, 2] - beta * h[:-1]))
    vec = ([mu] if prob.has_mu else []) + [omega, alpha, gamma, beta]
    if nu is not None:
        vec.append(nu)
    return np.array(vec)


def _nested_start(prob: _Problem, nested: GarchFit | None, scale: float):
    """The nested model's optimum as a start (scaled units): GARCH's estimate is GJR
    with ``gamma = 0``; for EGARCH (which does not nest GARCH) a start fitted to
    GARCH's variance path."""
    if nested is None or nested.model != "garch" or nested.dist != prob.dist.name:
        return None
    p = nested.params
    mu_s = p.get("mu", 0.0) * scale
    nu = p.get("nu")
    if prob.spec.name == "gjr":
        vec = ([mu_s] if prob.has_mu else []) + [p["omega"] * scale ** 2, p["alpha"], 0.0,
                                                 p["beta"]]
        if nu is not None:
            vec.append(nu)
        return np.array(vec)
    if prob.spec.name == "egarch":
        # the mean starts at the sample mean: EGARCH's likelihood has a kink wherever
        # a residual crosses zero (|z|), so nearby starts in mu can end in
        # neighbouring local optima
        return _egarch_start_from(prob, float(np.mean(prob.y)),
                                  (nested.conditional_vol * scale) ** 2, nu)
    return None


def _estimate(y: np.ndarray, model: str, dist: str, mean: str, backcast,
              nested: GarchFit | None = None, regimes: dict | None = None,
              quick: bool = False):
    """One maximum-likelihood fit. Returns (fit, problem text or None).

    ``quick`` (GARCH as the start of a model that nests or follows it): one climb
    stopped once a step predicts less than QUICK_STOP_GAIN, no check, unless the
    weak-dynamics regime has to be climbed too (then the full fit);
    ``regimes["quick"]`` says which was done.

    ``regimes`` (a dict) shares what the GARCH fit learnt about the weak-dynamics
    regime with the fits it starts: GARCH records the gap between its best
    weak-dynamics start and its optimum (``low_gap``); GJR and EGARCH, given the
    same dict, skip their weak-dynamics starts when that gap was more than twice
    the climbing threshold (strong clustering in the data, seen by the nested model).

    Climbs from the best start of each persistence regime and from the nested
    model's optimum (``nested``, a GARCH fit with the same distribution), keeps the
    highest stationary optimum, and calls it converged only if it passes the
    first-order check (:func:`_optimality`); otherwise it restarts from that point
    and from the remaining starts before reporting why it failed.
    """
    scale = _scale_of(y)
    y_s = y * scale
    has_mu = mean == "constant"
    bc = _backcast_scaled(y_s, has_mu, backcast, scale)
    prob = _Problem(y_s, model, dist, has_mu, bc)
    var = float(np.var(y_s))
    coords = _Coordinates(prob)
    M = coords.M
    bounds = prob.internal_bounds(var)
    lo, hi = coords.bounds(np.array([b[0] for b in bounds]),
                           np.array([b[1] for b in bounds]))
    inv_nu = coords.inv_nu
    to_theta = coords.theta

    def fun_grad(u):
        th = to_theta(u)
        f, g = prob.objective_grad(th)
        gu = M.T @ g
        if inv_nu:
            gu[-1] = -th[-1] ** 2 * g[-1]    # d nu / d eta = -nu^2
        return f, gu

    # the stationarity limit as a linear inequality in the optimiser's coordinates
    # (GARCH, GJR; EGARCH's is the bound on beta): held by the optimiser's active set
    srow = prob.stationarity_row()
    A_ub = None if srow is None else (srow[0] @ M)[None, :]
    b_ub = None if srow is None else np.array([srow[1]])

    def feasible(u):
        if A_ub is not None and not float(A_ub[0] @ u) <= b_ub[0] + 1e-12:
            return False
        return prob.feasible(to_theta(u))

    cap = prob.max_step()

    def run(u0, stop=STOP_GAIN, stop_if=None):
        u0 = np.clip(u0, lo, hi)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            th0 = to_theta(u0)
            hess, (f0, g0) = prob.start_curvature(th0)
            J = coords.jacobian(th0)
            res = minimize_box(fun_grad, u0, lo, hi, hess0=J.T @ hess @ J,
                               fg0=(f0, J.T @ g0), max_step=cap, A_ub=A_ub, b_ub=b_ub,
                               gain_tol=stop / prob.n, stop_if=stop_if)
        u = np.asarray(res.x, dtype=float)
        _, vol, _ = prob.unpack(to_theta(u))
        pers = prob.spec.persistence(vol)
        stationary = pers <= 1.0 - STATIONARITY_MARGIN + 1e-12
        return {"res": res, "u": u, "f": float(res.fun), "pers": pers,
                "stationary": bool(stationary and math.isfinite(res.fun)), "opt": None}

    def curvature_at(r):
        """The conditional information (or the outer product of the scores) and
        the gradient at a climb's end, in the optimiser's coordinates."""
        if r is None or not r["stationary"]:
            return None
        with warnings.catch_warnings(), np.errstate(all="ignore"):
            warnings.simplefilter("ignore", RuntimeWarning)
            th = to_theta(r["u"])
            hess, (f0, g0) = prob.start_curvature(th)
        J = coords.jacobian(th)
        return J.T @ hess @ J, J.T @ g0, float(f0)

    def verified(r):
        if r["opt"] is None:
            r["opt"] = _optimality(prob, coords, r["u"], lo, hi, r["res"], A_ub, b_ub)
        return r["opt"]["passed"]

    def better(a, b):   # is run a preferred to run b?
        if b is None:
            return True
        if a["stationary"] != b["stationary"]:
            return a["stationary"]
        return a["f"] < b["f"] - 1e-13

    labelled = prob.regime_starts(var)
    ns = _nested_start(prob, nested, scale)
    if ns is not None:
        # the nested model's optimum replaces the high-persistence grid (it is the
        # better start on every series tried); for EGARCH, GARCH's log-variance path
        # also starts the path solver near the EGARCH path
        labelled = [("nested", ns)] + [c for c in labelled if c[0] != "high"]
        if model == "egarch":
            prob._h_guess = 2.0 * np.log(nested.conditional_vol * scale)
    cands = []
    if (ns is not None and regimes is not None and regimes.get("low_gap") is not None
            and regimes["low_gap"] > 2.0 * max(60.0, 0.02 * prob.n)):
        # the nested GARCH fit found the weak-dynamics regime far below its optimum
        labelled = [c for c in labelled if c[0] != "low"]
    for label, th in labelled:
        u0 = np.clip(coords.u(th), lo, hi)
        if not feasible(u0):
            continue
        if label == "nested" and not any(c[0] == "high" for c in labelled):
            f0 = -math.inf    # the only main start: no need to rank it
        else:
            with np.errstate(all="ignore"):
                f0 = prob.objective(to_theta(u0))
        cands.append((label, f0, u0))
    # climb from the best of the nested and high-persistence starts; then from the
    # best weak-dynamics start, unless even that start is far below the optimum
    # found (then the data's dynamics are strong and no low-persistence optimum
    # competes; measured on arch's datasets and simulated series, the gap is
    # 500-800 log-likelihood units on long real series, under 50 with weak dynamics)
    main = [c for c in cands if c[0] != "low"]
    low = [c for c in cands if c[0] == "low"]
    threshold = max(60.0, 0.02 * prob.n)
    order = []
    best = None
    if regimes is not None and model == "garch":
        regimes["quick"] = False
    if main:
        _, f0, u0 = min(main, key=lambda c: c[1])
        order.append(u0)
        best = run(u0, QUICK_STOP_GAIN if quick else STOP_GAIN)
    if low:
        _, f0, u0 = min(low, key=lambda c: c[1])
        gap = (f0 - best["f"]) * prob.n if best is not None else 0.0
        if regimes is not None and model == "garch":
            regimes["low_gap"] = gap if best is not None and best["stationary"] else None
        if best is None or not best["stationary"] or gap <= threshold:
            if quick and best is not None:
                best = run(best["u"])     # the full climb after all
                quick = False
            order.append(u0)
            r = run(u0, stop_if=_joining(best, prob.n, lo, hi, A_ub, b_ub,
                                         curvature_at(best)))
            if better(r, best):
                best = r
    if quick and best is not None and best["stationary"] and math.isfinite(best["f"]):
        if regimes is not None:
            regimes["quick"] = True
        # (only its parameters, path and log-likelihood are used: the optimiser's
        # last value gives the latter)
        return _result(prob, to_theta(best["u"]), y, scale, mean, False,
                       "quick climb (a start for the nested model)", None, None,
                       loglik_scaled=-prob.n * best["f"]), None
    tried = order
    if best["stationary"] and not verified(best):
        # stopped short of an optimum: climb again from there with fresh curvature,
        # then from the other starts, and keep the best verified point
        more = [best["u"]] + [u0 for _, _, u0 in sorted(cands, key=lambda c: c[1])
                              if not any(u0 is t for t in tried)][:3]
        for u0 in more:
            r = run(u0)
            if r["stationary"] and (better(r, best) or not verified(best)) and verified(r):
                best = r
            if verified(best):
                break
    res, u = best["res"], best["u"]
    theta = to_theta(u)
    opt = (_optimality(prob, coords, u, lo, hi, res, A_ub, b_ub) if best["opt"] is None
           else best["opt"])
    problem = None
    if not best["stationary"]:
        problem = f"{model} estimate is not stationary (persistence {best['pers']:.6f})"
    elif not opt["passed"]:
        gain = opt["predicted_gain"]
        problem = (f"{model} stopped short of an optimum (first-order check: a further "
                   f"gain of {gain:.2g} in log-likelihood predicted, tolerance "
                   f"{opt['tolerance']:.2g}; optimiser: {res.message})"
                   if gain is not None else f"{model} did not converge ({opt['checked']})")
    fit = _result(prob, theta, y, scale, mean, problem is None, str(res.message),
                  None, None, with_cov=problem is None, optimality=opt)
    if problem is None and at_stationarity_limit(best["pers"]):
        fit = _replace(fit, warnings=(stationarity_limit_warning(model, best["pers"]),))
    if problem is None:
        problem = _implausible_forecast(fit, float(np.var(y)))
        if problem is not None:
            fit = _replace(fit, converged=False)
    return fit, problem


#: a weak-dynamics climb is stopped once it is within this many log-likelihood
#: units of the optimum already found ...
JOIN_LOGLIK = 10.0
#: ... and that optimum's quadratic model (its gradient and conditional information)
#: predicts the climb's log-likelihood there to within this fraction of the gap
#: (plus JOIN_MODEL_ABS): the climb has entered the found optimum's basin, where it
#: can only end at that optimum
JOIN_MODEL_REL = 0.25
JOIN_MODEL_ABS = 0.02
#: ... and every coordinate is within this of the optimum's (relative to 1 + |u|)
JOIN_COORD = 0.1


def _joining(best: dict | None, n: int, lo: np.ndarray, hi: np.ndarray, A_ub=None,
             b_ub=None, curvature=None):
    """``stop_if`` for a weak-dynamics climb (:func:`minimize_box`): stops it when it
    has reached the basin of ``best``, the optimum of the main climb, since from
    there it can only climb to ``best`` again.

    ``curvature`` is ``(B*, g*, f*)`` at the optimum ``u*``: the conditional
    information matrix (the expected Hessian given the past, of minus the mean
    log-likelihood, in the optimiser's coordinates; not the quasi-Newton estimate,
    which is accurate only along the directions the climb explored), the gradient
    and the objective. With ``d = u - u*`` the quadratic model is ``m(u) = f* +
    g*'d + d'B*d / 2``; the climb at ``u`` has joined when ``n (f(u) - f*) <=
    JOIN_LOGLIK``, ``0 <= n (m(u) - f*) <= 2 JOIN_LOGLIK``, ``|d| <= JOIN_COORD (1 +
    |u*|)`` in every coordinate, the model predicts ``f(u)`` to within
    ``JOIN_MODEL_REL n (m(u) - f*) + JOIN_MODEL_ABS`` log-likelihood units and the
    gradient ``g(u)`` as well (the Newton steps from ``u`` by the model and by the
    gradient differ by less than that gain): near a strict local minimum the
    objective is its quadratic model, and a descent method that enters the region
    where the model holds converges to that minimum (Nocedal & Wright, *Numerical
    Optimization*, 2nd ed., §3.3). None when ``best`` cannot serve: not
    stationary, without a usable curvature, with a gain still predicted at ``u*``
    (above the first-order check's tolerance), or on a bound or the stationarity
    limit (where the log-likelihood goes on rising beyond the bound, and a flat one
    can hold another optimum along it).
    """
    if best is None or not best["stationary"] or curvature is None:
        return None
    B, g_star, f_star = curvature
    B = 0.5 * (np.asarray(B, dtype=float) + np.asarray(B, dtype=float).T)
    g_star = np.asarray(g_star, dtype=float)
    if not (np.all(np.isfinite(B)) and np.all(np.isfinite(g_star))
            and math.isfinite(f_star)):
        return None
    u_star = np.asarray(best["u"], dtype=float)
    span = np.maximum(hi - lo, 1e-12)
    if np.any(u_star <= lo + 1e-6 * span) or np.any(u_star >= hi - 1e-6 * span):
        return None
    if A_ub is not None and np.any(b_ub - A_ub @ u_star <= 1e-8 * (1.0 + np.abs(b_ub))):
        return None
    w, V = np.linalg.eigh(B)
    if not float(w.min()) > 1e-12 * max(float(w.max()), 1e-300):
        return None
    Binv = (V / w) @ V.T
    # an interior optimum: the information's Newton step from u* gains nothing
    if 0.5 * n * float(g_star @ Binv @ g_star) > OPTIMALITY_GAIN_TOL * 10.0:
        return None
    near = JOIN_COORD * (1.0 + np.abs(u_star))

    def stop_if(u, f, g):
        gap = n * (f - f_star)
        if not gap <= JOIN_LOGLIK:
            return None
        d = u - u_star
        if np.any(np.abs(d) > near):
            return None
        model = n * (float(g_star @ d) + 0.5 * float(d @ B @ d))
        if not (0.0 <= model <= 2.0 * JOIN_LOGLIK):
            return None
        tol = JOIN_MODEL_REL * model + JOIN_MODEL_ABS
        if not abs(gap - model) <= tol:
            return None
        # the gradient too: the Newton step the model takes from u (to u*) and the
        # one the climb's own gradient asks for differ by less than the tolerance
        miss = np.asarray(g, dtype=float) - g_star - B @ d
        if 0.5 * n * float(miss @ Binv @ miss) <= tol:
            return "joined the optimum already found (its basin reached)"
        return None

    return stop_if


def at_stationarity_limit(persistence: float) -> bool:
    """True when a persistence sits at the estimator's stationarity limit
    ``1 - STATIONARITY_MARGIN`` (within a thousandth of the margin) or beyond."""
    return persistence >= 1.0 - 1.001 * STATIONARITY_MARGIN


def stationarity_limit_warning(model: str, persistence: float) -> str:
    return (f"{model} persistence is at the stationarity limit ({persistence:.7f} = "
            f"1 - {STATIONARITY_MARGIN:g}): the likelihood rises towards an integrated "
            "model, so the estimate is held at the limit; shocks barely decay over any "
            "option horizon (the forecast stays near today's variance) and the "
            "long-run level is not identified")


def _implausible_forecast(fit: GarchFit, sample_variance: float) -> str | None:
    """A reason when the fit's one-year forecast is not finite or exceeds
    :data:`MAX_FORECAST_VARIANCE_RATIO` times the sample variance (EGARCH is checked
    with its normal-innovation forecast, a cheap closed form)."""
    p = fit.params
    with np.errstate(all="ignore"):
        if fit.model == "egarch":
            v = fc.egarch_forecast_variance(fit.last_variance, p["omega"], p["alpha"],
                                            p["gamma"], p["beta"], 252, "normal", None)
        else:
            v = fit.forecast_variance(252)
    worst = float(np.max(v)) if np.all(np.isfinite(v)) else math.inf
    if worst <= MAX_FORECAST_VARIANCE_RATIO * sample_variance:
        return None
    ratio = math.sqrt(worst / sample_variance) if math.isfinite(worst) else math.inf
    return (f"{fit.model} forecast is not plausible (a one-year forecast vol "
            f"{ratio:.3g} times the history's)")


def _ewma(y: np.ndarray, mean: str, backcast, reason: str) -> GarchFit:
    scale = _scale_of(y)
    y_s = y * scale
    has_mu = mean == "constant"
    y_c = y_s - np.mean(y_s) if has_mu else y_s
    bc = _backcast_scaled(y_s, has_mu, backcast, scale)
    prob = _Problem(y_c, "ewma", "normal", False, bc)
    fit = _result(prob, np.zeros(0), y, scale, mean, True,
                  "EWMA has no estimated parameters", reason, None,
                  n_free=1 if has_mu else 0)
    if has_mu:  # the log-likelihood was computed on demeaned returns: same as with mu
        pass
    return fit


def fit_garch(returns, model: str = "gjr", dist: str = "t", mean: str = "constant", *,
              backcast: float | None = None) -> GarchFit:
    """Fit a GARCH-family model to daily decimal log returns by maximum likelihood.

    Parameters
    ----------
    returns : array-like, shape (n,)
        Daily log returns in decimals (0.01 = 1%), oldest first, n >= 250.
    model : {"garch", "gjr", "egarch", "auto"}
        GARCH(1,1) (Bollerslev 1986), GJR-GARCH(1,1) (Glosten, Jagannathan & Runkle
        1993), EGARCH(1,1) (Nelson 1991); ``auto`` fits all three with ``dist`` and
        keeps the lowest BIC (the candidates' BICs are in ``fit.candidates``).
    dist : {"normal", "t"}
        Innovation distribution; ``t`` is the unit-variance Student-t (Bollerslev 1987).
    mean : {"constant", "zero"}
    backcast : float, optional
        Start-up daily variance (decimal units). Default: the exponentially weighted
        average (decay 0.94) of the first 75 squared demeaned returns (the arch
        library's convention).

    Returns
    -------
    GarchFit

    Notes
    -----
    Maximises ``sum_t l(e_t; sigma^2_t, nu)`` by a projected quasi-Newton method
    (:func:`optbench.volatility.optimize.minimize_box`) within positivity bounds and
    the stationarity limit ``persistence <= 1 - STATIONARITY_MARGIN`` (a linear
    inequality held by the optimiser's active set for GARCH and GJR, the bound on
    beta for EGARCH); GJR in the coordinates
    ``(omega, alpha, alpha + gamma, beta)`` so that both positivity constraints are
    bounds. GJR and EGARCH start from GARCH's optimum (GJR nests it at gamma = 0;
    when one of them alone is asked for, from a quick GARCH climb, GJR then checked
    to end a log-likelihood unit above it or climbed again from GARCH's optimum),
    a second climb starts from weak dynamics when that regime is within reach, and
    ``converged`` is set only after the first-order (KKT) check recorded in
    ``fit.optimality``. An optimum at the stationarity limit is reported converged
    with a warning in ``fit.warnings``. Degenerate histories (20 or more unchanged
    closes in a row, fewer than 125 moving days, an implausible forecast) fall back
    or raise with the reason. For GARCH and GJR the
    variance and its derivatives come from one blocked linear filter, giving an
    analytic gradient; EGARCH's path is solved by Newton rounds over the whole path
    with an adjoint (reverse-mode) gradient. If the
    fit fails, a simpler model is tried (EGARCH -> GJR ->
    GARCH -> EWMA with lambda = 0.94, RiskMetrics 1996) and ``fallback_reason``
    says why. Standard errors are the robust sandwich of Bollerslev & Wooldridge
    (1992).
    """
    y = _check_returns(returns)
    _check_choice("model", model, MODELS + ("auto",))
    _check_choice("dist", dist, ("normal", "t"))
    _check_choice("mean", mean, ("constant", "zero"))
    _check_usable(y)
    stale = _stale_reason(y)
    if stale is not None:
        return _ewma(y, mean, backcast, f"EWMA lambda=0.94 used: {stale} "
                                        "(normal innovations)")
    nested_fit = {}
    regimes = {}

    def estimate(m):
        # GARCH first: its optimum starts GJR (which nests it) and EGARCH
        if m != "garch" and "garch" not in nested_fit and model == m:
            # only the asked-for model is reported: GARCH is climbed quickly as its
            # start, and fully only if GJR does not end clearly above it
            g, gp = _estimate(y, "garch", dist, mean, backcast, regimes=regimes,
                              quick=True)
            if regimes.get("quick"):
                f, prob = _estimate(y, m, dist, mean, backcast, regimes=regimes,
                                    nested=g)
                if m == "egarch" or (prob is None
                                     and f.loglik >= g.loglik + QUICK_MARGIN):
                    return f, prob
            else:
                nested_fit["garch"] = (g, gp)
        if m != "garch" and "garch" not in nested_fit:
            g, gp = _estimate(y, "garch", dist, mean, backcast, regimes=regimes)
            nested_fit["garch"] = (g, gp)
        if m == "garch" and "garch" in nested_fit:
            return nested_fit["garch"]
        nest = nested_fit.get("garch")
        f, prob = _estimate(y, m, dist, mean, backcast, regimes=regimes,
                            nested=nest[0] if nest and nest[1] is None else None)
        if m == "garch":
            nested_fit["garch"] = (f, prob)
        return f, prob

    if model == "auto":
        fits, bics, problems = {}, {}, []
        for m in MODELS:
            f, prob = estimate(m)
            if prob is None:
                fits[m], bics[m] = f, f.bic
            else:
                bics[m] = None
                problems.append(prob)
        if not fits:
            return _ewma(y, mean, backcast, "EWMA lambda=0.94 used: " + "; ".join(problems)
                         + " (normal innovations)")
        best = min(fits, key=lambda m: fits[m].bic)
        reason = None
        return _replace(fits[best], candidates=bics, fallback_reason=reason)
    reasons = []
    m = model
    while m != "ewma":
        f, prob = estimate(m)
        if prob is None:
            if reasons:
                return _replace(f, fallback_reason="; ".join(reasons)
                                + f"; fell back to {m}")
            return f
        reasons.append(prob)
        m = FALLBACK[m]
    return _ewma(y, mean, backcast, "EWMA lambda=0.94 used: " + "; ".join(reasons)
                 + " (normal innovations)")


def _replace(fit: GarchFit, **changes) -> GarchFit:
    import dataclasses

    return dataclasses.replace(fit, **changes)


def fix_garch(returns, params: dict, model: str = "gjr", dist: str = "t",
              mean: str = "constant", *, backcast: float | None = None) -> GarchFit:
    """Evaluate given decimal-unit parameters on ``returns`` without estimating.

    The result has the same interface as a fitted one (likelihood, conditional
    vols, forecasts, filtering, simulation); its standard errors are the robust
    sandwich evaluated at the given parameters (on first use). ``converged`` is True and
    ``message`` says the parameters were held.
    """
    y = _check_returns(returns)
    _check_choice("model", model, MODELS + ("ewma",))
    _check_choice("dist", dist, ("normal", "t"))
    _check_choice("mean", mean, ("constant", "zero"))
    if model == "ewma":
        return _ewma(y, mean, backcast, None)
    scale = _scale_of(y)
    y_s = y * scale
    has_mu = mean == "constant"
    bc = _backcast_scaled(y_s, has_mu, backcast, scale)
    prob = _Problem(y_s, model, dist, has_mu, bc)
    missing = [n for n in prob.names if n not in params]
    if missing:
        raise InputError("params", f"missing {', '.join(missing)} for {model}-{dist}")
    theta = _to_scaled(model, prob.names, params, scale)
    if prob.loglik_obs(theta) is None:
        raise InputError("params", "give a non-positive variance on these returns")
    return _result(prob, theta, y, scale, mean, True, "parameters held fixed", None,
                   None, with_cov=True)
