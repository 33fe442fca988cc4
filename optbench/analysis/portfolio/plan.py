"""Portfolio insurance on the user's own portfolio: one call, one result object.

:func:`portfolio_hedge` joins the pieces — the hedge estimate of
:mod:`optbench.analysis.hedge`, the portfolio's beta and basis risk
(:mod:`~optbench.analysis.portfolio.fit`), the joint simulation
(:mod:`~optbench.analysis.portfolio.joint`), the loss distribution
(:mod:`~optbench.analysis.portfolio.loss`), the protection menu
(:mod:`~optbench.analysis.portfolio.menu`), the hedge's greeks
(:mod:`~optbench.analysis.portfolio.greeks`) and the user's scenario grid
(:mod:`~optbench.analysis.portfolio.scenarios`) — into a frozen
:class:`PortfolioHedge` that every view reads.
"""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from optbench.analysis.portfolio.fit import BASIS_NOTE, PortfolioFit
from optbench.analysis.portfolio.greeks import hedge_greeks
from optbench.analysis.portfolio.loss import LossDistribution, loss_distribution
from optbench.analysis.portfolio.menu import (MAX_DAYS, MIN_DAYS, ProtectionMenu,
                                              menu_expiries, protection_menu)
from optbench.analysis.portfolio.scenarios import DEFAULT_MOVES, scenario_grid
from optbench.analysis.results import CAUTION, HedgeEstimate, HedgeRequest

#: ``drift="carry"`` means the risk-free rate less the dividend yield.
CARRY = "carry"


@dataclass(frozen=True, eq=False)
class PortfolioHedge:
    """A hedge estimate with the portfolio around it.

    Attributes
    ----------
    estimate : the :class:`~optbench.analysis.results.HedgeEstimate` (unchanged).
    portfolio : :class:`~optbench.analysis.portfolio.fit.PortfolioFit`, or None for a
        typed beta.
    loss : :class:`~optbench.analysis.portfolio.loss.LossDistribution` at expiry, or None
        without a fitted model.
    menu : :class:`~optbench.analysis.portfolio.menu.ProtectionMenu` or None.
    greeks : DataFrame (:data:`~optbench.analysis.portfolio.greeks.GREEK_COLUMNS`).
    scenario_grid : DataFrame ``move, vol_shock, level, hedge_value, unhedged, hedged``.
    horizon_days : calendar days from today of the vol-shocked scenarios.
    drift : the joint simulation's drift rule in plain words (None without a model).
    warnings : everything the numbers carry (estimate, portfolio, simulation).
    """

    estimate: HedgeEstimate
    portfolio: PortfolioFit | None
    loss: LossDistribution | None
    menu: ProtectionMenu | None
    greeks: pd.DataFrame
    scenario_grid: pd.DataFrame
    horizon_days: int
    drift: str | None
    warnings: tuple[str, ...] = ()
    basis_note: str = BASIS_NOTE
    caution: str = CAUTION

    def to_dict(self) -> dict:
        from optbench.analysis.results import plain
        out = self.estimate.to_dict()
        out["warnings"] = list(self.warnings)
        out["portfolio"] = self.portfolio.to_dict() if self.portfolio is not None else None
        out["loss_distribution"] = self.loss.to_dict() if self.loss is not None else None
        out["menu"] = self.menu.to_dict() if self.menu is not None else None
        out["greeks"] = plain(self.greeks)
        out["scenario_grid"] = plain(self.scenario_grid)
        out["scenario_horizon_days"] = self.horizon_days
        out["simulation_drift"] = self.drift
        out["basis_note"] = self.basis_note
        out["caution"] = self.caution
        return out


def _horizons(comparison, trading_days: int, menu: bool, menu_days) -> np.ndarray:
    """The simulation's horizons (trading days, sorted): the hedge's expiry and, with
    the menu, every menu expiry."""
    wanted = {int(trading_days)}
    if menu:
        wanted |= {r.trading_days for r in menu_expiries(comparison, *menu_days)}
    return np.array(sorted(wanted))


def horizon_market(comparison, trading_days, estimate):
    """Calendar years, rate and carry of each horizon (trading days) from the
    comparison's expiries (the chain's rate and yield where an expiry has none)."""
    r0, q0 = float(comparison.rate), float(comparison.div_yield)
    by_days = {row.trading_days: row for row in comparison.expiries}
    t, rates, carries = [], [], []
    for h in trading_days:
        row = by_days.get(int(h))
        if row is None:
            t.append(estimate.calendar_days / 365.0)
            rates.append(r0)
            carries.append(q0)
            continue
        t.append(row.t)
        r = getattr(row, "rate", math.nan)
        q = getattr(row, "carry", math.nan)
        rates.append(r if math.isfinite(r) else r0)
        carries.append(q if math.isfinite(q) else q0)
    return np.array(t), np.array(rates), np.array(carries)


