"""The first view (the overview's numbers and the status "ready") as plain data: the
first run sends it ahead of the result objects, the screen process shows it before it
has imported numpy, pandas or the core, and its numbers are the comparison's.

Outside reference for the end-to-end check: ``optbench compare --format json`` on the
same demo (the command line's own JSON, docs/schema.md), read in a separate process.
"""
from __future__ import annotations

import io
import json
import os
import pickle
import re
import shutil
import subprocess
import sys
import time
from pathlib import Path

import pytest

from optbench.tui import firstrun, firstview, session

from tui_helpers import ROOT, demo


@pytest.fixture(scope="module")
def results():
    inputs, saved = session.build_inputs(demo(), model="garch", dist="normal")
    scenario = session.load(inputs)
    comparison = session.run_compare(inputs, scenario)
    headline = session.headline_hedge(comparison, inputs.settings, saved.planner)
    return inputs, saved.planner, comparison, headline


def test_first_view_is_plain_data_with_the_comparisons_numbers(results):
    _, _, c, h = results
    view = firstview.first_view(c, h)
    assert firstview.is_plain(view)
    assert view["overview"] == firstview.overview_content(c, h, pending=False, checking=True)
    # one row per expiry, its IV and forecast in percentage points to one decimal
    rows = view["overview"]["rows"]
    assert [r[0] for r in rows] == [e.expiry.isoformat() for e in c.expiries]
    for row, e in zip(rows, c.expiries):
        assert row[2] == f"{100 * e.atm_iv:.1f}" and row[3] == f"{100 * e.forecast_vol:.1f}"
    assert view["status"].startswith(firstview.ready_text(c))
    assert view["status"].startswith("ready")


def test_first_view_unpickles_without_numpy_pandas_or_the_core(results):
    _, _, c, h = results
    blob = pickle.dumps(("first_view", firstview.first_view(c, h)))
    code = ("import pickle, sys; event = pickle.loads(sys.stdin.buffer.read()); "
            "heavy = [m for m in ('numpy', 'pandas', 'optbench.analysis', 'textual') "
            "if m in sys.modules]; print(event[0], heavy)")
    out = subprocess.run([sys.executable, "-c", code], input=blob, capture_output=True,
                         cwd=ROOT, timeout=60)
    assert out.returncode == 0, out.stderr.decode()
    assert out.stdout.decode().strip() == "first_view []"


def test_sender_sends_the_first_view_ahead_of_the_result_objects(results):
    inputs, planner, c, h = results
    pipe = io.BytesIO()
    sender = firstrun.Sender(pipe)
    session.run_steps(inputs, planner, sender)
    pipe.seek(0)
    frames = []
    while (frame := firstrun.read_frame(pipe)) is not None:
        frames.append(frame)
    kinds = [f.kind for f in frames]
    assert set(kinds[:kinds.index("first_view")]) == {"progress"}, kinds
    assert kinds[kinds.index("first_view"):] == ["first_view", "loaded", "computed",
                                                 "headline", "checked"], kinds
    events = {f.kind: pickle.loads(f.data) for f in frames}
    sent = events["first_view"][1]
    # the same function on the objects that follow it gives the same plain data
    assert sent == firstview.first_view(events["computed"][1], events["headline"][1])
    assert sent == firstview.first_view(c, h)


_ROW = re.compile(r"(\d{4}-\d{2}-\d{2})\s+(\d+)\s+(\d+\.\d)\s+(\d+\.\d)")


@pytest.mark.slow
@pytest.mark.skipif(shutil.which("tmux") is None or not sys.platform.startswith("linux"),
                    reason="needs tmux (a real terminal) on Linux")
@pytest.mark.parametrize("early", ["1", "0"], ids=["early-start", "ordinary-start"])
def test_workbench_in_a_terminal_shows_the_compare_numbers(tmp_path, early):
    """``optbench`` in a real terminal (tmux): the overview's rows and "ready" come on
    screen, with the ATM IV and forecast that ``optbench compare`` gives, and q quits."""
    exe = Path(sys.executable).with_name("optbench")
    if not exe.exists():
        pytest.skip("the optbench command is not installed next to this interpreter")
    socket, name = f"optbench-test-{os.getpid()}-{early}", "workbench"
    tmux = ["tmux", "-L", socket]
    env = f"OPTBENCH_CONFIG_DIR={tmp_path / 'config'} OPTBENCH_EARLY={early}"
    subprocess.run(tmux + ["new-session", "-d", "-s", name, "-x", "120", "-y", "40",
                           f"cd {ROOT} && {env} {exe}; sleep 30"], check=True)
    screen = ""
    try:
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline:
            screen = subprocess.run(tmux + ["capture-pane", "-p", "-t", name],
                                    capture_output=True, text=True).stdout
            if _ROW.search(screen) and re.search(r"\bready\b", screen):
                break
            time.sleep(0.1)
        else:
            pytest.fail(f"no numbers and 'ready' on screen:\n{screen}")
        shown = {m.group(1): (m.group(3), m.group(4)) for m in _ROW.finditer(screen)}
        subprocess.run(tmux + ["send-keys", "-t", name, "q"], check=True)
        quit_by = time.monotonic() + 30
        while time.monotonic() < quit_by:   # the workbench has ended: the shell sleeps
            pane = subprocess.run(tmux + ["list-panes", "-t", name, "-F",
                                          "#{pane_current_command}"],
                                  capture_output=True, text=True).stdout.strip()
            if pane == "sleep":
                break
            time.sleep(0.1)
        else:
            pytest.fail(f"the workbench did not quit on q (pane runs {pane!r})")
    finally:
        subprocess.run(tmux + ["kill-server"], capture_output=True)
    out = subprocess.run([str(exe), "compare", str(demo()), "--format", "json"],
                         capture_output=True, text=True, cwd=ROOT, timeout=300,
                         env={**os.environ, "OPTBENCH_CONFIG_DIR": str(tmp_path / "config")})
    assert out.returncode == 0, out.stderr
    reference = {e["expiry"]: (f"{100 * e['atm_iv']:.1f}", f"{100 * e['forecast_vol']:.1f}")
                 for e in json.loads(out.stdout)["expiries"]}
    assert shown, screen
    for expiry, numbers in shown.items():
        assert numbers == reference[expiry], (expiry, numbers, reference[expiry])
