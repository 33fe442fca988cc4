"""The notes that travel with every exported table: provenance, caveats, caution.

A table file (CSV, a sheet of an XLSX workbook) holds the table alone, header on the
first line, so any reader opens it with default settings. What the numbers rest on
travels beside it as *notes*: an ordered ``{item: value}`` dict (values are text,
numbers, dates, or lists for repeated items such as ``warnings``). The XLSX exports
put them on a ``Notes`` sheet (one ``item, value`` row each, a list giving several
rows); a CSV written to a file gets a sidecar ``<file>.meta.json`` (see
:func:`sidecar_json`); a CSV written to the terminal prints them on stderr.
"""
from __future__ import annotations

import json
from typing import Any
from optbench.report.provenance import inputs_line

#: the units line every table's notes carry
UNITS = ("vols, rates, yields, percentages and probabilities are decimals "
         "(0.215 = 21.5%); vol differences in decimals (0.01 = one vol point); money in "
         "the chain's currency; dates YYYY-MM-DD")

#: the neutralisation line every table's notes carry
NEUTRALISED = ("text cells that a spreadsheet would run as a formula (starting with = + "
               "- @ tab or carriage return, other than a plain negative number) start "
               "with a ' so they show as text")


def _model_text(model) -> str:
    get = (lambda k: getattr(model, k, None)) if not isinstance(model, dict) else model.get
    parts = [str(get("name") or ""), str(get("dist") or "")]
    if get("mean"):
        parts.append(f"mean {get('mean')}")
    return " / ".join(p for p in parts if p)


def comparison_notes(c, table: str) -> dict:
    """Notes of a table exported from a :class:`~optbench.analysis.results.Comparison`."""
    m = c.model
    q = c.quality or {}
    sources = c.sources or {}
    notes: dict[str, Any] = {
        "table": table, "underlying": c.underlying, "source": c.source,
        "asof": c.asof, "spot": c.spot, "rate": c.rate, "div_yield": c.div_yield,
        "style": c.style, "multiplier": c.multiplier,
        "market_inputs_from": ", ".join(f"{k}: {v}" for k, v in sources.items()) or None,
        "model": _model_text(m), "converged": getattr(m, "converged", None),
        "fallback_reason": getattr(m, "fallback_reason", None),
        "loglik": getattr(m, "loglik", None), "n_paths": c.n_paths, "seed": c.seed,
        "band": f"{c.band[0]:g} to {c.band[1]:g}", "verdict_rule": c.verdict_rule,
        "protection_rule": getattr(c, "protection_rule", None),
        "drift": c.drift.text if getattr(c, "drift", None) is not None else None,
        "inputs": inputs_line(c),
        "rows_in": q.get("rows_in"), "rows_used": q.get("rows_used"),
        "rejected": ", ".join(f"{k} {v}" for k, v in q.get("rejected", {}).items()) or "none",
        "flagged": ", ".join(f"{k} {v}" for k, v in q.get("warnings", {}).items()) or "none",
        "warnings": list(c.warnings), "units": UNITS, "neutralised": NEUTRALISED,
        "caution": c.caution,
    }
    return notes


def hedge_notes(e, table: str) -> dict:
    """Notes of a table exported from a :class:`~optbench.analysis.results.HedgeEstimate`."""
    r = e.request
    return {
        "table": table, "underlying": e.underlying, "asof": e.asof, "spot": e.spot,
        "rate": e.rate, "div_yield": e.div_yield, "structure": e.structure,
        "expiry": e.expiry, "strikes": " ".join(f"{k:g}" for k in e.strikes),
        "portfolio_value": r.portfolio_value, "beta": r.beta,
        "exposure_ratio": r.exposure_ratio, "floor": r.floor,
        "model": _model_text(e.model), "measure": e.model.get("measure"),
        "n_paths": e.n_paths, "seed": e.seed, "roll_method": e.roll_method,
        "drift": (e.drift or {}).get("text") or None, "inputs": inputs_line(e),
        "collar_note": e.collar_note or None, "warnings": list(e.warnings),
        "units": UNITS, "neutralised": NEUTRALISED, "caution": e.caution,
    }


def _attempts(failure: dict) -> str:
    from optbench.report.screen import attempts_note
    return attempts_note(failure)


