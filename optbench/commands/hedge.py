"""``optbench hedge``: what protecting a portfolio with listed options costs, against
what the fitted model says the protection is worth.

Structures: a protective put, a put spread (two strikes) or a collar (the put funded
by a call). The arguments are checked before any model is fitted, so a bad value gives
its one-line error at once. Every output carries the caution.
"""
from __future__ import annotations

import argparse
import sys

from optbench.commands.common import (add_output_options, drift_options, fraction,
                                      market_overrides, money, parse_date, whole_number,
                                      write_outputs)
from optbench.commands.compare import (FORMATS, add_chain_arguments, chain_source,
                                       check_file_formats, progress_printer)
from optbench.errors import InputError

CSV_TABLES = ("menu", "greeks", "grid", "holdings", "loss")
#: --menu-sort: column and direction (best first)
MENU_SORT = {"expiry": ("expiry", True), "cost": ("overpay", True),
             "protection": ("es99_reduction", False),
             "cost-per-protection": ("cost_per_reduction", True),
             "premium": ("premium_paid", True)}


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
    h.add_argument("--portfolio", default=None, metavar="VALUE", type=money,
                   help="portfolio value in money (10000000, 10,000,000, 10m, 2.5bn); "
                        "optional with --holdings by quantity or --portfolio-history")
    h.add_argument("--beta", default=None, help="beta of the portfolio to the underlying "
                                                "(default: 1.0, or estimated from "
                                                "--holdings / --portfolio-history)")
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
    add_portfolio_arguments(parser)
    parser.add_argument("--table", choices=("summary", "legs", "scenarios") + CSV_TABLES,
                        default="summary", help="which table CSV writes (default: summary)")
    add_output_options(parser, formats=FORMATS)
    parser.set_defaults(run=run)
    return parser


def add_portfolio_arguments(parser: argparse.ArgumentParser) -> None:
    """The portfolio's own data, the protection menu and the user's scenarios."""
    p = parser.add_argument_group("portfolio (beta and basis risk from history)")
    src = p.add_mutually_exclusive_group()
    src.add_argument("--holdings", metavar="FILE", default=None,
                     help="holdings file: symbol, quantity or weight, optional price")
    src.add_argument("--portfolio-history", dest="portfolio_history", metavar="FILE",
                     default=None, help="history of the portfolio's value: date, value")
    p.add_argument("--histories", metavar="PATH", default=None,
                   help="the holdings' closes: a folder of <symbol>.csv or one wide CSV "
                        "(default: holdings_history.csv or histories/ beside --holdings)")
    p.add_argument("--beta-window", dest="beta_window", type=whole_number(20), default=252,
                   metavar="N", help="daily returns for the beta (default: 252, one year)")
    p.add_argument("--menu", action="store_true",
                   help="protection menu: every expiry in --menu-days x floors 80-100%% x "
                        "put, put spread, collar, with the efficient set")
    p.add_argument("--menu-days", dest="menu_days", default="30:366", metavar="MIN:MAX",
                   help="calendar days of the menu's expiries (default: 30:366)")
    p.add_argument("--menu-rows", dest="menu_rows", choices=("efficient", "all"),
                   default="efficient", help="menu rows in the table (default: efficient)")
    p.add_argument("--menu-sort", dest="menu_sort", choices=tuple(MENU_SORT),
                   default="expiry", help="order of the menu's rows in every view "
                                          "(default: expiry)")
    p.add_argument("--moves", default=None, metavar="LIST",
                   help="underlying moves for the scenarios, written with '=' when they "
                        "start with a minus: --moves=-0.3,-0.2,0.1 or --moves=FROM:TO:STEP "
                        "(default: -0.30:0.10:0.05)")
    p.add_argument("--vol-shocks", dest="vol_shocks", default=None, metavar="POINTS",
                   help="implied-vol shocks in vol points, e.g. 5,10 (each applied up and "
                        "down); revalues the legs at --horizon-days")
    p.add_argument("--horizon-days", dest="horizon_days", type=whole_number(0), default=0,
                   metavar="N", help="calendar days from today of the vol-shocked "
                                     "scenarios (default: 0, at once)")
    p.add_argument("--loss-level", dest="loss_level", default=None, metavar="VALUE",
                   help="loss in money whose probability is shown (default: 10%% of value)")


