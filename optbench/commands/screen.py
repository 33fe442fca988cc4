"""``optbench screen FOLDER``: many underlyings, one ranked table, in local processes
or on a Dask distributed cluster (``--scheduler``)."""
from __future__ import annotations

import argparse
import sys

from optbench.commands.common import (add_contract_options, add_drift_options,
                                      add_model_options, add_output_options,
                                      contract_overrides, day_list, drift_options, fraction,
                                      output_plan, parse_float, whole_number,
                                      write_outputs)
from optbench.errors import InputError
from optbench.screening.rows import DEFAULT_MODEL

FORMATS = ("table", "json", "csv", "xlsx", "md", "html")



def add_parser(subparsers) -> argparse.ArgumentParser:
    from optbench.screening.rows import COLUMNS
    parser = subparsers.add_parser(
        "screen", help="many underlyings, one ranked table of implied against forecast",
        description=("Screen a folder of scenario folders (one per underlying): at each "
                     "tenor, the nearest listed expiry's ATM implied vol against the "
                     "forecast and its band, the verdict, and the cost of protection "
                     "per 1,000,000 of notional against its expected payoff."))
    parser.add_argument("folder", metavar="FOLDER", help="folder of scenario folders")
    parser.add_argument("--tenors", type=day_list("30,91,182"), default=(30, 91, 182),
                        metavar="DAYS,...", help="target tenors in calendar days "
                                                 "(default: 30,91,182)")
    parser.add_argument("--floor", type=fraction, default=0.90,
                        help="protection floor as a fraction of spot (default: 0.90)")
    parser.add_argument("--sort", choices=COLUMNS, default="iv_minus_forecast",
                        metavar="COLUMN", help="rank by this column (default: "
                                               "iv_minus_forecast)")
    parser.add_argument("--ascending", action="store_true",
                        help="smallest first (default: largest first)")
    parser.add_argument("--workers", type=whole_number(1), default=None,
                        help="local worker processes (default: the number of cores)")
    parser.add_argument("--scheduler", metavar="ADDRESS", default=None,
                        help="run on this Dask distributed scheduler (tcp://host:8786)")
    parser.add_argument("--retries", type=whole_number(0), default=None, metavar="N",
                        help="try an underlying again up to N times when its worker is "
                             "lost or it meets a transient error (default: 2); a "
                             "deterministic error (a broken file) is not retried")
    parser.add_argument("--paths", type=whole_number(100), default=2000,
                        help="simulated paths per underlying (default: 2000)")
    parser.add_argument("--fit-cache", metavar="DIR", default=None,
                        help="keep each underlying's fitted model in DIR; a later screen "
                             "whose history only grew filters from the cached parameters "
                             "instead of refitting (rows say fit_source and fit_date)")
    parser.add_argument("--refit-after", type=whole_number(0), default=None,
                        metavar="DAYS", help="with --fit-cache: refit once more than DAYS "
                                             "returns were added since the cached fit "
                                             "(default: 21)")
    add_model_options(parser, default_model=DEFAULT_MODEL)
    add_drift_options(parser)
    add_contract_options(parser.add_argument_group("every underlying's options"))
    add_output_options(parser, formats=FORMATS)
    parser.set_defaults(run=run)
    return parser


def _progress_bar():
    """A progress bar on stderr when it is a terminal."""
    if not sys.stderr.isatty():
        return None, None
    from rich.console import Console
    from rich.progress import Progress
    bar = Progress(console=Console(stderr=True), transient=True)
    task = bar.add_task("screening", total=None)

    def update(done: int, total: int) -> None:
        bar.update(task, completed=done, total=total)
    return bar, update


def run(args: argparse.Namespace) -> int:
    plan = output_plan(args)
    for path, fmt in plan:
        if fmt in ("xlsx", "html") and path is None:
            raise InputError("--format", f"{fmt} writes a file: give -o FILE")
    from optbench.screening.screen import screen

    bar, update = _progress_bar()
    if bar is not None:
        bar.start()
    try:
        result = screen(args.folder, tenors=args.tenors, floor=args.floor, model=args.model,
                        dist=args.dist, mean=args.mean, sort=args.sort,
                        descending=not args.ascending, workers=args.workers,
                        scheduler=args.scheduler, n_paths=args.paths, progress=update,
                         overrides=contract_overrides(args), **drift_options(args),
                        fit_cache=args.fit_cache, max_filter_days=args.refit_after,
                        **({} if args.retries is None else {"retries": args.retries}))
    finally:
        if bar is not None:
            bar.stop()
    write_outputs(args, lambda fmt: render(result, fmt), plan)
    return 0


def render(result, fmt: str):
    """The screen in ``fmt``: text, CSV text with its notes, or a streamed XLSX."""
    from optbench.report import screen as views
    if fmt == "json":
        return views.screen_json(result)
    if fmt == "csv":
        return views.screen_csv(result)
    if fmt == "xlsx":
        from optbench.report.files import StreamedFile
        return StreamedFile(lambda f: views.screen_xlsx(result, f))
    if fmt == "md":
        return views.screen_markdown(result)
    if fmt == "html":
        return views.screen_html(result)
    return views.screen_table(result)
