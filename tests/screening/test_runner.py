"""The task runner: same results in-process, in local processes and on a real Dask
cluster (a LocalCluster on loopback); a failing task stays in its own slot."""
from __future__ import annotations

import math

import pytest

from optbench.errors import InputError
from optbench.screening.runner import TaskFailure, run_tasks

ITEMS = [4.0, 9.0, -1.0, 16.0]  # math.sqrt(-1.0) raises ValueError


def _check(results):
    assert results[0] == 2.0 and results[1] == 3.0 and results[3] == 4.0
    assert isinstance(results[2], TaskFailure)
    assert results[2].item == -1.0 and "ValueError" in results[2].reason


def test_in_process_keeps_order_and_isolates_failure():
    seen = []
    _check(run_tasks(math.sqrt, ITEMS, workers=1, progress=lambda d, n: seen.append((d, n))))
    assert seen[-1] == (4, 4)


def test_local_processes_give_the_same_results():
    _check(run_tasks(math.sqrt, ITEMS, workers=2))


def test_bad_worker_count_is_a_user_error():
    with pytest.raises(InputError, match="--workers"):
        run_tasks(math.sqrt, ITEMS, workers=0)


@pytest.mark.slow
def test_dask_local_cluster_gives_the_same_results():
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        _check(run_tasks(math.sqrt, ITEMS, scheduler=cluster.scheduler_address))


def test_unreachable_scheduler_is_one_line_error():
    with pytest.raises(InputError, match="cannot reach"):
        run_tasks(math.sqrt, ITEMS, scheduler="tcp://127.0.0.1:9")
