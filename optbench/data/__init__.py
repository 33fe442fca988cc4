"""Reading chain and history files: column aliases, wide layout, OCC option symbols,
validation. Pure pandas/numpy: frames in, frozen result objects out; no printing.

Public names are imported lazily so that ``import optbench.data`` stays cheap.
"""
from __future__ import annotations

import importlib
from typing import Any

_NAMES = {
    "load_chain": "chain", "OptionChain": "chain", "Quality": "chain",
    "load_history": "history", "PriceHistory": "history",
    "load_scenario": "scenario", "Scenario": "scenario", "read_meta": "scenario",
    "parse_occ": "occ", "format_occ": "occ",
    "DividendSchedule": "dividends", "read_dividends": "dividends",
    "REASONS": "validate", "WARNINGS": "validate", "no_arbitrage_bounds": "validate",
}

__all__ = sorted(_NAMES)


def __getattr__(name: str) -> Any:
    module = _NAMES.get(name)
    if module is None:
        raise AttributeError(f"module 'optbench.data' has no attribute {name!r}")
    value = getattr(importlib.import_module(f"optbench.data.{module}"), name)
    globals()[name] = value
    return value
