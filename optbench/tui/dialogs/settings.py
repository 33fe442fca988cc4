"""Model, market and filter settings; dismisses with new :class:`Settings`."""
from __future__ import annotations

import datetime as _dt
from dataclasses import replace

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Grid, Horizontal, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Button, Input, Label, Select, Static

from optbench import inputs
from optbench.errors import InputError
from optbench.tui.dialogs.requests import Settings

MODELS = (("auto (lowest BIC)", "auto"), ("GARCH(1,1)", "garch"),
          ("GJR-GARCH (leverage)", "gjr"), ("EGARCH", "egarch"))
DISTS = (("Student t", "t"), ("normal", "normal"))
MEANS = (("constant", "constant"), ("zero", "zero"))
DRIFTS = (("risk-free rate less yield (+ excess)", "risk-free"), ("fitted mean", "fitted"))


STYLES = (("from the chain", ""), ("european", "european"), ("american", "american"))

#: where a value came from, as the comparison records it -> words on screen
SOURCE_WORDS = {"caller": "your setting", "option": "your setting", "file": "the chain file",
                "meta": "meta.toml", "default": "the default"}

#: the dialog's fields: widget id -> the label the user sees (messages name it)
FIELDS = {"#set-rate": "Rate", "#set-yield": "Dividend yield", "#set-spot": "Spot",
          "#set-asof": "Quote date", "#set-multiplier": "Multiplier",
          "#set-spread": "Widest spread", "#set-excess": "Excess return"}


def _shown(value, kind: str = "") -> str:
    """A setting as the user would type it back (percentages with their sign)."""
    if value is None:
        return ""
    if kind == "percent":
        return f"{value * 100:g}%"
    if isinstance(value, _dt.date):
        return value.isoformat()
    return f"{value:g}"


def used_hint(used: dict, sources: dict, key: str, kind: str = "") -> str:
    """'4.00% (from meta.toml)': the value the comparison ran with and its source."""
    value = used.get(key)
    source = SOURCE_WORDS.get(str(sources.get(key)), None)
    where = f"from {source}" if source else "from the chain or its default"
    if value is None:
        return where
    if isinstance(value, _dt.date):
        shown = value.isoformat()
    elif isinstance(value, str):
        shown = value
    elif kind == "percent":
        shown = f"{value * 100:.2f}%"
    else:
        shown = f"{value:,.2f}" if kind != "count" else f"{value:g}"
    return f"{shown} ({where})"


