"""Reading a table from a CSV or Parquet file, with one-line user errors.

Handles what a broker's export throws at a loader: a byte-order mark, Windows
code pages, a semicolon/tab/pipe delimiter (with decimal commas after a
semicolon), a title line or two above the header, blank lines. Line numbers are
kept: ``frame.attrs["first_line"]`` is the file line of the frame's first row, so
row ``i`` came from line ``first_line + i`` (header = line 1 when it is the first).
"""
from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from optbench.errors import InputError

DELIMITERS = (",", ";", "\t", "|")
_SNIFF_BYTES = 65536
_MAX_PREAMBLE = 20


@dataclass(frozen=True)
class RawTable:
    """A table as read from a file, before any field is interpreted.

    ``frame`` row ``i`` came from file line ``line0 + i`` (1-based; Parquet rows
    are numbered as if a header were line 1) — unless quoted cells span lines,
    which shows as a last row whose number differs from ``last_line``. ``decimal_comma`` says numbers in
    text cells use a comma as the decimal mark.
    """

    path: Path
    frame: pd.DataFrame
    line0: int
    delimiter: str | None
    decimal_comma: bool
    kind: str  # "csv" or "parquet"
    last_line: int | None = None  # last non-blank file line (plain CSV only)


def _check_file(path: Path) -> bytes:
    if not path.exists():
        raise InputError(path, "no such file")
    if path.is_dir():
        raise InputError(path, "is a folder, not a file")
    try:
        with path.open("rb") as fh:
            head = fh.read(_SNIFF_BYTES)
    except OSError as err:
        raise InputError(path, f"cannot read: {err.strerror or err}") from None
    if not head.strip():
        raise InputError(path, "file is empty")
    return head


def _decode(head: bytes, path: Path) -> tuple[str, str]:
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        return head.decode("utf-16", errors="replace"), "utf-16"
    if b"\x00" in head:
        raise InputError(path, "not a text table (binary content); expected CSV or Parquet")
    for enc in (("utf-8-sig" if head.startswith(b"\xef\xbb\xbf") else "utf-8"), "cp1252"):
        try:
            return head.decode(enc), enc
        except UnicodeDecodeError:
            continue
    return head.decode("latin-1"), "latin-1"


def _pick_delimiter(lines: list[str]) -> str:
    """The delimiter that splits the header-ish lines into the most columns."""
    best, best_count = ",", 0
    for delim in DELIMITERS:
        counts = [_field_count(ln, delim) for ln in lines[:5] if ln]
        count = min(counts) if counts else 0
        if count > best_count:
            best, best_count = delim, count
    return best


def _field_count(line: str, delim: str) -> int:
    """The number of cells ``csv.reader`` splits a non-empty line into: the delimiters
    plus one when the line holds no quote character (or NUL), which is all the reader
    looks at in such a line; the reader itself otherwise."""
    if '"' in line or "\x00" in line:
        return len(next(csv.reader([line], delimiter=delim)))
    return line.count(delim) + 1


#: lines of a file's head that :func:`read_table` looks at: the preamble search and
#: the six lines after the header
_HEAD_LINES = _MAX_PREAMBLE + 6


def _head_lines(text: str, cut: bool) -> list[str]:
    """``text.splitlines()`` (less its last line when the head was ``cut`` short), as
    far as :func:`read_table` reads it: the first :data:`_HEAD_LINES` lines. A prefix
    of the text is split when it holds more lines than that (its first lines are then
    whole lines of the text, a line break split across the prefix's end coming later)."""
    size = 4096
    while size < len(text):
        lines = text[:size].splitlines()
        if len(lines) > _HEAD_LINES + 2:
            return lines[:_HEAD_LINES]
        size *= 4
    lines = text.splitlines()
    if cut and lines:
        lines = lines[:-1]  # the last line may be cut short
    return lines[:_HEAD_LINES]


