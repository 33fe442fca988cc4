"""``optbench backtest HISTORY --split DATE``: out-of-sample check of the volatility model.

Fits the model on the returns up to the split date, holds the parameters (or
re-estimates them every ``--refit-every`` days) and reports the +-k sigma band
count, one-day VaR exceedances with coverage tests and traffic-light zones,
residual statistics, the largest surprises and forecast accuracy over 1, 5 and 21
trading days. Without ``--split`` the last 504 returns (about two years) are held
out, or as many as leave 250 returns to fit on.
"""
from __future__ import annotations

import argparse
import io
import json

import numpy as np

from optbench.commands.common import (add_model_options, add_output_options, output_plan,
                                      parse_date, parse_positive, whole_number, write_outputs)

DEFAULT_OUT_OF_SAMPLE = 504   # trading days held out when --split is not given
CAUTION = ("Model check on past data: estimates, not advice. Decisions belong with your "
           "licensed advisers and the rules of your exchange and broker.")






def add_parser(subparsers) -> argparse.ArgumentParser:
    parser = subparsers.add_parser(
        "backtest", help="out-of-sample check of the volatility model",
        description=("Fit the volatility model on the history up to --split, hold the "
                     "parameters and roll one-day-ahead forecasts through the rest: "
                     "+-k sigma band count, VaR exceedances (Kupiec, Christoffersen, "
                     "Basel traffic-light zones), residual statistics, largest surprises "
                     "and forecast accuracy against EWMA and trailing realized variance."))
    parser.add_argument("history", metavar="HISTORY",
                        help="history CSV/Parquet (date, close[, open, high, low]) or a "
                             "scenario folder")
    parser.add_argument("--split", type=parse_date, default=None,
                        help="last in-sample day, YYYY-MM-DD (default: hold out the last "
                             f"{DEFAULT_OUT_OF_SAMPLE} returns, leaving at least 250 to fit)")
    add_model_options(parser)
    parser.add_argument("--k", type=parse_positive, default=3.0,
                        help="band width in standard deviations (default 3)")
    parser.add_argument("--refit-every", dest="refit_every", type=whole_number(1), default=None,
                        metavar="N", help="re-estimate the parameters every N out-of-sample "
                                          "days (default: hold them fixed)")
    add_output_options(parser, formats=("table", "json", "csv", "xlsx"))
    parser.set_defaults(run=run)
    return parser


def default_split(dates: np.ndarray, n_returns: int):
    """The split that holds out the last 504 returns (fewer if that would leave
    under 250 to fit on). ``dates`` are the return dates."""
    from optbench.volatility.backtest import MIN_IN_SAMPLE
    n_out = min(DEFAULT_OUT_OF_SAMPLE, n_returns - MIN_IN_SAMPLE)
    index = max(n_returns - max(n_out, 0), 1) - 1
    return np.datetime64(dates[index], "D").astype(object)


def run(args: argparse.Namespace) -> int:
    from optbench.data.history import load_history
    from optbench.volatility.backtest import backtest

    from optbench.errors import InputError
    from optbench.volatility.backtest import MIN_IN_SAMPLE, MIN_OUT_OF_SAMPLE

    from optbench.analysis import sanity

    plan = output_plan(args)
    for path, fmt in plan:
        if fmt == "xlsx" and path is None:
            raise InputError("--format", "xlsx writes a file: give -o FILE")
    history = load_history(args.history)
    findings = sanity.history_findings(history)
    rdates = np.asarray(history.dates).astype("datetime64[D]")[1:]
    needed = MIN_IN_SAMPLE + MIN_OUT_OF_SAMPLE
    if rdates.size < needed:
        raise InputError(history.source, f"only {rdates.size} returns; the check needs at "
                                         f"least {needed} ({MIN_IN_SAMPLE} to fit, "
                                         f"{MIN_OUT_OF_SAMPLE} to check)")
    split = args.split if args.split is not None else default_split(rdates, rdates.size)
    result = backtest(history, split, model=args.model, dist=args.dist, mean=args.mean,
                      k=args.k, refit_every=args.refit_every)
    warnings = [f"history: {i}" for i in history.issues] + findings
    write_outputs(args, lambda fmt: render(result, fmt, warnings, findings), plan)
    return 0


def render(result, fmt: str, warnings=(), findings=()):
    """``backtest`` in ``fmt``: JSON, one row per out-of-sample day as CSV (with its
    notes), the workbook (days, VaR, surprises, notes), or the report. ``warnings``
    (history issues and the sanity findings) go into the JSON; the table leads with
    ``findings`` (it lists the history issues itself)."""
    if fmt == "json":
        from optbench.report.jsonout import clean
        doc = clean(result.to_dict())
        doc["warnings"] = list(warnings)
        doc["caution"] = CAUTION
        return json.dumps(doc, indent=2, allow_nan=False)
    if fmt == "csv":
        return daily_csv(result)
    if fmt == "xlsx":
        from optbench.report.files import StreamedFile
        from optbench.report.xlsx import backtest_xlsx
        return StreamedFile(lambda f: backtest_xlsx(result, daily_frame(result), CAUTION, f))
    return "".join(f"warning: {w}\n" for w in findings) + table_text(result)


