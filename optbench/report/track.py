"""Views of a track record (:class:`optbench.track.results.TrackRecord`): terminal
table, JSON, CSV, XLSX, Markdown and an HTML report with one figure per tenor.

Every view reads the record and recomputes nothing; flat tables are reshaped from
its fields. Vols show as percent on screen and stay decimals in JSON/CSV/XLSX.
"""
from __future__ import annotations

import base64
import html as _html
import io
import math

import numpy as np
import pandas as pd

from optbench.track.results import SUMMARY_COLUMNS, VERDICT_ORDER

JSON_SCHEMA = "optbench.track/1"


# ----------------------------------------------------------------------- frames
def reliability_frame(record) -> pd.DataFrame:
    """One row per tenor and probability bucket."""
    rows = [{"tenor_days": t.tenor_days, **b} for t in record.tenors for b in t.reliability]
    return pd.DataFrame(rows, columns=["tenor_days", "low", "high", "n", "mean_prob",
                                       "observed"])


def regression_frame(record) -> pd.DataFrame:
    """One row per tenor, regression and coefficient."""
    rows = []
    for t in record.tenors:
        for name, reg in (("mz_implied", t.mz_implied), ("mz_forecast", t.mz_forecast),
                          ("encompassing", t.encompassing)):
            for coef, value in (reg.get("coef") or {}).items():
                rows.append({"tenor_days": t.tenor_days, "regression": name,
                             "coefficient": coef, "estimate": value,
                             "std_error": reg["std_error"][coef], "n_obs": reg["n_obs"],
                             "lags": reg["lags"], "r_squared": reg["r_squared"]})
    return pd.DataFrame(rows, columns=["tenor_days", "regression", "coefficient", "estimate",
                                       "std_error", "n_obs", "lags", "r_squared"])


def verdict_frame(record) -> pd.DataFrame:
    """One row per tenor and verdict: counts, implied − realized and the variance
    payoff summaries."""
    rows = []
    for t in record.tenors:
        for v in (*VERDICT_ORDER, "all"):
            gap = t.gap_by_verdict.get(v, {})
            pay = t.payoff_by_verdict.get(v, {})
            rows.append({"tenor_days": t.tenor_days, "verdict": v,
                         "count": (t.n_obs if v == "all" else t.counts.get(v, 0)),
                         "checked": (t.n_checked if v == "all"
                                     else t.counts_checked.get(v, 0)),
                         **{f"gap_{k}": gap.get(k, math.nan)
                            for k in ("mean", "p10", "p50", "p90")},
                         **{f"payoff_{k}": pay.get(k, math.nan)
                            for k in ("mean", "p10", "p50", "p90")}})
    return pd.DataFrame(rows)


def _headline(record) -> str:
    o = record.observations
    m = record.model
    return (f"{record.underlying or 'underlying'} · {len(o):,} observations from "
            f"{pd.Timestamp(o['date'].min()).date()} to {record.asof} · model "
            f"{m['name']}-{m['dist']} refitted every {record.refit_every} trading days · "
            f"band {record.band[0]:.0%}–{record.band[1]:.0%} of parameter uncertainty")


# ------------------------------------------------------------------------- text
def _pct(x, digits: int = 1) -> str:
    return "—" if x is None or not math.isfinite(float(x)) else f"{100 * float(x):.{digits}f}"


def _share(x) -> str:
    return "—" if x is None or not math.isfinite(float(x)) else f"{100 * float(x):.0f}%"


def _pts(x) -> str:
    return "—" if x is None or not math.isfinite(float(x)) else f"{100 * float(x):+.1f}"


def _num(x, digits: int = 2) -> str:
    return "—" if x is None or not math.isfinite(float(x)) else f"{float(x):.{digits}f}"


def _coef(d: dict, name: str) -> str:
    c = (d.get("coef") or {}).get(name, math.nan)
    s = (d.get("std_error") or {}).get(name, math.nan)
    return "—" if not math.isfinite(c) else f"{c:.2f} ({s:.2f})"


TABLE_HEAD = ("tenor", "obs", "checked", "rich", "fair", "cheap", "hit rich", "hit cheap",
              "IV−RV rich", "IV−RV fair", "IV−RV cheap", "Brier (base)", "MZ IV² b (se)",
              "MZ fc² b (se)", "enc IV² | fc²", "lags", "today IV−fc", "pctile", "today")


