"""What the dialogs hand back: small frozen requests, no textual imports."""
from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass
from pathlib import Path


@dataclass(frozen=True)
class OpenRequest:
    """A chain file or scenario folder to open, and optionally its history file."""

    chain: Path
    history: Path | None = None


@dataclass(frozen=True)
class ExportRequest:
    """Which table (or the full report) to write, in which format, where."""

    what: str          # "report" or a table id ("expiries", "strikes", "hedge", "rejected", ...)
    fmt: str           # csv, json, xlsx, md, html
    path: Path


@dataclass(frozen=True)
class Settings:
    """Model, market overrides and filters the comparison runs with.

    Rates and yields are continuously compounded decimals; ``None`` means "from the
    chain / scenario".
    """

    model: str = "auto"
    dist: str = "t"
    mean: str = "constant"
    spot: float | None = None
    asof: _dt.date | None = None
    rate: float | None = None
    div_yield: float | None = None
    style: str | None = None
    multiplier: float | None = None
    max_spread: float | None = None
    #: simulated paths behind the hedge's expected payoff (as ``optbench hedge --paths``)
    hedge_paths: int = 20000
    seed: int | None = 7
    #: drift of simulated prices: "risk-free" (r - q plus ``excess_return``) or "fitted"
    drift: str = "risk-free"
    #: expected excess return a year (decimal); None = the scenario's meta.toml, else 0
    excess_return: float | None = None
    #: exercise style and contract multiplier of every option (None: the chain's)
    style: str | None = None
    multiplier: float | None = None

    def overrides(self) -> dict:
        """Market overrides for the loaders (only those the user set)."""
        keys = ("spot", "asof", "rate", "div_yield", "style", "multiplier", "max_spread")
        return {k: getattr(self, k) for k in keys if getattr(self, k) is not None}
