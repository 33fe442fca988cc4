"""Options shared by several sub-commands, and writing their output.

Every command takes ``--format`` and ``-o FILE``; commands that read a chain take
the market overrides ``--spot``, ``--asof``, ``--rate``, ``--div-yield``; commands
that fit a volatility model take ``--model``, ``--dist`` and ``--mean``.
"""
from __future__ import annotations

import argparse
import datetime as _dt
import sys

from optbench.errors import InputError

TEXT_FORMATS = ("table", "json", "csv", "md", "html")
FILE_ONLY_FORMATS = ("xlsx",)


def add_output_options(parser: argparse.ArgumentParser,
                       formats: tuple[str, ...] = ("table", "json", "csv")) -> None:
    parser.add_argument("--format", "-f", choices=formats, default="table",
                        help="output format (default: table)")
    parser.add_argument("-o", "--output", metavar="FILE", default=None,
                        help="write the output to FILE instead of the terminal")


def parse_date(text: str) -> _dt.date:
    """argparse type for ISO dates, with a one-line error."""
    try:
        return _dt.date.fromisoformat(text.strip())
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a date (YYYY-MM-DD): {text!r}") from None


def parse_float(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if value != value or value in (float("inf"), float("-inf")):
        raise argparse.ArgumentTypeError(f"not a finite number: {text!r}")
    return value


def parse_positive(text: str) -> float:
    """argparse type for a finite number above zero."""
    value = parse_float(text)
    if value <= 0:
        raise argparse.ArgumentTypeError(f"must be positive: {text!r}")
    return value


def whole_number(minimum: int = 0):
    """argparse type for a whole number of at least ``minimum``."""
    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"not a whole number: {text!r}") from None
        if value < minimum:
            raise argparse.ArgumentTypeError(f"must be at least {minimum}: {text!r}")
        return value
    parse.__name__ = f"whole number >= {minimum}"
    return parse


def day_list(example: str):
    """argparse type for comma-separated whole numbers of days, each at least 1;
    returned sorted without repeats (``example`` goes into the error message)."""
    def parse(text: str) -> tuple[int, ...]:
        parts = [p.strip() for p in text.split(",") if p.strip()]
        for part in parts:
            if not part.lstrip("-").isdigit():
                raise argparse.ArgumentTypeError(f"not a whole number of days: {part!r} "
                                                 f"(give days like {example})")
        days = sorted({int(p) for p in parts})
        if not days or days[0] < 1:
            raise argparse.ArgumentTypeError(f"give positive days like {example}, not "
                                             f"{text!r}")
        return tuple(days)
    parse.__name__ = "list of days"
    return parse


def add_market_overrides(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("market overrides")
    group.add_argument("--spot", type=parse_float, help="underlying price at quote time")
    group.add_argument("--asof", type=parse_date, help="quote date, YYYY-MM-DD")
    group.add_argument("--rate", type=parse_float,
                       help="risk-free rate, continuously compounded decimal (0.04 = 4%%)")
    group.add_argument("--div-yield", dest="div_yield", type=parse_float,
                       help="dividend yield, continuously compounded decimal")
    group.add_argument("--dividends", metavar="FILE", default=None,
                       help="cash dividends of the underlying: a CSV file with ex_date "
                            "and amount columns (default: meta.toml's [[dividends]])")
    add_contract_options(group)


def add_contract_options(group) -> None:
    """``--style`` and ``--multiplier``: the same for every option of the chain(s)."""
    group.add_argument("--style", choices=("european", "american"), default=None,
                       help="exercise style of every option (default: the chain file's "
                            "column, else meta.toml, else european)")
    group.add_argument("--multiplier", type=parse_positive, default=None,
                       help="contract multiplier of every option (default: the chain "
                            "file's column, else meta.toml, else 100)")


def contract_overrides(args: argparse.Namespace) -> dict:
    """``--style`` and ``--multiplier`` as the user gave them, for the loaders."""
    keys = ("style", "multiplier")
    return {k: getattr(args, k) for k in keys if getattr(args, k, None) is not None}


def market_overrides(args: argparse.Namespace) -> dict:
    """The overrides the user gave (market inputs, style and multiplier), as keyword
    arguments for the loaders."""
    keys = ("spot", "asof", "rate", "div_yield", "dividends")
    return ({k: getattr(args, k) for k in keys if getattr(args, k, None) is not None}
            | contract_overrides(args))


def add_model_options(parser: argparse.ArgumentParser, default_model: str = "auto") -> None:
    group = parser.add_argument_group("volatility model")
    group.add_argument("--model", choices=("garch", "gjr", "egarch", "auto"),
                       default=default_model,
                       help=f"GARCH-family model (default: {default_model}; auto picks by BIC)")
    group.add_argument("--dist", choices=("normal", "t"), default="t",
                       help="innovation distribution (default: t)")
    group.add_argument("--mean", choices=("constant", "zero"), default="constant",
                       help="mean of the daily returns (default: constant)")


def add_drift_options(parser: argparse.ArgumentParser) -> None:
    """``--excess-return`` and ``--drift``: the drift of simulated prices behind expected
    payoffs and probabilities (:mod:`optbench.analysis.drift`)."""
    group = parser.add_argument_group("drift of simulated prices")
    group.add_argument("--excess-return", dest="excess_return", type=parse_float,
                       default=None, metavar="X",
                       help="expected excess return of the underlying a year over the "
                            "risk-free rate less dividend yield, decimal (0.03 = 3%%; "
                            "default: meta.toml's excess_return, else 0)")
    group.add_argument("--drift", choices=("risk-free", "fitted"), default="risk-free",
                       help="risk-free (default): r - q plus the excess return; fitted: "
                            "the volatility model's fitted mean return (mostly noise "
                            "over a few years of history)")


def drift_options(args: argparse.Namespace) -> dict:
    """``drift`` and ``excess_return`` keyword arguments for compare/screen."""
    return {"drift": getattr(args, "drift", "risk-free"),
            "excess_return": getattr(args, "excess_return", None)}


def write_output(args: argparse.Namespace, payload: str | bytes) -> None:
    """Write to ``-o FILE`` (reporting where it went on stderr) or to stdout."""
    target = getattr(args, "output", None)
    if target:
        from optbench.report.files import write_payload
        path = write_payload(target, payload)
        print(f"optbench: wrote {path}", file=sys.stderr)
        return
    if isinstance(payload, bytes):
        raise InputError("--format", "this format writes a file: give -o FILE")
    sys.stdout.write(payload if payload.endswith("\n") else payload + "\n")
