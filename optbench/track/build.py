"""Building the track record: replay the verdict over an implied-vol history
(:mod:`optbench.track.walkforward`) and score it per tenor
(:mod:`optbench.track.stats`).

Notes
-----
Per tenor, over the observations whose expiry the history reaches ("checked"):

- counts of rich / fair / cheap, and implied − realized by verdict (mean, 10 %,
  50 %, 90 % quantiles);
- hit rates: realized below implied on *rich* days, above implied on *cheap* days;
- calibration of :math:`P(\\sigma_{real} > \\sigma_{imp})`: the Brier score (Brier
  1950) against the outcome, the score of always forecasting the observed base rate
  :math:`\\bar o(1-\\bar o)` beside it, and the reliability table by probability
  bucket (Murphy & Winkler 1987);
- Mincer–Zarnowitz regressions :math:`\\sigma_{real}^2 = a + b\\,x + e` with ``x`` the
  implied variance :math:`\\sigma_{imp}^2` and, separately, the forecast variance
  :math:`\\hat\\sigma^2` (an unbiased forecast has a = 0, b = 1; variances, not vols,
  because the forecast is an expected variance and a vol's expectation is below the
  root of the expected variance;
  Mincer & Zarnowitz, "The evaluation of economic forecasts", in *Economic
  Forecasts and Expectations*, NBER 1969), and the encompassing regression on both
  (Chong & Hendry 1986; used for implied against time-series vol forecasts by
  Christensen & Prabhala, *Journal of Financial Economics* 50, 1998); standard
  errors by Newey & West (1987) with the Bartlett kernel and as many lags as later
  observations start inside one observation's window (``h − 1`` for daily
  observations of an ``h``-trading-day tenor), because the windows overlap;
- the payoff :math:`\\sigma_{real}^2 - \\sigma_{imp}^2` of a long variance-swap-like
  position by verdict;
- where the tenor's latest implied − forecast gap sits among its own earlier gaps
  (percentile rank).
"""
from __future__ import annotations

import datetime as _dt
import math
from pathlib import Path

import numpy as np
import pandas as pd

from optbench.errors import InputError
from optbench.track import stats
from optbench.track.results import VERDICT_ORDER, TenorRecord, TrackRecord
from optbench.track.walkforward import (DEFAULT_BAND, DEFAULT_N_PATHS, DEFAULT_REFIT_EVERY,
                                        overlap_lags, walk_forward)

#: checked observations a tenor needs before its statistics are shown
MIN_CHECKED = 40
DEFAULT_BUCKETS = 5
DEFAULT_MODEL = "gjr"


def _summaries(values: np.ndarray, verdict: np.ndarray) -> dict:
    out = {v: stats.summary(values[verdict == v]) for v in VERDICT_ORDER}
    out["all"] = stats.summary(values)
    return out


def _date(x) -> _dt.date:
    return pd.Timestamp(x).date()


