"""CSV output with spreadsheet-formula neutralisation.

A spreadsheet executes a text cell that starts with ``=``, ``+``, ``-``, ``@``, a tab
or a carriage return (OWASP, "CSV Injection"). Every such *text* cell is prefixed with
a single quote ``'`` so it shows as text; a text cell starting with ``-`` followed by a
digit (a negative number written as text) is left alone, and numbers stay numbers.

The first line of every optbench CSV is one comment cell beginning with ``#`` that
names the table, the as-of date, the model and the caution; read the table with
``pandas.read_csv(path, skiprows=1)``.
"""
from __future__ import annotations

import csv as _csv
import datetime as _dt
import io
import math
import re
from collections.abc import Iterable, Sequence
from typing import Any

import numpy as np
import pandas as pd

from optbench.report.provenance import inputs_line

_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")
_NEGATIVE_NUMBER = re.compile(r"-(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?")


def neutralise(value: Any) -> Any:
    """Neutralise one cell: dangerous text gets a leading ``'``; numbers pass through."""
    if not isinstance(value, str):
        return value
    if value and value[0] in _TRIGGERS:
        if _NEGATIVE_NUMBER.fullmatch(value):
            return value
        return "'" + value
    return value


def _cell(value: Any) -> Any:
    if value is None:
        return ""
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, (float, np.floating)):
        x = float(value)
        return "" if not math.isfinite(x) else repr(x)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, pd.Timestamp):
        return "" if pd.isna(value) else value.date().isoformat()
    if isinstance(value, (_dt.date, _dt.datetime)):
        return value.isoformat()[:10]
    return neutralise(str(value))


def write_rows(header: Sequence[str], rows: Iterable[Sequence[Any]],
               comment: str | None = None) -> str:
    """CSV text: an optional comment line, the header and the rows (all neutralised)."""
    buf = io.StringIO()
    w = _csv.writer(buf, lineterminator="\n")
    if comment is not None:
        w.writerow(["# " + " ".join(comment.split())])
    w.writerow([neutralise(str(h)) for h in header])
    for row in rows:
        w.writerow([_cell(v) for v in row])
    return buf.getvalue()


def frame_csv(frame: pd.DataFrame, comment: str | None = None) -> str:
    return write_rows(list(frame.columns), frame.itertuples(index=False, name=None), comment)


def _comment(title: str, result) -> str:
    model = getattr(result, "model", None)
    name = model.name if hasattr(model, "name") else (model or {}).get("name", "")
    dist = model.dist if hasattr(model, "dist") else (model or {}).get("dist", "")
    return (f"optbench {title} | {result.underlying} | as of {result.asof.isoformat()} | "
            f"model {name}/{dist} | {inputs_line(result)} | {result.caution}")


def comparison_csv(comparison, table: str = "expiries") -> str:
    """The per-expiry table (``table="expiries"``) or every per-strike row (``"strikes"``)."""
    if table == "strikes":
        return frame_csv(comparison.strike_frame(), _comment("compare strikes", comparison))
    comment = _comment("compare expiries", comparison)
    if comparison.drift is not None:
        comment += f" | drift: {comparison.drift.text}"
    return frame_csv(comparison.expiry_frame(), comment)


def hedge_csv(estimate, table: str = "summary") -> str:
    """The hedge summary (``item,value``), its legs or its scenario table."""
    comment = _comment(f"hedge {table}", estimate)
    if table == "legs":
        return frame_csv(estimate.leg_frame(), comment)
    if table == "scenarios":
        return frame_csv(estimate.scenario_frame(), comment)
    items = list(estimate.summary().items())
    items += [("strikes", " ".join(f"{k:g}" for k in estimate.strikes)),
              ("collar_note", estimate.collar_note),
              ("drift", estimate.drift.get("text", "")), ("caution", estimate.caution)]
    return write_rows(["item", "value"], items, comment)


#: public name of the comment line builder (title, underlying, as-of, model, caution)
comment_line = _comment
