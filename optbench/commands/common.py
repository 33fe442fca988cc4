"""Options shared by several sub-commands, and writing their output.

Every command takes ``--format`` and ``-o FILE`` (repeatable: ``-o t.csv -o t.xlsx``
writes both from one run, each in the format its extension names); an ``-o`` that
names one of the command's input files is refused. Commands that read a chain take
the market overrides ``--spot``, ``--asof``, ``--rate``, ``--div-yield``; commands
that fit a volatility model take ``--model``, ``--dist`` and ``--mean``.
"""
from __future__ import annotations

import argparse
import datetime as _dt
import os
import sys
from collections.abc import Callable
from pathlib import Path

from optbench import inputs
from optbench.errors import InputError

TEXT_FORMATS = ("table", "json", "csv", "md", "html")
FILE_ONLY_FORMATS = ("xlsx",)


#: output format named by a file's extension
EXTENSION_FORMATS = {".csv": "csv", ".json": "json", ".xlsx": "xlsx", ".md": "md",
                     ".markdown": "md", ".html": "html", ".htm": "html", ".txt": "table"}

from optbench.report.files import (SCENARIO_FILES, _exists, _same,  # noqa: F401
                                   refuse_input_overwrite)


class _FormatAction(argparse.Action):
    """``--format``: remembers that the user chose it (``args.format_given``)."""

    def __call__(self, parser, namespace, value, option_string=None):
        namespace.format = value
        namespace.format_given = True


class _OutputAction(argparse.Action):
    """``-o FILE``, repeatable: ``args.outputs`` lists them, ``args.output`` is the first."""

    def __call__(self, parser, namespace, value, option_string=None):
        outputs = list(getattr(namespace, "outputs", None) or [])
        outputs.append(value)
        namespace.outputs = outputs
        if getattr(namespace, "output", None) is None:
            namespace.output = value


def add_output_options(parser: argparse.ArgumentParser,
                       formats: tuple[str, ...] = ("table", "json", "csv")) -> None:
    parser.add_argument("--format", "-f", choices=formats, default="table",
                        action=_FormatAction,
                        help="output format (default: table, or the extension of -o)")
    parser.add_argument("-o", "--output", metavar="FILE", default=None, action=_OutputAction,
                        help="write the output to FILE instead of the terminal; repeat to "
                             "write several formats from one run, each named by its "
                             "extension (" + ", ".join(
                                 e for e, f in EXTENSION_FORMATS.items() if f in formats)
                             + "); never one of the command's input files")
    parser.set_defaults(outputs=None, format_given=False, output_formats=tuple(formats))


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


def whole_number(minimum: int = 0, maximum: int | None = None):
    """argparse type for a whole number of at least ``minimum`` (and at most
    ``maximum`` when given)."""
    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"not a whole number: {text!r}") from None
        if value < minimum:
            raise argparse.ArgumentTypeError(f"must be at least {minimum}: {text!r}")
        if maximum is not None and value > maximum:
            raise argparse.ArgumentTypeError(f"must be at most {maximum:,}: {text!r}")
        return value
    parse.__name__ = f"whole number >= {minimum}"
    return parse


#: Most simulated paths a command accepts (beyond it the figures shown do not change,
#: and memory grows with paths x days).
MAX_PATHS = 200_000
#: Longest horizon or tenor in days a command accepts (ten years of calendar days).
MAX_DAYS = 3650
#: Largest random seed (numpy's seeds are non-negative; 2**32 - 1 as in its legacy API).
MAX_SEED = 2**32 - 1


def day_list(example: str, maximum: int = MAX_DAYS):
    """argparse type for comma-separated whole numbers of days, each from 1 to
    ``maximum``; returned sorted without repeats (``example`` goes into the error
    message)."""
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
        if days[-1] > maximum:
            raise argparse.ArgumentTypeError(f"{days[-1]:,} days is beyond the longest "
                                             f"horizon accepted ({maximum:,})")
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
    group.add_argument("--dividends", metavar="FILE", default=None,
                       help="cash dividends of the underlying: a CSV file with ex_date "
                            "and amount columns (default: meta.toml's [[dividends]])")
    add_contract_options(group)
    group.add_argument("--max-strike-ratio", dest="max_strike_ratio", type=parse_float,
                       default=None, metavar="FACTOR",
                       help="reject strikes above FACTOR x spot or below spot / FACTOR "
                            "as implausible (default: 10)")


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
    keys = ("spot", "asof", "rate", "div_yield", "max_strike_ratio", "dividends")
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


