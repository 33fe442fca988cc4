"""The workbench's first run, started by ``optbench open`` before the terminal screen
is built: the numbers are computed while textual is imported and lays out the first
frame, instead of after it. No textual here.

On Linux the run goes to a forked child process — a copy of ``optbench open`` taken
before textual, the screen or any thread exists — so that it has the machine's
other core to itself instead of sharing one interpreter lock with the screen. The
child runs :func:`optbench.tui.session.run_steps` and hands each step's result back
through a pipe as soon as it exists (pickled: the chain, the comparison, the
headline hedge, the out-of-sample check). Elsewhere, or when the fork fails, the
run is a thread of this process. Either way the results are those of the same
functions on the same inputs: the numbers do not depend on where they were
computed (``tests/tui/test_first_run.py``).

The app relays the events as its messages (:meth:`FirstRun.relay`); a run whose
inputs the user changed meanwhile is cancelled (the child is stopped).
"""
from __future__ import annotations

import os
import pickle
import queue
import signal
import sys
import threading
from dataclasses import replace

from optbench.tui import session

#: marks the end of a run's events in the queue
_END = object()


def _rebuild(cls, state: dict):
    obj = cls.__new__(cls)
    obj.__dict__.update(state)
    return obj


def _fit_reducer(fit):
    """A fitted model travels with its covariance evaluated (its lazy source is a
    closure, which pickle cannot carry); every other field as it is."""
    state = dict(fit.__dict__)
    if callable(state.get("covariance_source")):
        state["covariance_source"] = fit.cov
    return _rebuild, (type(fit), state)


def dumps(obj) -> bytes:
    """``obj`` pickled as the child sends it (fitted models with their covariance)."""
    import copyreg
    import io

    from optbench.volatility.garch import GarchFit
    buf = io.BytesIO()
    pickler = pickle.Pickler(buf, protocol=pickle.HIGHEST_PROTOCOL)
    pickler.dispatch_table = {**copyreg.dispatch_table, GarchFit: _fit_reducer}
    pickler.dump(obj)
    return buf.getvalue()


def _read_exactly(pipe, n: int) -> bytes | None:
    """``n`` bytes from ``pipe``; None at the end of the stream before the first."""
    chunks, got = [], 0
    while got < n:
        chunk = pipe.read(n - got)
        if not chunk:
            if got:
                raise EOFError("the pipe closed inside a frame")
            return None
        chunks.append(chunk)
        got += len(chunk)
    return b"".join(chunks)


def _can_fork() -> bool:
    return sys.platform.startswith("linux") and hasattr(os, "fork")


class FirstRun:
    """One run on ``inputs`` (and the planner's headline ``planner``), started at
    once; :meth:`relay` hands its events on in order."""

    def __init__(self, inputs: session.Inputs, planner, *, fork: bool | None = None) -> None:
        self.inputs, self.planner = inputs, planner
        self.events: queue.Queue = queue.Queue()
        self.pid: int | None = None
        self._cancelled = threading.Event()
        self._computed = None
        if fork is None:
            fork = _can_fork()
        if fork:
            try:
                self._fork()
                return
            except OSError:
                self.pid = None
        threading.Thread(target=self._in_thread, name="optbench-first-run",
                         daemon=True).start()

    # ------------------------------------------------------------- the two ways
    def _in_thread(self) -> None:
        try:
            session.run_steps(self.inputs, self.planner, self.events.put,
                              self._cancelled.is_set)
        finally:
            self.events.put(_END)

    def _fork(self) -> None:
        read_fd, write_fd = os.pipe()
        try:   # room for a whole comparison, so that the child writes it at once
            import fcntl
            fcntl.fcntl(write_fd, getattr(fcntl, "F_SETPIPE_SZ", 1031), 1 << 20)
        except (ImportError, OSError):
            pass
        pid = os.fork()
        if pid == 0:                                       # the child
            os.close(read_fd)
            self._child(write_fd)                          # never returns
        self.pid = pid
        os.close(write_fd)
        threading.Thread(target=self._read, args=(read_fd,), name="optbench-first-run",
                         daemon=True).start()

    def _child(self, write_fd: int) -> None:
        status = 1
        try:
            signal.signal(signal.SIGINT, signal.SIG_IGN)   # the parent stops it
            devnull = os.open(os.devnull, os.O_RDWR)
            for fd in (0, 1, 2):                           # the screen is the parent's
                os.dup2(devnull, fd)
            with os.fdopen(write_fd, "wb") as pipe:
                def send(event: tuple) -> None:
                    if event[0] == "checked":   # only what the check adds travels
                        event = ("checked", event[1].backtest)
                    frame = dumps(event)
                    pipe.write(len(frame).to_bytes(8, "little") + frame)
                    pipe.flush()
                session.run_steps(self.inputs, self.planner, send)
            status = 0
        finally:
            os._exit(status)

    def _read(self, read_fd: int) -> None:
        stage = "open"   # the stage a run that stops here stopped in
        with os.fdopen(read_fd, "rb", buffering=0) as pipe:
            while True:
                try:
                    # one frame: its length, then the pickle, read whole (the reading
                    # waits without holding the interpreter lock), then unpickled
                    size = _read_exactly(pipe, 8)
                    if size is None:
                        break
                    frame = _read_exactly(pipe, int.from_bytes(size, "little"))
                    if frame is None:
                        raise EOFError("the pipe closed inside a frame")
                    event = pickle.loads(frame)
                except Exception as err:   # a broken frame ends the run, with a word
                    self.events.put(("failed", stage,
                                     f"the first run's results could not be read: "
                                     f"{session.describe(err)}"))
                    break
                stage = {"computed": "headline", "headline": "check"}.get(event[0], stage)
                self.events.put(event)
        try:
            _, status = os.waitpid(self.pid, 0)
        except ChildProcessError:
            status = 0
        if status and not self._cancelled.is_set():
            code = os.waitstatus_to_exitcode(status)
            self.events.put(("failed", stage, f"the first run stopped (exit status {code}); "
                                              "press r to compute again"))
        self.events.put(_END)

    # ------------------------------------------------------------------- use
    def relay(self, emit, cancelled=lambda: False) -> None:
        """Hand each event on to ``emit`` as it comes (the comparison's check as the
        comparison with its backtest, as :func:`optbench.tui.session.run_backtest`
        gives it), until the run ends or ``cancelled()``; a cancelled run is
        stopped."""
        done = False
        while not done:
            if cancelled():
                self.cancel()
                return
            try:
                event = self.events.get(timeout=0.05)
            except queue.Empty:
                continue
            if event is _END:
                return
            kind = event[0]
            if kind == "computed":
                self._computed = event[1]
            elif kind == "checked" and isinstance(event[1], dict):
                event = ("checked", replace(self._computed, backtest=event[1]))
            done = kind in ("checked", "failed")
            emit(event)

    def cancel(self) -> None:
        """Stop the run (its late results are not relayed)."""
        self._cancelled.set()
        if self.pid is not None:
            try:
                os.kill(self.pid, signal.SIGTERM)
            except ProcessLookupError:
                pass


def start(inputs: session.Inputs, planner, *, fork: bool | None = None) -> FirstRun:
    """Start the first run on ``inputs`` now (see the module's notes).

    The core the run needs is imported first, once for both processes: the child
    computes with it and this process reads the results into its classes."""
    import optbench.analysis.compare  # noqa: F401
    import optbench.analysis.hedge  # noqa: F401
    return FirstRun(inputs, planner, fork=fork)