def tenor_cells(t) -> list[str]:
    """The headline cells of one tenor, formatted for reading (shared by the table,
    Markdown, HTML and the workbench view)."""
    g = t.gap_by_verdict
    return [f"{t.tenor_days}d", f"{t.n_obs}", f"{t.n_checked}",
            f"{t.counts.get('rich', 0)}", f"{t.counts.get('fair', 0)}",
            f"{t.counts.get('cheap', 0)}", _share(t.hit_rate_rich),
            _share(t.hit_rate_cheap),
            _pts(g.get("rich", {}).get("mean", math.nan)),
            _pts(g.get("fair", {}).get("mean", math.nan)),
            _pts(g.get("cheap", {}).get("mean", math.nan)),
            f"{_num(t.brier, 3)} ({_num(t.brier_base_rate, 3)})",
            _coef(t.mz_implied, "implied_var"), _coef(t.mz_forecast, "forecast_var"),
            f"{_num((t.encompassing.get('coef') or {}).get('implied_var', math.nan))} | "
            f"{_num((t.encompassing.get('coef') or {}).get('forecast_var', math.nan))}",
            f"{t.lags}", _pts(t.today.get("iv_minus_forecast", math.nan)),
            _share(t.today.get("gap_percentile", math.nan)),
            str(t.today.get("verdict", "n/a"))]


def _grid(head, rows) -> str:
    widths = [max(len(str(h)), *(len(r[i]) for r in rows)) for i, h in enumerate(head)]
    line = lambda cells: "  ".join(str(c).rjust(w) for c, w in zip(cells, widths))  # noqa
    return "\n".join([line(head), line(["-" * w for w in widths]), *(line(r) for r in rows)])


def track_table(record) -> str:
    """The terminal view: headline, per-tenor table, reliability, warnings, method."""
    out = [f"Track record of the rich / fair / cheap verdict: {_headline(record)}", ""]
    out.append(_grid(TABLE_HEAD, [tenor_cells(t) for t in record.tenors]))
    out += ["", "vols in %, gaps in vol points; hit rich = realized ended below implied "
            "on rich days, hit cheap = above on cheap days; MZ = realized variance on "
            "implied or forecast variance, Newey–West errors", ""]
    out.append("Reliability of P(realized > implied): forecast / observed (n) per bucket")
    for t in record.tenors:
        if not t.reliability:
            continue
        cells = [f"{_pct(b['mean_prob'], 0)}/{_pct(b['observed'], 0)} ({b['n']})"
                 for b in t.reliability]
        out.append(f"  {t.tenor_days:>4}d  " + "  ".join(cells))
    q = record.quality
    out += ["", f"rows: {q['rows_in']:,} in, {q['rows_used']:,} used"
            + "".join(f", {n} {k}" for k, n in q["rejected"].items())]
    if record.warnings:
        out += ["", "Warnings:"] + [f"  - {w}" for w in record.warnings]
    out += ["", "Method:"] + [f"  {k}: {v}" for k, v in record.method.items()]
    out += ["", record.caution]
    return "\n".join(out)


# ------------------------------------------------------------------------- JSON
def track_json(record) -> str:
    """The JSON document (schema in docs/schema.md)."""
    import json

    from optbench.report.jsonout import clean, frame_records
    data = clean(record.to_dict(observations=False))
    data["observations"] = frame_records(record.observations)
    data = {"schema": JSON_SCHEMA, **data}
    return json.dumps(data, indent=2, allow_nan=False, ensure_ascii=False) + "\n"


# -------------------------------------------------------------------------- CSV
def _comment(record, table: str) -> str:
    m = record.model
    warn = (" | warnings: " + "; ".join(record.warnings)) if record.warnings else ""
    return (f"optbench track {table} | {record.underlying} | as of {record.asof} | model "
            f"{m['name']}/{m['dist']} refit {record.refit_every}{warn} | {record.caution}")


CSV_TABLES = ("tenors", "observations", "verdicts", "reliability", "regressions")


def track_frame(record, table: str) -> pd.DataFrame:
    if table == "observations":
        return record.observations
    if table == "verdicts":
        return verdict_frame(record)
    if table == "reliability":
        return reliability_frame(record)
    if table == "regressions":
        return regression_frame(record)
    return record.summary_frame()


def track_csv(record, table: str = "tenors") -> str:
    from optbench.report.csv import write_rows
    frame = track_frame(record, table)
    return write_rows(list(frame.columns), frame.itertuples(index=False, name=None),
                      _comment(record, table))


