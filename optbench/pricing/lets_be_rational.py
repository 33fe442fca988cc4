r"""Vectorised normalised-Black implied volatility ("Let's Be Rational").

Everything here works on the *normalised* Black function of an out-of-the-money
call,

.. math::

    b(x, s) = \Phi\!\left(\tfrac{x}{s} + \tfrac{s}{2}\right) e^{x/2}
            - \Phi\!\left(\tfrac{x}{s} - \tfrac{s}{2}\right) e^{-x/2},
    \qquad x = \ln(F/K) \le 0,\quad s = \sigma\sqrt{t},

which is the undiscounted Black price divided by :math:`\sqrt{FK}`. Any call or
put maps onto this form: subtract the (undiscounted) intrinsic value and use
:math:`x = -|\ln(F/K)|` (put-call parity and the reciprocal-strike symmetry
:math:`b(x,s) = b(-x,s) + e^{x/2} - e^{-x/2}`).

The inversion follows P. Jäckel, "Let's Be Rational", *Wilmott* (2015), 40-53:
four segments of :math:`\beta \in (0, e^{x/2})` separated by the points
:math:`s_l, s_c = \sqrt{2|x|}, s_h`; an initial guess from a rational cubic
(Delbourgo & Gregory 1985) of either :math:`s(\beta)` itself (the two middle
segments) or of the lower/upper asymptotic maps :math:`f_l, f_u`; then Householder
iterations of order three on :math:`g(s) = 1/\ln b - 1/\ln\beta` (lowest segment),
:math:`g = \ln(b_{max} - \beta) - \ln(b_{max} - b)` (highest segment, when
:math:`\beta > b_{max}/2`) or :math:`g = b - \beta` (elsewhere). Two iterations
reach machine precision on the whole domain; elements whose last step is still
large get two more, and whatever is still unsettled is reported as unconverged
so the caller can fall back to the scalar reference implementation.

The evaluation of :math:`b` uses Jäckel's four regions for full relative
accuracy down to the smallest normal numbers: the 17th-order asymptotic expansion
(Abramowitz & Stegun 26.2.12) for :math:`h = x/s < -10` with small :math:`t = s/2`,
the 12th-order small-:math:`t` expansion, the plain formula when
:math:`h + t > 0.85`, and otherwise the scaled complementary error function
:math:`b = \tfrac12 e^{-(h^2+t^2)/2}[\mathrm{erfcx}(-(h+t)/\sqrt2) -
\mathrm{erfcx}(-(h-t)/\sqrt2)]` (Cody 1969).

All functions take and return float arrays of one shape; the caller works in
chunks (:data:`CHUNK`) so the temporaries stay in cache.
"""
from __future__ import annotations

import numpy as np
from optbench.pricing.special import erfcx, ndtr, ndtri

DBL_EPSILON = np.finfo(float).eps
DBL_MIN = np.finfo(float).tiny
DBL_MAX = np.finfo(float).max
SQRT_DBL_MAX = np.sqrt(DBL_MAX)

ONE_OVER_SQRT_TWO = 0.7071067811865475244008443621048490392848359376887
ONE_OVER_SQRT_TWO_PI = 0.3989422804014326779399460599343818684758586311649
SQRT_TWO_PI = 2.506628274631000502415765284811045253006986740610
TWO_PI = 6.283185307179586476925286766559005768394338798750
SQRT_PI_OVER_TWO = 1.253314137315500251207882642405522626503493370305
SQRT_THREE = 1.732050807568877293527446341505872366942805253810
SQRT_ONE_OVER_THREE = 0.577350269189625764509148780501957455647601751270
TWO_PI_OVER_SQRT_TWENTY_SEVEN = 1.209199576156145233729385505094770488189377498728
PI_OVER_SIX = 0.523598775598298873077107230546583814032861566563

#: h below which the asymptotic expansion is used (Jäckel 2015, section 3)
ASYMPTOTIC_H = -10.0
#: t below which the small-t expansion is used: 2 * eps**(1/16) ~ 0.21
SMALL_T = 2.0 * DBL_EPSILON ** (1.0 / 16.0)
#: h - t above which the plain cumulative-normal form replaces the erfcx form (region 4):
#: there the normal integral is accurate to about 15 digits and, outside regions 1-2,
#: the two terms cancel mildly, so b keeps ~14 digits (checked in the tests against the
#: reference implementation) at a fraction of erfcx's cost; further out in the tail
#: Jäckel's single-exponential erfcx form is kept
PLAIN_Z_MIN = -3.0
#: rational cubic control parameter limits (Delbourgo & Gregory 1985; Jäckel 2015)
R_MIN = -(1.0 - np.sqrt(DBL_EPSILON))
R_MAX = 2.0 / (DBL_EPSILON * DBL_EPSILON)
#: elements processed at a time by callers: 16,000 doubles (125 KiB) per array keeps
#: every temporary under the allocator's 128 KiB threshold for fresh (page-faulting)
#: memory and in the core's cache, while the ~650 array operations per chunk cost
#: little per element
CHUNK = 16000


