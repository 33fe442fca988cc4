"""Every table the export dialog offers is written in each of its formats and reads
back to the result object's own numbers (no view recomputes anything)."""
from __future__ import annotations

import io
import json

import pandas as pd
import pytest

from optbench.errors import InputError
from optbench.tui import session
from optbench.tui.dialogs.requests import ExportRequest
from optbench.tui.export import TABLES, export, render

from tui_helpers import DEMO, demo


@pytest.fixture(scope="module")
def results():
    demo()
    inputs = session.Inputs(source=session.OpenRequest(chain=DEMO))
    scenario = session.load(inputs)
    comparison = session.run_compare(inputs, scenario)
    estimate = session.run_hedge(comparison, portfolio_value=1e6, structure="put_spread")
    return comparison, estimate


def _csv(text: str) -> pd.DataFrame:
    # header first, read with default settings; the caution is in the sidecar notes
    assert not text.startswith("#")
    return pd.read_csv(io.StringIO(text))


@pytest.mark.slow
def test_every_table_in_every_format(results, tmp_path):
    comparison, estimate = results
    expiry = comparison.expiries[2].expiry.isoformat()
    for what, (_, formats) in TABLES.items():
        for fmt in formats:
            path = export(comparison, estimate, ExportRequest(what, fmt, tmp_path / f"{what}.{fmt}"),
                          expiry=expiry)
            assert path.stat().st_size > 0, (what, fmt)
    for what, (_, formats) in TABLES.items():
        if "csv" in formats:
            assert "not advice" in (tmp_path / f"{what}.csv.meta.json").read_text(), what
    strikes = _csv((tmp_path / "strikes.csv").read_text())
    assert strikes["strike"].tolist() == comparison.strike_frame(expiry)["strike"].tolist()
    assert strikes["iv_mid"].to_numpy() == pytest.approx(
        comparison.strike_frame(expiry)["iv_mid"].to_numpy(), nan_ok=True)
    rejected = _csv((tmp_path / "rejected.csv").read_text())
    assert len(rejected) == sum(comparison.quality["rejected"].values())
    hedge = json.loads((tmp_path / "hedge.json").read_text())
    assert hedge["premium_paid"] == pytest.approx(estimate.premium_paid)
    assert hedge["caution"] == estimate.caution
    scen = _csv((tmp_path / "scenarios.csv").read_text())
    assert scen["hedged"].to_numpy() == pytest.approx([s["hedged"] for s in estimate.scenarios])
    report = json.loads((tmp_path / "report.json").read_text())
    assert [e["atm_iv"] for e in report["expiries"]] == pytest.approx(
        [r.atm_iv for r in comparison.expiries], nan_ok=True)
    assert "not advice" in (tmp_path / "report.html").read_text()


def test_a_format_a_table_cannot_take_is_refused(results, tmp_path):
    comparison, estimate = results
    with pytest.raises(InputError, match="cannot be written as xlsx"):
        render(comparison, estimate, ExportRequest("rejected", "xlsx", tmp_path / "x.xlsx"))
    with pytest.raises(InputError, match="cannot write"):
        export(comparison, estimate, ExportRequest("expiries", "csv", tmp_path / "no" / "x.csv"))
