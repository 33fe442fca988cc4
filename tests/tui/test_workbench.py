"""Pilot tests: open the demo, visit every view, edit the hedge planner, export, and
open broken input — the app must answer each with the core's numbers or a clear
message, and keep running."""
from __future__ import annotations

import json
import subprocess
import sys

import pandas as pd
import pytest
from textual.widgets import Input, Select, Static, TabbedContent

from optbench.tui.app import make_app
from optbench.tui.screens.workbench import VIEWS

from tui_helpers import ROOT, SIZE, demo, run, settle, text_of


@pytest.mark.slow
def test_demo_opens_and_every_view_shows_the_comparison():
    run(_test_demo_opens_and_every_view_shows_the_comparison())


async def _test_demo_opens_and_every_view_shows_the_comparison():
    demo_dir = demo()
    app = make_app()  # no path: the bundled demo
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        assert app.error is None
        c = app.comparison
        assert c is not None and c.underlying == "ZPHX" and len(c.expiries) >= 5
        tabs = app.screen.query_one("#views", TabbedContent)
        for view_id, key, _ in VIEWS:
            await pilot.press(key)
            await pilot.pause()
            assert tabs.active == view_id
        # the overview's headline is the headline hedge estimate, as a % of the portfolio
        headline = text_of(app.screen.query_one("#ov-headline", Static))
        assert app.headline is not None
        assert f"{app.headline.cost_pct * 100:.2f}%" in headline
        assert app.headline.caution in text_of(app.screen.query_one("#ov-caution", Static))
        # one term-structure row and one rich/cheap row per expiry, in the result's order
        term = app.screen.query_one("#term-table")
        assert term.row_count == len(c.expiries)
        assert [r[0] for r in term.raw_rows] == [r.expiry.isoformat() for r in c.expiries]
        rc = app.screen.query_one("#rc-expiries")
        verdict_col = [str(v) for v in rc.get_column("verdict")]
        # readable without colour: each verdict has its text mark
        marks = {"rich": "▲ rich", "fair": "= fair", "cheap": "▼ cheap", "n/a": "? n/a"}
        assert verdict_col == [marks[r.verdict] for r in c.expiries]
        # the strike table holds the chosen expiry's quotes
        strikes = app.screen.query_one("#rc-strikes")
        assert strikes.total_rows == len(c.strike_frame(app.view("richcheap").expiry))
        # sorting the strike table by edge (vol points) orders the raw values
        strikes.focus()
        col = strikes.get_column_index("edgev")
        strikes.move_cursor(column=col)
        await pilot.press("s")
        edge = [r[col] for r in strikes.raw_rows]
        first = strikes.get_row_at(0)[col].plain
        assert first.endswith(f"{min(e for e in edge if e == e):+.2f}")
        await pilot.press("s")  # again: high to low
        assert strikes.get_row_at(0)[col].plain.endswith(f"{max(e for e in edge if e == e):+.2f}")
        # [ and ] step through the expiries of the smile and rich / cheap views
        await pilot.press("3")
        smile = app.screen.query_one("#smile-expiry", Select)
        before_smile = smile.value
        await pilot.press("right_square_bracket")
        await pilot.pause()
        isos = [r.expiry.isoformat() for r in c.expiries]
        assert isos.index(smile.value) == isos.index(before_smile) + 1
        await pilot.press("4", "right_square_bracket")
        await pilot.pause()
        assert app.view("richcheap").expiry == isos[1]
        # data quality: the counts add up and every rejected row is listed
        q = c.quality
        assert q["rows_in"] == q["rows_used"] + sum(q["rejected"].values())
        assert app.screen.query_one("#dq-rejected").row_count == sum(q["rejected"].values())
        # help lists every key with its description, and escape returns to the view
        before = app.active_view
        await pilot.press("question_mark")
        await pilot.pause()
        listed = {(key, does) for key, does, _ in app.screen.entries}
        for b in app.BINDINGS:
            assert (b.key_display or b.key, b.description) in listed or not b.description
        await pilot.press("escape")
        await pilot.pause()
        assert app.screen.query_one("#views", TabbedContent).active == before


async def _fill(pilot, app, widget_id: str, text: str) -> None:
    field = app.screen.query_one(widget_id, Input)
    field.value = text
    await pilot.pause()


def _cli_hedge(args: list[str]) -> dict:
    out = subprocess.run([sys.executable, "-m", "optbench", "hedge", str(ROOT / "chains" / "ZPHX"),
                          "--format", "json", *args], capture_output=True, text=True,
                         cwd=ROOT, timeout=120)
    assert out.returncode == 0, out.stderr
    return json.loads(out.stdout)


@pytest.mark.slow
def test_hedge_planner_equals_the_hedge_command():
    run(_test_hedge_planner_equals_the_hedge_command())


