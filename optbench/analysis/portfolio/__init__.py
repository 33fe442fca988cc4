"""Portfolio insurance on the user's own portfolio: beta and basis risk, the joint
simulation, the hedged loss distribution, the protection menu and the hedge's greeks.

Pure: arrays and frames in, frozen result objects out. Start with
:func:`~optbench.analysis.portfolio.plan.portfolio_hedge`.
"""
from __future__ import annotations

import importlib
from typing import Any

_NAMES = {
    "portfolio_hedge": "plan", "PortfolioHedge": "plan",
    "fit_portfolio": "fit", "PortfolioFit": "fit",
    "ols_beta": "beta", "BetaFit": "beta",
    "simulate_joint": "joint", "loss_distribution": "loss",
    "protection_menu": "menu", "ProtectionMenu": "menu",
    "hedge_greeks": "greeks", "scenario_grid": "scenarios", "var_es": "risk",
}

__all__ = sorted(_NAMES)


def __getattr__(name: str) -> Any:
    module = _NAMES.get(name)
    if module is None:
        raise AttributeError(f"module 'optbench.analysis.portfolio' has no attribute {name!r}")
    value = getattr(importlib.import_module(f"optbench.analysis.portfolio.{module}"), name)
    globals()[name] = value
    return value
