"""The streaming XLSX writer: cells read back by openpyxl and pandas (two outside
readers of ECMA-376 SpreadsheetML) exactly as written, and memory that does not grow
with the table."""
from __future__ import annotations

import datetime as dt
import io
import tracemalloc

import numpy as np
import pandas as pd
import pytest

from optbench.report.xlsx_stream import StreamingWorkbook, column_letter


def _book(frame, formats=None, rows=None) -> bytes:
    buf = io.BytesIO()
    wb = StreamingWorkbook(buf)
    wb.add_table("Table", list(frame.columns), frame, formats or {})
    if rows is not None:
        wb.add_rows("Items", ["item", "value"], rows, value_formats=["0.00%", None, None])
    wb.close()
    return buf.getvalue()


def test_column_letters():
    # spreadsheet column names: A..Z, AA.., as in ECMA-376 cell references
    assert [column_letter(i) for i in (1, 26, 27, 52, 53, 702, 703)] == \
        ["A", "Z", "AA", "AZ", "BA", "ZZ", "AAA"]


def test_every_kind_of_cell_reads_back_exactly():
    from openpyxl import load_workbook
    x = 0.1 + 0.2
    frame = pd.DataFrame({
        "f": [x, -1e-300, np.nan, 1e308, -0.0],
        "i": np.array([1, -2, 3, 2**53, 0], dtype=np.int64),
        "b": [True, False, True, False, True],
        "d": pd.to_datetime(["2026-11-27", "1999-12-31", None, "2100-03-01", "1900-03-01"]),
        "o": [dt.date(2027, 1, 15), None, dt.date(2026, 12, 4), dt.date(2028, 6, 30),
              dt.date(2026, 11, 27)],
        "t": ["C", "a < b & c > \"d\"", "=SUM(A1)", "bell\x07here", None],
        "m": [1, "two", 3.5, None, dt.date(2026, 1, 2)],
    })
    data = _book(frame, {"f": "0.00%", "d": "yyyy-mm-dd"},
                 rows=[("cost_pct", 0.0123), ("asof", dt.date(2026, 11, 27)), ("n", 3)])
    wb = load_workbook(io.BytesIO(data))
    ws = wb["Table"]
    rows = list(ws.iter_rows(values_only=True))
    assert rows[0] == tuple(frame.columns)
    assert [r[0] for r in rows[1:]] == [x, -1e-300, None, 1e308, 0.0]
    assert [r[1] for r in rows[1:]] == [1, -2, 3, 2**53, 0]
    assert [r[2] for r in rows[1:]] == [True, False, True, False, True]
    assert [r[3] for r in rows[1:]] == [dt.datetime(2026, 11, 27), dt.datetime(1999, 12, 31),
                                        None, dt.datetime(2100, 3, 1), dt.datetime(1900, 3, 1)]
    assert [r[4] for r in rows[1:]][:3] == [dt.datetime(2027, 1, 15), None,
                                            dt.datetime(2026, 12, 4)]
    # XML specials survive; a formula-like text is shown as text (OWASP: leading ');
    # a character XML 1.0 cannot hold is replaced, never breaks the file
    assert [r[5] for r in rows[1:]] == ["C", 'a < b & c > "d"', "'=SUM(A1)", "bell\ufffdhere",
                                        None]
    assert [r[6] for r in rows[1:]][:3] == [1, "two", 3.5]
    assert ws["A2"].number_format == "0.00%" and ws["D2"].number_format == "yyyy-mm-dd"
    assert ws["E2"].number_format == "yyyy-mm-dd"          # dates always get a date format
    assert ws.freeze_panes == "A2"
    assert all(c.data_type != "f" for row in ws.iter_rows() for c in row)
    items = wb["Items"]
    assert items["B2"].value == 0.0123 and items["B2"].number_format == "0.00%"
    assert items["B3"].value == dt.datetime(2026, 11, 27)
    # pandas with default settings: the first sheet, header in row 1
    back = pd.read_excel(io.BytesIO(data))
    assert list(back.columns) == list(frame.columns)
    assert back["f"].iloc[0] == x and np.isnan(back["f"].iloc[2])


def test_several_frames_make_one_table_in_order():
    parts = [pd.DataFrame({"k": np.arange(i * 5000, (i + 1) * 5000), "v": np.full(5000, i)})
             for i in range(3)]
    back = pd.read_excel(io.BytesIO(_book_parts(parts)))
    assert back["k"].tolist() == list(range(15000))
    assert back["v"].tolist() == [0] * 5000 + [1] * 5000 + [2] * 5000


def _book_parts(parts) -> bytes:
    buf = io.BytesIO()
    wb = StreamingWorkbook(buf)
    wb.add_table("T", ["k", "v"], parts)
    wb.close()
    return buf.getvalue()


def _peak(frame, path) -> float:
    tracemalloc.start()
    try:
        with open(path, "wb") as handle:
            wb = StreamingWorkbook(handle)
            wb.add_table("T", list(frame.columns), frame, {"a": "0.00%"})
            wb.close()
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


@pytest.mark.slow
def test_memory_stays_within_the_table_size_and_does_not_grow_with_it(tmp_path):
    # the target: a workbook's peak memory within 5x the input's size; streamed chunk
    # by chunk, the peak is one chunk's text whatever the number of rows
    rng = np.random.default_rng(3)

    def frame(n):
        return pd.DataFrame({c: rng.random(n) for c in "abcdefgh"})
    small, large = frame(8_000), frame(32_000)
    csv_bytes = len(large.to_csv(index=False).encode())
    peak_small = _peak(small, tmp_path / "s.xlsx")
    peak_large = _peak(large, tmp_path / "l.xlsx")
    assert peak_large < 5 * csv_bytes, (peak_large, csv_bytes)
    assert peak_large < 1.5 * peak_small + 1e6, (peak_small, peak_large)
    from openpyxl import load_workbook
    assert load_workbook(tmp_path / "l.xlsx", read_only=True)["T"].max_row == 32_001
