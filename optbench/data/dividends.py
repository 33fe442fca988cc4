"""Discrete cash dividends of the underlying: a schedule of ex-dates and amounts.

A schedule comes from a scenario's ``meta.toml``::

    [[dividends]]
    ex_date = 2026-12-18      # a TOML date or a "YYYY-MM-DD" string
    amount = 12.5             # cash per share, in the underlying's currency

(or ``dividends = "dividends.csv"``, a file beside ``meta.toml``), or from a CSV file
given with ``--dividends FILE`` (which beats ``meta.toml``). The file has a header
with an ex-date column (``ex_date``; also ``exdate``, ``ex-date``, ``ex_div_date``,
``date``) and an amount column (``amount``; also ``dividend``, ``cash``, ``div``,
``value``); dates are ``YYYY-MM-DD``. Every row is used or rejected with its reason
(``bad_date``, ``bad_amount``, ``repeated_ex_date``); a file with no usable row is an
error naming the file.

Times to the ex-dates follow the option times of :mod:`optbench.data.chain`:
calendar days from the quote date / 365. A dividend counts for an option when
``asof < ex_date <= expiry`` (an ex-date on the expiry day falls before the option's
end-of-day expiry). Ex-dates on or before the quote date are already in the spot
price and are not used (:meth:`DividendSchedule.describe` says how many).
"""
from __future__ import annotations

import csv
import datetime as _dt
import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from optbench.errors import InputError

_DATE_NAMES = ("exdate", "exdividenddate", "exdivdate", "date")
_AMOUNT_NAMES = ("amount", "dividend", "cash", "div", "value", "dividendamount")


@dataclass(frozen=True)
class DividendSchedule:
    """Known cash dividends of one underlying.

    Attributes
    ----------
    ex_dates : tuple of datetime.date
        Ex-dividend dates, ascending, each once.
    amounts : tuple of float
        Cash per share on each ex-date (price units of the underlying, > 0).
    source : str
        Where the schedule was read (a file path, or ``meta.toml``'s path).
    rejected : tuple of (str, str)
        ``(where, reason)`` for every entry not used (``"line 4"``, ``"bad_date: ..."``).
    """

    ex_dates: tuple
    amounts: tuple
    source: str
    rejected: tuple = ()

    def arrays(self, asof: _dt.date) -> tuple[np.ndarray, np.ndarray]:
        """``(times, amounts)``: years from ``asof`` (calendar days / 365) to each
        ex-date after ``asof``, and their amounts; ex-dates on or before ``asof`` are
        left out (already in the spot price)."""
        days = np.array([(d - asof).days for d in self.ex_dates], dtype=float)
        amt = np.asarray(self.amounts, dtype=float)
        keep = days > 0
        return days[keep] / 365.0, amt[keep]

    def describe(self, asof: _dt.date) -> str:
        """One line for outputs: how many dividends are used, their total, the source."""
        t, a = self.arrays(asof)
        past = len(self.ex_dates) - t.size
        text = (f"dividend schedule from {self.source}: {t.size} cash dividend"
                f"{'' if t.size == 1 else 's'} after the quote date (total {a.sum():g}), "
                "escrowed-dividend model for forwards and prices")
        if past:
            text += f"; {past} on or before the quote date not used"
        if self.rejected:
            text += f"; {len(self.rejected)} entr{'y' if len(self.rejected) == 1 else 'ies'} " \
                    "rejected (" + "; ".join(f"{w}: {r}" for w, r in self.rejected) + ")"
        return text


def _norm(name: str) -> str:
    return re.sub(r"[^a-z]", "", str(name).lower())


def _as_date(value) -> _dt.date | None:
    if isinstance(value, _dt.datetime):
        return value.date()
    if isinstance(value, _dt.date):
        return value
    try:
        return _dt.date.fromisoformat(str(value).strip())
    except ValueError:
        return None


def _as_amount(value) -> float | None:
    if isinstance(value, bool):
        return None
    try:
        x = float(str(value).strip().replace(",", "")) if not isinstance(value, (int, float)) \
            else float(value)
    except ValueError:
        return None
    return x if math.isfinite(x) and x > 0 else None


