"""The record store: past comparisons kept in one SQLite file (standard library).

``optbench compare --record FILE`` appends each comparison to the store;
``optbench track --store FILE`` reads it back as an implied-vol history. The store
is append-only (triggers refuse updates and deletes) and carries its schema
version in the ``store_meta`` table. One table per kind of row:

``comparisons``
    one row per recorded comparison: ``id``, ``recorded_at`` (UTC, ISO 8601),
    ``asof``, ``underlying``, ``source``, ``spot``, ``rate``, ``div_yield``,
    ``model``, ``dist``, ``mean``, ``band_low``, ``band_high``, ``n_paths``,
    ``seed``, ``warnings`` (one per line).
``expiries``
    one row per expiry of a recorded comparison (``comparison_id`` refers to
    ``comparisons.id``): ``expiry``, ``calendar_days``, ``trading_days``,
    ``forward``, ``atm_iv``, ``atm_iv_bid``, ``atm_iv_ask``, ``iv_25d_put``,
    ``iv_25d_call``, ``model_free_iv``, ``forecast_vol``, ``forecast_low``,
    ``forecast_high``, ``realized_vol``, ``prob_realized_above_iv``, ``verdict``.

Safety: every append is one transaction taken with ``BEGIN IMMEDIATE`` (a second
writer waits up to the busy timeout, then gets a one-line error and writes
nothing); the file runs in write-ahead-log mode with full sync, so a writer killed
half-way leaves the store as it was before that append (SQLite's atomic commit).
Dates are ISO strings, vols decimals stored as 8-byte IEEE floats (read back bit
for bit); a missing number is stored as NULL and read back as NaN.
"""
from __future__ import annotations

import datetime as _dt
import math
import sqlite3
from collections.abc import Sequence
from pathlib import Path

import numpy as np
import pandas as pd

from optbench.errors import InputError

SCHEMA_VERSION = 1
DEFAULT_TIMEOUT = 5.0     # seconds a writer waits for another writer

COMPARISON_FIELDS = ("recorded_at", "asof", "underlying", "source", "spot", "rate",
                     "div_yield", "model", "dist", "mean", "band_low", "band_high",
                     "n_paths", "seed", "warnings")
EXPIRY_FIELDS = ("expiry", "calendar_days", "trading_days", "forward", "atm_iv",
                 "atm_iv_bid", "atm_iv_ask", "iv_25d_put", "iv_25d_call", "model_free_iv",
                 "forecast_vol", "forecast_low", "forecast_high", "realized_vol",
                 "prob_realized_above_iv", "verdict")
_TEXT = {"recorded_at", "asof", "underlying", "source", "model", "dist", "mean", "warnings",
         "expiry", "verdict"}
_INT = {"n_paths", "seed", "calendar_days", "trading_days"}


def _sql_type(name: str) -> str:
    return "TEXT" if name in _TEXT else ("INTEGER" if name in _INT else "REAL")


_SCHEMA = [
    "CREATE TABLE IF NOT EXISTS store_meta (key TEXT PRIMARY KEY, value TEXT NOT NULL)",
    "CREATE TABLE IF NOT EXISTS comparisons (id INTEGER PRIMARY KEY AUTOINCREMENT, "
    + ", ".join(f"{f} {_sql_type(f)}" for f in COMPARISON_FIELDS) + ")",
    "CREATE TABLE IF NOT EXISTS expiries (comparison_id INTEGER NOT NULL REFERENCES "
    "comparisons(id), " + ", ".join(f"{f} {_sql_type(f)}" for f in EXPIRY_FIELDS)
    + ", PRIMARY KEY (comparison_id, expiry))",
    "CREATE INDEX IF NOT EXISTS comparisons_by_underlying ON comparisons (underlying, asof)",
] + [
    f"CREATE TRIGGER IF NOT EXISTS {t}_no_{op.lower()} BEFORE {op} ON {t} "
    "BEGIN SELECT RAISE(ABORT, 'the record store is append-only'); END"
    for t in ("comparisons", "expiries") for op in ("UPDATE", "DELETE")
]


def _fail(path: Path, err: Exception, doing: str) -> InputError:
    text = str(err)
    if isinstance(err, sqlite3.OperationalError) and ("locked" in text or "busy" in text):
        return InputError(path, f"the record store is locked by another program; "
                                f"nothing was {doing} (try again)")
    if isinstance(err, sqlite3.DatabaseError):
        return InputError(path, f"not a readable record store ({text}); nothing was {doing}")
    return InputError(path, f"cannot use the record store ({err}); nothing was {doing}")


def _connect(path: Path, timeout: float) -> sqlite3.Connection:
    con = sqlite3.connect(str(path), timeout=timeout, isolation_level=None)
    con.execute(f"PRAGMA busy_timeout = {int(timeout * 1000)}")
    return con


