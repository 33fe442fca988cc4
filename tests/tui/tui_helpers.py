"""Shared helpers of the workbench tests: the demo scenario, a settled app, and a
runner for the async pilot scripts (the suite has no asyncio plugin)."""
from __future__ import annotations

import asyncio
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "chains" / "ZPHX"
SIZE = (120, 40)


def demo() -> Path:
    if not (DEMO / "chain.csv").exists():
        pytest.fail("the bundled demo chains/ZPHX is missing (run `optbench demo`)")
    return DEMO


def run(coro) -> None:
    """Run one async pilot script to the end."""
    asyncio.run(coro)


async def settle(app, pilot, timeout: float = 180.0) -> None:
    """Wait until the run has ended (checked out of sample, or failed), then for every
    other worker (hedge, export) and for the screen to refresh."""
    import time

    from textual.worker import WorkerCancelled
    deadline = time.monotonic() + timeout
    while not (app.checked or app.error) and time.monotonic() < deadline:
        await pilot.pause(0.05)
    for _ in range(4):
        try:
            await app.workers.wait_for_complete()
        except WorkerCancelled:  # stale work cancelled on purpose; wait for the rest
            continue
        await pilot.pause()


def text_of(widget) -> str:
    """What a Static shows, as plain text (rich tables rendered at 200 columns)."""
    import io

    from rich.console import Console
    console = Console(width=200, file=io.StringIO(), color_system=None)
    console.print(widget.content)
    return console.file.getvalue()
