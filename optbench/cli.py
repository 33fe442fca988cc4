"""The ``optbench`` command line: parse arguments, call the core, render.

Each sub-command lives in ``optbench/commands/<name>.py`` and provides
``add_parser(subparsers)`` and ``run(args) -> int``. This module only wires them
together and turns user errors into one line on stderr with exit status 2.
"""
from __future__ import annotations

import argparse
import importlib
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


def _available_commands() -> dict[str, object]:
    """Import the command modules that exist in this build."""
    found = {}
    for name, module in COMMANDS.items():
        try:
            found[name] = importlib.import_module(f"optbench.commands.{module}")
        except ModuleNotFoundError as err:
            if err.name != f"optbench.commands.{module}":
                raise
    return found


class OneLineParser(argparse.ArgumentParser):
    """An argument parser whose usage errors are one line and exit status 2."""

    def error(self, message: str) -> None:  # type: ignore[override]
        self.exit(EXIT_USER_ERROR, f"{self.prog}: error: {message}\n")


def build_parser() -> argparse.ArgumentParser:
    parser = OneLineParser(
        prog="optbench",
        description=("Is the volatility an option chain charges rich or cheap against "
                     "a GARCH-family forecast of the underlying, and what does that "
                     "cost on a hedge? With no command, opens the workbench on the "
                     "bundled demo scenario."),
    )
    parser.add_argument("--version", action="version", version=f"optbench {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, module in _available_commands().items():
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
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        commands = _available_commands()
        default = commands.get("open") or commands.get("compare")
        if default is None:
            parser.print_help()
            return 0
        args = parser.parse_args(["open" if "open" in commands else "compare"])
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


if __name__ == "__main__":
    raise SystemExit(main())