# ---------------------------------------------------------------------------
# the normalised Black function and its vega
# ---------------------------------------------------------------------------

# The asymptotic expansion of A(h, t) (Abramowitz & Stegun 26.2.12 carried to order 17,
# as in Jäckel 2015) is nested as A = 2 + k_1 q (P_1(e) + k_2 q (P_2(e) + ... +
# k_17 q P_17(e))) with k_n = 2n - 1. Term n of order 1..16: (k_n, coefficients of
# P_n, highest power of e first); the coefficients are (-1)^n * 2 * binomial-type
# integers (Jäckel 2015, appendix).
_ASYMPTOTIC_TERMS_OUTER_FIRST = [
    (1.0, (-2.0, -6.0)),
    (3.0, (2.0, 2.0E1, 1.0E1)),
    (5.0, (-2.0, -4.2E1, -7.0E1, -1.4E1)),
    (7.0, (2.0, 7.2E1, 2.52E2, 1.68E2, 1.8E1)),
    (9.0, (-2.0, -1.1E2, -6.6E2, -9.24E2, -3.3E2, -2.2E1)),
    (1.1E1, (2.0, 1.56E2, 1.43E3, 3.432E3, 2.574E3, 5.72E2, 2.6E1)),
    (1.3E1, (-2.0, -2.1E2, -2.73E3, -1.001E4, -1.287E4, -6.006E3, -9.1E2, -3.0E1)),
    (1.5E1, (2.0, 2.72E2, 4.76E3, 2.4752E4, 4.862E4, 3.8896E4, 1.2376E4, 1.36E3,
                  3.4E1)),
    (1.7E1, (-2.0, -3.42E2, -7.752E3, -5.4264E4, -1.51164E5, -1.84756E5, -1.00776E5,
                  -2.3256E4, -1.938E3, -3.8E1)),
    (1.9E1, (2.0, 4.2E2, 1.197E4, 1.08528E5, 4.0698E5, 7.05432E5, 5.8786E5, 2.3256E5,
                  4.0698E4, 2.66E3, 4.2E1)),
    (2.1E1, (-2.0, -5.06E2, -1.771E4, -2.01894E5, -9.80628E5, -2.288132E6,
                  -2.704156E6, -1.63438E6, -4.90314E5, -6.7298E4, -3.542E3, -4.6E1)),
    (2.3E1, (2.0, 6.0E2, 2.53E4, 3.542E5, 2.16315E6, 6.53752E6, 1.04006E7, 8.9148E6,
                  4.08595E6, 9.614E5, 1.0626E5, 4.6E3, 5.0E1)),
    (2.5E1, (-2.0, -7.02E2, -3.51E4, -5.9202E5, -4.44015E6, -1.687257E7, -3.476772E7,
                  -4.01166E7, -2.607579E7, -9.37365E6, -1.77606E6, -1.6146E5, -5.85E3,
                  -5.4E1)),
    (2.7E1, (2.0, 8.12E2, 4.7502E4, 9.5004E5, 8.58429E6, 4.006002E7, 1.0379187E8,
                  1.5511752E8, 1.3572783E8, 6.919458E7, 2.003001E7, 3.12156E6, 2.3751E5,
                  7.308E3, 5.8E1)),
    (2.9E1, (-2.0, -9.3E2, -6.293E4, -1.472562E6, -1.577745E7, -8.870433E7,
                  -2.8224105E8, -5.3036505E8, -6.0108039E8, -4.1250615E8, -1.6934463E8,
                  -4.032015E7, -5.25915E6, -3.39822E5, -8.99E3, -6.2E1)),
    (3.1E1, (2.0, 1.056E3, 8.184E4, 2.215136E6, 2.7768312E7, 1.8512208E8, 7.0963464E8,
                  1.6376184E9, 2.33360622E9, 2.07431664E9, 1.14633288E9, 3.8707344E8,
                  7.71342E7, 8.544096E6, 4.74672E5, 1.0912E4, 6.6E1)),
]
#: P_17(e), highest power first (k_17 = 33)
_ASYMPTOTIC_INNERMOST = (-2.0, -1.19E3, -1.0472E5, -3.24632E6, -4.707164E7, -3.67158792E8,
                         -1.6689036E9, -4.6399188E9, -8.1198579E9, -9.0751353E9,
                         -6.49588632E9, -2.9526756E9, -8.344518E8, -1.4121492E8,
                         -1.344904E7, -6.49264E5, -1.309E4, -7.0E1)


