"""The universe screen: the workbench screens a folder of scenario folders, shows the
rows of ``optbench screen`` (the same numbers), and opens any row's underlying in its
full views; a broken underlying stays a row with its reason."""
from __future__ import annotations

import asyncio
import shutil

import pytest

from optbench.screening.screen import screen
from optbench.tui.app import make_app
from optbench.tui.dialogs.universe import UniverseScreen

from tui_helpers import SIZE, demo, run, settle

PATHS = 500


def _universe(root):
    for code in ("ZPHA", "ZPHB"):
        shutil.copytree(demo(), root / code)
        meta = (root / code / "meta.toml").read_text()
        (root / code / "meta.toml").write_text(meta.replace('code = "ZPHX"', f'code = "{code}"'))
    (root / "BRKN").mkdir()
    (root / "BRKN" / "chain.csv").write_text("not a chain\n")
    shutil.copy(demo() / "history.csv", root / "BRKN" / "history.csv")
    return root


@pytest.mark.slow
def test_universe_rows_open_in_the_full_views(tmp_path):
    run(_universe_rows_open(tmp_path))


async def _universe_rows_open(tmp_path):
    universe = _universe(tmp_path)
    app = make_app(universe / "ZPHA", universe=universe, workers=1, hedge_paths=PATHS)
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        dialog = app.screen
        assert isinstance(dialog, UniverseScreen)
        for _ in range(600):
            if dialog.result is not None:
                break
            await pilot.pause(0.1)
        result = dialog.result
        assert result is not None
        # the rows are the screen's own: same codes, same ranking, same numbers
        reference = screen(universe, workers=1)
        assert [(r["code"], r["tenor_days"]) for r in result.rows] == \
               [(r["code"], r["tenor_days"]) for r in reference.rows]
        assert [r["atm_iv"] for r in result.rows] == [r["atm_iv"] for r in reference.rows]
        table = dialog.query_one("#universe-table")
        assert table.row_count == len(result.rows) == 9
        assert [f["code"] for f in result.failures] == ["BRKN"]
        # Enter on the second row opens that underlying in every view
        table.focus()
        table.move_cursor(row=1)
        chosen = dialog.selected_row()
        await pilot.press("enter")
        await settle(app, pilot)
        assert not isinstance(app.screen, UniverseScreen)
        assert app.inputs.source.chain == universe / chosen["code"]
        row = next(e for e in app.comparison.expiries if e.expiry.isoformat() == chosen["expiry"])
        assert row.atm_iv == pytest.approx(chosen["atm_iv"], rel=1e-12)
        # u brings the same screen back without recomputing; a broken row says why
        await pilot.press("u")
        await pilot.pause()
        again = app.screen
        assert isinstance(again, UniverseScreen) and again.result is result
        broken = next(i for i, r in enumerate(result.rows) if r["code"] == "BRKN")
        again.query_one("#universe-table").move_cursor(row=broken)
        await pilot.press("enter")
        await pilot.pause()
        assert isinstance(app.screen, UniverseScreen)      # stays: nothing to open
        await pilot.press("escape")
        await pilot.pause()
        assert not isinstance(app.screen, UniverseScreen)


def test_open_universe_errors_are_one_line(tmp_path):
    import subprocess
    import sys
    for folder, needle in ((tmp_path / "nowhere", "no such folder"),
                           (tmp_path, "no scenario folders")):
        out = subprocess.run([sys.executable, "-m", "optbench", "open", "--universe",
                              str(folder)], capture_output=True, text=True, timeout=60)
        assert out.returncode == 2 and needle in out.stderr
        assert len(out.stderr.strip().splitlines()) == 1


def test_smile_view_draws_the_fitted_curve_from_the_comparison():
    # the comparison carries the fitted curve; the view draws it as given, and the
    # curve passes through the comparison's own ATM implied vol at the forward
    import numpy as np

    from optbench.analysis.compare import compare
    from optbench.tui.views.smile import fitted_curve, smile_plot
    c = compare(demo(), n_paths=PATHS)
    for row in c.expiries:
        curve = fitted_curve(row)
        assert curve is not None
        strikes, vols = curve
        assert np.interp(row.forward, strikes, vols) == pytest.approx(row.atm_iv, abs=2e-4)
        names = [s.label for s in smile_plot(c, row).series]
        assert any(n.startswith("fitted smile") for n in names)


