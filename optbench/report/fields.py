"""Labels and kinds of the fields the views show, shared by every export.

A *kind* says how a value is shown: ``vol`` (decimal vol shown in percentage points),
``volpt`` (difference of vols, shown in vol points), ``var`` (annualised variance),
``pct`` (decimal fraction shown as a percentage), ``prob`` (probability, shown as a
percentage), ``money``, ``price`` (per unit of the underlying), ``num``, ``int``,
``date``, ``text``, ``bool``. Values themselves stay decimals in every file format
except the terminal and Markdown tables, which are for reading.
"""
from __future__ import annotations

import math
from typing import Any

#: per-expiry columns: (field, label, kind)
EXPIRY_FIELDS: tuple[tuple[str, str, str], ...] = (
    ("expiry", "Expiry", "date"),
    ("calendar_days", "Days", "int"),
    ("trading_days", "Trading days", "int"),
    ("t", "t (years)", "num"),
    ("forward", "Forward", "price"),
    ("discount", "Discount", "num"),
    ("forward_source", "Forward from", "text"),
    ("style", "Style", "text"),
    ("n_quotes", "Quotes", "int"),
    ("atm_iv", "ATM IV", "vol"),
    ("atm_iv_bid", "ATM IV bid", "vol"),
    ("atm_iv_ask", "ATM IV ask", "vol"),
    ("iv_25d_put", "IV 25d put", "vol"),
    ("iv_25d_call", "IV 25d call", "vol"),
    ("rr_25d", "RR 25d", "volpt"),
    ("iv_90", "IV 90%", "vol"),
    ("iv_95", "IV 95%", "vol"),
    ("model_free_iv", "Model-free IV", "vol"),
    ("forecast_low", "Forecast low", "vol"),
    ("forecast_vol", "Forecast", "vol"),
    ("forecast_high", "Forecast high", "vol"),
    ("realized_vol", "Realized", "vol"),
    ("cone_percentile", "Cone pct", "prob"),
    ("iv_minus_forecast", "IV - forecast", "volpt"),
    ("variance_premium", "Variance premium", "var"),
    ("iv_forecast_ratio", "IV / forecast", "num"),
    ("prob_realized_above_iv", "P(realized > IV)", "prob"),
    ("verdict", "Verdict", "text"),
    ("smile_method", "Smile fit", "text"),
    ("smile_rmse", "Smile RMSE", "volpt"),
    ("arbitrage_flags", "Arbitrage flags", "int"),
    ("floor", "Floor", "pct"),
    ("put25_strike", "25d put strike", "price"),
    ("put25_delta", "25d put delta", "num"),
    ("put25_iv", "25d put IV", "vol"),
    ("put25_premium", "25d put ask", "price"),
    ("put25_premium_mid", "25d put mid", "price"),
    ("put25_expected_payoff", "25d put expected payoff", "price"),
    ("put25_payoff_low", "25d put payoff low", "price"),
    ("put25_payoff_high", "25d put payoff high", "price"),
    ("put25_payoff_se", "25d put payoff s.e.", "price"),
    ("put25_verdict", "25d put verdict", "text"),
    ("floor_put_strike", "Floor put strike", "price"),
    ("floor_put_delta", "Floor put delta", "num"),
    ("floor_put_iv", "Floor put IV", "vol"),
    ("floor_put_premium", "Floor put ask", "price"),
    ("floor_put_premium_mid", "Floor put mid", "price"),
    ("floor_put_expected_payoff", "Floor put expected payoff", "price"),
    ("floor_put_payoff_low", "Floor put payoff low", "price"),
    ("floor_put_payoff_high", "Floor put payoff high", "price"),
    ("floor_put_payoff_se", "Floor put payoff s.e.", "price"),
    ("floor_put_verdict", "Floor put verdict", "text"),
)

#: the per-expiry columns a terminal or Markdown table shows
EXPIRY_BRIEF = ("expiry", "calendar_days", "atm_iv", "iv_25d_put", "iv_25d_call", "rr_25d",
                "model_free_iv", "forecast_low", "forecast_vol", "forecast_high",
                "realized_vol", "cone_percentile", "iv_minus_forecast",
                "variance_premium", "prob_realized_above_iv", "verdict")

#: the protection verdict's columns in terminal, Markdown and HTML tables
PROTECTION_BRIEF = ("expiry", "calendar_days", "verdict",
                    "put25_strike", "put25_premium", "put25_premium_mid",
                    "put25_expected_payoff", "put25_payoff_low", "put25_payoff_high",
                    "put25_verdict", "floor_put_strike", "floor_put_premium",
                    "floor_put_premium_mid", "floor_put_expected_payoff",
                    "floor_put_payoff_low", "floor_put_payoff_high", "floor_put_verdict")

