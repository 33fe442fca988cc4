"""The screen on a real Dask LocalCluster (loopback, one thread per worker process)
and in a local process pool when a worker process is killed mid-screen: every
underlying still gets its rows, equal to the in-process screen's, and the rows say
how many attempts they took. Tasks carry folder paths, not data; a worker that does
not see a folder says so for that underlying.

Outside checks: the payload a task sends to the cluster is measured with
cloudpickle (the serializer Dask uses) against the size of the files it names; the
worker is killed with SIGKILL from outside the runner.
"""
from __future__ import annotations

import json
import multiprocessing
import os
import shutil
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from optbench.screening.rows import ScreenTask
from optbench.screening.runner import DASK_LOST, POOL_LOST, run_outcomes
from optbench.screening.screen import screen
from optbench.screening.tasks import screen_task

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"
PATHS = 300
CODES = ("ZPA1", "ZPA2", "ZPA3", "ZPA4", "ZPA5")
TRIES = ("attempts", "retry_reasons")


@pytest.fixture(scope="module")
def universe(tmp_path_factory) -> Path:
    root = tmp_path_factory.mktemp("universe")
    for code in CODES:
        shutil.copytree(DEMO, root / code, ignore=shutil.ignore_patterns("*iv_history*",
                                                                          "holdings*"))
        meta = (root / code / "meta.toml").read_text()
        (root / code / "meta.toml").write_text(meta.replace('code = "ZPHX"',
                                                            f'code = "{code}"'))
    broken = root / "BRKN"
    broken.mkdir()
    (broken / "chain.csv").write_text("this is not an option chain\n")
    shutil.copy(DEMO / "history.csv", broken / "history.csv")
    return root


@pytest.fixture(scope="module")
def here(universe):
    return screen(universe, workers=1, n_paths=PATHS, tenors=(91,))


def _numbers(result) -> list[dict]:
    return [{k: v for k, v in r.items() if k not in TRIES} for r in result.rows]


def _killer(pids):
    """A progress callback that kills one worker process (SIGKILL) after the first
    underlying is done, while the others are in flight."""
    state = {"killed": None}

    def progress(done: int, total: int) -> None:
        if state["killed"] is None and done >= 1:
            pid = pids()[0]
            os.kill(pid, signal.SIGKILL)
            state["killed"] = pid
    return progress, state


def test_rows_say_their_attempts(here):
    assert all(r["attempts"] == 1 and r["retry_reasons"] == "" for r in here.rows)
    (failure,) = here.failures
    assert failure["code"] == "BRKN" and failure["attempts"] == 1
    assert failure["transient"] is False and failure["retry_reasons"] == []


def test_local_pool_survives_a_worker_killed_mid_screen(universe, here):
    progress, state = _killer(lambda: [p.pid for p in multiprocessing.active_children()])
    result = screen(universe, workers=2, n_paths=PATHS, tenors=(91,), progress=progress)
    assert state["killed"] is not None
    assert _numbers(result) == _numbers(here)
    assert [f["code"] for f in result.failures] == ["BRKN"]
    retried = [r for r in result.rows if r["attempts"] > 1]
    assert retried, "the killed worker had an underlying in flight"
    assert all(POOL_LOST in r["retry_reasons"] for r in retried)