# ------------------------------------------------------------------------- XLSX
def track_xlsx(record) -> bytes:
    """Workbook: Tenors, Verdicts, Reliability, Regressions, Observations, Refits,
    Notes (warnings, method, rejected rows). Vols as decimals with % formats."""
    from openpyxl import Workbook
    from openpyxl.styles import Font

    from optbench.report.csv import neutralise

    def value(v):
        if v is None:
            return None
        if isinstance(v, (bool, np.bool_)):
            return bool(v)
        if isinstance(v, (int, np.integer)):
            return int(v)
        if isinstance(v, (float, np.floating)):
            return float(v) if math.isfinite(float(v)) else None
        if isinstance(v, pd.Timestamp):
            return None if pd.isna(v) else v.date()
        if hasattr(v, "isoformat"):
            return v
        return neutralise(str(v))

    pct_cols = {"atm_iv", "iv_25d_put", "iv_25d_call", "forecast_vol", "forecast_low",
                "forecast_high", "iv_minus_forecast", "prob_realized_above_iv",
                "realized_vol", "hit_rate_rich", "hit_rate_cheap", "mean_gap_rich",
                "mean_gap_fair", "mean_gap_cheap", "today_gap", "today_percentile",
                "mean_prob", "observed", "low", "high", "gap_mean", "gap_p10", "gap_p50",
                "gap_p90"}
    wb = Workbook()
    wb.remove(wb.active)

    def sheet(name: str, frame: pd.DataFrame) -> None:
        # every table starts at A1 (its header row); what describes it is on Notes
        ws = wb.create_sheet(name)
        ws.append([neutralise(str(c)) for c in frame.columns])
        hdr = ws.max_row
        for cell in ws[hdr]:
            cell.font = Font(bold=True)
        for row in frame.itertuples(index=False, name=None):
            ws.append([value(v) for v in row])
        for j, col in enumerate(frame.columns, start=1):
            fmt = ("0.00%" if col in pct_cols else
                   "yyyy-mm-dd" if col in ("date", "expiry", "refit_date") else None)
            if fmt:
                for r in range(hdr + 1, ws.max_row + 1):
                    ws.cell(row=r, column=j).number_format = fmt
        ws.freeze_panes = ws.cell(row=hdr + 1, column=1)

    sheet("Tenors", record.summary_frame())
    sheet("Verdicts", verdict_frame(record))
    sheet("Reliability", reliability_frame(record))
    sheet("Regressions", regression_frame(record))
    sheet("Observations", record.observations)
    sheet("Refits", record.refits)
    notes = ([("table", f"optbench track: {record.underlying}"), ("asof", record.asof),
              ("model", f"{record.model['name']} / {record.model['dist']} / refit every "
                        f"{record.refit_every} trading days")]
             + [("warning", w) for w in record.warnings]
             + [(f"method {k}", v) for k, v in record.method.items()]
             + [("rows_in", record.quality["rows_in"]),
                ("rows_used", record.quality["rows_used"])]
             + [(f"rejected {k}", n) for k, n in record.quality["rejected"].items()]
             + [("caution", record.caution)])
    sheet("Notes", pd.DataFrame(notes, columns=["item", "value"]))
    sheet("Rejected", record.rejected)
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


# --------------------------------------------------------------------- Markdown
def _md_row(cells) -> str:
    return "| " + " | ".join(str(c).replace("|", "\\|") for c in cells) + " |"


def track_markdown(record) -> str:
    lines = [f"# {record.underlying}: track record of the verdict", "", _headline(record), "",
             "## Per tenor", "", _md_row(TABLE_HEAD),
             "|" + "|".join("---:" for _ in TABLE_HEAD) + "|"]
    lines += [_md_row(tenor_cells(t)) for t in record.tenors]
    lines += ["", "Vols in %, gaps in vol points. Hit rich: realized ended below implied "
              "on rich days; hit cheap: above on cheap days. MZ: slope of realized variance "
              "on implied or forecast variance (Newey–West standard error).", "",
              "## Reliability of P(realized > implied)", "",
              _md_row(("tenor", "bucket", "n", "mean forecast", "observed")),
              "|---:|:---|---:|---:|---:|"]
    for t in record.tenors:
        for b in t.reliability:
            lines.append(_md_row((f"{t.tenor_days}d", f"{_pct(b['low'], 0)}–"
                                  f"{_pct(b['high'], 0)}%", b["n"], _pct(b["mean_prob"]),
                                  _pct(b["observed"]))))
    if record.warnings:
        lines += ["", "## Warnings", ""] + [f"- {w}" for w in record.warnings]
    lines += ["", "## Method", ""] + [f"- **{k}**: {v}" for k, v in record.method.items()]
    lines += ["", f"> {record.caution}", ""]
    return "\n".join(lines)


