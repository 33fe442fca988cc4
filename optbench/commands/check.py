"""``optbench check CHAIN``: load and validate a chain, report what was used and why
the rest was rejected.

CHAIN is a chain file (CSV or Parquet) or a scenario folder (its ``meta.toml``
supplies spot, as-of date, rate and yield where the file does not). Output: a
terminal report (counts, counts by reason, warnings, the first rejected rows),
``--format json`` (the ``quality`` object at top level plus underlying, asof,
spot, source, expiries and the first rejected rows) or ``--format csv`` (every
rejected row). Exit status 0 whatever the quotes hold; 2 for user errors.
"""
from __future__ import annotations

import argparse
import io
import json
import math
from pathlib import Path

from optbench.commands.common import (add_market_overrides, add_output_options,
                                      market_overrides, output_plan, parse_positive,
                                      whole_number, write_outputs)






def add_parser(subparsers) -> argparse.ArgumentParser:
    parser = subparsers.add_parser(
        "check", help="load and validate a chain: counts, rejected rows and reasons",
        description=("Load and validate an option chain (a CSV/Parquet file or a scenario "
                     "folder). Every quote is used or rejected with one named reason; "
                     "usable quotes that deserve a look are flagged."))
    parser.add_argument("chain", metavar="CHAIN", help="chain file or scenario folder")
    add_output_options(parser, formats=("table", "json", "csv", "xlsx"))
    add_market_overrides(parser)
    parser.add_argument("--max-spread", dest="max_spread", type=parse_positive, default=None,
                        help="largest accepted (ask-bid)/mid, a decimal (default 1.0 = 100%%)")
    parser.add_argument("--any-spread", dest="any_spread", action="store_true",
                        help="accept any bid-ask spread")
    parser.add_argument("--rows", type=whole_number(0), default=10,
                        help="how many rejected rows to show (default 10; csv shows all)")
    parser.set_defaults(run=run)
    return parser


def _load(args):
    from optbench.data.chain import DEFAULT_MAX_SPREAD, load_chain
    from optbench.data.scenario import read_meta
    path = Path(args.chain)
    kwargs = market_overrides(args)
    dividends = kwargs.pop("dividends", None)
    kwargs["max_spread"] = None if args.any_spread else (
        args.max_spread if args.max_spread is not None else DEFAULT_MAX_SPREAD)
    folder = path if path.is_dir() else path.parent
    meta = read_meta(folder) if (folder / "meta.toml").is_file() else {}
    from optbench.data.dividends import resolve_dividends
    kwargs["dividends"] = resolve_dividends(dividends, meta, folder / "meta.toml")
    return load_chain(path, meta=meta, holidays=meta.get("holidays", ()), **kwargs)


def _cell(value) -> object:
    if value is None:
        return None
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if hasattr(value, "item"):
        try:
            value = value.item()
        except (ValueError, AttributeError):
            pass
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if value != value:  # pandas NA/NaT
        return None
    return value if isinstance(value, (int, float, str, bool)) else str(value)


def _rejected_records(chain, limit: int | None) -> list[dict]:
    frame = chain.rejected if limit is None else chain.rejected.head(limit)
    fixed = {"line", "reason", "detail", "side"}
    out = []
    for rec in frame.to_dict(orient="records"):
        row = {k: _cell(rec[k]) for k in ("line", "reason", "detail", "side") if k in rec}
        row["fields"] = {str(k): _cell(v) for k, v in rec.items() if k not in fixed}
        out.append(row)
    return out


def _expiries(chain) -> list[dict]:
    q = chain.quotes
    if q.empty:
        return []
    g = q.groupby("expiry", sort=True)
    out = []
    for exp, part in g:  # one iteration per expiry, not per quote
        out.append({"expiry": exp.date().isoformat(),
                    "calendar_days": int(part["calendar_days"].iloc[0]),
                    "quotes": int(len(part)), "calls": int(part["is_call"].sum()),
                    "puts": int((~part["is_call"]).sum()),
                    "strike_min": float(part["strike"].min()),
                    "strike_max": float(part["strike"].max())})
    return out


