r"""Greeks of the hedge in money, per leg and net, beside the portfolio's own delta.

Notes
-----
Each leg is valued with Black-Scholes-Merton at its mid implied vol
(:func:`optbench.pricing.greeks.bsm_greeks`; Hull, *Options, Futures, and Other
Derivatives*, ch. 19). For a leg of signed quantity :math:`q` contracts and
multiplier :math:`m`, with per-unit greeks :math:`\Delta, \Gamma, \nu, \Theta`:

* ``delta_units`` :math:`= q m \Delta` (units of the underlying);
* ``delta_money`` :math:`= q m \Delta S` (money exposure to the underlying);
* ``delta_portfolio_value`` :math:`= q m \Delta S / h`, the value of the portfolio
  (hedge ratio :math:`h`) whose exposure it offsets;
* ``gamma_units`` :math:`= q m \Gamma` (change of ``delta_units`` per 1.00 of spot) and
  ``gamma_money_per_pct`` :math:`= q m \Gamma S^2/100` (change of ``delta_money`` for a
  1 % move);
* ``vega_per_vol_point`` :math:`= q m \nu/100`, ``theta_per_day`` :math:`= q m\Theta/365`
  (money).

The portfolio row is its own exposure, :math:`hV/S` units of the underlying (no
gamma, vega or theta); ``net hedge`` sums the legs and ``hedged portfolio`` adds the
portfolio.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

GREEK_COLUMNS = ("position", "quantity", "strike", "iv", "delta_per_unit", "delta_units",
                 "delta_money", "delta_portfolio_value", "gamma_units",
                 "gamma_money_per_pct", "vega_per_vol_point", "theta_per_day")


def hedge_greeks(estimate, hedge_ratio: float | None = None) -> pd.DataFrame:
    """Money greeks of ``estimate``'s legs, the net hedge, the portfolio and the total."""
    from optbench.pricing.greeks import bsm_greeks

    legs = estimate.legs
    S = float(estimate.spot)
    h = float(hedge_ratio if hedge_ratio is not None else estimate.request.exposure_ratio)
    t = estimate.calendar_days / 365.0
    K = np.array([leg.strike for leg in legs])
    iv = np.array([leg.iv_mid for leg in legs])
    call = np.array([leg.type == "C" for leg in legs])
    q = np.array([leg.quantity for leg in legs], float) * float(estimate.multiplier)
    g = bsm_greeks(S, K, t, estimate.rate, estimate.div_yield, iv, call)
    du = q * g.delta
    frame = pd.DataFrame({
        "position": [f"{leg.side} {leg.type} {leg.strike:g}" for leg in legs],
        "quantity": [leg.quantity for leg in legs], "strike": K, "iv": iv,
        "delta_per_unit": g.delta, "delta_units": du, "delta_money": du * S,
        "delta_portfolio_value": du * S / h, "gamma_units": q * g.gamma,
        "gamma_money_per_pct": q * g.gamma * S * S / 100.0,
        "vega_per_vol_point": q * g.vega_per_vol_point, "theta_per_day": q * g.theta_per_day})
    sums = frame[list(GREEK_COLUMNS[5:])].sum()
    net = {"position": "net hedge", "quantity": np.nan, "strike": np.nan, "iv": np.nan,
           "delta_per_unit": np.nan, **sums.to_dict()}
    V = float(estimate.request.portfolio_value)
    port_units = h * V / S
    port = {"position": "portfolio", "quantity": np.nan, "strike": np.nan, "iv": np.nan,
            "delta_per_unit": np.nan, "delta_units": port_units, "delta_money": h * V,
            "delta_portfolio_value": V, "gamma_units": 0.0, "gamma_money_per_pct": 0.0,
            "vega_per_vol_point": 0.0, "theta_per_day": 0.0}
    total = {k: (net[k] + port[k] if k in sums.index else np.nan) for k in GREEK_COLUMNS}
    total["position"] = "hedged portfolio"
    return pd.concat([frame, pd.DataFrame([net, port, total])], ignore_index=True)[
        list(GREEK_COLUMNS)]
