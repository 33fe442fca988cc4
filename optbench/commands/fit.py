"""``optbench fit HISTORY``: fit the volatility model and show its forecast term structure.

Prints the parameters with robust standard errors, the diagnostics (log-likelihood,
AIC/BIC, persistence, half-life, long-run vol, convergence and any fallback) and the
forecast volatility over each horizon in trading days with its 5%-95% band from
parameter uncertainty.
"""
from __future__ import annotations

import argparse
import io
import json

from optbench.commands.common import (add_model_options, add_output_options, day_list,
                                      output_plan, write_outputs)
from optbench.errors import InputError

DEFAULT_HORIZONS = (5, 10, 21, 63, 126, 252)
CAUTION = ("Model estimates from past prices, not advice. Decisions belong with your "
           "licensed advisers and the rules of your exchange and broker.")



def add_parser(subparsers) -> argparse.ArgumentParser:
    parser = subparsers.add_parser(
        "fit", help="fit the volatility model: parameters, diagnostics, term structure",
        description=("Fit a GARCH-family model to the daily log returns of HISTORY and "
                     "show its parameters (robust standard errors), diagnostics and the "
                     "forecast volatility term structure with a 5%-95% band from "
                     "parameter uncertainty."))
    parser.add_argument("history", metavar="HISTORY",
                        help="history CSV/Parquet (date, close) or a scenario folder")
    add_model_options(parser)
    parser.add_argument("--horizons", type=day_list("5,21,63"), default=DEFAULT_HORIZONS,
                        help="trading-day horizons, comma-separated "
                             "(default: 5,10,21,63,126,252)")
    add_output_options(parser, formats=("table", "json", "csv", "xlsx"))
    parser.set_defaults(run=run)
    return parser


def fit_report(history, model: str, dist: str, mean: str, horizons) -> dict:
    """Fit and assemble the JSON document of ``optbench fit`` (DESIGN.md keys)."""
    from optbench.analysis import sanity
    from optbench.volatility.garch import fit_garch

    warnings = [f"history: {issue}" for issue in history.issues]
    warnings += sanity.history_findings(history)
    try:
        fit = fit_garch(history.returns, model=model, dist=dist, mean=mean)
    except InputError as err:
        raise InputError(history.source, err.problem) from None
    vols = fit.forecast_vol(list(horizons))
    low, high = fit.forecast_band(list(horizons))
    if fit.fallback_reason:
        warnings.append(f"volatility model: {fit.fallback_reason}")
    warnings += [f"volatility model: {w}" for w in getattr(fit, "warnings", ())]
    for h, v in zip(horizons, vols):
        if sanity.implausible_forecast(v):
            warnings.append(f"{int(h)} trading days: forecast vol {100 * float(v):,.4g}% is "
                            f"outside the plausible range {sanity.PLAUSIBLE_VOL[0]:.0%} to "
                            f"{sanity.PLAUSIBLE_VOL[1]:.0%} — check the price history")
    dates = history.dates
    return {
        "source": str(history.source),
        "first_date": str(dates[0]) if len(dates) else None,
        "last_date": str(dates[-1]) if len(dates) else None,
        "n_returns": int(fit.n_obs),
        "model": fit.to_dict(),
        "last_vol": float((252 * fit.last_variance) ** 0.5),
        "term_structure": [
            {"trading_days": int(h), "forecast_vol": float(v), "low": float(lo),
             "high": float(hi)}
            for h, v, lo, hi in zip(horizons, vols, low, high)],
        "issues": list(history.issues),
        "dropped": dict(getattr(history, "dropped", {}) or {}),
        "warnings": warnings,
        "caution": CAUTION,
    }


def run(args: argparse.Namespace) -> int:
    from optbench.data.history import load_history

    plan = output_plan(args)
    for path, fmt in plan:
        if fmt == "xlsx" and path is None:
            raise InputError("--format", "xlsx writes a file: give -o FILE")
    history = load_history(args.history)
    doc = fit_report(history, args.model, args.dist, args.mean, args.horizons)
    write_outputs(args, lambda fmt: render(doc, fmt), plan)
    return 0