def report_dict(chain, rows: int) -> dict:
    """The ``check`` JSON document."""
    return {
        "source": chain.source, "underlying": chain.underlying,
        "asof": chain.asof.isoformat(), "spot": chain.spot, "rate": chain.rate,
        "div_yield": chain.div_yield,
        "sources": {"spot": chain.spot_source, "asof": chain.asof_source,
                    "rate": chain.rate_source, "div_yield": chain.div_yield_source,
                    "style": chain.style_source, "multiplier": chain.multiplier_source},
        "layout": chain.layout,
        "quality": chain.quality.as_dict(),
        "expiries": _expiries(chain),
        "rejected_rows": _rejected_records(chain, rows),
        "notes": list(chain.notes),
    }


def _table_text(chain, rows: int) -> str:
    from rich.console import Console
    from rich.table import Table

    from optbench.data.validate import REASONS, WARNINGS
    q = chain.quality
    buf = io.StringIO()
    console = Console(file=buf, width=120, color_system=None, highlight=False)
    console.print(f"{chain.source}  ({chain.layout} layout)")
    console.print(f"{chain.underlying or '(underlying not named)'}  as of "
                  f"{chain.asof.isoformat()} [{chain.asof_source}]  spot {chain.spot:,.2f} "
                  f"[{chain.spot_source}]  rate {100 * chain.rate:.2f}% [{chain.rate_source}]"
                  f"  div {100 * chain.div_yield:.2f}% [{chain.div_yield_source}]",
                  markup=False)
    used = chain.quotes
    styles = "/".join(sorted(map(str, used["style"].unique()))) or "–"
    mults = "/".join(f"{m:g}" for m in sorted(used["multiplier"].unique())) or "–"
    console.print(f"style {styles} [{chain.style_source}]  multiplier {mults} "
                  f"[{chain.multiplier_source}]", markup=False)
    n_rej = sum(q.rejected.values())
    console.print(f"quotes read {q.rows_in}, used {q.rows_used}, rejected {n_rej}; "
                  f"{len(chain.expiries)} expiries")
    for title, head, counts, meanings in (("Rejected, by reason", "reason", q.rejected, REASONS),
                                          ("Kept but flagged", "flag", q.warnings, WARNINGS)):
        if counts:
            t = Table(title=title, title_justify="left")
            t.add_column(head)
            t.add_column("rows", justify="right")
            t.add_column("meaning")
            for code, count in counts.items():
                t.add_row(code, str(count), meanings[code])
            console.print(t)
    recs = _rejected_records(chain, rows)
    if recs:
        shown = f"first {len(recs)} of {n_rej}" if n_rej > len(recs) else f"all {n_rej}"
        t = Table(title=f"Rejected rows ({shown})", title_justify="left")
        for c in ("line", "reason", "detail", "input"):
            t.add_column(c, justify="right" if c == "line" else "left",
                         overflow="fold")
        for r in recs:
            fields = ", ".join(f"{k}={v}" for k, v in r["fields"].items() if v is not None)
            side = f"{r['side']} side: " if r.get("side") else ""
            t.add_row(str(r["line"]), r["reason"], side + str(r["detail"]), fields)
        console.print(t)
    for note in chain.notes:
        console.print(f"note: {note}", markup=False)
    return buf.getvalue()


def run(args: argparse.Namespace) -> int:
    plan = output_plan(args)
    for path, fmt in plan:
        if fmt == "xlsx" and path is None:
            from optbench.errors import InputError
            raise InputError("--format", "xlsx writes a file: give -o FILE")
    chain = _load(args)
    write_outputs(args, lambda fmt: render(chain, args, fmt), plan)
    return 0


def render(chain, args: argparse.Namespace, fmt: str):
    """``check`` in ``fmt``: the JSON document, every rejected row as CSV (with its
    notes), the workbook (rejected rows, reasons, expiries, notes) or the report."""
    if fmt == "json":
        from optbench.report.jsonout import clean
        return json.dumps(clean(report_dict(chain, args.rows)), indent=2, allow_nan=False)
    if fmt == "csv":
        from optbench.report.csv import frame_csv
        from optbench.report.notes import chain_notes
        return frame_csv(chain.rejected, chain_notes(chain, "optbench check: rejected rows"))
    if fmt == "xlsx":
        from optbench.report.files import StreamedFile
        from optbench.report.xlsx import chain_xlsx
        expiries = _expiries(chain)
        return StreamedFile(lambda f: chain_xlsx(chain, expiries, f))
    return _table_text(chain, args.rows)
