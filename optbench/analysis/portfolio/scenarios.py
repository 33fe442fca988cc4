r"""Scenarios the user chooses: a grid of underlying moves and implied-vol shocks.

Notes
-----
Without vol shocks the grid is the scenario table's rule at expiry on the user's
moves: unhedged :math:`V\beta m`, hedged adds the legs' payoff at :math:`S(1+m)` less
the premium paid (:meth:`optbench.analysis.results.HedgeEstimate.pnl_at`). With vol
shocks :math:`k` (decimal vol, 0.05 = 5 points) the legs are revalued at a horizon of
``horizon_days`` calendar days (0 = at once) with Black-Scholes-Merton at the
remaining time, spot :math:`S(1+m)` and each leg's mid implied vol plus :math:`k`
(sticky strike, floored at 1 vol point); hedged P&L = unhedged + value of the legs −
premium paid. The portfolio moves by :math:`\beta m` (no basis risk in a scenario:
see the loss distribution for that).
"""
from __future__ import annotations

import numpy as np
import pandas as pd

DEFAULT_MOVES = tuple(round(-0.30 + 0.05 * i, 2) for i in range(9))


def scenario_grid(estimate, moves=DEFAULT_MOVES, vol_shocks=(),
                  horizon_days: int = 0) -> pd.DataFrame:
    """``move, vol_shock, level, hedge_value, unhedged, hedged`` per grid point.

    ``vol_shock`` is NaN on the at-expiry rows (no shocks given)."""
    moves = np.asarray(moves, float)
    level = estimate.spot * (1.0 + moves)
    units_q = np.array([leg.quantity for leg in estimate.legs], float) * estimate.multiplier
    shocks = np.asarray(vol_shocks, float)
    unhedged = estimate.request.portfolio_value * estimate.request.beta * moves
    if shocks.size == 0:
        unh, hedged = estimate.pnl_at(moves)
        return pd.DataFrame({"move": moves, "vol_shock": np.nan, "level": level,
                             "hedge_value": hedged - unh + estimate.premium_paid,
                             "unhedged": unh, "hedged": hedged})
    from optbench.pricing.bsm import bsm_price
    t_left = max(estimate.calendar_days - int(horizon_days), 0) / 365.0
    K = np.array([leg.strike for leg in estimate.legs])
    iv = np.array([leg.iv_mid for leg in estimate.legs])
    call = np.array([leg.type == "C" for leg in estimate.legs])
    M, Kv = np.meshgrid(moves, shocks, indexing="ij")       # (moves, shocks)
    S = (estimate.spot * (1.0 + M))[..., None]
    vol = np.maximum(iv[None, None, :] + Kv[..., None], 0.01)
    price = bsm_price(S, K, t_left, estimate.rate, estimate.div_yield, vol, call)
    value = (price * units_q).sum(axis=-1)
    unh = np.broadcast_to(unhedged[:, None], M.shape)
    return pd.DataFrame({"move": M.ravel(), "vol_shock": Kv.ravel(),
                         "level": S[..., 0].ravel(), "hedge_value": value.ravel(),
                         "unhedged": unh.ravel(),
                         "hedged": (unh + value - estimate.premium_paid).ravel()})
