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


def test_ctrl_r_records_the_comparison_on_screen(tmp_path, monkeypatch):
    """The workbench's record action appends the same rows as ``compare --record``:
    the store round-trips each expiry's verdict and ATM vol."""
    store = tmp_path / "records.sqlite"
    monkeypatch.setenv("OPTBENCH_RECORD_STORE", str(store))
    run(_record(store))


async def _record(store):
    from optbench.track.store import read_records

    app = make_app(demo(), hedge_paths=2000)
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        await pilot.press("ctrl+r")
        await app.workers.wait_for_complete()
        await pilot.pause()
        heads, rows = read_records(store)
        c = app.comparison
        assert len(heads) == 1 and heads.loc[0, "underlying"] == c.underlying
        assert len(rows) == len(c.expiries)
        assert list(rows["verdict"]) == [e.verdict for e in sorted(c.expiries,
                                                                   key=lambda e: e.expiry)]
        assert rows["atm_iv"].tolist() == [e.atm_iv for e in sorted(c.expiries,
                                                                    key=lambda e: e.expiry)]
