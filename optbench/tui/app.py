"""The optbench workbench application and its factory, :func:`make_app`.

The app owns the inputs (files, model, market overrides) and runs the core in
textual thread workers: loading the chain, then the comparison (fit, forecast,
simulated bands), then the headline hedge — the overview's numbers, after which the
status says "ready" — then the out-of-sample check. A change of inputs starts a new
run; the previous one is cancelled (exclusive workers) and its late results are
dropped. Views only format the result objects they are given; the views other than
the overview are built and mounted once the overview is ready (or when opened), so
the first screen does not wait for them.
"""
from __future__ import annotations

from pathlib import Path

from textual import on, work
from textual.app import App
from textual.binding import Binding
from textual.message import Message
from textual.widgets import ProgressBar, Static, TabbedContent, Tabs
from textual.worker import get_current_worker

from optbench.errors import InputError
from optbench.tui import firstview, prefs, session
from optbench.tui.dialogs.requests import ExportRequest, OpenRequest, Settings
from optbench.tui.screens.workbench import VIEWS, WorkbenchScreen

#: what the settings dialog hands back for "back to defaults"
RESET = "reset"

#: which table the export dialog proposes on each view
_VIEW_TABLE = {"overview": "report", "term": "expiries", "smile": "strikes",
               "richcheap": "expiries", "hedge": "hedge", "model": "report",
               "quality": "rejected"}

STEPS = session.STEPS
VIEW_KEYS = Binding.Group(description="views", compact=True)
EXPIRY_KEYS = Binding.Group(description="expiry", compact=True)


_ready_text = firstview.ready_text


class Progress(Message):
    def __init__(self, token: int, step: int, text: str) -> None:
        super().__init__()
        self.token, self.step, self.text = token, step, text


class Loaded(Message):
    """The chain is loaded and validated (the data-quality view can show it)."""

    def __init__(self, token: int, chain) -> None:
        super().__init__()
        self.token, self.chain = token, chain


class FirstView(Message):
    """The first run's overview and status as plain data (:mod:`optbench.tui.firstview`),
    sent ahead of the result objects they were formatted from; ``shown`` is set once
    they are painted."""

    def __init__(self, token: int, content: dict, shown=None) -> None:
        super().__init__()
        self.token, self.content, self.shown = token, content, shown


class Computed(Message):
    def __init__(self, token: int, comparison, headline, seconds: float) -> None:
        super().__init__()
        self.token, self.comparison, self.headline = token, comparison, headline
        self.seconds = seconds


class Headline(Message):
    """The overview's headline hedge estimate (None when the chain cannot give it)."""

    def __init__(self, token: int, estimate) -> None:
        super().__init__()
        self.token, self.estimate = token, estimate


class Checked(Message):
    """The out-of-sample check has finished: the comparison with its backtest."""

    def __init__(self, token: int, comparison) -> None:
        super().__init__()
        self.token, self.comparison = token, comparison


class Failed(Message):
    def __init__(self, token: int, error: str, stage: str = "open") -> None:
        super().__init__()
        self.token, self.error, self.stage = token, error, stage


#: the message for each kind of event of a run (:func:`optbench.tui.session.run_steps`)
_MESSAGES = {"progress": Progress, "loaded": Loaded, "headline": Headline, "checked": Checked,
             "first_view": FirstView,
             "computed": lambda token, comparison, seconds: Computed(token, comparison, None,
                                                                     seconds),
             "failed": lambda token, stage, error: Failed(token, error, stage)}

_describe = session.describe