def render(doc: dict, fmt: str):
    """``fit`` in ``fmt``: JSON, the term structure as CSV (with its notes), the
    workbook, or the report."""
    if fmt == "json":
        from optbench.report.jsonout import clean
        return json.dumps(clean(doc), indent=2, allow_nan=False)
    if fmt == "csv":
        return term_structure_csv(doc)
    if fmt == "xlsx":
        from optbench.report.files import StreamedFile
        from optbench.report.xlsx import fit_xlsx
        return StreamedFile(lambda f: fit_xlsx(doc, f))
    return table_text(doc)


def term_structure_csv(doc: dict):
    """One row per horizon: trading_days, forecast_vol, low, high, model, dist."""
    from optbench.report.csv import write_rows
    from optbench.report.notes import fit_notes
    m = doc["model"]
    rows = ([row["trading_days"], row["forecast_vol"], row["low"], row["high"], m["name"],
             m["dist"]] for row in doc["term_structure"])
    return write_rows(["trading_days", "forecast_vol", "low", "high", "model", "dist"], rows,
                      fit_notes(doc, "optbench fit: forecast term structure"))


def _pct(x, digits=2) -> str:
    return "-" if x is None else f"{100 * x:.{digits}f}"


def _g(x, digits=6) -> str:
    return "-" if x is None else f"{x:.{digits}g}"


def table_text(doc: dict, width: int = 100) -> str:
    from rich.console import Console
    from rich.table import Table

    m = doc["model"]
    buf = io.StringIO()
    con = Console(file=buf, width=width, color_system=None, highlight=False)
    con.print(f"{doc['source']}: {doc['n_returns']} daily returns, {doc['first_date']} to "
              f"{doc['last_date']}")
    con.print(f"model {m['name']} / {m['dist']} innovations / {m['mean']} mean — "
              f"{'converged' if m['converged'] else 'NOT converged'} ({m['message']})")
    if m["fallback_reason"]:
        con.print(f"note: {m['fallback_reason']}")
    if m.get("candidates"):
        shown = ", ".join(f"{k} {v:,.1f}" if v is not None else f"{k} failed"
                          for k, v in m["candidates"].items())
        con.print(f"chosen by lowest BIC among: {shown}")
    for warning in doc["warnings"]:
        con.print(f"warning: {warning}", markup=False)

    con.print("Parameters (decimal units; robust standard errors):")
    par = Table()
    for c in ("parameter", "estimate", "std. error", "t"):
        par.add_column(c, justify="right")
    for k, v in m["params"].items():
        se = m["std_errors"].get(k)
        t = None if (se in (None, 0) or v is None) else v / se
        par.add_row(k, _g(v), _g(se, 3), "-" if t is None else f"{t:.2f}")
    con.print(par)

    con.print("Diagnostics:")
    diag = Table()
    for c in ("log-lik.", "AIC", "BIC", "persistence", "half-life (days)",
              "long-run vol %", "vol now %"):
        diag.add_column(c, justify="right")
    diag.add_row(f"{m['loglik']:,.2f}", f"{m['aic']:,.2f}", f"{m['bic']:,.2f}",
                 _g(m["persistence"], 5),
                 "-" if m["half_life_days"] is None else f"{m['half_life_days']:.1f}",
                 _pct(m["long_run_vol"]), _pct(doc["last_vol"]))
    con.print(diag)

    con.print("Forecast volatility, annualised % (band: 5%-95% from parameter uncertainty):")
    ts = Table()
    for c in ("trading days", "forecast %", "low %", "high %"):
        ts.add_column(c, justify="right")
    for row in doc["term_structure"]:
        ts.add_row(str(row["trading_days"]), _pct(row["forecast_vol"]), _pct(row["low"]),
                   _pct(row["high"]))
    con.print(ts)
    con.print(doc["caution"])
    return buf.getvalue()
