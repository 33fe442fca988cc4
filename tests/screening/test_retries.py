"""Retries per task: a lost worker process (killed with SIGKILL, in a local pool and
on a real Dask LocalCluster on loopback) and a transient I/O error are tried again a
bounded number of times; a deterministic error (a broken input) is not; every outcome
says how many attempts it took and why the earlier ones were lost.

The attempts the runner reports are checked against an outside count: each start of
the task function appends one byte to a marker file on the shared temporary folder,
so the file's length is the number of times the function really began.
"""
from __future__ import annotations

import errno
import os
import signal
import sys
from pathlib import Path

import pytest

from optbench.errors import InputError
from optbench.screening.runner import (DASK_LOST, POOL_LOST, TaskFailure, is_transient,
                                       run_outcomes)


def flaky(item):
    """A task that fails as its ``kind`` says; each start leaves a byte in a marker."""
    folder, name, kind = item
    marker = Path(folder) / name
    with open(marker, "a") as f:
        f.write("x")
    starts = len(marker.read_text())
    if kind == "die_always" or (kind == "die_once" and starts == 1):
        os.kill(os.getpid(), signal.SIGKILL)
    if kind == "eio_always" or (kind == "eio_once" and starts == 1):
        raise OSError(errno.EIO, "Input/output error")
    if kind == "broken":
        raise InputError(marker, "not an option chain")
    return name


def starts(folder: Path, name: str) -> int:
    return len((folder / name).read_text())


def _not_retried_for_its_own_error(outcome) -> None:
    """A deterministic failure: final, and never a reason to try again (an attempt
    lost with a worker that died under it may still come before it)."""
    assert outcome.failed and not outcome.value.transient
    assert "not an option chain" in outcome.value.reason
    assert all("not an option chain" not in r for r in outcome.retry_reasons)


def _items(folder: Path, kinds: dict[str, str]) -> list:
    return [(str(folder), name, kind) for name, kind in kinds.items()]


def test_transient_kinds_are_named():
    assert is_transient(OSError(errno.EIO, "Input/output error"))
    assert is_transient(MemoryError())
    assert is_transient(TimeoutError())
    assert not is_transient(FileNotFoundError(errno.ENOENT, "No such file"))
    assert not is_transient(ValueError("bad"))
    # the chain loader turns an unreadable file into an InputError; the I/O error
    # it was handling still counts
    try:
        try:
            raise OSError(errno.ESTALE, "Stale file handle")
        except OSError:
            raise InputError("chain.csv", "cannot read") from None
    except InputError as err:
        assert is_transient(err)


def test_in_process_retries_transient_not_deterministic(tmp_path):
    kinds = {"ok": "ok", "eio_once": "eio_once", "broken": "broken",
             "eio_always": "eio_always"}
    out = run_outcomes(flaky, _items(tmp_path, kinds), workers=1, retries=2)
    ok, eio_once, broken, eio_always = out
    assert (ok.value, ok.attempts, ok.retry_reasons) == ("ok", 1, ())
    assert eio_once.value == "eio_once" and eio_once.attempts == 2
    assert eio_once.retry_reasons == ("OSError: [Errno 5] Input/output error",)
    assert broken.failed and broken.attempts == 1 and not broken.value.transient
    assert "not an option chain" in broken.value.reason
    assert eio_always.failed and eio_always.attempts == 3 and eio_always.value.transient
    assert len(eio_always.value.retry_reasons) == 2
    for name, o in zip(kinds, out):
        assert starts(tmp_path, name) == o.attempts, name
    # no retries asked: one attempt each
    (tmp_path / "none").mkdir()
    again = run_outcomes(flaky, _items(tmp_path / "none", {"e": "eio_always"}), workers=1,
                         retries=0)
    assert again[0].failed and again[0].attempts == 1


def test_bad_retry_count_is_a_user_error(tmp_path):
    with pytest.raises(InputError, match="--retries"):
        run_outcomes(flaky, [], workers=1, retries=-1)


