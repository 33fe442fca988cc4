"""``optbench track``: how has the rich / fair / cheap verdict done on this
underlying's own past?

Replays the verdict walk-forward over an implied-vol history (a file and/or the
record store written by ``optbench compare --record``) against the price history,
and scores it per tenor. Heavy modules are imported inside ``run``.
"""
from __future__ import annotations

import argparse

from optbench.commands.common import (add_output_options, output_plan, whole_number,
                                      write_outputs)
from optbench.errors import InputError

FORMATS = ("table", "json", "csv", "xlsx", "md", "html")


def add_parser(subparsers) -> argparse.ArgumentParser:
    from optbench.commands.compare import parse_band
    parser = subparsers.add_parser(
        "track", help="track record of the verdict over the underlying's own past",
        description=("Replays the rich / fair / cheap verdict on every past date of an "
                     "implied-vol history, fitting the model only on the returns up to "
                     "that date, and compares it with the realized vol that followed: "
                     "counts, hit rates, calibration (Brier score, reliability), "
                     "Mincer-Zarnowitz and encompassing regressions with Newey-West "
                     "errors, and where today's gap sits in its own history."))
    parser.add_argument("scenario", metavar="SCENARIO", nargs="?", default=None,
                        help="scenario folder with history.csv (and iv_history.csv); "
                             "default: the bundled demo scenario")
    parser.add_argument("--iv-history", dest="iv_history", metavar="FILE", default=None,
                        help="implied-vol history: date, tenor_days or expiry, atm_iv "
                             "[, iv_25d_put, iv_25d_call] (CSV or Parquet)")
    parser.add_argument("--store", metavar="FILE", default=None,
                        help="record store written by 'optbench compare --record'")
    parser.add_argument("--history", metavar="FILE", default=None,
                        help="price history CSV (default: the scenario's history.csv)")
    group = parser.add_argument_group("volatility model")
    group.add_argument("--model", choices=("garch", "gjr", "egarch", "auto"), default="gjr",
                       help="GARCH-family model refitted at each refit (default: gjr; auto "
                            "picks by BIC each time and takes about three times as long)")
    group.add_argument("--dist", choices=("normal", "t"), default="t",
                       help="innovation distribution (default: t)")
    group.add_argument("--mean", choices=("constant", "zero"), default="constant",
                       help="mean of the daily returns (default: constant)")
    group.add_argument("--refit-every", dest="refit_every", type=whole_number(1), default=21,
                       metavar="DAYS", help="trading days between refits (default: 21)")
    parser.add_argument("--band", type=parse_band, default=(0.05, 0.95), metavar="LOW,HIGH",
                        help="quantile levels of the forecast band (default: 0.05,0.95)")
    parser.add_argument("--paths", type=whole_number(100), default=1000,
                        help="simulated paths per refit for P(realized > implied) "
                             "(default: 1000)")
    parser.add_argument("--seed", type=int, default=7, help="random seed (default: 7)")
    parser.add_argument("--min-checked", dest="min_checked", type=whole_number(10),
                        default=40, metavar="N",
                        help="checked observations a tenor needs for its statistics "
                             "(default: 40)")
    parser.add_argument("--buckets", type=whole_number(2), default=5,
                        help="probability buckets of the reliability table (default: 5)")
    parser.add_argument("--table", choices=("tenors", "observations", "verdicts",
                                            "reliability", "regressions"),
                        default="tenors", help="which table CSV writes (default: tenors)")
    add_output_options(parser, formats=FORMATS)
    parser.set_defaults(run=run)
    return parser


def run(args: argparse.Namespace) -> int:
    from optbench.commands.compare import progress_printer
    from optbench.track.build import track

    scenario = args.scenario
    if scenario is None and args.history is None:
        from optbench.data.scenario import bundled_demo
        scenario = bundled_demo()
    plan = output_plan(args, [scenario] if args.scenario is None else [])
    for path, fmt in plan:
        if fmt in ("xlsx", "html") and path is None:
            raise InputError("--format", f"{fmt} writes a file: give -o FILE")
    record = track(scenario, iv_history=args.iv_history, store=args.store,
                   history=args.history, model=args.model, dist=args.dist, mean=args.mean,
                   refit_every=args.refit_every, band=args.band, n_paths=args.paths,
                   seed=args.seed, min_checked=args.min_checked, buckets=args.buckets,
                   progress=progress_printer())
    write_outputs(args, lambda fmt: render(record, args, fmt), plan)
    return 0


def render(record, args: argparse.Namespace, fmt: str | None = None) -> str | bytes:
    from optbench.report import track as view
    fmt = fmt or args.format
    if fmt == "json":
        return view.track_json(record)
    if fmt == "csv":
        return view.track_csv(record, args.table)
    if fmt == "xlsx":
        return view.track_xlsx(record)
    if fmt == "md":
        return view.track_markdown(record)
    if fmt == "html":
        return view.track_html(record)
    return view.track_table(record)
