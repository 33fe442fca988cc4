"""GARCH-family fits, forecasts and bands, realized vol, backtests, simulation.

Names are imported lazily (``from optbench.volatility import fit_garch``) so that
importing the package costs nothing until a model is used.
"""
from __future__ import annotations

from optbench._lazy import lazy_names


# public name -> module that defines it (other modules of this package add lines here)
_LAZY: dict[str, str] = {
    "fit_garch": "optbench.volatility.garch",
    "fix_garch": "optbench.volatility.garch",
    "GarchFit": "optbench.volatility.garch",
    "SimulatedPaths": "optbench.volatility.simulate",
    "simulate_paths": "optbench.volatility.simulate",
    "trading_days": "optbench.volatility.calendar",
    "hull_term_structure": "optbench.volatility.forecast",
}


__getattr__, __dir__ = lazy_names('optbench.volatility', _LAZY, globals())