class SettingsDialog(ModalScreen[Settings | str | None]):
    """Change the volatility model, the market inputs and the quote filters."""

    BINDINGS = [
        Binding("escape", "cancel", "Cancel", id="settings.cancel"),
        Binding("ctrl+s", "submit", "Apply", id="settings.submit"),
        Binding("ctrl+d", "reset", "Back to defaults", id="settings.reset"),
    ]

    def __init__(self, settings: Settings, used: dict | None = None,
                 sources: dict | None = None) -> None:
        """``used``: the values the current comparison ran with; ``sources``: where each
        came from (both shown beside the fields)."""
        super().__init__()
        self._settings = settings
        self._used = used or {}
        self._sources = sources or {}

    def _hint(self, key: str, kind: str = "") -> str:
        return used_hint(self._used, self._sources, key, kind)

    def compose(self) -> ComposeResult:
        s = self._settings
        with VerticalScroll(id="settings-dialog", classes="dialog"):
            yield Label("Model, market and filters — empty fields use the chain's own values",
                        classes="dialog-title")
            yield Label("tab moves between fields · ctrl+s applies and recomputes · ctrl+d "
                        "back to defaults (model and planner) · escape cancels",
                        classes="dialog-hint")
            with Grid(id="settings-grid"):
                yield Label("Volatility model")
                yield Select(MODELS, value=s.model, allow_blank=False, id="set-model")
                yield Label("Innovations")
                yield Select(DISTS, value=s.dist, allow_blank=False, id="set-dist")
                yield Label("Mean of returns")
                yield Select(MEANS, value=s.mean, allow_blank=False, id="set-mean")
                yield Label("Drift of simulated prices")
                yield Select(DRIFTS, value=s.drift, allow_blank=False, id="set-drift")
                yield Label("Excess return a year (2% or 0.02)")
                yield Input(_shown(s.excess_return, "percent"),
                            placeholder="meta.toml's excess_return, else 0",
                            id="set-excess")
                yield Label("Rate (4% or 0.04)")
                yield Input(_shown(s.rate, "percent"), placeholder=self._hint("rate", "percent"),
                            id="set-rate")
                yield Label("Dividend yield (1.5%)")
                yield Input(_shown(s.div_yield, "percent"),
                            placeholder=self._hint("div_yield", "percent"), id="set-yield")
                yield Label("Spot")
                yield Input(_shown(s.spot), placeholder=self._hint("spot"), id="set-spot")
                yield Label("Quote date")
                yield Input(_shown(s.asof), placeholder=self._hint("asof"), id="set-asof")
                yield Label("Exercise style")
                yield Select(STYLES, value=s.style or "", allow_blank=False, id="set-style")
                yield Label("Contract multiplier")
                yield Input(_shown(s.multiplier), placeholder=self._hint("multiplier", "count"),
                            id="set-multiplier")
                yield Label("Widest spread, % of mid")
                yield Input(_shown(s.max_spread, "percent"), placeholder="loader default",
                            id="set-spread")
            yield Static(f"Style in use: {self._hint('style')}", id="settings-style-note",
                         classes="note")
            yield Static("", id="settings-error", classes="dialog-error")
            with Horizontal(classes="dialog-buttons"):
                yield Button("Apply and recompute", variant="primary", id="settings-ok")
                yield Button("Cancel", id="settings-cancel")
                yield Button("Back to defaults", variant="warning", id="settings-reset")

    def on_mount(self) -> None:
        self.query_one("#set-model", Select).focus()

    def read(self) -> Settings:
        """The settings in the form; raises InputError naming the field as shown."""
        def value(widget_id: str, parser):
            return inputs.optional(parser, self.query_one(widget_id, Input).value,
                                   FIELDS[widget_id])

        style = self.query_one("#set-style", Select).value
        drift = str(self.query_one("#set-drift", Select).value)
        excess = value("#set-excess", inputs.rate)
        if excess is not None and drift == "fitted":
            raise InputError(FIELDS["#set-excess"], "leave it empty with the fitted-mean drift "
                                                    "(the fitted mean is the drift)")
        if excess is not None and abs(excess) >= 1:
            raise InputError(FIELDS["#set-excess"], "must lie between -100% and 100% a year")
        return replace(
            self._settings,
            model=str(self.query_one("#set-model", Select).value),
            dist=str(self.query_one("#set-dist", Select).value),
            mean=str(self.query_one("#set-mean", Select).value),
            rate=value("#set-rate", inputs.rate),
            div_yield=value("#set-yield", inputs.rate),
            spot=value("#set-spot", inputs.positive),
            asof=value("#set-asof", inputs.date),
            style=str(style) if style else None,
            multiplier=value("#set-multiplier", inputs.positive),
            max_spread=value("#set-spread", inputs.share),
            drift=drift, excess_return=excess)

    @on(Button.Pressed, "#settings-ok")
    @on(Input.Submitted)
    def action_submit(self) -> None:
        try:
            settings = self.read()
        except InputError as err:
            self.query_one("#settings-error", Static).update(str(err))
            return
        self.dismiss(settings)

    @on(Button.Pressed, "#settings-cancel")
    def action_cancel(self) -> None:
        self.dismiss(None)

    @on(Button.Pressed, "#settings-reset")
    def action_reset(self) -> None:
        """The model and the hedge planner back to their defaults (the saved settings
        file is removed)."""
        self.dismiss("reset")
