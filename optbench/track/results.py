"""The track record's result objects: one :class:`TenorRecord` per tenor inside one
:class:`TrackRecord`. Every view (table, JSON, CSV, XLSX, Markdown, HTML, the
workbench) reads these and recomputes nothing.

Units: vols are annualised decimals (0.215 = 21.5 %); ``realized² − implied²`` is in
annualised variance; probabilities and shares are decimals in [0, 1]; tenors are
calendar days; horizons trading days.
"""
from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass, fields
from typing import Any

import pandas as pd

from optbench.analysis.results import CAUTION, plain

VERDICT_ORDER = ("rich", "fair", "cheap")


@dataclass(frozen=True, eq=False)
class TenorRecord:
    """The track record of one tenor.

    Attributes
    ----------
    tenor_days : int
        The tenor group, calendar days.
    n_obs, n_checked : int
        Observations replayed, and those whose expiry the price history reaches.
    first_date, last_date : date
    enough : bool
        ``n_checked`` reaches the record's ``min_checked``; the statistics below are
        NaN / empty otherwise.
    counts, counts_checked : dict
        Verdict -> number of observations (all / checked).
    gap_by_verdict : dict
        Verdict (and ``"all"``) -> ``{"n", "mean", "p10", "p50", "p90"}`` of
        implied − realized (decimal vol).
    hit_rate_rich : float
        Share of checked *rich* days whose realized vol ended below the implied vol.
    hit_rate_cheap : float
        Share of checked *cheap* days whose realized vol ended above the implied vol.
    realized_below_implied : float
        Share of all checked days whose realized vol ended below the implied vol.
    brier, brier_base_rate, base_rate : float
        Brier score of ``prob_realized_above_iv`` against the outcome realized >
        implied; the score of always forecasting the observed base rate
        (``base_rate * (1 - base_rate)``), and that base rate.
    reliability : list of dict
        ``{"low", "high", "n", "mean_prob", "observed"}`` per probability bucket.
    lags : int
        Newey–West lags (the overlap of the observations' windows).
    mz_implied, mz_forecast, encompassing : dict
        Regressions of realized variance on implied variance, on the forecast
        variance, and on both (coefficients ``const``, ``implied_var``,
        ``forecast_var``), each
        ``{"n_obs", "lags", "r_squared", "coef": {...}, "std_error": {...}}``.
    payoff_by_verdict : dict
        Verdict (and ``"all"``) -> summary of ``realized² − implied²`` (annualised
        variance: the payoff of a long variance-swap-like position per unit of
        variance notional).
    today : dict
        The tenor's latest observation: ``date``, ``atm_iv``, ``forecast_vol``,
        ``forecast_low``, ``forecast_high``, ``verdict``, ``iv_minus_forecast`` and
        ``gap_percentile`` (share of the tenor's earlier implied − forecast gaps below
        it), ``n_history``.
    """

    tenor_days: int
    n_obs: int
    n_checked: int
    first_date: _dt.date
    last_date: _dt.date
    enough: bool
    counts: dict
    counts_checked: dict
    gap_by_verdict: dict
    hit_rate_rich: float
    hit_rate_cheap: float
    realized_below_implied: float
    brier: float
    brier_base_rate: float
    base_rate: float
    reliability: list
    lags: int
    mz_implied: dict
    mz_forecast: dict
    encompassing: dict
    payoff_by_verdict: dict
    today: dict

    def to_dict(self) -> dict:
        return {f.name: plain(getattr(self, f.name)) for f in fields(self)}


