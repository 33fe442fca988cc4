"""The universe screen's table is exported from the workbench with the writers of
``optbench screen``: the file reads back to the screen's own rows, and a file of the
screened universe is never overwritten."""
from __future__ import annotations

import shutil

import pandas as pd
import pytest
from textual.widgets import Input, Select

from optbench.screening.screen import screen
from optbench.tui.app import make_app
from optbench.tui.dialogs.universe import UniverseScreen

from tui_helpers import SIZE, demo, run, settle


def _universe(root):
    for code in ("ZPHA", "ZPHB"):
        shutil.copytree(demo(), root / code)
        meta = (root / code / "meta.toml").read_text()
        (root / code / "meta.toml").write_text(meta.replace('code = "ZPHX"', f'code = "{code}"'))
    return root


@pytest.mark.slow
def test_the_universe_table_is_exported_from_the_workbench(tmp_path):
    run(_export(tmp_path))


async def _export_to(app, pilot, dialog, path, fmt):
    await pilot.press("e")
    await pilot.pause()
    app.screen.query_one("#export-format", Select).value = fmt
    await pilot.pause()
    app.screen.query_one("#export-path", Input).value = str(path)
    await pilot.press("ctrl+s")
    await pilot.pause()
    await app.workers.wait_for_complete()
    await pilot.pause()
    assert app.screen is dialog


async def _export(tmp_path):
    universe = _universe(tmp_path / "universe")
    result = screen(universe, workers=1, n_paths=200, tenors=(30, 91))
    app = make_app(universe / "ZPHA", universe=universe, workers=1, hedge_paths=200)
    app.universe_result = result
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        dialog = app.screen
        assert isinstance(dialog, UniverseScreen) and dialog.result is result
        target = tmp_path / "table.xlsx"
        await _export_to(app, pilot, dialog, target, "xlsx")
        assert dialog.last_export == target
        sheet = pd.read_excel(target)                  # default settings: first sheet
        assert sheet["code"].tolist() == [r["code"] for r in result.rows]
        assert sheet["atm_iv"].tolist() == pytest.approx([r["atm_iv"] for r in result.rows])
        notes = pd.read_excel(target, sheet_name="Notes")
        assert result.caution in notes["value"].tolist()
        md = tmp_path / "table.md"
        await _export_to(app, pilot, dialog, md, "md")
        assert result.caution in md.read_text()
        # a file of the screened universe is refused and left as it was
        meta = universe / "ZPHA" / "meta.toml"
        before = meta.read_bytes()
        await _export_to(app, pilot, dialog, meta, "csv")
        assert meta.read_bytes() == before
        assert any("elsewhere" in str(n.message) for n in app._notifications)
