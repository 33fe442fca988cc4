"""Black-Scholes-Merton prices and greeks, implied volatilities, implied forwards and
American exercise. Pure numpy: arrays in, arrays out; no printing, no UI.

Names are imported on first use so that ``import optbench.pricing`` stays cheap.
"""
from __future__ import annotations

from optbench._lazy import lazy_names


_NAMES: dict[str, str] = {
    "bsm_price": "optbench.pricing.bsm",
    "black_price": "optbench.pricing.bsm",
    "bsm_greeks": "optbench.pricing.greeks",
    "black_greeks": "optbench.pricing.greeks",
    "Greeks": "optbench.pricing.greeks",
    "implied_vol": "optbench.pricing.implied",
    "implied_vol_with_status": "optbench.pricing.implied",
    "black_implied_vol_with_status": "optbench.pricing.implied",
    "STATUS_NAMES": "optbench.pricing.implied",
    "status_name": "optbench.pricing.implied",
    "american_price": "optbench.pricing.american",
    "american_implied_vol": "optbench.pricing.american",
    "american_implied_vol_with_status": "optbench.pricing.american",
    "implied_forwards": "optbench.pricing.forwards",
    "parity_pairs": "optbench.pricing.forwards",
    "quote_implied_vols": "optbench.pricing.quotes",
    "otm_quotes": "optbench.pricing.quotes",
}

__all__ = sorted(_NAMES)


__getattr__, __dir__ = lazy_names('optbench.pricing', _NAMES, globals())
def __dir__() -> list[str]:
    return __all__