async def _screen_inside_the_workbench(universe, **options):
    """Run the universe screen from inside the running workbench (stdout and stderr
    captured by the UI, as in a terminal) and return its result."""
    app = make_app(universe / "ZPHA", universe=universe, hedge_paths=PATHS, **options)
    async with app.run_test(size=SIZE) as pilot:
        for _ in range(1200):
            if isinstance(app.screen, UniverseScreen) and app.screen.result is not None:
                break
            status = app.screen.query("#universe-status")
            if status and "✗" in str(status.first().content):
                pytest.fail(str(status.first().content))
            await pilot.pause(0.1)
        dialog = app.screen
        assert isinstance(dialog, UniverseScreen) and dialog.result is not None
        return dialog.result


def _two_underlyings(root):
    for code in ("ZPHA", "ZPHB"):
        shutil.copytree(demo(), root / code)
        meta = (root / code / "meta.toml").read_text()
        (root / code / "meta.toml").write_text(meta.replace('code = "ZPHX"', f'code = "{code}"'))
    return root


@pytest.mark.slow
def test_universe_screen_runs_two_local_processes_inside_the_workbench(tmp_path):
    # launching worker processes while the UI holds stdout/stderr used to fail with
    # "bad value(s) in fds_to_keep"; the rows must equal the in-process screen's
    universe = _two_underlyings(tmp_path)
    result = asyncio.run(_screen_inside_the_workbench(universe, workers=2))
    reference = screen(universe, workers=1)
    assert result.failures == () and len(result.rows) == len(reference.rows) == 6
    assert [(r["code"], r["tenor_days"], r["atm_iv"]) for r in result.rows] == \
           [(r["code"], r["tenor_days"], r["atm_iv"]) for r in reference.rows]


@pytest.mark.slow
def test_universe_screen_runs_on_a_dask_cluster_from_the_workbench(tmp_path):
    from distributed import LocalCluster
    universe = _two_underlyings(tmp_path)
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                      host="127.0.0.1", dashboard_address=None) as cluster:
        result = asyncio.run(_screen_inside_the_workbench(universe,
                                                          scheduler=cluster.scheduler_address))
    assert result.scheduler is not None and result.failures == ()
    reference = screen(universe, workers=1)
    assert [(r["code"], r["tenor_days"], r["atm_iv"]) for r in result.rows] == \
           [(r["code"], r["tenor_days"], r["atm_iv"]) for r in reference.rows]


def _characters(root):
    """Invented variants of the demo: calm, trending, turbulent and wild histories
    (the demo's returns rescaled and shifted; the chain is the demo's)."""
    import numpy as np
    import pandas as pd
    for code, scale, drift in (("CALM", 0.2, 0.0), ("TREN", 1.0, 0.004),
                               ("TURB", 4.0, 0.0), ("WILD", 8.0, 0.0)):
        folder = root / code
        shutil.copytree(demo(), folder)
        h = pd.read_csv(folder / "history.csv")
        r = np.diff(np.log(h["close"].to_numpy()))
        r = (r - r.mean()) * scale + drift
        close = h["close"].iloc[-1] * np.exp(np.concatenate([[0.0], np.cumsum(r)]) - r.sum())
        for col in ("close", "open", "high", "low"):
            if col in h:
                h[col] = close
        h.to_csv(folder / "history.csv", index=False)
        meta = (folder / "meta.toml").read_text()
        (folder / "meta.toml").write_text(meta.replace('code = "ZPHX"', f'code = "{code}"'))
    return root


@pytest.mark.slow
def test_screen_raises_no_numpy_warnings_on_extreme_histories(tmp_path):
    # every numpy RuntimeWarning is an error here: an overflow or invalid value in the
    # fit, the simulation or the hedge would turn its underlying into a failed row
    import warnings
    universe = _characters(tmp_path)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for model in ("auto", "egarch"):
            result = screen(universe, workers=1, model=model, n_paths=PATHS)
            assert result.failures == (), result.failures
            assert all(r.get("error") in (None, "") for r in result.rows)
