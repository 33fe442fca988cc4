"""The key bar at the foot of the workbench: textual's footer, rebuilt only when the
keys it shows change.

textual's footer rebuilds all its keys after every signal that the screen's
bindings may have changed (focus moves, widgets mounting) — five times while the
workbench starts, mostly for the same keys, each costing a style update of every
key. This one rebuilds at most once per refresh, and only when the keys it would
show (key, description, enabled, tooltip) differ from those on screen: the same
keys, less work before the first numbers are on screen.
"""
from __future__ import annotations

from textual.widgets import Footer


class KeyBar(Footer):
    """The footer, its rebuilds after binding changes coalesced per refresh."""

    _rebuild_pending = False

    def bindings_changed(self, screen) -> None:
        self._bindings_ready = True
        if not screen.app.app_focus:
            return
        if self.is_attached and screen is self.screen and not self._rebuild_pending:
            self._rebuild_pending = True
            self.call_after_refresh(self._rebuild)

    def _shown(self) -> tuple:
        """What the keys would show now."""
        return (self.show_command_palette, self.compact, tuple(
            (binding.key, binding.description, binding.action, binding.show, enabled, tooltip)
            for _, binding, enabled, tooltip in self.screen.active_bindings.values()))

    async def _rebuild(self) -> None:
        self._rebuild_pending = False
        shown = self._shown()
        if shown != getattr(self, "_on_screen", None):
            self._on_screen = shown
            await self.recompose()
