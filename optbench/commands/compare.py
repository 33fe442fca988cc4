"""``optbench compare``: implied against forecast volatility, per expiry and per strike.

Reads a chain (or a scenario folder, which brings its history), fits the volatility
model, and shows the rich / fair / cheap table, or writes it as JSON, CSV, XLSX,
Markdown or an HTML report with figures. Heavy modules are imported inside ``run`` so
that ``optbench --help`` stays fast.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

from optbench.commands.common import (MAX_PATHS, MAX_SEED, add_drift_options,
                                      add_market_overrides, add_model_options,
                                      add_output_options, drift_options, market_overrides,
                                      output_plan, parse_date, parse_float, whole_number,
                                      write_outputs)
from optbench.errors import InputError

FORMATS = ("table", "json", "csv", "xlsx", "md", "html")




def parse_band(text: str) -> tuple[float, float]:
    parts = [p for p in text.replace(" ", "").split(",") if p]
    try:
        lo, hi = (float(p) for p in parts)
    except ValueError:
        raise argparse.ArgumentTypeError(f"give two levels like 0.05,0.95, not {text!r}") from None
    if not 0 < lo < hi < 1:
        raise argparse.ArgumentTypeError(f"levels must satisfy 0 < low < high < 1: {text!r}")
    return lo, hi


def add_chain_arguments(parser: argparse.ArgumentParser) -> None:
    """CHAIN (file or scenario folder; default the bundled demo) and --history."""
    parser.add_argument("chain", metavar="CHAIN", nargs="?", default=None,
                        help="option chain file (CSV/Parquet) or scenario folder "
                             "(default: the bundled demo scenario ZPHX)")
    parser.add_argument("--history", metavar="FILE", default=None,
                        help="price history CSV (date, close); optional when CHAIN's "
                             "folder holds history.csv")
    add_market_overrides(parser)
    add_model_options(parser)
    sim = parser.add_argument_group("simulation")
    sim.add_argument("--paths", type=whole_number(100, MAX_PATHS), default=None,
                     help="simulated paths of the fitted model (default: 2000 for compare, "
                          "20000 for hedge)")
    sim.add_argument("--seed", type=whole_number(0, MAX_SEED), default=7,
                     help="random seed, a whole number from 0 (default: 7)")
    add_drift_options(parser)


def chain_source(args: argparse.Namespace) -> str | Path:
    """CHAIN as given, else the bundled demo scenario (the checkout's ``chains/ZPHX``
    or the copy inside the installed package)."""
    if args.chain is not None:
        return args.chain
    from optbench.data.scenario import bundled_demo
    return bundled_demo()


def progress_printer():
    """Progress lines on stderr when it is a terminal; nothing otherwise."""
    if not sys.stderr.isatty():
        return None
    import time
    start = time.perf_counter()

    def say(text: str) -> None:
        print(f"optbench: {time.perf_counter() - start:5.1f}s {text}…", file=sys.stderr)
    return say


def check_file_formats(args: argparse.Namespace, plan=None) -> list:
    """The output plan (:func:`~optbench.commands.common.output_plan`), with the
    default chain folder counted as an input; xlsx and html need ``-o FILE``."""
    if plan is None:
        plan = output_plan(args, [chain_source(args)] if args.chain is None else [])
    for path, fmt in plan:
        if fmt in ("xlsx", "html") and path is None:
            raise InputError("--format", f"{fmt} writes a file: give -o FILE")
    return plan


def add_parser(subparsers) -> argparse.ArgumentParser:
    parser = subparsers.add_parser(
        "compare", help="implied against forecast vol: rich / fair / cheap per expiry",
        description=("Is the volatility the chain charges rich or cheap against the "
                     "fitted GARCH-family forecast? Per expiry: ATM, 25-delta and "
                     "model-free implied vols, the forecast and its band, realized vol, "
                     "the cone, the variance premium and a verdict; per strike: the edge "
                     "of each quote against its value at the forecast vol."))
    add_chain_arguments(parser)
    parser.add_argument("--band", type=parse_band, default=(0.05, 0.95), metavar="LOW,HIGH",
                        help="quantile levels of the forecast band (default: 0.05,0.95)")
    parser.add_argument("--expiry", type=parse_date, action="append", default=None,
                        metavar="DATE", help="also show the per-strike table of this "
                                             "expiry (repeatable; CSV: only these rows)")
    parser.add_argument("--table", choices=("expiries", "strikes"), default="expiries",
                        help="which table CSV writes (default: expiries)")
    parser.add_argument("--floor", type=parse_float, default=0.90,
                        help="protection floor as a fraction of spot: the put judged "
                             "beside the 25-delta put (default: 0.90)")
    parser.add_argument("--backtest", action="store_true",
                        help="add the out-of-sample check over the last year (HTML "
                             "reports always include it)")
    parser.add_argument("--record", metavar="FILE", default=None,
                        help="also append each expiry's row to this record store (an "
                             "SQLite file, created when missing) for 'optbench track'")
    add_output_options(parser, formats=FORMATS)
    parser.set_defaults(run=run)
    return parser


def run(args: argparse.Namespace) -> int:
    plan = check_file_formats(args)
    from optbench.analysis.compare import compare

    html = any(fmt == "html" for _, fmt in plan)
    comparison = compare(chain_source(args), args.history, model=args.model, dist=args.dist,
                         mean=args.mean, band=args.band, n_paths=args.paths or 2000,
                         seed=args.seed, backtest=bool(args.backtest or html),
                         progress=progress_printer(), floor=args.floor,
                         **drift_options(args), **market_overrides(args))
    for e in args.expiry or ():
        comparison.expiry_row(e)        # an expiry not in the chain -> one-line error
    if getattr(args, "record", None):
        from optbench.track.store import record_comparison
        record_comparison(args.record, comparison)
        print(f"optbench: recorded {len(comparison.expiries)} expiries of "
              f"{comparison.underlying} {comparison.asof.isoformat()} in {args.record}",
              file=sys.stderr)
    write_outputs(args, lambda fmt: render(comparison, args, fmt), plan)
    return 0


def render(comparison, args: argparse.Namespace, fmt: str | None = None):
    """The output in ``fmt`` (default ``args.format``): text, CSV text with its
    notes, or a streamed XLSX file."""
    fmt = fmt or args.format
    expiries = [e.isoformat() for e in (args.expiry or ())]
    if fmt == "json":
        from optbench.report.jsonout import dumps
        return dumps(comparison, kind="compare")
    if fmt == "csv":
        from optbench.report.csv import comparison_csv
        return comparison_csv(comparison, args.table,
                              expiries if args.table == "strikes" else None)
    if fmt == "xlsx":
        from optbench.report.files import StreamedFile
        from optbench.report.xlsx import comparison_xlsx
        return StreamedFile(lambda f: comparison_xlsx(comparison, f))
    if fmt == "md":
        from optbench.report.markdown import comparison_markdown
        return comparison_markdown(comparison, strikes_for=expiries)
    if fmt == "html":
        from optbench.report.html import comparison_html
        return comparison_html(comparison)
    from optbench.report.tables import comparison_table
    import shutil
    color = sys.stdout.isatty() and not args.output
    return comparison_table(comparison, strikes_for=expiries, color=color,
                            width=shutil.get_terminal_size((140, 40)).columns
                            if sys.stdout.isatty() else 140)
