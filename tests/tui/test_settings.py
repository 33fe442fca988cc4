"""Settings persist: the hedge planner's inputs, the model choice and the portfolio
are saved as TOML in the config folder, read back at the next start, and can be put
back to defaults; a corrupt file is a one-line notice, never a crash."""
from __future__ import annotations

import tomllib

import pytest
from textual.widgets import Input, Select, Static

from optbench.tui import prefs
from optbench.tui.app import make_app

from tui_helpers import SIZE, demo, run, settle, text_of

PATHS = 500


def test_round_trip_and_defaults(tmp_path):
    path = tmp_path / "settings.toml"
    state = prefs.PlannerState(portfolio_value=25e6, beta=1.3, floor=0.92,
                               structure="put_spread", lower_floor=0.8, expiry="2027-02-19",
                               days=84)
    assert prefs.save(state, prefs.ModelChoice("egarch", "normal", "zero"), path) is None
    data = tomllib.loads(path.read_text())       # plain TOML, readable by any tool
    assert data["planner"]["portfolio_value"] == 25e6 and data["model"]["model"] == "egarch"
    saved = prefs.load(path)
    assert saved.planner == state and saved.model.model == "egarch" and saved.notice is None
    assert prefs.load(tmp_path / "none.toml") == prefs.Saved()
    assert prefs.reset(path) is None and not path.exists()


@pytest.mark.parametrize("text,needle", [
    ("this is [not toml", "not TOML"),
    ("[planner]\nfloor = 3.5\n", "floor = 3.5 is out of range"),
    ("[planner]\nstructure = 'straddle'\n", "structure = 'straddle'"),
    ("[model]\nmodel = 7\n", "model = 7"),
    ("planner = 5\n", "must be tables"),
])
def test_a_corrupt_file_gives_defaults_and_one_line(tmp_path, text, needle):
    path = tmp_path / "settings.toml"
    path.write_text(text)
    saved = prefs.load(path)
    assert saved.planner == prefs.PlannerState() and saved.model == prefs.ModelChoice()
    assert needle in saved.notice and "using defaults" in saved.notice
    assert len(saved.notice.splitlines()) == 1


def test_a_binary_file_gives_a_notice(tmp_path):
    path = tmp_path / "settings.toml"
    path.write_bytes(b"\xff\xfe\x00garbage")
    assert "cannot be read" in prefs.load(path).notice


@pytest.mark.slow
def test_planner_and_model_survive_a_restart_and_reset(_settings_folder):
    run(_restart(_settings_folder))


async def _restart(folder):
    demo()
    app = make_app(hedge_paths=PATHS)
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        await pilot.press("5")
        await pilot.pause()
        app.screen.query_one("#hedge-portfolio", Input).value = "25m"
        app.screen.query_one("#hedge-beta", Input).value = "1.3"
        app.screen.query_one("#hedge-floor", Input).value = "92"
        app.screen.query_one("#hedge-structure", Select).value = "collar"
        await pilot.pause(0.4)
        await settle(app, pilot)
        est = app.view("hedge").estimate
        assert est.request.portfolio_value == 25e6 and est.structure == "collar"
        # the overview's headline follows the planner and says so
        assert app.headline is est
        await pilot.press("1")
        await pilot.pause(0.3)
        headline = text_of(app.screen.query_one("#ov-headline", Static))
        assert "25,000,000" in headline and "planner" in headline
        assert "sell call" in headline                  # every strike of the collar
        # the model choice is saved when applied
        await pilot.press("m")
        await pilot.pause()
        app.screen.query_one("#set-model", Select).value = "garch"
        await pilot.press("ctrl+s")
        await settle(app, pilot)
    saved = prefs.load(folder / "settings.toml")
    assert saved.notice is None and saved.model.model == "garch"
    assert saved.planner.portfolio_value == 25e6 and saved.planner.structure == "collar"
    # the next start restores them: the form, the model and the headline
    app = make_app(hedge_paths=PATHS)
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        assert app.inputs.settings.model == "garch"
        assert app.headline.request.portfolio_value == 25e6 and app.headline.structure == "collar"
        await pilot.press("5")
        await pilot.pause(0.3)
        assert app.screen.query_one("#hedge-portfolio", Input).value == "25,000,000"
        assert app.screen.query_one("#hedge-beta", Input).value == "1.3"
        # back to defaults from the model-and-market dialog
        await pilot.press("m")
        await pilot.pause()
        await pilot.press("ctrl+d")
        await pilot.pause(0.3)
        await settle(app, pilot)
        assert not (folder / "settings.toml").exists() or \
            prefs.load(folder / "settings.toml").planner == prefs.PlannerState()
        assert app.inputs.settings.model == "auto" and app.planner == prefs.PlannerState()
        assert app.screen.query_one("#hedge-portfolio", Input).value == "10,000,000"
        assert app.headline.request.portfolio_value == 10e6


@pytest.mark.slow
def test_a_corrupt_settings_file_is_a_notice_at_start(_settings_folder):
    _settings_folder.mkdir(parents=True, exist_ok=True)
    (_settings_folder / "settings.toml").write_text("[planner\n")
    run(_corrupt())


async def _corrupt():
    app = make_app(hedge_paths=PATHS)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause()
        notes = [str(n.message) for n in app._notifications]   # shown at start
        assert any("not TOML" in n and "using defaults" in n for n in notes)
        await settle(app, pilot)
        assert app.comparison is not None and app.is_running