def _asymptotic_matrix() -> np.ndarray:
    """Row n-1 holds k_1 k_2 ... k_n times the coefficients of P_n(e), lowest power
    first, so that A = 2 + sum_n q^n (C @ (1, e, ..., e^17))_n."""
    terms = _ASYMPTOTIC_TERMS_OUTER_FIRST + [(33.0, _ASYMPTOTIC_INNERMOST)]
    C = np.zeros((len(terms), len(_ASYMPTOTIC_INNERMOST)))
    k_prod = 1.0
    for row, (k, coeffs) in enumerate(terms):
        k_prod *= k
        C[row, :len(coeffs)] = k_prod * np.asarray(coeffs[::-1])
    return C


_ASYMPTOTIC_C = _asymptotic_matrix()  # (17 orders, 18 powers of e)
_ASYMPTOTIC_E_EXP = np.arange(18.0)[:, None]  # e^0 .. e^17
_ASYMPTOTIC_Q_EXP = np.arange(1.0, 18.0)[:, None]  # q^1 .. q^17


def _powers(v: np.ndarray, n: int, first: float | None) -> np.ndarray:
    """(n, m) array of the powers v^1..v^n of each element, one row per power (or
    1, v, ..., v^(n-1) when first == 1)."""
    out = np.empty((n, v.shape[0]))
    k = 0
    if first is not None:
        out[0] = first
        k = 1
    out[k] = v
    for j in range(k + 1, n):
        np.multiply(out[j - 1], v, out=out[j])
    return out


def _asymptotic(h: np.ndarray, t: np.ndarray, g: np.ndarray) -> np.ndarray:
    """b for h < -10 and small t: 17th-order expansion of A(h, t) in q = (h/r)^2,
    e = (t/h)^2, r = (h+t)(h-t); b = g (t/r) A / sqrt(2 pi) with
    g = exp(-(h^2+t^2)/2) (Jäckel 2015, section 3; A&S 26.2.12).

    The nested expansion is evaluated as one bivariate polynomial: powers of e times
    the flattened coefficients (one matrix product), then powers of q."""
    e = (t / h) ** 2
    r = (h + t) * (h - t)
    q = (h / r) ** 2
    if e.shape[0] < 256:  # the usual handful of tail elements: one call per power table
        E = np.power(e, _ASYMPTOTIC_E_EXP)
        Q = np.power(q, _ASYMPTOTIC_Q_EXP)
    else:
        E = _powers(e, _ASYMPTOTIC_C.shape[1], 1.0)
        Q = _powers(q, _ASYMPTOTIC_C.shape[0], None)
    A = 2.0 + np.einsum("ij,ij->j", _ASYMPTOTIC_C @ E, Q)
    b = ONE_OVER_SQRT_TWO_PI * g * (t / r) * A
    return np.abs(np.maximum(b, 0.0))


# Small-t expansion of b / (2 t phi(h) e^{-t^2/2}) = a + sum_k w^k T_k(h^2, a),
# w = t^2, a = 1 + h Y(h), Y = Phi/phi, T_k = (P_k(h^2) + a Q_k(h^2)) / D_k (Jäckel 2015,
# the 12th-order expansion). Rows k = 1..6, columns h^0, h^2, ..., h^12.
_SMALL_T_DEN = np.array([6.0, 120.0, 5040.0, 362880.0, 39916800.0, 6227020800.0])
_SMALL_T_P = np.array([
    [-1, 0, 0, 0, 0, 0, 0],
    [-7, -1, 0, 0, 0, 0, 0],
    [-57, -18, -1, 0, 0, 0, 0],
    [-561, -285, -33, -1, 0, 0, 0],
    [-6555, -4680, -840, -52, -1, 0, 0],
    [-89055, -82845, -20370, -1926, -75, -1, 0],
], dtype=float)
_SMALL_T_Q = np.array([
    [3, 1, 0, 0, 0, 0, 0],
    [15, 10, 1, 0, 0, 0, 0],
    [105, 105, 21, 1, 0, 0, 0],
    [945, 1260, 378, 36, 1, 0, 0],
    [10395, 17325, 6930, 990, 55, 1, 0],
    [135135, 270270, 135135, 25740, 2145, 78, 1],
], dtype=float)
#: (12, 7 powers of h^2): the rows P_k / D_k, then the rows Q_k / D_k
_SMALL_T_PQ = np.vstack([_SMALL_T_P / _SMALL_T_DEN[:, None],
                         _SMALL_T_Q / _SMALL_T_DEN[:, None]])


