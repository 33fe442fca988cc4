"""The file picker: browse to a chain file or a scenario folder and open it."""
from __future__ import annotations

from pathlib import Path

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Button, DirectoryTree, Input, Label, Static

from optbench.tui.dialogs.requests import OpenRequest

CHAIN_SUFFIXES = (".csv", ".parquet", ".txt")


class OpenDialog(ModalScreen[OpenRequest | None]):
    """Pick a chain (file or scenario folder) and, if needed, its price history."""

    BINDINGS = [
        Binding("escape", "cancel", "Cancel", id="open.cancel"),
        Binding("ctrl+o", "submit", "Open", id="open.submit"),
    ]

    def __init__(self, start: Path | None = None) -> None:
        super().__init__()
        self._start = Path(start or Path.cwd())

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="open-dialog", classes="dialog"):
            yield Label("Open a chain file or a scenario folder", classes="dialog-title")
            yield Label("Enter on a file or folder picks it · type a path · ctrl+o opens · "
                        "escape cancels", classes="dialog-hint")
            yield DirectoryTree(str(self._start), id="open-tree")
            yield Label("Chain file or scenario folder")
            yield Input(placeholder="path/to/chain.csv or path/to/scenario/", id="open-chain")
            yield Label("Price history (leave empty if the folder holds history.csv)")
            yield Input(placeholder="path/to/history.csv", id="open-history")
            yield Static("", id="open-error", classes="dialog-error")
            with Horizontal(classes="dialog-buttons"):
                yield Button("Open", variant="primary", id="open-ok")
                yield Button("Cancel", id="open-cancel")

    def on_mount(self) -> None:
        self.query_one("#open-tree", DirectoryTree).focus()

    @on(DirectoryTree.FileSelected)
    def _file(self, event: DirectoryTree.FileSelected) -> None:
        path = Path(event.path)
        target = "#open-history" if "history" in path.name.lower() else "#open-chain"
        self.query_one(target, Input).value = str(path)

    @on(DirectoryTree.DirectorySelected)
    def _folder(self, event: DirectoryTree.DirectorySelected) -> None:
        folder = Path(event.path)
        if any((folder / f"chain{s}").exists() for s in (".csv", ".parquet")):
            self.query_one("#open-chain", Input).value = str(folder)

    @on(Button.Pressed, "#open-ok")
    @on(Input.Submitted)
    def action_submit(self) -> None:
        chain_text = self.query_one("#open-chain", Input).value.strip()
        history_text = self.query_one("#open-history", Input).value.strip()
        error = self.query_one("#open-error", Static)
        if not chain_text:
            error.update("Choose a chain file or a scenario folder first.")
            return
        chain = Path(chain_text).expanduser()
        if not chain.exists():
            error.update(f"{chain}: no such file or folder")
            return
        history = Path(history_text).expanduser() if history_text else None
        if history is not None and not history.is_file():
            error.update(f"{history}: no such file")
            return
        self.dismiss(OpenRequest(chain=chain, history=history))

    @on(Button.Pressed, "#open-cancel")
    def action_cancel(self) -> None:
        self.dismiss(None)