def tenor_record(obs: pd.DataFrame, tenor: int, *, min_checked: int = MIN_CHECKED,
                 buckets: int = DEFAULT_BUCKETS) -> TenorRecord:
    """Score one tenor's replayed observations (see the module Notes)."""
    g = obs[obs["tenor"] == tenor].sort_values("date", kind="stable")
    verdict_all = g["verdict"].to_numpy(str)
    counts = {v: int(np.sum(verdict_all == v)) for v in (*VERDICT_ORDER, "n/a")}
    c = g[g["checked"].to_numpy(bool)]
    iv = c["atm_iv"].to_numpy(float)
    rv = c["realized_vol"].to_numpy(float)
    fcv = c["forecast_vol"].to_numpy(float)
    verdict = c["verdict"].to_numpy(str)
    counts_checked = {v: int(np.sum(verdict == v)) for v in (*VERDICT_ORDER, "n/a")}
    enough = len(c) >= min_checked
    nan = math.nan
    lags = overlap_lags(c["date"].to_numpy(), c["expiry"].to_numpy()) if len(c) else 0
    if enough:
        gaps = _summaries(iv - rv, verdict)
        payoff = _summaries(rv ** 2 - iv ** 2, verdict)
        hit_rich = stats.share(rv[verdict == "rich"] < iv[verdict == "rich"])
        hit_cheap = stats.share(rv[verdict == "cheap"] > iv[verdict == "cheap"])
        below = stats.share(rv < iv)
        p = c["prob_realized_above_iv"].to_numpy(float)
        outcome = (rv > iv).astype(float)
        brier = stats.brier_score(p, outcome)
        base = float(outcome.mean())
        reliability = stats.reliability_table(p, outcome, buckets)
        rvar, ivar, fvar = rv ** 2, iv ** 2, fcv ** 2
        mz_iv = stats.ols_newey_west(rvar, {"implied_var": ivar}, lags).to_dict()
        mz_fc = stats.ols_newey_west(rvar, {"forecast_var": fvar}, lags).to_dict()
        enc = stats.ols_newey_west(rvar, {"implied_var": ivar, "forecast_var": fvar},
                                   lags).to_dict()
    else:
        gaps, payoff, reliability = {}, {}, []
        hit_rich = hit_cheap = below = brier = base = nan
        mz_iv, mz_fc, enc = {}, {}, {}
    last = g.iloc[-1]
    earlier = g["iv_minus_forecast"].to_numpy(float)[:-1]
    gap_today = float(last["iv_minus_forecast"])
    today = {"date": _date(last["date"]), "atm_iv": float(last["atm_iv"]),
             "forecast_vol": float(last["forecast_vol"]),
             "forecast_low": float(last["forecast_low"]),
             "forecast_high": float(last["forecast_high"]),
             "verdict": str(last["verdict"]), "iv_minus_forecast": gap_today,
             "gap_percentile": stats.percentile_rank(earlier, gap_today),
             "n_history": int(np.isfinite(earlier).sum())}
    return TenorRecord(
        tenor_days=int(tenor), n_obs=int(len(g)), n_checked=int(len(c)),
        first_date=_date(g["date"].iloc[0]), last_date=_date(g["date"].iloc[-1]),
        enough=bool(enough), counts=counts, counts_checked=counts_checked,
        gap_by_verdict=gaps, hit_rate_rich=hit_rich, hit_rate_cheap=hit_cheap,
        realized_below_implied=below, brier=brier,
        brier_base_rate=base * (1 - base) if math.isfinite(base) else nan, base_rate=base,
        reliability=reliability, lags=int(lags), mz_implied=mz_iv, mz_forecast=mz_fc,
        encompassing=enc, payoff_by_verdict=payoff, today=today)


def _combine(sources: list, warnings: list):
    """One observation frame from the file and/or the store; on a date and tenor
    given by both, the file's row is kept (and the count is said)."""
    frames = []
    for k, src in enumerate(sources):
        f = src.frame.copy()
        f["source_rank"] = k
        f["source"] = src.source
        frames.append(f)
    obs = pd.concat(frames, ignore_index=True)
    dup = obs.duplicated(["date", "tenor_days"], keep="first")
    if dup.any():
        warnings.append(f"{int(dup.sum())} store rows repeat a date and tenor of "
                        f"{sources[0].source}; the file's rows are used")
        obs = obs[~dup.to_numpy()]
    return obs.sort_values(["date", "tenor_days"], kind="stable").reset_index(drop=True)


