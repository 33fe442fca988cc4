"""Snapshot tests of the main views on the bundled demo at 120 x 40 (textual and
pytest-textual-snapshot are pinned in pyproject.toml). Re-record after a deliberate
change of the screens with ``pytest tests/tui --snapshot-update``."""
from __future__ import annotations

import pytest

from optbench.tui.app import make_app

from tui_helpers import SIZE, demo, settle


async def _settled(pilot) -> None:
    await settle(pilot.app, pilot)


def _snap(snap_compare, keys: tuple[str, ...]) -> bool:
    demo()
    return snap_compare(make_app(), press=keys, terminal_size=SIZE, run_before=_settled)


@pytest.mark.slow
@pytest.mark.parametrize("view,keys", [
    ("overview", ("1",)),
    ("term", ("2",)),
    ("richcheap", ("4",)),
    ("hedge", ("5",)),
    ("model", ("6",)),
])
def test_view_snapshot(snap_compare, view, keys):
    assert _snap(snap_compare, keys), f"the {view} view changed"
