"""Where each market input of a result came from, in one line for every view.

The loaders record a source per input (``Comparison.sources``,
``HedgeEstimate.sources``, the screen rows' ``sources``): ``caller`` (a command-line
option or an API argument), ``file`` (the chain file's own column), ``meta`` (the
scenario's ``meta.toml``) or ``default``. Views show them in the user's words.
"""
from __future__ import annotations

#: the loaders' source codes as the user reads them
SOURCE_WORDS = {"caller": "option", "file": "file", "meta": "meta.toml",
                "default": "default", "file+meta": "file, else meta.toml",
                "file+default": "file, else default"}

#: the inputs a result names, in display order
INPUTS = ("spot", "asof", "style", "multiplier", "rate", "div_yield")


def source_word(code: str | None) -> str:
    return SOURCE_WORDS.get(str(code), str(code)) if code else "file"


def sources_text(sources: dict) -> str:
    """``spot file, asof file, style meta.toml, ...`` (for a table cell or CSV column)."""
    text = ", ".join(f"{k} {source_word(sources.get(k))}" for k in INPUTS if k in sources)
    if sources.get("dividends"):   # a cash dividend schedule was used: name its file
        from pathlib import Path
        text += f", cash dividends {Path(str(sources['dividends'])).name}"
    return text


def inputs_line(result) -> str:
    """One line: spot, as-of date, style and multiplier used and where each came from,
    e.g. ``Inputs: spot 5,206.19 (file) · as of 2026-11-27 (file) · european
    (meta.toml) · multiplier 100 (meta.toml)``."""
    src = getattr(result, "sources", None) or {}
    style = getattr(result, "style", None) or "european"
    mult = getattr(result, "multiplier", None)
    parts = [f"spot {float(result.spot):,.2f} ({source_word(src.get('spot'))})",
             f"as of {result.asof.isoformat()} ({source_word(src.get('asof'))})",
             f"{style} ({source_word(src.get('style'))})"]
    if mult is not None:
        parts.append(f"multiplier {float(mult):g} ({source_word(src.get('multiplier'))})")
    if src.get("dividends"):
        parts.append(f"cash dividends ({src['dividends']})")
    return "Inputs: " + " · ".join(parts)
