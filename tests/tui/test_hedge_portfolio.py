"""The hedge planner's portfolio section on the demo: the holdings' beta with its error,
the loss distribution, the greeks and the menu, equal to ``optbench hedge --holdings
... --menu`` for the same inputs."""
from __future__ import annotations

import json
import subprocess
import sys

import pytest
from textual.widgets import Input, Select, Static

from optbench.tui.app import make_app

from tui_helpers import ROOT, SIZE, demo, run, settle, text_of


@pytest.mark.slow
def test_planner_portfolio_section_equals_the_hedge_command():
    run(_test())


async def _test():
    demo()
    app = make_app()
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        await pilot.press("5")
        app.screen.query_one("#hedge-source", Select).value = "holdings"
        app.screen.query_one("#hedge-menu", Select).value = "on"
        await pilot.pause(0.3)
        await settle(app, pilot)
        view = app.view("hedge")
        est = view.estimate
        shown = text_of(app.screen.query_one("#hedge-portfolio-view", Static))
        demo_dir = ROOT / "chains" / "ZPHX"
        out = subprocess.run([sys.executable, "-m", "optbench", "hedge", str(demo_dir),
                              "--holdings", str(demo_dir / "holdings.csv"), "--menu",
                              "--floor", "0.9", "--format", "json"],
                             capture_output=True, text=True, cwd=ROOT, timeout=300)
        assert out.returncode == 0, out.stderr
        ref = json.loads(out.stdout)
        p = ref["portfolio"]
        assert f"beta {p['beta']:.3f} ± {p['beta_se']:.3f}" in shown
        assert est.contracts == ref["contracts"]
        assert est.premium_paid == pytest.approx(ref["premium_paid"])
        assert f"{ref['loss_distribution']['hedged']['es_99']:,.0f}" in shown
        assert "Greeks of the hedge" in shown and "Protection menu" in shown
        n_eff = sum(r["efficient"] for r in ref["menu"]["rows"])
        assert f"{n_eff} efficient of {len(ref['menu']['rows'])}" in shown
        assert "Basis risk" in shown
        # a holdings file that does not exist is a one-line message; the app keeps running
        app.screen.query_one("#hedge-holdings", Input).value = "/no/such/holdings.csv"
        await pilot.pause(0.5)
        assert "no such file" in text_of(app.screen.query_one("#hedge-error", Static))
        assert app.is_running
