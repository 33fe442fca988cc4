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

What a row does not recompute (the lean row, the default)
    The comparison already judges the put nearest the floor on every expiry it
    covers (:mod:`optbench.analysis.protection`): the same strike rule as the hedge
    (the listed put with an ask nearest ``floor`` × spot), its ask, and its
    model-expected discounted payoff over the comparison's simulated paths. Those
    paths are simulated once to the longest expiry from the same seed, so each
    expiry's terminal draws are the ones :func:`~optbench.analysis.hedge.
    hedge_from_comparison` would simulate again for that expiry alone. The lean row
    reads the protection figures from the comparison's floor put instead of running
    the hedge per tenor; the tolerance against the full-cost row (``full=True``, the
    hedge run per tenor) is 1e-9 relative on every number, with identical text
    columns (``tests/screening/test_lean_rows.py``). Where the hedge would add a
    note or refuse — no put with an ask, or the nearest put more than
    :data:`~optbench.analysis.hedge.STRIKE_WARN` of spot from the floor — the row
    runs the hedge itself, so its note or error is the hedge's own.
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
    "fit_source", "fit_date",
)
#: ``fit_source``: ``fitted`` (estimated in this screen), ``cached`` or ``filtered``
#: (the fit cache's parameters, :mod:`optbench.screening.fit_cache`); ``fit_date``:
#: the last history date the model's parameters were estimated on
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
    #: True: the full-cost row (the hedge simulated again per tenor), the reference
    #: the lean row is checked against
    full: bool = False
    #: folder of the opt-in fit cache (:mod:`optbench.screening.fit_cache`), or None
    fit_cache: str | None = None
    #: most new returns a cached fit is filtered over before it is refitted
    max_filter_days: int = 21


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
    import numpy as np
    import pandas as pd

    calendar_days = quotes["calendar_days"].to_numpy()
    ahead = calendar_days > 0
    # each listed expiry once (its first quote), ordered by its calendar days
    expiries, first = np.unique(quotes["expiry"].to_numpy()[ahead], return_index=True)
    if not expiries.size:
        raise ValueError("no usable expiry in the chain")
    d = calendar_days[ahead][first]
    by_days = np.argsort(d, kind="stable")
    d, expiries = d[by_days], expiries[by_days]
    out = {}
    for tenor in tenors:
        i = int(abs(d - tenor).argmin())      # argmin takes the first (shorter) on ties
        out[tenor] = pd.Timestamp(expiries[i]).date()
    return out


def protection_figures(comparison, row, task: ScreenTask):
    """``((cost, expected payoff, overpay, cost % a year, strike), notes)`` of the put
    at the floor on ``row``'s expiry, per :data:`NOTIONAL` (module Notes).

    The lean row reads them from the comparison's floor put; the full row
    (``task.full``), and any expiry where the hedge would add a note or refuse, runs
    :func:`~optbench.analysis.hedge.hedge_from_comparison`. Raises what the hedge
    raises.
    """
    from optbench.analysis.hedge import STRIKE_WARN, contracts_for, hedge_from_comparison
    from optbench.analysis.results import HedgeRequest

    # a large notional keeps contract rounding out of the per-unit figures
    request = HedgeRequest(portfolio_value=1e3 * NOTIONAL, hedge_ratio=1.0,
                           floor=task.floor, expiry=row.expiry, structure="put")
    spot = float(comparison.spot)
    strike = float(row.floor_put_strike)
    lean = (not task.full and getattr(comparison, "fit", None) is not None
            and row.trading_days > 0 and math.isfinite(strike)
            and math.isfinite(float(row.floor_put_premium))
            and abs(strike - task.floor * spot) / spot <= STRIKE_WARN)
    if not lean:
        est = hedge_from_comparison(comparison, request, n_paths=task.n_paths,
                                    seed=task.seed)
        scale = NOTIONAL / (est.contracts * est.multiplier * spot)
        return ((est.premium_paid * scale, est.expected_payoff * scale,
                 est.overpay * scale, est.cost_pct_annual, est.strike), est.warnings)
    multiplier = float(comparison.multiplier or 100.0)
    contracts = contracts_for(request.portfolio_value, request.exposure_ratio,
                              multiplier, spot)
    units = contracts * multiplier
    premium_paid = float(row.floor_put_premium) * units          # the ask, as the hedge
    expected = float(row.floor_put_expected_payoff) * units
    scale = NOTIONAL / (units * spot)
    cost_pct = premium_paid / request.portfolio_value
    return ((premium_paid * scale, expected * scale, (premium_paid - expected) * scale,
             cost_pct * 365.0 / row.calendar_days, strike), ())


def _cached_fit(scenario, task: ScreenTask):
    """``(fit, FitOrigin)`` from the fit cache when the task names one, else
    ``(None, None)`` (the comparison fits). The cache sees the returns the
    comparison uses: the history up to the quote date."""
    if not task.fit_cache:
        return None, None
    from optbench.analysis.compare import _history_upto
    from optbench.screening.fit_cache import fit_with_cache

    hist = _history_upto(scenario.history, scenario.chain.asof, [])
    return fit_with_cache(hist.returns, hist.dates[1:], folder=task.fit_cache,
                          code=scenario.code, model=task.model, dist=task.dist,
                          mean=task.mean, max_filter_days=task.max_filter_days)


def _fit_date(scenario) -> str | None:
    """The last history date of the comparison's fit: the last close on or before the
    quote date (the comparison uses the history up to it)."""
    import numpy as np

    dates = np.asarray(scenario.history.dates, dtype="datetime64[D]")
    upto = dates[dates <= np.datetime64(scenario.chain.asof, "D")]
    return str(upto[-1]) if upto.size > 1 else None


def screen_one(task: ScreenTask) -> list[dict]:
    """Rows for one scenario folder, one per tenor. Raises on a broken underlying
    (the runner turns that into :func:`failed_rows`)."""
    from optbench.analysis.compare import compare
    from optbench.data.scenario import load_scenario
    from optbench.report.provenance import sources_text

    scenario = load_scenario(task.folder, **task.overrides)
    listed = nearest_expiries(scenario.chain.quotes, task.tenors)
    fit, origin = _cached_fit(scenario, task)
    # only the expiries the rows show are compared, and the lean row leaves out the
    # parts no column reads (cone, realized vols, history frame): the same numbers,
    # less work
    comparison = compare(scenario, model=task.model, dist=task.dist, mean=task.mean,
                         n_paths=task.n_paths, seed=task.seed,
                         expiries=sorted(set(listed.values())), floor=task.floor,
                         drift=task.drift, excess_return=task.excess_return, fit=fit,
                         lean=not task.full)
    by_expiry = {e.expiry: e for e in comparison.expiries}
    model = comparison.model
    first_notes = [origin.note] if origin is not None and origin.note else []
    # the same for every tenor of the underlying
    fit_source = origin.source if origin is not None else "fitted"
    fit_date = origin.fit_date if origin is not None else _fit_date(scenario)
    common = {
        "model": f"{model.name}/{model.dist}", "fallback_reason": model.fallback_reason,
        "rows_in": comparison.quality["rows_in"],
        "rows_used": comparison.quality["rows_used"],
        "spot": _num(comparison.spot), "asof": comparison.asof.isoformat(),
        "style": comparison.style, "multiplier": _num(comparison.multiplier),
        "sources": sources_text(comparison.sources),
        "drift_rule": comparison.drift.rule,
        "drift_annual": _num(comparison.drift.annual),
    }
    rows = []
    for tenor in task.tenors:
        row = by_expiry[listed[tenor]]
        cost = payoff = overpay = annual = strike = None
        error = None
        notes = first_notes + list(comparison.warnings)
        try:
            figures, hedge_notes = protection_figures(comparison, row, task)
            cost, payoff, overpay, annual, strike = (_num(x) for x in figures)
            notes += [w for w in hedge_notes if w not in notes]
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
            "model": common["model"], "fallback_reason": common["fallback_reason"],
            "rows_in": common["rows_in"], "rows_used": common["rows_used"],
            "spot": common["spot"], "asof": common["asof"], "style": common["style"],
            "multiplier": common["multiplier"], "sources": common["sources"],
            "error": error, "folder": task.folder,
            "floor_put_verdict": row.floor_put_verdict, "put25_verdict": row.put25_verdict,
            "drift_rule": common["drift_rule"], "drift_annual": common["drift_annual"],
            "warnings": WARNING_SEPARATOR.join(notes),
            "fit_source": fit_source, "fit_date": fit_date,
        })
    return rows
