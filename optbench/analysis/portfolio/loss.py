r"""The hedged and unhedged P&L of the portfolio at the hedge's expiry.

Notes
-----
On every joint path (:mod:`optbench.analysis.portfolio.joint`) the portfolio's P&L at
expiry is :math:`V(e^{\ln V_T/V} - 1)` unhedged and that plus the legs' payoff at
:math:`S_T = S e^{X}` less the premium paid, hedged (the scenario table's rule, with
basis risk). From the paths: mean, deviation, VaR and expected shortfall at 95 % and
99 % (:mod:`optbench.analysis.portfolio.risk`), the probability of a loss larger than
a level, and a histogram on common bins.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from optbench.analysis.hedge import leg_payoff
from optbench.analysis.portfolio.risk import LEVELS, var_es
from optbench.analysis.results import CAUTION

HISTOGRAM_BINS = 40
DEFAULT_LOSS_LEVEL = 0.10   # of the portfolio's value


@dataclass(frozen=True, eq=False)
class LossDistribution:
    """Simulated P&L of the portfolio at the hedge's expiry (money; losses negative).

    ``unhedged`` and ``hedged`` are ``{"mean", "std", "var_95", "es_95", "var_99",
    "es_99", "prob_loss_over"}`` (VaR/ES positive = a loss; ``prob_loss_over`` is the
    share of paths losing more than ``loss_level``). ``histogram`` is ``{"edges":
    [...], "unhedged": [...], "hedged": [...]}`` (counts of paths per bin).
    """

    expiry: object
    calendar_days: int
    trading_days: int
    value: float
    beta: float
    loss_level: float
    unhedged: dict
    hedged: dict
    histogram: dict
    n_paths: int
    seed: int | None
    drift_rule: str
    residual_method: str
    residual_vol_today: float
    warnings: tuple[str, ...] = ()
    caution: str = CAUTION

    def to_dict(self) -> dict:
        from optbench.analysis.results import plain
        return {k: plain(getattr(self, k)) for k in (
            "expiry", "calendar_days", "trading_days", "value", "beta", "loss_level",
            "unhedged", "hedged", "histogram", "n_paths", "seed", "drift_rule",
            "residual_method", "residual_vol_today", "warnings", "caution")}


def pnl_summary(pnl: np.ndarray, loss_level: float) -> dict:
    out = {"mean": float(pnl.mean()), "std": float(pnl.std(ddof=1))}
    for lv in LEVELS:
        v, e = var_es(pnl, lv)
        tag = f"{round(lv * 100):d}"
        out[f"var_{tag}"], out[f"es_{tag}"] = float(v), float(e)
    out["prob_loss_over"] = float((pnl < -abs(loss_level)).mean())
    return out


def loss_distribution(joint, estimate, *, loss_level: float | None = None,
                      bins: int = HISTOGRAM_BINS, warnings=()) -> LossDistribution:
    """P&L distribution at ``estimate``'s expiry on the joint paths ``joint``.

    ``estimate`` is a :class:`~optbench.analysis.results.HedgeEstimate` (its legs,
    contracts and premium paid); ``loss_level`` in money (default 10 % of the value).
    """
    V = float(estimate.request.portfolio_value)
    col = joint.column(estimate.trading_days)
    s_t = estimate.spot * np.exp(joint.index[:, col])
    unhedged = V * np.expm1(joint.portfolio[:, col])
    k = np.array([leg.strike for leg in estimate.legs])
    c = np.array([leg.type == "C" for leg in estimate.legs])
    s = np.array([1.0 if leg.side == "buy" else -1.0 for leg in estimate.legs])
    units = estimate.contracts * estimate.multiplier
    hedged = unhedged + leg_payoff(s_t, k, c, s) * units - estimate.premium_paid
    level = DEFAULT_LOSS_LEVEL * V if loss_level is None else float(loss_level)
    lo = float(min(np.quantile(unhedged, 0.001), np.quantile(hedged, 0.001)))
    hi = float(max(np.quantile(unhedged, 0.999), np.quantile(hedged, 0.999)))
    edges = np.linspace(lo, hi, bins + 1)
    cu, _ = np.histogram(np.clip(unhedged, lo, hi), edges)
    ch, _ = np.histogram(np.clip(hedged, lo, hi), edges)
    notes = list(warnings)
    if not np.any(joint.residual):
        notes.append("no basis risk simulated: the portfolio is taken as exactly beta x "
                     "the underlying")
    return LossDistribution(
        expiry=estimate.expiry, calendar_days=estimate.calendar_days,
        trading_days=estimate.trading_days, value=V, beta=joint.beta, loss_level=level,
        unhedged=pnl_summary(unhedged, level), hedged=pnl_summary(hedged, level),
        histogram={"edges": edges.tolist(), "unhedged": cu.tolist(), "hedged": ch.tolist(),
                   "note": "paths beyond the 0.1 % and 99.9 % quantiles are counted in "
                           "the end bins"},
        n_paths=int(joint.index.shape[0]), seed=None, drift_rule=joint.drift_rule,
        residual_method=joint.residual_method if np.any(joint.residual) else "none",
        residual_vol_today=joint.residual_vol_today, warnings=tuple(notes))
