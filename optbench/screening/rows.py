"""One underlying's rows of the screen: at each chosen tenor, the listed expiry
nearest to it, with implied against forecast and the cost of protection.

Everything comes from :func:`optbench.compare` and
:func:`optbench.analysis.hedge.hedge_from_comparison`; nothing is recomputed here.

Cost of protection per 1,000,000 of notional
    A protective put struck at ``floor`` × spot on the expiry, paid at the ask:
    ``premium_paid / (contracts × multiplier × spot) × 1,000,000``, i.e. the premium
    per unit of underlying scaled to the notional, free of contract rounding. Its
    expected payoff is the mean discounted payoff over the fitted model's simulated
    paths (the model's physical distribution), scaled the same way.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

NOTIONAL = 1_000_000.0
DEFAULT_TENORS = (30, 91, 182)
#: the screen fits the same default model as ``compare``: GARCH, GJR and EGARCH,
#: keeping the lowest BIC
DEFAULT_MODEL = "auto"

# column order of the screen table; every row has these keys
COLUMNS = (
    "code", "name", "tenor_days", "expiry", "calendar_days", "trading_days",
    "atm_iv", "forecast_vol", "forecast_low", "forecast_high", "iv_minus_forecast",
    "iv_forecast_ratio", "verdict", "floor", "put_strike", "protection_cost",
    "protection_expected_payoff", "protection_overpay", "protection_cost_pct_annual",
    "model", "fallback_reason", "rows_in", "rows_used", "spot", "asof", "style",
    "multiplier", "sources", "error", "folder",
    "floor_put_verdict", "put25_verdict", "drift_rule", "drift_annual", "warnings",
    "attempts", "retry_reasons",
)
#: ``warnings`` holds the comparison's and the hedge's warnings (input disagreements,
#: dropped history rows, ATM or forecast flags) joined with "; " ('' when none)
WARNING_SEPARATOR = "; "
#: ``attempts``: how many times the underlying was started (1 = first time; more
#: after a lost worker or a transient error); ``retry_reasons``: why the earlier
#: attempts were lost, joined with "; " ('' when none) — both set by the screen
#: from the runner's outcome (optbench.screening.runner)


@dataclass(frozen=True)
class ScreenTask:
    """What one worker needs to screen one underlying (small and picklable)."""

    folder: str
    tenors: tuple[int, ...] = DEFAULT_TENORS
    floor: float = 0.90
    model: str = DEFAULT_MODEL
    dist: str = "t"
    mean: str = "constant"
    n_paths: int = 2000
    seed: int = 7
    overrides: dict = field(default_factory=dict)
    drift: str = "risk-free"
    excess_return: float | None = None


def failed_rows(task: ScreenTask, reason: str) -> list[dict]:
    """The rows of an underlying that could not be screened: its code and the reason."""
    code = Path(task.folder).name
    return [dict.fromkeys(COLUMNS, None) | {"code": code, "name": code,
                                            "tenor_days": tenor, "error": reason,
                                            "folder": task.folder}
            for tenor in task.tenors]


def _num(x) -> float | None:
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def nearest_expiries(quotes, tenors) -> dict:
    """For each tenor (calendar days), the listed expiry nearest to it (the shorter
    one on a tie), among expiries after the quote date."""
    days = quotes.loc[quotes["calendar_days"] > 0, ["expiry", "calendar_days"]]
    days = days.drop_duplicates("expiry").sort_values("calendar_days")
    if days.empty:
        raise ValueError("no usable expiry in the chain")
    d = days["calendar_days"].to_numpy()
    out = {}
    for tenor in tenors:
        i = int(abs(d - tenor).argmin())      # argmin takes the first (shorter) on ties
        out[tenor] = days["expiry"].iloc[i].date()
    return out


def screen_one(task: ScreenTask) -> list[dict]:
    """Rows for one scenario folder, one per tenor. Raises on a broken underlying
    (the runner turns that into :func:`failed_rows`)."""
    from optbench.analysis.compare import compare
    from optbench.analysis.hedge import hedge_from_comparison
    from optbench.analysis.results import HedgeRequest
    from optbench.data.scenario import load_scenario
    from optbench.report.provenance import sources_text

    scenario = load_scenario(task.folder, **task.overrides)
    listed = nearest_expiries(scenario.chain.quotes, task.tenors)
    # only the expiries the rows show are compared: the same numbers, less work
    comparison = compare(scenario, model=task.model, dist=task.dist, mean=task.mean,
                         n_paths=task.n_paths, seed=task.seed,
                         expiries=sorted(set(listed.values())), floor=task.floor,
                         drift=task.drift, excess_return=task.excess_return)
    by_expiry = {e.expiry: e for e in comparison.expiries}
    model = comparison.model
    rows = []
    for tenor in task.tenors:
        row = by_expiry[listed[tenor]]
        cost = payoff = overpay = annual = strike = None
        error = None
        notes = list(comparison.warnings)
        try:
            # a large notional keeps contract rounding out of the per-unit figures
            request = HedgeRequest(portfolio_value=1e3 * NOTIONAL, hedge_ratio=1.0,
                                   floor=task.floor, expiry=row.expiry, structure="put")
            est = hedge_from_comparison(comparison, request, n_paths=task.n_paths,
                                        seed=task.seed)
            scale = NOTIONAL / (est.contracts * est.multiplier * comparison.spot)
            cost = _num(est.premium_paid * scale)
            payoff = _num(est.expected_payoff * scale)
            overpay = _num(est.overpay * scale)
            annual = _num(est.cost_pct_annual)
            strike = _num(est.strike)
            notes += [w for w in est.warnings if w not in notes]
        except Exception as err:  # the comparison row still stands without a hedge
            error = f"hedge: {err}"
        rows.append({
            "code": scenario.code, "name": scenario.name, "tenor_days": tenor,
            "expiry": row.expiry.isoformat(), "calendar_days": row.calendar_days,
            "trading_days": row.trading_days, "atm_iv": _num(row.atm_iv),
            "forecast_vol": _num(row.forecast_vol), "forecast_low": _num(row.forecast_low),
            "forecast_high": _num(row.forecast_high),
            "iv_minus_forecast": _num(row.iv_minus_forecast),
            "iv_forecast_ratio": _num(row.iv_forecast_ratio), "verdict": row.verdict,
            "floor": task.floor, "put_strike": strike, "protection_cost": cost,
            "protection_expected_payoff": payoff, "protection_overpay": overpay,
            "protection_cost_pct_annual": annual,
            "model": f"{model.name}/{model.dist}", "fallback_reason": model.fallback_reason,
            "rows_in": comparison.quality["rows_in"],
            "rows_used": comparison.quality["rows_used"],
            "spot": _num(comparison.spot), "asof": comparison.asof.isoformat(),
            "style": comparison.style, "multiplier": _num(comparison.multiplier),
            "sources": sources_text(comparison.sources),
            "error": error, "folder": task.folder,
            "floor_put_verdict": row.floor_put_verdict, "put25_verdict": row.put25_verdict,
            "drift_rule": comparison.drift.rule,
            "drift_annual": _num(comparison.drift.annual),
            "warnings": WARNING_SEPARATOR.join(notes),
        })
    return rows
