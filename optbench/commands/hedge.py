"""``optbench hedge``: what protecting a portfolio with listed options costs, against
what the fitted model says the protection is worth.

Structures: a protective put, a put spread (two strikes) or a collar (the put funded
by a call). The arguments are checked before any model is fitted, so a bad value gives
its one-line error at once. Every output carries the caution.
"""
from __future__ import annotations

import argparse
import sys

from optbench.commands.common import (add_output_options, fraction, market_overrides, money,
                                      parse_date, whole_number, write_output)
from optbench.commands.compare import (FORMATS, add_chain_arguments, chain_source,
                                       check_file_formats, progress_printer)


def add_parser(subparsers) -> argparse.ArgumentParser:
    parser = subparsers.add_parser(
        "hedge", help="hedge-cost estimates: protective put, put spread or collar",
        description=("Hedge-cost estimates for a portfolio: contracts, premium at mid and "
                     "actually paid, value at the forecast vol, the model's expected "
                     "payoff and overpay, probability of payoff, breakeven, P&L "
                     "scenarios at expiry and the cost of rolling the protection for a "
                     "year. Estimates, not advice."))
    add_chain_arguments(parser)
    h = parser.add_argument_group("hedge")
    h.add_argument("--portfolio", required=True, metavar="VALUE", type=money,
                   help="portfolio value in money (10000000, 10,000,000, 10m, 2.5bn)")
    h.add_argument("--beta", default="1.0", help="beta of the portfolio to the underlying "
                                                 "(default: 1.0)")
    h.add_argument("--hedge-ratio", dest="hedge_ratio", default=None,
                   help="ratio to hedge in place of the beta")
    h.add_argument("--floor", default="0.90", type=fraction,
                   help="bought put strike as a fraction of spot: 0.90, 90 or 90%% "
                        "(default: 0.90)")
    when = h.add_mutually_exclusive_group()
    when.add_argument("--expiry", type=parse_date, default=None, metavar="DATE",
                      help="expiry to use (a date in the chain)")
    when.add_argument("--days", type=whole_number(1), default=None, metavar="N",
                      help="use the expiry nearest N calendar days (default: 91)")
    h.add_argument("--structure", choices=("put", "put-spread", "collar"), default="put",
                   help="protection structure (default: put)")
    h.add_argument("--lower-floor", dest="lower_floor", default=None, type=fraction,
                   help="put spread: sold put strike as a fraction of spot "
                        "(default: floor - 0.10)")
    h.add_argument("--call-strike", dest="call_strike", default=None,
                   help="collar: sold call strike (default: the listed call giving a "
                        "net premium nearest zero)")
    h.add_argument("--multiplier", default=None,
                   help="contract multiplier (default: the chain's, usually 100)")
    parser.add_argument("--table", choices=("summary", "legs", "scenarios"),
                        default="summary", help="which table CSV writes (default: summary)")
    add_output_options(parser, formats=FORMATS)
    parser.set_defaults(run=run)
    return parser


def run(args: argparse.Namespace) -> int:
    check_file_formats(args)
    from optbench.analysis.compare import compare
    from optbench.analysis.hedge import hedge_from_comparison
    from optbench.analysis.results import HedgeRequest

    request = HedgeRequest(portfolio_value=args.portfolio, beta=args.beta,
                           hedge_ratio=args.hedge_ratio, floor=args.floor,
                           expiry=args.expiry, days=args.days, structure=args.structure,
                           lower_floor=args.lower_floor, call_strike=args.call_strike,
                           multiplier=args.multiplier)
    n_paths = args.paths or 20000
    say = progress_printer()
    comparison = compare(chain_source(args), args.history, model=args.model,
                         dist=args.dist, mean=args.mean, n_paths=min(n_paths, 2000),
                         seed=args.seed, progress=say, **market_overrides(args))
    if say:
        say(f"hedge estimates over {n_paths:,} paths")
    estimate = hedge_from_comparison(comparison, request, n_paths=n_paths, seed=args.seed)
    write_output(args, render(estimate, args))
    return 0


def render(estimate, args: argparse.Namespace) -> str | bytes:
    fmt = args.format
    if fmt == "json":
        from optbench.report.jsonout import dumps
        return dumps(estimate, kind="hedge")
    if fmt == "csv":
        from optbench.report.csv import hedge_csv
        return hedge_csv(estimate, args.table)
    if fmt == "xlsx":
        from optbench.report.xlsx import hedge_xlsx
        return hedge_xlsx(estimate)
    if fmt == "md":
        from optbench.report.markdown import hedge_markdown
        return hedge_markdown(estimate)
    if fmt == "html":
        from optbench.report.html import hedge_html
        return hedge_html(estimate)
    from optbench.report.tables import hedge_table
    return hedge_table(estimate, color=sys.stdout.isatty() and not args.output)
