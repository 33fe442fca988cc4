"""Model, market and filter settings; dismisses with new :class:`Settings`."""
from __future__ import annotations

import datetime as _dt
import math
from dataclasses import replace

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Grid, Horizontal, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Button, Input, Label, Select, Static

from optbench.errors import InputError
from optbench.tui.dialogs.requests import Settings

MODELS = (("auto (lowest BIC)", "auto"), ("GARCH(1,1)", "garch"),
          ("GJR-GARCH (leverage)", "gjr"), ("EGARCH", "egarch"))
DISTS = (("Student t", "t"), ("normal", "normal"))
MEANS = (("constant", "constant"), ("zero", "zero"))


def parse_optional_float(name: str, text: str, *, percent: bool = False) -> float | None:
    """'' -> None; '4.5' -> 0.045 when ``percent``; anything else -> InputError."""
    text = text.strip().rstrip("%").strip()
    if not text:
        return None
    try:
        value = float(text)
    except ValueError:
        raise InputError(name, f"not a number: {text!r}") from None
    if not math.isfinite(value):
        raise InputError(name, f"not a finite number: {text!r}")
    return value / 100.0 if percent else value


def _shown(value: float | None, percent: bool = False) -> str:
    if value is None:
        return ""
    return f"{value * 100:g}" if percent else f"{value:g}"


class SettingsDialog(ModalScreen[Settings | None]):
    """Change the volatility model, the market inputs and the quote filters."""

    BINDINGS = [
        Binding("escape", "cancel", "Cancel", id="settings.cancel"),
        Binding("ctrl+s", "submit", "Apply", id="settings.submit"),
    ]

    def __init__(self, settings: Settings, used: dict | None = None) -> None:
        """``used``: the values the current comparison ran with (shown as hints)."""
        super().__init__()
        self._settings = settings
        self._used = used or {}

    def _hint(self, key: str, source: str, percent: bool = False) -> str:
        value = self._used.get(key)
        if value is None:
            return f"from the {source}"
        shown = value.isoformat() if hasattr(value, "isoformat") else (
            f"{value * 100:.2f}" if percent else f"{value:,.2f}")
        return f"{shown} (from the {source})"

    def compose(self) -> ComposeResult:
        s = self._settings
        with VerticalScroll(id="settings-dialog", classes="dialog"):
            yield Label("Model, market and filters — empty fields use the chain's own values",
                        classes="dialog-title")
            yield Label("tab moves between fields · ctrl+s applies and recomputes · escape "
                        "cancels", classes="dialog-hint")
            with Grid(id="settings-grid"):
                yield Label("Volatility model")
                yield Select(MODELS, value=s.model, allow_blank=False, id="set-model")
                yield Label("Innovations")
                yield Select(DISTS, value=s.dist, allow_blank=False, id="set-dist")
                yield Label("Mean of returns")
                yield Select(MEANS, value=s.mean, allow_blank=False, id="set-mean")
                yield Label("Rate, % a year (cont.)")
                yield Input(_shown(s.rate, True), placeholder=self._hint("rate", "scenario", True),
                            id="set-rate")
                yield Label("Dividend yield, %")
                yield Input(_shown(s.div_yield, True),
                            placeholder=self._hint("div_yield", "scenario", True), id="set-yield")
                yield Label("Spot")
                yield Input(_shown(s.spot), placeholder=self._hint("spot", "chain"), id="set-spot")
                yield Label("Quote date (YYYY-MM-DD)")
                yield Input("" if s.asof is None else s.asof.isoformat(),
                            placeholder=self._hint("asof", "chain"), id="set-asof")
                yield Label("Widest bid/ask spread, % of mid")
                yield Input(_shown(s.max_spread, True), placeholder="loader default",
                            id="set-spread")
            yield Static("", id="settings-error", classes="dialog-error")
            with Horizontal(classes="dialog-buttons"):
                yield Button("Apply and recompute", variant="primary", id="settings-ok")
                yield Button("Cancel", id="settings-cancel")

    def on_mount(self) -> None:
        self.query_one("#set-model", Select).focus()

    def read(self) -> Settings:
        """The settings in the form; raises InputError naming the bad field."""
        def value(widget_id: str) -> str:
            return self.query_one(widget_id, Input).value

        asof_text = value("#set-asof").strip()
        try:
            asof = _dt.date.fromisoformat(asof_text) if asof_text else None
        except ValueError:
            raise InputError("quote date", f"not a date (YYYY-MM-DD): {asof_text!r}") from None
        spot = parse_optional_float("spot", value("#set-spot"))
        if spot is not None and spot <= 0:
            raise InputError("spot", "must be positive")
        spread = parse_optional_float("spread", value("#set-spread"), percent=True)
        if spread is not None and spread <= 0:
            raise InputError("spread", "must be positive")
        return replace(
            self._settings,
            model=str(self.query_one("#set-model", Select).value),
            dist=str(self.query_one("#set-dist", Select).value),
            mean=str(self.query_one("#set-mean", Select).value),
            rate=parse_optional_float("rate", value("#set-rate"), percent=True),
            div_yield=parse_optional_float("dividend yield", value("#set-yield"), percent=True),
            spot=spot, asof=asof, max_spread=spread)

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
