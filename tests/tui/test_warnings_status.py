"""The workbench never says a plain "ready" over a flagged answer: dropped history rows
and out-of-range dates reach its status line, overview and data-quality counts."""
from __future__ import annotations

import shutil

import pandas as pd
import pytest
from textual.widgets import Static

from optbench.tui.app import make_app

from tui_helpers import SIZE, demo, run, settle, text_of


@pytest.fixture
def flagged(tmp_path):
    folder = tmp_path / "ZPHX"
    shutil.copytree(demo(), folder)
    h = pd.read_csv(folder / "history.csv", dtype=str)
    h.loc[[100, 101], "close"] = ["n/a", "0"]
    h.to_csv(folder / "history.csv", index=False)
    ch = pd.read_csv(folder / "chain.csv", dtype=str)
    ch.loc[10, "expiry"] = "9999-12-31"
    ch.to_csv(folder / "chain.csv", index=False)
    return folder


def test_status_line_names_the_warnings(flagged):
    run(_status(flagged))


async def _status(folder):
    app = make_app(folder, model="garch", dist="normal")
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        assert app.error is None and app.comparison is not None
        status = text_of(app.screen.query_one("#status-text", Static))
        n = len(app.comparison.warnings)
        assert n >= 2
        assert f"ready with {n} warnings" in status
        joined = " | ".join(app.comparison.warnings)
        assert "bad_close" in joined and "zero_close" in joined
        # the overview lists them (its text wraps, so compare without line breaks)
        state = " ".join(text_of(app.screen.query_one("#ov-state", Static)).split())
        assert "bad_close" in state and "zero_close" in state
        assert app.comparison.quality["rejected"].get("bad_date") == 1
