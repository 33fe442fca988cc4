"""The help screen: every key of the workbench with what it does."""
from __future__ import annotations

from rich.table import Table
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Label, Static

ABOUT = ("optbench compares the volatility an option chain charges with a GARCH-family "
         "forecast of the underlying, and prices protection on your portfolio. Verdicts: "
         "▲ rich = ATM implied vol above the forecast band, = fair = inside it, ▼ cheap = "
         "below it. Every figure is a model estimate, not advice.")


def key_entries(groups: list[tuple[str, list[Binding]]]) -> list[tuple[str, str, str]]:
    """(key, what it does, where) for every binding that has a description."""
    return [(b.key_display or b.key, b.description, where)
            for where, bindings in groups for b in bindings if b.description]


def key_table(entries: list[tuple[str, str, str]]) -> Table:
    table = Table(show_header=True, header_style="bold", box=None, pad_edge=False,
                  expand=True)
    table.add_column("Key", style="bold cyan", no_wrap=True)
    table.add_column("Does")
    table.add_column("Where", style="dim")
    for key, does, where in entries:
        table.add_row(key, does, where)
    return table


class HelpScreen(ModalScreen[None]):
    """Lists the bindings of the workbench (app, views, tables) with descriptions."""

    BINDINGS = [Binding("escape,question_mark,q", "dismiss", "Close help", id="help.close")]

    def __init__(self, groups: list[tuple[str, list[Binding]]]) -> None:
        super().__init__()
        self.entries = key_entries(groups)

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="help-dialog", classes="dialog"):
            yield Label("Keys", classes="dialog-title")
            yield Static(key_table(self.entries), id="help-keys")
            yield Static(ABOUT, id="help-about")
            yield Label("Escape closes this help. The mouse works too: click tabs, headers "
                        "(to sort) and fields.", classes="dim")
