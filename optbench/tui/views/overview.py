"""Overview: the headline answer, the verdict per expiry, the state of data and model."""
from __future__ import annotations

from rich import box
from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.widgets import Static

from optbench.tui.firstview import overview_content
from optbench.tui.views.base import Deferred


def spans_text(spans) -> Text:
    """Styled text from :mod:`optbench.tui.firstview`'s ``(text, style)`` spans."""
    text = Text()
    for part, style in spans:
        text.append(part, style=style)
    return text


def verdict_table(rows) -> Table:
    """The verdict per expiry from :func:`optbench.tui.firstview.verdict_rows`."""
    # no vertical rules: nine columns fit an 80-column terminal
    table = Table(title="Implied against forecast, per expiry: ATM implied vol (IV), "
                        "forecast and band in %, IV−fc in vol points; verdicts for the ATM "
                        "vol and for the 25Δ and floor puts (ask against the model-expected "
                        "payoff)", title_justify="left", expand=True, header_style="bold",
                  box=box.SIMPLE_HEAD, pad_edge=False, collapse_padding=True)
    for col, just, width in (("Expiry", "left", 10), ("Days", "right", 4),
                             ("IV", "right", 4), ("Fcst", "right", 4),
                             ("Band", "right", 9), ("IV−fc", "right", 5),
                             ("ATM", "left", 7), ("25Δ put", "left", 7),
                             ("Floor", "left", 7)):
        table.add_column(col, justify=just, no_wrap=True, min_width=width)
    for row in rows:
        table.add_row(*row[:6], *(Text(mark, style=style) for mark, style in row[6:]))
    return table


class OverviewView(Deferred, VerticalScroll):
    """The first screen: the answer in one paragraph, then what it rests on."""

    def compose(self) -> ComposeResult:
        yield Static("Loading the scenario…", id="ov-headline", classes="headline")
        yield Static("", id="ov-verdicts")
        yield Static("", id="ov-state")
        yield Static("", id="ov-caution", classes="caution")

    def draw(self, comparison, estimate, pending: bool = False,
             checking: bool = False) -> None:
        """``pending``: the headline hedge is still being priced; ``checking``: the
        out-of-sample check is still running."""
        self.draw_content(overview_content(comparison, estimate, pending, checking))

    def draw_content(self, content: dict) -> None:
        """Draw :func:`optbench.tui.firstview.overview_content`'s plain data."""
        self.query_one("#ov-headline", Static).update(spans_text(content["headline"]))
        self.query_one("#ov-verdicts", Static).update(verdict_table(content["rows"]))
        self.query_one("#ov-state", Static).update(spans_text(content["state"]))
        self.query_one("#ov-caution", Static).update(content["caution"])

    _content: dict | None = None

    def show_content(self, content: dict) -> None:
        """Draw plain content now, or when mounted (the first run's first view, before
        its result objects have come)."""
        self._pending, self._content = None, content
        if self._ready:
            self.draw_content(content)

    def on_mount(self) -> None:
        super().on_mount()
        if self._pending is None and self._content is not None:
            self.draw_content(self._content)

    def show(self, *args) -> None:
        """Draw now (the first screen: its numbers are painted with the next frame)."""
        self._pending = args
        if self._ready:
            self.draw(*args)

    def show_loading(self, message: str) -> None:
        if self._ready:
            self.query_one("#ov-headline", Static).update(message)
