"""Every view describes the forecast band the numbers come from: quantiles of the
forecast over the model's parameter uncertainty (optbench.volatility.garch
GarchFit.forecast_band), never a spread of simulated realized vol."""
from __future__ import annotations

from pathlib import Path

import pytest

from optbench.analysis.compare import compare

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def comparison():
    return compare(ROOT / "chains" / "ZPHX", model="gjr", dist="t",
                   expiries=["2027-02-19", "2027-05-21"])


def test_term_structure_caption_names_parameter_uncertainty(comparison):
    from optbench.tui.views.term import term_plot
    title = term_plot(comparison).title
    assert "parameter uncertainty" in title and "simulated realized" not in title


def test_no_view_or_doc_calls_the_band_simulated_realized_vol():
    for folder in ("optbench/tui", "optbench/report", "docs"):
        for path in (ROOT / folder).rglob("*"):
            if path.suffix in (".py", ".md", ".tcss"):
                assert "of simulated realized vol" not in path.read_text(encoding="utf-8"), path
