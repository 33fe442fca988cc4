"""Export of a table on screen or the full report, through optbench.report's
writers (the export formats of ``optbench compare`` and ``optbench hedge``).

No textual here: :func:`export` takes the results and an ExportRequest and writes
the file, returning the path it wrote; a path that is one of the comparison's input
files is refused. :func:`export_screen` does the same for the universe screen's table
with the writers of ``optbench screen``.
"""
from __future__ import annotations

from pathlib import Path

from optbench.errors import InputError
from optbench.report.files import StreamedFile, refuse_input_overwrite, write_payload
from optbench.tui.dialogs.requests import ExportRequest

#: the universe screen's table: (label in the dialog, formats offered)
UNIVERSE_TABLES: dict[str, tuple[str, tuple[str, ...]]] = {
    "universe": ("Universe screen: the ranked table, failures, the caution",
                 ("csv", "xlsx", "md", "html", "json")),
}

#: table id -> (label in the dialog, formats offered)
TABLES: dict[str, tuple[str, tuple[str, ...]]] = {
    "report": ("Full report: every table, figures, the caution", ("html", "xlsx", "md", "json")),
    "expiries": ("Per-expiry table (rich / fair / cheap)", ("csv", "json", "md", "xlsx")),
    "strikes": ("Per-strike table of the expiry on screen", ("csv", "json", "md")),
    "all-strikes": ("Per-strike table, every expiry", ("csv", "json")),
    "hedge": ("Hedge planner estimate (summary, legs, scenarios)", ("csv", "json", "md", "html", "xlsx")),
    "scenarios": ("Hedge scenario table", ("csv", "json")),
    "rejected": ("Rejected input rows with reasons", ("csv", "json")),
}


def _frame_json(frame) -> str:
    from optbench.analysis.results import plain
    from optbench.report.jsonout import dumps
    return dumps(plain(frame))


def render(comparison, estimate, request: ExportRequest, *, expiry: str | None = None) -> str | bytes:
    """The file contents for ``request`` (text or bytes for xlsx)."""
    from optbench.report import csv as rcsv
    from optbench.report import jsonout, markdown
    what, fmt = request.what, request.fmt
    if what not in TABLES:
        raise InputError("export", f"unknown table {what!r}")
    if fmt not in TABLES[what][1]:
        raise InputError("export", f"{TABLES[what][0]} cannot be written as {fmt}; "
                                   f"choose one of {', '.join(TABLES[what][1])}")
    if what in ("hedge", "scenarios"):
        if estimate is None:
            raise InputError("export", "no hedge estimate yet: fill in the hedge planner first")
        if what == "scenarios":
            return (rcsv.hedge_csv(estimate, "scenarios") if fmt == "csv"
                    else _frame_json(estimate.scenario_frame()))
        if fmt == "csv":
            return rcsv.hedge_csv(estimate, "summary")
        if fmt == "json":
            return jsonout.dumps(estimate, kind="hedge")
        if fmt == "md":
            return markdown.hedge_markdown(estimate)
        if fmt == "html":
            from optbench.report.html import hedge_html
            return hedge_html(estimate)
        from optbench.report.xlsx import hedge_xlsx
        return StreamedFile(lambda f: hedge_xlsx(estimate, f))
    if comparison is None:
        raise InputError("export", "nothing to export yet: the comparison has not finished")
    if what == "report":
        if fmt == "html":
            from optbench.report.html import comparison_html
            return comparison_html(comparison)
        if fmt == "xlsx":
            from optbench.report.xlsx import comparison_xlsx
            return StreamedFile(lambda f: comparison_xlsx(comparison, f))
        if fmt == "md":
            return markdown.comparison_markdown(
                comparison, strikes_for=[r.expiry for r in comparison.expiries])
        return jsonout.dumps(comparison, kind="compare")
    if what == "expiries":
        if fmt == "csv":
            return rcsv.comparison_csv(comparison, "expiries")
        if fmt == "md":
            return markdown.comparison_markdown(comparison)
        if fmt == "xlsx":
            from optbench.report.xlsx import comparison_xlsx
            return StreamedFile(lambda f: comparison_xlsx(comparison, f))
        return jsonout.dumps([row.to_dict() for row in comparison.expiries])
    if what == "strikes":
        if expiry is None:
            raise InputError("export", "no expiry on screen: pick one in the rich / cheap view")
        frame = comparison.strike_frame(expiry)
        if fmt == "csv":
            return rcsv.comparison_csv(comparison, "strikes", [expiry])
        if fmt == "md":
            return markdown.comparison_markdown(comparison, strikes_for=[expiry])
        return _frame_json(frame)
    if what == "all-strikes":
        return (rcsv.comparison_csv(comparison, "strikes") if fmt == "csv"
                else _frame_json(comparison.strike_frame()))
    # rejected rows
    frame = comparison.rejected
    if frame is None:
        import pandas as pd
        frame = pd.DataFrame(columns=["line", "reason", "detail"])
    if fmt == "csv":
        from optbench.report.notes import comparison_notes
        return rcsv.frame_csv(frame, comparison_notes(comparison, "rejected rows"))
    return _frame_json(frame)


def _inputs(comparison, extra=()) -> list[tuple[str, Path]]:
    found = []
    for key, value in (("chain", getattr(comparison, "source", None)),
                       ("history", getattr(comparison, "history_source", None)),
                       *extra):
        if value and Path(value).exists():
            found.append((key, Path(value)))
    return found


def export(comparison, estimate, request: ExportRequest, *, expiry: str | None = None,
           inputs=()) -> Path:
    """Write the export; returns the path. Errors are one-line InputErrors; a path
    that is an input (the chain, its scenario folder's files, ``inputs``: more
    ``(name, path)`` pairs) is refused."""
    refuse_input_overwrite(request.path, _inputs(comparison, inputs))
    payload = render(comparison, estimate, request, expiry=expiry)
    path = write_payload(request.path, payload)
    return path


def render_screen(result, fmt: str):
    """The universe screen's table in ``fmt`` (the writers of ``optbench screen``)."""
    from optbench.commands.screen import render as render_universe
    if fmt not in UNIVERSE_TABLES["universe"][1]:
        raise InputError("export", f"the universe table cannot be written as {fmt}; "
                                   f"choose one of {', '.join(UNIVERSE_TABLES['universe'][1])}")
    return render_universe(result, fmt)


def export_screen(result, request: ExportRequest) -> Path:
    """Write the universe screen's table; a file of the screened universe is refused."""
    refuse_input_overwrite(request.path, [("universe", Path(result.universe))]
                           if Path(result.universe).is_dir() else [])
    return write_payload(request.path, render_screen(result, request.fmt))
