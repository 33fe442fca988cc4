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
from scipy.special import erfcx, ndtr, ndtri

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
#: elements processed at a time by callers
CHUNK = 32768


# ---------------------------------------------------------------------------
# the normalised Black function and its vega
# ---------------------------------------------------------------------------

def _asymptotic(h: np.ndarray, t: np.ndarray) -> np.ndarray:
    """b for h < -10 and small t: 17th-order expansion of A(h,t) in q = (h/r)^2,
    e = (t/h)^2, r = (h+t)(h-t); b = phi-part * (t/r) * A (Jäckel 2015, eq. 3.x)."""
    e = (t / h) ** 2
    r = (h + t) * (h - t)
    q = (h / r) ** 2
    # coefficients of the expansion, innermost first (A&S 26.2.12 carried to order 17)
    s = (2.0 * e + 1.19E3) * -e - 1.0472E5
    s = s * e - 3.24632E6
    s = s * e - 4.707164E7
    s = s * e - 3.67158792E8
    s = s * e - 1.6689036E9
    s = s * e - 4.6399188E9
    s = s * e - 8.1198579E9
    s = s * e - 9.0751353E9
    s = s * e - 6.49588632E9
    s = s * e - 2.9526756E9
    s = s * e - 8.344518E8
    s = s * e - 1.4121492E8
    s = s * e - 1.344904E7
    s = s * e - 6.49264E5
    s = s * e - 1.309E4
    s = s * e - 7.0E1
    acc = 3.3E1 * s * q
    for k, coeffs in _ASYMPTOTIC_TERMS:
        poly = np.zeros_like(e)
        for c in coeffs:
            poly = poly * e + c
        acc = k * q * (poly + acc)
    A = 2.0 + acc
    b = ONE_OVER_SQRT_TWO_PI * np.exp(-0.5 * (h * h + t * t)) * (t / r) * A
    return np.abs(np.maximum(b, 0.0))


# (multiplier, coefficients highest power of e first) for the terms of order 1..16,
# outermost first; term n has multiplier (2n-1) and coefficients
# (-1)^n * 2 * binomial-type integers (Jäckel 2015, appendix; A&S 26.2.12).
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
# evaluated innermost first by _asymptotic
_ASYMPTOTIC_TERMS = tuple(reversed(_ASYMPTOTIC_TERMS_OUTER_FIRST))


def _small_t(h: np.ndarray, t: np.ndarray) -> np.ndarray:
    """b for t < 0.21: 12th-order expansion of Y(h+t) - Y(h-t) in t, Y = Phi/phi,
    with a = 1 + h Y(h) from erfcx (Jäckel 2015)."""
    a = 1.0 + h * (0.5 * SQRT_TWO_PI) * erfcx(-ONE_OVER_SQRT_TWO * h)
    w = t * t
    h2 = h * h
    e = (-89055 + 135135 * a + h2 * (-82845 + 270270 * a + h2 * (
        -20370 + 135135 * a + h2 * (-1926 + 25740 * a + h2 * (
            -75 + 2145 * a + h2 * (-1 + 78 * a + a * h2)))))) * w / 6227020800.0
    e = w * ((-6555 + 10395 * a + h2 * (-4680 + 17325 * a + h2 * (
        -840 + 6930 * a + h2 * (-52 + 990 * a + h2 * (-1 + 55 * a + a * h2))))) / 39916800
        + e)
    e = w * ((-561 + 945 * a + h2 * (-285 + 1260 * a + h2 * (
        -33 + 378 * a + h2 * (-1 + 36 * a + a * h2)))) / 362880 + e)
    e = w * ((-57 + 105 * a + h2 * (-18 + 105 * a + h2 * (-1 + 21 * a + a * h2))) / 5040 + e)
    e = w * ((-7 + 15 * a + h2 * (-1 + 10 * a + a * h2)) / 120 + e)
    e = w * ((-1 + 3 * a + a * h2) / 6 + e)
    expansion = 2 * t * (a + e)
    b = ONE_OVER_SQRT_TWO_PI * np.exp(-0.5 * (h * h + t * t)) * expansion
    return np.abs(np.maximum(b, 0.0))


