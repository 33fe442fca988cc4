"""The workbench's start before numpy, pandas or textual is imported.

``optbench`` (or ``optbench open ...``) started in a terminal on Linux forks at once,
in :func:`start`, called first thing by :func:`optbench.cli.main`:

* the child takes the command's ordinary path (arguments, checks, the scenario's
  inputs: :mod:`optbench.commands.open_`) up to the first run
  (:func:`optbench.tui.firstrun.start`), where it sends the inputs to the parent,
  imports numpy, pandas and the core, computes, and sends the results: the overview's
  plain data (:mod:`optbench.tui.firstview`) as soon as the headline exists, then
  the result objects (:class:`optbench.tui.firstrun.Sender`). Its terminal
  input and output are closed (the screen is the parent's).
* the parent, the screen process, imports textual meanwhile, builds the workbench
  on the inputs when they come, and relays the child's results. It imports numpy,
  pandas and the core only when the first result objects arrive, which is after the
  overview's numbers and the status "ready" are painted.

So the screen's start-up (textual's import, the first frame) runs on the machine's
other core, beside the import of numpy and pandas and the comparison, instead of
after them. The numbers are the same: the child runs the same functions on the same
inputs, and the first view is formatted from its result objects by the function
the overview view itself uses.

When the child ends without sending the inputs (a bad argument, ``--help``: it writes
nothing, its output is closed) the parent takes the ordinary path itself, which says
what is wrong. ``OPTBENCH_EARLY=0`` turns the early start off; it is off when the
output is not a terminal, or fork is not available.

Nothing heavy is imported at this module's top: it runs before anything else.
"""
from __future__ import annotations

import os
import sys

#: in the early child: the pipe's write end to the screen process (else None)
child_pipe: int | None = None


def wanted(argv: list[str]) -> bool:
    """True when ``argv`` opens the workbench in a terminal and forking is possible."""
    return ((not argv or argv[0] == "open") and os.environ.get("OPTBENCH_EARLY", "1") != "0"
            and sys.platform.startswith("linux") and hasattr(os, "fork")
            and sys.stdin.isatty() and sys.stdout.isatty())


def start(argv: list[str]) -> int | None:
    """Fork, when :func:`wanted`: in the parent run the workbench and return its exit
    status (None: the child sent no inputs; take the ordinary path); in the child
    return None (the ordinary path, which ends in :func:`run_in_child`)."""
    global child_pipe
    if not wanted(argv):
        return None
    read_fd, write_fd = os.pipe()
    try:   # room for a whole comparison, so that the child writes it at once
        import fcntl
        fcntl.fcntl(write_fd, getattr(fcntl, "F_SETPIPE_SZ", 1031), 1 << 20)
    except (ImportError, OSError):
        pass
    try:
        pid = os.fork()
    except OSError:
        os.close(read_fd)
        os.close(write_fd)
        return None
    if pid == 0:                                        # the child
        import gc
        import signal
        # a short-lived process that exits after its run: no cyclic garbage
        # collection during its imports and the comparison (about a tenth of its CPU
        # time here); reference counting still frees what it no longer uses
        gc.disable()
        os.close(read_fd)
        signal.signal(signal.SIGINT, signal.SIG_IGN)    # the parent stops it
        devnull = os.open(os.devnull, os.O_RDWR)
        for fd in (0, 1, 2):                            # the screen is the parent's
            os.dup2(devnull, fd)
        child_pipe = write_fd
        return None
    os.close(write_fd)
    return _screen(pid, os.fdopen(read_fd, "rb", buffering=0))


def _stop(pid: int) -> None:
    import signal
    try:
        os.kill(pid, signal.SIGTERM)
        os.waitpid(pid, 0)
    except (ProcessLookupError, ChildProcessError):
        pass


def _screen(pid: int, pipe) -> int | None:
    """The parent: textual imported while the child works, then the workbench on the
    child's inputs."""
    import pickle
    try:
        from optbench.tui import firstrun, prefs
        from optbench.tui.app import Workbench
        try:
            frame = firstrun.read_frame(pipe)
        except EOFError:
            frame = None
        if frame is None or frame.kind != "inputs":
            pipe.close()
            _stop(pid)
            return None                # the ordinary path says what went wrong
        _, inputs, planner, options = pickle.loads(frame.data)
    except KeyboardInterrupt:
        _stop(pid)
        print("optbench: interrupted", file=sys.stderr)
        return 130
    run = firstrun.FirstRun(inputs, planner, attach=(pid, pipe))
    try:
        app = Workbench(inputs, planner=planner, notice=prefs.load().notice, first_run=run,
                        **options)
        app.run()
    finally:
        run.cancel()
    return 0


def _app_options() -> dict:
    """The workbench's options that are not part of the run's inputs (the universe
    screen's), from the command line the child was started with."""
    argv = sys.argv[1:]
    if len(argv) <= 1:
        return {}
    from optbench.cli import build_parser, join_negative_values
    args = build_parser().parse_args(join_negative_values(argv))
    return {"universe": args.universe, "workers": args.workers, "scheduler": args.scheduler}


def run_in_child(inputs, planner) -> None:
    """The early child's end of the command: the run, its events to the screen
    process (:func:`optbench.tui.firstrun.run_child`); then the child exits."""
    status = 1
    try:
        from optbench.tui import firstrun
        status = firstrun.run_child(child_pipe, inputs, planner, announce=_app_options())
    finally:
        os._exit(status)