def _check_invariants(folder: Path, out: dict) -> None:
    for name, o in out.items():
        # every lost attempt has its reason; a task in flight when the pool broke
        # counts that attempt even if its worker had not begun it
        assert o.attempts == len(o.retry_reasons) + 1
        assert o.attempts >= starts(folder, name) >= 1
        if name.startswith("ok"):
            assert o.value == name


def test_local_pool_survives_a_dead_worker_process(tmp_path):
    kinds = {"ok0": "ok", "die_once": "die_once", "ok1": "ok", "broken": "broken",
             "eio_once": "eio_once", "ok2": "ok", "ok3": "ok"}
    out = dict(zip(kinds, run_outcomes(flaky, _items(tmp_path, kinds), workers=2,
                                       retries=2)))
    _check_invariants(tmp_path, out)
    # run again in a process of its own, where it no longer dies
    assert out["die_once"].value == "die_once"
    assert out["die_once"].attempts == starts(tmp_path, "die_once") == 2
    assert out["die_once"].retry_reasons == (POOL_LOST,)
    assert out["eio_once"].value == "eio_once"
    _not_retried_for_its_own_error(out["broken"])


def test_local_pool_gives_up_on_a_task_that_kills_its_process(tmp_path):
    kinds = {"ok0": "ok", "ok1": "ok", "die_always": "die_always", "ok2": "ok"}
    out = dict(zip(kinds, run_outcomes(flaky, _items(tmp_path, kinds), workers=2,
                                       retries=2)))
    _check_invariants(tmp_path, out)
    dead = out["die_always"]
    # once in the pool, twice alone: retries=2 bounds it
    assert dead.failed and dead.value.transient and dead.attempts == 3
    assert starts(tmp_path, "die_always") == 3
    assert dead.value.reason == "its worker process died (killed by SIGKILL)"
    assert dead.retry_reasons[0] == POOL_LOST and len(dead.retry_reasons) == 2


@pytest.fixture(scope="module")
def cluster():
    distributed = pytest.importorskip("distributed")
    import cloudpickle
    # this module is pickled by value, so the workers need not import it
    cloudpickle.register_pickle_by_value(sys.modules[__name__])
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as c:
        yield c


@pytest.mark.slow
def test_dask_counts_lost_workers_and_retries(tmp_path, cluster):
    kinds = {"die_once": "die_once", "ok0": "ok", "ok1": "ok", "broken": "broken",
             "eio_once": "eio_once", "ok2": "ok"}
    out = dict(zip(kinds, run_outcomes(flaky, _items(tmp_path, kinds),
                                       scheduler=cluster.scheduler_address, retries=2)))
    for name, o in out.items():
        # a task next in the lost worker's queue counts the attempt too (the
        # scheduler moves it), so attempts and starts need not agree for the others
        assert o.attempts == len(o.retry_reasons) + 1
        if name.startswith("ok"):
            assert o.value == name
    once = out["die_once"]
    assert once.value == "die_once" and once.attempts == 2 <= starts(tmp_path, "die_once")
    assert once.retry_reasons == (DASK_LOST,)
    assert out["eio_once"].value == "eio_once"
    _not_retried_for_its_own_error(out["broken"])


@pytest.mark.slow
def test_dask_gives_up_on_a_task_that_kills_every_worker(tmp_path, cluster):
    import dask
    limit = dask.config.get("distributed.scheduler.allowed-failures")
    (dead,) = run_outcomes(flaky, _items(tmp_path, {"die": "die_always"}),
                           scheduler=cluster.scheduler_address, retries=2)
    assert dead.failed and isinstance(dead.value, TaskFailure)
    assert f"Dask workers died while running it {limit + 1} times" in dead.value.reason
    assert dead.attempts == starts(tmp_path, "die") == limit + 1
    assert len(dead.retry_reasons) == limit
