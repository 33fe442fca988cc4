"""The track-record screen (key t): it shows the record of ``optbench track`` for the
open scenario — the same cells as the report — and plots the tenor under the cursor."""
from __future__ import annotations

from optbench.tui.app import make_app
from optbench.tui.views.track import TrackScreen

from tui_helpers import SIZE, demo, run, settle


def test_track_screen_shows_the_record_of_the_open_scenario():
    run(_track_screen())


async def _track_screen():
    from optbench.report.track import tenor_cells
    from optbench.track.build import track

    app = make_app(demo(), hedge_paths=2000)
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        await pilot.press("t")
        screen = app.screen
        assert isinstance(screen, TrackScreen)
        for _ in range(1200):
            if screen.record is not None:
                break
            await pilot.pause(0.1)
        record = screen.record
        assert record is not None
        reference = track(demo())
        table = screen.query_one("#track-table")
        assert table.row_count == len(reference.tenors) == 5
        for i, t in enumerate(reference.tenors):
            assert [str(c) for c in table.get_row_at(i)] == tenor_cells(t)
        plot = screen.query_one("#track-plot")
        assert "30-day tenor" in plot._spec.title
        await pilot.press("down")
        await pilot.pause()
        assert "61-day tenor" in plot._spec.title
        await pilot.press("escape")
        await pilot.pause()
        assert not isinstance(app.screen, TrackScreen)
