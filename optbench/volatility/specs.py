"""Variance-process specifications: parameter names, starting values, bounds,
constraints and persistence for GARCH(1,1), GJR-GARCH(1,1), EGARCH(1,1) and EWMA.

A spec owns its slice of the parameter vector; the estimator in
:mod:`optbench.volatility.garch` joins it with the mean (``mu``) and the
distribution (``nu``) slices without knowing which model it fits. All values here
are in the estimator's *scaled* units (returns divided by their sample standard
deviation), where the variance is of order one.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from optbench.volatility.recursions import (SQRT_2_OVER_PI, egarch_log_variance,
                                            ewma_variance, garch_variance)

EWMA_LAMBDA = 0.94  # RiskMetrics (1996) daily decay, common practice


@dataclass(frozen=True)
class VolSpec:
    """One variance process.

    Attributes
    ----------
    name : str
        ``garch``, ``gjr``, ``egarch`` or ``ewma``.
    param_names : tuple of str
        Names of the variance parameters, in order.
    linear : bool
        True when the recursion is a linear filter of squared residuals (GARCH,
        GJR, EWMA): analytic derivatives and closed-form forecasts are available.
    """

    name: str
    param_names: tuple[str, ...]
    linear: bool

    # -- estimation ---------------------------------------------------------------
    def starting_values(self, var: float) -> list[list[float]]:
        """Candidate starting points (a small grid; the estimator keeps the best start
        of each persistence regime, see :meth:`regime_of`)."""
        return [v for _, v in self.regime_starts(var)]

    def regime_starts(self, var: float) -> list[tuple[str, list[float]]]:
        """Starting points labelled by regime: ``high`` persistence (>= 0.9) and
        ``low`` persistence (weak dynamics), symmetric and asymmetric. Separate local
        optima can sit in the two regimes when the clustering is weak, so the
        estimator climbs from the best start of each and keeps the higher optimum."""
        if self.name == "garch":
            grid = (("high", 0.05, 0.90), ("high", 0.08, 0.97), ("high", 0.12, 0.99),
                    ("high", 0.02, 0.97), ("low", 0.10, 0.50))
            return [(r, [var * (1 - p), a, p - a]) for r, a, p in grid]
        if self.name == "gjr":
            grid = (("high", 0.03, 0.10, 0.95), ("high", 0.01, 0.15, 0.98),
                    ("high", 0.06, 0.06, 0.90), ("high", 0.05, 0.0, 0.97),
                    ("high", 0.20, -0.15, 0.95),
                    ("low", 0.10, 0.10, 0.50), ("low", 0.30, -0.25, 0.50))
            return [(r, [var * (1 - p), a, g, p - a - g / 2]) for r, a, g, p in grid]
        if self.name == "egarch":
            grid = (("high", 0.10, -0.05, 0.97), ("high", 0.15, -0.10, 0.95),
                    ("high", 0.05, 0.0, 0.99), ("high", 0.15, 0.10, 0.95),
                    ("low", 0.10, -0.05, 0.70), ("low", 0.20, 0.0, 0.30))
            return [(r, [math.log(var) * (1 - b), a, g, b]) for r, a, g, b in grid]
        return [("high", [])]

    def coordinate_map(self) -> np.ndarray:
        """Matrix ``M`` with ``theta = M u``: the optimiser's coordinates ``u`` in
        which the linear positivity constraints become bounds.

        GJR: ``u = (omega, alpha, alpha + gamma, beta)``, so ``alpha >= 0`` and
        ``alpha + gamma >= 0`` are the bounds ``u_1 >= 0``, ``u_2 >= 0`` and the
        optimiser can move along either edge (with ``gamma`` itself as a coordinate
        the edge ``alpha + gamma = 0`` is a slanted constraint that a box method stops
        at). Identity for the other models.
        """
        k = len(self.param_names)
        m = np.eye(k)
        if self.name == "gjr":
            m[2, 1] = -1.0   # gamma = (alpha + gamma) - alpha
        return m

    def internal_bounds(self, var: float) -> list[tuple[float, float]]:
        """Bounds of the optimiser's coordinates (see :meth:`coordinate_map`)."""
        b = self.bounds(var)
        if self.name == "gjr":
            b = [b[0], (0.0, 1.0), (0.0, 2.0), (0.0, 1.0)]
        return b

    def bounds(self, var: float) -> list[tuple[float, float]]:
        if self.name == "garch":
            return [(1e-8 * var, 10.0 * var), (0.0, 1.0), (0.0, 1.0)]
        if self.name == "gjr":
            return [(1e-8 * var, 10.0 * var), (0.0, 1.0), (-1.0, 2.0), (0.0, 1.0)]
        if self.name == "egarch":
            lv = math.log(var)
            return [(lv - math.log(1e4), lv + math.log(1e4)), (-2.0, 2.0), (-2.0, 2.0),
                    (0.0, 1.0)]
        return []

    def constraints(self, theta: np.ndarray) -> np.ndarray:
        """Inequalities ``>= 0`` on the variance parameters (stationarity, positivity).

        GARCH: ``1 - alpha - beta``; GJR: ``1 - alpha - gamma/2 - beta`` and
        ``alpha + gamma``; EGARCH: ``1 - beta``.
        """
        if self.name == "garch":
            return np.array([1.0 - theta[1] - theta[2]])
        if self.name == "gjr":
            return np.array([1.0 - theta[1] - 0.5 * theta[2] - theta[3],
                             theta[1] + theta[2]])
        if self.name == "egarch":
            return np.array([1.0 - theta[3]])
        return np.zeros(0)

    def constraint_jacobian(self) -> np.ndarray:
        if self.name == "garch":
            return np.array([[0.0, -1.0, -1.0]])
        if self.name == "gjr":
            return np.array([[0.0, -1.0, -0.5, -1.0], [0.0, 1.0, 1.0, 0.0]])
        if self.name == "egarch":
            return np.array([[0.0, 0.0, 0.0, -1.0]])
        return np.zeros((0, 0))

    # -- properties of a parameter set ---------------------------------------------
    def persistence(self, p: dict) -> float:
        """GARCH ``alpha + beta``; GJR ``alpha + gamma/2 + beta`` (symmetric
        innovations: E[I(z<0) z^2] = 1/2); EGARCH ``beta``; EWMA 1."""
        if self.name == "garch":
            return p["alpha"] + p["beta"]
        if self.name == "gjr":
            return p["alpha"] + 0.5 * p["gamma"] + p["beta"]
        if self.name == "egarch":
            return p["beta"]
        return 1.0

    def variance(self, eps: np.ndarray, p: dict, backcast: float) -> np.ndarray:
        """Conditional variances sigma^2_t (t = 0..n-1) for residuals ``eps``.

        ``backcast`` is the start-up variance (for EGARCH its logarithm is used).
        """
        if self.name in ("garch", "gjr"):
            return garch_variance(eps, p["omega"], p["alpha"], p.get("gamma", 0.0),
                                  p["beta"], backcast)
        if self.name == "egarch":
            return np.exp(egarch_log_variance(eps, p["omega"], p["alpha"], p["gamma"],
                                              p["beta"], math.log(backcast)))
        return ewma_variance(eps, p.get("lambda", EWMA_LAMBDA), backcast)

    def next_variance(self, e_last: np.ndarray, s2_last: np.ndarray, p: dict) -> np.ndarray:
        """One step of the recursion, vectorised: sigma^2_{t+1} from e_t, sigma^2_t."""
        if self.name in ("garch", "gjr"):
            e2 = e_last * e_last
            out = p["omega"] + p["alpha"] * e2 + p["beta"] * s2_last
            if self.name == "gjr":
                out = out + p["gamma"] * np.where(e_last < 0, e2, 0.0)
            return out
        if self.name == "egarch":
            z = e_last / np.sqrt(s2_last)
            lnv = (p["omega"] + p["alpha"] * (np.abs(z) - SQRT_2_OVER_PI)
                   + p["gamma"] * z + p["beta"] * np.log(s2_last))
            return np.exp(np.minimum(lnv, 30.0))
        lam = p.get("lambda", EWMA_LAMBDA)
        return lam * s2_last + (1.0 - lam) * e_last * e_last


GARCH = VolSpec("garch", ("omega", "alpha", "beta"), True)
GJR = VolSpec("gjr", ("omega", "alpha", "gamma", "beta"), True)
EGARCH = VolSpec("egarch", ("omega", "alpha", "gamma", "beta"), False)
EWMA = VolSpec("ewma", (), True)

SPECS = {s.name: s for s in (GARCH, GJR, EGARCH, EWMA)}


def get_spec(name: str) -> VolSpec:
    try:
        return SPECS[name]
    except KeyError:
        raise ValueError(f"unknown model {name!r} (garch, gjr, egarch or ewma)") from None
