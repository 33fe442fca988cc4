"""Formatting of result values for the screen: units in, text out, no arithmetic
beyond the change of unit (decimals shown as percentage points)."""
from __future__ import annotations

import datetime as _dt
import math
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from rich.text import Text

#: verdict -> (text mark, colour). The mark keeps the verdict readable without colour.
VERDICT_MARKS = {
    "rich": ("▲ rich", "bold red"),
    "fair": ("= fair", "yellow"),
    "cheap": ("▼ cheap", "bold green"),
    "n/a": ("? n/a", "dim"),
}


def _bad(x: Any) -> bool:
    if x is None:
        return True
    try:
        return math.isnan(float(x))
    except (TypeError, ValueError):
        return True


def pct(x: Any, digits: int = 1, signed: bool = False) -> str:
    """A decimal as percentage points: 0.215 -> '21.5'."""
    if _bad(x):
        return "–"
    v = float(x) * 100
    if round(v, digits) == 0:
        v = 0.0  # no sign on a rounded zero
    return f"{v:+.{digits}f}" if signed else f"{v:.{digits}f}"


def pct_sign(x: Any, digits: int = 1) -> str:
    return "–" if _bad(x) else f"{float(x) * 100:.{digits}f}%"


def num(x: Any, digits: int = 2, signed: bool = False) -> str:
    if _bad(x):
        return "–"
    return f"{float(x):+,.{digits}f}" if signed else f"{float(x):,.{digits}f}"


def money(x: Any, signed: bool = False) -> str:
    if _bad(x):
        return "–"
    v = 0.0 if round(float(x)) == 0 else float(x)
    return f"{v:+,.0f}" if signed else f"{v:,.0f}"


def date(x: Any) -> str:
    if isinstance(x, _dt.datetime):
        return x.date().isoformat()
    if isinstance(x, _dt.date):
        return x.isoformat()
    return "–" if x is None else str(x)[:10]


def verdict(v: str) -> "Text":
    from rich.text import Text   # not at import: the first run formats without rich
    mark, style = VERDICT_MARKS.get(str(v), VERDICT_MARKS["n/a"])
    return Text(mark, style=style)


def tenor(calendar_days: int) -> str:
    """A plain tenor name for a number of calendar days: '7d', '3m', '1y'."""
    d = int(calendar_days)
    if d < 45:
        return f"{d}d"
    if d < 330:
        return f"{round(d / 30.4)}m"
    years = d / 365
    return f"{years:.0f}y" if abs(years - round(years)) < 0.1 else f"{years:.1f}y"
