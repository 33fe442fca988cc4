"""The optbench terminal workbench (textual): the only package that imports textual.

``make_app(scenario_path, ...)`` builds the application; ``optbench open`` and
``optbench`` with no arguments run it. Every number on screen comes from the
core's result objects (:class:`optbench.analysis.results.Comparison` and
:class:`~optbench.analysis.results.HedgeEstimate`); the views only format them.
"""
from __future__ import annotations

__all__ = ["make_app"]


def __getattr__(name: str):
    if name == "make_app":
        from optbench.tui.app import make_app
        return make_app
    raise AttributeError(name)