class Workbench(App):
    """optbench: implied against forecast volatility, and what protection costs."""

    CSS_PATH = "app.tcss"
    TITLE = "optbench"
    #: screen classes for the layout: below 100 columns views stack and labels
    #: shorten; below 32 rows the header gives way and boxes lose their padding
    HORIZONTAL_BREAKPOINTS = [(0, "-narrow"), (100, "-medium"), (160, "-wide")]
    VERTICAL_BREAKPOINTS = [(0, "-short"), (32, "-tall")]

    #: the key bar shows these in order (the most used first, so that a narrow
    #: terminal still shows export, help and quit); the help screen lists them all
    BINDINGS = [
        *[Binding(key, f"view('{vid}')", title, id=f"view.{vid}", group=VIEW_KEYS) for vid, key, title in VIEWS],
        Binding("o", "open", "Open", id="app.open"),
        Binding("m", "settings", "Model & market", id="app.settings"),
        Binding("e", "export", "Export", id="app.export"),
        Binding("question_mark,f1", "help", "Help", key_display="?", id="app.help"),
        Binding("q", "quit", "Quit", id="app.quit"),
        Binding("u", "universe", "Universe", id="app.universe"),
        Binding("r", "recompute", "Recompute", id="app.recompute"),
        Binding("left_square_bracket", "step_expiry(-1)", "Previous expiry", key_display="[",
                id="app.prev_expiry", group=EXPIRY_KEYS),
        Binding("right_square_bracket", "step_expiry(1)", "Next expiry", key_display="]",
                id="app.next_expiry", group=EXPIRY_KEYS),
        Binding("t", "track", "Track record", id="app.track"),
        Binding("ctrl+r", "record", "Record this comparison in the record store (read by "
                "optbench track --store)", show=False, id="app.record"),
        Binding("escape", "leave_field", "Leave field", show=False, id="app.leave"),
    ]

    def __init__(self, inputs: session.Inputs, universe: Path | None = None,
                 workers: int | None = None, scheduler: str | None = None,
                 planner: prefs.PlannerState | None = None, notice: str | None = None,
                 first_run=None) -> None:
        super().__init__()
        self.inputs = inputs
        #: the first run, started before the app (``optbench open``), or None
        self.first_run = first_run
        #: the hedge planner's inputs (saved; the overview's headline follows them)
        self.planner = planner or prefs.PlannerState()
        #: a one-line notice for the user at start (e.g. a settings file that was bad)
        self.notice = notice
        #: a folder of scenario folders to screen (key u), and its last screen
        self.universe = Path(universe) if universe is not None else None
        self.universe_workers = workers
        #: a running Dask scheduler's address: the universe screen runs there instead
        self.universe_scheduler = scheduler
        self.universe_result = None
        self.comparison = None
        self.headline = None
        self.chain = None
        self.error: str | None = None
        self._token = 0
        self.last_export: Path | None = None
        self.last_compute_seconds: float | None = None
        #: the current run has ended: comparison shown and its model check done (or failed)
        self.checked = False
        self.headline_ready = False
        #: the overview's numbers of the current run are on screen (status "ready")
        self.ready = False
        #: the token of the run whose first view (plain data) is on screen, if any
        self._first_view_token: int | None = None
        #: the views still waiting for the current comparison ({"fit", "views"})
        self._views_waiting: dict | None = None

    # ----------------------------------------------------------------- set-up
    def get_default_screen(self) -> WorkbenchScreen:
        return WorkbenchScreen()

    def on_mount(self) -> None:
        self.sub_title = self.inputs.label
        if self.notice:
            self.notify(self.notice, title="Settings", severity="warning", timeout=10)
        # the first run starts when the workbench screen has mounted its widgets
        if self.universe is not None:
            self.call_after_refresh(self.action_universe)

    def view(self, view_id: str):
        """The view widget (it may still be waiting to mount; it draws when it does)."""
        return self.screen_stack[0].view(view_id)

    # ------------------------------------------------------------------ work
    def start_compute(self) -> None:
        self._token += 1
        self.error = None
        self.checked = False
        self.ready = False
        bar = self.screen_stack[0].query_one("#progress", ProgressBar)
        bar.update(total=STEPS, progress=0)
        self._status(f"opening {self.inputs.label} …")
        self.compute(self.inputs, self._token, self.planner)

    @work(thread=True, exclusive=True, group="compute", exit_on_error=False)
    def compute(self, inputs: session.Inputs, token: int,
                planner: prefs.PlannerState | None = None) -> None:
        """One run (:func:`optbench.tui.session.run_steps`), each step's result posted
        as a message; the first run relays the one ``optbench open`` started before
        the screen was built (:mod:`optbench.tui.firstrun`) when it has the same
        inputs."""
        worker = get_current_worker()
        first, self.first_run = self.first_run, None

        def emit(event: tuple) -> None:
            kind, *rest = event
            self.post_message(_MESSAGES[kind](token, *rest))

        if first is not None and first.inputs == inputs and first.planner == planner:
            first.relay(emit, lambda: worker.is_cancelled)
            return
        if first is not None:
            first.cancel()
        session.run_steps(inputs, planner, emit, lambda: worker.is_cancelled)

    _facts = staticmethod(firstview.facts)

    def _current(self, msg) -> bool:
        """A message of the current run while the app still has its screen (a run's
        result can arrive while the app shuts down, when there is no screen to draw
        on)."""
        return msg.token == self._token and bool(self.screen_stack)

    def _status(self, text: str) -> None:
        self.screen_stack[0].query_one("#status-text", Static).update(text)

    @on(Progress)
    def _progress(self, msg: Progress) -> None:
        if not self._current(msg):
            return
        self.screen_stack[0].query_one("#progress", ProgressBar).update(progress=msg.step)
        self._status(f"{msg.text} …")
        if self.comparison is None:
            self.view("overview").show_loading(f"{msg.text} …")

    @on(Loaded)
    def _loaded(self, msg: Loaded) -> None:
        if not self._current(msg):
            return
        self.chain = msg.chain
        if "quality" in self.screen_stack[0].views:   # else it shows the comparison's
            self.view("quality").show(session.quality_dict(msg.chain.quality),
                                      msg.chain.rejected, str(msg.chain.source))

    @on(FirstView)
    def _first_view(self, msg: FirstView) -> None:
        """The overview's numbers and the status "ready" from the first run's plain
        data; its result objects follow (Loaded, Computed, Headline) and are drawn by
        the same formatting, so the screen does not change when they come."""
        if not self._current(msg):
            return
        self._first_view_token = msg.token
        self.ready = True
        self.sub_title = msg.content["sub_title"]
        self.screen_stack[0].query_one("#progress", ProgressBar).update(progress=STEPS - 1)
        self._status(msg.content["status"])
        self.view("overview").show_content(msg.content["overview"])
        if msg.shown is not None:
            self.call_after_refresh(msg.shown.set)

    @on(Computed)
    def _computed(self, msg: Computed) -> None:
        if not self._current(msg):
            return
        self.comparison, self.headline = msg.comparison, msg.headline
        c = msg.comparison
        self.last_compute_seconds = msg.seconds
        self.checked = False
        self.headline_ready = False
        if self._first_view_token == msg.token:
            return   # its numbers are on screen already; the headline follows
        self.screen_stack[0].query_one("#progress", ProgressBar).update(progress=STEPS - 2)
        self.sub_title = firstview.sub_title(c)
        self.ready = False
        self._status(f"pricing the headline protection … · {self._facts(c)}")
        self.view("overview").show(c, None, True, True)

    #: the order in which the views other than the overview get the results and mount
    LATER_VIEWS = ("term", "smile", "richcheap", "model", "hedge", "quality")

    def _show_views(self, c) -> None:
        """After the next refresh (the overview's numbers are painted first): give the
        comparison to the views other than the overview and mount them, one view per
        refresh, so that the screen answers keys between them; a view whose tab is
        opened meanwhile gets its turn at once (:meth:`_give_view`)."""
        self._views_waiting = {"fit": c.fit, "views": list(self.LATER_VIEWS)}
        self.call_after_refresh(self._give_next_view)

    def _current_fit(self):
        waiting = self._views_waiting
        if not waiting or not self.screen_stack or self.comparison is None or \
                waiting["fit"] is not self.comparison.fit:
            return None   # nothing waits, or a newer run has replaced it
        return waiting

    def _give_view(self, view_id: str) -> None:
        """Give ``view_id`` the comparison now (with its check, if that has come) and
        mount it, if it is still waiting for its turn."""
        waiting = self._current_fit()
        if waiting is None or view_id not in waiting["views"]:
            return
        waiting["views"].remove(view_id)
        c = self.comparison
        if view_id == "quality":
            self.view("quality").show(c.quality, c.rejected, c.source)
        else:
            self.view(view_id).show(c)
        self.screen_stack[0].mount_views(view_id)

    def _give_next_view(self) -> None:
        waiting = self._current_fit()
        if waiting is None or not waiting["views"]:
            return
        self._give_view(waiting["views"][0])
        if waiting["views"]:
            self.call_after_refresh(self._give_next_view)

    def on_tabbed_content_tab_activated(self, event: TabbedContent.TabActivated) -> None:
        if event.pane.id:
            self._give_view(event.pane.id)

    @on(Headline)
    def _headline(self, msg: Headline) -> None:
        if not self._current(msg):
            return
        self.headline, self.headline_ready = msg.estimate, True
        self.ready = True
        c = self.comparison
        self.screen_stack[0].query_one("#progress", ProgressBar).update(progress=STEPS - 1)
        self._status(firstview.ready_status(c))
        self.view("overview").show(c, msg.estimate, False, True)
        self._show_views(c)

    @on(Checked)
    def _checked(self, msg: Checked) -> None:
        if not self._current(msg):
            return
        self.comparison = c = msg.comparison
        self.checked = True
        self.screen_stack[0].query_one("#progress", ProgressBar).update(progress=STEPS)
        self._status(f"{_ready_text(c)} · {self._facts(c)}")
        self.view("overview").show(c, self.headline, not self.headline_ready)
        self.view("model").show(c)

    def on_hedge_view_ready(self, msg) -> None:
        """The planner priced new inputs: the headline follows them, and they are saved."""
        # the same run (the model check replaces the comparison but keeps its fit),
        # and the app not shutting down (a late estimate finds no screen)
        if not self.screen_stack or self.comparison is None or msg.comparison is None or \
                msg.comparison.fit is not self.comparison.fit:
            return
        state = msg.inputs.state(msg.estimate.calendar_days)
        if state != self.planner:
            self.planner = state
            self.save_settings()
        self.headline, self.headline_ready = msg.estimate, True
        self.view("overview").show(self.comparison, msg.estimate, False, not self.checked)

    def save_settings(self) -> None:
        """Write the planner's inputs and the model choice to the user's settings file."""
        s = self.inputs.settings
        problem = prefs.save(self.planner, prefs.ModelChoice(s.model, s.dist, s.mean))
        if problem:
            self.notify(problem, title="Settings", severity="warning", timeout=8)

    def reset_settings(self) -> None:
        """Back to defaults: the model, the planner and the overview's headline; the
        settings file is removed. Market overrides (spot, dates) stay as set."""
        from dataclasses import replace
        problem = prefs.reset()
        if problem:
            self.notify(problem, title="Settings", severity="warning", timeout=8)
        self.planner = prefs.PlannerState()
        defaults = Settings()
        self.inputs = self.inputs.with_settings(replace(
            self.inputs.settings, model=defaults.model, dist=defaults.dist, mean=defaults.mean))
        self.view("hedge").fill(self.planner)
        self.notify("Model and planner back to their defaults.", title="Settings", timeout=4)
        self.start_compute()

    @on(Failed)
    def _failed(self, msg: Failed) -> None:
        if not self._current(msg):
            return
        if self.comparison is not None and msg.stage in ("headline", "check"):
            self.checked = True  # the run is over, without its last steps
            what = "Headline hedge" if msg.stage == "headline" else "Out-of-sample check"
            self.notify(msg.error, title=f"{what} failed", severity="warning")
            self._status(f"{what.lower()} failed: {msg.error}")
            if msg.stage == "headline":
                self._show_views(self.comparison)
            else:
                self.view("overview").show(self.comparison, self.headline,
                                           not self.headline_ready)
            return
        self.error = msg.error
        self._status(f"✗ {msg.error}")
        self.notify(msg.error, title="Could not open", severity="error", timeout=10)
        if self.comparison is None:
            self.view("overview").show_loading(
                f"✗ {msg.error}\n\nPress o to open another file, m to change the settings.")

    # --------------------------------------------------------------- actions
    def action_view(self, view_id: str) -> None:
        screen = self.screen_stack[0]
        tabs = screen.query_one("#views", TabbedContent)
        # focus on the tab bar: a widget focused in the old view would pull it back
        tabs.query_one(Tabs).focus()
        tabs.active = view_id

    @property
    def active_view(self) -> str:
        return self.screen_stack[0].query_one("#views", TabbedContent).active

    def action_step_expiry(self, step: int) -> None:
        """[ and ]: the previous / next expiry in the smile or rich / cheap view."""
        view = self.active_view
        if view == "smile":
            self.view("smile").action_step(step)
        elif view == "richcheap":
            self.view("richcheap").step_expiry(step)
        else:
            self.notify("[ and ] step through expiries in the Smile and Rich / cheap views",
                        timeout=3)

    def action_leave_field(self) -> None:
        """Escape: leave a text field so the view keys work again."""
        self.screen.set_focus(None)

    def action_recompute(self) -> None:
        self.start_compute()

    def action_open(self) -> None:
        from optbench.tui.dialogs.open_file import OpenDialog
        start = self.inputs.source.chain
        start = start.parent if start.is_file() else start.parent if start.exists() else Path.cwd()
        self.push_screen(OpenDialog(start), self._opened)

    def _opened(self, request: OpenRequest | None) -> None:
        if request is None:
            return
        self.inputs = session.Inputs(source=request, settings=self.inputs.settings)
        self.sub_title = self.inputs.label
        self.start_compute()

    def action_universe(self) -> None:
        """u: the screen of a universe; Enter on a row opens that underlying."""
        from optbench.screening.universe import find_scenarios, is_scenario
        from optbench.tui.dialogs.universe import UniverseScreen
        folder = self.universe
        if folder is None:   # the folder that holds the open scenario, if it holds several
            here = self.inputs.source.chain
            here = here if here.is_dir() else here.parent
            parent = here.parent
            if is_scenario(here) and sum(is_scenario(p) for p in parent.iterdir()) >= 2:
                folder = parent
        if folder is None:
            self.notify("No universe to screen: start with optbench open --universe FOLDER "
                        "(a folder of scenario folders).", severity="warning", timeout=8)
            return
        try:
            find_scenarios(folder)
        except InputError as err:
            self.notify(str(err), title="Cannot screen", severity="error", timeout=8)
            return
        if folder != self.universe:
            self.universe, self.universe_result = folder, None
        s = self.inputs.settings
        dialog = UniverseScreen(folder, self.universe_result, workers=self.universe_workers,
                                scheduler=self.universe_scheduler,
                                model=s.model, dist=s.dist, mean=s.mean)

        def chosen(request: OpenRequest | None) -> None:
            self.universe_result = dialog.result
            self._opened(request)
        self.push_screen(dialog, chosen)

    def action_settings(self) -> None:
        from optbench.tui.dialogs.settings import SettingsDialog
        c = self.comparison
        used = ({"rate": c.rate, "div_yield": c.div_yield, "spot": c.spot, "asof": c.asof,
                 "style": c.style, "multiplier": c.multiplier} if c is not None else {})
        sources = dict(getattr(c, "sources", None) or {}) if c is not None else {}
        self.push_screen(SettingsDialog(self.inputs.settings, used, sources), self._settled)

    def _settled(self, settings: Settings | str | None) -> None:
        if settings == RESET:
            self.reset_settings()
            return
        if settings is None or settings == self.inputs.settings:
            return
        model_changed = (settings.model, settings.dist, settings.mean) != (
            self.inputs.settings.model, self.inputs.settings.dist, self.inputs.settings.mean)
        self.inputs = self.inputs.with_settings(settings)
        if model_changed:
            self.save_settings()
        self.start_compute()

    def action_export(self) -> None:
        from optbench.tui.dialogs.export import ExportDialog
        from optbench.tui.export import TABLES
        if self.comparison is None:
            self.notify("Nothing to export yet: the comparison has not finished.",
                        severity="warning")
            return
        self.push_screen(ExportDialog(TABLES, _VIEW_TABLE.get(self.active_view, "report"),
                                      session.export_stem(self.comparison)), self._export)

    def _export(self, request: ExportRequest | None) -> None:
        if request is not None:
            self.write_export(request)

    @work(thread=True, exclusive=True, group="export", exit_on_error=False)
    def write_export(self, request: ExportRequest) -> None:
        from optbench.tui.export import export
        try:
            path = export(self.comparison, self.view("hedge").estimate, request,
                          expiry=self._expiry_on_screen())
        except Exception as err:
            self.call_from_thread(self.notify, _describe(err), title="Export failed",
                                  severity="error", timeout=10)
            return
        self.last_export = path
        self.call_from_thread(self.notify, f"wrote {path.resolve()}", title="Exported",
                              timeout=8)

    def _expiry_on_screen(self) -> str | None:
        if self.active_view == "smile":
            value = self.view("smile").query_one("#smile-expiry").value
            return value if isinstance(value, str) else None
        return self.view("richcheap").expiry

    def action_record(self) -> None:
        """Append the comparison on screen to the record store (each expiry's row), as
        ``optbench compare --record`` does."""
        if self.comparison is None:
            self.notify("Nothing to record yet: the comparison has not finished.",
                        severity="warning")
            return
        self._record(self.comparison, session.record_store_path())

    @work(thread=True, exclusive=True, group="record")
    def _record(self, comparison, path: Path) -> None:
        from optbench.track.store import record_comparison
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            record_comparison(path, comparison)
        except (InputError, OSError) as err:
            self.call_from_thread(self.notify, f"Not recorded: {err}", severity="error")
            return
        self.call_from_thread(
            self.notify, f"Recorded {len(comparison.expiries)} expiries of "
                         f"{comparison.underlying} {comparison.asof.isoformat()} in {path} "
                         f"(optbench track --store {path})")

    def action_track(self) -> None:
        from optbench.tui.views.track import TrackScreen
        self.push_screen(TrackScreen(self.inputs.source))

    def action_help(self) -> None:
        from optbench.tui.screens.help import HelpScreen
        from optbench.tui.widgets.table import SortableTable
        groups = [("everywhere", list(self.BINDINGS)
                   + [Binding("f1", "", "Help (the same as ?)"),
                      Binding("ctrl+p", "", "Command palette: find any command by name")]),
                  ("tables", list(SortableTable.BINDINGS)
                   + [Binding("enter", "", "Rich / cheap: show the expiry's strikes; "
                                           "Universe: open the row's underlying")]),
                  ("dialogs", [Binding("escape", "", "Cancel the dialog"),
                               Binding("ctrl+s", "", "Apply / export"),
                               Binding("ctrl+o", "", "Open what the file picker shows"),
                               Binding("tab", "", "Next field")])]
        self.push_screen(HelpScreen(groups))


