"""The workbench screen: a status line with progress, one tab per view, the footer."""
from __future__ import annotations

from textual.app import ComposeResult
from textual.lazy import Lazy
from textual.containers import Horizontal
from textual.screen import Screen
from textual.widgets import Footer, Header, ProgressBar, Static, TabbedContent, TabPane

from optbench.tui.views.hedge import HedgeView
from optbench.tui.views.model import ModelView
from optbench.tui.views.overview import OverviewView
from optbench.tui.views.quality import QualityView
from optbench.tui.views.richcheap import RichCheapView
from optbench.tui.views.smile import SmileView
from optbench.tui.views.term import TermView

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

_VIEW_CLASSES = {"overview": OverviewView, "term": TermView, "smile": SmileView,
                 "richcheap": RichCheapView, "hedge": HedgeView, "model": ModelView,
                 "quality": QualityView}


class WorkbenchScreen(Screen):
    """Holds the views; the app feeds them results (``views[id].show(...)``).

    Only the overview mounts before the first paint; the other views mount right
    after it (they draw whatever results they were given meanwhile).
    """

    def __init__(self) -> None:
        super().__init__()
        self.views = {view_id: _VIEW_CLASSES[view_id](id=f"view-{view_id}")
                      for view_id, _, _ in VIEWS}

    def compose(self) -> ComposeResult:
        yield Header(show_clock=False)
        with Horizontal(id="status"):
            yield ProgressBar(total=3, show_eta=False, id="progress")
            yield Static("", id="status-text")
        with TabbedContent(id="views", initial="overview"):
            for view_id, key, title in VIEWS:
                with TabPane(f"{key} {title}", id=view_id):
                    view = self.views[view_id]
                    yield view if view_id == "overview" else Lazy(view)
        yield Footer()

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