def _plain(x: np.ndarray, s: np.ndarray) -> np.ndarray:
    """b from the cumulative normal directly (accurate when h + t > 0.85)."""
    h = x / s
    t = 0.5 * s
    b_max = np.exp(0.5 * x)
    b = ndtr(h + t) * b_max - ndtr(h - t) / b_max
    return np.abs(np.maximum(b, 0.0))


def _erfcx_form(h: np.ndarray, t: np.ndarray) -> np.ndarray:
    """b = 1/2 exp(-(h^2+t^2)/2) [erfcx(-(h+t)/sqrt2) - erfcx(-(h-t)/sqrt2)]."""
    b = 0.5 * np.exp(-0.5 * (h * h + t * t)) * (
        erfcx(-ONE_OVER_SQRT_TWO * (h + t)) - erfcx(-ONE_OVER_SQRT_TWO * (h - t)))
    return np.abs(np.maximum(b, 0.0))


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
    out = np.zeros(x.shape)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore", under="ignore"):
        pos = s > 0
        r1 = pos & (x < s * ASYMPTOTIC_H) & (0.5 * s * s + x < s * (SMALL_T + ASYMPTOTIC_H))
        rest = pos & ~r1
        r2 = rest & (0.5 * s < SMALL_T)
        rest &= ~r2
        r3 = rest & ((x + 0.5 * s * s > 0.85 * s) | (x - 0.5 * s * s >= PLAIN_Z_MIN * s))
        r4 = rest & ~r3
        if r1.any():
            out[r1] = _asymptotic(x[r1] / s[r1], 0.5 * s[r1])
        if r2.any():
            out[r2] = _small_t(x[r2] / s[r2], 0.5 * s[r2])
        if r3.any():
            out[r3] = _plain(x[r3], s[r3])
        if r4.any():
            out[r4] = _erfcx_form(x[r4] / s[r4], 0.5 * s[r4])
    return out


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


def _rc_param_left(x_l, x_r, y_l, y_r, d_l, d_r, d2_l):
    h = x_r - x_l
    num = 0.5 * h * d2_l + (d_r - d_l)
    den = (y_r - y_l) / h - d_l
    r = num / den
    r = np.where(_tiny(den), np.where(num > 0, R_MAX, R_MIN), r)
    return np.where(_tiny(num), 0.0, r)


def _rc_param_right(x_l, x_r, y_l, y_r, d_l, d_r, d2_r):
    h = x_r - x_l
    num = 0.5 * h * d2_r + (d_r - d_l)
    den = d_r - (y_r - y_l) / h
    r = num / den
    r = np.where(_tiny(den), np.where(num > 0, R_MAX, R_MIN), r)
    return np.where(_tiny(num), 0.0, r)


def _rc_min_param(d_l, d_r, s, prefer_shape: bool):
    """Smallest control parameter that keeps the cubic monotone/convex (D&G 3.8, 3.18)."""
    monotonic = (d_l * s >= 0) & (d_r * s >= 0)
    convex = (d_l <= s) & (s <= d_r)
    concave = (d_l >= s) & (s >= d_r)
    r1 = np.full(np.shape(s), -DBL_MAX)
    r1 = np.where(monotonic & ~_tiny(s), (d_r + d_l) / s, r1)
    if prefer_shape:
        r1 = np.where(monotonic & _tiny(s), R_MAX, r1)
    cc = convex | concave
    ok = ~(_tiny(s - d_l) | _tiny(d_r - s))
    r2 = np.full(np.shape(s), -DBL_MAX)
    r2 = np.where(cc & ok, np.maximum(np.abs((d_r - d_l) / (d_r - s)),
                                      np.abs((d_r - d_l) / (s - d_l))), r2)
    if prefer_shape:
        r2 = np.where(cc & ~ok, R_MAX, r2)
        r2 = np.where(~cc & monotonic, R_MAX, r2)
    out = np.maximum(R_MIN, np.maximum(r1, r2))
    return np.where(~monotonic & ~cc, R_MIN, out)