def input_paths(args: argparse.Namespace, extra=()) -> list[tuple[str, Path]]:
    """``(argument, path)`` of every argument value that names an existing file or
    folder (the command's inputs: chain, history, scenario or universe folder,
    holdings, ...), plus ``extra`` (inputs the command found itself)."""
    skip = {"output", "outputs", "format", "format_given", "output_formats", "run",
            "command"}
    found = []
    for key, value in vars(args).items():
        if key in skip or key.startswith("_"):
            continue
        for item in (value if isinstance(value, (list, tuple)) else [value]):
            if isinstance(item, (str, os.PathLike)) and str(item):
                path = Path(item).expanduser()
                if _exists(path):
                    found.append((key, path))
    found += [("CHAIN", Path(p)) for p in extra if p is not None and _exists(Path(p))]
    return found


def output_plan(args: argparse.Namespace, extra_inputs=()) -> list[tuple[Path | None, str]]:
    """Where each output goes and in which format: ``[(path or None, format)]``.

    One ``-o`` takes ``--format`` when given, else its extension's format, else the
    table; several ``-o`` each take their extension's format (``--format`` only for
    an extension that names none). A format the command cannot write, an extension
    that names no format, the same file twice, or a file that is one of the
    command's inputs (:func:`refuse_input_overwrite`) is an InputError. Also sets
    ``args.format`` to the first output's format.
    """
    outputs = list(getattr(args, "outputs", None) or [])
    if not outputs and getattr(args, "output", None):
        outputs = [args.output]
    offered = tuple(getattr(args, "output_formats", None) or ())
    given = bool(getattr(args, "format_given", False))
    fmt = getattr(args, "format", None) or "table"
    if not outputs:
        return [(None, fmt)]
    plan: list[tuple[Path | None, str]] = []
    for out in outputs:
        named = EXTENSION_FORMATS.get(Path(out).suffix.lower())
        if given and len(outputs) == 1:
            chosen = fmt
        elif named is not None:
            chosen = named
        elif given or len(outputs) == 1:
            chosen = fmt
        else:
            raise InputError(f"-o {out}", "the extension names no format; use one of "
                             + ", ".join(e for e, f in EXTENSION_FORMATS.items()
                                         if not offered or f in offered))
        if offered and chosen not in offered:
            raise InputError(f"-o {out}", f"this command cannot write {chosen}; it writes "
                                          f"{', '.join(offered)}")
        plan.append((Path(out), chosen))
    seen: list[Path] = []
    for path, _ in plan:
        if any(path.resolve(strict=False) == p.resolve(strict=False) or _same(path, p)
               for p in seen):
            raise InputError(f"-o {path}", "named twice; give each output its own file")
        seen.append(path)
    inputs = input_paths(args, extra_inputs)
    for path, _ in plan:
        refuse_input_overwrite(path, inputs)
    args.format = plan[0][1]
    return plan


def write_outputs(args: argparse.Namespace, render: Callable[[str], object],
                  plan: list[tuple[Path | None, str]] | None = None) -> None:
    """Render once per planned output (``render(format)`` gives text, bytes or a
    :class:`~optbench.report.files.StreamedFile`) and write each; the result behind
    them is computed once by the caller."""
    plan = plan if plan is not None else output_plan(args)
    for path, fmt in plan:
        _write_one(path, render(fmt))


def _write_one(path: Path | None, payload) -> None:
    from optbench.report.files import StreamedFile, sidecar_path, write_payload
    if path is not None:
        written = write_payload(path, payload)
        print(f"optbench: wrote {written}", file=sys.stderr)
        if getattr(payload, "notes", None) and sidecar_path(written).is_file():
            print(f"optbench: wrote {sidecar_path(written)} (the table's notes)",
                  file=sys.stderr)
        return
    if isinstance(payload, (bytes, StreamedFile)):
        raise InputError("--format", "this format writes a file: give -o FILE")
    text = str(payload)
    sys.stdout.write(text if text.endswith("\n") else text + "\n")
    notes = getattr(payload, "notes", None)
    if notes:
        from optbench.report.notes import note_lines
        sys.stdout.flush()
        for line in note_lines(notes):
            if line.split(":", 1)[0] in ("warnings", "failures", "caution", "table",
                                         "asof", "model", "source"):
                print(f"optbench: {line}", file=sys.stderr)


def write_output(args: argparse.Namespace, payload) -> None:
    """Write to ``-o FILE`` (reporting where it went on stderr) or to stdout; an
    ``-o`` naming an input of the command is refused."""
    target = getattr(args, "output", None)
    if target:
        refuse_input_overwrite(target, input_paths(args))
    _write_one(Path(target) if target else None, payload)
