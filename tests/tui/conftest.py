"""Shared helpers of the workbench tests: the demo scenario and a settled app."""
from __future__ import annotations

from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "chains" / "ZPHX"
SIZE = (120, 40)


@pytest.fixture
def demo() -> Path:
    if not (DEMO / "chain.csv").exists():
        pytest.fail("the bundled demo chains/ZPHX is missing (run `optbench demo`)")
    return DEMO


async def settle(app, pilot) -> None:
    """Wait for every worker (compute, hedge, export) and for the screen to refresh."""
    for _ in range(4):
        await app.workers.wait_for_complete()
        await pilot.pause()
