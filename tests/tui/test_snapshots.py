"""Snapshot tests of every view and dialog on the bundled demo at three terminal sizes:
80 x 24 (the smallest the workbench is laid out for), 120 x 40 and 200 x 60 (textual
and pytest-textual-snapshot are pinned in pyproject.toml). Re-record after a
deliberate change of the screens with ``pytest tests/tui --snapshot-update``.

The comparison, its model check and the hedges are computed once per test process
and reused by every snapshot (the same inputs give the same result objects), so the
36 pictures cost about one computation each for drawing, not for the model.
"""
from __future__ import annotations

import shutil
import tempfile
from pathlib import Path

import pytest

from optbench.tui import session
from optbench.tui.app import make_app

from tui_helpers import demo, settle

SIZES = {"80x24": (80, 24), "120x40": (120, 40), "200x60": (200, 60)}

#: (name, keys pressed after the first run has settled)
SCREENS = (
    ("overview", ("1",)), ("term", ("2",)), ("smile", ("3",)), ("richcheap", ("4",)),
    ("hedge", ("5",)), ("model", ("6",)), ("quality", ("7",)),
    ("settings", ("m",)), ("export", ("4", "e")), ("help", ("question_mark",)),
    ("universe", ()),
)

_CACHE: dict = {}


def _memo(name, fn, key_of):
    def wrapped(*args, **kwargs):
        key = (name, key_of(*args, **kwargs))
        if key not in _CACHE:
            _CACHE[key] = fn(*args, **kwargs)
        return _CACHE[key]
    return wrapped


@pytest.fixture
def computed_once(monkeypatch):
    """The session's computations, remembered by their inputs."""
    monkeypatch.setattr(session, "run_compare", _memo(
        "compare", session.run_compare, lambda inputs, scenario, progress=None: inputs))
    monkeypatch.setattr(session, "run_backtest", _memo(
        "backtest", session.run_backtest, lambda scenario, comparison: id(comparison)))
    monkeypatch.setattr(session, "headline_hedge", _memo(
        "headline", session.headline_hedge,
        lambda comparison, settings=None, planner=None: (id(comparison), settings, planner)))
    monkeypatch.setattr(session, "run_hedge", _memo(
        "hedge", session.run_hedge,
        lambda comparison, **kw: (id(comparison), tuple(sorted(kw.items())))))


def _universe() -> Path:
    """Two invented copies of the demo (ZPHA, ZPHB) at a fixed path, so the screen's
    title is the same in every run."""
    root = Path(tempfile.gettempdir()) / "optbench-snapshot-universe"
    for code in ("ZPHA", "ZPHB"):
        folder = root / code
        if not (folder / "chain.csv").exists():
            shutil.copytree(demo(), folder, dirs_exist_ok=True)
            meta = (folder / "meta.toml").read_text()
            (folder / "meta.toml").write_text(meta.replace('code = "ZPHX"', f'code = "{code}"'))
    return root


def _screened(root: Path):
    key = ("screen", str(root))
    if key not in _CACHE:
        from optbench.screening.screen import screen
        _CACHE[key] = screen(root, workers=1, n_paths=500)
    return _CACHE[key]


def _app(name: str):
    demo()
    if name != "universe":
        return make_app()
    root = _universe()
    app = make_app(root / "ZPHA", universe=root, workers=1)
    app.universe_result = _screened(root)
    return app


async def _settled(pilot) -> None:
    await settle(pilot.app, pilot)
    await pilot.pause(0.1)


@pytest.mark.slow
@pytest.mark.parametrize("size", list(SIZES))
@pytest.mark.parametrize("name,keys", SCREENS, ids=[s[0] for s in SCREENS])
def test_snapshot(snap_compare, computed_once, name, keys, size):
    assert snap_compare(_app(name), press=(*keys, "_"), terminal_size=SIZES[size],
                        run_before=_settled), f"the {name} screen at {size} changed"