# --------------------------------------------------------------------------- csv
def daily_frame(result):
    """One row per out-of-sample day: date, return, forecast daily vol (sigma_daily),
    z, the close's band, the close, outside_band and one 0/1 column per VaR level."""
    import pandas as pd
    n_in, n = result.n_in, result.n_out
    z = np.asarray(result.std_resid_out, float)
    frame = pd.DataFrame({
        "date": pd.to_datetime(np.asarray(result.dates_out, "datetime64[D]")),
        "return": np.asarray(result.returns_out, float),
        "sigma_daily": np.asarray(result.sigma_out, float),
        "z": z,
        "band_low": np.asarray(result.chart_band_low, float)[n_in:n_in + n],
        "band_high": np.asarray(result.chart_band_high, float)[n_in:n_in + n],
        "close": np.asarray(result.chart_close, float)[n_in:n_in + n],
        "outside_band": (np.abs(z) > result.band_k).astype(int)})
    for v in result.var:
        frame[f"var_{100 * v.level:g}_exceeded"] = (z < v.quantile_z).astype(int)
    return frame


def daily_csv(result):
    """The daily table as CSV text with its notes."""
    from optbench.report.csv import frame_csv
    from optbench.report.notes import backtest_notes
    return frame_csv(daily_frame(result),
                     backtest_notes(result, CAUTION, "optbench backtest: out-of-sample days"))


# --------------------------------------------------------------------------- table
def _num(x, digits=2, scale=1.0) -> str:
    if x is None or not np.isfinite(x):
        return "-"
    return f"{x * scale:,.{digits}f}"


def _p(x) -> str:
    if x is None or not np.isfinite(x):
        return "-"
    return f"{x:.4f}" if x >= 1e-4 else f"{x:.1e}"


def table_text(result, width: int = 120) -> str:
    from rich.console import Console
    from rich.table import Table
    from rich.text import Text

    r = result
    m = r.model
    buf = io.StringIO()
    con = Console(file=buf, width=width, color_system=None, highlight=False)
    params = ", ".join(f"{k} {v:.6g}" for k, v in (m.get("params") or {}).items()
                       if v is not None)
    con.print(f"{r.source}: fitted on {r.n_in} returns to {r.split.isoformat()}, checked on "
              f"{r.n_out} ({r.dates_out[0]} to {r.dates_out[-1]})")
    con.print(f"model {m.get('name')}/{m.get('dist')} (mean {m.get('mean', '-')}): {params}")
    cands = {k: v for k, v in (m.get("candidates") or {}).items()}
    if cands:
        shown = ", ".join(f"{k} {v:,.1f}" if v is not None else f"{k} failed"
                          for k, v in cands.items())
        con.print(f"chosen by BIC among: {shown}")
    if r.refit_every:
        con.print(f"parameters re-estimated every {r.refit_every} days "
                  f"({len(r.refit_dates)} refits: {', '.join(r.refit_models) or 'none'})")
    else:
        con.print("parameters held fixed after the split")
    if r.fallback_reason:
        con.print(f"note: {r.fallback_reason}")
    for issue in r.issues:
        con.print(f"history: {issue}")

    band = Table(title=f"Days outside +-{r.band_k:g} sigma", title_justify="left")
    for c in ("observed", "expected (normal)", "expected (fitted)"):
        band.add_column(c, justify="right")
    band.add_row(str(r.outside_band), _num(r.expected_normal, 1), _num(r.expected_model, 1))
    con.print(band)

    var = Table(title="One-day VaR exceedances (losses beyond the fitted quantile)",
                title_justify="left")
    for c in ("level", "exceeded", "expected", "Kupiec LR", "p", "indep. LR", "p",
              "cond. cov. LR", "p", "zone"):
        var.add_column(c, justify="right")
    for v in r.var:
        var.add_row(f"{100 * v.level:g}%", str(v.exceedances), _num(v.expected, 1),
                    _num(v.kupiec.statistic), _p(v.kupiec.p_value),
                    _num(v.independence.statistic), _p(v.independence.p_value),
                    _num(v.conditional_coverage.statistic),
                    _p(v.conditional_coverage.p_value), Text(v.zone))
    con.print(var)
    for v in r.var:
        if v.windows:
            blocks = ", ".join(f"{b['start']}..{b['end']} {b['exceedances']} {b['zone']}"
                               for b in v.windows)
            con.print(f"{100 * v.level:g}% per 250 days: {blocks}")
    con.print("Zones by the Basel Committee (1996) binomial rule: green below 95% "
              "cumulative probability, red from 99.99%.")

    s = r.residuals
    res = Table(title="Standardised residuals out of sample", title_justify="left")
    for c in ("n", "mean", "std", "min", "max", "skew", "excess kurt.", "Jarque-Bera", "p"):
        res.add_column(c, justify="right")
    res.add_row(str(s.n), _num(s.mean, 3), _num(s.std, 3), _num(s.min), _num(s.max),
                _num(s.skew, 3), _num(s.excess_kurtosis, 3), _num(s.jarque_bera, 1),
                _p(s.jarque_bera_p))
    con.print(res)

    sur = Table(title="Largest surprises", title_justify="left")
    for c in ("date", "z", "return %", "forecast vol %/day"):
        sur.add_column(c, justify="right")
    for x in r.surprises:
        sur.add_row(x["date"], _num(x["z"]), _num(x["return"], 2, 100),
                    _num(x["sigma"], 2, 100))
    con.print(sur)

    acc = Table(title="Variance-forecast accuracy (lower loss is better; MZ: realized = "
                      "alpha + beta forecast)", title_justify="left")
    for c in ("days", "forecaster", "n", "QLIKE", "MSE (%^2)^2", "MZ alpha %^2", "MZ beta",
              "MZ R^2"):
        acc.add_column(c, justify="right")
    for a in r.accuracy:
        for name, loss in a.losses.items():
            mz = loss["mz"]
            acc.add_row(str(a.horizon), name.replace("_", " "), str(a.n),
                        _num(loss["qlike"], 4), _num(loss["mse"], 3, 1e8),
                        _num(mz.alpha, 4, 1e4), _num(mz.beta, 3), _num(mz.r2, 3))
    con.print(acc)
    con.print(CAUTION)
    return buf.getvalue()