@pytest.mark.slow
def test_dask_survives_a_worker_killed_mid_screen(universe, here, monkeypatch):
    distributed = pytest.importorskip("distributed")
    import cloudpickle
    sent: list[int] = []
    submit_many = distributed.Client.map

    def measured_map(self, func, *iterables, **kwargs):
        # what each task carries to the cluster: the function and its arguments
        args = list(zip(*iterables))
        sent.extend(len(cloudpickle.dumps((func, a))) for a in args)
        return submit_many(self, func, *iterables, **kwargs)

    monkeypatch.setattr(distributed.Client, "map", measured_map)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        with distributed.Client(cluster) as watcher:
            pid_of = watcher.run(os.getpid)            # {worker address: pid}

            def busiest():
                # the worker the scheduler has the most tasks on (running or queued
                # there), so the kill always lands on work in hand: rows are quick,
                # and a worker that already finished its share would lose nothing
                load = watcher.processing()
                return [pid_of[a] for a in sorted(pid_of, key=lambda a: -len(load.get(a, ())))]
            progress, state = _killer(busiest)
            result = screen(universe, scheduler=cluster.scheduler_address, n_paths=PATHS,
                            tenors=(91,), progress=progress)
    assert state["killed"] is not None
    assert _numbers(result) == _numbers(here)
    assert [f["code"] for f in result.failures] == ["BRKN"]
    retried = [r for r in result.rows if r["attempts"] > 1]
    assert retried, "the killed worker had an underlying on it"
    assert all(DASK_LOST in r["retry_reasons"] for r in retried)
    # tasks carry the folder's path and the options, not the chain and history
    data = sum(f.stat().st_size for f in (universe / CODES[0]).iterdir())
    assert len(sent) == len(CODES) + 1
    assert max(sent) < 2_000 < data / 50, (max(sent), data)


def test_task_payload_is_a_path_not_data(universe):
    import cloudpickle
    task = ScreenTask(folder=str(universe / CODES[0]))
    payload = len(cloudpickle.dumps((screen_task, task)))
    data = sum(f.stat().st_size for f in (universe / CODES[0]).iterdir())
    assert payload < 2_000 < data / 50, (payload, data)


def test_folder_a_worker_cannot_see_is_one_line_per_underlying(tmp_path):
    gone = str(tmp_path / "mounted-elsewhere" / "ZPA9")
    (outcome,) = run_outcomes(screen_task, [ScreenTask(folder=gone)], workers=1)
    assert outcome.failed and outcome.attempts == 1 and not outcome.value.transient
    reason = outcome.value.reason
    assert reason.startswith(gone + ": folder not found on worker ")
    assert "same path" in reason and "\n" not in reason


def test_command_line_retries_option(universe, tmp_path):
    out = subprocess.run([sys.executable, "-m", "optbench", "screen", str(universe),
                          "--workers", "1", "--paths", str(PATHS), "--tenors", "91",
                          "--retries", "0", "--format", "json"],
                         capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    doc = json.loads(out.stdout)
    assert all(r["attempts"] == 1 for r in doc["rows"])
    assert doc["failures"][0]["attempts"] == 1 and doc["failures"][0]["transient"] is False
    bad = subprocess.run([sys.executable, "-m", "optbench", "screen", str(universe),
                          "--retries", "-1"], capture_output=True, text=True)
    assert bad.returncode == 2 and "--retries" in bad.stderr
    assert len(bad.stderr.strip().splitlines()) == 1


def test_views_say_how_many_attempts(here):
    import dataclasses

    from optbench.report.notes import screen_notes
    from optbench.report.screen import screen_markdown, screen_table
    failure = dict(here.failures[0], attempts=3, transient=True,
                   retry_reasons=[POOL_LOST, POOL_LOST])
    rows = tuple(dict(r, attempts=2, retry_reasons=DASK_LOST) if r["code"] == "ZPA2"
                 else r for r in here.rows)
    retried = dataclasses.replace(here, failures=(failure,), rows=rows)
    text = screen_table(retried, width=200)
    assert f"(after 3 attempts: {POOL_LOST}; {POOL_LOST})" in " ".join(text.split())
    assert f"Screened after a retry: ZPA2 (2 attempts: {DASK_LOST})." in " ".join(
        text.split())
    assert "after 3 attempts" in screen_markdown(retried)
    assert screen_notes(retried, "t")["failures"][0].startswith("BRKN: ")
    assert "after 3 attempts" in screen_notes(retried, "t")["failures"][0]
