"""Run one function over many inputs, in this process, in local worker processes, or
on an existing Dask distributed cluster — the same function and the same results
whichever way it runs.

Failures stay local: an exception inside one task becomes a :class:`TaskFailure`
in that task's slot (with the reason), and the other tasks go on.

Retries
    A task is tried again, up to ``retries`` times (default :data:`DEFAULT_RETRIES`),
    only when its failure is *transient* — one that the same input may not meet
    again (:func:`is_transient`):

    - its worker process died or was lost (killed, out of memory, a machine gone):
      in local processes the pool's ``BrokenProcessPool``; on Dask the scheduler
      moves a lost worker's tasks to other workers itself, up to its
      ``distributed.scheduler.allowed-failures`` (3 by default), and the runner
      counts those moves as attempts;
    - a passing system condition inside the task: ``MemoryError``, ``TimeoutError``,
      a connection error, or an ``OSError`` whose errno says the file system was
      momentarily unable (``EIO``, ``EAGAIN``, ``EINTR``, ``EBUSY``, ``ETIMEDOUT``,
      ``ESTALE``, ``ENFILE``, ``EMFILE``, ``ENOMEM``), also when an
      :class:`~optbench.errors.InputError` was raised while handling it.

    Everything else is *deterministic* — a broken file, a missing column, a fit that
    cannot start, any other exception: the function is a pure function of its input
    (fixed seeds), so the same input fails the same way, and it is not retried.

    Each outcome says how many attempts it took and why the earlier ones were lost
    (:class:`TaskOutcome`, :func:`run_outcomes`).

A lost local worker process
    When a worker process dies, ``concurrent.futures`` fails every task in flight
    in its pool, and cannot say whose worker died. The runner keeps at most one task
    per worker and one waiting in flight, counts an attempt for each of them, starts
    a new pool for the tasks not yet started, and runs each task that was in flight
    again in a process of its own, where a death is that task's alone (its exit code
    or signal is the reason).
"""
from __future__ import annotations

import concurrent.futures as cf
import contextlib
import errno
import multiprocessing
import os
import signal
import sys
import time
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

from optbench.errors import InputError

Progress = Callable[[int, int], None]

#: retries of a transient failure (a lost worker, a passing I/O error) after the
#: first attempt: 2, so a task is tried at most 3 times
DEFAULT_RETRIES = 2

#: errno values of an ``OSError`` that a second try may not meet (I/O error, try
#: again, interrupted, busy, timed out, stale network file handle, too many open
#: files, out of memory)
TRANSIENT_ERRNOS = frozenset({errno.EIO, errno.EAGAIN, errno.EINTR, errno.EBUSY,
                              errno.ETIMEDOUT, errno.ESTALE, errno.ENFILE, errno.EMFILE,
                              errno.ENOMEM})


@dataclass(frozen=True)
class TaskFailure:
    """What became of a task that failed: the input it was given and why.

    ``attempts`` counts every start of the task (1 = not retried); ``transient``
    says whether the last failure was of a kind worth retrying (then the retries ran
    out); ``retry_reasons`` says why each earlier attempt was lost.
    """

    item: Any
    reason: str
    attempts: int = 1
    transient: bool = False
    retry_reasons: tuple[str, ...] = ()


@dataclass(frozen=True)
class TaskOutcome:
    """One task's result: ``value`` is ``fn(item)`` or a :class:`TaskFailure`;
    ``attempts`` counts its starts (1 = first time); ``retry_reasons`` says why each
    earlier attempt was lost."""

    value: Any
    attempts: int = 1
    retry_reasons: tuple[str, ...] = field(default=())

    @property
    def failed(self) -> bool:
        return isinstance(self.value, TaskFailure)


def _describe(err: BaseException) -> str:
    if isinstance(err, InputError):
        return str(err)
    text = str(err).strip().splitlines()
    return f"{type(err).__name__}: {text[0]}" if text else type(err).__name__


def is_transient(err: BaseException) -> bool:
    """Whether a failure inside a task may pass on a second try (see the module
    notes): memory, time-outs, connections, and the ``OSError`` codes of
    :data:`TRANSIENT_ERRNOS` — raised directly or met while the error was raised."""
    seen: set[int] = set()
    e: BaseException | None = err
    while e is not None and id(e) not in seen:
        seen.add(id(e))
        if isinstance(e, (MemoryError, TimeoutError, ConnectionError)):
            return True
        if isinstance(e, OSError) and e.errno in TRANSIENT_ERRNOS:
            return True
        e = e.__cause__ or e.__context__
    return False


def call_safely(fn: Callable[[Any], Any], item: Any) -> Any:
    """``fn(item)``, or a :class:`TaskFailure` naming the reason if it raises."""
    try:
        return fn(item)
    except Exception as err:  # one underlying's failure must not stop the screen
        return TaskFailure(item=item, reason=_describe(err), transient=is_transient(err))


