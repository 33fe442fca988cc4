"""Save an SVG screenshot of each workbench view on the demo into docs/screenshots/.

    .venv/bin/python tests/tui/make_screenshots.py

Not a test (pytest collects test_*.py only); run it after changing the screens.
"""
from __future__ import annotations

import asyncio
import os
import tempfile
from pathlib import Path

# the screenshots show the defaults, whatever the user's saved settings say
os.environ["OPTBENCH_CONFIG_DIR"] = tempfile.mkdtemp(prefix="optbench-screenshots-")

from optbench.tui.app import make_app
from optbench.tui.screens.workbench import VIEWS

from tui_helpers import ROOT, SIZE, settle

OUT = ROOT / "docs" / "screenshots"


async def main() -> None:
    OUT.mkdir(parents=True, exist_ok=True)
    app = make_app()
    async with app.run_test(size=SIZE) as pilot:
        await settle(app, pilot)
        for view_id, key, title in VIEWS:
            await pilot.press(key)
            await pilot.pause(0.2)
            path = app.save_screenshot(filename=f"{view_id}.svg", path=str(OUT))
            print(f"{title}: {Path(path).relative_to(ROOT)}")
        await pilot.press("question_mark")
        await pilot.pause(0.2)
        print("Help:", Path(app.save_screenshot(filename="help.svg", path=str(OUT))).relative_to(ROOT))
        await pilot.press("escape", "m")
        await pilot.pause(0.2)
        print("Model & market:", Path(app.save_screenshot(filename="settings.svg",
                                                          path=str(OUT))).relative_to(ROOT))
    await narrow_screenshots()
    await universe_screenshot()


async def narrow_screenshots() -> None:
    """The overview and the hedge planner on an 80 x 24 terminal."""
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        for view_id, key in (("overview", "1"), ("hedge", "5")):
            await pilot.press(key)
            await pilot.pause(0.2)
            path = app.save_screenshot(filename=f"{view_id}-80x24.svg", path=str(OUT))
            print(f"{view_id} at 80x24: {Path(path).relative_to(ROOT)}")


async def universe_screenshot() -> None:
    """The universe screen on two invented copies of the demo (ZPHA, ZPHB)."""
    import shutil
    import tempfile

    from optbench.tui.dialogs.universe import UniverseScreen
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        for code in ("ZPHA", "ZPHB"):
            shutil.copytree(ROOT / "chains" / "ZPHX", root / code)
            meta = (root / code / "meta.toml").read_text()
            (root / code / "meta.toml").write_text(meta.replace('code = "ZPHX"',
                                                                f'code = "{code}"'))
        app = make_app(root / "ZPHA", universe=root, workers=1)
        async with app.run_test(size=SIZE) as pilot:
            await settle(app, pilot)
            while not (isinstance(app.screen, UniverseScreen) and app.screen.result):
                await pilot.pause(0.1)
            await pilot.pause(0.2)
            path = app.save_screenshot(filename="universe.svg", path=str(OUT))
            print("Universe:", Path(path).relative_to(ROOT))


if __name__ == "__main__":
    asyncio.run(main())