def _check_version(con: sqlite3.Connection, path: Path) -> int | None:
    """The store's schema version; None for an empty new file."""
    tables = {r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type='table'")}
    if not tables:
        return None
    if "store_meta" not in tables:
        raise InputError(path, "an SQLite file but not an optbench record store")
    row = con.execute("SELECT value FROM store_meta WHERE key='schema_version'").fetchone()
    if row is None:
        raise InputError(path, "record store without a schema version (damaged?)")
    version = int(row[0])
    if version > SCHEMA_VERSION:
        raise InputError(path, f"record store of schema {version}, written by a newer "
                               f"optbench (this one reads up to {SCHEMA_VERSION})")
    return version


def _num(x) -> float | None:
    try:
        v = float(x)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def _int(x) -> int | None:
    v = _num(x)
    return None if v is None else int(v)


def _text(x) -> str | None:
    if x is None:
        return None
    if isinstance(x, (_dt.date, _dt.datetime)):
        return x.isoformat()[:10] if not isinstance(x, _dt.datetime) else x.isoformat()
    return str(x)


def _cell(name: str, value):
    if name in _TEXT:
        return _text(value)
    if name in _INT:
        return _int(value)
    return _num(value)


def append_rows(path: str | Path, comparison: dict, expiries: Sequence[dict], *,
                timeout: float | None = None) -> int:
    """Append one comparison and its expiry rows in one transaction.

    ``comparison`` is keyed by :data:`COMPARISON_FIELDS` (``recorded_at`` defaults
    to now, UTC), each expiry row by :data:`EXPIRY_FIELDS`; missing keys are stored
    as NULL. Returns the comparison's id.

    Raises
    ------
    InputError
        The folder does not exist; the file is not a record store, is damaged, is
        of a newer schema, or stays locked by another writer beyond ``timeout``
        seconds (default :data:`DEFAULT_TIMEOUT`). Nothing is written then.
    """
    timeout = DEFAULT_TIMEOUT if timeout is None else float(timeout)
    path = Path(path)
    if path.is_dir():
        raise InputError(path, "is a folder; give the record store's file name")
    if not path.parent.exists():
        raise InputError(path, f"folder {path.parent} does not exist")
    head = dict(comparison)
    head.setdefault("recorded_at", _dt.datetime.now(_dt.timezone.utc)
                    .isoformat(timespec="microseconds"))
    head_row = tuple(_cell(f, head.get(f)) for f in COMPARISON_FIELDS)
    rows = [tuple(_cell(f, r.get(f)) for f in EXPIRY_FIELDS) for r in expiries]
    con = None
    try:
        con = _connect(path, timeout)
        if con.execute("PRAGMA journal_mode").fetchone()[0].lower() != "wal":
            con.execute("PRAGMA journal_mode = WAL")
        con.execute("PRAGMA synchronous = FULL")
        con.execute("BEGIN IMMEDIATE")
        try:
            version = _check_version(con, path)
            if version is None:
                for stmt in _SCHEMA:
                    con.execute(stmt)
                con.execute("INSERT INTO store_meta VALUES ('schema_version', ?)",
                            (str(SCHEMA_VERSION),))
                con.execute("INSERT INTO store_meta VALUES ('written_by', 'optbench')")
            cur = con.execute(
                f"INSERT INTO comparisons ({', '.join(COMPARISON_FIELDS)}) VALUES "
                f"({', '.join('?' * len(COMPARISON_FIELDS))})", head_row)
            cid = int(cur.lastrowid)
            con.executemany(
                f"INSERT INTO expiries (comparison_id, {', '.join(EXPIRY_FIELDS)}) VALUES "
                f"(?, {', '.join('?' * len(EXPIRY_FIELDS))})", [(cid, *r) for r in rows])
            con.execute("COMMIT")
        except BaseException:
            if con.in_transaction:
                con.execute("ROLLBACK")
            raise
        return cid
    except InputError:
        raise
    except sqlite3.Error as err:
        raise _fail(path, err, "written") from None
    finally:
        if con is not None:
            con.close()


def record_comparison(path: str | Path, comparison, *, timeout: float | None = None
                      ) -> int:
    """Append a :class:`~optbench.analysis.results.Comparison` (each expiry's row) to
    the store at ``path`` (created when missing). Returns the comparison's id."""
    m = comparison.model
    head = {"asof": comparison.asof, "underlying": comparison.underlying,
            "source": comparison.source, "spot": comparison.spot, "rate": comparison.rate,
            "div_yield": comparison.div_yield, "model": m.name, "dist": m.dist,
            "mean": m.mean, "band_low": comparison.band[0], "band_high": comparison.band[1],
            "n_paths": comparison.n_paths, "seed": comparison.seed,
            "warnings": "\n".join(comparison.warnings)}
    rows = [{f: getattr(e, f, None) for f in EXPIRY_FIELDS} for e in comparison.expiries]
    return append_rows(path, head, rows, timeout=timeout)


def read_records(path: str | Path, *, timeout: float | None = None
                 ) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Every row of the store: ``(comparisons, expiries)`` as DataFrames with the
    tables' columns (NULL numbers as NaN, dates as ISO strings)."""
    path = Path(path)
    if not path.is_file():
        raise InputError(path, "no such record store")
    con = None
    try:
        con = sqlite3.connect(f"file:{path}?mode=ro", uri=True,
                              timeout=DEFAULT_TIMEOUT if timeout is None else timeout)
        version = _check_version(con, path)
        if version is None:
            raise InputError(path, "an empty file, not a record store")
        heads = pd.read_sql_query("SELECT * FROM comparisons ORDER BY id", con)
        rows = pd.read_sql_query("SELECT * FROM expiries ORDER BY comparison_id, expiry", con)
    except InputError:
        raise
    except (sqlite3.Error, pd.errors.DatabaseError) as err:
        raise _fail(path, err, "read") from None
    finally:
        if con is not None:
            con.close()
    for frame, names in ((heads, COMPARISON_FIELDS), (rows, EXPIRY_FIELDS)):
        for f in names:
            if f not in _TEXT and f not in _INT:
                frame[f] = pd.to_numeric(frame[f], errors="coerce").astype(float)
    return heads, rows


def read_iv_history(path: str | Path, underlying: str | None = None):
    """The store's expiry rows as an implied-vol history
    (:class:`optbench.track.ivfile.IvHistory`): date = the comparison's as-of date,
    the expiry and its calendar days, the ATM and 25-delta vols. Rows of other
    underlyings are left out (and counted); an as-of date and expiry recorded more
    than once keep the latest recording; rows without an ATM vol are rejected.
    ``line`` is the comparison's id in the store.
    """
    from optbench.track.ivfile import IvHistory

    heads, rows = read_records(path)
    if rows.empty:
        raise InputError(path, "the record store holds no comparison yet")
    merged = rows.merge(heads[["id", "asof", "underlying", "recorded_at"]],
                        left_on="comparison_id", right_on="id", how="left")
    n_in = len(merged)
    reason = np.full(n_in, "", dtype=object)
    if underlying:
        other = (merged["underlying"].astype(str) != str(underlying)).to_numpy()
        reason[other] = "other_underlying"
        if other.all():
            names = ", ".join(sorted(set(merged["underlying"].astype(str))))
            raise InputError(path, f"no comparison of {underlying} in the record store "
                                   f"(it holds {names})")
    atm = merged["atm_iv"].to_numpy(float)
    reason[(reason == "") & ~(atm > 0)] = "bad_vol"
    merged["date"] = pd.to_datetime(merged["asof"], errors="coerce")
    merged["expiry_dt"] = pd.to_datetime(merged["expiry"], errors="coerce")
    reason[(reason == "") & (merged["date"].isna() | merged["expiry_dt"].isna()).to_numpy()] \
        = "bad_date"
    ok = reason == ""
    order = merged[ok].sort_values(["date", "expiry_dt", "recorded_at", "comparison_id"])
    again = order.duplicated(["date", "expiry_dt"], keep="last")
    reason[again[again].index.to_numpy()] = "recorded_again"
    ok = reason == ""
    used = merged[ok]
    frame = pd.DataFrame({
        "date": used["date"].to_numpy("datetime64[ns]"),
        "tenor_days": (used["expiry_dt"] - used["date"]).dt.days.to_numpy(np.int64),
        "expiry": used["expiry_dt"].to_numpy("datetime64[ns]"),
        "atm_iv": used["atm_iv"].to_numpy(float),
        "iv_25d_put": used["iv_25d_put"].to_numpy(float),
        "iv_25d_call": used["iv_25d_call"].to_numpy(float),
        "tenor_given": np.zeros(len(used), bool),
        "line": used["comparison_id"].to_numpy(np.int64)})
    bad_tenor = frame["tenor_days"].to_numpy() < 1
    frame = frame[~bad_tenor].sort_values(["date", "tenor_days"]).reset_index(drop=True)
    details = {"other_underlying": "a comparison of another underlying",
               "bad_vol": "no ATM implied vol recorded",
               "bad_date": "unreadable as-of or expiry date",
               "recorded_again": "the same as-of date and expiry recorded later again"}
    rej = merged[~ok]
    rejected = pd.DataFrame({"line": rej["comparison_id"].to_numpy(np.int64),
                             "reason": reason[~ok].astype(str),
                             "detail": [details[r] for r in reason[~ok]]})
    if bad_tenor.any():
        extra = pd.DataFrame({"line": used["comparison_id"].to_numpy(np.int64)[bad_tenor],
                              "reason": "bad_tenor", "detail": "expiry not after the as-of date"})
        rejected = pd.concat([rejected, extra], ignore_index=True)
    if frame.empty:
        raise InputError(path, "no usable comparison row in the record store")
    counts = {str(k): int(v) for k, v in rejected["reason"].value_counts().items()}
    return IvHistory(source=str(path), frame=frame, rejected=rejected,
                     quality={"rows_in": int(n_in), "rows_used": int(len(frame)),
                              "rejected": counts},
                     units={}, issues=[])
