"""The export dialog: the table on screen or the full report, a format and a path."""
from __future__ import annotations

from pathlib import Path

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Button, Input, Label, Select, Static

from optbench.tui.dialogs.requests import ExportRequest



class ExportDialog(ModalScreen[ExportRequest | None]):
    """Choose what to export and where; dismisses with an :class:`ExportRequest`."""

    BINDINGS = [
        Binding("escape", "cancel", "Cancel", id="export.cancel"),
        Binding("ctrl+s", "submit", "Export", id="export.submit"),
    ]

    def __init__(self, tables: dict[str, tuple[str, tuple[str, ...]]], current: str,
                 stem: str, folder: Path | None = None) -> None:
        """``tables`` maps an id to (label, formats); ``current`` is the table on screen."""
        super().__init__()
        self._tables = tables
        self._current = current if current in tables else "report"
        self._stem = stem
        #: None: the file name alone, written in the folder the workbench started in
        self._folder = Path(folder) if folder is not None else None

    def compose(self) -> ComposeResult:
        choices = [(label, key) for key, (label, _) in self._tables.items()]
        formats = self._tables[self._current][1]
        with VerticalScroll(id="export-dialog", classes="dialog"):
            yield Label("Export", classes="dialog-title")
            yield Label("ctrl+s or Enter in the file name exports · escape cancels",
                        classes="dialog-hint")
            yield Label("What")
            yield Select(choices, value=self._current, allow_blank=False, id="export-what")
            yield Label("Format")
            yield Select([(f, f) for f in formats], value=formats[0], allow_blank=False,
                         id="export-format")
            yield Label("File")
            yield Input(value=str(self._default_path(self._current, formats[0])),
                        id="export-path")
            yield Static("", id="export-error", classes="dialog-error")
            with Horizontal(classes="dialog-buttons"):
                yield Button("Export", variant="primary", id="export-ok")
                yield Button("Cancel", id="export-cancel")

    def on_mount(self) -> None:
        self.query_one("#export-what", Select).focus()

    def _default_path(self, what: str, fmt: str) -> Path:
        name = f"{self._stem}-{what}.{fmt}"
        return self._folder / name if self._folder is not None else Path(name)

    @on(Select.Changed, "#export-what")
    def _what(self, event: Select.Changed) -> None:
        if not isinstance(event.value, str):
            return
        formats = self._tables[event.value][1]
        select = self.query_one("#export-format", Select)
        current = select.value
        select.set_options([(f, f) for f in formats])
        select.value = current if current in formats else formats[0]
        self._rename()

    @on(Select.Changed, "#export-format")
    def _format(self, event: Select.Changed) -> None:
        self._rename()

    def _rename(self) -> None:
        what = self.query_one("#export-what", Select).value
        fmt = self.query_one("#export-format", Select).value
        if not isinstance(what, str) or not isinstance(fmt, str):
            return
        path_input = self.query_one("#export-path", Input)
        current = Path(path_input.value.strip() or ".")
        # keep the user's folder, renew the name while it is still one we proposed
        if current.name.startswith(self._stem) or not path_input.value.strip():
            path_input.value = str(current.parent / self._default_path(what, fmt).name)

    @on(Button.Pressed, "#export-ok")
    @on(Input.Submitted)
    def action_submit(self) -> None:
        what = self.query_one("#export-what", Select).value
        fmt = self.query_one("#export-format", Select).value
        text = self.query_one("#export-path", Input).value.strip()
        error = self.query_one("#export-error", Static)
        if not text:
            error.update("Give a file name to write.")
            return
        path = Path(text).expanduser()
        if path.is_dir():
            error.update(f"{path}: is a folder; give a file name")
            return
        if not path.parent.exists():
            error.update(f"{path.parent}: no such folder")
            return
        self.dismiss(ExportRequest(what=str(what), fmt=str(fmt), path=path))

    @on(Button.Pressed, "#export-cancel")
    def action_cancel(self) -> None:
        self.dismiss(None)
