"""The workbench screen: a status line with progress, one tab per view, the footer."""
from __future__ import annotations

import importlib

from textual.app import ComposeResult
from textual.containers import Horizontal
from textual.screen import Screen
from textual.widgets import Footer, Header, ProgressBar, Static, TabbedContent, TabPane

from optbench.tui.views.overview import OverviewView
from optbench.tui.widgets.keybar import KeyBar

#: (tab id, key, title) in the order of the tabs
VIEWS: tuple[tuple[str, str, str], ...] = (
    ("overview", "1", "Overview"),
    ("term", "2", "Term structure"),
    ("smile", "3", "Smile"),
    ("richcheap", "4", "Rich / cheap"),
    ("hedge", "5", "Hedge planner"),
    ("model", "6", "Model check"),
    ("quality", "7", "Data quality"),
)

#: tab titles on a narrow terminal (below :data:`NARROW` columns); a view not listed
#: keeps its title
SHORT_TITLES = {"term": "Term", "richcheap": "Rich/cheap", "hedge": "Hedge",
                "model": "Model", "quality": "Data"}
NARROW = 100

#: where each view's class lives: the overview is imported with this module (it is the
#: first screen); the others, and the textual widgets they use (tables, plots, form
#: fields), only when the view is first needed
_VIEW_CLASSES = {"term": ("optbench.tui.views.term", "TermView"),
                 "smile": ("optbench.tui.views.smile", "SmileView"),
                 "richcheap": ("optbench.tui.views.richcheap", "RichCheapView"),
                 "hedge": ("optbench.tui.views.hedge", "HedgeView"),
                 "model": ("optbench.tui.views.model", "ModelView"),
                 "quality": ("optbench.tui.views.quality", "QualityView")}


class WorkbenchScreen(Screen):
    """Holds the views; the app feeds them results (``view(id).show(...)``).

    Only the overview is composed with the screen. The other views are built on
    first use (:meth:`view`) and mounted into their tabs by :meth:`mount_views` —
    which the app calls once the overview's numbers are on screen — or when their
    tab is opened first; a view draws whatever results it was given meanwhile.
    """

    def __init__(self) -> None:
        super().__init__()
        self.views = {"overview": OverviewView(id="view-overview")}
        self._mounted = {"overview"}

    def view(self, view_id: str):
        """The view widget, built (not yet mounted) on first use."""
        found = self.views.get(view_id)
        if found is None:
            module, name = _VIEW_CLASSES[view_id]
            cls = getattr(importlib.import_module(module), name)
            found = self.views[view_id] = cls(id=f"view-{view_id}")
        return found

    def compose(self) -> ComposeResult:
        yield Header(show_clock=False)
        with Horizontal(id="status"):
            yield ProgressBar(total=3, show_eta=False, id="progress")
            yield Static("", id="status-text")
        with TabbedContent(id="views", initial="overview"):
            for view_id, key, title in VIEWS:
                with TabPane(f"{key} {title}", id=view_id):
                    if view_id == "overview":
                        yield self.views[view_id]
        yield KeyBar()

    def mount_views(self, *view_ids: str) -> None:
        """Mount these views (default: all) into their tabs, if not mounted yet."""
        tabs = self.query_one("#views", TabbedContent)
        for view_id in view_ids or [v for v, _, _ in VIEWS]:
            if view_id not in self._mounted:
                self._mounted.add(view_id)
                tabs.get_pane(view_id).mount(self.view(view_id))

    def on_tabbed_content_tab_activated(self, event: TabbedContent.TabActivated) -> None:
        if event.pane.id:
            self.mount_views(event.pane.id)

    def on_mount(self) -> None:
        start = getattr(self.app, "start_compute", None)
        if start is not None:
            start()

    def on_resize(self, event) -> None:
        self.fit_tab_titles(event.size.width)

    def fit_tab_titles(self, width: int) -> None:
        """Short tab titles and a compact key bar below :data:`NARROW` columns, so every
        tab and the main keys show at once."""
        self.query_one(Footer).show_command_palette = width >= NARROW
        tabs = self.query_one("#views", TabbedContent)
        for view_id, key, title in VIEWS:
            shown = SHORT_TITLES.get(view_id, title) if width < NARROW else title
            tab = tabs.get_tab(view_id)
            if str(tab.label) != f"{key} {shown}":
                tab.label = f"{key} {shown}"