# ------------------------------------------------------------------------- HTML
def _png(fig) -> str:
    import matplotlib.pyplot as plt
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=90, bbox_inches="tight")
    plt.close(fig)
    return "data:image/png;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def figure_tenor(record, tenor_days: int) -> str:
    """Implied vol, the forecast with its band, and the realized vol that followed,
    by observation date, for one tenor (PNG data URI)."""
    import matplotlib
    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    o = record.observations
    g = o[o["tenor"] == tenor_days].sort_values("date")
    d = pd.to_datetime(g["date"]).to_numpy()
    fig, ax = plt.subplots(figsize=(9, 3.4))
    ax.fill_between(d, 100 * g["forecast_low"].to_numpy(float),
                    100 * g["forecast_high"].to_numpy(float), alpha=0.25,
                    label=f"forecast band {record.band[0]:.0%}–{record.band[1]:.0%}")
    ax.plot(d, 100 * g["forecast_vol"].to_numpy(float), "-", lw=1, label="forecast")
    ax.plot(d, 100 * g["atm_iv"].to_numpy(float), "-", lw=1, label="ATM implied")
    ax.plot(d, 100 * g["realized_vol"].to_numpy(float), "-", lw=1,
            label="realized to expiry")
    ax.set_ylabel("vol, % a year")
    ax.set_title(f"{record.underlying} {tenor_days}-day tenor: implied, forecast and the "
                 "realized vol that followed")
    ax.legend(fontsize=8, ncol=4)
    ax.grid(alpha=0.3)
    return _png(fig)


_CSS = """
body{font-family:system-ui,sans-serif;margin:2em;max-width:1200px;color:#1d2330}
table{border-collapse:collapse;margin:1em 0;font-size:0.85em}
th,td{padding:3px 7px;border-bottom:1px solid #d8dce4;text-align:right}
th{background:#eef1f6}
.caution{border-left:4px solid #c69214;padding:0.5em 1em;background:#fbf6e8}
img{max-width:100%}
"""


def track_html(record) -> str:
    esc = _html.escape
    parts = [f"<!DOCTYPE html><html><head><meta charset='utf-8'><title>optbench track "
             f"{esc(record.underlying)}</title><style>{_CSS}</style></head><body>",
             f"<h1>{esc(record.underlying)}: track record of the verdict</h1>",
             f"<p>{esc(_headline(record))}</p>",
             f"<p class='caution'>{esc(record.caution)}</p>", "<h2>Per tenor</h2><table>",
             "<tr>" + "".join(f"<th>{esc(h)}</th>" for h in TABLE_HEAD) + "</tr>"]
    for t in record.tenors:
        parts.append("<tr>" + "".join(f"<td>{esc(c)}</td>" for c in tenor_cells(t)) + "</tr>")
    parts.append("</table><p>Vols in %, gaps in vol points. Hit rich: realized ended below "
                 "implied on rich days; hit cheap: above on cheap days.</p>")
    parts.append("<h2>Implied, forecast and what followed</h2>")
    for t in record.tenors:
        parts.append(f"<img alt='{t.tenor_days}-day tenor' src='{figure_tenor(record, t.tenor_days)}'>")
    parts.append("<h2>Reliability of P(realized &gt; implied)</h2><table><tr><th>tenor</th>"
                 "<th>bucket</th><th>n</th><th>mean forecast</th><th>observed</th></tr>")
    for t in record.tenors:
        for b in t.reliability:
            parts.append(f"<tr><td>{t.tenor_days}d</td><td>{_pct(b['low'], 0)}–"
                         f"{_pct(b['high'], 0)}%</td><td>{b['n']}</td>"
                         f"<td>{_pct(b['mean_prob'])}</td><td>{_pct(b['observed'])}</td></tr>")
    parts.append("</table>")
    if record.warnings:
        parts.append("<h2>Warnings</h2><ul>" + "".join(f"<li>{esc(w)}</li>"
                                                       for w in record.warnings) + "</ul>")
    parts.append("<h2>Method</h2><ul>" + "".join(f"<li><b>{esc(k)}</b>: {esc(v)}</li>"
                                                 for k, v in record.method.items()) + "</ul>")
    parts.append("</body></html>")
    return "\n".join(parts)


__all__ = ["track_table", "track_json", "track_csv", "track_xlsx", "track_markdown",
           "track_html", "figure_tenor", "reliability_frame", "regression_frame",
           "verdict_frame", "tenor_cells", "SUMMARY_COLUMNS", "CSV_TABLES"]
