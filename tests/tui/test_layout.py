"""The workbench at 80 x 24: the state on the status line, every tab, and the keys
for export, help and quit in the key bar, all inside the screen; the planner and the
model check stack; the universe table shows its verdict column."""
from __future__ import annotations

import pytest
from textual.widgets import Static, Tab
from textual.widgets._footer import FooterKey

from optbench.tui.app import make_app

from tui_helpers import demo, run, settle


@pytest.mark.slow
@pytest.mark.parametrize("size", [(80, 24), (120, 40), (200, 60)])
def test_state_tabs_and_main_keys_fit_the_screen(size):
    run(_fits(size))


async def _fits(size):
    demo()
    app = make_app(hedge_paths=500)
    width, height = size
    async with app.run_test(size=size) as pilot:
        await settle(app, pilot)
        screen = app.screen
        status = screen.query_one("#status-text", Static)
        assert str(status.content).startswith("ready")
        # the state word is drawn inside the screen, not cut
        assert status.region.x + len("ready") <= width and status.region.width >= 40
        for tab in screen.query(Tab):
            assert tab.region.right <= width, f"tab {tab.label} is off screen at {size}"
        shown = {k.key: k for k in screen.query(FooterKey)}
        for key in ("e", "question_mark", "q", "o", "m"):
            assert key in shown and shown[key].region.right <= width, \
                f"key {key} is not in the key bar at {size}"
        # the planner and the model check stack below 100 columns
        await pilot.press("5")
        await pilot.pause(0.2)
        form, result = screen.query_one("#hedge-form"), screen.query_one("#hedge-result")
        if width < 100:
            assert result.region.y > form.region.y and form.region.width >= width - 4
        else:
            assert result.region.x > form.region.x
        await pilot.press("6")
        await pilot.pause(0.2)
        left, right = screen.query_one("#model-left"), screen.query_one("#model-right")
        assert (right.region.y > left.region.y) if width < 100 else \
            (right.region.x > left.region.x)
        # the overview's verdict table shows every expiry when scrolled to
        await pilot.press("1")
        await pilot.pause(0.2)
        verdicts = screen.query_one("#ov-verdicts", Static)
        assert verdicts.region.width <= width


def test_universe_table_shows_the_verdict_within_80_columns():
    from optbench.tui.dialogs.universe import COLUMNS
    keys = [k for k, _, _ in COLUMNS]
    # code, days, verdict and the gap lead: they fit in the first 40 columns
    assert keys[:4] == ["code", "tenor_days", "verdict", "iv_minus_forecast"]


def test_a_result_arriving_while_the_app_shuts_down_is_dropped():
    # a run's result message can come after the app has taken its screens down (a
    # test leaving the app, a user quitting mid-run): the handlers then draw nothing
    from types import SimpleNamespace

    from optbench.tui.app import Workbench
    current = Workbench._current
    assert current(SimpleNamespace(_token=3, screen_stack=["main"]), SimpleNamespace(token=3))
    assert not current(SimpleNamespace(_token=3, screen_stack=[]), SimpleNamespace(token=3))
    assert not current(SimpleNamespace(_token=4, screen_stack=["main"]),
                       SimpleNamespace(token=3))