def _small_t(h: np.ndarray, t: np.ndarray, g: np.ndarray) -> np.ndarray:
    """b for t < 0.21: 12th-order expansion of Y(h+t) - Y(h-t) in t, Y = Phi/phi,
    with a = 1 + h Y(h) from erfcx and g = exp(-(h^2+t^2)/2) (Jäckel 2015)."""
    a = 1.0 + h * (0.5 * SQRT_TWO_PI) * erfcx(-ONE_OVER_SQRT_TWO * h)
    PQ = _SMALL_T_PQ @ _powers(h * h, 7, 1.0)
    T = PQ[6:]
    T *= a
    T += PQ[:6]
    e = np.einsum("ij,ij->j", T, _powers(t * t, 6, None))
    e += a
    e *= 2.0 * ONE_OVER_SQRT_TWO_PI * t
    e *= g
    return np.abs(np.maximum(e, 0.0))


def _black_vega(x: np.ndarray, s: np.ndarray, b_max: np.ndarray, lower_rule: bool):
    """b(x, s), db/ds and h = x/s for 1-d arrays with x <= 0 < s; b_max = e^{x/2}.

    The four regions of Jäckel (2015): the asymptotic expansion (h < -10 and small t;
    ``lower_rule`` selects the bound t + h < 0.21 - 10 used for the segment points,
    otherwise t - h < 0.21 + 10), the small-t expansion (t < 0.21), the plain form
    Phi(h+t) e^{x/2} - Phi(h-t) e^{-x/2} (h + t > 0.85 or h - t >= -3) and the erfcx
    form. Each region is evaluated only on its own elements; the Gaussian factor
    g = exp(-(h^2+t^2)/2) is shared by the vega g / sqrt(2 pi) and three of the forms.
    """
    h = x / s
    t = 0.5 * s
    g = h * h
    g += t * t
    g *= -0.5
    np.exp(g, out=g)
    hpt = h + t
    hmt = h - t
    small = t < SMALL_T
    plain = hmt >= PLAIN_Z_MIN
    plain |= hpt > 0.85
    asym = h < ASYMPTOTIC_H
    if lower_rule:
        asym &= hpt < SMALL_T + ASYMPTOTIC_H
    else:
        asym &= (t - h) < SMALL_T - ASYMPTOTIC_H
    b = np.empty_like(s)
    other = small | plain
    if asym.any():
        i = np.flatnonzero(asym)
        b[i] = _asymptotic(h[i], t[i], g[i])
        keep = ~asym
        small &= keep
        plain &= keep
        other |= asym
    plain &= ~small
    i = np.flatnonzero(small)
    if i.size:
        b[i] = _small_t(h[i], t[i], g[i])
    i = np.flatnonzero(plain)
    if i.size:
        bm = b_max[i]
        b[i] = ndtr(hpt[i]) * bm - ndtr(hmt[i]) / bm
    if not other.all():
        i = np.flatnonzero(~other)
        b[i] = 0.5 * g[i] * (erfcx(-ONE_OVER_SQRT_TWO * hpt[i])
                             - erfcx(-ONE_OVER_SQRT_TWO * hmt[i]))
    np.maximum(b, 0.0, out=b)
    g *= ONE_OVER_SQRT_TWO_PI
    return b, g, h


def normalised_intrinsic_call(x: np.ndarray) -> np.ndarray:
    """Normalised call intrinsic value ``max(e^{x/2} - e^{-x/2}, 0)`` (series for small
    |x| so that it is accurate to the last bit; Jäckel 2015)."""
    x = np.asarray(x, dtype=float)
    x2 = x * x
    series = x * (1 + x2 * ((1.0 / 24.0) + x2 * ((1.0 / 1920.0) + x2 * (
        (1.0 / 322560.0) + (1.0 / 92897280.0) * x2))))
    direct = 2.0 * np.sinh(0.5 * x)
    out = np.where(x2 < 98 * DBL_EPSILON ** 0.25, series, direct)
    return np.maximum(out, 0.0)


