"""Run one function over many inputs, in this process, in local worker processes, or
on an existing Dask distributed cluster — the same function and the same results
whichever way it runs.

Failures stay local: an exception inside one task becomes a :class:`TaskFailure`
in that task's slot (with the reason), and the other tasks go on.
"""
from __future__ import annotations

import concurrent.futures as cf
import contextlib
import multiprocessing
import os
import sys
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from typing import Any

from optbench.errors import InputError

Progress = Callable[[int, int], None]


@dataclass(frozen=True)
class TaskFailure:
    """What became of a task that raised: the input it was given and why it failed."""

    item: Any
    reason: str


def _describe(err: BaseException) -> str:
    if isinstance(err, InputError):
        return str(err)
    text = str(err).strip().splitlines()
    return f"{type(err).__name__}: {text[0]}" if text else type(err).__name__


def call_safely(fn: Callable[[Any], Any], item: Any) -> Any:
    """``fn(item)``, or a :class:`TaskFailure` naming the reason if it raises."""
    try:
        return fn(item)
    except Exception as err:  # one underlying's failure must not stop the screen
        return TaskFailure(item=item, reason=_describe(err))


def default_workers() -> int:
    """The number of cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def run_tasks(fn: Callable[[Any], Any], items: Iterable[Any], *, workers: int | None = None,
              scheduler: str | None = None, progress: Progress | None = None) -> list[Any]:
    """Apply ``fn`` to every item and return the results in input order.

    Parameters
    ----------
    fn : a picklable (module-level) function of one argument.
    items : the inputs (small and picklable, e.g. folder paths and options).
    workers : local worker processes; 1 runs in this process. Default: the cores.
    scheduler : address of a running Dask scheduler (``tcp://host:8786``). When
        given, the tasks run on that cluster and ``workers`` is ignored.
    progress : called as ``progress(done, total)`` after each finished task.
    """
    items = list(items)
    if scheduler:
        return _run_on_dask(fn, items, scheduler, progress)
    n = default_workers() if workers is None else int(workers)
    if n < 1:
        raise InputError("--workers", f"must be at least 1, not {n}")
    if n == 1 or len(items) <= 1:
        results = []
        for i, item in enumerate(items):
            results.append(call_safely(fn, item))
            if progress:
                progress(i + 1, len(items))
        return results
    return _run_in_processes(fn, items, min(n, len(items)), progress)


def _real_fd(stream) -> int | None:
    """The stream's file descriptor, or None when it has none (a terminal UI
    replaces ``sys.stderr`` with a capture object whose ``fileno()`` is -1)."""
    try:
        fd = stream.fileno()
    except (AttributeError, OSError, ValueError):
        return None
    if not isinstance(fd, int) or fd < 0:
        return None
    try:
        os.fstat(fd)
    except OSError:
        return None
    return fd


class _NullFdStream:
    """Stands in for a captured ``sys.stderr`` while a child process is launched:
    writes go where they went before, ``fileno()`` is an open ``/dev/null``."""

    def __init__(self, stream, fd: int) -> None:
        self._stream, self._fd = stream, fd

    def fileno(self) -> int:
        return self._fd

    def __getattr__(self, name: str):
        return getattr(self._stream, name)


@contextlib.contextmanager
def _launchable_stderr():
    """Make process launching work when ``sys.stderr`` has no file descriptor.

    multiprocessing's resource tracker passes ``sys.stderr.fileno()`` to the process
    it starts; under the workbench that is -1 and the launch fails with "bad value(s)
    in fds_to_keep". Here the tracker starts with ``/dev/null`` as its stderr (the
    terminal belongs to the UI), and the pool finds it running.
    """
    if _real_fd(sys.stderr) is not None:
        yield False
        return
    from multiprocessing import resource_tracker
    null = os.open(os.devnull, os.O_WRONLY)
    captured = sys.stderr
    try:
        sys.stderr = _NullFdStream(captured, null)
        try:
            resource_tracker.ensure_running()
        finally:
            if isinstance(sys.stderr, _NullFdStream):
                sys.stderr = captured
    finally:
        os.close(null)
    yield True


def _quiet_worker() -> None:
    """Worker initializer when the parent's terminal belongs to a UI: the worker's
    stdout and stderr go to ``/dev/null`` so nothing it prints lands on the screen."""
    null = os.open(os.devnull, os.O_WRONLY)
    os.dup2(null, 1)
    os.dup2(null, 2)
    os.close(null)


def _run_in_processes(fn, items: Sequence[Any], n: int, progress: Progress | None) -> list:
    # "spawn" gives each worker a clean interpreter: safe when the caller has threads
    # (the workbench does), and the same on every platform.
    context = multiprocessing.get_context("spawn")
    with _launchable_stderr() as under_ui:
        with cf.ProcessPoolExecutor(max_workers=n, mp_context=context,
                                    initializer=_quiet_worker if under_ui else None) as pool:
            futures = [pool.submit(call_safely, fn, item) for item in items]
            return _gather(futures, cf.as_completed(futures), items, progress)


def _gather(futures, completed, items: Sequence[Any], progress: Progress | None) -> list:
    """Results in input order from futures finishing in any order (``completed``);
    a future that raises (its worker died or was lost) becomes a TaskFailure."""
    index = {id(f): i for i, f in enumerate(futures)}
    results: list[Any] = [None] * len(items)
    for done, future in enumerate(completed, start=1):
        i = index[id(future)]
        try:
            results[i] = future.result()
        except Exception as err:
            results[i] = TaskFailure(item=items[i], reason=_describe(err))
        if progress:
            progress(done, len(items))
    return results


def _run_on_dask(fn, items: Sequence[Any], address: str, progress: Progress | None) -> list:
    try:
        from distributed import Client, as_completed
    except ImportError:  # pragma: no cover - distributed is a dependency
        raise InputError("--scheduler", "dask.distributed is not installed") from None
    try:
        client = Client(address, timeout="10s")
    except (OSError, TimeoutError, ValueError, TypeError) as err:
        # ValueError/TypeError: not an address at all ("missing port number")
        raise InputError("--scheduler", f"cannot reach the Dask scheduler at {address}: "
                         f"{_describe(err)}") from None
    try:
        futures = client.map(call_safely, [fn] * len(items), items, pure=False)
        return _gather(futures, as_completed(futures), items, progress)
    finally:
        client.close()
