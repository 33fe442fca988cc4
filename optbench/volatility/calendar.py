"""Trading-day calendar: how many trading days lie between the as-of date and each
expiry (weekdays, less an optional holiday list)."""
from __future__ import annotations

import numpy as np

from optbench.errors import InputError


def _as_days(values, source: str) -> np.ndarray:
    try:
        arr = np.asarray(values)
        if arr.dtype.kind == "M":
            return arr.astype("datetime64[D]")
        if arr.dtype.kind in "OU" or arr.dtype.kind == "S":
            return np.array([np.datetime64(str(v)[:10], "D") if not hasattr(v, "year")
                             else np.datetime64(f"{v.year:04d}-{v.month:02d}-{v.day:02d}", "D")
                             for v in arr.ravel()]).reshape(arr.shape)
        return arr.astype("datetime64[D]")
    except (ValueError, TypeError):
        raise InputError(source, "not a date (YYYY-MM-DD)") from None


def trading_days(asof, dates, holidays=()) -> np.ndarray | int:
    """Number of trading days after ``asof`` up to and including each date.

    Parameters
    ----------
    asof : date-like
        The as-of (quote) date; it is not counted.
    dates : date-like or array of dates
        Expiries (or any horizon ends).
    holidays : sequence of date-like
        Exchange holidays to skip (weekends are always skipped).

    Returns
    -------
    int or ndarray of int
        Trading days in ``(asof, date]``; negative when a date lies before asof.

    Notes
    -----
    ``numpy.busday_count(asof + 1, date + 1, holidays)``: counts weekdays in the
    half-open range ``[asof + 1, date + 1)``. Volatility-model horizons in optbench
    are these trading days, annualised with 252.
    """
    a = _as_days(asof, "asof")
    if a.ndim:
        a = a.reshape(-1)[0] if a.size == 1 else a
    d = _as_days(dates, "dates")
    hol = _as_days(list(holidays), "holidays") if len(holidays) else np.array([], "datetime64[D]")
    one = np.timedelta64(1, "D")
    out = np.busday_count(a + one, d + one, holidays=hol)
    return int(out) if np.ndim(out) == 0 else out