def parse_moves(text: str | None, source: str = "--moves") -> tuple[float, ...]:
    """``a,b,c`` or ``FROM:TO:STEP`` (decimals; ``%`` allowed) as a sorted tuple."""
    from optbench.analysis.portfolio.scenarios import DEFAULT_MOVES
    if text is None:
        return DEFAULT_MOVES

    def num(x: str) -> float:
        x = x.strip()
        try:
            return float(x[:-1]) / 100 if x.endswith("%") else float(x)
        except ValueError:
            raise InputError(source, f"not a number: {x!r}") from None
    if ":" in text:
        parts = text.split(":")
        if len(parts) != 3:
            raise InputError(source, f"give FROM:TO:STEP, not {text!r}")
        a, b, step = (num(x) for x in parts)
        if step <= 0 or b < a or (b - a) / step > 1000:
            raise InputError(source, f"FROM:TO:STEP needs FROM <= TO and a positive STEP "
                                     f"(at most 1000 points), not {text!r}")
        n = int(round((b - a) / step)) + 1
        values = [round(a + i * step, 10) for i in range(n)]
    else:
        values = [num(x) for x in text.split(",") if x.strip()]
    if not values:
        raise InputError(source, "no value given")
    if any(v <= -1 for v in values):
        raise InputError(source, "a move must be above -100%")
    return tuple(sorted(set(values)))


def _menu_days(text: str) -> tuple[int, int]:
    try:
        lo, hi = (int(x) for x in text.split(":"))
    except ValueError:
        raise InputError("--menu-days", f"give MIN:MAX calendar days, not {text!r}") from None
    if not 0 <= lo <= hi:
        raise InputError("--menu-days", f"needs 0 <= MIN <= MAX, not {text!r}")
    return lo, hi


def _vol_shocks(text: str | None) -> tuple[float, ...]:
    if text is None:
        return ()
    pts = parse_moves(text.replace("%", ""), "--vol-shocks")
    pts = sorted({0.0} | {p for x in pts for p in (abs(x), -abs(x))})
    return tuple(p / 100.0 for p in pts)


def _histories_for(holdings: str, given: str | None):
    from pathlib import Path
    if given is not None:
        return Path(given)
    folder = Path(holdings).parent
    for cand in (folder / "holdings_history.csv", folder / "histories"):
        if cand.exists():
            return cand
    raise InputError("--histories", f"give the holdings' price histories (no "
                                    f"holdings_history.csv or histories/ beside {holdings})")


def load_portfolio(args: argparse.Namespace, comparison):
    """The :class:`~optbench.analysis.portfolio.fit.PortfolioFit` the arguments ask for,
    or None (typed beta)."""
    if args.holdings is None and args.portfolio_history is None:
        return None
    if args.beta is not None:
        raise InputError("--beta", "the beta is estimated from the portfolio's history; use "
                                   "--hedge-ratio to hedge with another ratio")
    from optbench.analysis.portfolio.fit import fit_portfolio
    from optbench.data import holdings as hd
    value = _money("--portfolio", args.portfolio)
    ratio = _money("--hedge-ratio", args.hedge_ratio)
    d = comparison.history["date"].to_numpy()
    r = comparison.history["ret"].to_numpy()
    if args.portfolio_history is not None:
        return fit_portfolio(d, r, value_history=hd.load_value_history(args.portfolio_history),
                             portfolio_value=value, hedge_ratio=ratio, window=args.beta_window)
    h = hd.load_holdings(args.holdings)
    panel = hd.load_price_panel(_histories_for(args.holdings, args.histories), h.symbols)
    return fit_portfolio(d, r, holdings=h, panel=panel, portfolio_value=value,
                         hedge_ratio=ratio, window=args.beta_window)


def _money(name: str, text):
    if text is None:
        return None
    try:
        x = float(text)
    except ValueError:
        raise InputError(name, f"not a number: {text!r}") from None
    if not x > 0 or x == float("inf"):
        raise InputError(name, f"must be a positive number, not {text!r}")
    return x