STRIKE_FIELDS: tuple[tuple[str, str, str], ...] = (
    ("expiry", "Expiry", "date"),
    ("strike", "Strike", "price"),
    ("is_call", "Call", "bool"),
    ("type", "Type", "text"),
    ("moneyness", "K / F", "num"),
    ("bid", "Bid", "price"),
    ("ask", "Ask", "price"),
    ("mid", "Mid", "price"),
    ("iv_bid", "IV bid", "vol"),
    ("iv_mid", "IV mid", "vol"),
    ("iv_ask", "IV ask", "vol"),
    ("delta", "Delta", "num"),
    ("vega_per_vol_point", "Vega / vol pt", "price"),
    ("forecast_vol", "Forecast", "vol"),
    ("price_at_forecast", "Price at forecast", "price"),
    ("edge_per_contract", "Edge / contract", "money"),
    ("edge_vol_points", "Edge (vol pts)", "num"),
    ("edge_per_vega", "Edge / vega (vol pts)", "num"),
    ("multiplier", "Multiplier", "num"),
    ("line", "Line", "int"),
)

STRIKE_BRIEF = ("strike", "type", "moneyness", "bid", "ask", "iv_bid", "iv_mid", "iv_ask",
                "forecast_vol", "price_at_forecast", "edge_per_contract", "edge_vol_points",
                "edge_per_vega")

HEDGE_FIELDS: tuple[tuple[str, str, str], ...] = (
    ("structure", "Structure", "text"),
    ("expiry", "Expiry", "date"),
    ("calendar_days", "Days", "int"),
    ("contracts", "Contracts", "int"),
    ("multiplier", "Multiplier", "num"),
    ("strike", "Put strike", "price"),
    ("strike_legs", "Strikes, every leg", "text"),
    ("premium_mid", "Premium at mid", "money"),
    ("premium_paid", "Premium paid", "money"),
    ("premium_at_forecast", "Value at forecast vol", "money"),
    ("expected_payoff", "Expected payoff (model)", "money"),
    ("overpay", "Overpay", "money"),
    ("cost_pct", "Cost, % of portfolio", "pct"),
    ("cost_pct_annual", "Cost, % a year", "pct"),
    ("prob_payoff", "P(hedge pays)", "prob"),
    ("breakeven", "Breakeven level", "price"),
    ("breakeven_move", "Breakeven move", "pct"),
    ("annual_roll_cost", "Rolled for a year", "money"),
    ("annual_roll_cost_pct", "Rolled, % of portfolio", "pct"),
)

LEG_FIELDS: tuple[tuple[str, str, str], ...] = (
    ("side", "Side", "text"),
    ("type", "Type", "text"),
    ("strike", "Strike", "price"),
    ("expiry", "Expiry", "date"),
    ("quantity", "Contracts", "int"),
    ("bid", "Bid", "price"),
    ("ask", "Ask", "price"),
    ("mid", "Mid", "price"),
    ("iv_mid", "IV mid", "vol"),
    ("forecast_vol", "Forecast", "vol"),
    ("price_at_forecast", "Price at forecast", "price"),
    ("premium_mid", "Premium at mid", "money"),
    ("premium_paid", "Premium paid", "money"),
    ("premium_at_forecast", "Value at forecast", "money"),
)

SCENARIO_FIELDS: tuple[tuple[str, str, str], ...] = (
    ("move", "Move", "pct"),
    ("level", "Level", "price"),
    ("unhedged", "P&L unhedged", "money"),
    ("hedged", "P&L hedged", "money"),
)

KINDS: dict[str, str] = {name: kind for table in (EXPIRY_FIELDS, STRIKE_FIELDS, HEDGE_FIELDS,
                                                   LEG_FIELDS, SCENARIO_FIELDS)
                         for name, _, kind in table}
LABELS: dict[str, str] = {name: label for table in (EXPIRY_FIELDS, STRIKE_FIELDS,
                                                     HEDGE_FIELDS, LEG_FIELDS,
                                                     SCENARIO_FIELDS)
                          for name, label, _ in table}

#: openpyxl number formats by kind (values stay decimals in the sheet)
EXCEL_FORMATS = {"vol": "0.00%", "pct": "0.00%", "prob": "0.0%", "volpt": "0.00%",
                 "var": "0.0000", "money": "#,##0.00", "price": "#,##0.00",
                 "num": "0.0000", "int": "0", "date": "yyyy-mm-dd"}


def fmt(value: Any, kind: str, percent_sign: bool = True) -> str:
    """A value as text for reading (terminal, Markdown, HTML tables).

    ``percent_sign=False`` drops the ``%`` of vols and percentages (narrow tables whose
    title says the unit)."""
    if not percent_sign and kind in ("vol", "pct", "prob"):
        text = fmt(value, kind)
        return text[:-1] if text.endswith("%") else text
    if value is None:
        return "–"
    if isinstance(value, float):
        if math.isnan(value):
            return "–"
        value = value + 0.0 if value != 0 else 0.0      # no "-0" on screen
    if kind in ("vol", "pct", "prob"):
        return f"{100 * float(value):.1f}%" if kind == "prob" else f"{100 * float(value):.2f}%"
    if kind == "volpt":
        return f"{100 * float(value):+.2f}"
    if kind == "var":
        return f"{float(value):+.4f}"
    if kind == "money":
        return f"{float(value):,.0f}"
    if kind == "price":
        return f"{float(value):,.2f}"
    if kind == "num":
        return f"{float(value):.2f}" if abs(float(value)) >= 1 else f"{float(value):.3f}"
    if kind == "int":
        return f"{int(value):d}"
    if kind == "bool":
        return "yes" if value else "no"
    if hasattr(value, "isoformat"):
        return value.isoformat()[:10]
    return str(value)
