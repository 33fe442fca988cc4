r"""The protection menu: every listed expiry in a range × floors × structures.

Notes
-----
For each listed expiry with ``min_days <= calendar days <= max_days``, each floor
(80 % … 100 % of spot in steps of 2.5 %) and each structure (put, put spread with the
sold put 10 % of spot lower, zero-cost collar), the legs are the listed strikes the
single hedge would pick (:func:`optbench.analysis.hedge._choose_legs`, so a menu row
and ``optbench hedge`` with the same expiry, floor and structure agree to the unit).
On the joint paths (:mod:`optbench.analysis.portfolio.joint`) at that expiry:

* premium paid (ask for bought legs, bid for sold legs) and at mid;
* expected payoff :math:`e^{-r\tau}\,\overline{\text{payoff}}` (:math:`r` the expiry's
  rate) and overpay = premium
  paid − expected payoff. The overpay is the menu's **cost**: the expected drag of
  the hedge under the model, which counts a collar's forgone upside (its premium
  alone would call a zero-cost collar free);
* the 99 % expected shortfall of the hedged P&L and its **reduction** against the
  unhedged portfolio at the same expiry;
* cost per unit of reduction = overpay / reduction (NaN where the reduction is not
  positive).

The **efficient set**: rows not beaten on both cost and protection — no other row has
an overpay at most as large and an ES reduction at least as large, one of them
strictly (a Pareto frontier, as in Markowitz's mean-variance efficient set (1959), applied to
cost and tail protection). ``efficient`` is over the whole menu,
``efficient_in_expiry`` within each expiry.

Vectorised over paths and menu rows of an expiry; the leg choice runs once per row.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from optbench.analysis.hedge import _choose_legs, contracts_for
from optbench.analysis.portfolio.risk import es_only
from optbench.analysis.results import CAUTION, HedgeRequest
from optbench.errors import InputError

FLOORS = tuple(round(0.80 + 0.025 * i, 3) for i in range(9))
MENU_STRUCTURES = ("put", "put_spread", "collar")
MIN_DAYS, MAX_DAYS = 30, 366
MENU_COLUMNS = ("expiry", "calendar_days", "trading_days", "structure", "floor",
                "put_strike", "other_strike", "contracts", "premium_mid", "premium_paid",
                "premium_pct", "expected_payoff", "overpay", "es99_unhedged",
                "es99_hedged", "es99_reduction", "cost_per_reduction", "efficient",
                "efficient_in_expiry", "note")


@dataclass(frozen=True, eq=False)
class ProtectionMenu:
    """The menu (``frame`` with :data:`MENU_COLUMNS`, one row per choice; rows that
    cannot be built are in ``unavailable`` with their reason)."""

    frame: pd.DataFrame
    unavailable: pd.DataFrame
    value: float
    hedge_ratio: float
    n_paths: int
    drift_rule: str
    cost_measure: str
    efficient_rule: str
    collar_rule: str = ""
    warnings: tuple[str, ...] = ()
    caution: str = CAUTION

    def efficient_frame(self) -> pd.DataFrame:
        return self.frame[self.frame["efficient"]]

    def to_dict(self) -> dict:
        from optbench.analysis.results import plain
        return {"rows": plain(self.frame), "unavailable": plain(self.unavailable),
                "value": self.value, "hedge_ratio": self.hedge_ratio,
                "n_paths": self.n_paths, "drift_rule": self.drift_rule,
                "cost_measure": self.cost_measure, "efficient_rule": self.efficient_rule,
                "collar_rule": self.collar_rule,
                "warnings": list(self.warnings), "caution": self.caution}


def efficient_mask(cost, protection) -> np.ndarray:
    """True where no other row has cost <= and protection >=, one strictly."""
    c = np.asarray(cost, float)[:, None]
    p = np.asarray(protection, float)[:, None]
    ok = np.isfinite(c[:, 0]) & np.isfinite(p[:, 0])
    cj, pj = c.T, p.T
    beats = (cj <= c) & (pj >= p) & ((cj < c) | (pj > p)) & ok[None, :]
    return ok & ~beats.any(axis=1)


def menu_expiries(comparison, min_days: int = MIN_DAYS, max_days: int = MAX_DAYS):
    """The comparison's expiry rows inside the range (calendar days, inclusive)."""
    return [row for row in comparison.expiries
            if min_days <= row.calendar_days <= max_days and row.trading_days >= 1]