def normalised_black_otm(x: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Normalised Black call value b(x, s) for ``x <= 0`` (out of the money or at it).

    Parameters
    ----------
    x : log-moneyness ln(F/K), non-positive.
    s : total standard deviation sigma * sqrt(t), non-negative.

    Returns
    -------
    ndarray of b, with full relative accuracy over the four regions described in the
    module notes (Jäckel 2015). ``s == 0`` gives 0.
    """
    x = np.asarray(x, dtype=float)
    s = np.asarray(s, dtype=float)
    x, s = np.broadcast_arrays(x, s)
    shape = x.shape
    x = x.ravel()
    s = s.ravel()
    out = np.zeros(x.shape)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore", under="ignore"):
        i = np.flatnonzero(s > 0)
        if i.size:
            xi = x[i]
            out[i] = _black_vega(xi, s[i], np.exp(0.5 * xi), True)[0]
    return out.reshape(shape)


def normalised_black_call(x: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Normalised Black call value for any x: b(x,s) = intrinsic(x) + b(-|x|, s)."""
    x = np.asarray(x, dtype=float)
    return normalised_intrinsic_call(x) + normalised_black_otm(-np.abs(x), s)


def normalised_vega(x: np.ndarray, s: np.ndarray) -> np.ndarray:
    """db/ds = exp(-(x^2/s^2 + s^2/4)/2) / sqrt(2 pi); zero at s = 0 for x != 0."""
    x = np.asarray(x, dtype=float)
    s = np.asarray(s, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore", under="ignore"):
        v = ONE_OVER_SQRT_TWO_PI * np.exp(-0.5 * ((x / s) ** 2 + (0.5 * s) ** 2))
    v = np.where(x == 0, ONE_OVER_SQRT_TWO_PI * np.exp(-0.125 * s * s), v)
    return np.where(s > 0, v, np.where(x == 0, ONE_OVER_SQRT_TWO_PI, 0.0))


# ---------------------------------------------------------------------------
# rational cubic interpolation (Delbourgo & Gregory 1985), vectorised
# ---------------------------------------------------------------------------

def _tiny(v):
    return np.abs(v) < DBL_MIN


def _rc_param(num, den):
    """Control parameter num/den of the rational cubic, with its limits where the
    denominator or the numerator vanish (Jäckel 2015)."""
    r = num / den
    m = _tiny(den)
    if m.any():
        r = np.where(m, np.where(num > 0, R_MAX, R_MIN), r)
    m = _tiny(num)
    if m.any():
        r = np.where(m, 0.0, r)
    return r


def _rc_param_left(x_l, x_r, y_l, y_r, d_l, d_r, d2_l):
    h = x_r - x_l
    return _rc_param(0.5 * h * d2_l + (d_r - d_l), (y_r - y_l) / h - d_l)


def _rc_param_right(x_l, x_r, y_l, y_r, d_l, d_r, d2_r):
    h = x_r - x_l
    return _rc_param(0.5 * h * d2_r + (d_r - d_l), d_r - (y_r - y_l) / h)


def _rc_min_param(d_l, d_r, s, prefer_shape: bool):
    """Smallest control parameter that keeps the cubic monotone/convex (D&G 3.8, 3.18).

    The exceptional cases (a vanishing slope or gap, a non-monotone or non-convex
    configuration) are rare, so each is applied only where it occurs."""
    monotonic = (d_l * s >= 0) & (d_r * s >= 0)
    cc = (d_l <= s) & (s <= d_r)  # convex
    cc |= (d_l >= s) & (s >= d_r)  # concave
    tiny_s = _tiny(s)
    r1 = (d_r + d_l) / s
    m = monotonic & ~tiny_s
    if not m.all():
        r1 = np.where(m, r1, -DBL_MAX)
    if prefer_shape:
        m = monotonic & tiny_s
        if m.any():
            r1 = np.where(m, R_MAX, r1)
    ok = ~(_tiny(s - d_l) | _tiny(d_r - s))
    dd = d_r - d_l
    r2 = np.maximum(np.abs(dd / (d_r - s)), np.abs(dd / (s - d_l)))
    m = cc & ok
    if not m.all():
        r2 = np.where(m, r2, -DBL_MAX)
    if prefer_shape:
        m = cc & ~ok
        if m.any():
            r2 = np.where(m, R_MAX, r2)
        m = ~cc & monotonic
        if m.any():
            r2 = np.where(m, R_MAX, r2)
    out = np.maximum(r1, r2)
    np.maximum(out, R_MIN, out=out)
    m = ~(monotonic | cc)
    if m.any():
        out = np.where(m, R_MIN, out)
    return out


def _rc_convex_left(x_l, x_r, y_l, y_r, d_l, d_r, d2_l, prefer_shape):
    r = _rc_param_left(x_l, x_r, y_l, y_r, d_l, d_r, d2_l)
    return np.maximum(r, _rc_min_param(d_l, d_r, (y_r - y_l) / (x_r - x_l), prefer_shape))


def _rc_convex_right(x_l, x_r, y_l, y_r, d_l, d_r, d2_r, prefer_shape):
    r = _rc_param_right(x_l, x_r, y_l, y_r, d_l, d_r, d2_r)
    return np.maximum(r, _rc_min_param(d_l, d_r, (y_r - y_l) / (x_r - x_l), prefer_shape))


def _rc_interp(x, x_l, x_r, y_l, y_r, d_l, d_r, r):
    """Rational cubic through (x_l, y_l), (x_r, y_r) with slopes d_l, d_r and control
    parameter r, at x (Delbourgo & Gregory 1985); linear for r >= R_MAX, the mean of
    the end values where the interval is empty."""
    h = x_r - x_l
    t = (x - x_l) / h
    omt = 1 - t
    t2 = t * t
    omt2 = omt * omt
    num = y_r * t2 * t
    num += (r * y_r - h * d_r) * t2 * omt
    num += (r * y_l + h * d_l) * t * omt2
    num += y_l * omt2 * omt
    den = (r - 3) * t * omt
    den += 1
    num /= den
    m = r >= R_MAX
    if m.any():
        num = np.where(m, y_r * t + y_l * omt, num)
    m = np.abs(h) <= 0
    if m.any():
        num = np.where(m, 0.5 * (y_l + y_r), num)
    return num


# ---------------------------------------------------------------------------
# the inversion
# ---------------------------------------------------------------------------

def _initial_guess(beta, x, b_max):
    """Jäckel's four-segment initial guess for 1-d arrays, b_max = e^{x/2}.

    Returns (s0, i_low, i_up): the guess and the indices of the elements iterated on
    the log objective of the lowest segment and on the upper log objective
    (beta > b_max/2 in the highest segment); all others use b - beta."""
    s_c = np.sqrt(np.abs(2 * x))
    # at s_c, h + t = 0 and h^2 + t^2 = |x|: b_c = e^{x/2}/2 - Phi(-s_c) e^{-x/2} and
    # v_c = exp(-|x|/2) / sqrt(2 pi); b_c only places the guess, so the mild
    # cancellation of this closed form near x = 0 does not reach the result
    b_c = ndtr(-s_c)
    b_c /= b_max
    np.subtract(0.5 * b_max, b_c, out=b_c)
    np.maximum(b_c, 0.0, out=b_c)
    v_c = ONE_OVER_SQRT_TWO_PI * b_max
    low = beta < b_c
    # the segment point on beta's side of b_c: s_l = s_c - b_c/v_c below it,
    # s_h = s_c + (b_max - b_c)/v_c above it; b and vega there in one evaluation
    s_lh = np.where(low, -b_c, b_max - b_c)
    s_lh /= v_c
    s_lh += s_c
    flat = ~(v_c > DBL_MIN)
    if flat.any():
        s_lh = np.where(flat & ~low, s_c, s_lh)
    pos = s_lh > 0
    if pos.all():
        b_lh, v_lh, _ = _black_vega(x, s_lh, b_max, True)
    else:  # b(x, 0) = 0; the vega at s = 0 as in normalised_vega
        b_lh = np.zeros_like(s_lh)
        v_lh = np.where(x == 0, ONE_OVER_SQRT_TWO_PI, 0.0)
        i = np.flatnonzero(pos)
        b_lh[i], v_lh[i], _ = _black_vega(x[i], s_lh[i], b_max[i], True)
    lowest = beta < b_lh
    lowest &= low
    upper_mid = beta <= b_lh
    upper_mid &= ~low
    mid = low ^ lowest
    mid |= upper_mid
    top = ~low
    top ^= upper_mid
    s0 = np.empty_like(beta)

    i = np.flatnonzero(mid)
    if i.size:
        # the two middle segments: a rational cubic of s(beta) between (b_l, s_l) and
        # (b_c, s_c), or (b_c, s_c) and (b_h, s_h), slopes 1/vega, shape-preserving
        # with zero second derivative at the outer point (convex_right below b_c,
        # convex_left above)
        lo = low[i]
        bc, sc, dc = b_c[i], s_c[i], 1.0 / v_c[i]
        bo, so, do = b_lh[i], s_lh[i], 1.0 / v_lh[i]
        x_l = np.where(lo, bo, bc)
        x_r = np.where(lo, bc, bo)
        y_l = np.where(lo, so, sc)
        y_r = np.where(lo, sc, so)
        d_l = np.where(lo, do, dc)
        d_r = np.where(lo, dc, do)
        slope = (y_r - y_l) / (x_r - x_l)
        r = _rc_param(d_r - d_l, np.where(lo, d_r - slope, slope - d_l))
        r = np.maximum(r, _rc_min_param(d_l, d_r, slope, False))
        s0[i] = _rc_interp(beta[i], x_l, x_r, y_l, y_r, d_l, d_r, r)

    i_low = np.flatnonzero(lowest)
    if i_low.size:
        # lowest segment: interpolate the lower map f_l(beta) and invert it
        xj, bj, slj, blj = x[i_low], beta[i_low], s_lh[i_low], b_lh[i_low]
        ax = np.abs(xj)
        z = SQRT_ONE_OVER_THREE * ax / slj
        y = z * z
        s2 = slj * slj
        Phi = ndtr(-z)
        phi = ONE_OVER_SQRT_TWO_PI * np.exp(-0.5 * z * z)
        fpp = PI_OVER_SIX * y / (s2 * slj) * Phi * (
            8 * SQRT_THREE * slj * ax + (3 * s2 * (s2 - 8) - 8 * xj * xj) * Phi / phi
        ) * np.exp(2 * y + 0.25 * s2)
        Phi2 = Phi * Phi
        fp = TWO_PI * y * Phi2 * np.exp(y + 0.125 * s2)
        f_l = TWO_PI_OVER_SQRT_TWENTY_SEVEN * ax * (Phi2 * Phi)
        r_ll = _rc_convex_right(0.0, blj, 0.0, f_l, 1.0, fp, fpp, True)
        f = _rc_interp(bj, 0.0, blj, 0.0, f_l, 1.0, fp, r_ll)
        tq = bj / blj
        f = np.where(f > 0, f, (f_l * tq + blj * (1 - tq)) * tq)
        s_j = np.abs(xj / (SQRT_THREE * ndtri(
            np.cbrt(f / (TWO_PI_OVER_SQRT_TWENTY_SEVEN * ax)))))
        s0[i_low] = np.where(f > 0, s_j, 0.0)

    i_up = np.flatnonzero(top)
    if i_up.size:
        xj, bj, shj, bhj, bmj = x[i_up], beta[i_up], s_lh[i_up], b_lh[i_up], b_max[i_up]
        # upper map f_u = Phi(-s/2) and its derivatives in beta
        f_u = ndtr(-0.5 * shj)
        w = (xj / shj) ** 2
        fp = -0.5 * np.exp(0.5 * w)
        fpp = SQRT_PI_OVER_TWO * np.exp(w + 0.125 * shj * shj) * w / shj
        ok = fpp > -SQRT_DBL_MAX
        r_hh = _rc_convex_left(bhj, bmj, f_u, 0.0, fp, -0.5, fpp, True)
        f = _rc_interp(bj, bhj, bmj, f_u, 0.0, fp, -0.5, r_hh)
        f = np.where(ok, f, -1.0)
        hh = bmj - bhj
        tq = (bj - bhj) / hh
        f = np.where(f > 0, f, (f_u * (1 - tq) + 0.5 * hh * tq) * (1 - tq))
        s0[i_up] = -2.0 * ndtri(f)
        i_up = i_up[bj > 0.5 * bmj]
    return s0, i_low, i_up


def _step(beta, x, s, b_max, i_low, ln_beta_low, i_up):
    """One Householder(3) step for each element's objective; returns ds.

    With h = x/s: b2/b1 = h^2/s - s/4 and b3/b1 = (b2/b1)^2 - 3 (h/s)^2 - 1/4, where
    b1, b2, b3 are the first three derivatives of b in s (Jäckel 2015, section 4);
    the log objectives (on the elements i_low and i_up) add the terms noted inline."""
    b, bp, h = _black_vega(x, s, b_max, False)
    hs = h / s
    halley = h * h
    halley /= s
    halley -= s / 4
    hh3 = halley * halley
    hs *= hs
    hs *= 3
    hh3 -= hs
    hh3 -= 0.25
    # plain objective g = b - beta
    newton = beta - b
    newton /= bp
    if i_low.size:
        # g = 1/ln(b) - 1/ln(beta)
        bi, bhi = b[i_low], halley[i_low]
        ln_b = np.log(bi)
        bpob = bp[i_low] / bi
        c2 = 1 + 2 / ln_b
        newton[i_low] = (ln_beta_low - ln_b) * ln_b / ln_beta_low / bpob
        halley[i_low] = bhi - bpob * c2
        hh3[i_low] = (hh3[i_low] + 2 * bpob * bpob * (1 + 3 / ln_b * (1 + 1 / ln_b))
                      - 3 * bhi * bpob * c2)
    if i_up.size:
        # g = ln(b_max - beta) - ln(b_max - b)
        bm = b_max[i_up]
        bmb = bm - b[i_up]
        g = np.log((bm - beta[i_up]) / bmb)
        gp = bp[i_up] / bmb
        bhi = halley[i_up]
        newton[i_up] = -g / gp
        halley[i_up] = bhi + gp
        hh3[i_up] = hh3[i_up] + gp * (2 * gp + 3 * bhi)
    # Householder factor (1 + halley n / 2) / (1 + n (halley + hh3 n / 6))
    hh3 *= newton
    hh3 /= 6
    hh3 += halley
    hh3 *= newton
    hh3 += 1
    halley *= 0.5
    halley *= newton
    halley += 1
    halley /= hh3
    newton *= halley
    return np.maximum(-0.5 * s, newton, out=newton)


def normalised_implied_vol_otm(beta: np.ndarray, x: np.ndarray,
                               iterations: int = 2) -> tuple[np.ndarray, np.ndarray]:
    """Solve b(x, s) = beta for s, elementwise, for out-of-the-money normalised prices.

    Parameters
    ----------
    beta : normalised out-of-the-money price, 0 < beta < exp(x/2).
    x : log-moneyness, x <= 0.
    iterations : Householder steps taken on every element (two suffice; Jäckel 2015).

    Returns
    -------
    s : total implied standard deviation sigma*sqrt(t).
    converged : bool array; False where the iteration did not settle (the caller
        falls back to the scalar reference for those).

    Notes
    -----
    Inputs outside the domain give meaningless output: the caller screens them.
    Works in chunks of :data:`CHUNK` elements; each piece of the initial guess and each
    region of b is evaluated only on the elements that need it.
    """
    beta = np.ascontiguousarray(beta, dtype=float).ravel()
    x = np.ascontiguousarray(x, dtype=float).ravel()
    n = beta.shape[0]
    s_out = np.empty(n)
    conv = np.empty(n, dtype=bool)
    with np.errstate(all="ignore"):
        for start in range(0, n, CHUNK):
            sl = slice(start, start + CHUNK)
            bb, xx = beta[sl], x[sl]
            b_max = np.exp(0.5 * xx)
            s, i_low, i_up = _initial_guess(bb, xx, b_max)
            ln_beta_low = np.log(bb[i_low])
            ds = np.full_like(s, np.inf)
            for _ in range(iterations):
                ds = _step(bb, xx, s, b_max, i_low, ln_beta_low, i_up)
                s += ds
            # freeze the settled elements; give the rest two more steps
            # Householder(3) converges with order four: a second step below 1e-5 of s
            # leaves an error far below machine precision (Jäckel 2015, section 5)
            act = ~(np.abs(ds) <= 1e-5 * s)
            ok = np.isfinite(s)
            ok &= s > 0
            if act.any():
                i = np.flatnonzero(act)
                obj = np.ones(s.shape, dtype=np.int8)
                obj[i_low] = 0
                obj[i_up] = 2
                oi = obj[i]
                j_low = np.flatnonzero(oi == 0)
                j_up = np.flatnonzero(oi == 2)
                si, bi, xi, bmi = s[i], bb[i], xx[i], b_max[i]
                ln_bj = np.log(bi[j_low])
                for _ in range(2):
                    dsi = _step(bi, xi, si, bmi, j_low, ln_bj, j_up)
                    si = si + dsi
                s[i] = si
                ok[i] = np.isfinite(si) & (si > 0) & (np.abs(dsi) <= 1e-9 * si)
            s_out[sl] = s
            conv[sl] = ok
    return s_out, conv
