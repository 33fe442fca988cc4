"""Data quality: what the loader did with every input row."""
from __future__ import annotations

from rich.table import Table
from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.widgets import Static

from optbench.tui.widgets.table import SortableTable
from optbench.tui.views.base import Deferred


def short_path(source: str) -> str:
    """The source relative to the working folder when it is inside it, else as given."""
    from pathlib import Path
    path = Path(source)
    try:
        return str(path.resolve().relative_to(Path.cwd().resolve()))
    except ValueError:
        return str(path)


def quality_summary(quality: dict, source: str) -> Table:
    t = Table(title=f"Ingestion report — {short_path(source)}", title_justify="left", header_style="bold",
              expand=False, min_width=60)
    t.add_column("Rows")
    t.add_column("Count", justify="right")
    t.add_row("read from the file", str(quality.get("rows_in", 0)))
    t.add_row("used", str(quality.get("rows_used", 0)))
    for reason, n in sorted((quality.get("rejected") or {}).items(), key=lambda kv: -kv[1]):
        t.add_row(f"  rejected: {reason}", str(n))
    for flag, n in sorted((quality.get("warnings") or {}).items(), key=lambda kv: -kv[1]):
        t.add_row(f"  kept, flagged {flag}", str(n))
    return t


def side_first(rejected):
    """The rejected rows with the fields of the side that was rejected first.

    A wide-layout row (calls and puts side by side) is rejected for one side; its
    ``side`` column says which. The result has ``line``, ``reason``, ``side``,
    ``detail``, then that side's fields under plain names (``bid``, ``ask``, …), the
    shared fields, and the other side's fields last (``other bid``, …). Frames
    without a ``side`` column come back as given.
    """
    import pandas as pd

    from optbench.data.columns import side_of
    if rejected is None or "side" not in rejected.columns or len(rejected) == 0:
        return rejected
    first = [c for c in ("line", "reason", "side", "detail") if c in rejected.columns]
    sided = {c: s for c in rejected.columns if c not in first and (s := side_of(c))}
    fields_ = list(dict.fromkeys(f for _, f in sided.values()))
    shared = [c for c in rejected.columns if c not in first and c not in sided]
    side = rejected["side"].astype(str).to_numpy()
    out = {c: rejected[c] for c in first}
    for which, prefix in (("same", ""), ("other", "other ")):
        for f in fields_:
            col_call = next((c for c, s in sided.items() if s == ("call", f)), None)
            col_put = next((c for c, s in sided.items() if s == ("put", f)), None)
            call = rejected[col_call] if col_call else pd.Series(None, index=rejected.index)
            put = rejected[col_put] if col_put else pd.Series(None, index=rejected.index)
            use_call = (side == "call") if which == "same" else (side != "call")
            out[prefix + f] = call.where(use_call, put)
        if which == "same":
            out.update({c: rejected[c] for c in shared})
    return pd.DataFrame(out)


class QualityView(Deferred, VerticalScroll):
    def compose(self) -> ComposeResult:
        yield Static("Loading…", id="dq-summary")
        yield Static("Rejected rows (line numbers are the input file's):", classes="section-title")
        yield SortableTable(id="dq-rejected")

    def draw(self, quality: dict, rejected, source: str) -> None:
        self.query_one("#dq-summary", Static).update(quality_summary(quality, source))
        table = self.query_one("#dq-rejected", SortableTable)
        if rejected is None or len(rejected) == 0:
            table.set_rows((("none", "Rejected rows"),), [("none",)], [("no rows were rejected",)])
            return
        rejected = side_first(rejected)
        first = [c for c in ("line", "reason", "side", "detail") if c in rejected.columns]
        rest = [c for c in rejected.columns if c not in first]
        cols = first + rest
        values = rejected[cols].astype(object).where(rejected[cols].notna(), None)
        raw = [tuple(r) for r in values.itertuples(index=False, name=None)]
        shown = [tuple("" if v is None else str(v) for v in r) for r in raw]
        table.set_rows([(c, c) for c in cols], raw, shown)