def _rc_convex_left(x_l, x_r, y_l, y_r, d_l, d_r, d2_l, prefer_shape):
    r = _rc_param_left(x_l, x_r, y_l, y_r, d_l, d_r, d2_l)
    return np.maximum(r, _rc_min_param(d_l, d_r, (y_r - y_l) / (x_r - x_l), prefer_shape))


def _rc_convex_right(x_l, x_r, y_l, y_r, d_l, d_r, d2_r, prefer_shape):
    r = _rc_param_right(x_l, x_r, y_l, y_r, d_l, d_r, d2_r)
    return np.maximum(r, _rc_min_param(d_l, d_r, (y_r - y_l) / (x_r - x_l), prefer_shape))


def _rc_interp(x, x_l, x_r, y_l, y_r, d_l, d_r, r):
    h = x_r - x_l
    t = (x - x_l) / h
    omt = 1 - t
    t2 = t * t
    omt2 = omt * omt
    cubic = (y_r * t2 * t + (r * y_r - h * d_r) * t2 * omt + (r * y_l + h * d_l) * t * omt2
             + y_l * omt2 * omt) / (1 + (r - 3) * t * omt)
    linear = y_r * t + y_l * omt
    out = np.where(r >= R_MAX, linear, cubic)
    return np.where(np.abs(h) <= 0, 0.5 * (y_l + y_r), out)


# ---------------------------------------------------------------------------
# the inversion
# ---------------------------------------------------------------------------

def _householder(newton, halley, hh3):
    return (1 + 0.5 * halley * newton) / (1 + newton * (halley + hh3 * newton / 6))


