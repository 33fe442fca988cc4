"""CSV output with spreadsheet-formula neutralisation.

A spreadsheet executes a text cell that starts with ``=``, ``+``, ``-``, ``@``, a tab
or a carriage return (OWASP, "CSV Injection"). Every such *text* cell is prefixed with
a single quote ``'`` so it shows as text; a text cell starting with ``-`` followed by a
digit (a negative number written as text) is left alone, and numbers stay numbers.

The first line of every optbench CSV is its header, so ``pandas.read_csv(path)``
reads it with default settings. What the table rests on (source, as-of date, model,
warnings, the caution) travels as *notes* (:mod:`optbench.report.notes`): the
writers return a :class:`CsvText`, the CSV text with its notes attached, and the file
writer puts them in a sidecar ``<file>.meta.json`` (on stderr for the terminal).
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


class CsvText(str):
    """CSV text (header first, then the rows) carrying its notes in ``.notes``
    (an ordered dict, see :mod:`optbench.report.notes`) and its ``.columns``."""

    notes: dict
    columns: list

    def __new__(cls, text: str, notes: dict | None = None, columns=()):
        obj = super().__new__(cls, text)
        obj.notes = dict(notes or {})
        obj.columns = [str(c) for c in columns]
        return obj


def write_rows(header: Sequence[str], rows: Iterable[Sequence[Any]],
               notes: dict | str | None = None) -> CsvText:
    """CSV text: the header and the rows (all neutralised), with ``notes`` attached
    (a plain string becomes ``{"table": text}``)."""
    buf = io.StringIO()
    w = _csv.writer(buf, lineterminator="\n")
    w.writerow([neutralise(str(h)) for h in header])
    for row in rows:
        w.writerow([_cell(v) for v in row])
    if isinstance(notes, str):
        notes = {"table": notes}
    return CsvText(buf.getvalue(), notes, header)


def frame_csv(frame: pd.DataFrame, notes: dict | str | None = None) -> CsvText:
    return write_rows(list(frame.columns), frame.itertuples(index=False, name=None), notes)


def _comment(title: str, result) -> str:
    model = getattr(result, "model", None)
    name = model.name if hasattr(model, "name") else (model or {}).get("name", "")
    dist = model.dist if hasattr(model, "dist") else (model or {}).get("dist", "")
    return (f"optbench {title} | {result.underlying} | as of {result.asof.isoformat()} | "
            f"model {name}/{dist} | {inputs_line(result)} | {result.caution}")


def comparison_csv(comparison, table: str = "expiries", expiries=None) -> CsvText:
    """The per-expiry table (``table="expiries"``) or the per-strike rows
    (``"strikes"``: every expiry, or only ``expiries`` when given)."""
    from optbench.report.notes import comparison_notes
    if table == "strikes":
        if expiries:
            frame = pd.concat([comparison.strike_frame(e) for e in expiries],
                              ignore_index=True)
            title = "compare strikes " + " ".join(str(e) for e in expiries)
        else:
            frame, title = comparison.strike_frame(), "compare strikes"
        return frame_csv(frame, comparison_notes(comparison, title))
    return frame_csv(comparison.expiry_frame(), comparison_notes(comparison, "compare expiries"))


def hedge_csv(estimate, table: str = "summary") -> CsvText:
    """The hedge summary (``item,value``), its legs or its scenario table."""
    from optbench.report.notes import hedge_notes
    notes = hedge_notes(estimate, f"hedge {table}")
    if table == "legs":
        return frame_csv(estimate.leg_frame(), notes)
    if table == "scenarios":
        return frame_csv(estimate.scenario_frame(), notes)
    return write_rows(["item", "value"], hedge_summary_items(estimate), notes)


def hedge_summary_items(estimate) -> list[tuple[str, Any]]:
    """The hedge summary as ``(item, value)`` rows (CSV and XLSX)."""
    items = list(estimate.summary().items())
    items += [("strikes", " ".join(f"{k:g}" for k in estimate.strikes)),
              ("roll_method", estimate.roll_method),
              ("collar_note", estimate.collar_note),
              ("drift", (estimate.drift or {}).get("text", "")),
              ("caution", estimate.caution)]
    return items


#: public name of the one-line description (title, underlying, as-of, model, caution)
comment_line = _comment
