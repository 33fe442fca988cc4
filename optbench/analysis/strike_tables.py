"""The per-strike tables of a comparison, one DataFrame per expiry, each built the
first time a view asks for it.

The comparison sorts its per-quote columns once (by expiry, then puts before calls,
then strike), so each expiry's rows are one slice of them. A screen row reads no
per-strike table (its figures come from the expiry rows), so building a DataFrame per
expiry up front would be work no column reads; a view that shows or exports the
tables builds each once, from the same slices, and gets the same frame.
"""
from __future__ import annotations

import datetime as _dt
from collections.abc import Iterator, Mapping

import numpy as np


class StrikeTables(Mapping):
    """``{expiry date: DataFrame}`` over sorted per-quote columns.

    Parameters
    ----------
    columns : dict of name -> ndarray
        The per-quote columns, every one in the same (sorted) order; the frames keep
        the dict's column order.
    slices : dict of expiry date -> (start, stop)
        Each expiry's rows in those columns, in the order the mapping iterates.

    A frame is ``pandas.DataFrame`` of the expiry's slices with a fresh
    ``RangeIndex`` (what ``table.iloc[start:stop].reset_index(drop=True)`` of the
    whole sorted table gives), made on first access and kept.
    """

    def __init__(self, columns: dict, slices: dict) -> None:
        self._columns = columns
        self._slices = dict(slices)
        self._frames: dict = {}

    def __getitem__(self, expiry: _dt.date):
        frame = self._frames.get(expiry)
        if frame is None:
            import pandas as pd

            start, stop = self._slices[expiry]      # KeyError: not an expiry here
            frame = pd.DataFrame({name: np.asarray(col)[start:stop]
                                  for name, col in self._columns.items()},
                                 columns=list(self._columns))
            self._frames[expiry] = frame
        return frame

    def __iter__(self) -> Iterator[_dt.date]:
        return iter(self._slices)

    def __len__(self) -> int:
        return len(self._slices)

    def __getstate__(self) -> dict:
        # a pickle carries the columns once, not the frames already made from them
        return {"_columns": self._columns, "_slices": self._slices, "_frames": {}}

    def __repr__(self) -> str:
        days = ", ".join(d.isoformat() for d in self._slices)
        return f"StrikeTables({days})"