def _initial_guess(beta, x):
    """Jäckel's four-segment initial guess. Returns (s0, objective) where objective is
    0 (log objective, lowest segment), 1 (plain b - beta) or 2 (upper log objective)."""
    n = beta.shape[0]
    s0 = np.empty(n)
    obj = np.ones(n, dtype=np.int8)
    b_max = np.exp(0.5 * x)
    s_c = np.sqrt(np.abs(2 * x))
    # at s_c, h + t = 0 and h^2 + t^2 = |x|: b_c = e^{x/2}/2 - Phi(-s_c) e^{-x/2} and
    # v_c = exp(-|x|/2) / sqrt(2 pi); b_c only places the guess, so the mild
    # cancellation of this closed form near x = 0 does not reach the result
    half = np.exp(0.5 * x)
    b_c = np.maximum(0.5 * half - ndtr(-s_c) / half, 0.0)
    v_c = ONE_OVER_SQRT_TWO_PI * half
    low = beta < b_c

    if low.any():
        i = np.flatnonzero(low)
        xl, bl_, sc, bc, vc = x[i], beta[i], s_c[i], b_c[i], v_c[i]
        s_l = sc - bc / vc
        b_l = normalised_black_otm(xl, s_l)
        lowest = bl_ < b_l
        # lowest segment: interpolate the lower map f_l(beta) and invert it
        if lowest.any():
            j = np.flatnonzero(lowest)
            xj, bj, slj, blj = xl[j], bl_[j], s_l[j], b_l[j]
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
            zero = np.zeros_like(bj)
            r_ll = _rc_convex_right(zero, blj, zero, f_l, np.ones_like(bj), fp, fpp, True)
            f = _rc_interp(bj, zero, blj, zero, f_l, np.ones_like(bj), fp, r_ll)
            tq = bj / blj
            f = np.where(f > 0, f, (f_l * tq + blj * (1 - tq)) * tq)
            s_j = np.abs(xj / (SQRT_THREE * ndtri(
                np.cbrt(f / (TWO_PI_OVER_SQRT_TWENTY_SEVEN * ax)))))
            s_j = np.where(f > 0, s_j, 0.0)
            s0[i[j]] = s_j
            obj[i[j]] = 0
        mid = ~lowest
        if mid.any():
            j = np.flatnonzero(mid)
            xj, bj, slj, blj, scj, bcj, vcj = xl[j], bl_[j], s_l[j], b_l[j], sc[j], bc[j], vc[j]
            v_l = normalised_vega(xj, slj)
            r_lm = _rc_convex_right(blj, bcj, slj, scj, 1 / v_l, 1 / vcj, 0.0, False)
            s0[i[j]] = _rc_interp(bj, blj, bcj, slj, scj, 1 / v_l, 1 / vcj, r_lm)

    high = ~low
    if high.any():
        i = np.flatnonzero(high)
        xh, bh_, sc, bc, vc, bm = x[i], beta[i], s_c[i], b_c[i], v_c[i], b_max[i]
        s_h = np.where(vc > DBL_MIN, sc + (bm - bc) / vc, sc)
        b_h = normalised_black_otm(xh, s_h)
        upper_mid = bh_ <= b_h
        if upper_mid.any():
            j = np.flatnonzero(upper_mid)
            xj, bj, shj, bhj, scj, bcj, vcj = xh[j], bh_[j], s_h[j], b_h[j], sc[j], bc[j], vc[j]
            v_h = normalised_vega(xj, shj)
            r_hm = _rc_convex_left(bcj, bhj, scj, shj, 1 / vcj, 1 / v_h, 0.0, False)
            s0[i[j]] = _rc_interp(bj, bcj, bhj, scj, shj, 1 / vcj, 1 / v_h, r_hm)
        top = ~upper_mid
        if top.any():
            j = np.flatnonzero(top)
            xj, bj, shj, bhj, bmj = xh[j], bh_[j], s_h[j], b_h[j], bm[j]
            # upper map f_u = Phi(-s/2) and its derivatives in beta
            f_u = ndtr(-0.5 * shj)
            w = (xj / shj) ** 2
            fp = -0.5 * np.exp(0.5 * w)
            fpp = SQRT_PI_OVER_TWO * np.exp(w + 0.125 * shj * shj) * w / shj
            ok = fpp > -SQRT_DBL_MAX
            r_hh = _rc_convex_left(bhj, bmj, f_u, np.zeros_like(bj), fp,
                                   np.full_like(bj, -0.5), fpp, True)
            f = _rc_interp(bj, bhj, bmj, f_u, np.zeros_like(bj), fp,
                           np.full_like(bj, -0.5), r_hh)
            f = np.where(ok, f, -1.0)
            hh = bmj - bhj
            tq = (bj - bhj) / hh
            f = np.where(f > 0, f, (f_u * (1 - tq) + 0.5 * hh * tq) * (1 - tq))
            s0[i[j]] = -2.0 * ndtri(f)
            obj[i[j]] = np.where(bj > 0.5 * bmj, 2, 1)
    return s0, obj