def track_record(history, iv_sources, *, underlying: str = "", holidays=(),
                 model: str = DEFAULT_MODEL, dist: str = "t", mean: str = "constant",
                 refit_every: int = DEFAULT_REFIT_EVERY, band=DEFAULT_BAND,
                 n_paths: int = DEFAULT_N_PATHS, seed: int | None = 7,
                 min_checked: int = MIN_CHECKED, buckets: int = DEFAULT_BUCKETS,
                 progress=None) -> TrackRecord:
    """The verdict's track record on one underlying.

    Parameters
    ----------
    history : PriceHistory
    iv_sources : list of IvHistory
        The implied-vol history file and/or the rows read from a record store
        (:func:`optbench.track.store.read_iv_history`); on a date and tenor given by
        both, the first source wins.
    underlying, holidays : the underlying's code and the trading-day calendar.
    model, dist, mean : the volatility model (default GJR-GARCH(1,1) with t
        innovations; ``auto`` picks by BIC at every refit, three fits each).
    refit_every, band, n_paths, seed : see :func:`optbench.track.walkforward.walk_forward`.
    min_checked : checked observations a tenor needs for its statistics.
    buckets : probability buckets of the reliability table.

    Raises
    ------
    InputError
        No implied-vol date on a price-history date; every date too early for a fit;
        no tenor whose expiries the history reaches; fewer than ``min_checked``
        checked observations in every tenor; a bad argument.
    """
    if int(refit_every) < 1:
        raise InputError("--refit-every", "must be at least one trading day")
    lo_level, hi_level = float(band[0]), float(band[1])
    if not 0 < lo_level < hi_level < 1:
        raise InputError("--band", f"band levels must satisfy 0 < low < high < 1, not {band}")
    if int(n_paths) < 100:
        raise InputError("--paths", f"need at least 100 simulated paths, not {n_paths}")
    if not iv_sources:
        raise InputError("--iv-history", "give an implied-vol history file or a record store")
    warnings: list[str] = []
    for src in iv_sources:
        warnings += [f"{src.source}: {t}" for t in src.issues]
    warnings += [f"{history.source}: {t}" for t in history.issues]
    obs = _combine(list(iv_sources), warnings)
    name = iv_sources[0].source if len(iv_sources) == 1 else " and ".join(
        s.source for s in iv_sources)

    wf = walk_forward(history.returns, history.dates, obs, holidays=holidays, model=model,
                      dist=dist, mean=mean, refit_every=refit_every, band=(lo_level, hi_level),
                      n_paths=n_paths, seed=seed, progress=progress)
    o = wf.observations
    rej = wf.rejected
    if not len(o):
        first, last = obs["date"].min().date(), obs["date"].max().date()
        h0, h1 = history.dates[0], history.dates[-1]
        if (rej["reason"] == "not_a_history_date").all():
            raise InputError(name, f"no date from {first} to {last} is a date of the price "
                                   f"history ({h0} to {h1}): the two do not overlap")
        raise InputError(name, f"every usable date lies within the first 250 returns of "
                               f"the price history (from {h0}); the model needs 250 returns "
                               "before a date")
    tenors = np.unique(o["tenor"].to_numpy())
    checked_per = o.groupby("tenor")["checked"].sum()
    if int(checked_per.max()) == 0:
        first_exp = pd.Timestamp(o["expiry"].min()).date()
        raise InputError(name, f"no tenor can be checked: the price history ends "
                               f"{history.dates[-1]}, before the earliest expiry "
                               f"{first_exp} (tenors longer than the history can check)")
    if int(checked_per.max()) < min_checked:
        raise InputError(name, f"too few dates for a track record: at most "
                               f"{int(checked_per.max())} checked observations in a tenor, "
                               f"at least {min_checked} needed")
    for t in tenors:
        n = int(checked_per.get(t, 0))
        if n == 0:
            warnings.append(f"tenor {int(t)} days: no expiry within the price history "
                            f"(ends {history.dates[-1]}); its verdicts cannot be checked")
        elif n < min_checked:
            warnings.append(f"tenor {int(t)} days: only {n} checked observations, at "
                            f"least {min_checked} needed; its statistics are not shown")
    if len(wf.refits):
        fb = wf.refits["fallback_reason"].dropna()
        if len(fb):
            warnings.append(f"{len(fb)} of {len(wf.refits)} refits fell back to a simpler "
                            f"model (first: {fb.iloc[0]})")
        nc = int((~wf.refits["converged"].astype(bool)).sum())
        if nc:
            warnings.append(f"{nc} refits did not converge")
    for reason, n in rej["reason"].value_counts().items():
        what = {"not_a_history_date": "dates with no close in the price history",
                "too_early": "dates within the history's first 250 returns (too early "
                             "to fit the model)"}.get(reason, reason)
        warnings.append(f"{int(n)} implied-vol rows dropped: {what}")

    records = tuple(tenor_record(o, int(t), min_checked=min_checked, buckets=buckets)
                    for t in tenors)
    # quality over every input row: the sources' own rejections and the replay's
    rej_frames = []
    rows_in = 0
    for src in iv_sources:
        rows_in += int(src.quality["rows_in"])
        if len(src.rejected):
            rej_frames.append(src.rejected.assign(source=src.source))
    if len(rej):
        rej_frames.append(rej.assign(source=name))
    rejected = (pd.concat(rej_frames, ignore_index=True) if rej_frames
                else pd.DataFrame(columns=["line", "reason", "detail", "source"]))
    rejected = rejected[["source", "line", "reason", "detail"]]
    counts = {str(k): int(v) for k, v in rejected["reason"].value_counts().items()}
    repeats = sum(int(s.quality["rows_used"]) for s in iv_sources) - len(obs)
    if repeats:
        counts["repeated_in_store"] = counts.get("repeated_in_store", 0) + repeats
    quality = {"rows_in": rows_in, "rows_used": int(len(o)), "rejected": counts}
    method = {
        "walk_forward": (f"the model is fitted on every return up to the date, refitted "
                         f"every {int(refit_every)} trading days; between refits its "
                         "parameters are held and the variance filtered forward"),
        "forecast": "average expected variance over the trading days to expiry, "
                    "annualised with 252",
        "band": (f"{lo_level:.0%}–{hi_level:.0%} quantiles of the forecast over the "
                 "uncertainty of the estimated parameters, computed at each refit and "
                 "held relative to the forecast until the next"),
        "verdict": "rich above the band, cheap below it, fair inside",
        "probability": (f"P(realized > implied) from {int(n_paths):,} simulated paths of the "
                        "model at each refit, the realized-variance distribution scaled to "
                        "each day's forecast"),
        "realized": "close-to-close realized vol over the history returns after the date "
                    "up to the expiry, annualised with 252, not demeaned",
        "lags": "Newey–West (Bartlett) lags = the most later observations starting inside "
                "one observation's window (h − 1 for daily observations)",
    }
    return TrackRecord(
        underlying=underlying, asof=pd.Timestamp(o["date"].max()).date(),
        history_source=history.source, iv_sources=tuple(s.source for s in iv_sources),
        model={"name": model, "dist": dist, "mean": mean}, refit_every=int(refit_every),
        band=(lo_level, hi_level), n_paths=int(n_paths), seed=seed,
        min_checked=int(min_checked), method=method, tenors=records, observations=o,
        refits=wf.refits, quality=quality, rejected=rejected.reset_index(drop=True),
        warnings=tuple(warnings))


