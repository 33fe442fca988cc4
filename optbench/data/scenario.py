"""Loading a scenario: one underlying's chain, price history and meta data.

A scenario is a folder holding ``chain.csv`` (or ``chain.parquet``),
``history.csv`` and optionally ``meta.toml`` (``name``, ``code``, ``spot``,
``asof``, ``rate``, ``div_yield``, ``style``, ``multiplier``, ``holidays``,
``dividends``). A chain file whose folder holds ``history.csv`` works too.
``dividends`` are ``[[dividends]]`` tables with ``ex_date`` and ``amount`` (or the
name of a dividend CSV file beside meta.toml): :mod:`optbench.data.dividends`.

Precedence for each market input: the caller's override, then the chain file's
own column (the quote-time truth), then ``meta.toml``, then the default.
"""
from __future__ import annotations

import datetime as _dt
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from optbench.data.chain import OptionChain, chain_file_in, load_chain
from optbench.data.history import PriceHistory, load_history
from optbench.errors import InputError

_META_KEYS = {"name": "name", "code": "code", "spot": "spot", "asof": "asof",
              "as_of": "asof", "as-of": "asof", "rate": "rate", "div_yield": "div_yield",
              "dividend_yield": "div_yield", "style": "style", "multiplier": "multiplier",
              "holidays": "holidays"}


@dataclass(frozen=True, eq=False)
class Scenario:
    """One underlying ready for analysis.

    Attributes
    ----------
    path : Path
        The scenario folder.
    name, code : str
        Display name and code (from meta.toml, else the chain's underlying).
    chain : OptionChain
    history : PriceHistory
    meta : dict
        meta.toml as read (empty without one).
    holidays : tuple of datetime.date
        Exchange holidays for the trading-day calendar.
    dividends : DividendSchedule or None
        Known cash dividends (also on ``chain.dividends``), with their source.
    """

    path: Path
    name: str
    code: str
    chain: OptionChain
    history: PriceHistory
    meta: dict = field(default_factory=dict)
    holidays: tuple = ()
    dividends: object = None


def read_meta(path: str | Path) -> dict:
    """Read a scenario's ``meta.toml`` into canonical keys (``{}`` when absent).

    Unknown keys are kept as they are; ``holidays`` become ``datetime.date``.
    """
    path = Path(path)
    if path.is_dir():
        path = path / "meta.toml"
    if not path.is_file():
        return {}
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as err:
        raise InputError(path, f"not valid TOML ({str(err).splitlines()[0]})") from None
    meta = {_META_KEYS.get(k.lower(), k): v for k, v in data.items()}
    hol = meta.get("holidays", [])
    if not isinstance(hol, list):
        raise InputError(path, "holidays must be a list of dates")
    days = []
    for h in hol:
        if isinstance(h, _dt.datetime):
            h = h.date()
        if not isinstance(h, _dt.date):
            try:
                h = _dt.date.fromisoformat(str(h).strip())
            except ValueError:
                raise InputError(path, f"holiday {h!r} is not a YYYY-MM-DD date") from None
        days.append(h)
    meta["holidays"] = tuple(sorted(set(days)))
    return meta


def scenario_paths(path: str | Path) -> tuple[Path, Path, Path | None]:
    """``(chain file, history file, meta.toml or None)`` for a folder or chain file."""
    path = Path(path)
    if not path.exists():
        raise InputError(path, "no such file or folder")
    folder = path if path.is_dir() else path.parent
    chain = chain_file_in(path) if path.is_dir() else path
    history = None
    for name in ("history.csv", "history.parquet"):
        if (folder / name).is_file():
            history = folder / name
            break
    if history is None:
        raise InputError(folder, "no history.csv beside the chain (give --history)")
    meta = folder / "meta.toml"
    return chain, history, (meta if meta.is_file() else None)


def load_scenario(path: str | Path, **overrides) -> Scenario:
    """Load a scenario folder (or a chain file whose folder holds ``history.csv``).

    Parameters
    ----------
    path : str or Path
    **overrides
        Any keyword of :func:`optbench.data.chain.load_chain` (``spot``, ``asof``,
        ``rate``, ``div_yield``, ``style``, ``multiplier``, ``max_spread``,
        ``holidays``); they beat the file's columns, which beat meta.toml.
        ``history=PATH`` reads the history from another file; ``dividends=PATH`` (or
        a :class:`~optbench.data.dividends.DividendSchedule`) gives the cash dividends
        in place of meta.toml's.

    Returns
    -------
    Scenario
    """
    history_override = overrides.pop("history", None)
    dividends_override = overrides.pop("dividends", None)
    if history_override is not None:
        path = Path(path)
        chain_path = chain_file_in(path) if path.is_dir() else path
        if not chain_path.exists():
            raise InputError(chain_path, "no such file")
        history_path = Path(history_override)
        meta_file = chain_path.parent / "meta.toml"
        meta_path = meta_file if meta_file.is_file() else None
    else:
        chain_path, history_path, meta_path = scenario_paths(path)
    meta = read_meta(meta_path) if meta_path else {}
    holidays = overrides.pop("holidays", None)
    holidays = tuple(holidays) if holidays else meta.get("holidays", ())
    from optbench.data.dividends import resolve_dividends
    dividends = resolve_dividends(dividends_override, meta, meta_path)
    chain = load_chain(chain_path, meta=meta, holidays=holidays, dividends=dividends,
                       **overrides)
    history = load_history(history_path)
    code = str(meta.get("code") or chain.underlying or chain_path.parent.name)
    name = str(meta.get("name") or code)
    return Scenario(path=chain_path.parent, name=name, code=code, chain=chain,
                    history=history, meta=meta, holidays=chain.holidays,
                    dividends=chain.dividends)


# ---------------------------------------------------------------- the bundled demo
#: code of the bundled demo scenario (the invented Zephyr Composite Index)
DEMO_CODE = "ZPHX"


def checkout_root() -> Path | None:
    """The source checkout optbench runs from (editable install or ``python -m``),
    or None for an installed copy."""
    root = Path(__file__).resolve().parents[2]
    if (root / "pyproject.toml").is_file() and (root / "optbench").is_dir():
        return root
    return None


def packaged_demo() -> Path:
    """Where an installed optbench keeps its copy of the demo scenario:
    ``optbench/scenarios/ZPHX`` inside the package (the build copies ``chains/ZPHX``
    there; see ``setup.py``)."""
    return Path(__file__).resolve().parents[1] / "scenarios" / DEMO_CODE


def bundled_demo() -> Path:
    """The bundled demo scenario folder that commands open when given no chain.

    ``chains/ZPHX`` of the checkout optbench runs from, else the copy shipped inside
    the installed package. Raises :class:`InputError` when neither holds a chain
    (a damaged installation), naming both places.
    """
    root = checkout_root()
    candidates = ([root / "chains" / DEMO_CODE] if root is not None else []) + [packaged_demo()]
    for folder in candidates:
        if folder.is_dir() and any((folder / n).is_file()
                                   for n in ("chain.csv", "chain.parquet")):
            return folder
    raise InputError(candidates[0], "the bundled demo scenario is missing; write one with "
                                    "`optbench demo --out FOLDER` and open that folder")


def user_data_folder() -> Path:
    """optbench's folder in the user's data directory (``platformdirs``), where
    ``optbench demo`` writes when optbench is not running from a checkout."""
    from platformdirs import user_data_path
    return user_data_path("optbench", appauthor=False)