def read_table(path: str | Path, *, header_test=None) -> RawTable:
    """Read a CSV or Parquet file into a raw frame.

    Parameters
    ----------
    path : str or Path
    header_test : callable, optional
        ``header_test(list_of_cells) -> bool`` says whether a line is the header;
        lines before the first line that passes are a preamble and are skipped
        (at most 20). Without it the first line is the header.

    Raises
    ------
    InputError
        Missing, empty, binary or unreadable file; Parquet without pyarrow.
    """
    path = Path(path)
    head = _check_file(path)
    if head[:4] == b"PAR1" or path.suffix.lower() in (".parquet", ".pq"):
        return _read_parquet(path)
    compression = None
    if head[:2] == b"\x1f\x8b":  # a gzip-compressed CSV (.csv.gz)
        import gzip
        compression = "gzip"
        try:
            with gzip.open(path, "rb") as fh:
                head = fh.read(_SNIFF_BYTES)
        except (OSError, EOFError) as err:
            raise InputError(path, f"cannot decompress gzip file ({err})") from None
        if not head.strip():
            raise InputError(path, "file is empty")
    text, encoding = _decode(head, path)
    lines = _head_lines(text, cut=len(head) == _SNIFF_BYTES)
    skip = 0
    if header_test is not None:
        for i, line in enumerate(lines[:_MAX_PREAMBLE]):
            if not line.strip():
                continue
            delim = _pick_delimiter([line])
            if header_test(next(csv.reader([line], delimiter=delim))):
                skip = i
                break
    body = [ln for ln in lines[skip:skip + 6] if ln.strip()]
    delim = _pick_delimiter(body)
    decimal_comma = delim == ";"
    try:
        try:
            frame = _read_csv(path, delim, skip, encoding, compression)
        except UnicodeDecodeError:  # a stray byte beyond the sniffed head
            frame = _read_csv(path, delim, skip, "cp1252", compression)
    except pd.errors.EmptyDataError:
        raise InputError(path, "file is empty") from None
    except pd.errors.ParserError as err:
        msg = str(err).strip().splitlines()[-1] if str(err).strip() else "cannot parse"
        raise InputError(path, f"not a consistent table ({msg})") from None
    except (UnicodeError, ValueError, OSError) as err:
        raise InputError(path, f"cannot read as CSV ({err})") from None
    labels = frame.columns.tolist()  # one conversion (iterating an Index costs per label)
    names = [str(c).strip() for c in labels]
    if names != labels:
        frame.columns = names
    last_line = None
    if compression is None and encoding != "utf-16":
        # the number of the last non-blank line, to tell whether rows map to lines
        last_line = path.read_bytes().rstrip(b"\r\n\t ").count(b"\n") + 1
    return RawTable(path=path, frame=frame, line0=skip + 2, delimiter=delim,
                    decimal_comma=decimal_comma, kind="csv", last_line=last_line)


def _read_csv(path: Path, delim: str, skip: int, encoding: str, compression):
    import warnings
    with warnings.catch_warnings():
        # a column of mixed numbers and text is handled cell by cell downstream
        warnings.simplefilter("ignore", pd.errors.DtypeWarning)
        return pd.read_csv(path, sep=delim, skiprows=skip, skip_blank_lines=False,
                           encoding=encoding, compression=compression,
                           on_bad_lines="error")


def _read_parquet(path: Path) -> RawTable:
    try:
        import pyarrow  # noqa: F401
    except ImportError:
        raise InputError(path, "reading Parquet needs pyarrow (pip install pyarrow)") from None
    try:
        frame = pd.read_parquet(path)
    except Exception as err:  # pyarrow raises many types for a corrupt file
        raise InputError(path, f"cannot read as Parquet ({type(err).__name__})") from None
    frame = frame.reset_index(drop=frame.index.name is None)
    frame.columns = [str(c).strip() for c in frame.columns]
    return RawTable(path=path, frame=frame, line0=2, delimiter=None, decimal_comma=False,
                    kind="parquet")


def drop_blank_rows(frame: pd.DataFrame, items: list | None = None) -> pd.DataFrame:
    """Drop rows with no cell at all (blank lines); the index keeps file positions.
    ``items``: the frame's ``(name, column)`` pairs when the caller has them."""
    if frame.empty:
        return frame
    dtypes = frame.dtypes.tolist() if items is None else [col.dtype for _, col in items]
    # a numpy integer or bool column holds no missing cell: no row is blank
    if any(isinstance(d, np.dtype) and d.kind in "iub" for d in dtypes):
        return frame
    columns = [col for _, col in (frame.items() if items is None else items)]
    # float columns first (a NaN test on their numbers), the others only if needed
    is_float = [isinstance(c.dtype, np.dtype) and c.dtype.kind == "f" for c in columns]
    blank = np.ones(len(frame), dtype=bool)
    for c, f in zip(columns, is_float):
        if f:
            blank &= np.isnan(c.to_numpy())
    for c, f in zip(columns, is_float):
        if not blank.any():
            return frame
        if not f:
            blank &= c.isna().to_numpy(dtype=bool)
    return frame[~blank] if blank.any() else frame


__all__ = ["RawTable", "read_table", "drop_blank_rows"]
