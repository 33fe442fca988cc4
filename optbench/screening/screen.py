"""``screen``: many underlyings, one ranked table.

Each scenario folder is compared on its own (:func:`optbench.screening.rows.screen_one`),
in local worker processes or on a Dask cluster (:mod:`optbench.screening.runner`); an
underlying that fails keeps its rows, with the reason, and the screen goes on.
"""
from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

from optbench.analysis.results import CAUTION
from optbench.errors import InputError
from optbench.screening.rows import (COLUMNS, DEFAULT_MODEL, DEFAULT_TENORS, NOTIONAL,
                                     ScreenTask, failed_rows)
from optbench.screening.runner import DEFAULT_RETRIES, run_outcomes
from optbench.screening.tasks import screen_task
from optbench.screening.universe import find_scenarios

DEFAULT_SORT = "iv_minus_forecast"
#: joins the reasons of an underlying's lost attempts in the ``retry_reasons`` column
RETRY_SEPARATOR = "; "


@dataclass(frozen=True, eq=False)
class ScreenResult:
    """The ranked table of a screen.

    Attributes
    ----------
    universe : the folder screened.
    tenors : target tenors in calendar days (each row uses the listed expiry nearest).
    floor : protection floor as a fraction of spot (0.90 = a put struck at 90 %).
    notional : the notional the protection figures are scaled to (1,000,000).
    sort, descending : the ranking.
    rows : one dict per (underlying, tenor), keys :data:`COLUMNS`; vols decimals,
        money per ``notional``.
    failures : ``{"code", "folder", "reason", "attempts", "transient",
        "retry_reasons"}`` for each underlying that failed (``transient``: the last
        failure was of a retried kind and the retries ran out).
    workers, scheduler : how it ran.
    caution : the caution every hedge output carries.
    drift : the drift asked for (``{"rule", "excess_return"}``; None = each
        underlying's meta.toml, else 0); each row says the drift it used.
    """

    universe: str
    tenors: tuple[int, ...]
    floor: float
    notional: float
    sort: str
    descending: bool
    rows: tuple[dict, ...]
    failures: tuple[dict, ...]
    workers: int | None
    scheduler: str | None
    model: str
    dist: str
    caution: str = CAUTION
    columns: tuple[str, ...] = field(default=COLUMNS)
    drift: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        return {
            "universe": self.universe, "tenors": list(self.tenors), "floor": self.floor,
            "notional": self.notional, "sort": self.sort, "descending": self.descending,
            "model": {"name": self.model, "dist": self.dist},
            "conventions": {
                "vols": "annualised decimals (0.215 = 21.5%)",
                "tenor": "each row uses the listed expiry nearest to tenor_days",
                "protection": (f"a put struck at floor x spot, paid at the ask, per "
                               f"{self.notional:,.0f} of notional; expected payoff under "
                               "the fitted model's simulated paths"),
                "verdict": "rich above the forecast band, cheap below, fair inside",
                "protection_verdict": ("the put at the floor and the 25-delta put: rich "
                                       "(expensive protection) when the ask is above the "
                                       "band of its model-expected discounted payoff, "
                                       "cheap below, fair inside"),
                "drift": ("simulated prices grow at drift_annual a year (drift_rule: "
                          "risk-free = r - q, excess = r - q plus the excess return, "
                          "fitted = the fitted mean)"),
            },
            "drift": dict(self.drift),
            "rows": [dict(r) for r in self.rows],
            "failures": [dict(f) for f in self.failures],
            "caution": self.caution,
        }


def _missing(value) -> bool:
    return value is None or (isinstance(value, float) and math.isnan(value))


def rank_rows(rows: Sequence[dict], column: str = DEFAULT_SORT,
              descending: bool = True) -> list[dict]:
    """Rows ordered by ``column``, rows without a value last; ties keep code and
    tenor order."""
    if column not in COLUMNS:
        raise InputError("--sort", f"no such column {column!r}; choose one of "
                                   f"{', '.join(COLUMNS)}")
    ordered = sorted(rows, key=lambda r: (str(r.get("code")), r.get("tenor_days") or 0))
    present = [r for r in ordered if not _missing(r.get(column))]
    absent = [r for r in ordered if _missing(r.get(column))]
    present.sort(key=lambda r: r[column], reverse=descending)
    return present + absent