def _black_and_vega(x, s):
    """b(x, s) and db/ds together for x <= 0, s > 0 (they share exp(-(h^2+t^2)/2))."""
    h = x / s
    t = 0.5 * s
    e = np.exp(-0.5 * (h * h + t * t))
    vega = ONE_OVER_SQRT_TWO_PI * e
    r1 = (h < ASYMPTOTIC_H) & (t - h < SMALL_T - ASYMPTOTIC_H)
    r2 = ~r1 & (t < SMALL_T)
    r3 = ~r1 & ~r2 & ((h + t > 0.85) | (h - t >= PLAIN_Z_MIN))
    other = r1 | r2 | r3
    if other.any():
        b = np.empty_like(s)
        i = np.flatnonzero(~other)
        hi, ti = h[i], t[i]
        b[i] = np.maximum(0.5 * e[i] * (erfcx(-ONE_OVER_SQRT_TWO * (hi + ti))
                                        - erfcx(-ONE_OVER_SQRT_TWO * (hi - ti))), 0.0)
        if r1.any():
            b[r1] = _asymptotic(h[r1], t[r1])
        if r2.any():
            b[r2] = _small_t(h[r2], t[r2])
        if r3.any():
            b[r3] = _plain(x[r3], s[r3])
    else:
        b = np.maximum(0.5 * e * (erfcx(-ONE_OVER_SQRT_TWO * (h + t))
                                  - erfcx(-ONE_OVER_SQRT_TWO * (h - t))), 0.0)
    return b, vega


def _step(beta, x, s, obj):
    """One Householder(3) step for each element's objective; returns ds.

    With h = x/s: b2/b1 = h^2/s - s/4 and b3/b1 = (b2/b1)^2 - 3 (h/s)^2 - 1/4, where
    b1, b2, b3 are the first three derivatives of b in s (Jäckel 2015, section 4);
    the log objectives add the terms noted inline."""
    b, bp = _black_and_vega(x, s)
    h = x / s
    b_halley = h * h / s - s / 4
    b_hh3 = b_halley * b_halley - 3 * (h / s) ** 2 - 0.25
    # plain objective g = b - beta
    newton = (beta - b) / bp
    halley = b_halley.copy()
    hh3 = b_hh3.copy()
    o0 = obj == 0
    if o0.any():
        # g = 1/ln(b) - 1/ln(beta)
        i = np.flatnonzero(o0)
        bi, bpi, bhi = b[i], bp[i], b_halley[i]
        ln_b = np.log(bi)
        ln_beta = np.log(beta[i])
        bpob = bpi / bi
        newton[i] = (ln_beta - ln_b) * ln_b / ln_beta / bpob
        halley[i] = bhi - bpob * (1 + 2 / ln_b)
        hh3[i] = (b_hh3[i] + 2 * bpob * bpob * (1 + 3 / ln_b * (1 + 1 / ln_b))
                  - 3 * bhi * bpob * (1 + 2 / ln_b))
    o2 = obj == 2
    if o2.any():
        # g = ln(b_max - beta) - ln(b_max - b)
        i = np.flatnonzero(o2)
        b_max = np.exp(0.5 * x[i])
        bmb = b_max - b[i]
        g = np.log((b_max - beta[i]) / bmb)
        gp = bp[i] / bmb
        newton[i] = -g / gp
        halley[i] = b_halley[i] + gp
        hh3[i] = b_hh3[i] + gp * (2 * gp + 3 * b_halley[i])
    ds = newton * _householder(newton, halley, hh3)
    return np.maximum(-0.5 * s, ds)


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
    Works in chunks of :data:`CHUNK` elements.
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
            s, obj = _initial_guess(bb, xx)
            ds = np.full_like(s, np.inf)
            for _ in range(iterations):
                ds = _step(bb, xx, s, obj)
                s = s + ds
            # freeze the settled elements; give the rest two more steps
            # Householder(3) converges with order four: a second step below 1e-5 of s
            # leaves an error far below machine precision (Jäckel 2015, section 5)
            act = ~(np.abs(ds) <= 1e-5 * s)
            if act.any():
                i = np.flatnonzero(act)
                si, bi, xi, oi = s[i], bb[i], xx[i], obj[i]
                for _ in range(2):
                    dsi = _step(bi, xi, si, oi)
                    si = si + dsi
                s[i] = si
                ds[i] = dsi
            ok = np.isfinite(s) & (s > 0)
            if act.any():
                ok[i] &= np.abs(dsi) <= 1e-9 * si
            s_out[sl] = s
            conv[sl] = ok
    return s_out, conv