def run(args: argparse.Namespace) -> int:
    plan = check_file_formats(args)
    from optbench.analysis.compare import compare
    from optbench.analysis.portfolio.plan import portfolio_hedge
    from optbench.analysis.results import HedgeRequest

    with_portfolio = args.holdings is not None or args.portfolio_history is not None
    if args.portfolio is None and not with_portfolio:
        raise InputError("--portfolio", "give the portfolio's value (or --holdings / "
                                        "--portfolio-history)")
    if with_portfolio and args.beta is not None:
        raise InputError("--beta", "the beta is estimated from the portfolio's history; use "
                                   "--hedge-ratio to hedge with another ratio")
    moves = parse_moves(args.moves)
    shocks = _vol_shocks(args.vol_shocks)
    menu_days = _menu_days(args.menu_days)
    loss_level = _money("--loss-level", args.loss_level)
    if args.table in ("menu",) and not args.menu:
        raise InputError("--table", "menu needs --menu")
    # the request is checked before any model is fitted (a placeholder value of 1 stands
    # for a portfolio whose value comes from its holdings)
    request = HedgeRequest(portfolio_value=args.portfolio if args.portfolio is not None else 1.0,
                           beta=args.beta if args.beta is not None else 1.0,
                           hedge_ratio=args.hedge_ratio, floor=args.floor,
                           expiry=args.expiry, days=args.days, structure=args.structure,
                           lower_floor=args.lower_floor, call_strike=args.call_strike,
                           multiplier=args.multiplier)
    n_paths = args.paths or 20000
    say = progress_printer()
    comparison = compare(chain_source(args), args.history, model=args.model,
                         dist=args.dist, mean=args.mean, n_paths=min(n_paths, 2000),
                         seed=args.seed, progress=say, floor=request.floor,
                         **drift_options(args), **market_overrides(args))
    portfolio = load_portfolio(args, comparison)
    if say:
        say(f"hedge estimates over {n_paths:,} paths")
    result = portfolio_hedge(comparison, request, portfolio=portfolio, menu=args.menu,
                             menu_days=menu_days, moves=moves, vol_shocks=shocks,
                             horizon_days=args.horizon_days, loss_level=loss_level,
                             n_paths=n_paths, seed=args.seed)
    if result.menu is not None and args.menu_sort != "expiry":
        import dataclasses
        col, ascending = MENU_SORT[args.menu_sort]
        frame = result.menu.frame.sort_values(col, ascending=ascending, kind="stable",
                                              na_position="last").reset_index(drop=True)
        result = dataclasses.replace(result, menu=dataclasses.replace(result.menu, frame=frame))
    write_outputs(args, lambda fmt: render(result, args, fmt), plan)
    return 0


def render(result, args: argparse.Namespace, fmt: str | None = None):
    """The hedge estimate's own view, followed by the portfolio sections."""
    estimate = result.estimate
    fmt = fmt or args.format
    if fmt == "json":
        from optbench.report.jsonout import dumps
        return dumps(result, kind="hedge")
    from optbench.report import portfolio as pv
    if fmt == "csv":
        if args.table in CSV_TABLES:
            return pv.portfolio_csv(result, args.table)
        from optbench.report.csv import hedge_csv
        return hedge_csv(estimate, args.table)
    if fmt == "xlsx":
        from optbench.report.files import StreamedFile
        from optbench.report.xlsx import hedge_xlsx
        return pv.add_xlsx_sheets(hedge_xlsx(estimate), result)
    if fmt == "md":
        from optbench.report.markdown import hedge_markdown
        return hedge_markdown(estimate) + pv.portfolio_markdown(result)
    if fmt == "html":
        from optbench.report.html import hedge_html
        page = hedge_html(estimate)
        cut = page.rfind("</body>")
        return page[:cut] + pv.portfolio_html(result) + page[cut:]
    from optbench.report.tables import hedge_table
    color = sys.stdout.isatty() and not args.output
    return (hedge_table(estimate, color=color)
            + pv.portfolio_table(result, menu_rows=args.menu_rows, color=color))