def make_app(scenario_path: str | Path | None = None, history: str | Path | None = None, *,
             model: str | None = None, dist: str | None = None, mean: str | None = None,
             spot: float | None = None, asof=None, rate: float | None = None,
             div_yield: float | None = None, max_spread: float | None = None,
             hedge_paths: int | None = None, seed: int | None = 7,
             universe: str | Path | None = None, workers: int | None = None,
             style: str | None = None, multiplier: float | None = None,
             scheduler: str | None = None, first_run=None) -> Workbench:
    """The workbench on a chain file or scenario folder (default: the bundled demo).

    Parameters
    ----------
    scenario_path : chain file or scenario folder; None opens ``chains/ZPHX``.
    history : price history file, when the chain's folder has no ``history.csv``.
    model, dist, mean : the volatility model (as ``optbench compare``); None takes the
        saved choice (:mod:`optbench.tui.prefs`), else auto / t / constant.
    spot, asof, rate, div_yield : market overrides (decimals for rate and yield).
    max_spread : widest bid/ask spread kept, as a fraction of mid (loader filter).
    hedge_paths, seed : the simulation behind hedge estimates (default 20,000 paths,
        seed 7, as ``optbench hedge``).
    universe, workers : a folder of scenario folders to screen (the universe screen,
        key u, opens on start) and its local worker processes (default: the cores).
    style, multiplier : exercise style and contract multiplier of every option
        (default: the chain file's columns, else meta.toml, else european and 100).
    scheduler : address of a running Dask scheduler for the universe screen (in place
        of local processes).
    first_run : the first run already started on these inputs
        (:func:`optbench.tui.firstrun.start`); the app shows its results instead of
        computing them again (a run on other inputs is cancelled).
    """
    inputs, saved = session.build_inputs(
        scenario_path, history, model=model, dist=dist, mean=mean, spot=spot, asof=asof,
        rate=rate, div_yield=div_yield, max_spread=max_spread, hedge_paths=hedge_paths,
        seed=seed, style=style, multiplier=multiplier)
    return Workbench(inputs, universe=universe, workers=workers, scheduler=scheduler,
                     planner=saved.planner, notice=saved.notice, first_run=first_run)
