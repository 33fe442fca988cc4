"""A plain two-column price history read from its bytes, without building a table.

The usual history file is ``date,close`` and then one ``YYYY-MM-DD,1234.5678`` line a
day. :func:`read_plain_history` reads such a file with numpy on its bytes and returns
exactly what :func:`optbench.data.files.read_table` and the cell parsers give for it
(the same dates, the same closes to the last bit, the same line numbers); any file
that is not that plain — another delimiter, quotes, blanks, blank lines, carriage
returns, text outside ASCII, a preamble, a third column, a date that is not a plain
ISO date, a number with an exponent, a sign other than a leading minus or more than 15
digits — gives None and is read the general way.

Notes
-----
A cell of at most 15 digits with ``d`` of them after the point is the integer ``M`` of
its digits divided by :math:`10^d`: ``M`` (below :math:`10^{15} < 2^{53}`) and
:math:`10^d` (:math:`d \\le 14`) are exact doubles, so the quotient is the correctly
rounded value of the decimal, which is what a correctly rounded parser and pandas' C
parser (its digits gathered exactly into one double, then one division by the exact
power of ten) both give. A column without a point is read by pandas as integers: its
values are ``±M`` converted to doubles (``-0`` is the integer 0, so 0.0), as
:func:`optbench.data.parse.to_number` converts them.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

#: bytes that send a file to the general reader: NUL, tab, carriage return, blank,
#: quote, ``;`` and ``|`` (other delimiters), and anything outside ASCII
_NOT_PLAIN = np.zeros(256, dtype=bool)
_NOT_PLAIN[[0, 9, 13, 32, 34, 59, 124]] = True
_NOT_PLAIN[128:] = True

_MAX_DIGITS = 15
_POWERS = 10.0 ** np.arange(_MAX_DIGITS + 1)
#: 10**k as integers, k = 0 .. 15
_PLACES = 10 ** np.arange(_MAX_DIGITS + 1, dtype=np.int64)


def read_plain_history(path: Path, header_test, columns_of) -> tuple | None:
    """``(date column name, close column name, close field, dates, closes)`` of a plain
    two-column history file (module docstring), or None for any other file.

    ``header_test(cells)`` is the loader's header rule and ``columns_of(names)`` its
    column mapping (:func:`optbench.data.columns.map_history_columns`): the first line
    must be a header by that rule whose first column is the date and whose second is
    the close (or the adjusted close). ``dates`` are datetime64[ns], ``closes`` float64,
    one per data line (file line ``i + 2`` for row ``i``).
    """
    try:
        if path.suffix.lower() in (".parquet", ".pq") or not path.is_file():
            return None
        raw = path.read_bytes()
    except OSError:
        return None
    if raw[:4] == b"PAR1" or raw[:2] == b"\x1f\x8b" or raw[:3] == b"\xef\xbb\xbf":
        return None
    data = np.frombuffer(raw, dtype=np.uint8)
    if data.size < 2:
        return None
    counts = np.bincount(data, minlength=256)
    if counts[_NOT_PLAIN].any():
        return None
    newline = np.flatnonzero(data == 10)
    if not newline.size:
        return None
    header = raw[:newline[0]].decode("ascii")
    cells = header.split(",")
    names = [c.strip() for c in cells]
    if len(cells) != 2 or not all(names) or names[0] == names[1] or not header_test(cells):
        return None
    found = columns_of(names)
    close_field = "adj_close" if "adj_close" in found else "close"
    if found.get("date") != names[0] or found.get(close_field) != names[1]:
        return None
    # the data lines: from after the header's line break to each next one (the last
    # line may end the file without one)
    starts = newline + 1
    ends = np.append(newline[1:], data.size)
    if ends[-1] == starts[-1]:            # the file ends with a line break
        starts, ends = starts[:-1], ends[:-1]
    n = starts.size
    if n == 0 or (ends - starts < 12).any() or (data[starts + 10] != 44).any():
        return None
    if counts[44] != n + 1:     # one comma a line, the header's too
        return None
    from optbench.data.parse import _iso_from_chars
    ok, days = _iso_from_chars(sliding_window_view(data, 10)[starts])
    if not ok.all():
        return None
    closes = _plain_numbers(data, starts + 11, ends)
    if closes is None:
        return None
    return names[0], names[1], close_field, days.astype("datetime64[ns]"), closes


def _plain_numbers(data: np.ndarray, starts: np.ndarray, ends: np.ndarray):
    """The numbers in cells ``data[starts[i]:ends[i]]`` (``-?digits(.digits)?``, at most
    :data:`_MAX_DIGITS` digits) as the C parser reads the column (module Notes), or
    None when a cell is not of that form."""
    width = ends - starts
    negative = data[starts] == 45
    first = starts + negative
    digits_and_point = ends - first
    if (digits_and_point < 1).any() or (digits_and_point > _MAX_DIGITS + 1).any():
        return None
    w = int(digits_and_point.max())
    # each cell right-aligned in w columns, '0' in front of it (no value)
    left = ends - w                     # the window of w bytes ending each cell
    if (left < 0).any():
        return None
    inside = np.arange(w) >= (first - left)[:, None]
    chars = np.where(inside, sliding_window_view(data, w)[left], 48)
    point = chars == 46
    points = np.count_nonzero(point, axis=1)
    digit = (chars >= 48) & (chars <= 57)
    if not (digit | point).all() or (points > 1).any():
        return None
    has_point = points == 1
    point_col = np.where(has_point, point.argmax(axis=1), w)
    # a point needs a digit on each side, and at most 15 digits in all
    if (has_point & ((point_col == w - 1) | (point_col <= w - digits_and_point))).any():
        return None
    if ((digits_and_point - has_point) > _MAX_DIGITS).any() or (width < 1).any():
        return None
    decimals = np.where(has_point, w - 1 - point_col, 0)
    # the digits by the place value of their column (10^(w-1-column)); the digits left
    # of a point sit one place too high (the point's column holds no digit), so their
    # part (a multiple of 100) is divided by 10
    placed = np.where(digit, chars - 48, 0).astype(np.int64) * _PLACES[w - 1::-1]
    mantissa = placed.sum(axis=1)
    if has_point.any():
        high = np.cumsum(placed, axis=1)[np.arange(placed.shape[0]),
                                         np.maximum(point_col - 1, 0)]
        high = np.where(has_point, high, 0)
        mantissa = mantissa - high + high // 10
    if not has_point.any():
        # a column of integers: pandas keeps them as int64, converted to float after
        return np.where(negative, -mantissa, mantissa).astype(np.float64)
    out = mantissa.astype(np.float64) / _POWERS[decimals]
    return np.where(negative, -out, out)
