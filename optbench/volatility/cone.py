"""The volatility cone: how realized volatility has been distributed, by window length.

For each window length (in trading days) the cone holds percentiles of the rolling
realized volatility over the whole history (Burghardt & Lane 1990), the latest
value, and can say where any volatility (an option's implied vol, a forecast) sits
in that distribution.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from optbench.volatility.realized import realized_vol

__all__ = ["VolCone", "vol_cone", "DEFAULT_CONE_WINDOWS", "DEFAULT_CONE_QUANTILES"]

DEFAULT_CONE_WINDOWS = (5, 10, 21, 42, 63, 126, 252)
DEFAULT_CONE_QUANTILES = (0.0, 0.10, 0.25, 0.50, 0.75, 0.90, 1.0)


@dataclass(frozen=True)
class VolCone:
    """Percentiles of rolling realized volatility by window length.

    Attributes
    ----------
    windows : ndarray of int
        Window lengths in trading days (only those the history can fill).
    quantiles : ndarray
        Probability levels of the columns of ``values`` (0 = minimum, 1 = maximum).
    values : ndarray, shape (len(windows), len(quantiles))
        Annualised realized volatility (decimal) at each window and level.
    latest : ndarray
        Realized volatility over the last ``w`` days, per window.
    n_obs : ndarray of int
        Rolling (overlapping) observations behind each row.
    estimator : str
        Realized-vol estimator name.
    """

    windows: np.ndarray
    quantiles: np.ndarray
    values: np.ndarray
    latest: np.ndarray
    n_obs: np.ndarray
    estimator: str
    _sorted: tuple = field(repr=False, default=())

    def percentile_rank(self, vols, windows) -> np.ndarray:
        """Where each vol sits in the cone: the share (0..1) of rolling realized vols
        of the nearest cone window (by log window length) that lie below it, ties
        counted half.

        ``vols`` and ``windows`` broadcast together; windows outside the cone use its
        shortest or longest window.
        """
        v, w = np.broadcast_arrays(np.asarray(vols, dtype=float),
                                   np.asarray(windows, dtype=float))
        out = np.full(v.shape, np.nan)
        if self.windows.size == 0:
            return out
        idx = np.abs(np.log(np.maximum(w, 1.0))[..., None]
                     - np.log(self.windows)).argmin(axis=-1)
        for j in np.unique(idx):
            sel = idx == j
            s = self._sorted[j]
            lo = np.searchsorted(s, v[sel], side="left")
            hi = np.searchsorted(s, v[sel], side="right")
            out[sel] = (lo + hi) / (2.0 * s.size)
        out[~np.isfinite(v)] = np.nan
        return out

    def to_dict(self) -> dict:
        return {
            "estimator": self.estimator,
            "quantiles": self.quantiles.tolist(),
            "windows": [
                {"trading_days": int(w), "n_obs": int(n), "latest": float(l),
                 "percentiles": {f"{q:g}": float(x) for q, x in zip(self.quantiles, row)}}
                for w, n, l, row in zip(self.windows, self.n_obs, self.latest, self.values)
            ],
        }


def vol_cone(history, windows=DEFAULT_CONE_WINDOWS, quantiles=DEFAULT_CONE_QUANTILES,
             estimator: str = "close") -> VolCone:
    """Build the volatility cone of a price history.

    Parameters
    ----------
    history : PriceHistory
        ``close`` (and ``open``/``high``/``low`` for range estimators).
    windows : sequence of int
        Window lengths in trading days; those longer than the history allows are
        dropped.
    quantiles : sequence of float
        Probability levels in [0, 1].
    estimator : str
        See :func:`optbench.volatility.realized.realized_vol`.

    Notes
    -----
    For each window n, the rolling realized vol sigma_n(t) is computed on every
    day t the window fits (overlapping windows) and summarised by its empirical
    quantiles (linear interpolation). Burghardt, G. and Lane, M. (1990), "How to
    tell if options are cheap", Journal of Portfolio Management 16(2), 72-78.
    Overlapping windows make the observations dependent, so long-window
    percentiles rest on few independent periods; ``n_obs`` shows how many
    overlapping values each row uses.
    """
    q = np.asarray(quantiles, dtype=float)
    if q.ndim != 1 or np.any((q < 0) | (q > 1)):
        raise ValueError("cone quantiles must be levels in [0, 1]")
    rows, latest, n_obs, kept, sorted_ = [], [], [], [], []
    for w in sorted({int(x) for x in windows}):
        if w < 2:
            continue
        series = realized_vol(history, w, estimator)
        vals = series[np.isfinite(series)]
        if vals.size < 2:
            continue
        kept.append(w)
        rows.append(np.quantile(vals, q))
        latest.append(series[-1])
        n_obs.append(vals.size)
        sorted_.append(np.sort(vals))
    return VolCone(np.asarray(kept, dtype=int), q,
                   np.asarray(rows, dtype=float).reshape(len(kept), q.size),
                   np.asarray(latest, dtype=float), np.asarray(n_obs, dtype=int),
                   estimator, tuple(sorted_))
