"""Options shared by several sub-commands, and writing their output.

Every command takes ``--format`` and ``-o FILE``; commands that read a chain take
the market overrides ``--spot``, ``--asof``, ``--rate``, ``--div-yield``; commands
that fit a volatility model take ``--model``, ``--dist`` and ``--mean``.
"""
from __future__ import annotations

import argparse
import datetime as _dt
import sys

from optbench import inputs
from optbench.errors import InputError

TEXT_FORMATS = ("table", "json", "csv", "md", "html")
FILE_ONLY_FORMATS = ("xlsx",)


def add_output_options(parser: argparse.ArgumentParser,
                       formats: tuple[str, ...] = ("table", "json", "csv")) -> None:
    parser.add_argument("--format", "-f", choices=formats, default="table",
                        help="output format (default: table)")
    parser.add_argument("-o", "--output", metavar="FILE", default=None,
                        help="write the output to FILE instead of the terminal")


def typed(parser, label: str, **options):
    """An argparse type from a parser of :mod:`optbench.inputs` (the workbench reads
    the same text the same way); its one-line problem becomes argparse's message."""
    def parse(text: str):
        try:
            return parser(text, label, **options)
        except InputError as err:
            raise argparse.ArgumentTypeError(err.problem) from None
    parse.__name__ = label
    return parse


def parse_date(text: str) -> _dt.date:
    """argparse type for dates: ISO, or the layouts the file loaders read
    (``03/13/2026`` month first), with a one-line error."""
    return typed(inputs.date, "date")(text)


#: argparse types for money (``25m``), fractions of spot (``90``, ``90%``, ``0.90``),
#: rates and yields (``4%``, ``0.04``) and positive shares such as spreads. Money and
#: fractions are read here and checked by the request that uses them (its message
#: names the argument and the allowed range).
money = typed(inputs.money, "amount of money", check=False)
fraction = typed(inputs.fraction, "fraction of spot", check=False)
rate = typed(inputs.rate, "rate")
share = typed(inputs.share, "share")


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
    group.add_argument("--asof", type=parse_date,
                       help="quote date, YYYY-MM-DD (or MM/DD/YYYY)")
    group.add_argument("--rate", type=rate,
                       help="risk-free rate, continuously compounded (0.04, 4%% or 4)")
    group.add_argument("--div-yield", dest="div_yield", type=rate,
                       help="dividend yield, continuously compounded (0.015, 1.5%% or 1.5)")


def market_overrides(args: argparse.Namespace) -> dict:
    """The overrides the user gave, as keyword arguments for the loaders."""
    keys = ("spot", "asof", "rate", "div_yield")
    return {k: getattr(args, k) for k in keys if getattr(args, k, None) is not None}


def add_model_options(parser: argparse.ArgumentParser, default_model: str = "auto") -> None:
    group = parser.add_argument_group("volatility model")
    group.add_argument("--model", choices=("garch", "gjr", "egarch", "auto"),
                       default=default_model,
                       help=f"GARCH-family model (default: {default_model}; auto picks by BIC)")
    group.add_argument("--dist", choices=("normal", "t"), default="t",
                       help="innovation distribution (default: t)")
    group.add_argument("--mean", choices=("constant", "zero"), default="constant",
                       help="mean of the daily returns (default: constant)")


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
