"""The ``optbench`` command line: parse arguments, call the core, render.

Each sub-command lives in ``optbench/commands/<name>.py`` and provides
``add_parser(subparsers)`` and ``run(args) -> int``. This module only wires them
together and turns user errors into one line on stderr with exit status 2.
"""
from __future__ import annotations

import argparse
import importlib
import os
import re
import sys
from collections.abc import Sequence

from optbench import __version__
from optbench.errors import InputError

# sub-command name -> module in optbench.commands (order = order in --help)
COMMANDS: dict[str, str] = {
    "open": "open_",
    "check": "check",
    "fit": "fit",
    "backtest": "backtest",
    "compare": "compare",
    "hedge": "hedge",
    "screen": "screen",
    "track": "track",
    "demo": "demo",
}

EXIT_USER_ERROR = 2


def _available_commands(names: Sequence[str] | None = None) -> dict[str, object]:
    """Import the command modules that exist in this build (only ``names`` when
    given: a run imports and wires its own command alone)."""
    found = {}
    for name, module in COMMANDS.items():
        if names is not None and name not in names:
            continue
        try:
            found[name] = importlib.import_module(f"optbench.commands.{module}")
        except ModuleNotFoundError as err:
            if err.name != f"optbench.commands.{module}":
                raise
    return found


#: the sub-command run when none is named (the first of these that this build has)
DEFAULT_COMMANDS = ("open", "compare")
#: top-level options that print something about every command
_HELP_OPTIONS = ("-h", "--help")


def command_named(argv: Sequence[str]) -> tuple[str, ...] | None:
    """The sub-commands a parser for ``argv`` needs: the one ``argv`` names, the
    default ones when it names none, or ``None`` (every command) for ``--help``
    before any command and for a word that is no command (argparse's message then
    lists them all). The top-level options take no value, so the first word that
    is not an option is the command."""
    for token in argv:
        if token in _HELP_OPTIONS or token == "--":
            return None
        if not token.startswith("-"):
            return (token,) if token in COMMANDS else None
    return DEFAULT_COMMANDS


class OneLineParser(argparse.ArgumentParser):
    """An argument parser whose usage errors are one line and exit status 2."""

    def error(self, message: str) -> None:  # type: ignore[override]
        self.exit(EXIT_USER_ERROR, f"{self.prog}: error: {message}\n")