def protection_menu(comparison, joint, *, value: float, hedge_ratio: float,
                    multiplier: float | None = None, min_days: int = MIN_DAYS,
                    max_days: int = MAX_DAYS, floors=FLOORS,
                    structures=MENU_STRUCTURES, spread_width: float = 0.10,
                    warnings=()) -> ProtectionMenu:
    """Build the menu on the joint paths ``joint`` (which must hold every expiry's
    trading days). See the module Notes."""
    spot, rate = float(comparison.spot), float(comparison.rate)
    m = float(multiplier or comparison.multiplier or 100.0)
    n = contracts_for(value, hedge_ratio, m, spot)
    units = n * m
    rows, missing = [], []
    collar_rule = ""
    for row in menu_expiries(comparison, min_days, max_days):
        table = comparison.strikes[row.expiry]
        strikes = table["strike"].to_numpy(float)
        is_call = table["is_call"].to_numpy(bool)
        bid, ask, mid = (table[c].to_numpy(float) for c in ("bid", "ask", "mid"))
        cells = []
        for structure in structures:
            for floor in floors:
                try:
                    req = HedgeRequest(portfolio_value=value, beta=hedge_ratio, floor=floor,
                                       structure=structure,
                                       lower_floor=(round(floor - spread_width, 4)
                                                    if structure == "put_spread" else None))
                    buys, sells, note = _choose_legs(req, table, spot, n, m, row.expiry)
                except InputError as err:
                    missing.append({"expiry": row.expiry, "structure": structure,
                                    "floor": floor, "reason": err.problem})
                    continue
                if note.startswith("call strike chosen"):
                    collar_rule, note = note, ""     # said once for the menu
                cells.append((structure, floor, buys[0], sells[0] if sells else -1, note))
        if not cells:
            continue
        col = joint.column(row.trading_days)
        s_t = spot * np.exp(joint.index[:, col])
        unhedged = value * np.expm1(joint.portfolio[:, col])
        es_unh = float(es_only(unhedged[:, None], 0.99)[0])
        ip = np.array([c[2] for c in cells])
        io = np.array([c[3] for c in cells])
        has2 = io >= 0
        io0 = np.where(has2, io, 0)
        k1, k2 = strikes[ip], strikes[io0]
        c2 = is_call[io0]
        # payoff per unit: bought put, minus the sold put or call (if any)
        pay = np.maximum(k1[None, :] - s_t[:, None], 0.0)
        sold = np.where(c2[None, :], s_t[:, None] - k2[None, :], k2[None, :] - s_t[:, None])
        pay -= np.where(has2[None, :], np.maximum(sold, 0.0), 0.0)
        paid = units * (ask[ip] - np.where(has2, bid[io0], 0.0))
        pmid = units * (mid[ip] - np.where(has2, mid[io0], 0.0))
        r_e = getattr(row, "rate", math.nan)
        r_e = r_e if math.isfinite(r_e) else rate     # the expiry's own rate, as the hedge
        expected = math.exp(-r_e * row.t) * units * pay.mean(axis=0)
        # (rows, paths) so that each row's tail is found in contiguous memory
        hedged = np.ascontiguousarray(pay.T)
        hedged *= units
        hedged += unhedged[None, :] - paid[:, None]
        es_h = es_only(hedged.T, 0.99)
        for j, (structure, floor, _, _, note) in enumerate(cells):
            red = es_unh - es_h[j]
            over = paid[j] - expected[j]
            rows.append({
                "expiry": row.expiry, "calendar_days": row.calendar_days,
                "trading_days": row.trading_days, "structure": structure, "floor": floor,
                "put_strike": float(k1[j]),
                "other_strike": float(k2[j]) if has2[j] else math.nan,
                "contracts": n, "premium_mid": float(pmid[j]), "premium_paid": float(paid[j]),
                "premium_pct": float(paid[j] / value), "expected_payoff": float(expected[j]),
                "overpay": float(over), "es99_unhedged": es_unh, "es99_hedged": float(es_h[j]),
                "es99_reduction": float(red),
                "cost_per_reduction": float(over / red) if red > 0 else math.nan,
                "efficient": False, "efficient_in_expiry": False, "note": note})
    frame = pd.DataFrame(rows, columns=list(MENU_COLUMNS))
    notes = list(warnings)
    if len(frame):
        frame["efficient"] = efficient_mask(frame["overpay"], frame["es99_reduction"])
        by_exp = frame.groupby("expiry", sort=False).indices
        eff = np.zeros(len(frame), bool)
        for idx in by_exp.values():
            eff[idx] = efficient_mask(frame["overpay"].to_numpy()[idx],
                                      frame["es99_reduction"].to_numpy()[idx])
        frame["efficient_in_expiry"] = eff
    else:
        notes.append(f"no listed expiry between {min_days} and {max_days} calendar days")
    unavailable = pd.DataFrame(missing, columns=["expiry", "structure", "floor", "reason"])
    if len(unavailable):
        notes.append(f"{len(unavailable)} menu choices could not be built from the listed "
                     "strikes (see 'unavailable')")
    return ProtectionMenu(
        frame=frame, unavailable=unavailable, value=float(value),
        hedge_ratio=float(hedge_ratio), n_paths=int(joint.index.shape[0]),
        drift_rule=joint.drift_rule,
        cost_measure="overpay: premium paid less the model's expected payoff (money)",
        efficient_rule="not beaten on both overpay (lower is better) and 99% expected-"
                       "shortfall reduction (higher is better)", collar_rule=collar_rule,
        warnings=tuple(notes))
