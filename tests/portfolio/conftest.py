"""Fixtures for the portfolio-insurance tests: the demo comparison and its portfolio."""
from __future__ import annotations

from pathlib import Path

import pytest

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"


@pytest.fixture(scope="session")
def comparison():
    from optbench.analysis.compare import compare
    return compare(DEMO, model="gjr", dist="t", n_paths=2000, seed=7)


@pytest.fixture(scope="session")
def demo_fit(comparison):
    from optbench.analysis.portfolio import fit_portfolio
    from optbench.data.holdings import load_holdings, load_price_panel
    h = load_holdings(DEMO / "holdings.csv")
    p = load_price_panel(DEMO / "holdings_history.csv", h.symbols)
    return fit_portfolio(comparison.history["date"].to_numpy(),
                         comparison.history["ret"].to_numpy(), holdings=h, panel=p)
