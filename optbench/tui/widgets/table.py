"""A DataTable that sorts on its raw values (key ``s`` or a click on a header)."""
from __future__ import annotations

import math
from typing import Any, Sequence

from rich.text import Text
from textual.binding import Binding
from textual.widgets import DataTable


def _sort_key(value: Any) -> tuple:
    """Missing values sort last; numbers by value; everything else as text."""
    if value is None:
        return (2, 0.0, "")
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return (1, 0.0, "") if math.isnan(float(value)) else (0, float(value), "")
    return (0, 0.0, str(value))


class SortableTable(DataTable):
    """Rows are given as (raw values, shown cells); sorting uses the raw values.

    The cursor moves by cell; ``s`` sorts by the cursor's column (again: reversed).
    Long tables show :attr:`PAGE` rows at a time (``n`` / ``p`` turn the page), so
    a chain of tens of thousands of quotes stays quick to draw; sorting orders every
    row, not just the page on screen.
    """

    PAGE = 300

    BINDINGS = [
        Binding("s", "sort_column", "Sort by column", id="table.sort"),
        Binding("n", "page(1)", "Next page", id="table.next"),
        Binding("p", "page(-1)", "Previous page", id="table.prev"),
    ]

    DEFAULT_CSS = """
    SortableTable { height: 1fr; border-top: hkey $panel-lighten-2;
                    scrollbar-size-horizontal: 0; }
    """

    def __init__(self, **kwargs) -> None:
        kwargs.setdefault("zebra_stripes", True)
        kwargs.setdefault("cursor_type", "cell")
        super().__init__(**kwargs)
        self._raw: list[tuple] = []
        self._shown: list[tuple] = []
        self._keys: list[str] = []
        self._sorted_by: tuple[int, bool] | None = None
        self._order: list[int] = []
        self._page = 0

    def set_rows(self, columns: Sequence[tuple[str, str]], raw: Sequence[Sequence[Any]],
                 shown, keys: Sequence[str] | None = None) -> None:
        """Replace the table: ``columns`` are (key, label) pairs; ``shown`` is the
        cells of every row, or a function of the row index giving them (called only
        for the rows of the page on screen). Number cells are right-aligned."""
        cursor = self.cursor_row if self.row_count else 0
        self.clear(columns=True)
        for key, label in columns:
            self.add_column(label, key=key)
        self._raw = [tuple(r) for r in raw]
        self._shown = shown if callable(shown) else [tuple(s) for s in shown]
        self._keys = list(keys) if keys is not None else [str(i) for i in range(len(raw))]
        if self._sorted_by is not None and self._sorted_by[0] < len(columns):
            self._apply_sort(*self._sorted_by)
        else:
            self._fill(range(len(self._raw)))
        if self.row_count:
            self.move_cursor(row=min(cursor, self.row_count - 1))

    def _fill(self, order, page: int = 0) -> None:
        self._order = list(order)
        pages = max(1, -(-len(self._order) // self.PAGE))
        self._page = max(0, min(page, pages - 1))
        start = self._page * self.PAGE
        shown = self._order[start:start + self.PAGE]
        self.clear(columns=False)
        if pages > 1:
            self.border_title = (f"rows {start + 1:,}–{start + len(shown):,} of "
                                 f"{len(self._order):,} · n / p: next / previous page")
        else:
            self.border_title = None
        for i in shown:
            row = self._shown(i) if callable(self._shown) else self._shown[i]
            cells = [c if isinstance(c, Text) else Text(str(c), justify="right"
                                                        if _is_number(self._raw[i][j]) else "left")
                     for j, c in enumerate(row)]
            self.add_row(*cells, key=self._keys[i])

    def _apply_sort(self, column: int, reverse: bool) -> None:
        order = sorted(range(len(self._raw)), key=lambda i: _sort_key(self._raw[i][column]),
                       reverse=reverse)
        if reverse:  # keep missing values last either way
            order = ([i for i in order if _sort_key(self._raw[i][column])[0] == 0]
                     + [i for i in order if _sort_key(self._raw[i][column])[0] != 0])
        self._sorted_by = (column, reverse)
        self._fill(order)

    def sort_by(self, column: int) -> None:
        """Sort by column index; a second sort on the same column reverses it."""
        if not self._raw:
            return
        reverse = bool(self._sorted_by and self._sorted_by[0] == column and not self._sorted_by[1])
        self._apply_sort(column, reverse)
        label = str(self.ordered_columns[column].label)
        self.notify(f"sorted by {label} ({'high to low' if reverse else 'low to high'})",
                    timeout=2)

    def action_page(self, step: int) -> None:
        self._fill(self._order, self._page + step)

    @property
    def total_rows(self) -> int:
        """Rows of the whole table (every page)."""
        return len(self._raw)

    def action_sort_column(self) -> None:
        self.sort_by(self.cursor_column)

    def on_data_table_header_selected(self, event: DataTable.HeaderSelected) -> None:
        event.stop()
        self.sort_by(event.column_index)

    @property
    def raw_rows(self) -> list[tuple]:
        """Raw values of the rows on the current page, in the order shown."""
        start = self._page * self.PAGE
        return [self._raw[i] for i in self._order[start:start + self.PAGE]]


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)
