"""The workbench's first run, started by ``optbench open`` before the terminal screen
is built: the numbers are computed while textual is imported and lays out the first
frame, instead of after it. No textual here.

On Linux the run goes to a forked child process — a copy of ``optbench open`` taken
before textual, the screen or any thread exists — so that it has the machine's
other core to itself instead of sharing one interpreter lock with the screen. The
child runs :func:`optbench.tui.session.run_steps` and hands each step's result back
through a pipe as soon as it exists (pickled: the chain, the comparison, the
headline hedge, the out-of-sample check), except that the overview's numbers and
status go first as plain data (:class:`Sender`, :mod:`optbench.tui.firstview`):
the screen paints them before it unpickles the result objects, which imports numpy,
pandas and the core. :mod:`optbench.tui.early` starts such a child at the very
start of ``optbench``, before those imports. Elsewhere, or when the fork fails, the
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

#: events whose pickles hold only plain values (no numpy, pandas or core classes):
#: the reader unpickles them as they come; the others wait, as bytes, until
#: :meth:`FirstRun.relay` hands them on (after the first view is painted)
_PLAIN = ("progress", "first_view", "failed", "inputs")

#: bytes of a frame's header: the pickle's length (8), then the event's kind (16)
_KIND_BYTES = 16


class _Frame:
    """An event as it came through the pipe, not unpickled yet."""

    __slots__ = ("kind", "data")

    def __init__(self, kind: str, data: bytes) -> None:
        self.kind, self.data = kind, data


def write_frame(pipe, event: tuple) -> None:
    """Send ``event`` through ``pipe``: its length, its kind, its pickle."""
    frame = (pickle.dumps(event, protocol=pickle.HIGHEST_PROTOCOL) if event[0] in _PLAIN
             else dumps(event))
    pipe.write(len(frame).to_bytes(8, "little") + event[0].encode().ljust(_KIND_BYTES)
               + frame)
    pipe.flush()


def read_frame(pipe) -> _Frame | None:
    """The next frame from ``pipe`` (None at the end of the stream)."""
    head = _read_exactly(pipe, 8 + _KIND_BYTES)
    if head is None:
        return None
    frame = _read_exactly(pipe, int.from_bytes(head[:8], "little"))
    if frame is None:
        raise EOFError("the pipe closed inside a frame")
    return _Frame(head[8:].decode().strip(), frame)


class Sender:
    """The child's side: each event of :func:`optbench.tui.session.run_steps` goes
    through the pipe as it comes, except that the result objects (the chain, the
    comparison) are held back until the headline exists, and the overview's plain
    data (:func:`optbench.tui.firstview.first_view`) goes ahead of them: the screen
    shows the numbers without waiting to import what reads the objects."""

    def __init__(self, pipe) -> None:
        self.pipe = pipe
        self.held: list[tuple] = []
        self.comparison = None

    def __call__(self, event: tuple) -> None:
        kind = event[0]
        if kind == "checked":   # only what the check adds travels
            event = ("checked", event[1].backtest)
        if kind == "computed":
            self.comparison = event[1]
        if kind in ("loaded", "computed"):
            self.held.append(event)
            return
        if kind == "headline" and self.comparison is not None:
            from optbench.tui import firstview
            try:
                view = firstview.first_view(self.comparison, event[1])
            except Exception:   # the objects that follow are drawn as they come
                view = None
            if view is not None:
                write_frame(self.pipe, ("first_view", view))
        if kind != "progress":
            for held in self.held:
                write_frame(self.pipe, held)
            self.held = []
        write_frame(self.pipe, event)


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


def run_child(write_fd: int, inputs: session.Inputs, planner, *,
              announce: dict | None = None) -> int:
    """The child's run: :func:`optbench.tui.session.run_steps` with its events sent
    through ``write_fd`` (:class:`Sender`). ``announce``: the app's other options; they
    go first with the inputs and planner (the screen process of
    :mod:`optbench.tui.early` builds its app with them). Returns the exit status."""
    with os.fdopen(write_fd, "wb") as pipe:
        if announce is not None:
            write_frame(pipe, ("inputs", inputs, planner, announce))
        import optbench.analysis.compare  # noqa: F401
        import optbench.analysis.hedge  # noqa: F401
        session.run_steps(inputs, planner, Sender(pipe))
    return 0


def _can_fork() -> bool:
    return sys.platform.startswith("linux") and hasattr(os, "fork")


class FirstRun:
    """One run on ``inputs`` (and the planner's headline ``planner``), started at
    once; :meth:`relay` hands its events on in order."""

    def __init__(self, inputs: session.Inputs, planner, *, fork: bool | None = None,
                 attach: tuple | None = None) -> None:
        self.inputs, self.planner = inputs, planner
        self.events: queue.Queue = queue.Queue()
        self.pid: int | None = None
        self._cancelled = threading.Event()
        self._computed = None
        if attach is not None:   # a child already running (optbench.tui.early)
            self.pid, pipe = attach
            self._start_reader(pipe)
            return
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
        self._start_reader(os.fdopen(read_fd, "rb", buffering=0))

    def _start_reader(self, pipe) -> None:
        threading.Thread(target=self._read, args=(pipe,), name="optbench-first-run",
                         daemon=True).start()

    def _child(self, write_fd: int) -> None:
        status = 1
        try:
            import gc
            gc.disable()   # short-lived: no cyclic collection (see optbench.tui.early)
            signal.signal(signal.SIGINT, signal.SIG_IGN)   # the parent stops it
            devnull = os.open(os.devnull, os.O_RDWR)
            for fd in (0, 1, 2):                           # the screen is the parent's
                os.dup2(devnull, fd)
            status = run_child(write_fd, self.inputs, self.planner)
        finally:
            os._exit(status)

    def _read(self, pipe) -> None:
        stage = "open"   # the stage a run that stops here stopped in
        with pipe:
            while True:
                try:
                    # one frame, read whole (the reading waits without holding the
                    # interpreter lock); plain events unpickled now, the others when
                    # they are relayed
                    frame = read_frame(pipe)
                    if frame is None:
                        break
                    event = pickle.loads(frame.data) if frame.kind in _PLAIN else frame
                except Exception as err:   # a broken frame ends the run, with a word
                    self.events.put(("failed", stage,
                                     f"the first run's results could not be read: "
                                     f"{session.describe(err)}"))
                    break
                stage = {"computed": "headline", "headline": "check"}.get(frame.kind, stage)
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
            if isinstance(event, _Frame):
                try:
                    event = pickle.loads(event.data)
                except Exception as err:
                    emit(("failed", "open" if event.kind in ("loaded", "computed") else
                          "headline" if event.kind == "headline" else "check",
                          f"the first run's results could not be read: "
                          f"{session.describe(err)}"))
                    self.cancel()
                    return
            kind = event[0]
            if kind == "first_view":
                # the screen paints the numbers before this thread imports what the
                # result objects that follow need (numpy, pandas, the core)
                shown = threading.Event()
                emit(("first_view", event[1], shown))
                for _ in range(40):
                    if shown.wait(0.05) or cancelled():
                        break
                continue
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
    computes with it and this process reads the results into its classes.

    In the child that :mod:`optbench.tui.early` forked at the start of ``optbench``,
    this is where the command's path ends: the run goes to the screen process
    through the early pipe, and the child exits."""
    from optbench.tui import early
    if early.child_pipe is not None:
        early.run_in_child(inputs, planner)   # never returns
    import optbench.analysis.compare  # noqa: F401
    import optbench.analysis.hedge  # noqa: F401
    return FirstRun(inputs, planner, fork=fork)