def default_workers() -> int:
    """The number of cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def run_tasks(fn: Callable[[Any], Any], items: Iterable[Any], *, workers: int | None = None,
              scheduler: str | None = None, progress: Progress | None = None,
              retries: int = DEFAULT_RETRIES) -> list[Any]:
    """Apply ``fn`` to every item and return the results in input order (a failed
    task's slot holds its :class:`TaskFailure`). See :func:`run_outcomes`."""
    return [o.value for o in run_outcomes(fn, items, workers=workers, scheduler=scheduler,
                                          progress=progress, retries=retries)]


def run_outcomes(fn: Callable[[Any], Any], items: Iterable[Any], *,
                 workers: int | None = None, scheduler: str | None = None,
                 progress: Progress | None = None,
                 retries: int = DEFAULT_RETRIES) -> list[TaskOutcome]:
    """Apply ``fn`` to every item; one :class:`TaskOutcome` per item, in input order.

    Parameters
    ----------
    fn : a picklable (module-level) function of one argument.
    items : the inputs (small and picklable, e.g. folder paths and options): they
        are what travels to the workers, never the data the function reads.
    workers : local worker processes; 1 runs in this process. Default: the cores.
    scheduler : address of a running Dask scheduler (``tcp://host:8786``). When
        given, the tasks run on that cluster and ``workers`` is ignored.
    progress : called as ``progress(done, total)`` after each finished task.
    retries : how many times a transient failure is tried again (0 = never).
    """
    items = list(items)
    retries = int(retries)
    if retries < 0:
        raise InputError("--retries", f"must be 0 or more, not {retries}")
    if scheduler:
        return _run_on_dask(fn, items, scheduler, progress, retries)
    n = default_workers() if workers is None else int(workers)
    if n < 1:
        raise InputError("--workers", f"must be at least 1, not {n}")
    if n == 1 or len(items) <= 1:
        return _run_here(fn, items, progress, retries)
    return _run_in_processes(fn, items, min(n, len(items)), progress, retries)


class _Ledger:
    """Attempts and their lost reasons per task, and the finished outcomes."""

    def __init__(self, items: Sequence[Any], retries: int, progress: Progress | None):
        self.items, self.retries, self.progress = items, retries, progress
        self.attempts = [0] * len(items)
        self.lost: list[list[str]] = [[] for _ in items]
        self.outcomes: list[TaskOutcome | None] = [None] * len(items)
        self.done = 0

    def may_retry(self, i: int) -> bool:
        return self.attempts[i] <= self.retries

    def finish(self, i: int, value: Any) -> None:
        lost = tuple(self.lost[i])
        if isinstance(value, TaskFailure):
            value = TaskFailure(item=self.items[i], reason=value.reason,
                                attempts=self.attempts[i], transient=value.transient,
                                retry_reasons=lost)
        self.outcomes[i] = TaskOutcome(value=value, attempts=self.attempts[i],
                                       retry_reasons=lost)
        self.done += 1
        if self.progress:
            self.progress(self.done, len(self.items))

    def record(self, i: int, value: Any) -> bool:
        """Take one attempt's value; True when the task is finished, False when a
        transient failure is to be tried again."""
        if isinstance(value, TaskFailure) and value.transient and self.may_retry(i):
            self.lost[i].append(value.reason)
            return False
        self.finish(i, value)
        return True


def _run_here(fn, items: Sequence[Any], progress: Progress | None,
              retries: int) -> list[TaskOutcome]:
    ledger = _Ledger(items, retries, progress)
    for i, item in enumerate(items):
        while True:
            ledger.attempts[i] += 1
            if ledger.record(i, call_safely(fn, item)):
                break
    return ledger.outcomes


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


#: glibc ``mallopt`` parameters (malloc.h) and the values a screen worker sets: arrays
#: up to 32 MiB come from the heap, and up to 256 MiB freed at its top stays mapped
#: (with 16 MiB of headroom per growth) instead of going back to the kernel
_M_TRIM_THRESHOLD, _M_TOP_PAD, _M_MMAP_THRESHOLD = -1, -2, -3
WORKER_MALLOC = ((_M_MMAP_THRESHOLD, 32 << 20), (_M_TRIM_THRESHOLD, 256 << 20),
                 (_M_TOP_PAD, 16 << 20))


def keep_freed_memory() -> bool:
    """Let this process reuse the memory it frees instead of returning it to the
    kernel (glibc only; elsewhere nothing is changed). Returns whether it was set.

    A screen worker makes and frees arrays of the same few sizes for every
    underlying (the simulated paths are megabytes). With glibc's defaults the larger
    ones are fresh ``mmap`` regions and a freed heap top is trimmed, so every
    underlying pays the kernel to map and zero those pages again: about 600 page
    faults an underlying, measured on the benchmark universe, against 4 with
    :data:`WORKER_MALLOC` (``mallopt(3)``; the GNU C Library manual, "Malloc Tunable
    Parameters"), and 2-3 % of a worker's CPU time in the kernel. The worker's peak
    memory is unchanged: the kept pages are those its largest underlying needed.
    """
    import ctypes

    try:
        mallopt = ctypes.CDLL(None).mallopt      # the C library this Python runs on
    except (OSError, AttributeError):             # no mallopt (not glibc)
        return False
    return all(mallopt(param, value) == 1 for param, value in WORKER_MALLOC)


def _worker_start(quiet: bool) -> None:
    """Worker initializer: the worker keeps the memory it frees for the next
    underlying (:func:`keep_freed_memory`); when the parent's terminal belongs to a
    UI (``quiet``) its stdout and stderr go to ``/dev/null`` so nothing it prints
    lands on the screen."""
    keep_freed_memory()
    if quiet:
        null = os.open(os.devnull, os.O_WRONLY)
        os.dup2(null, 1)
        os.dup2(null, 2)
        os.close(null)


POOL_LOST = "a local worker process died while this task was in flight"


def _run_in_processes(fn, items: Sequence[Any], n: int, progress: Progress | None,
                      retries: int) -> list[TaskOutcome]:
    # "spawn" gives each worker a clean interpreter: safe when the caller has threads
    # (the workbench does), and the same on every platform.
    context = multiprocessing.get_context("spawn")
    ledger = _Ledger(items, retries, progress)
    todo = list(range(len(items)))
    suspects: list[int] = []
    with _launchable_stderr() as under_ui:
        initializer = (_worker_start, (bool(under_ui),))
        while todo:
            todo, in_flight = _pool_pass(fn, items, todo, n, context, initializer, ledger)
            for i in in_flight:          # the pool broke under these
                if ledger.may_retry(i):
                    ledger.lost[i].append(POOL_LOST)
                    suspects.append(i)
                else:
                    ledger.finish(i, TaskFailure(item=items[i], reason=POOL_LOST,
                                                 transient=True))
        for i in suspects:
            _run_alone(fn, items, i, context, initializer, ledger)
    return ledger.outcomes


def _pool_pass(fn, items, todo: list[int], n: int, context, initializer,
               ledger: _Ledger) -> tuple[list[int], list[int]]:
    """Run ``todo`` in one pool with at most ``n + 1`` tasks in flight (one per
    worker and one waiting, so a worker that finishes starts the next task without
    waiting for this process to hand it over, and a dead worker takes few innocent
    tasks with it). Returns the tasks not yet started and those in flight when the
    pool broke (both empty when it did not)."""
    queue = list(reversed(todo))
    start, start_args = initializer
    with cf.ProcessPoolExecutor(max_workers=n, mp_context=context,
                                initializer=start, initargs=start_args) as pool:
        running: dict[cf.Future, int] = {}

        def top_up() -> None:
            while queue and len(running) < n + 1:
                try:
                    future = pool.submit(call_safely, fn, items[queue[-1]])
                except cf.process.BrokenProcessPool:
                    return       # the futures in flight report it
                i = queue.pop()
                ledger.attempts[i] += 1
                running[future] = i

        top_up()
        if not running:    # the pool broke before any task could start
            for i in reversed(queue):
                ledger.finish(i, TaskFailure(item=items[i], reason=(
                    "local worker processes could not start")))
            return [], []
        while running:
            finished, _ = cf.wait(running, return_when=cf.FIRST_COMPLETED)
            broken = False
            for future in finished:
                try:
                    value = future.result()
                except cf.process.BrokenProcessPool:
                    broken = True
                    continue
                except Exception as err:   # e.g. a result that cannot be unpickled
                    value = TaskFailure(item=items[running[future]], reason=_describe(err))
                i = running.pop(future)
                if not ledger.record(i, value):
                    queue.append(i)
            if broken:
                in_flight = list(running.values())
                pool.shutdown(wait=True, cancel_futures=True)
                return list(reversed(queue)), in_flight
            top_up()
    return [], []


def _child(conn, fn, item, initializer) -> None:
    start, start_args = initializer
    start(*start_args)
    try:
        conn.send(call_safely(fn, item))
    finally:
        conn.close()


def _exit_text(code: int | None) -> str:
    if code is not None and code < 0:
        try:
            name = signal.Signals(-code).name
        except ValueError:
            name = f"signal {-code}"
        return f"killed by {name}"
    return f"exit status {code}"


def _run_alone(fn, items, i: int, context, initializer, ledger: _Ledger) -> None:
    """Try task ``i`` again in a process of its own, until it finishes, fails for a
    deterministic reason, or runs out of retries; a death here is its own."""
    while True:
        ledger.attempts[i] += 1
        reader, writer = context.Pipe(duplex=False)
        proc = context.Process(target=_child, args=(writer, fn, items[i], initializer),
                               daemon=True)
        proc.start()
        writer.close()
        try:
            value = reader.recv()
        except EOFError:
            proc.join()
            value = TaskFailure(item=items[i], transient=True,
                                reason=f"its worker process died ({_exit_text(proc.exitcode)})")
        finally:
            reader.close()
        proc.join()
        if ledger.record(i, value):
            return


#: why an attempt on Dask was lost: the worker that had the task (running it or
#: next in its queue) died or left
DASK_LOST = "a Dask worker was lost while this task was on it"
#: seconds between questions to the scheduler about lost workers, and the longest
#: wait for its answer
LOSS_QUERY_INTERVAL = 0.5
LOSS_QUERY_TIMEOUT = "20s"
#: the reason of a task that the Dask scheduler gave up on after losing workers
KILLED_WORKER = ("Dask workers died while running it {n} times (the scheduler's "
                 "limit, distributed.scheduler.allowed-failures)")


def _worker_losses(client, keys: list) -> dict:
    """How many times the scheduler moved each task off a lost worker (its
    ``suspicious`` count), read from the scheduler; {} when it cannot say."""
    def read(dask_scheduler=None, keys=keys):
        tasks = dask_scheduler.tasks
        return {k: tasks[k].suspicious for k in keys if k in tasks}
    try:
        return client.run_on_scheduler(read, callback_timeout=LOSS_QUERY_TIMEOUT)
    except Exception:  # a scheduler that cannot run it or does not answer: count nothing
        return {}


def _take_dask_result(client, fn, items, ledger: _Ledger, index: dict, pending, future,
                      value, losses: int, killed_worker: type) -> None:
    """Record one finished Dask future (its result fetched as ``value``) that the
    scheduler moved ``losses`` times off a lost worker; resubmit it when its failure
    is transient and retries remain; release it."""
    i = index.pop(future.key)
    if future.status == "error":    # (type, exception, traceback)
        value = value[1]
    ledger.attempts[i] += losses
    ledger.lost[i].extend([DASK_LOST] * losses)
    if isinstance(value, killed_worker):
        value = TaskFailure(item=items[i], reason=KILLED_WORKER.format(n=losses or "several"))
        if losses:     # the last loss is the final reason, not a retry
            ledger.attempts[i] -= 1
            ledger.lost[i].pop()
    elif future.status != "finished":  # lost to the cluster another way
        value = TaskFailure(item=items[i], reason=_describe(value), transient=True)
    if not ledger.record(i, value):
        ledger.attempts[i] += 1
        again = client.submit(call_safely, fn, items[i], pure=False)
        index[again.key] = i
        pending.add(again)
    future.release()


def _run_on_dask(fn, items: Sequence[Any], address: str, progress: Progress | None,
                 retries: int) -> list[TaskOutcome]:
    try:
        from distributed import Client, as_completed
        from distributed.scheduler import KilledWorker
    except ImportError:  # pragma: no cover - distributed is a dependency
        raise InputError("--scheduler", "dask.distributed is not installed") from None
    try:
        client = Client(address, timeout="10s")
    except (OSError, TimeoutError, ValueError, TypeError) as err:
        # ValueError/TypeError: not an address at all ("missing port number")
        raise InputError("--scheduler", f"cannot reach the Dask scheduler at {address}: "
                         f"{_describe(err)}") from None
    ledger = _Ledger(items, retries, progress)
    try:
        futures = client.map(call_safely, [fn] * len(items), items, pure=False)
        index = {f.key: i for i, f in enumerate(futures)}
        for i in range(len(items)):
            ledger.attempts[i] = 1
        # results come back as each task finishes and the futures are released
        # batch by batch, so a worker lost later takes no finished result with it
        # (a result lost before the client fetched it would be computed again)
        pending = as_completed(futures, with_results=True, raise_errors=False)
        del futures
        held: list = []
        last = time.monotonic()
        for batch in pending.batches():
            held.extend(batch)
            # one question to the scheduler per interval, not per finished task
            if pending.count() and time.monotonic() - last < LOSS_QUERY_INTERVAL:
                continue
            moved = _worker_losses(client, [f.key for f, _ in held])
            last = time.monotonic()
            for future, value in held:
                _take_dask_result(client, fn, items, ledger, index, pending, future, value,
                                  int(moved.get(future.key, 0)), KilledWorker)
            held = []
        return ledger.outcomes
    finally:
        client.close()