def build_parser(commands: Sequence[str] | None = None) -> argparse.ArgumentParser:
    """The command line's parser, with the sub-commands ``commands`` (default: all).
    A sub-command's own options, help and errors do not depend on which others are
    wired, so a run builds only its own (:func:`command_named`)."""
    parser = OneLineParser(
        prog="optbench",
        description=("Is the volatility an option chain charges rich or cheap against "
                     "a GARCH-family forecast of the underlying, and what does that "
                     "cost on a hedge? With no command, opens the workbench on the "
                     "bundled demo scenario."),
    )
    parser.add_argument("--version", action="version", version=f"optbench {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, module in _available_commands(commands).items():
        module.add_parser(sub)
    return parser


#: a value that starts with a minus sign and a digit: ``-5``, ``-1e7``, ``-.5``, ``-5m``
_NEGATIVE_VALUE = re.compile(r"^-\.?\d")


def join_negative_values(argv: Sequence[str]) -> list[str]:
    """``--opt -5e6`` -> ``--opt=-5e6``, so that a negative value reaches the option's
    own check ("must be positive") instead of argparse's "expected one argument"
    (argparse reads ``-1e7`` as an option name)."""
    out: list[str] = []
    i = 0
    argv = list(argv)
    while i < len(argv):
        tok = argv[i]
        if (tok.startswith("--") and "=" not in tok and len(tok) > 2 and i + 1 < len(argv)
                and _NEGATIVE_VALUE.match(argv[i + 1])):
            out.append(f"{tok}={argv[i + 1]}")
            i += 2
            continue
        out.append(tok)
        i += 1
    return out


def main(argv: Sequence[str] | None = None) -> int:
    if argv is None:   # the workbench in a terminal: its first run starts now (tui/early.py)
        from optbench.tui.early import start
        if (code := start(sys.argv[1:])) is not None:
            return code
    argv = join_negative_values(sys.argv[1:] if argv is None else argv)
    parser = build_parser(command_named(argv))
    args = parser.parse_args(argv)
    if args.command is None:
        commands = _available_commands(DEFAULT_COMMANDS)
        default = next((name for name in DEFAULT_COMMANDS if name in commands), None)
        if default is None:
            parser.print_help()
            return 0
        args = parser.parse_args([default])
    try:
        return int(args.run(args) or 0)
    except InputError as err:
        print(f"optbench: error: {err}", file=sys.stderr)
        return EXIT_USER_ERROR
    except KeyboardInterrupt:
        print("optbench: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except OSError as err:      # e.g. a full disk under the output or stdout
        print(f"optbench: error: {write_problem(err)}", file=sys.stderr)
        return EXIT_IO_ERROR


#: the status of a command whose output (or an input file) could not be written or
#: read for a reason outside optbench (a full disk, a file system gone)
EXIT_IO_ERROR = 1


def write_problem(err: OSError) -> str:
    """One line for an operating-system error: the file (or stdout) and the reason."""
    where = err.filename if getattr(err, "filename", None) else "the output (stdout)"
    reason = err.strerror or str(err)
    return f"{where}: {reason} (errno {err.errno}); the output is incomplete"


#: sub-commands whose ``run`` has closed every file it wrote and left no thread or
#: child process behind when it returns: their process may end at once
ENDS_AT_ONCE = frozenset({"check", "fit", "backtest", "compare", "hedge", "track"})


#: the cyclic garbage collector's thresholds during a command of :data:`ENDS_AT_ONCE`
#: (Python's default is 700, 10, 10): importing numpy and pandas and building the
#: result create several hundred thousand container objects that live to the end,
#: and the default threshold has the collector walk them again and again (about a
#: fifth of the process's time here); garbage cycles are still collected, less often
ONE_SHOT_GC_THRESHOLD = (50_000, 20, 100)


def entry() -> int:
    """The ``optbench`` program (and ``python -m optbench``): :func:`main` on
    ``sys.argv``. A command of :data:`ENDS_AT_ONCE` runs with the collector's
    thresholds raised (:data:`ONE_SHOT_GC_THRESHOLD`); once its output is flushed the
    process ends there (``os._exit``): the interpreter's own tear-down of numpy,
    pandas and the rest (about a sixth of a second here) does nothing a finished
    command needs. Anything else runs and ends the usual way."""
    named = command_named(sys.argv[1:])
    one_shot = named is not None and len(named) == 1 and named[0] in ENDS_AT_ONCE
    if one_shot:
        import gc
        gc.set_threshold(*ONE_SHOT_GC_THRESHOLD)
    status = main()
    if one_shot:
        _end_now(status)
    return _flushed(status)


def _flushed(status: int) -> int:
    """Flush stdout now, so that a failure to write its last block (a full disk)
    is the one-line error of :func:`write_problem` instead of the interpreter's
    message at exit; a closed pipe is no error."""
    try:
        sys.stdout.flush()
    except BrokenPipeError:
        _silence_stdout()
    except OSError as err:
        _silence_stdout()
        print(f"optbench: error: {write_problem(err)}", file=sys.stderr)
        return status or EXIT_IO_ERROR
    return status


def _silence_stdout() -> None:
    """Point stdout at /dev/null so the interpreter's own flush at exit has nothing
    left to fail on."""
    try:
        null = os.open(os.devnull, os.O_WRONLY)
        os.dup2(null, sys.stdout.fileno())
        os.close(null)
    except (OSError, ValueError):
        pass


def _end_now(status: int) -> None:
    """Flush stdout and stderr and end the process with ``status``. A reader that
    closed the pipe early is no error (as in :func:`main`); any other failure to
    flush returns, so that the usual exit reports it."""
    try:
        sys.stdout.flush()
    except BrokenPipeError:
        pass
    except (OSError, ValueError):
        return
    try:
        sys.stderr.flush()
    except (OSError, ValueError):
        return
    os._exit(status)


if __name__ == "__main__":
    raise SystemExit(entry())
