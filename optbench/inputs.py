"""One reading of typed values for the command line and the workbench.

A value the workbench accepts, the command line accepts, and the other way round:
``--portfolio 25m`` and the planner's "Portfolio value" field both read ``25m`` as
25,000,000. Each parser takes the text as typed and the name of the field the user
sees (``--floor`` on the command line, ``Floor`` in the workbench) and returns the
value or raises :class:`~optbench.errors.InputError` naming that field and echoing
the text. Pure: no UI, no printing.

Readings
--------
- money: ``25m``, ``2.5bn``, ``750k``, ``10,000,000``, ``10 000 000``, ``1e7``
  (suffixes k = 10³, m / mm = 10⁶, bn / b = 10⁹; a leading currency sign is dropped).
- fractions of spot (floors): ``90%``, ``90`` and ``0.90`` all mean 0.90: a number
  above :data:`PERCENT_ABOVE` without a ``%`` is read as percent (a floor of 150 %
  of spot protects nothing; common practice for typed percentages).
- rates and yields (continuously compounded decimals): ``4%``, ``0.04`` and ``4``
  all mean 0.04: a magnitude of 1 or more without ``%`` is read as percent (a rate of
  100 % a year or more is far outside listed markets; common practice).
- dates: ISO ``2026-03-13``, and the other layouts the file loaders read
  (``03/13/2026`` month first; ``13/03/2026`` day first because only that fits —
  the rule :func:`optbench.data.parse.to_date` applies to a column).
"""
from __future__ import annotations

import datetime as _dt
import math

from optbench.errors import InputError

#: a fraction of spot typed as more than this (and without %) is read as percent
PERCENT_ABOVE = 1.5

_SUFFIXES = (("bn", 1e9), ("mm", 1e6), ("b", 1e9), ("m", 1e6), ("k", 1e3))
_CURRENCY = "$€£¥"


def _echo(text: str) -> str:
    return repr(str(text).strip())


def _finite(field: str, text: str, value: float, what: str) -> float:
    if not math.isfinite(value):
        raise InputError(field, f"not a finite {what}: {_echo(text)}")
    return value


def number(text: str, field: str) -> float:
    """A finite number: ``'1.3'``, ``'-0.5'``, ``'1,250.5'``."""
    t = str(text).strip().replace(",", "").replace("_", "")
    if not t:
        raise InputError(field, "empty: give a number")
    try:
        value = float(t)
    except ValueError:
        raise InputError(field, f"not a number: {_echo(text)}") from None
    return _finite(field, text, value, "number")


def positive(text: str, field: str) -> float:
    """A finite number above zero."""
    value = number(text, field)
    if value <= 0:
        raise InputError(field, f"must be positive, not {_echo(text)}")
    return value


def money(text: str, field: str, *, check: bool = True) -> float:
    """An amount of money, positive: ``'25m'``, ``'2.5bn'``, ``'10,000,000'``.

    ``check=False`` only reads the text (a caller that validates the value itself,
    such as :class:`~optbench.analysis.results.HedgeRequest`, says what is wrong)."""
    t = str(text).strip().lower().replace(",", "").replace("_", "").replace(" ", "")
    if not t:
        raise InputError(field, "empty: give an amount such as 25m or 10,000,000")
    t = t.lstrip(_CURRENCY)
    scale = 1.0
    for suffix, factor in _SUFFIXES:
        if t.endswith(suffix) and len(t) > len(suffix):
            t, scale = t[: -len(suffix)], factor
            break
    try:
        value = float(t) * scale
    except ValueError:
        raise InputError(field, f"not an amount of money: {_echo(text)} (give e.g. 25m, "
                                "2.5bn or 10,000,000)") from None
    _finite(field, text, value, "amount")
    if check and value <= 0:
        raise InputError(field, f"must be positive, not {_echo(text)}")
    return value


def _percent_text(text: str) -> tuple[str, bool]:
    t = str(text).strip()
    return (t[:-1].strip(), True) if t.endswith("%") else (t, False)


def fraction(text: str, field: str, *, check: bool = True) -> float:
    """A fraction of spot, in (0, 1]: ``'90'``, ``'90%'`` and ``'0.90'`` -> 0.90
    (``check=False``: read only, the range is the caller's to check)."""
    t, percent = _percent_text(text)
    try:
        value = number(t, field)
    except InputError:
        raise InputError(field, f"not a fraction of spot: {_echo(text)} (give e.g. 90%, "
                                "90 or 0.90)") from None
    if percent or value > PERCENT_ABOVE:
        value /= 100.0
    if check and not 0 < value <= 1:
        raise InputError(field, f"must be a fraction of spot above 0 and at most 100%, "
                                f"not {_echo(text)}")
    return value


def share(text: str, field: str) -> float:
    """A positive share such as a spread as a fraction of mid: ``'50%'``, ``'0.5'``,
    ``'50'`` -> 0.5 (read as :func:`fraction`, but not capped at 100 %)."""
    t, percent = _percent_text(text)
    try:
        value = number(t, field)
    except InputError:
        raise InputError(field, f"not a number or percentage: {_echo(text)}") from None
    if percent or value > PERCENT_ABOVE:
        value /= 100.0
    if value <= 0:
        raise InputError(field, f"must be positive, not {_echo(text)}")
    return value


def rate(text: str, field: str) -> float:
    """A continuously compounded rate or yield: ``'4%'``, ``'0.04'``, ``'4'`` -> 0.04."""
    t, percent = _percent_text(text)
    try:
        value = number(t, field)
    except InputError:
        raise InputError(field, f"not a rate: {_echo(text)} (give e.g. 4%, 4 or "
                                "0.04)") from None
    if percent or abs(value) >= 1:
        value /= 100.0
    return value


def date(text: str, field: str) -> _dt.date:
    """A date: ISO first, then the loaders' other layouts in their order (slash dates
    month first unless only day first fits)."""
    from optbench.data.parse import DATE_FORMATS
    t = str(text).strip()
    if not t:
        raise InputError(field, "empty: give a date such as 2026-03-13")
    for fmt in DATE_FORMATS:
        try:
            return _dt.datetime.strptime(t, fmt).date()
        except ValueError:
            continue
    raise InputError(field, f"not a date: {_echo(text)} (give YYYY-MM-DD, or MM/DD/YYYY)")


def whole(text: str, field: str, minimum: int = 0) -> int:
    """A whole number of at least ``minimum``."""
    t = str(text).strip().replace(",", "").replace("_", "")
    try:
        value = int(t)
    except ValueError:
        raise InputError(field, f"not a whole number: {_echo(text)}") from None
    if value < minimum:
        raise InputError(field, f"must be at least {minimum}, not {_echo(text)}")
    return value


def style(text: str, field: str) -> str:
    """An exercise style: ``european`` or ``american`` (also ``E``/``A``, ``EU``/``AM``)."""
    from optbench.data.parse import style_word
    t = str(text).strip()
    if not t:
        raise InputError(field, "empty: give european or american")
    return style_word(t, field)


def optional(parser, text: str, field: str):
    """``parser(text, field)``, or None for an empty field."""
    return None if not str(text or "").strip() else parser(text, field)
