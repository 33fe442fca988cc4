"""optbench: is the volatility an option chain charges rich or cheap against a
GARCH-family forecast of the underlying, and what does that gap cost on a hedge?

The public names below are imported lazily, so that ``import optbench`` stays fast
and a script that only loads a chain does not pay for the volatility models.

>>> from optbench import bsm_price
>>> round(float(bsm_price(42, 40, 0.5, 0.10, 0.0, 0.20, True)), 2)  # Hull, Example 15.6
4.76
"""
from __future__ import annotations

from optbench._lazy import lazy_names

__version__ = "0.1.0"

# public name -> module that defines it
_EXPORTS: dict[str, str] = {
    "InputError": "optbench.errors",
    "bsm_price": "optbench.pricing.bsm",
    "bsm_greeks": "optbench.pricing.greeks",
    "implied_vol": "optbench.pricing.implied",
    "implied_vol_with_status": "optbench.pricing.implied",
    "american_price": "optbench.pricing.american",
    "implied_forwards": "optbench.pricing.forwards",
    "quote_implied_vols": "optbench.pricing.quotes",
    "load_chain": "optbench.data.chain",
    "load_history": "optbench.data.history",
    "load_scenario": "optbench.data.scenario",
    "fit_garch": "optbench.volatility.garch",
    "fix_garch": "optbench.volatility.garch",
    "GarchFit": "optbench.volatility.garch",
    "trading_days": "optbench.volatility.calendar",
    "backtest": "optbench.volatility.backtest",
    "BacktestResult": "optbench.volatility.backtest",
    "realized_vol": "optbench.volatility.realized",
    "trailing_realized_vol": "optbench.volatility.realized",
    "vol_cone": "optbench.volatility.cone",
    "VolCone": "optbench.volatility.cone",
    "compare": "optbench.analysis.compare",
    "hedge": "optbench.analysis.hedge",
    "HedgeRequest": "optbench.analysis.results",
    "Comparison": "optbench.analysis.results",
    "HedgeEstimate": "optbench.analysis.results",
    "fit_svi": "optbench.analysis.smile",
    "SviFit": "optbench.analysis.smile",
    "smile_points": "optbench.analysis.smile",
    "strike_arbitrage": "optbench.analysis.arbitrage",
    "calendar_arbitrage": "optbench.analysis.arbitrage",
    "model_free_variance": "optbench.analysis.model_free",
    "constant_maturity_variance": "optbench.analysis.model_free",
    "screen": "optbench.screening.screen",
}

__all__ = sorted(_EXPORTS) + ["__version__"]


__getattr__, _lazy_dir = lazy_names("optbench", _EXPORTS, globals())


def __dir__() -> list[str]:
    return __all__