def screen_notes(result, table: str) -> dict:
    """Notes of a screen's table (:class:`~optbench.screening.screen.ScreenResult`)."""
    return {
        "table": table, "universe": result.universe,
        "tenors": ", ".join(str(t) for t in result.tenors), "floor": result.floor,
        "notional": result.notional,
        "sort": f"{result.sort}{' (largest first)' if result.descending else ''}",
        "model": f"{result.model} / {result.dist}",
        "verdict_rule": "rich above the forecast band, cheap below, fair inside",
        "protection": (f"put at {result.floor:.0%} of spot per {result.notional:,.0f} "
                       "notional, paid at the ask"),
        "failures": [f"{f['code']}: {f['reason']}{_attempts(f)}" for f in result.failures],
        "warnings": list(getattr(result, "warnings", ()) or ()),
        "units": UNITS, "neutralised": NEUTRALISED, "caution": result.caution,
    }


def chain_notes(chain, table: str) -> dict:
    """Notes of ``optbench check``'s tables (an :class:`~optbench.data.OptionChain`)."""
    q = chain.quality

    def src(name):
        return getattr(chain, f"{name}_source", None)
    return {
        "table": table, "source": chain.source, "layout": getattr(chain, "layout", None),
        "underlying": chain.underlying, "asof": chain.asof, "asof_from": src("asof"),
        "spot": chain.spot, "spot_from": src("spot"), "rate": chain.rate,
        "rate_from": src("rate"), "div_yield": chain.div_yield,
        "div_yield_from": src("div_yield"), "rows_in": q.rows_in, "rows_used": q.rows_used,
        "rejected": ", ".join(f"{k} {v}" for k, v in q.rejected.items()) or "none",
        "flagged": ", ".join(f"{k} {v}" for k, v in q.warnings.items()) or "none",
        "warnings": list(getattr(chain, "notes", ()) or ()),
        "units": UNITS, "neutralised": NEUTRALISED,
    }


def fit_notes(doc: dict, table: str) -> dict:
    """Notes of ``optbench fit``'s tables (its JSON document)."""
    m = doc["model"]
    return {
        "table": table, "source": doc["source"], "first_date": doc["first_date"],
        "last_date": doc["last_date"], "n_returns": doc["n_returns"],
        "model": _model_text(m), "converged": m.get("converged"),
        "fallback_reason": m.get("fallback_reason"),
        "band": "5% to 95% from parameter uncertainty",
        "warnings": list(doc.get("issues", [])) + list(doc.get("warnings", []) or []),
        "units": UNITS, "neutralised": NEUTRALISED, "caution": doc["caution"],
    }


def backtest_notes(result, caution: str, table: str) -> dict:
    """Notes of ``optbench backtest``'s tables (a ``BacktestResult``)."""
    return {
        "table": table, "source": result.source, "split": result.split,
        "n_in": result.n_in, "n_out": result.n_out, "band_k": result.band_k,
        "model": _model_text(result.model),
        "refit_every": result.refit_every, "fallback_reason": result.fallback_reason,
        "warnings": list(result.issues), "units": UNITS, "neutralised": NEUTRALISED,
        "caution": caution,
    }


def note_rows(notes: dict) -> list[tuple[str, Any]]:
    """``(item, value)`` rows: a list value gives one row per element (none if empty)."""
    rows = []
    for key, value in notes.items():
        if isinstance(value, (list, tuple)):
            rows += [(key, v) for v in value]
        elif value is not None:
            rows.append((key, value))
    return rows


def note_lines(notes: dict) -> list[str]:
    """The notes as ``item: value`` lines (for stderr and plain text)."""
    return [f"{k}: {_plain(v)}" for k, v in note_rows(notes)]


def _plain(value: Any) -> Any:
    if hasattr(value, "isoformat"):
        return value.isoformat()[:10]
    if hasattr(value, "item"):
        return value.item()
    return value


def sidecar_json(notes: dict, columns: list[str] | None = None) -> str:
    """The sidecar ``<file>.meta.json`` of a CSV: ``schema``, ``columns`` and ``notes``."""
    from optbench.report.fields import KINDS, LABELS
    from optbench.report.jsonout import clean
    cols = [{"name": c, "label": LABELS.get(c, c), "kind": KINDS.get(c)} for c in columns or []]
    doc = {"schema": "optbench.table-notes/1", "columns": cols,
           "notes": clean({k: _plain(v) if not isinstance(v, (list, tuple)) else v
                           for k, v in notes.items()})}
    return json.dumps(doc, indent=2, allow_nan=False, ensure_ascii=False) + "\n"