async def _test_hedge_planner_equals_the_hedge_command():
    demo_dir = demo()
    app = make_app()
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        await pilot.press("5")
        expiry = app.comparison.expiries[3].expiry.isoformat()
        await _fill(pilot, app, "#hedge-portfolio", "2,500,000")
        await _fill(pilot, app, "#hedge-beta", "1.3")
        await _fill(pilot, app, "#hedge-floor", "92")
        app.screen.query_one("#hedge-expiry", Select).value = expiry
        app.screen.query_one("#hedge-structure", Select).value = "collar"
        await pilot.pause(0.3)
        await settle(app, pilot)
        est = app.view("hedge").estimate
        assert est is not None and est.structure == "collar"
        shown = text_of(app.screen.query_one("#hedge-summary", Static))
        ref = _cli_hedge(["--portfolio", "2500000", "--beta", "1.3", "--floor", "0.92",
                          "--expiry", expiry, "--structure", "collar"])
        assert est.contracts == ref["contracts"]
        assert [float(k) for k in est.strikes] == pytest.approx(ref["strikes"])
        for key in ("premium_mid", "premium_paid", "premium_at_forecast", "expected_payoff",
                    "overpay", "cost_pct", "cost_pct_annual"):
            assert getattr(est, key) == pytest.approx(ref[key], rel=1e-9, abs=1e-6), key
        assert [s["hedged"] for s in est.scenarios] == pytest.approx(
            [s["hedged"] for s in ref["scenarios"]])
        assert est.caution == ref["caution"]
        assert f"{ref['premium_paid']:,.0f}" in shown  # the screen shows the command's number
        # a beta of "abc" is a clear message, the last estimate stays, the app keeps running
        await _fill(pilot, app, "#hedge-beta", "abc")
        await pilot.pause(0.3)
        error = text_of(app.screen.query_one("#hedge-error", Static))
        # the message names the field as the planner shows it and echoes the text
        assert "Beta to the underlying: not a number: 'abc'" in error
        await _fill(pilot, app, "#hedge-portfolio", "")
        await pilot.pause(0.3)
        assert "Portfolio value: empty" in text_of(app.screen.query_one("#hedge-error", Static))
        # a core check on the request names the planner's field, not a command-line flag
        await _fill(pilot, app, "#hedge-beta", "1.3")
        await _fill(pilot, app, "#hedge-portfolio", "1m")
        app.screen.query_one("#hedge-structure", Select).value = "put_spread"
        await _fill(pilot, app, "#hedge-lower", "95")
        await pilot.pause(0.3)
        await settle(app, pilot)
        error = text_of(app.screen.query_one("#hedge-error", Static))
        assert "Put spread: sold put, % of spot:" in error and "--" not in error
        # typing into a filled field replaces what it held: focus selects the text
        await _fill(pilot, app, "#hedge-lower", "")
        field = app.screen.query_one("#hedge-portfolio", Input)
        app.screen.set_focus(field)
        await pilot.pause()
        await pilot.press("2", "5", "m")
        await pilot.pause(0.3)
        await settle(app, pilot)
        assert field.value == "25m"
        assert app.view("hedge").estimate.request.portfolio_value == 25e6
        assert app.is_running


@pytest.mark.slow
def test_export_writes_the_table_and_says_where(tmp_path):
    run(_test_export_writes_the_table_and_says_where(tmp_path))


async def _test_export_writes_the_table_and_says_where(tmp_path):
    demo_dir = demo()
    app = make_app()
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        await pilot.press("4", "e")
        await pilot.pause()
        target = tmp_path / "expiries.csv"
        app.screen.query_one("#export-path", Input).value = str(target)
        await pilot.press("ctrl+s")
        await settle(app, pilot)
        assert app.last_export == target and target.exists()
        table = pd.read_csv(target)  # header first; the notes are in the .meta.json sidecar
        assert "not advice" in (tmp_path / "expiries.csv.meta.json").read_text()
        assert list(pd.to_datetime(table["expiry"]).dt.date) == [
            r.expiry for r in app.comparison.expiries]
        assert table["atm_iv"].to_numpy() == pytest.approx(
            [r.atm_iv for r in app.comparison.expiries], nan_ok=True)
        assert any(str(target) in str(n.message) for n in app._notifications)


@pytest.mark.slow
def test_broken_file_is_a_clear_message_and_the_app_keeps_running(tmp_path):
    run(_test_broken_file_is_a_clear_message_and_the_app_keeps_running(tmp_path))