def _build(entries, source) -> DividendSchedule:
    """``entries``: (where, raw date, raw amount) in input order."""
    seen: dict[_dt.date, float] = {}
    rejected = []
    for where, raw_date, raw_amount in entries:
        d = _as_date(raw_date)
        if d is None:
            rejected.append((where, f"bad_date: {raw_date!r} is not a YYYY-MM-DD date"))
            continue
        a = _as_amount(raw_amount)
        if a is None:
            rejected.append((where, f"bad_amount: {raw_amount!r} is not a positive number"))
            continue
        if d in seen:
            rejected.append((where, f"repeated_ex_date: {d.isoformat()} given before"))
            continue
        seen[d] = a
    if not seen:
        why = f" ({rejected[0][0]}: {rejected[0][1]})" if rejected else ""
        raise InputError(source, f"no usable dividend (ex-date and amount){why}")
    dates = sorted(seen)
    return DividendSchedule(ex_dates=tuple(dates), amounts=tuple(seen[d] for d in dates),
                            source=str(source), rejected=tuple(rejected))


def read_dividends(path: str | Path) -> DividendSchedule:
    """Read a dividend CSV file (see the module docstring for its columns).

    Raises :class:`InputError` naming the file when it is missing, unreadable, lacks
    an ex-date or amount column, or has no usable row.
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(path, "no such dividend file")
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as err:
        raise InputError(path, f"cannot read the dividend file ({err.__class__.__name__})") \
            from None
    rows = [r for r in csv.reader(text.splitlines())]
    lines = [(i + 1, r) for i, r in enumerate(rows) if any(c.strip() for c in r)
             and not r[0].lstrip().startswith("#")]
    if not lines:
        raise InputError(path, "the dividend file is empty")
    header = [_norm(c) for c in lines[0][1]]
    date_col = next((header.index(n) for n in _DATE_NAMES if n in header), None)
    amount_col = next((header.index(n) for n in _AMOUNT_NAMES if n in header), None)
    if date_col is None or amount_col is None:
        missing = "ex_date" if date_col is None else "amount"
        raise InputError(path, f"no {missing} column in the header (the dividend file "
                               "needs ex_date and amount)")
    entries = []
    for line, r in lines[1:]:
        cell = (lambda j: r[j] if j < len(r) else "")
        entries.append((f"line {line}", cell(date_col), cell(amount_col)))
    return _build(entries, path)


def dividends_from_meta(value, meta_path: str | Path) -> DividendSchedule:
    """The schedule given by ``meta.toml``'s ``dividends`` value: a list of tables
    (``[[dividends]]`` with ``ex_date`` and ``amount``) or the name of a CSV file
    beside ``meta.toml``."""
    meta_path = Path(meta_path)
    if isinstance(value, str):
        target = Path(value)
        return read_dividends(target if target.is_absolute() else meta_path.parent / target)
    if not isinstance(value, list):
        raise InputError(meta_path, "dividends must be [[dividends]] tables with ex_date "
                                    "and amount, or the name of a dividend CSV file")
    entries = []
    for i, item in enumerate(value, start=1):
        where = f"[[dividends]] entry {i}"
        if not isinstance(item, dict):
            entries.append((where, item, None))
            continue
        keys = {_norm(k): v for k, v in item.items()}
        raw_date = next((keys[n] for n in _DATE_NAMES if n in keys), None)
        raw_amount = next((keys[n] for n in _AMOUNT_NAMES if n in keys), None)
        entries.append((where, raw_date, raw_amount))
    return _build(entries, meta_path)


def resolve_dividends(given, meta: dict | None, meta_path) -> DividendSchedule | None:
    """The schedule to use: ``given`` (a :class:`DividendSchedule` or a CSV path, from
    the caller or ``--dividends``) beats ``meta.toml``'s ``dividends``; None when
    neither gives one."""
    if isinstance(given, DividendSchedule):
        return given
    if given is not None:
        return read_dividends(given)
    if meta and meta.get("dividends") is not None and meta_path is not None:
        return dividends_from_meta(meta["dividends"], meta_path)
    return None


def attach_dividends(chain, given=None, meta: dict | None = None, meta_path=None):
    """``chain`` with its dividend schedule (``given`` beats ``meta.toml``, see
    :func:`resolve_dividends`) and a note saying the schedule was used; ``chain``
    itself when there is none."""
    import dataclasses
    schedule = resolve_dividends(given, meta, meta_path)
    if schedule is None:
        return chain
    old = getattr(chain, "dividends", None)
    notes = tuple(n for n in chain.notes if old is None or n != old.describe(chain.asof))
    return dataclasses.replace(chain, dividends=schedule,
                               notes=notes + (schedule.describe(chain.asof),))
