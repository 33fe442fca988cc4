r"""The portfolio's returns against the underlying's: beta, its error and basis risk.

From holdings and their price histories (or a history of the portfolio's own value)
and the underlying's daily log returns, over the last ``window`` returns of the
underlying's history (default one year, 252 returns):

* each holding's daily log return :math:`R_{i,t} = \ln(C_{i,t}/C_{i,t-1})` on the
  underlying's trading dates;
* the portfolio's daily log return with today's weights held fixed (the ex-ante
  beta of the portfolio as it stands; common practice for hedging):
  :math:`y_t = \ln\bigl(1 + \sum_i w_i (e^{R_{i,t}} - 1)\bigr)`,
  :math:`w_i = v_i / \sum_j v_j` with :math:`v_i` = quantity × price (or the weight);
* beta, its standard error, :math:`R^2` and the residual volatility by OLS
  (:mod:`optbench.analysis.portfolio.beta`).

Holdings whose history covers less than ``min_coverage`` of the window (missing,
short or gappy) are left out of the estimate and their weight spread over the rest
pro rata (the estimate assumes they move like the rest — reported per holding);
dates on which a holding that is kept has no return are dropped from the regression
(reported). Closes on dates that are not the underlying's trading dates are ignored
(reported per holding).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from optbench.analysis.portfolio.beta import DEFAULT_WINDOW, BetaFit, masked_ols_columns, ols_beta
from optbench.errors import InputError

MIN_COVERAGE = 0.8
MIN_OBS = 20

BASIS_NOTE = ("Basis risk (how the portfolio strays from beta x the underlying) is "
              "estimated from the price history over the window; it can differ in "
              "future, above all in a crisis when correlations change.")

HOLDING_COLUMNS = ("symbol", "quantity", "weight", "price", "value", "weight_in_fit",
                   "n_returns", "coverage", "beta", "beta_se", "r_squared", "status", "note")


@dataclass(frozen=True, eq=False)
class PortfolioFit:
    """The portfolio against the underlying.

    Attributes
    ----------
    source : ``"holdings"`` or ``"value history"`` (and the file names).
    value : the portfolio's value in money used for the hedge.
    beta : :class:`~optbench.analysis.portfolio.beta.BetaFit` of the portfolio.
    hedge_ratio : the ratio the hedge uses: the estimated beta, or the user's override.
    ratio_source : ``"estimated beta"`` or ``"user override"``.
    holdings : DataFrame with :data:`HOLDING_COLUMNS` (empty for a value history):
        per holding its value, weight, weight in the estimate, returns in the window,
        coverage, own beta/error/R², ``status`` (``used``, ``left out``) and ``note``.
    window : returns asked for; ``n_obs`` in ``beta`` is what the regression used.
    warnings : findings that travel with every number (files, holdings, dates).
    basis_note : :data:`BASIS_NOTE`.
    """

    source: str
    value: float
    beta: BetaFit
    hedge_ratio: float
    ratio_source: str
    holdings: pd.DataFrame
    window: int
    warnings: tuple[str, ...] = ()
    basis_note: str = BASIS_NOTE

    @property
    def residual_daily_returns(self) -> np.ndarray:
        return self.beta.residuals

    def to_dict(self) -> dict:
        from optbench.analysis.results import plain
        return {"source": self.source, "value": self.value, **self.beta.to_dict(),
                "hedge_ratio": self.hedge_ratio, "ratio_source": self.ratio_source,
                "window": self.window, "holdings": plain(self.holdings),
                "warnings": list(self.warnings), "basis_note": self.basis_note}


def _grid(index_dates, index_returns, window: int, warnings: list):
    d = np.asarray(index_dates, dtype="datetime64[D]")
    r = np.asarray(index_returns, float)
    if d.size != r.size:
        raise ValueError("index_dates and index_returns differ in length")
    if d.size < window + 1:
        warnings.append(f"the underlying's history has {d.size} returns, fewer than the "
                        f"window of {window}; all of them are used")
    take = min(window + 1, d.size)
    return d[-take:], r[-take:]


def _returns_on_grid(closes: pd.DataFrame, grid: np.ndarray):
    """Log returns of each column on grid[1:], and per column counts of dates that are
    not grid dates (within the grid's span) and grid dates with no close."""
    idx = pd.DatetimeIndex(grid.astype("datetime64[ns]"))
    span = (closes.index >= idx[0]) & (closes.index <= idx[-1])
    inside = closes[span]
    off_grid = (~inside.index.isin(idx))
    off_counts = inside[off_grid].notna().sum(axis=0)
    # closes after the underlying's last date cannot be lined up: counted with the others
    off_counts = off_counts + closes[closes.index > idx[-1]].notna().sum(axis=0)
    on = closes.reindex(idx)
    missing = on.isna().sum(axis=0)
    c = on.to_numpy(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        rets = np.log(c[1:] / c[:-1])
    return rets, off_counts, missing, on


def fit_portfolio(index_dates, index_returns, *, holdings=None, panel=None,
                  value_history=None, portfolio_value: float | None = None,
                  hedge_ratio: float | None = None, window: int = DEFAULT_WINDOW,
                  min_coverage: float = MIN_COVERAGE) -> PortfolioFit:
    """Beta and basis risk of a portfolio against the underlying (see module Notes).

    Parameters
    ----------
    index_dates, index_returns : the underlying's return dates and daily log returns.
    holdings, panel : :class:`~optbench.data.holdings.Holdings` and the holdings'
        :class:`~optbench.data.holdings.PricePanel`; or
    value_history : a :class:`~optbench.data.holdings.PricePanel` of the portfolio's value.
    portfolio_value : money; required for weights or a value history, optional (an
        override, reported) for quantities.
    hedge_ratio : overrides the estimated beta for the hedge (reported).
    window : returns of the underlying to use (default 252, one year).
    min_coverage : share of the window a holding's returns must cover to be used.
    """
    if window < MIN_OBS:
        raise InputError("--beta-window", f"must be at least {MIN_OBS} returns, not {window}")
    warnings: list[str] = []
    grid, x_all = _grid(index_dates, index_returns, window, warnings)
    x = x_all[1:]
    ret_dates = grid[1:]
    rows = pd.DataFrame(columns=list(HOLDING_COLUMNS))
    if value_history is not None:
        warnings.extend(f"{value_history.source}: {s}" for s in value_history.issues)
        for s, notes in value_history.series_issues.items():
            warnings.extend(f"{value_history.source}: {n}" for n in notes)
        rets, off, miss, on = _returns_on_grid(value_history.closes, grid)
        y = rets[:, 0]
        if int(off.iloc[0]):
            warnings.append(f"{value_history.source}: {int(off.iloc[0])} dates are not "
                            "trading dates of the underlying and are ignored")
        last = on.iloc[:, 0].dropna()
        value = float(portfolio_value) if portfolio_value is not None else (
            float(last.iloc[-1]) if len(last) else math.nan)
        if portfolio_value is None and len(last) and last.index[-1] != on.index[-1]:
            warnings.append(f"{value_history.source}: last value is from "
                            f"{last.index[-1].date()}, before the underlying's last date "
                            f"{on.index[-1].date()}")
        warnings.append("a value history includes any deposits and withdrawals: returns "
                        "on days with flows are not market moves")
        source = f"value history ({value_history.source})"
    elif holdings is not None and panel is not None:
        warnings.extend(f"{holdings.source}: {s}" for s in holdings.issues)
        warnings.extend(f"{panel.source}: {s}" for s in panel.issues)
        t = holdings.table
        syms = t["symbol"].tolist()
        closes = panel.closes.reindex(columns=syms)
        rets, off, miss, on = _returns_on_grid(closes, grid)
        last_close = closes[closes.index <= pd.Timestamp(grid[-1])].ffill().iloc[-1] \
            if len(closes) else pd.Series(np.nan, index=syms)
        price = np.where(np.isfinite(t["price"].to_numpy(float)), t["price"].to_numpy(float),
                         last_close.reindex(syms).to_numpy(float))
        if holdings.sized_by == "quantity":
            val = t["quantity"].to_numpy(float) * price
            total = float(np.nansum(val))
            if portfolio_value is not None:
                value = float(portfolio_value)
                if total > 0 and abs(value / total - 1) > 0.005:
                    warnings.append(f"--portfolio {value:,.0f} differs from the holdings' "
                                    f"value {total:,.0f}; the given value is hedged")
            else:
                value = total
        else:
            if portfolio_value is None:
                raise InputError("--portfolio", "holdings sized by weight need the "
                                                "portfolio's value")
            value = float(portfolio_value)
            val = t["weight"].to_numpy(float) * value
        stats = masked_ols_columns(rets, x)
        n_ret = np.isfinite(rets).sum(axis=0)
        cov = n_ret / max(len(x), 1)
        valued = np.isfinite(val)
        use = (cov >= min_coverage) & valued
        notes = []
        for i, s in enumerate(syms):
            why = []
            why.extend(panel.series_issues.get(s, []))
            if not valued[i]:
                why.append("no price given and none in its history: not valued")
            if cov[i] < min_coverage:
                why.append(f"returns on {int(n_ret[i])} of {len(x)} dates in the window "
                           f"(under {min_coverage:.0%}): left out of the estimate")
            if int(off.get(s, 0)):
                why.append(f"{int(off[s])} closes on dates that are not the underlying's "
                           "trading dates (or after its last date) ignored")
            gaps = int(miss.get(s, 0))
            if use[i] and gaps:
                why.append(f"no close on {gaps} of the underlying's dates")
            notes.append("; ".join(why))
        wv = np.where(valued, val, 0.0)
        gross = np.abs(wv).sum()
        if not use.any():
            raise InputError(holdings.source, "no holding has a usable price history over "
                                              f"the last {len(x)} returns of the underlying")
        w_fit = np.where(use, wv, 0.0)
        if not w_fit.sum() > 0:
            raise InputError(holdings.source, "the holdings with usable histories are not "
                                              "net long (their values sum to "
                                              f"{w_fit.sum():,.0f}); a protective put does "
                                              "not hedge them")
        w_fit = w_fit / w_fit.sum()
        left = ~use
        if left.any():
            share = float(np.abs(wv[left]).sum() / gross) if gross > 0 else math.nan
            warnings.append(f"{int(left.sum())} holdings ({share:.1%} of the value) left out of "
                            f"the beta estimate: {', '.join(np.array(syms)[left])}; the "
                            "estimate assumes they move like the rest")
        R = rets[:, use]
        ok = np.isfinite(R).all(axis=1)
        if (~ok).any():
            warnings.append(f"{int((~ok).sum())} of {len(x)} dates dropped from the regression: "
                            "a holding used has no return on them")
        simple = np.where(ok[:, None], np.expm1(np.where(np.isfinite(R), R, 0.0)), 0.0)
        y = np.where(ok, np.log1p(simple @ w_fit[use]), np.nan)
        rows = pd.DataFrame({
            "symbol": syms, "quantity": t["quantity"].to_numpy(float),
            "weight": wv / wv.sum() if wv.sum() else np.nan, "price": price, "value": val,
            "weight_in_fit": w_fit, "n_returns": n_ret.astype(int), "coverage": cov,
            "beta": stats["beta"], "beta_se": stats["beta_se"],
            "r_squared": stats["r_squared"],
            "status": np.where(use, "used", "left out"), "note": notes})
        for s, n in zip(syms, notes):
            if n:
                warnings.append(f"{s}: {n}")
        source = f"holdings ({holdings.source}; histories {panel.source})"
    else:
        raise InputError("--holdings", "give holdings with their price histories, or a "
                                       "history of the portfolio's value")
    good = np.isfinite(y) & np.isfinite(x)
    if good.sum() < MIN_OBS:
        raise InputError(source, f"only {int(good.sum())} returns line up with the "
                                 f"underlying's; at least {MIN_OBS} are needed for a beta")
    fit = ols_beta(y[good], x[good], ret_dates[good])
    if not math.isfinite(value) or value <= 0:
        raise InputError("--portfolio", "the portfolio's value could not be found; give "
                                        "--portfolio VALUE")
    if hedge_ratio is not None:
        ratio, ratio_source = float(hedge_ratio), "user override"
        warnings.append(f"hedge ratio {ratio:g} given by the user in place of the estimated "
                        f"beta {fit.beta:.3f} (standard error {fit.beta_se:.3f})")
    else:
        ratio, ratio_source = fit.beta, "estimated beta"
        if not ratio > 0:
            raise InputError(source, f"estimated beta {fit.beta:.3f} is not positive: a "
                                     "protective put does not hedge this portfolio "
                                     "(give --hedge-ratio to hedge anyway)")
    return PortfolioFit(source=source, value=value, beta=fit, hedge_ratio=ratio,
                        ratio_source=ratio_source, holdings=rows, window=int(window),
                        warnings=tuple(warnings))