def track(scenario=None, *, iv_history=None, store=None, history=None, **options
          ) -> TrackRecord:
    """Load the inputs and build the track record.

    Parameters
    ----------
    scenario : path, optional
        A scenario folder: its ``history.csv``, ``meta.toml`` (code, holidays) and,
        unless ``iv_history`` or ``store`` is given, its ``iv_history.csv``.
    iv_history : path, optional
        An implied-vol history file (:func:`optbench.track.ivfile.load_iv_history`).
    store : path, optional
        A record store written by ``optbench compare --record``; its rows for the
        underlying are used as implied-vol history.
    history : path, optional
        The price history (default: the scenario's).
    **options : passed to :func:`track_record`.
    """
    from optbench.data.history import load_history
    from optbench.track.ivfile import load_iv_history

    meta: dict = {}
    folder = Path(scenario) if scenario is not None else None
    if folder is not None:
        if not folder.exists():
            raise InputError(folder, "no such file or folder")
        if not folder.is_dir():
            raise InputError(folder, "give a scenario folder (with history.csv)")
        from optbench.data.scenario import read_meta
        meta = read_meta(folder)
    if history is None:
        if folder is None:
            raise InputError("--history", "give the price history or a scenario folder")
        history = folder
    hist = load_history(history)
    code = str(meta.get("code") or meta.get("name") or (folder.name if folder else ""))
    sources = []
    if iv_history is not None:
        sources.append(load_iv_history(iv_history))
    if store is not None:
        from optbench.track.store import read_iv_history
        sources.append(read_iv_history(store, underlying=code or None))
    if not sources:
        if folder is None or not any((folder / n).is_file()
                                     for n in ("iv_history.csv", "iv_history.parquet")):
            raise InputError("--iv-history", f"{folder or 'the scenario'} has no "
                             "iv_history.csv: give --iv-history FILE or --store FILE")
        sources.append(load_iv_history(folder))
    holidays = options.pop("holidays", None)
    if holidays is None:
        holidays = tuple(meta.get("holidays") or ())
    return track_record(hist, sources, underlying=code, holidays=holidays, **options)