@dataclass(frozen=True, eq=False)
class TrackRecord:
    """How the rich / fair / cheap verdict has done on one underlying's own past.

    Attributes
    ----------
    underlying : str
    asof : date
        The latest observation date.
    history_source : str
        The price history file.
    iv_sources : tuple of str
        The implied-vol history file and/or record store read.
    model : dict
        ``{"name", "dist", "mean"}`` as asked (``name`` may be ``auto``); each refit's
        chosen model is in ``refits``.
    refit_every : int
        Trading days between refits.
    band : (float, float)
        Quantile levels of the forecast band.
    n_paths, seed : simulation behind the probabilities.
    min_checked : int
        Checked observations a tenor needs for its statistics.
    method : dict
        The method in plain words (``walk_forward``, ``band``, ``probability``,
        ``realized``, ``verdict``, ``lags``).
    tenors : tuple of TenorRecord
        Shortest first.
    observations : DataFrame
        One row per replayed observation
        (:data:`optbench.track.walkforward.OBSERVATION_COLUMNS`).
    refits : DataFrame
        One row per estimation.
    quality : dict
        ``rows_in``, ``rows_used``, ``rejected`` ({reason: count}) over every input
        row (file and store) and the replay.
    rejected : DataFrame
        ``source``, ``line``, ``reason``, ``detail``.
    warnings : tuple of str
        What the user must know with the numbers (tenors that cannot be checked,
        too few observations, model fallbacks, units read, rows dropped).
    caution : str
    """

    underlying: str
    asof: _dt.date
    history_source: str
    iv_sources: tuple
    model: dict
    refit_every: int
    band: tuple
    n_paths: int
    seed: int | None
    min_checked: int
    method: dict
    tenors: tuple
    observations: pd.DataFrame
    refits: pd.DataFrame
    quality: dict
    rejected: pd.DataFrame
    warnings: tuple = ()
    caution: str = CAUTION

    def tenor(self, days: int) -> TenorRecord:
        for t in self.tenors:
            if t.tenor_days == int(days):
                return t
        from optbench.errors import InputError
        raise InputError("--tenor", f"no tenor of {days} days in the track record")

    def summary_frame(self) -> pd.DataFrame:
        """One row per tenor with the headline figures (see :data:`SUMMARY_COLUMNS`)."""
        return pd.DataFrame([summary_row(t) for t in self.tenors], columns=SUMMARY_COLUMNS)

    def to_dict(self, *, observations: bool = True) -> dict:
        out: dict[str, Any] = {}
        for f in fields(self):
            if f.name in ("observations", "refits", "rejected"):
                continue
            out[f.name] = plain(getattr(self, f.name))
        out["refits"] = plain(self.refits)
        out["rejected"] = plain(self.rejected)
        if observations:
            out["observations"] = plain(self.observations)
        return out


SUMMARY_COLUMNS = ("tenor_days", "n_obs", "n_checked", "rich", "fair", "cheap",
                   "hit_rate_rich", "hit_rate_cheap", "mean_gap_rich", "mean_gap_fair",
                   "mean_gap_cheap", "brier", "brier_base_rate", "mz_implied_slope",
                   "mz_implied_slope_se", "mz_forecast_slope", "mz_forecast_slope_se",
                   "enc_implied", "enc_implied_se", "enc_forecast", "enc_forecast_se",
                   "lags", "today_gap", "today_percentile", "today_verdict")


def _get(d: dict, *keys) -> float:
    for k in keys:
        if not isinstance(d, dict) or k not in d:
            return math.nan
        d = d[k]
    return d


def summary_row(t: TenorRecord) -> dict:
    """The headline figures of one tenor, flat (for tables and CSV)."""
    return {
        "tenor_days": t.tenor_days, "n_obs": t.n_obs, "n_checked": t.n_checked,
        "rich": t.counts.get("rich", 0), "fair": t.counts.get("fair", 0),
        "cheap": t.counts.get("cheap", 0),
        "hit_rate_rich": t.hit_rate_rich, "hit_rate_cheap": t.hit_rate_cheap,
        "mean_gap_rich": _get(t.gap_by_verdict, "rich", "mean"),
        "mean_gap_fair": _get(t.gap_by_verdict, "fair", "mean"),
        "mean_gap_cheap": _get(t.gap_by_verdict, "cheap", "mean"),
        "brier": t.brier, "brier_base_rate": t.brier_base_rate,
        "mz_implied_slope": _get(t.mz_implied, "coef", "implied_var"),
        "mz_implied_slope_se": _get(t.mz_implied, "std_error", "implied_var"),
        "mz_forecast_slope": _get(t.mz_forecast, "coef", "forecast_var"),
        "mz_forecast_slope_se": _get(t.mz_forecast, "std_error", "forecast_var"),
        "enc_implied": _get(t.encompassing, "coef", "implied_var"),
        "enc_implied_se": _get(t.encompassing, "std_error", "implied_var"),
        "enc_forecast": _get(t.encompassing, "coef", "forecast_var"),
        "enc_forecast_se": _get(t.encompassing, "std_error", "forecast_var"),
        "lags": t.lags,
        "today_gap": t.today.get("iv_minus_forecast", math.nan),
        "today_percentile": t.today.get("gap_percentile", math.nan),
        "today_verdict": t.today.get("verdict", "n/a"),
    }