async def _test_broken_file_is_a_clear_message_and_the_app_keeps_running(tmp_path):
    demo_dir = demo()
    bad = tmp_path / "chain.csv"
    bad.write_text("this,is,not\nan,option,chain\n")
    (tmp_path / "history.csv").write_text((demo_dir / "history.csv").read_text())
    app = make_app(bad)
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        assert app.comparison is None and app.error is not None
        assert str(bad) in app.error and "Traceback" not in app.error
        assert "✗" in text_of(app.screen.query_one("#ov-headline", Static))
        # open the demo from the file picker: the app recovers
        await pilot.press("o")
        await pilot.pause()
        app.screen.query_one("#open-chain", Input).value = str(demo_dir)
        await pilot.press("ctrl+o")
        await settle(app, pilot)
        assert app.error is None and app.comparison is not None
        # a path that does not exist is refused inside the picker
        await pilot.press("o")
        await pilot.pause()
        app.screen.query_one("#open-chain", Input).value = str(tmp_path / "nope.csv")
        await pilot.press("ctrl+o")
        await pilot.pause()
        assert "no such file" in text_of(app.screen.query_one("#open-error", Static))
        await pilot.press("escape")
        assert app.is_running


@pytest.mark.slow
def test_changing_the_model_recomputes_and_drops_stale_work():
    run(_test_changing_the_model_recomputes_and_drops_stale_work())


async def _test_changing_the_model_recomputes_and_drops_stale_work():
    demo_dir = demo()
    app = make_app()
    async with app.run_test(size=SIZE) as pilot:
        # change the model while the first run is still going: only the last run counts
        app.inputs = app.inputs.with_settings(
            app.inputs.settings.__class__(model="garch", dist="normal"))
        app.start_compute()
        await settle(app, pilot)
        c = app.comparison
        assert c.model.dist == "normal" and c.model.name.lower().startswith("garch")
        # the settings dialog refuses a rate of "x" with a one-line message
        await pilot.press("m")
        await pilot.pause()
        app.screen.query_one("#set-rate", Input).value = "x"
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert "Rate: not a rate: 'x'" in text_of(app.screen.query_one("#settings-error", Static))
        # the dialog shows what the run used and where it came from
        assert "(from meta.toml)" in app.screen.query_one("#set-rate", Input).placeholder
        assert "(from the chain file)" in app.screen.query_one("#set-spot", Input).placeholder
        assert "100" in app.screen.query_one("#set-multiplier", Input).placeholder
        app.screen.query_one("#set-rate", Input).value = "5%"
        app.screen.query_one("#set-asof", Input).value = app.comparison.asof.strftime("%m/%d/%Y")
        app.screen.query_one("#set-multiplier", Input).value = "10"
        await pilot.press("ctrl+s")
        await settle(app, pilot)
        assert app.comparison.rate == pytest.approx(0.05)
        assert app.comparison.multiplier == 10 and app.comparison.sources["rate"] != "meta"
        assert app.inputs.settings.asof == app.comparison.asof


def test_data_quality_shows_the_rejected_side_first(tmp_path):
    # a wide-layout chain (calls | strike | puts): line 3's put side is crossed, line 4's
    # call side has no bid; each row shows the side that was rejected first
    from optbench.data import load_chain
    from optbench.tui.views.quality import side_first
    path = tmp_path / "wide.csv"
    path.write_text("expiry,call_bid,call_ask,strike,put_bid,put_ask\n"
                    "2027-01-15,12.0,12.5,100,3.0,3.4\n"
                    "2027-01-15,8.0,8.4,105,9.5,6.0\n"
                    "2027-01-15,0,0.2,140,30.0,31.0\n")
    chain = load_chain(path, spot=104.0, asof="2026-11-27")
    table = side_first(chain.rejected)
    assert list(table.columns[:4]) == ["line", "reason", "side", "detail"]
    assert list(table.columns[4:6]) == ["bid", "ask"]
    rows = {(int(r["line"]), r["side"]): r for _, r in table.iterrows()}
    put_row, call_row = rows[(3, "put")], rows[(4, "call")]
    assert put_row["side"] == "put" and float(put_row["bid"]) == 9.5 and \
        float(put_row["other bid"]) == 8.0
    assert call_row["side"] == "call" and float(call_row["bid"]) == 0 and \
        float(call_row["other bid"]) == 30.0


@pytest.mark.slow
def test_the_model_dialog_sets_the_drift():
    run(_test_the_model_dialog_sets_the_drift())


async def _test_the_model_dialog_sets_the_drift():
    app = make_app()
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        assert app.comparison.drift.rule == "risk-free"
        await pilot.press("m")
        await pilot.pause()
        app.screen.query_one("#set-excess", Input).value = "x"
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert "Excess return: not a rate" in text_of(
            app.screen.query_one("#settings-error", Static))
        app.screen.query_one("#set-excess", Input).value = "3"
        await pilot.press("ctrl+s")
        await settle(app, pilot)
        assert app.inputs.settings.excess_return == pytest.approx(0.03)
        assert app.comparison.drift.rule == "excess"
        assert app.comparison.drift.annual == pytest.approx(
            app.comparison.rate - app.comparison.div_yield + 0.03)
