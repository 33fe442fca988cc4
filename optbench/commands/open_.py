"""``optbench open``: the terminal workbench on a chain file or a scenario folder.

Takes the same chain, history, market, model and simulation options as
``optbench compare``, plus the quote filter ``--max-spread``. ``optbench`` with no
arguments runs ``open`` with no CHAIN, which opens the bundled demo scenario (the
checkout's ``chains/ZPHX``, or the copy shipped inside an installed package).
"""
from __future__ import annotations

import argparse
from pathlib import Path

from optbench.commands.common import share, whole_number
from optbench.commands.compare import add_chain_arguments
from optbench.errors import InputError


def add_parser(subparsers) -> argparse.ArgumentParser:
    parser = subparsers.add_parser(
        "open", help="open the terminal workbench (default: the bundled demo)",
        description=("Open the terminal workbench on an option chain (a file, or a "
                     "scenario folder with chain.csv and history.csv). Without CHAIN it "
                     "opens the bundled demo scenario. Every key is listed on the help "
                     "screen (?)."))
    add_chain_arguments(parser)
    parser.add_argument("--max-spread", dest="max_spread", type=share, default=None,
                        help="quote filter: widest bid/ask spread kept, as a fraction of "
                             "mid (0.5, 50%% or 50; default: the loader's)")
    parser.add_argument("--universe", metavar="FOLDER", default=None,
                        help="a folder of scenario folders: the workbench opens on its "
                             "screen (key u), and Enter on a row opens that underlying")
    parser.add_argument("--workers", type=whole_number(1), default=None,
                        help="local worker processes for the universe screen "
                             "(default: the number of cores)")
    parser.add_argument("--scheduler", metavar="ADDRESS", default=None,
                        help="address of a running Dask scheduler (tcp://host:8786): the "
                             "universe screen runs on that cluster")
    # no --model/--dist/--mean: the workbench's saved choice (else auto / t / constant)
    parser.set_defaults(run=run, model=None, dist=None, mean=None)
    return parser


def run(args: argparse.Namespace) -> int:
    universe = None
    if args.universe:
        from optbench.screening.universe import find_scenarios
        universe = Path(args.universe)
        scenarios = find_scenarios(universe)          # one-line error if none
    if args.chain:
        chain = Path(args.chain)
    elif universe is not None:
        chain = scenarios[0]
    else:
        from optbench.data.scenario import bundled_demo
        chain = bundled_demo()            # the checkout's chains/ZPHX or the packaged copy
    if not chain.exists():
        raise InputError(chain, "no such file or folder")
    history = Path(args.history) if args.history else None
    if history is not None and not history.is_file():
        raise InputError(history, "no such file")
    # the workbench's settings have no field for these yet: say so rather than ignore them
    for flag, value, where in (("--dividends", getattr(args, "dividends", None),
                                "a [[dividends]] table or dividends = FILE in meta.toml"),
                               ("--max-strike-ratio", getattr(args, "max_strike_ratio", None),
                                "optbench check / compare")):
        if value is not None:
            raise InputError(flag, f"not available in the workbench yet; use {where}")
    if args.max_spread is not None and args.max_spread <= 0:
        raise InputError("--max-spread", f"must be positive, not {args.max_spread:g}")
    # the first run starts before textual is imported and the screen is built
    # (optbench.tui.firstrun): the numbers are computed while the screen comes up
    from optbench.tui import firstrun, session
    options = dict(model=args.model, dist=args.dist, mean=args.mean, spot=args.spot,
                   asof=args.asof, rate=args.rate, div_yield=args.div_yield,
                   max_spread=args.max_spread, hedge_paths=args.paths, seed=args.seed,
                   style=args.style, multiplier=args.multiplier)
    inputs, saved = session.build_inputs(chain, history, **options)
    first = firstrun.start(inputs, saved.planner)
    try:
        from optbench.tui.app import make_app
        app = make_app(chain, history, **options, universe=universe, workers=args.workers,
                       scheduler=args.scheduler, first_run=first)
        app.run()
    finally:
        first.cancel()
    return 0