def portfolio_hedge(comparison, request: HedgeRequest, *, portfolio: PortfolioFit | None = None,
                    menu: bool = False, menu_days: tuple[int, int] = (MIN_DAYS, MAX_DAYS),
                    moves=DEFAULT_MOVES, vol_shocks=(), horizon_days: int = 0,
                    drift: float | str | None = CARRY, loss_level: float | None = None,
                    n_paths: int = 20000, seed: int | None = 7,
                    estimate: HedgeEstimate | None = None) -> PortfolioHedge:
    """Hedge estimate, loss distribution, menu, greeks and scenarios for ``request``.

    With ``portfolio``, the request's beta is replaced by the estimated beta and its
    value by the portfolio's (unless the request carries a hedge-ratio override,
    which is kept). ``drift``: ``"carry"`` (each expiry's r − q, the default, plus the
    comparison's excess return or its fitted-mean rule where it carries a drift
    choice), a number (annual, every expiry), or None (the fitted mean less the
    carry). ``loss_level`` in money (default 10 % of the value).
    """
    warnings: list[str] = []
    if portfolio is not None:
        request = dataclasses.replace(
            request, portfolio_value=portfolio.value, beta=portfolio.beta.beta,
            hedge_ratio=(portfolio.hedge_ratio if portfolio.ratio_source == "user override"
                         else None))
        warnings.extend(portfolio.warnings)
    fit = getattr(comparison, "fit", None)
    shared = None
    if estimate is None:
        # one simulation of the underlying to every horizon serves the hedge estimate,
        # the loss distribution and the menu (the same paths each would simulate)
        from optbench.analysis.hedge import (hedge_expiry, hedge_from_comparison,
                                             simulate_hedge_paths)
        row = hedge_expiry(comparison, request)
        if fit is not None and row.trading_days >= 1:
            td = _horizons(comparison, row.trading_days, menu, menu_days)
            shared = (td, *horizon_market(comparison, td, row))
            draws = simulate_hedge_paths(comparison, *shared, n_paths=n_paths, seed=seed)
            shared = shared + (draws,)
        estimate = hedge_from_comparison(comparison, request, n_paths=n_paths, seed=seed,
                                         draws=shared[-1] if shared else None)
    warnings = list(estimate.warnings) + warnings
    excess = 0.0
    if drift == CARRY:
        # the comparison's own drift rule, where it carries one (fitted mean or an
        # excess return over the carry); else the carry alone
        choice = getattr(comparison, "drift", None)
        rule = getattr(choice, "rule", None)
        if rule == "fitted":
            drift = None
        elif rule is not None:
            x = float(getattr(choice, "excess_return", 0.0) or 0.0)
            excess = x if x == x else 0.0
    loss = table = None
    joint = None
    if fit is None or estimate.trading_days < 1:
        warnings.append("no fitted model: loss distribution and menu not computed")
    else:
        td = _horizons(comparison, estimate.trading_days, menu, menu_days)
        t, rates, carries = horizon_market(comparison, td, estimate)
        from optbench.analysis.portfolio.joint import simulate_joint
        resid = portfolio.beta.residuals if portfolio is not None else None
        beta = portfolio.beta.beta if portfolio is not None else request.beta
        underlying = shared[-1] if shared and np.array_equal(shared[0], td) else None
        joint = simulate_joint(fit, resid, beta, td, t, rates=rates, carries=carries,
                               drift=drift, excess_return=excess, n_paths=n_paths, seed=seed,
                               underlying=underlying)
        loss = dataclasses.replace(loss_distribution(joint, estimate, loss_level=loss_level),
                                   seed=seed)
        if menu:
            table = protection_menu(comparison, joint, value=estimate.request.portfolio_value,
                                    hedge_ratio=estimate.request.exposure_ratio,
                                    multiplier=estimate.multiplier, min_days=menu_days[0],
                                    max_days=menu_days[1])
    if joint is not None and drift is not None and getattr(estimate, "drift", None) is None:
        warnings.append("the hedge's expected payoff above follows the single-hedge rule "
                        "(the fitted model's mean); the loss distribution and the menu use "
                        f"a drift of: {joint.drift_rule}")
    greeks = hedge_greeks(estimate)
    grid = scenario_grid(estimate, moves, vol_shocks, horizon_days)
    return PortfolioHedge(estimate=estimate, portfolio=portfolio, loss=loss, menu=table,
                          greeks=greeks, scenario_grid=grid, horizon_days=int(horizon_days),
                          drift=joint.drift_rule if joint is not None else None,
                          warnings=tuple(dict.fromkeys(warnings)))
