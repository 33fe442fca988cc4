"""GARCH-family fits, forecasts and bands, realized vol, backtests, simulation.

Names are imported lazily (``from optbench.volatility import fit_garch``) so that
importing the package costs nothing until a model is used.
"""
from __future__ import annotations

import importlib
from typing import Any

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


def __getattr__(name: str) -> Any:
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'optbench.volatility' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value
