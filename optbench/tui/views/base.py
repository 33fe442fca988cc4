"""What every view shares: it may be given results before it is mounted (views
other than the overview mount lazily, after the first paint), and draws them then."""
from __future__ import annotations


class Deferred:
    """Mixin for a view: ``show(...)`` draws now if mounted, else on mount."""

    _pending: tuple | None = None
    _ready: bool = False

    def show(self, *args) -> None:
        """Draw ``args`` after the next refresh, so that keys typed meanwhile are
        handled between one view's drawing and the next."""
        self._pending = args
        if self._ready:
            self.call_after_refresh(self._draw_pending, args)

    def _draw_pending(self, args: tuple) -> None:
        if self._pending is args:  # skip results that newer ones have replaced
            self.draw(*args)

    def on_mount(self) -> None:
        self._ready = True
        if self._pending is not None:
            self.draw(*self._pending)

    def draw(self, *args) -> None:  # pragma: no cover - each view defines it
        raise NotImplementedError