def screen(folder: str | Path, *, tenors: Sequence[int] = DEFAULT_TENORS,
           floor: float = 0.90, model: str = DEFAULT_MODEL, dist: str = "t",
           mean: str = "constant", sort: str = DEFAULT_SORT, descending: bool = True,
           workers: int | None = None, scheduler: str | None = None,
           n_paths: int = 2000, seed: int = 7, overrides: dict | None = None,
           progress: Callable[[int, int], None] | None = None, drift: str = "risk-free",
           excess_return: float | None = None, fit_cache: str | Path | None = None,
           max_filter_days: int | None = None, full: bool = False,
           retries: int = DEFAULT_RETRIES) -> ScreenResult:
    """Screen every scenario folder under ``folder`` and rank the rows.

    Parameters
    ----------
    folder : a folder of scenario folders (or one scenario folder).
    tenors : target tenors in calendar days; each row uses the nearest listed expiry.
    floor : protection floor as a fraction of spot, in (0, 1].
    model, dist, mean : the volatility model, as in ``compare``.
    sort, descending : the column to rank by (default: implied minus forecast,
        richest first).
    workers : local worker processes (default: the number of cores; 1 = in process).
    scheduler : address of a running Dask distributed scheduler; when given the same
        tasks run on that cluster.
    n_paths, seed : the simulation behind the expected payoffs.
    overrides : market overrides applied to every underlying (rarely wanted).
    progress : ``progress(done, total)`` after each underlying.
    drift, excess_return : the drift of the simulated prices, as in ``compare``
        (each underlying's ``meta.toml`` may set its own ``excess_return``; the rows'
        ``drift_rule`` and ``drift_annual`` say what each used).
    fit_cache : a folder for the opt-in fit cache (:mod:`optbench.screening.fit_cache`):
        each underlying's fit is kept there, and a later screen whose history only
        grew by at most ``max_filter_days`` returns (default 21) filters from the
        cached parameters instead of refitting; each row's ``fit_source`` and
        ``fit_date`` say which.
    full : True runs the full-cost row (the hedge simulated again per tenor), the
        reference the default lean row matches within 1e-9 relative
        (:func:`optbench.screening.rows.protection_figures`).
    retries : how many times an underlying whose worker was lost, or that met a
        transient error, is tried again (:mod:`optbench.screening.runner`); each row
        says its ``attempts`` and why earlier ones were lost (``retry_reasons``).
    """
    tenors = tuple(int(t) for t in tenors)
    if not tenors or min(tenors) <= 0:
        raise InputError("--tenors", "give one or more positive numbers of days")
    if not 0 < float(floor) <= 1:
        raise InputError("--floor", f"must be a fraction of spot in (0, 1], not {floor:g}")
    if sort not in COLUMNS:
        raise InputError("--sort", f"no such column {sort!r}; choose one of "
                                   f"{', '.join(COLUMNS)}")
    from optbench.analysis.drift import choose_drift
    choose_drift(drift, excess_return, rate=0.0, div_yield=0.0)   # a bad value fails here
    folders = find_scenarios(folder)
    cache = {}
    if fit_cache is None and max_filter_days is not None:
        raise InputError("--refit-after", "applies only with --fit-cache DIR")
    if fit_cache is not None:
        from optbench.screening.fit_cache import DEFAULT_MAX_FILTER_DAYS, check_folder
        days = DEFAULT_MAX_FILTER_DAYS if max_filter_days is None else int(max_filter_days)
        if days < 0:
            raise InputError("--refit-after", f"must be 0 or more days, not {days}")
        cache = {"fit_cache": str(check_folder(fit_cache).resolve()),
                 "max_filter_days": days}
    tasks = [ScreenTask(folder=str(f), tenors=tenors, floor=float(floor), model=model,
                        dist=dist, mean=mean, n_paths=n_paths, seed=seed,
                        overrides=dict(overrides or {}), drift=drift,
                        excess_return=excess_return, full=bool(full), **cache)
             for f in folders]
    outcomes = run_outcomes(screen_task, tasks, workers=workers, scheduler=scheduler,
                            progress=progress, retries=retries)
    rows: list[dict] = []
    failures: list[dict] = []
    for task, outcome in zip(tasks, outcomes):
        tries = {"attempts": outcome.attempts,
                 "retry_reasons": RETRY_SEPARATOR.join(outcome.retry_reasons)}
        if outcome.failed:
            failure = outcome.value
            failures.append({"code": Path(task.folder).name, "folder": task.folder,
                             "reason": failure.reason, "attempts": failure.attempts,
                             "transient": failure.transient,
                             "retry_reasons": list(failure.retry_reasons)})
            rows.extend(r | tries for r in failed_rows(task, failure.reason))
        else:
            rows.extend(r | tries for r in outcome.value)
    return ScreenResult(universe=str(folder), tenors=tenors, floor=float(floor),
                        notional=NOTIONAL, sort=sort, descending=descending,
                        rows=tuple(rank_rows(rows, sort, descending)),
                        failures=tuple(failures), workers=workers, scheduler=scheduler,
                        model=model, dist=dist,
                        drift={"rule": drift, "excess_return": excess_return})
