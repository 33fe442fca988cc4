"""The record store: exact round trips, append-only, one-line errors for a locked,
damaged or foreign file, and a writer killed half-way loses nothing written before
and leaves nothing half-written (SQLite's atomic commit)."""
from __future__ import annotations

import math
import os
import signal
import sqlite3
import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest

from optbench.errors import InputError
from optbench.track import store


def _rows(rng, n: int, asof: str = "2026-11-27") -> tuple[dict, list[dict]]:
    head = {"asof": asof, "underlying": "ZPHX", "source": "chains/ZPHX",
            "spot": float(rng.uniform(4000, 6000)), "rate": 0.04, "div_yield": 0.015,
            "model": "gjr", "dist": "t", "mean": "constant", "band_low": 0.05,
            "band_high": 0.95, "n_paths": 2000, "seed": 7, "warnings": "one\ntwo"}
    rows = []
    for i in range(n):
        r = {f: float(rng.uniform(0.05, 0.6)) for f in store.EXPIRY_FIELDS}
        r.update(expiry=f"2027-{1 + i // 28:02d}-{1 + i % 28:02d}", calendar_days=30 + i,
                 trading_days=21 + i, verdict=("rich", "fair", "cheap")[i % 3])
        rows.append(r)
    rows[0]["iv_25d_call"] = math.nan         # a missing number travels as NaN
    return head, rows


def test_every_saved_row_round_trips_exactly(tmp_path):
    rng = np.random.default_rng(1)
    path = tmp_path / "records.sqlite"
    saved = [_rows(rng, 8, asof=f"2026-11-{20 + k}") for k in range(3)]
    ids = [store.append_rows(path, h, r) for h, r in saved]
    assert ids == [1, 2, 3]
    heads, rows = store.read_records(path)
    assert len(heads) == 3 and len(rows) == 24
    for (h, r), cid in zip(saved, ids):
        got_h = heads[heads["id"] == cid].iloc[0]
        for k, v in h.items():
            assert got_h[k] == v, k
        got = rows[rows["comparison_id"] == cid].reset_index(drop=True)
        for i, row in enumerate(r):
            for k, v in row.items():
                g = got.loc[i, k]
                if isinstance(v, float) and math.isnan(v):
                    assert math.isnan(g)
                else:
                    assert g == v, (k, g, v)          # bit for bit, no rounding


def test_store_is_append_only_and_versioned(tmp_path):
    path = tmp_path / "records.sqlite"
    store.append_rows(path, *_rows(np.random.default_rng(2), 2))
    con = sqlite3.connect(path)
    with pytest.raises(sqlite3.DatabaseError, match="append-only"):
        con.execute("UPDATE expiries SET atm_iv = 0.5")
    with pytest.raises(sqlite3.DatabaseError, match="append-only"):
        con.execute("DELETE FROM comparisons")
    assert con.execute("SELECT value FROM store_meta WHERE key='schema_version'"
                       ).fetchone()[0] == str(store.SCHEMA_VERSION)
    con.close()


def test_damaged_foreign_and_newer_files_are_one_line_errors(tmp_path):
    bad = tmp_path / "bad.sqlite"
    bad.write_bytes(b"this is not a database at all" * 100)
    before = bad.read_bytes()
    with pytest.raises(InputError, match="bad.sqlite: not a readable record store"):
        store.append_rows(bad, *_rows(np.random.default_rng(3), 1))
    assert bad.read_bytes() == before                 # nothing lost or overwritten
    with pytest.raises(InputError, match="not a readable record store"):
        store.read_records(bad)
    foreign = tmp_path / "foreign.sqlite"
    con = sqlite3.connect(foreign)
    con.execute("CREATE TABLE things (x)")
    con.commit()
    con.close()
    with pytest.raises(InputError, match="not an optbench record store"):
        store.append_rows(foreign, *_rows(np.random.default_rng(3), 1))
    newer = tmp_path / "newer.sqlite"
    store.append_rows(newer, *_rows(np.random.default_rng(3), 1))
    con = sqlite3.connect(newer)
    con.execute("DROP TRIGGER IF EXISTS comparisons_no_update")
    con.execute("UPDATE store_meta SET value='99' WHERE key='schema_version'")
    con.commit()
    con.close()
    with pytest.raises(InputError, match="schema 99, written by a newer optbench"):
        store.read_records(newer)


def test_second_writer_waits_then_gets_a_one_line_error(tmp_path):
    path = tmp_path / "records.sqlite"
    store.append_rows(path, *_rows(np.random.default_rng(4), 3))
    holder = sqlite3.connect(path, isolation_level=None)
    holder.execute("BEGIN IMMEDIATE")                 # another writer holds the lock
    try:
        with pytest.raises(InputError, match="locked by another program; nothing was "
                                             "written"):
            store.append_rows(path, *_rows(np.random.default_rng(5), 3), timeout=0.2)
    finally:
        holder.execute("ROLLBACK")
        holder.close()
    heads, rows = store.read_records(path)
    assert len(heads) == 1 and len(rows) == 3
    store.append_rows(path, *_rows(np.random.default_rng(6), 3))  # free again: works
    assert len(store.read_records(path)[0]) == 2


def test_two_writers_at_once_both_land(tmp_path):
    path = tmp_path / "records.sqlite"
    store.append_rows(path, *_rows(np.random.default_rng(7), 1))
    script = textwrap.dedent(f"""
        import numpy as np, sys
        sys.path.insert(0, {str(os.path.dirname(__file__))!r})
        from test_store import _rows
        from optbench.track import store
        for k in range(20):
            store.append_rows({str(path)!r}, *_rows(np.random.default_rng(k), 5))
    """)
    procs = [subprocess.Popen([sys.executable, "-c", script]) for _ in range(2)]
    assert [p.wait(timeout=120) for p in procs] == [0, 0]
    heads, rows = store.read_records(path)
    assert len(heads) == 41 and len(rows) == 1 + 2 * 20 * 5


def test_a_writer_killed_half_way_leaves_the_store_whole(tmp_path):
    path = tmp_path / "records.sqlite"
    rng = np.random.default_rng(8)
    saved = [_rows(rng, 8) for _ in range(3)]
    for h, r in saved:
        store.append_rows(path, h, r)
    before = store.read_records(path)
    # a child appends one very large comparison; it is killed while writing
    script = textwrap.dedent(f"""
        import numpy as np, sys
        from optbench.track import store
        rows = [dict(expiry=f"E{{i:07d}}", atm_iv=0.2, verdict="fair") for i in range(200_000)]
        print("writing", flush=True)
        store.append_rows({str(path)!r}, {{"asof": "2026-12-01", "underlying": "ZPHX"}}, rows)
        print("done", flush=True)
    """)
    child = subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE, text=True)
    assert child.stdout.readline().strip() == "writing"
    wal = path.with_name(path.name + "-wal")
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and not (wal.exists() and wal.stat().st_size > 1 << 16):
        time.sleep(0.01)
    assert child.poll() is None, "the writer finished before it could be killed"
    os.kill(child.pid, signal.SIGKILL)
    child.wait()
    heads, rows = store.read_records(path)
    assert len(heads) == 3 and len(rows) == 24            # nothing half-written
    assert heads.equals(before[0]) and rows.equals(before[1])   # nothing lost
    store.append_rows(path, *_rows(rng, 2))                   # and the store still works
    assert len(store.read_records(path)[0]) == 4
