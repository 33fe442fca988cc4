"""The workbench's first run (``optbench open`` starts it before the screen exists, in
a forked process on Linux): the numbers it hands over are those the session's own
functions compute in this process for the same inputs, in the order the screen
needs them, and a cancelled run stops its process."""
from __future__ import annotations

import json
import os
import sys
import time

import pytest

from optbench.tui import firstrun, session

from tui_helpers import demo

FORKS = [pytest.param(True, marks=pytest.mark.skipif(
    not sys.platform.startswith("linux"), reason="the forked first run is Linux only")),
    False]


def _inputs():
    inputs, saved = session.build_inputs(demo(), model="garch", dist="normal")
    return inputs, saved.planner


def _collect(run) -> list[tuple]:
    events: list[tuple] = []
    run.relay(events.append)
    return events


def _json(obj) -> str:
    return json.dumps(obj, sort_keys=True, default=str)


@pytest.mark.slow
@pytest.mark.parametrize("fork", FORKS, ids=["fork", "thread"])
def test_first_run_hands_over_the_session_numbers(fork):
    inputs, planner = _inputs()
    events = _collect(firstrun.start(inputs, planner, fork=fork))
    kinds = [e[0] for e in events]
    # the overview's numbers (comparison, then its headline) come before the check
    assert kinds[0] == "progress" and "loaded" in kinds
    assert kinds[-3:] == ["computed", "headline", "checked"], kinds
    got = {e[0]: e for e in events}
    # the same inputs computed here, in this process, by the session's functions
    scenario = session.load(inputs)
    here = session.run_compare(inputs, scenario)
    headline = session.headline_hedge(here, inputs.settings, planner)
    checked = session.run_backtest(scenario, here)
    comparison = got["computed"][1]
    assert _json(comparison.to_dict(strikes=True, history=True)) == \
        _json(here.to_dict(strikes=True, history=True))
    assert _json(got["headline"][1].to_dict()) == _json(headline.to_dict())
    assert _json(got["checked"][1].backtest) == _json(checked.backtest)
    # the checked comparison keeps the fitted model of the one on screen (the planner's
    # estimates are matched to the run by it), with its standard errors
    assert got["checked"][1].fit is comparison.fit
    assert comparison.fit.std_errors == here.fit.std_errors
    # the fitted model still simulates (the hedge planner prices with it)
    again = session.run_hedge(comparison, n_paths=2000, seed=3, days=91, floor=0.9,
                              structure="put", portfolio_value=1e7, beta=1.0)
    assert _json(again.to_dict()) == _json(session.run_hedge(
        here, n_paths=2000, seed=3, days=91, floor=0.9, structure="put",
        portfolio_value=1e7, beta=1.0).to_dict())


@pytest.mark.parametrize("fork", FORKS, ids=["fork", "thread"])
def test_bad_input_ends_the_first_run_with_one_line(tmp_path, fork):
    inputs, saved = session.build_inputs(tmp_path / "missing")
    events = _collect(firstrun.start(inputs, saved.planner, fork=fork))
    assert events[-1][:2] == ("failed", "open")
    assert events[-1][2] == f"{tmp_path / 'missing'}: no such file or folder"


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="forked run: Linux only")
def test_cancelled_first_run_stops_its_process():
    inputs, planner = _inputs()
    run = firstrun.start(inputs, planner, fork=True)
    assert run.pid is not None
    events: list[tuple] = []
    run.relay(events.append, cancelled=lambda: True)
    assert events == []
    deadline = time.monotonic() + 20
    while time.monotonic() < deadline:
        try:
            os.kill(run.pid, 0)
        except ProcessLookupError:
            break   # stopped and reaped
        time.sleep(0.05)
    else:
        pytest.fail("the cancelled first run's process is still running")
